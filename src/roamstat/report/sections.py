"""One animal's part of the report, built from a list of section builders.

A builder is ``builder(tables, animal) -> Fragment``: ``tables`` holds this
animal's rows of every deployment table (``summary``, ``fits``,
``null_tests``, ``residency``, ``ranges``, and any table a later stage adds,
such as ``motion_models`` or ``state_models``), ``animal`` is an
:class:`AnimalView`.  A builder returns "" and no figures when its tables are
absent, so adding a stage to the report is one entry appended to
:data:`SECTIONS`, with no change to the layout.

:func:`render_animal` runs every builder for one animal, writes its PNG files
and returns the section's HTML; it is a top-level function so the run's
worker pool can map it over animals (figures drawn where the analysis ran).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd

from roamstat.io.write import atomic_write
from roamstat.report import curves, figures, human
from roamstat.report.html import esc, figure, key_values, short_id, table

#: Fewest fixes for a home-range area the report states (Seaman et al. 1999 recommend at least 30
#: locations for kernel estimates; from memory). Fewer fixes show "insufficient".
RANGE_MIN_FIXES = 30

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
}
FIGURE_ERRORS = (ValueError, TypeError, IndexError, KeyError, OverflowError, ZeroDivisionError)


@dataclass
class Fragment:
    """A builder's output: HTML (already escaped) and figures ``(kind, caption, draw)``.

    ``draw`` is a function of no arguments returning a :class:`roamstat.report.figures.Picture` (or
    None: nothing to draw); it is called by :func:`render_animal`, and an error costs that figure only.
    """

    html: str = ""
    figures: list = field(default_factory=list)


@dataclass
class AnimalView:
    """What a builder may read about one animal besides its table rows."""

    animal_id: str
    result: object = None  # AnimalResult, or None when only tables exist
    track: pd.DataFrame | None = None  # x_m, y_m of kept fixes (masked frame when masked)
    rejected: pd.DataFrame | None = None
    masked: bool = False
    root: str = ""  # path from this animal's page to the output folder ("" or "../")
    table_format: str = "csv"


def range_extras(animal: AnimalView) -> dict:
    """The ranges stage's hand-off (``ranges.RangeExtras``) as a dict; {} when the stage did not run."""
    extras = getattr(animal.result, "range_extras", None)
    if extras is None:
        return {}
    return extras if isinstance(extras, dict) else vars(extras)


def _rows(tables: dict, key: str) -> pd.DataFrame:
    frame = tables.get(key)
    return frame if isinstance(frame, pd.DataFrame) else pd.DataFrame()


def _full(animal: AnimalView, stem: str, what: str) -> str:
    name = f"{stem}.{animal.table_format}"
    return f'<p class="meta">{esc(what)}: <a href="{esc(animal.root + name)}">{esc(name)}</a> (full precision).</p>'


def _note(text: str) -> str:
    return f'<p class="note">{esc(text)}</p>'


def _heading(title: str) -> str:
    return f"<h4>{esc(title)}</h4>"


def facts(tables: dict, animal: AnimalView) -> Fragment:
    """Tracking facts in biologists' units, with the tail decision."""
    summary = _rows(tables, "summary")
    if summary.empty:
        return Fragment()
    s = summary.iloc[0]
    pairs = [("species", s.get("species")),
             ("tracked", f"{human.significant(human.days(s.get('first_time'), s.get('last_time')))} days, "
                         f"{human.date(s.get('first_time'))} to {human.date(s.get('last_time'))} (UTC)"),
             ("fixes kept / rows rejected", f"{human.number(s.get('n_fixes'), 0)} / {human.number(s.get('n_rejected'), 0)}"),
             ("median fix interval", human.hours(s.get("median_dt_s"))),
             ("segments, steps", f"{human.number(s.get('n_segments'), 0)}, {human.number(s.get('n_steps'), 0)}"),
             ("path length", human.km(s.get("path_m"))), ("start-to-end distance", human.km(s.get("net_m"))),
             ("straightness (0–1)", human.significant(s.get("straightness"))),
             ("power-law tail", tail_text(s))]
    pairs = [(k, v) for k, v in pairs if not human.missing(v) and not str(v).startswith(human.DASH)]
    return Fragment(key_values(pairs))


