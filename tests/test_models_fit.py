"""fit_animal: the fits.csv rows, the protocol, exclusions, bootstrap and degenerate input."""

import json
import math
import pickle
import warnings

import numpy as np
import pandas as pd
import pytest
from scipy import special

from roamstat.config import Config
from roamstat.models import COLUMNS, fit_animal, fits_table

KEYS = {  # parameter keys per family, from the fits.csv contract
    "exponential": {"rate"}, "gamma": {"shape", "scale"}, "weibull": {"shape", "scale"},
    "lognormal": {"meanlog", "sdlog"}, "power_law": {"exponent", "xmin"},
    "truncated_power_law": {"exponent", "xmin", "xmax"}, "uniform": set(),
    "von_mises": {"mu", "kappa"}, "wrapped_cauchy": {"mu", "rho"},
}


def animal(n=500, seed=0, steps=None, turns=None):
    rng = np.random.default_rng(seed)
    steps = rng.gamma(2.0, 50.0, n) if steps is None else np.asarray(steps, float)
    turns = rng.vonmises(0.1, 1.5, steps.size) if turns is None else np.asarray(turns, float)
    return pd.DataFrame({"step_m": steps, "turn_rad": turns, "segment": 0})


def quiet_fit(steps_a, cfg=None, seed=0):
    cfg = Config() if cfg is None else cfg
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # no warnings spam from scipy
        return fit_animal(steps_a, cfg, np.random.default_rng(seed))


def test_rows_follow_the_contract():
    fits = quiet_fit(animal())
    rows = fits.rows
    assert list(rows.columns) == COLUMNS
    assert rows[["variable", "comparison"]].value_counts().to_dict() == {
        ("step", "full"): 4, ("step", "tail"): 4, ("turn", "turn"): 3}
    for r in rows.itertuples():
        params = json.loads(r.params)
        assert set(params) == KEYS[r.model]
        assert r.params == json.dumps(params, sort_keys=True)  # deterministic text
        assert all(type(v) is float for v in params.values())
    for _, group in rows.groupby("comparison"):
        assert group["best"].sum() == 1 and group["weight"].sum() == pytest.approx(1.0)
        assert group.loc[group["best"], "delta_aic"].item() == 0.0
        assert np.all(group["ks_stat"].between(0, 1))
    tail = rows[rows["comparison"] == "tail"].set_index("model")
    assert np.isnan(tail.at["power_law", "vuong_stat"])
    assert tail.drop(index="power_law")["vuong_p"].between(0, 1).all()
    assert rows.loc[rows["comparison"] != "tail", "vuong_p"].isna().all()
    assert rows["aicc"].ge(rows["aic"]).all()
    table = fits_table({"b": fits, "a": fits})
    assert list(table.columns[:2]) == ["animal_id", "variable"] and table["animal_id"].iloc[0] == "a"


def test_protocol_without_branching_on_names():
    fits = quiet_fit(animal())
    assert fits.best_step.name in {"exponential", "gamma", "weibull", "lognormal"}
    assert fits.tail.name in {"power_law", "truncated_power_law"}
    tail_rows = fits.rows[fits.rows["comparison"] == "tail"].set_index("model")
    assert fits.tail.support[0] == json.loads(tail_rows.at[fits.tail.name, "params"])["xmin"]
    rng = np.random.default_rng(1)
    for model in fits.models.values():
        for attr in ("name", "params", "n", "k", "loglik", "aic", "aicc"):
            assert getattr(model, attr) is not None
        assert model.aic == pytest.approx(2 * model.k - 2 * model.loglik)
        draws = model.sample(50, rng)
        assert draws.shape == (50,) and np.all(np.isfinite(model.logpdf(draws)))
    for model in (fits.best_step, fits.tail):
        assert model.mean() > 0 and model.second_moment() >= model.mean() ** 2
    assert abs(fits.best_turn.mean_cos()) <= 1 and abs(fits.best_turn.mean_sin()) <= 1
    clone = pickle.loads(pickle.dumps(fits))  # process-pool workers hand fits back by pickle
    assert clone.best_step.params == fits.best_step.params
    assert clone.best_step.logpdf(np.array([10.0])) == pytest.approx(fits.best_step.logpdf(np.array([10.0])))


