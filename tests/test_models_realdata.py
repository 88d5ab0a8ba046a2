"""Fits on real tracks: emperor penguins of the RAATD subset in ../shared/realdata/.

Source: Ropert-Coudert et al. (2020), Scientific Data 7: 94 (RAATD), emperor-penguin part
PANGAEA doi:10.1594/PANGAEA.633712, CC BY 4.0, as converted to Darwin Core (see README there).
Positions are given to 0.001 degrees, so step lengths repeat: a real test of ties.
"""

import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from roamstat.config import Config
from roamstat.geo import geodesic_inverse_full
from roamstat.models import fit_animal
from roamstat.models.base import wrap_angle
from roamstat.models.powerlaw_tail import XMIN_QUANTILE, fit_power_law

DATA = Path(__file__).parents[2] / "shared" / "realdata" / "antarctic_tracks_dwc.csv"


@pytest.fixture(scope="module")
def penguin_steps():
    if not DATA.exists():
        pytest.skip(f"real data not found at {DATA} (open dataset, not shipped with the repo)")
    d = pd.read_csv(DATA, usecols=["eventID", "eventDate", "decimalLatitude", "decimalLongitude"])
    d["time"] = pd.to_datetime(d["eventDate"], format="mixed", utc=True)
    out = {}
    for aid in d["eventID"].value_counts().index[:3]:  # the three longest tracks
        a = d[d["eventID"] == aid].sort_values("time")
        lat, lon = a["decimalLatitude"].to_numpy(), a["decimalLongitude"].to_numpy()
        dist, depart, arrive = geodesic_inverse_full(lat[:-1], lon[:-1], lat[1:], lon[1:])
        # zero-length steps have no heading (data contract)
        depart, arrive = np.where(dist > 0, depart, np.nan), np.where(dist > 0, arrive, np.nan)
        # project convention (DEVELOPERS.md, data contract): departure azimuth of step i minus the
        # arrival azimuth of step i-1, so a walk along one geodesic has zero turns
        turn = np.concatenate([[np.nan], wrap_angle(depart[1:] - arrive[:-1])])
        out[aid] = pd.DataFrame({"step_m": dist, "turn_rad": turn, "segment": 0})
    return out


def test_real_tracks_fit_cleanly(penguin_steps):
    for aid, steps_a in penguin_steps.items():
        with warnings.catch_warnings():
            warnings.simplefilter("error")
            fits = fit_animal(steps_a, Config(min_step=10.0), np.random.default_rng(0))
        rows = fits.rows
        assert (rows["model"] != "none").all(), (aid, fits.note)
        assert rows.groupby("comparison")["best"].sum().eq(1).all()
        assert fits.n_excluded_steps == int((steps_a["step_m"] <= 10.0).sum())
        assert np.isfinite(fits.best_step.mean()) and np.isfinite(fits.best_turn.mean_cos())


def test_real_tail_against_the_powerlaw_package(penguin_steps):
    powerlaw = pytest.importorskip("powerlaw", reason="test-only reference: pip install powerlaw")
    for aid, steps_a in penguin_steps.items():
        x = steps_a["step_m"].to_numpy()
        x = x[x > 10.0]
        ours = fit_power_law(x)
        xs = np.sort(x)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            # Alstott, Bullmore & Plenz (2014), PLoS ONE 9: e85777
            at_ours = powerlaw.Fit(x, xmin=ours.xmin, verbose=False)
            ref = powerlaw.Fit(x, xmin=(xs[0], xs[int(XMIN_QUANTILE * x.size)]), verbose=False)
        assert ours.params["exponent"] == pytest.approx(at_ours.power_law.alpha, rel=1e-9), aid
        # the scans differ in candidate range and ECDF convention (see test_models_powerlaw.py),
        # yet pick the same (or a neighbouring) xmin on these tracks
        assert ours.xmin == pytest.approx(ref.xmin, rel=0.02), aid
        assert ours.params["exponent"] == pytest.approx(ref.power_law.alpha, rel=0.02), aid
