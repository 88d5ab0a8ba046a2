"""report.html and figures/: the deployment overview, one section per animal, methods, cautions.

Entry point :func:`write_report`.  Figures are PNG files named
``figures/<safe_name(animal_id)>-<kind>.png``; every file goes through
:func:`roamstat.io.write.atomic_write`.

Inputs beyond the data contract that the report reads when present
(and skips when absent):

- ``tables["fixes"]``: kept fixes with ``animal_id, x_m, y_m`` in time order
  (masked coordinates when ``cfg.mask_locations``) for the track map (else
  ``range_extras["track_xy"]``); the range outlines are drawn over
  ``range_extras["track_xy"]``, which shares their frame;
- ``tables["rejected_xy"]`` (or ``range_extras["rejected_xy"]``, or
  ``x_m, y_m`` columns in ``tables["rejected"]``): rejected fixes with valid
  coordinates, drawn faintly;
- the curve dicts of :class:`~roamstat.results.AnimalResult`, read as
  described in :mod:`roamstat.report.curves`.
"""

from __future__ import annotations

from pathlib import Path

import pandas as pd

from roamstat.io.write import atomic_write
from roamstat.report import curves, figures, motion_figures, states_figures
from roamstat.report.html import esc, figure, key_values, page, short_id, table
from roamstat.report.overview import (animal_ids, animal_rows, comparison_table, null_models,
                                      quality_table)
from roamstat.report.slug import safe_name, safe_names
from roamstat.report.text import CAUTIONS, MASKED_NOTE, REFERENCES, UNMASKED_NOTE, methods_html

__all__ = ["write_report", "safe_name", "safe_names"]

#: Animals beyond this many get table rows but no section or figures, so a
#: deployment of thousands of tiny animals still reports in seconds.
MAX_ANIMAL_SECTIONS = 60

CAPTIONS = {
    "track": "Track in planar coordinates: start ▲, end ■, rejected fixes × (faint).",
    "steps": "Step lengths (histogram, as a density) with the fitted densities; a tail law is scaled "
             "by the share of steps it describes.",
    "turns": "Turning angles (rose; ahead at the top, right turns to the right) with the fitted turn model.",
    "nsd": "Observed net squared displacement (NSD) against each null model: pointwise envelope of the "
           "null walks (grey) and their mean (dashed).",
    "residency": "Residency: observed net squared displacement through time and the fitted NSD models.",
    "range": "Home-range outlines (MCP, KDE isopleths) over the fixes.",
    "area": "Area–sample-size curve: range area against the number of fixes used; an estimate that has "
            "not levelled off is an underestimate (Harris et al. 1990).",
    **states_figures.CAPTIONS,
}


def write_report(out_dir: Path, tables: dict[str, pd.DataFrame], animals: list, run_info: dict, cfg) -> Path:
    """Write ``out_dir/report.html`` and its figures.

    Parameters
    ----------
    out_dir : Path
        Output folder (created if needed); figures go to ``out_dir/figures``.
    tables : dict of DataFrame
        ``summary``, ``rejected``, ``fits``, ``null_tests``, ``residency``,
        ``ranges`` (any may be missing or empty), and optionally ``fixes``
        and ``rejected_xy`` (see the module docstring).
    animals : list of AnimalResult
        Per-animal results in id order.
    run_info : dict
        ``version, command_line, seed, n_read, n_kept, n_rejected,
        projections, masked, inputs``.
    cfg : Config
        Uses ``mask_locations`` and ``nulls``.

    Returns
    -------
    Path
        The path of report.html.
    """
    out_dir = Path(out_dir)
    masked = bool(getattr(cfg, "mask_locations", False) or run_info.get("masked"))
    ids = animal_ids(tables, animals)
    names = safe_names(ids)
    by_id = {str(a.animal_id): a for a in animals}
    nulls = null_models(tables.get("null_tests"), tuple(getattr(cfg, "nulls", ())))
    fixes = _grouped(tables.get("fixes"))
    rejected_xy = _grouped(_rejected_coordinates(tables))

    sections = []
    for animal_id in ids[:MAX_ANIMAL_SECTIONS]:
        result = by_id.get(animal_id)
        drawn = _draw_animal(result, fixes.get(animal_id), rejected_xy.get(animal_id), masked) if result else []
        written = []
        for kind, png in drawn:
            if isinstance(png, bytes):
                name = f"{names[animal_id]}-{kind}.png"
                atomic_write(out_dir / "figures" / name, png)
                written.append((kind, "figures/" + name))
            else:
                written.append((kind, png))
        motion = motion_figures.animal_html(out_dir, names[animal_id], animal_id, result, tables, masked)
        sections.append(_animal_section(animal_id, names[animal_id], result, tables, written, motion))

    body = [_header(run_info, masked, len(ids)),
            _overview(tables, ids, nulls, names),
            "<h2 id=\"animals\">Animals</h2>"]
    if len(ids) > MAX_ANIMAL_SECTIONS:
        body.append(f'<p class="note">{esc(len(ids))} animals: sections and figures are shown for the first '
                    f"{MAX_ANIMAL_SECTIONS} in id order; every animal is in the tables above and in the CSV "
                    "outputs.</p>")
    body.extend(sections)
    body.append(_methods(nulls or tuple(getattr(cfg, "nulls", ()))))
    body.append('<h2 id="cautions">Cautions</h2>' + CAUTIONS)
    body.append(f'<p class="note">{esc(MASKED_NOTE if masked else UNMASKED_NOTE)}</p>')
    path = out_dir / "report.html"
    atomic_write(path, page("roamstat report", "".join(body)))
    return path


