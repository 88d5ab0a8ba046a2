"""The report's decision-first overview, human tables and extension points.

Formatting rules checked here are conventions of scientific writing (SI units with
3 significant figures, one precision per column: common practice, no source).  The
minimum-data thresholds are the ones the report cites: kernel home ranges need at
least 30 fixes (Seaman et al. 1999, from memory) and residency classes the NSD
models' own minimum (``ranges.residency.MIN_FIXES``).
"""

from __future__ import annotations

import re
from html.parser import HTMLParser

import numpy as np
import pandas as pd

from report_inputs import make_inputs
from roamstat.config import Config
from roamstat.report import SECTIONS, human, write_report
from roamstat.report.sections import RANGE_MIN_FIXES, Fragment


class Text(HTMLParser):
    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.parts = []

    def handle_data(self, data):
        self.parts.append(data)


def text_of(path) -> str:
    parser = Text()
    parser.feed(path.read_text(encoding="utf-8"))
    return " ".join(" ".join(parser.parts).split())


# --- human numbers --------------------------------------------------------------

def test_parameters_read_as_prose_with_units():
    assert human.parameters('{"shape": 1.6234, "scale": 67.61}', "step") == "shape 1.62, scale 67.6 m"
    assert human.parameters('{"rate": 0.0026510811266314926}', "step") == "rate 0.00265 /m"
    # Turn locations in degrees: -0.0052 rad = -0.298 degrees.
    assert human.parameters('{"mu": -0.005204287078889092, "rho": 0.23}', "turn") == "mu −0.298°, rho 0.230"
    assert human.parameters("{}", "turn") == "–"


def test_degenerate_fits_are_marked_and_ordinary_ones_are_not():
    assert "degenerate" in human.degenerate('{"meanlog": -474.32, "sdlog": 30.0}', "step")
    assert "degenerate" in human.degenerate('{"kappa": NaN}', "turn")
    assert human.degenerate('{"meanlog": 5.72, "sdlog": 0.72}', "step") == ""
    assert human.degenerate('{"scale": 152000.0, "shape": 2.5}', "step") == ""  # long steps are not degenerate


def test_one_precision_per_column_at_three_significant_figures():
    # Median magnitude 14 km: 3 significant figures there means one decimal for every value.
    assert human.column([13975.4, 2507.1, 32868.2], 1000.0) == ["14.0", "2.5", "32.9"]
    assert human.column([0.44, 0.61, 12.3]) == ["0.440", "0.610", "12.300"]  # median 0.61: three decimals
    assert human.column([7205.0, 7219.0]) == ["7,205", "7,219"]
    assert human.probability(6.04e-102) == "< 0.001" and human.probability(0.0149) == "0.015"
    assert human.hours(7205) == "2.00 h" and human.km(479804.25) == "480 km"


# --- the overview -----------------------------------------------------------------

def small_report(tmp_path, **changes):
    tables, animals, run_info = make_inputs(["ELK-01", "ELK-02"], incomplete_ids={"ELK-01", "ELK-02"})
    tables["summary"]["species"] = ["Cervus elaphus", "Cervus elaphus"]
    tables["summary"]["last_time"] = pd.Timestamp("2024-05-31", tz="UTC")
    tables["null_tests"] = pd.DataFrame({
        "animal_id": ["ELK-01", "ELK-01", "ELK-02", "ELK-02"], "null_model": ["crw", "levy"] * 2,
        "observed_net_m": [31000.0, 31000.0, 900.0, 900.0], "null_median_m": [10000.0, 40000.0, 9000.0, 9500.0],
        "null_q025_m": [2000.0, 8000.0, 2000.0, 2100.0], "null_q975_m": [25000.0, 90000.0, 24000.0, 25000.0],
        "q_value": [0.01, 0.4, 0.02, 0.03], "verdict": ["farther", "consistent", "closer", "closer"]})
    tables["ranges"] = pd.DataFrame({"animal_id": ["ELK-01", "ELK-02"], "method": ["kde", "kde"], "level": [95, 95],
                                     "area_km2": [12.345, 3.21], "n_fixes": [121, 12]})
    tables["residency"] = pd.DataFrame({"animal_id": ["ELK-01", "ELK-02"], "pattern": ["disperser", "resident"],
                                        "n_fixes": [121, 12], "range_study_candidate": [False, True]})
    tables.update(changes)
    return write_report(tmp_path, tables, animals, run_info, Config(nulls=("crw", "levy")))