def tail_text(row) -> str:
    """"supported", or "not supported: why" (from summary's ``tail_supported`` and ``tail_reason``)."""
    if "tail_supported" not in row or human.missing(row.get("tail_supported")):
        return "–"
    if bool(row["tail_supported"]):
        return "supported"
    reason = row.get("tail_reason")
    return "not supported" + (f": {reason}" if isinstance(reason, str) and reason else "")


def null_tests(tables: dict, animal: AnimalView) -> Fragment:
    """Observed against null end distance, p, q and verdict per null; the NSD envelopes."""
    rows = _rows(tables, "null_tests")
    fragment = Fragment()
    if len(rows):
        shown = pd.DataFrame({"null": rows.get("null_model")})
        if "observed_net_m" in rows:
            shown["observed (km)"] = human.column(rows["observed_net_m"], 1000.0)
        if {"null_median_m", "null_q025_m", "null_q975_m"} <= set(rows.columns):
            lo, med, hi = (human.column(rows[c], 1000.0) for c in ("null_q025_m", "null_median_m", "null_q975_m"))
            shown["null median (95 % range), km"] = [f"{m} ({a}–{b})" for m, a, b in zip(med, lo, hi)]
        for col, label in (("p_farther", "p farther"), ("p_closer", "p closer"), ("p_curve", "p curve"),
                           ("q_value", "q")):
            if col in rows:
                shown[label] = [human.probability(v) for v in rows[col]]
        if "verdict" in rows:
            shown["verdict"] = rows["verdict"].fillna("–").astype(str).to_numpy()
        if "note" in rows:
            shown["note"] = rows["note"].fillna("").astype(str).to_numpy()
        numeric = [c for c in shown.columns if c not in ("null", "verdict", "note")]
        fragment.html = _heading("Null-model tests") + table(shown, numeric=numeric) + _full(animal, "null_tests", "All columns")
    panels = curves.null_panels(getattr(animal.result, "null_curves", None))
    if panels:
        fragment.figures.append(("nsd", CAPTIONS["nsd"], lambda: figures.nsd_envelopes(panels)))
    return fragment


def fitted_models(tables: dict, animal: AnimalView) -> Fragment:
    """Step and turn models: parameters in prose, ΔAIC and weight, degenerate fits marked."""
    rows = _rows(tables, "fits")
    fragment = Fragment()
    if len(rows) and {"variable", "model"} <= set(rows.columns):
        variables = rows["variable"].astype(str)
        params = rows["params"] if "params" in rows else pd.Series([None] * len(rows))
        notes = []
        for p, v, note in zip(params, variables, rows.get("note", pd.Series([""] * len(rows)))):
            parts = [human.degenerate(p, v), note if isinstance(note, str) else ""]
            notes.append("; ".join(x for x in parts if x))
        shown = pd.DataFrame({"variable": variables.to_numpy(),
                              "set": rows.get("comparison", pd.Series([""] * len(rows))).astype(str).to_numpy(),
                              "model": rows["model"].astype(str).to_numpy(),
                              "parameters": [human.parameters(p, v) for p, v in zip(params, variables)]})
        if "delta_aic" in rows:
            shown["ΔAIC"] = human.column(rows["delta_aic"], significant=2)
        if "weight" in rows:
            shown["weight"] = [human.probability(w) for w in rows["weight"]]
        if "best" in rows:
            shown["best"] = ["yes" if b is True or str(b).lower() == "true" else "" for b in rows["best"]]
        shown["note"] = notes
        fragment.html = (_heading("Fitted step and turn models") + table(shown, numeric=["ΔAIC", "weight"])
                         + _full(animal, "fits", "Log-likelihoods, AIC, KS and Vuong statistics"))
    fitted = getattr(animal.result, "fitted", None)
    if fitted is not None and fitted.note:
        fragment.html = (fragment.html or _heading("Fitted step and turn models")) + _note(fitted.note)
    steps, turns = curves.step_data(fitted), curves.turn_data(fitted)
    if steps:
        fragment.figures.append(("steps", CAPTIONS["steps"],
                                 lambda: figures.step_histogram(steps["steps"], steps["curves"], steps["log_axes"])))
    if turns:
        fragment.figures.append(("turns", CAPTIONS["turns"], lambda: figures.turn_rose(turns["turns"], turns["curves"])))
    return fragment