def test_min_step_exclusions_are_counted():
    steps_a = animal(200)
    steps_a.loc[[3, 4, 50], "step_m"] = [0.0, 2.0, 4.0]
    fits = quiet_fit(steps_a, Config(min_step=5.0))
    assert fits.n_excluded_steps == 3 and fits.step_values.size == 197
    assert fits.step_values.min() > 5.0
    step_rows = fits.rows[fits.rows["variable"] == "step"]
    assert step_rows["note"].str.contains("3 steps <= min_step 5 m left out").all()
    # turns on either side of a short step are left out: rows 3, 4, 5, 50, 51
    assert fits.turn_values.size == 195
    # default: zero-length steps only
    assert quiet_fit(steps_a).n_excluded_steps == 1


def test_bootstrap_intervals():
    fits = quiet_fit(animal(400), Config(bootstrap=60), seed=4)
    rows = fits.rows.set_index(["comparison", "model"])
    ci = {key: json.loads(text) for key, text in rows["params_ci"].items()}
    assert ci[("turn", "uniform")] == {}
    assert set(ci[("tail", "power_law")]) == {"exponent"}  # xmin is conditioned on
    assert set(ci[("tail", "truncated_power_law")]) == {"exponent", "xmax"}
    for key, intervals in ci.items():
        params = json.loads(rows.at[key, "params"])
        for name, (lo, hi) in intervals.items():
            hi = math.inf if hi is None else hi  # an endpoint parameter's bound may be unbounded
            assert lo - 1e-9 <= params[name] <= hi + 1e-9
    # xmax is estimated at the largest step: its interval starts there (see models/bootstrap.py)
    assert ci[("tail", "truncated_power_law")]["xmax"][0] == json.loads(
        rows.at[("tail", "truncated_power_law"), "params"])["xmax"]
    # interval half-widths match 1.96 asymptotic standard errors from the Fisher information:
    # gamma shape Var = k / (n (k trigamma(k) - 1)) (Choi & Wette 1969, Technometrics 11: 683-690);
    # von Mises kappa Var = 1 / (n A'(kappa)), A' = 1 - A/kappa - A^2 (Mardia & Jupp 2000, §5.3)
    n = fits.step_values.size
    k = json.loads(rows.at[("full", "gamma"), "params"])["shape"]
    se_k = math.sqrt(k / (n * (k * special.polygamma(1, k) - 1)))
    lo, hi = ci[("full", "gamma")]["shape"]
    assert (hi - lo) / 2 == pytest.approx(1.96 * se_k, rel=0.35)
    kappa = json.loads(rows.at[("turn", "von_mises"), "params"])["kappa"]
    a = special.i1(kappa) / special.i0(kappa)
    se_kappa = math.sqrt(1 / (fits.turn_values.size * (1 - a / kappa - a * a)))
    lo, hi = ci[("turn", "von_mises")]["kappa"]
    assert (hi - lo) / 2 == pytest.approx(1.96 * se_kappa, rel=0.35)
    again = quiet_fit(animal(400), Config(bootstrap=60), seed=4)
    assert again.rows["params_ci"].tolist() == fits.rows["params_ci"].tolist()  # seeded, reproducible


@pytest.mark.parametrize("steps,turns,variable,expect", [
    ([12.5] * 40, None, "step", "all 40 step lengths equal"),
    ([10.0, 20.0, 5.0, 7.0, 40.0], None, "step", "5 step lengths (need 10)"),
    (None, [np.nan] * 300, "turn", "0 turning angles (need 10)"),
    ([0.0] * 30, None, "step", "0 step lengths (need 10)"),
])
def test_degenerate_input_gives_a_clear_row(steps, turns, variable, expect):
    fits = quiet_fit(animal(300, steps=steps, turns=turns))
    none = fits.rows[(fits.rows["model"] == "none") & (fits.rows["variable"] == variable)]
    assert len(none) == 1 and none["note"].str.contains("not enough data").all()
    assert none["note"].str.contains(expect, regex=False).all()
    assert not none["best"].any() and none["aic"].isna().all()
    assert expect in fits.note
    if variable == "step":
        assert fits.best_step is None and fits.tail is None
    else:
        assert fits.best_turn is None and fits.best_step is not None


def test_empty_steps_table():
    fits = quiet_fit(pd.DataFrame({"step_m": [], "turn_rad": [], "segment": []}))
    assert fits.rows["model"].tolist() == ["none", "none"]
    assert fits.best_step is None and fits.best_turn is None and fits.tail is None


def test_long_track_fits():
    # 20,000 steps: the xmin scan switches to quantile candidates (powerlaw_tail.SCAN_CELLS)
    fits = quiet_fit(animal(20000, seed=3))
    assert fits.tail is not None and math.isfinite(fits.tail.loglik)
