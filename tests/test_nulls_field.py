"""Calibration and power of the null tests under field sampling (issue 13, item 5).

Animals come from the independent generator ``field_sim`` (plain numpy, not roamstat.motion or
roamstat.nulls): true continuous-time correlated random walks (Johnson et al. 2008) and true
discrete correlated random walks (Kareiva & Shigesada 1983), sampled

* (a) hourly, 100 fixes, 25 m Gaussian error per axis (DOP 5 x UERE 5 m);
* (b) hourly over 10 days, 30 % missed fixes and two 2-day outages, 5 m error;
* (c) exponential gaps (mean 3 h) over 12 days, error by location-quality class.

Under a true null the Monte Carlo p-value is uniform on {1/(M+1), ..., 1} (Davison & Hinkley 1997,
§4.2): with M = 199, P(p <= 0.05) = 0.05 exactly, so the count of p <= 0.05 among n animals must lie in
the two-sided 99 % binomial band, for ``p_value`` and for the global envelope ``p_curve`` (Myllymäki et
al. 2017).  With fitted parameters the test is approximate; these are the cases where it holds (the
measured figures of every case are in docs/nulls.md).  Fixed seeds keep every run identical.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from field_sim import UERE_M, field_animal, write_class_table
from roamstat import compare
from roamstat.config import Config
from roamstat.models import fit_animal

pytestmark = pytest.mark.slow
ALPHA = 0.05
N_ANIMALS = 150  # the 99 % band of the count of p <= 0.05 is then 2-15: a test that never rejects fails


@pytest.fixture(scope="module")
def class_table(tmp_path_factory):
    return write_class_table(tmp_path_factory.mktemp("classes") / "classes.csv")


def deployment(kind, scenario, nulls, n, seed, class_table, scale=1.0):
    """The finalised null-test table of ``n`` simulated animals (fitted step models only when needed)."""
    cfg = Config(replicates=199, nulls=nulls, alpha=ALPHA, uere_m=UERE_M, error_class_table=class_table)
    step_based = any(n != "ctcrw" for n in nulls)
    parts = []
    for i in range(n):
        rng = np.random.default_rng([seed, i])
        fixes, steps, nominal = field_animal(kind, scenario, rng, scale)
        fits = fit_animal(steps, cfg, rng) if step_based else None
        rows, _ = compare.test_animal(fixes, steps, fits, nominal, cfg, rng)
        rows.insert(0, "animal_id", f"sim-{i:03d}")
        parts.append(rows)
    return compare.finalise(pd.concat(parts, ignore_index=True), cfg)


def assert_calibrated(rows: pd.DataFrame, n: int, conservative: bool = False):
    """Rejection counts inside the two-sided 99 % binomial band around alpha.

    ``conservative``: only the upper edge, for the one case the docs call conservative rather than
    exact (docs/nulls.md); the power tests below keep a never-rejecting null from passing there.
    """
    tested = rows[rows["p_value"].notna()]
    assert len(tested) >= 0.95 * n, rows["note"].value_counts().head()
    band = stats.binom.interval(0.99, len(tested), ALPHA)
    n_p = int((tested["p_value"] <= ALPHA).sum())
    n_curve = int((tested["p_curve"] <= ALPHA).sum())
    low = 0 if conservative else band[0]
    assert low <= n_p <= band[1], (n_p, band)
    assert low <= n_curve <= band[1], (n_curve, band)
    if conservative:
        return
    # false positives on both sides: a biased null puts them all on one (fair coin, 99 % band)
    hit = tested[tested["p_value"] <= ALPHA]
    farther = int((hit["observed_net_m"] > hit["null_median_m"]).sum())
    low = stats.binom.interval(0.99, len(hit), 0.5)[0]
    assert min(farther, len(hit) - farther) >= low, (farther, len(hit))
    # the self-check: analytic NSD of the fitted model (plus error) against the simulated mean,
    # averaged over animals (Monte Carlo SE of the mean ratio ~ 1 / sqrt(199 n), well inside 5 %)
    ratio = (tested["expected_nsd_m2"] / tested["simulated_mean_nsd_m2"]).mean()
    if np.isfinite(ratio):
        assert 0.95 < ratio < 1.05


@pytest.mark.parametrize("kind,scenario", [("ctcrw", "a"), ("ctcrw", "b"), ("ctcrw", "c"), ("crw", "a"), ("crw", "c")])
def test_ctcrw_null_holds_its_level_under_error_gaps_and_irregular_times(kind, scenario, class_table):
    # not offered as valid: discrete-CRW animals (straight hourly legs) with gaps and only 5 m error, where
    # the continuous-time model misses the legs' shape and p_curve rejects 10-15 % (docs/nulls.md)
    # discrete-CRW animals at irregular times: the fitted continuous model is conservative there
    # (0.7-3 % measured; docs/nulls.md), so only the upper edge is a claim
    table = deployment(kind, scenario, ("ctcrw",), N_ANIMALS, 1300 + ord(scenario) + 10 * len(kind), class_table)
    assert_calibrated(table, N_ANIMALS, conservative=(kind, scenario) == ("crw", "c"))
    assert table["note"].str.contains({"a": "dop_uere", "b": "dop_uere", "c": "quality_class"}[scenario]).all()


def test_step_based_nulls_under_missed_fixes_no_longer_lean_closer(class_table):
    # Before the one-interval fits, a gap was fitted as one step and walked as k: the null travelled too
    # far and every false positive was "closer".  Now "closer" is no longer the dominant side (fair coin,
    # 99 % band) and the walk's Kareiva-Shigesada expectation matches its simulation.  The rate itself is
    # 7-11 %, leaning "farther" (the 5 m error blurs the turns; docs/nulls.md), so the step-based nulls
    # are not offered as exact under field sampling; tests/test_nulls_gaps.py checks the walk's NSD
    # against the truth.
    table = deployment("crw", "b", ("crw", "shuffle"), N_ANIMALS, 1400, class_table)
    for _, rows in table.groupby("null_model"):
        tested = rows[rows["p_value"].notna()]
        assert len(tested) >= 0.95 * N_ANIMALS
        hit = tested[tested["p_value"] <= ALPHA]
        closer = int((hit["observed_net_m"] < hit["null_median_m"]).sum())
        assert len(hit) >= stats.binom.interval(0.99, len(tested), ALPHA)[0]
        assert closer <= stats.binom.interval(0.99, len(hit), 0.5)[1], (closer, len(hit))
        ratio = (tested["expected_nsd_m2"] / tested["simulated_mean_nsd_m2"]).mean()
        assert np.isnan(ratio) or 0.95 < ratio < 1.05


@pytest.mark.parametrize("scenario", ["a", "b", "c"])
def test_residents_are_closer_and_travellers_farther_under_the_ctcrw_null(scenario, class_table):
    # power: the endpoint test calls a home range "closer" only once the record is long against its time
    # scale (tau 30 min), hence about a month of fixes; the unbounded null never becomes the resident model
    n = 30
    month = {"a": 7.0, "b": 3.0, "c": 3.0}[scenario]  # about a month of record (700 h, 30 days, 36 days)
    residents = deployment("resident", scenario, ("ctcrw",), n, 1500 + ord(scenario), class_table, scale=month)
    assert not residents["note"].str.contains("null model ou").any()
    assert (residents["verdict"] == "closer").mean() >= 0.9
    travellers = deployment("traveller", scenario, ("ctcrw",), n, 1600 + ord(scenario), class_table)
    assert (travellers["verdict"] == "farther").mean() >= 0.9
