"""Residency classes through the whole pipeline (motion models, the ctcrw null, ranges, finalise_residency).

The animals come from a plain-numpy generator written here, independent of roamstat: a settled animal is an
exact Ornstein-Uhlenbeck position process (AR(1) with coefficient exp(-dt/tau) at the fix interval; Dunn &
Gipson 1977) about a range centre that moves along a logistic path, the shape of the sigmoid NSD forms of
Bunnefeld et al. (2011, J. Anim. Ecol. 80:466-476); the random walker has independent Gaussian increments.
All tracks are 6-hourly for 130 days (the case of issue 14). Simulated, not real data.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

from roamstat.config import Config
from roamstat.pipeline import analyse, load

DT_DAYS, DAYS = 0.25, 130
LAT0, LON0 = 61.0, 15.0
M_PER_DEG = 111_320.0  # metres per degree of latitude (spherical approximation, enough for a test track)
SIGMA_M, TAU_DAYS, MOVE_M = 1500.0, 2.0, 30_000.0  # per-axis range SD, attraction time, distance moved
N_EACH = 8


def _logistic(t, midpoint_day, scale_days=1.0):
    return 1.0 / (1.0 + np.exp(-(t - midpoint_day) / scale_days))


def _centre_x(kind, t, rng):
    depart = rng.uniform(30, 45)
    if kind == "disperser":
        return MOVE_M * _logistic(t, depart)
    back = rng.uniform(80, 90)
    share = 1.0 if kind == "migrant" else rng.uniform(0.4, 0.7)  # a mixed migrant returns part of the way
    return MOVE_M * (_logistic(t, depart) - share * _logistic(t, back))


def _settled(kind, t, rng):
    cx = _centre_x(kind, t, rng)
    a = math.exp(-DT_DAYS / TAU_DAYS)
    xy = np.zeros((t.size, 2))
    e = rng.normal(0.0, SIGMA_M * math.sqrt(1 - a * a), (t.size, 2))
    for i in range(1, t.size):
        xy[i, 0] = cx[i] + a * (xy[i - 1, 0] - cx[i]) + e[i, 0]
        xy[i, 1] = a * xy[i - 1, 1] + e[i, 1]
    return xy


def _walker(t, rng, step_sd_m=1500.0):
    return np.vstack([[0.0, 0.0], rng.normal(0.0, step_sd_m, (t.size - 1, 2)).cumsum(axis=0)])


@pytest.fixture(scope="module")
def residency(tmp_path_factory):
    rng = np.random.default_rng(140014)
    t = np.arange(int(DAYS / DT_DAYS) + 1) * DT_DAYS
    times = (pd.Timestamp("2022-04-01T00:00:00Z") + pd.to_timedelta(t, unit="D")).strftime("%Y-%m-%dT%H:%M:%SZ")
    parts = []
    for kind in ("disperser", "migrant", "mixed_migrant", "walker"):
        for k in range(N_EACH):
            xy = _walker(t, rng) if kind == "walker" else _settled(kind, t, rng)
            parts.append(pd.DataFrame({"animal_id": f"{kind}{k}", "time": times,
                                       "lat": LAT0 + xy[:, 1] / M_PER_DEG,
                                       "lon": LON0 + xy[:, 0] / (M_PER_DEG * math.cos(math.radians(LAT0)))}))
    path = tmp_path_factory.mktemp("residency_in") / "collars.csv"
    pd.concat(parts).to_csv(path, index=False)
    cfg = Config(nulls=("ctcrw",), replicates=99, report=False, quiet=True, seed=14)
    tables, _ = analyse(load([path], cfg), ("steps", "motion", "null", "ranges"), cfg)
    table = tables["residency"].set_index("animal_id")
    table["kind"] = table.index.str.rstrip("0123456789")
    nulls = tables["null_tests"].set_index("animal_id")["verdict"]
    best = tables["motion_models"].query("best").set_index("animal_id")["model"]
    return table.assign(verdict=nulls, best=best)


TWO_RANGE = {"disperser", "migrant", "mixed_migrant"}


@pytest.mark.slow
def test_diffusive_random_walks_get_no_two_range_class(residency):
    # Issue 14: "for diffusive random walks, no disperser"; a random walk never settles, so none of the
    # sigmoid NSD forms of Bunnefeld et al. (2011) may stand.
    walkers = residency[residency["kind"] == "walker"]
    assert not set(walkers["pattern"]) & TWO_RANGE, walkers["pattern_reason"].tolist()


@pytest.mark.slow
@pytest.mark.parametrize("kind", sorted(TWO_RANGE))
def test_dispersers_and_migrants_are_recovered(residency, kind):
    # Issue 14: "for migrants and dispersers, the class is recovered"; the NSD forms of Bunnefeld et al.
    # (2011). Their whole tracks have no single range (best motion model unbounded, ctcrw verdict usually
    # consistent), so the random-walk override must not turn them into nomads. 7 of 8 is our tolerance
    # (judgement, no source): a mixed migrant that returns most of the way can be read as a migrant.
    rows = residency[residency["kind"] == kind]
    assert (rows["pattern"] == kind).sum() >= N_EACH - 1, rows[["pattern", "pattern_reason"]].to_string()
    assert not rows["pattern"].eq("nomad").any(), rows["pattern_reason"].tolist()


@pytest.mark.slow
def test_the_override_is_exercised_and_explained(residency):
    # Two-sided: the two-range animals are the ones the old rule overruled (unbounded whole-track model), and
    # each kept class says which ranges were fitted alone.
    moved = residency[residency["kind"] != "walker"]
    assert (~moved["best"].isin(["ou", "ou_ctcrw"])).mean() >= 0.75
    kept = moved[moved["pattern"].isin(TWO_RANGE)]
    assert kept["ranges_resident"].eq(True).all()
    assert kept["ranges_motion"].str.contains("far range").all()
