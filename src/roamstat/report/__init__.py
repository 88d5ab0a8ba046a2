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

import gc
import math
from pathlib import Path
from typing import Any

import pandas as pd

from roamstat.io.write import atomic_write
from roamstat.report import human
from roamstat.report.html import esc, key_values, page, search_script, short_id, table
from roamstat.report.overview import (OPTIONAL_COLUMNS, animal_ids, disagreement, motion_best, null_models,
                                      preferred_areas, quality_table, ratio_text, reference_null, sentence)
from roamstat.report.states_figures import time_in_state
from roamstat.report.sections import (SECTIONS, AnimalJob, AnimalView, area_text, candidate_text,
                                      render_animal, residency_text)
from roamstat.report.slug import safe_name, safe_names
from roamstat.report.text import CAUTIONS, MASKED_NOTE, REFERENCES, UNMASKED_NOTE, legend_html, methods_html

__all__ = ["write_report", "safe_name", "safe_names", "SECTIONS", "PAGES_FROM"]

#: From this many animals on, each animal gets its own page (animals/<name>.html), linked from the
#: overview; below it every section is in report.html (display choice, no source).
PAGES_FROM = 25
#: Tables handed to each animal's section builders (its rows only); later stages add theirs by name.
PER_ANIMAL_TABLES = ("summary", "fits", "null_tests", "residency", "ranges", "motion_models", "state_models",
                     "states_summary")


def write_report(out_dir: Path, tables: dict[str, pd.DataFrame], animals: list, run_info: dict, cfg,
                 executor=None, pages_from: int = PAGES_FROM) -> Path:
    """Write ``out_dir/report.html``, its figures and, for large deployments, one page per animal.

    Parameters
    ----------
    out_dir : Path
        Output folder (created if needed); figures go to ``out_dir/figures``.
    tables : dict of DataFrame
        ``summary``, ``rejected``, ``fits``, ``null_tests``, ``residency``,
        ``ranges`` (any may be missing or empty), optionally ``fixes`` and
        ``rejected_xy`` (see the module docstring) and the tables of later
        stages (``motion_models``, ``state_models``), read when present.
    animals : list of AnimalResult
        Per-animal results in id order.
    run_info : dict
        ``version, command_line, seed, n_read, n_kept, n_rejected,
        projections, masked, inputs``.
    cfg : Config
        Uses ``mask_locations``, ``nulls``, ``quiet`` and ``output_format``.
    executor : AnimalExecutor, optional
        The run's worker pool: each animal's figures are drawn there.  None
        draws in this process (with a progress bar unless ``cfg.quiet``).
    pages_from : int
        Deployments of at least this many animals get one page per animal.

    Returns
    -------
    Path
        The path of report.html.
    """
    from roamstat.parallel import AnimalExecutor

    out_dir = Path(out_dir)
    masked = bool(getattr(cfg, "mask_locations", False) or run_info.get("masked"))
    ids = animal_ids(tables, animals)
    names = safe_names(ids)
    paged = len(ids) >= pages_from
    nulls = null_models(tables.get("null_tests"), tuple(getattr(cfg, "nulls", ())))
    overview = _overview_rows(tables, ids, nulls)
    jobs = _jobs(out_dir, tables, animals, ids, names, masked, paged, overview,
                 "parquet" if getattr(cfg, "output_format", "csv") == "parquet" else "csv")
    # The analysis leaves a large heap; each full collection while drawing would walk all of it
    # (a tenth of the stage's time on the sample, profiled). It is frozen for the drawing and handed
    # back to the collector after; the figures' own garbage is collected as usual.
    gc.freeze()
    try:
        if executor is None:
            with AnimalExecutor(1, None, bool(getattr(cfg, "quiet", False))) as own:
                sections = own.map(render_animal, jobs, desc="report")
        else:
            sections = executor.map(render_animal, jobs, desc="report")
    finally:
        gc.unfreeze()

    links = {i: (f"animals/{names[i]}.html" if paged else f"#a-{names[i]}") for i in ids}
    body = [_header(run_info, masked, len(ids), paged),
            _overview(overview, nulls, links, tables),
            '<h2 id="quality">Data quality: rejected rows by reason</h2>' + table(quality_table(tables.get("rejected")))]
    if paged:
        body.append(f'<h2 id="animals">Animals</h2><p class="meta">{len(ids)} animals: each has its own page, '
                    "linked from the overview above (search by id or species).</p>")
        for animal_id, section in zip(ids, sections):
            atomic_write(out_dir / "animals" / f"{names[animal_id]}.html",
                         page(f"roamstat: animal {short_id(animal_id)}", _animal_page(section, masked)))
    else:
        body.append('<h2 id="animals">Animals</h2>')
        body.extend(sections)
    body.append(_methods(nulls or tuple(getattr(cfg, "nulls", ()))))
    body.append('<h2 id="cautions">Cautions</h2>' + CAUTIONS)
    body.append(f'<p class="note">{esc(MASKED_NOTE if masked else UNMASKED_NOTE)}</p>')
    path = out_dir / "report.html"
    atomic_write(path, page("roamstat report", "".join(body), script=search_script()))
    return path


