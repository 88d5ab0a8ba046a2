"""Schoener's ratio t2/r2 by simulation: about 2 for independent fixes, small for autocorrelated ones."""

from __future__ import annotations

import numpy as np
import pytest

from ranges_sim import independent_normal, shifted_range_track
from roamstat.config import Config
from roamstat.ranges import ranges_animal, schoener_ratio
from roamstat.ranges.schoener import autocorrelation_note, independence_band


@pytest.mark.parametrize("n", [30, 150])
def test_independent_fixes_are_flagged_in_about_five_percent_of_samples(n):
    # Expectation 2 under independence (Swihart & Slade 1985); the two-sided band is exact in its variance
    # (derived in schoener.py) with a beta shape (Durbin & Watson 1950). Simulated independent bivariate normal
    # samples must be flagged in about 5 % of cases, on both sides.
    rng = np.random.default_rng(31 + n)
    reps = 2000
    xy = rng.normal(0, 1000, size=(reps, n, 2))
    ratios = np.array([schoener_ratio(s[:, 0], s[:, 1]) for s in xy])
    low, high = independence_band(n)
    assert abs(np.mean(ratios) - 2.0) < 0.01
    # Exact variance 2 (n - 2) / (n (n - 1)) against the simulated one (relative SE of a variance ~ 3 %).
    assert np.var(ratios) == pytest.approx(2 * (n - 2) / (n * (n - 1)), rel=0.1)
    flagged = sum(bool(autocorrelation_note(r, n)) for r in ratios)
    # 99 % binomial band for 2000 draws at p = 0.05 is about 76..125; each side near 50 (band 31..70).
    assert 76 <= flagged <= 125
    assert 31 <= int(np.sum(ratios < low)) <= 70 and 31 <= int(np.sum(ratios > high)) <= 70


def test_autocorrelated_track_gets_the_caution_on_kernel_rows_only():
    # Ornstein-Uhlenbeck fixes every hour with a 2-day attraction time are strongly autocorrelated.
    fixes = shifted_range_track(lambda t: np.zeros_like(t), 40, 1, 1000, 2.0, np.random.default_rng(5))
    rows, _, _ = ranges_animal(fixes, Config())
    assert rows[0]["schoener_ratio"] < 0.5
    assert all(("autocorrelated" in r["note"]) == (r["method"] == "kde") for r in rows)
    independent = independent_normal(500, 1000.0, np.random.default_rng(6))
    rows, _, _ = ranges_animal(independent, Config())
    assert 1.7 < rows[0]["schoener_ratio"] < 2.3