def test_overview_states_scale_verdicts_candidate_and_species(tmp_path):
    text = text_of(small_report(tmp_path))
    assert "Cervus elaphus" in text
    assert "30.0 d" in text  # 2024-05-01 to 2024-05-31
    assert "3.1×" in text  # 31 km against the crw null's median of 10 km
    assert "Ended 3.1× as far from its start as the median crw random walk: farther than chance" in text
    assert "no: disperser pattern" in text
    # Where the nulls disagree, one line says why, naming how far each null travels.
    assert re.search(r"Nulls disagree \(farther under crw, consistent under levy\): the levy null's walks end a "
                     r"median 40 km", text)
    for term in ("tracked", "end distance vs null", "verdict per null", "residency", "range-study candidate",
                 "preferred area"):
        assert term in text


def test_minimum_data_says_insufficient_with_the_threshold(tmp_path):
    from roamstat.ranges.residency import MIN_FIXES

    text = text_of(small_report(tmp_path))
    assert f"insufficient (12 fixes; needs ≥ {RANGE_MIN_FIXES})" in text
    assert f"insufficient (12 fixes; needs ≥ {MIN_FIXES})" in text
    assert f"no: insufficient (12 fixes; needs ≥ {MIN_FIXES})" in text  # no range-study claim either
    assert "candidate for a home-range study" not in text
    assert "12.3" in text  # 121 fixes: the area is given


def test_preferred_area_is_the_autocorrelated_kde_when_present(tmp_path):
    ranges = pd.DataFrame({"animal_id": ["ELK-01"] * 3, "method": ["mcp", "kde", "kde_autocorr"],
                           "level": [100, 95, 95], "area_km2": [5.0, 12.345, 20.5], "area_low_km2": [None, None, 15.25],
                           "area_high_km2": [None, None, 27.75], "n_fixes": [121] * 3})
    text = text_of(small_report(tmp_path, ranges=ranges))
    assert "20.5 (15.2–27.8) kde_autocorr 95 %" in text


def test_optional_tables_add_columns(tmp_path):
    motion = pd.DataFrame({"animal_id": ["ELK-01", "ELK-01"], "model": ["ou", "ctcrw"], "best": [False, True]})
    states = pd.DataFrame({"animal_id": ["ELK-01", "ELK-01"], "state": [1, 2], "stationary_p": [0.62, 0.38],
                           "best": [True, True]})
    plain = text_of(small_report(tmp_path / "plain"))
    text = text_of(small_report(tmp_path / "extra", motion_models=motion, state_models=states))
    assert "movement model" not in plain and "time in state" not in plain
    assert "movement model" in text and "ctcrw" in text and "1: 62 % · 2: 38 %" in text


def test_a_new_section_builder_appears_without_layout_changes(tmp_path, monkeypatch):
    def extra(tables, animal):
        rows = tables.get("motion_models")
        if rows is None:
            return Fragment()
        return Fragment(f"<h4>Movement</h4><p>{len(rows)} models for {animal.animal_id}</p>")

    monkeypatch.setattr("roamstat.report.sections.SECTIONS", SECTIONS + [("movement", extra)])
    motion = pd.DataFrame({"animal_id": ["ELK-01", "ELK-01"], "model": ["ou", "ctcrw"], "best": [False, True]})
    text = text_of(small_report(tmp_path, motion_models=motion))
    assert "2 models for ELK-01" in text and "models for ELK-02" not in text


def test_tail_decision_joins_summary_per_animal():
    from roamstat.models import fit_animal
    from roamstat.pipeline import with_tail
    from roamstat.results import AnimalResult

    rng = np.random.default_rng(5)
    # Pareto steps (numpy's own generator, independent of the fitting code), and a track too short for a tail.
    long = pd.DataFrame({"step_m": 10.0 * (1 + rng.pareto(1.5, 800)), "turn_rad": rng.uniform(-np.pi, np.pi, 800),
                         "segment": 0})
    short = long.iloc[:8].reset_index(drop=True)
    animals = []
    for aid, steps in (("heavy", long), ("short", short)):
        result = AnimalResult(aid)
        result.fitted = fit_animal(steps, Config(), rng)
        animals.append(result)
    summary = with_tail(pd.DataFrame({"animal_id": ["heavy", "short", "unfitted"]}), animals)
    assert summary["tail_supported"].tolist() == [animals[0].fitted.tail_supported, False, False]
    assert summary["tail_reason"].iloc[1].startswith("insufficient") and "need" in summary["tail_reason"].iloc[1]
    assert summary["tail_reason"].iloc[2] == "not fitted"
    assert (summary["tail_reason"].iloc[0] == "") == bool(summary["tail_supported"].iloc[0])
