"""Replicates of a big animal split into chunks: the same results for any worker count, and
the same distribution as unsplit walks (checked against the random-walk NSD formula)."""

from __future__ import annotations

import numpy as np
import pytest

import roamstat.split as split
from roamstat.nulls.walk import Walk

MEAN_STEP_M = 50.0


def _walk():
    # Uncorrelated walk: exponential steps (mean mu), uniform turns, drawn here independently.
    return Walk(lambda n, rng: rng.exponential(MEAN_STEP_M, n), lambda n, rng: rng.uniform(-np.pi, np.pi, n))


def test_split_results_do_not_depend_on_workers(monkeypatch):
    monkeypatch.setattr(split, "SPLIT_DRAWS", 0)
    idx = np.array([0, 10, 50, 100])
    one = split.simulate_replicates(_walk(), 100, 200, np.random.default_rng(7), idx, workers=1)
    three = split.simulate_replicates(_walk(), 100, 200, np.random.default_rng(7), idx, workers=3)
    np.testing.assert_array_equal(one, three)
    assert one.shape == (200, 4)
    assert np.unique(one[:, -1]).size == 200  # chunks draw independent streams, no repeated walks


def test_small_work_keeps_the_animals_own_stream():
    idx = np.array([0, 20])
    plain = _walk().simulate(20, 50, np.random.default_rng(3), idx)
    np.testing.assert_array_equal(split.simulate_replicates(_walk(), 20, 50, np.random.default_rng(3), idx, 2), plain)


def test_split_walks_have_the_random_walk_nsd(monkeypatch):
    # E[NSD after n steps] = n E[l^2] for independent uniform turns (Kareiva & Shigesada 1983,
    # eq. 2 with mean cosine 0, formula from memory); E[l^2] = 2 mu^2 for exponential steps. Two-sided 4-SE band.
    monkeypatch.setattr(split, "SPLIT_DRAWS", 0)
    n, reps = 200, 4000
    nsd = split.simulate_replicates(_walk(), n, reps, np.random.default_rng(11), np.array([n]), workers=2)[:, 0]
    expected = n * 2 * MEAN_STEP_M ** 2
    assert nsd.mean() == pytest.approx(expected, abs=4 * nsd.std(ddof=1) / np.sqrt(reps))
