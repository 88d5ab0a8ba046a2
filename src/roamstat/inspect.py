"""``roamstat inspect``: what roamstat detects in the files, changing nothing."""

from __future__ import annotations

from roamstat.config import Config
from roamstat.io.read import describe_inputs
from roamstat.io.times import unused_zone_note


def inspect_text(paths, cfg: Config) -> str:
    """The detected mapping, animals and schedule, plus the screening and projection outcome."""
    from roamstat.pipeline import load
    from roamstat.rows import n_observed

    loaded = load(paths, cfg)
    lines = [describe_inputs(loaded.read)]
    if note := unused_zone_note(cfg.tz, loaded.read.tz_note):
        lines.append(note)
    lines += ["", "After screening and projection:"]
    lines.append(f"  rows read {loaded.read.n_read}, kept {n_observed(loaded.fixes)}, rejected {len(loaded.rejected)}")
    if len(loaded.rejected):
        for code, count in loaded.rejected["reason_code"].value_counts().sort_index().items():
            lines.append(f"    {code}: {count}")
    summary = loaded.summary.set_index("animal_id")
    for aid, crs in loaded.projections.items():
        row = summary.loc[aid] if aid in summary.index else None
        schedule = "" if row is None else (
            f"nominal interval {_duration(row['nominal_dt_s'])}, regularity {row['regularity']:.0%}, "
            f"{int(row['n_segments'])} segment(s); "
        )
        lines.append(f"  {aid}: {schedule}frame {_short_crs(crs)}")
    return "\n".join(lines)


def _duration(seconds: float) -> str:
    if seconds != seconds:  # NaN
        return "n/a"
    for unit, size in (("d", 86400), ("h", 3600), ("min", 60)):
        if seconds >= size:
            return f"{seconds / size:.3g} {unit}"
    return f"{seconds:.3g} s"


def _short_crs(crs: str) -> str:
    text = str(crs)
    return text if len(text) <= 120 else text[:117] + "..."