def residency(tables: dict, animal: AnimalView) -> Fragment:
    """The residency class with its reason, and the NSD-through-time figure."""
    rows = _rows(tables, "residency")
    fragment = Fragment()
    if len(rows):
        r = rows.iloc[0]
        pairs = [("residency class", residency_text(r)),
                 ("range-study candidate", candidate_text(r, _rows(tables, "null_tests")))]
        if "delta_aic" in r and not human.missing(r["delta_aic"]):
            pairs.append(("ΔAIC to the next pattern", human.significant(r["delta_aic"])))
        if isinstance(r.get("note"), str) and r["note"]:
            pairs.append(("note", r["note"]))
        fragment.html = _heading("Residency") + key_values(pairs) + _full(animal, "residency", "Model AICs and parameters")
    data = curves.residency_data(getattr(animal.result, "residency_curve", None), getattr(animal.result, "residency", None))
    if data:
        fragment.figures.append(("residency", CAPTIONS["residency"],
                                 lambda: figures.residency_fit(data["t"], data["observed"], data["fitted"],
                                                               data["y_label"], data["t_label"])))
    return fragment


def home_ranges(tables: dict, animal: AnimalView) -> Fragment:
    """Areas with their intervals where given; "insufficient" below :data:`RANGE_MIN_FIXES` fixes."""
    rows = _rows(tables, "ranges")
    fragment = Fragment()
    if len(rows) and {"method", "level", "area_km2"} <= set(rows.columns):
        shown = pd.DataFrame({"method": rows["method"].astype(str).to_numpy(),
                              "level (%)": [human.number(v, 0) for v in rows["level"]],
                              "area (km²)": [area_text(r) for _, r in rows.iterrows()]})
        if "n_fixes" in rows:
            shown["fixes used"] = [human.number(v, 0) for v in rows["n_fixes"]]
        if "n_effective" in rows:
            shown["effective n"] = human.column(rows["n_effective"], significant=2)
        if "note" in rows:
            shown["note"] = rows["note"].fillna("").astype(str).to_numpy()
        fragment.html = (_heading("Home ranges") + table(shown, numeric=["level (%)", "area (km²)", "fixes used",
                                                                        "effective n"])
                         + _full(animal, "ranges", "Bandwidths, Schoener's ratio, area gain"))
    extras = range_extras(animal)
    if isinstance(extras.get("note"), str) and extras["note"].strip():
        fragment.html = (fragment.html or _heading("Home ranges")) + _note(extras["note"])
    contours = curves.contour_data(extras)
    if contours:
        points = curves.xy_table(extras.get("track_xy"))
        points = points if points is not None else pd.DataFrame({"x_m": [], "y_m": []})
        fragment.figures.append(("range", CAPTIONS["range"], lambda: figures.range_contours(
            points["x_m"], points["y_m"], contours, animal.masked)))
    area = curves.area_series(extras)
    if area:
        fragment.figures.append(("area", CAPTIONS["area"], lambda: figures.area_curve(area)))
    return fragment


def track_map(tables: dict, animal: AnimalView) -> Fragment:
    """The track over its rejected fixes."""
    extras = range_extras(animal)
    track = curves.xy_table(animal.track if animal.track is not None else extras.get("track_xy"))
    rejected = curves.xy_table(animal.rejected if animal.rejected is not None else extras.get("rejected_xy"))
    if track is None or not len(track):
        return Fragment()
    rx, ry = (rejected["x_m"], rejected["y_m"]) if rejected is not None else (None, None)
    return Fragment(figures=[("track", CAPTIONS["track"],
                              lambda: figures.track_map(track["x_m"], track["y_m"], rx, ry, animal.masked))])


def area_text(row) -> str:
    """An area in km² (with its interval when given), or "insufficient" under the fix threshold."""
    n = pd.to_numeric(pd.Series([row.get("n_fixes")]), errors="coerce").iloc[0]
    if not human.missing(n) and n < RANGE_MIN_FIXES:
        return f"insufficient ({int(n)} fixes; needs ≥ {RANGE_MIN_FIXES})"
    area = row.get("area_km2")
    if human.missing(area):
        return "–"
    text = human.significant(area)
    low, high = row.get("area_low_km2"), row.get("area_high_km2")
    if not human.missing(low) and not human.missing(high):
        text += f" ({human.significant(low)}–{human.significant(high)})"
    return text


