"""The open Antarctic tracking file (satellite Doppler location classes): class-based error."""
from __future__ import annotations

import numpy as np

from conftest import realdata
from roamstat.config import Config
from roamstat.motion import DEFAULT_CLASS_SD_M, best_fit, fit_motion_models, location_error, smooth
from roamstat.run import load, observed_fixes


def test_antarctic_animal_uses_class_error_and_smooths_within_it():
    fixes = observed_fixes(load([realdata("antarctic_tracks_dwc.csv")], Config(), with_steps=False).fixes)
    animal = fixes.groupby("animal_id").size().loc[lambda n: n >= 150].index[0]
    fx = fixes[fixes["animal_id"] == animal]
    t_s = (fx["time"] - fx["time"].iloc[0]).dt.total_seconds().to_numpy()
    error = location_error(fx, None, None)
    assert error.source == "quality_class"
    assert set(np.unique(error.sd_m)) <= set(DEFAULT_CLASS_SD_M.values())
    fits = fit_motion_models(t_s, fx["x_m"], fx["y_m"], error)
    assert len(fits) == 4 and all(np.isfinite(f.loglik) for f in fits)
    out = smooth(best_fit(fits), t_s, fx["x_m"], fx["y_m"], error)
    # conditioning on a fix can only shrink its uncertainty: posterior SD <= that fix's error SD
    # (a property of Gaussian conditioning, e.g. Rasmussen & Williams 2006, eq. 2.24)
    assert np.all(out["se_m"].to_numpy() <= error.sd_m * (1 + 1e-9))
