"""``roamstat inspect``: what roamstat detects in the files, changing nothing."""

from __future__ import annotations

import pandas as pd

from roamstat.config import Config
from roamstat.io.read import describe_inputs
from roamstat.io.times import unused_zone_note
from roamstat.ranges.estimate import MIN_FIXES as MIN_RANGE_FIXES
from roamstat.ranges.residency import MIN_FIXES as MIN_RESIDENCY_FIXES
from roamstat.screen import QUALITY_ORDER

# Below half of the intervals on the nominal schedule, step-based nulls need --resample or a
# continuous-time null (judgement, no source).
_IRREGULAR = 0.5


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
    assert loaded.summary is not None, "load() with steps builds the summary"
    summary = loaded.summary.set_index("animal_id")
    for aid, crs in loaded.projections.items():
        row = summary.loc[aid] if aid in summary.index else None
        schedule = "" if row is None else (
            f"nominal interval {_duration(row['nominal_dt_s'])}, regularity {row['regularity']:.0%}, "
            f"{int(row['n_segments'])} segment(s); "
        )
        lines.append(f"  {aid}: {schedule}frame {_short_crs(crs)}")
    advice = advise(loaded.read.rows, loaded.summary, cfg)
    if advice:
        lines += ["", "Advice:"] + [f"  {line}" for line in advice]
    return "\n".join(lines)


def advise(rows: pd.DataFrame, summary: pd.DataFrame, cfg: Config) -> list[str]:
    """Suggestions for the run: quality classes, irregular schedules, animals with too few fixes.

    Satellite location classes (3, 2, 1, 0, A, B, Z, best to worst) follow the
    Argos convention; dropping B and Z, whose errors reach several km, is
    common practice (no source) and a starting point, not a rule.
    """
    out = []
    quality = rows["quality"].dropna().astype(str) if "quality" in rows else pd.Series([], dtype=str)
    if len(quality):
        counts = quality.value_counts()
        ordered = [q for q in reversed(QUALITY_ORDER) if q in counts.index] + \
            sorted(q for q in counts.index if q not in QUALITY_ORDER)
        out.append("fixes per quality class: " + ", ".join(f"{q} {int(counts[q])}" for q in ordered))
        poor = [q for q in ("B", "Z") if q in counts.index]
        if poor and cfg.min_quality is None:
            kept = int(counts[[q for q in counts.index if q not in ("B", "Z")]].sum())
            out.append(f"suggested: --min-quality A drops classes {' and '.join(poor)} (errors of several km); "
                       f"it keeps {kept} of {int(counts.sum())} fixes")
    irregular = summary[summary["regularity"] < _IRREGULAR] if "regularity" in summary else summary.iloc[:0]
    if len(quality) or len(irregular):
        which = f"{len(irregular)} of {len(summary)} animals have under {_IRREGULAR:.0%} of intervals on " \
                "schedule; " if len(irregular) else ""
        out.append(f"{which}the crw, shuffle and levy nulls assume regular, accurately located steps: for "
                   "irregular, error-prone fixes use the continuous-time null (--null ctcrw), or --resample "
                   "onto a regular grid first")
    few = summary[summary["n_fixes"] < max(MIN_RESIDENCY_FIXES, cfg.min_steps_test)] if "n_fixes" in summary \
        else summary.iloc[:0]
    for _, row in few.iterrows():
        n = int(row["n_fixes"])
        lacking = ["null-walk verdicts (insufficient)", "residency class"]
        if n < MIN_RANGE_FIXES:
            lacking.append("home ranges")
        out.append(f"{row['animal_id']}: only {n} fixes kept; too few for {', '.join(lacking)}")
    return out


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