def residency_text(row) -> str:
    """The residency class, or "insufficient" with the threshold when too few fixes were classed."""
    from roamstat.ranges.residency import MIN_FIXES

    n = pd.to_numeric(pd.Series([row.get("n_fixes")]), errors="coerce").iloc[0]
    if not human.missing(n) and n < MIN_FIXES:
        return f"insufficient ({int(n)} fixes; needs ≥ {MIN_FIXES})"
    pattern = row.get("pattern")
    return "–" if human.missing(pattern) else str(pattern)


def candidate_text(row, tests: pd.DataFrame) -> str:
    """"yes"/"no" with its reason (a stage's own reason column when it gives one)."""
    from roamstat.ranges.residency import RANDOM_WALK_NULLS

    value = row.get("range_study_candidate")
    if human.missing(value):
        return "–"
    consulted = next((n for n in RANDOM_WALK_NULLS if n in set(tests.get("null_model", []))), RANDOM_WALK_NULLS[-1]) \
        if isinstance(tests, pd.DataFrame) else RANDOM_WALK_NULLS[-1]
    for column in ("range_study_note", "range_study_reason", "candidate_reason"):
        if isinstance(row.get(column), str) and row[column]:
            return ("yes: " if bool(value) else "no: ") + row[column]
    pattern = residency_text(row)
    if pattern.startswith("insufficient"):
        return f"no: {pattern}"  # too few fixes for a residency class: no range-study claim either
    if bool(value):
        return f"yes: {pattern} pattern, not farther than the {consulted} null"
    if pattern not in ("resident", "sedentary"):
        return f"no: {pattern} pattern"
    return f"no: farther than the {consulted} null"


#: The per-animal sections in page order; later stages append ``(name, builder)``.
SECTIONS: list[tuple[str, Callable[[dict, AnimalView], Fragment]]] = [
    ("facts", facts), ("track", track_map), ("null tests", null_tests), ("residency", residency),
    ("home ranges", home_ranges), ("fitted models", fitted_models),
]


def _register_stage_sections() -> None:
    """Sections of the later stages, each one entry (their modules import this one)."""
    from roamstat.report import motion_figures, states_figures

    SECTIONS.extend([("motion models", motion_figures.section), ("behavioural states", states_figures.section)])


_register_stage_sections()


@dataclass
class AnimalJob:
    """The picklable unit of report work for one animal."""

    view: AnimalView
    tables: dict
    name: str  # safe name of the animal: stem of its figure files; the section's id is "a-<name>"
    figures_dir: Path
    sentence: str = ""


def render_animal(job: AnimalJob) -> str:
    """Run every section builder for one animal, write its figures, return the section's HTML."""
    view = job.view
    parts = [f'<section class="animal" id="a-{esc(job.name)}"><h3>Animal {esc(short_id(view.animal_id))}</h3>']
    if short_id(view.animal_id) != view.animal_id:
        parts.append(f"<details><summary>full id</summary><code>{esc(view.animal_id)}</code></details>")
    if job.sentence:
        parts.append(f'<p class="says">{esc(job.sentence)}</p>')
    shown = []
    for _, builder in SECTIONS:
        fragment = builder(job.tables, view)
        parts.append(fragment.html)
        for kind, caption, draw in fragment.figures:
            try:
                picture = draw()
            except FIGURE_ERRORS as error:
                # Odd data must cost one figure, not the report; the reason is shown in its place.
                shown.append(f'<p class="note">{esc(caption)} Figure not drawn ({type(error).__name__}: {esc(error)})</p>')
                continue
            if picture is None:  # the builder found nothing to draw (e.g. too few lags for a semi-variogram)
                continue
            name = f"{job.name}-{kind}.png"
            atomic_write(job.figures_dir / name, picture.png)
            shown.append(figure(view.root + "figures/" + name, caption, picture.key))
    if shown:
        parts.append('<h4>Figures</h4><div class="figures">' + "".join(shown) + "</div>")
    parts.append("</section>")
    return "".join(parts)