def _animal_page(section: str, masked: bool) -> str:
    return ('<nav><a href="../report.html#overview">← Deployment overview</a> · '
            '<a href="../report.html#cautions">Cautions</a></nav>'
            '<p class="caution">Statistical verdicts support, not replace, expert judgement. Exact locations of '
            'sensitive species can enable poaching or disturbance: read the cautions before sharing.</p>'
            + section + f'<p class="note">{esc(MASKED_NOTE if masked else UNMASKED_NOTE)}</p>')


def _jobs(out_dir, tables, animals, ids, names, masked, paged, overview, table_format) -> list[AnimalJob]:
    by_id = {str(a.animal_id): a for a in animals}
    fixes, rejected = _grouped(tables.get("fixes")), _grouped(_rejected_coordinates(tables))
    per_table = {key: _grouped(tables.get(key), need=("animal_id",)) for key in PER_ANIMAL_TABLES}
    root = "../" if paged else ""
    jobs = []
    for animal_id in ids:
        view = AnimalView(animal_id, by_id.get(animal_id), fixes.get(animal_id), rejected.get(animal_id), masked,
                          root, table_format)
        own = {key: rows[animal_id].reset_index(drop=True) for key, rows in per_table.items() if animal_id in rows}
        jobs.append(AnimalJob(view, own, names[animal_id], out_dir / "figures", overview[animal_id]["sentence"]))
    return jobs


def _grouped(frame: pd.DataFrame | None, need=("animal_id", "x_m", "y_m")) -> dict:
    if frame is None or frame.empty or not set(need) <= set(frame.columns):
        return {}
    return {str(k): v for k, v in frame.groupby(frame["animal_id"].astype(str), sort=False)}


def _rejected_coordinates(tables: dict) -> pd.DataFrame | None:
    for frame in (tables.get("rejected_xy"), tables.get("rejected")):
        if isinstance(frame, pd.DataFrame) and {"animal_id", "x_m", "y_m"} <= set(frame.columns):
            return frame
    return None


def _first_rows(frame) -> dict:
    if not isinstance(frame, pd.DataFrame) or frame.empty or "animal_id" not in frame.columns:
        return {}
    frame = frame.set_index(frame["animal_id"].astype(str))
    return {k: r for k, r in frame[~frame.index.duplicated()].iterrows()}


def _overview_rows(tables: dict, ids: list[str], nulls: list[str]) -> dict:
    """Per animal the facts of the overview row, its sentence and, where nulls disagree, why."""
    summary, residency = _first_rows(tables.get("summary")), _first_rows(tables.get("residency"))
    areas = _first_rows(preferred_areas(tables.get("ranges")))
    tests = tables.get("null_tests")
    tests = tests if isinstance(tests, pd.DataFrame) and {"animal_id", "null_model"} <= set(tests.columns) else None
    by_null = {n: _first_rows(tests[tests["null_model"].astype(str) == n]) for n in nulls} if tests is not None else {}
    ref = reference_null(nulls)
    motion, states = motion_best(tables.get("motion_models")), time_in_state(tables.get("state_models"))
    out = {}
    for aid in ids:
        s, r = summary.get(aid), residency.get(aid)
        verdicts = {n: str(by_null[n][aid].get("verdict", "–")) for n in nulls if aid in by_null[n]}
        medians = {n: _num(by_null[n][aid].get("null_median_m")) for n in nulls if aid in by_null[n]}
        test = by_null.get(ref, {}).get(aid) if ref else None
        facts: dict[str, Any] = {
            "species": None if s is None else s.get("species"), "test": test, "verdicts": verdicts,
            "null": ref, "verdict": verdicts.get(ref) if ref else None,
            "ratio": ratio_text(test.get("observed_net_m"), test.get("null_median_m")) if test is not None else "",
            "pattern": residency_text(r) if r is not None else None,
            "candidate_text": candidate_text(r, tests) if r is not None else "–",
            "area": areas.get(aid), "motion": motion.get(aid), "states": states.get(aid)}
        facts["days"] = human.days(s.get("first_time"), s.get("last_time")) if s is not None else math.nan
        facts["fixes"] = s.get("n_fixes") if s is not None else None
        facts["candidate"] = facts["candidate_text"].startswith("yes")
        facts["sentence"] = sentence(facts)
        facts["why"] = disagreement(verdicts, medians)
        out[aid] = facts
    return out