def _grouped(frame: pd.DataFrame | None) -> dict:
    if frame is None or frame.empty or not {"animal_id", "x_m", "y_m"} <= set(frame.columns):
        return {}
    return {str(k): v for k, v in frame.groupby(frame["animal_id"].astype(str), sort=False)}


def _rejected_coordinates(tables: dict) -> pd.DataFrame | None:
    for frame in (tables.get("rejected_xy"), tables.get("rejected")):
        if isinstance(frame, pd.DataFrame) and {"animal_id", "x_m", "y_m"} <= set(frame.columns):
            return frame
    return None


def _range_extras(result) -> dict:
    """The ranges stage's hand-off (``ranges.RangeExtras``, or a plain dict) as a dict."""
    extras = result.range_extras or {}
    return extras if isinstance(extras, dict) else vars(extras)


def _draw_animal(result, fixes_a, rejected_a, masked: bool) -> list:
    """[(kind, png bytes or a note why the figure is missing)] for one animal."""
    extras = _range_extras(result)
    track = curves.xy_table(fixes_a) if fixes_a is not None else curves.xy_table(extras.get("track_xy"))
    rejected = curves.xy_table(rejected_a) if rejected_a is not None else curves.xy_table(extras.get("rejected_xy"))
    jobs = []
    if track is not None and len(track):
        rx, ry = (rejected["x_m"], rejected["y_m"]) if rejected is not None else (None, None)
        jobs.append(("track", lambda: figures.track_map(track["x_m"], track["y_m"], rx, ry, masked)))
    steps = curves.step_data(result.fitted)
    if steps:
        jobs.append(("steps", lambda: figures.step_histogram(steps["steps"], steps["curves"], steps["log_axes"])))
    turns = curves.turn_data(result.fitted)
    if turns:
        jobs.append(("turns", lambda: figures.turn_rose(turns["turns"], turns["curves"])))
    nsd = curves.null_panels(result.null_curves)
    if nsd:
        jobs.append(("nsd", lambda: figures.nsd_envelopes(*nsd)))
    residency = curves.residency_data(result.residency_curve, result.residency)
    if residency:
        jobs.append(("residency", lambda: figures.residency_fit(residency["t"], residency["observed"],
                                                                residency["fitted"], residency["y_label"],
                                                                residency["t_label"])))
    contours = curves.contour_data(extras)
    if contours:
        # Outlines come in the ranges stage's own (equal-area, possibly masked) frame: draw its fixes with them.
        points = curves.xy_table(extras.get("track_xy"))
        points = points if points is not None else pd.DataFrame({"x_m": [], "y_m": []})
        jobs.append(("range", lambda: figures.range_contours(points["x_m"], points["y_m"], contours, masked)))
    area = curves.area_series(extras)
    if area:
        jobs.append(("area", lambda: figures.area_curve(area)))
    jobs += [(kind, draw) for kind, _, draw in states_figures.state_jobs(result.states, fixes_a, masked)]
    drawn = []
    for kind, draw in jobs:
        try:
            drawn.append((kind, draw()))
        except (ValueError, TypeError, IndexError, KeyError, OverflowError) as error:
            # Odd data must cost one figure, not the report; the reason is shown in its place.
            drawn.append((kind, f"figure not drawn ({type(error).__name__}: {error})"))
    return drawn


