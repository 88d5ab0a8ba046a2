"""motion_models.csv rows: columns, empty parameters, AICc and the best flag."""
from __future__ import annotations

import numpy as np

from motion_reference import draw, params
from roamstat.motion import TABLE_COLUMNS, LocationError, fit_motion_models, motion_table

# which parameters each model has (issue 13's definition of the four models)
HAS = {"brownian": {"diffusion_m2_s"},
       "ou": {"diffusion_m2_s", "sigma_m", "tau_position_s"},
       "ctcrw": {"diffusion_m2_s", "tau_velocity_s"},
       "ou_ctcrw": {"diffusion_m2_s", "sigma_m", "tau_position_s", "tau_velocity_s"}}


def test_table_rows_follow_the_contract():
    rng = np.random.default_rng(3)
    t = np.cumsum(rng.exponential(3600.0, 200))
    t -= t[0]
    xy = draw("brownian", params("brownian", diffusion_m2_s=1.0), t, rng, error_sd=20.0)[0]
    table = motion_table(fit_motion_models(t, xy[:, 0], xy[:, 1], LocationError(None, "estimated")))
    assert list(table.columns) == list(TABLE_COLUMNS)
    assert table["best"].sum() == 1 and table.loc[table["best"], "delta_aicc"].item() == 0.0
    for _, row in table.iterrows():
        for key in ("diffusion_m2_s", "sigma_m", "tau_position_s", "tau_velocity_s"):
            assert np.isfinite(row[key]) == (key in HAS[row["model"]]), (row["model"], key)
        assert row["error_source"] == "estimated" and row["error_sd_m"] > 0
        k, n_obs = row["n_params"], 2 * (row["n_fixes"] - 1)
        # AICc of Hurvich & Tsai (1989)
        expected = -2 * row["loglik"] + 2 * k + 2 * k * (k + 1) / (n_obs - k - 1)
        assert np.isclose(row["aicc"], expected)
    # parameters: 1 (+2 means for resident models) + the estimated error SD
    assert table.set_index("model")["n_params"].to_dict() == {"brownian": 2, "ou": 5, "ctcrw": 3, "ou_ctcrw": 6}


def test_too_few_fixes_give_no_fits():
    t = np.arange(9) * 3600.0
    assert fit_motion_models(t, np.zeros(9), np.zeros(9), LocationError(None, "estimated")) == []