def _num(value) -> float:
    try:
        return float(value)
    except (TypeError, ValueError):
        return math.nan


def _overview(rows: dict, nulls: list[str], links: dict, tables: dict) -> str:
    """The decision-first table: one block per animal (facts, then its sentence), with a search box and legend."""
    from roamstat.report.figures_inline import interval_svg

    optional = [label for key, _, label in OPTIONAL_COLUMNS if tables.get(key) is not None]
    head = ["animal", "tracked", f"end distance vs {rows and next(iter(rows.values()))['null'] or 'null'}",
            "verdict per null", "residency", "range-study candidate", "preferred area (km²)", *optional]
    blocks = []
    for aid, f in rows.items():
        species = f'<br><span class="meta"><em>{esc(f["species"])}</em></span>' if isinstance(f["species"], str) else ""
        tracked = (f'<span class="nowrap">{human.significant(f["days"])} d</span><br>'
                   f'<span class="nowrap">{human.number(f["fixes"], 0)} fixes</span>'
                   if f["fixes"] is not None and not human.missing(f["fixes"]) else "–")
        test = f["test"]
        scale = (f'<span class="ratio">{esc(f["ratio"])}</span>' + interval_svg(test) if test is not None else "–")
        verdicts = " ".join(f'<span class="v v-{esc(v)}">{esc(n)}: {esc(v)}</span>' for n, v in f["verdicts"].items()) or "–"
        area = "–"
        if f["area"] is not None and "not range-resident" in str(f["area"].get("note", "")):
            area = 'none<br><span class="meta">not range-resident</span>'  # no stationary home range to cite
        elif f["area"] is not None:
            area = f"{esc(area_text(f['area']))}<br><span class=\"meta nowrap\">{esc(f['area']['method'])} 95 %</span>"
        wrap = ' class="nowrap"' if len(aid) <= 16 else ""
        cells = [f'<a{wrap} href="{esc(links[aid])}">{esc(short_id(aid))}</a>{species}', tracked, scale, verdicts,
                 esc(f["pattern"] or "–"), esc(f["candidate_text"]), area]
        if "movement model" in optional:
            cells.append(esc(f["motion"] or "–"))
        if "time in state" in optional:
            cells.append(esc(f["states"] or "–"))
        says = esc(f["sentence"]) + (f'<br><span class="why">{esc(f["why"])}</span>' if f["why"] else "")
        search = esc(" ".join(str(x) for x in (aid, f["species"] or "", f["pattern"] or "", *f["verdicts"].values())).lower())
        blocks.append(f'<tbody data-search="{search}"><tr>' + "".join(f"<td>{c}</td>" for c in cells)
                      + f'</tr><tr class="says"><td colspan="{len(cells)}">{says}</td></tr></tbody>')
    table_html = ('<div class="scroll"><table id="overview-table" class="overview"><thead><tr>'
                  + "".join(f'<th scope="col">{esc(h)}</th>' for h in head) + "</tr></thead>" + "".join(blocks)
                  + "</table></div>")
    search = ('<p class="search"><label for="animal-search">Find an animal (id, species, verdict, pattern): </label>'
              '<input id="animal-search" type="search" placeholder="e.g. resident" autocomplete="off"> '
              f'<span id="animal-count" class="meta">{len(rows)} animals</span></p>')
    return ('<h2 id="overview">Deployment overview</h2>' + search + table_html
            + legend_html(nulls, optional))


def _header(run_info: dict, masked: bool, n_animals: int, paged: bool = False) -> str:
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
             "<details><summary>Run details: version, command line, seed, counts, input files</summary>",
             key_values(facts)]
    if inputs:
        parts.append(f'<p class="meta">Input files:</p><ul class="meta">{inputs}</ul>')
    projections = run_info.get("projections") or {}
    if projections and not masked:
        rows = "".join(f"<li>{esc(short_id(k))}: <code>{esc(v)}</code></li>" for k, v in projections.items())
        parts.append(f"<details><summary>Projection per animal</summary><ul class=\"meta\">{rows}</ul></details>")
    parts.append("</details>")
    return "".join(parts)


def _methods(nulls) -> str:
    refs = "".join(f"<li>{r}</li>" for r in REFERENCES)
    return f'<h2 id="methods">Methods</h2>{methods_html(nulls)}<h3>References</h3><ul>{refs}</ul>'
