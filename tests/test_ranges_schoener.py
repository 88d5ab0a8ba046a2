"""Schoener's ratio t2/r2 by simulation: about 2 for independent fixes, small for autocorrelated ones."""

from __future__ import annotations

import numpy as np

from ranges_sim import independent_normal, shifted_range_track
from roamstat.config import Config
from roamstat.ranges import ranges_animal, schoener_ratio
from roamstat.ranges.schoener import autocorrelation_note


def test_independent_fixes_give_about_two_and_rarely_a_caution():
    # Expectation 2 under independence (Swihart & Slade 1985); the caution uses a two-sided 5 % band from
    # von Neumann's (1941) variance, conservative in 2-D, so it fires in at most about 5 % of samples.
    rng = np.random.default_rng(31)
    reps, n = 400, 150
    ratios, flagged = [], 0
    for _ in range(reps):
        xy = rng.normal(0, 1000, size=(n, 2))
        ratio = schoener_ratio(xy[:, 0], xy[:, 1])
        ratios.append(ratio)
        flagged += bool(autocorrelation_note(ratio, n))
    assert abs(np.mean(ratios) - 2.0) < 0.02
    # Binomial band: 400 draws at p = 0.05 exceed 32 with probability < 0.5 %.
    assert flagged <= 32


def test_autocorrelated_track_gets_the_caution_on_kernel_rows_only():
    # Ornstein-Uhlenbeck fixes every hour with a 2-day attraction time are strongly autocorrelated.
    fixes = shifted_range_track(lambda t: np.zeros_like(t), 40, 1, 1000, 2.0, np.random.default_rng(5))
    rows, _, _ = ranges_animal(fixes, Config())
    assert rows[0]["schoener_ratio"] < 0.5
    assert all(("autocorrelated" in r["note"]) == (r["method"] == "kde") for r in rows)
    independent = independent_normal(500, 1000.0, np.random.default_rng(6))
    rows, _, _ = ranges_animal(independent, Config())
    assert 1.7 < rows[0]["schoener_ratio"] < 2.3