def _header(run_info: dict, masked: bool, n_animals: int) -> str:
    facts = [("roamstat version", run_info.get("version")), ("command line", run_info.get("command_line")),
             ("seed", run_info.get("seed")), ("animals", n_animals), ("rows read", run_info.get("n_read")),
             ("fixes kept", run_info.get("n_kept")), ("rows rejected", run_info.get("n_rejected")),
             ("locations masked", masked)]
    inputs = "".join(f"<li><code>{esc(p)}</code></li>" for p in run_info.get("inputs") or [])
    parts = ["<h1>roamstat report</h1>", '<nav><a href="#overview">Deployment overview</a> · '
             '<a href="#quality">Data quality</a> · <a href="#animals">Animals</a> · '
             '<a href="#methods">Methods</a> · <a href="#cautions">Cautions</a></nav>',
             '<p class="caution">Statistical verdicts support, not replace, expert judgement. '
             'Exact locations of sensitive species can enable poaching or disturbance: read the '
             '<a href="#cautions">cautions</a> before sharing.</p>',
             key_values(facts)]
    if inputs:
        parts.append(f'<p class="meta">Input files:</p><ul class="meta">{inputs}</ul>')
    projections = run_info.get("projections") or {}
    if projections and not masked:
        rows = "".join(f"<li>{esc(short_id(k))}: <code>{esc(v)}</code></li>" for k, v in projections.items())
        parts.append(f"<details><summary>Projection per animal</summary><ul class=\"meta\">{rows}</ul></details>")
    return "".join(parts)


def _overview(tables: dict, ids: list[str], nulls: list[str], names: dict) -> str:
    links = {i: "a-" + names[i] for i in ids[:MAX_ANIMAL_SECTIONS]}
    comparison = comparison_table(tables, ids, nulls)
    in_state = states_figures.time_in_state(tables.get("state_models"))
    if in_state:
        comparison["time in state"] = comparison["animal_id"].map(in_state)
    comparison = comparison.rename(columns={"animal_id": "animal"})
    quality = quality_table(tables.get("rejected"))
    return ('<h2 id="overview">Deployment overview</h2>'
            '<p class="meta">Verdicts at the run\'s alpha on Benjamini–Hochberg q-values, per null model: '
            "<em>farther</em> / <em>closer</em> than the null walk ends up, <em>consistent</em> with it, or "
            "<em>insufficient</em> data.</p>"
            + table(comparison, links=links, link_column="animal")
            + '<h2 id="quality">Data quality: rejected rows by reason</h2>' + table(quality))


def _animal_section(animal_id: str, name: str, result, tables: dict, written: list, motion: str = "") -> str:
    parts = [f'<section class="animal" id="a-{esc(name)}"><h3>Animal {esc(short_id(animal_id))}</h3>']
    if short_id(animal_id) != animal_id:
        parts.append(f"<details><summary>full id</summary><code>{esc(animal_id)}</code></details>")
    notes = [result.fitted.note if result and result.fitted else ""]
    notes += [str(result.residency.get("note", ""))] if result and isinstance(result.residency, dict) else []
    notes += [str(_range_extras(result).get("note", ""))] if result else []
    for note in notes:
        if note and note.strip():
            parts.append(f'<p class="note">{esc(note)}</p>')
    summary = animal_rows(tables.get("summary"), animal_id)
    if len(summary):
        parts.append(key_values(summary.iloc[0].items()))
    for key, title in (("fits", "Fitted models"), ("state_models", "Behavioural states (hidden Markov models)"),
                       ("null_tests", "Null-model tests"),
                       ("residency", "Residency"), ("ranges", "Home ranges")):
        rows = animal_rows(tables.get(key), animal_id)
        if len(rows):
            parts.append(f"<h4>{esc(title)}</h4>" + table(rows))
    figs = []
    for kind, src in written:
        if src.startswith("figures/"):
            figs.append(figure(src, CAPTIONS[kind]))
        else:
            figs.append(f'<p class="note">{esc(CAPTIONS[kind])} {esc(src)}</p>')
    if figs:
        parts.append('<div class="figures">' + "".join(figs) + "</div>")
    parts.append(motion)  # motion models, smoothed track, semi-variogram, areas (report/motion_figures.py)
    parts.append("</section>")
    return "".join(parts)


def _methods(nulls) -> str:
    refs = "".join(f"<li>{r}</li>" for r in REFERENCES)
    return f'<h2 id="methods">Methods</h2>{methods_html(nulls)}<h3>References</h3><ul>{refs}</ul>'
