"""Calibration and power of the displacement tests, by simulation of animals of known movement.

Checks of statistical tests by simulation (DEVELOPERS.md testing policy): under a true null the
Monte Carlo p-value is exactly uniform on {1/(M+1), ..., 1} (Davison & Hinkley 1997, §4.2), so with
M = 199 P(p_value <= 0.05) = 10/200 = 0.05 exactly (5 values on each side); the count over 200
independent animals must lie in the 99 % binomial band.  Fixed seeds keep every run identical.
"""

from __future__ import annotations

import pandas as pd
import pytest
from scipy import stats

from nulls_doubles import (biased_track, crw_track, fits_double, gamma_steps, home_range_track, levy_track,
                           von_mises_turns)
from roamstat import compare
from roamstat.config import Config
from roamstat.models import fit_animal
from roamstat.seeds import animal_rng

pytestmark = pytest.mark.slow
ALPHA = 0.05
N_ANIMALS = 200
BAND = stats.binom.interval(0.99, N_ANIMALS, ALPHA)  # 99 % band of the count of p <= alpha
STEP, TURN = stats.gamma(2.0, scale=30.0), stats.vonmises(1.5)


def deployment(simulate_track, n_animals, cfg, seed, fitted):
    """Null-test table of simulated animals; fits are the true models or fitted by models.fit_animal."""
    parts = []
    for i in range(n_animals):
        aid = f"sim-{i:03d}"
        fixes, steps = simulate_track(animal_rng(seed, aid, "track"))
        if fitted:
            fits = fit_animal(steps, cfg, animal_rng(seed, aid, "fit"))
        else:
            fits = fits_double(gamma_steps(2.0, 30.0), von_mises_turns(1.5))
        rows, _ = compare.test_animal(fixes, steps, fits, 3600.0, cfg, animal_rng(seed, aid, "null"))
        rows.insert(0, "animal_id", aid)
        parts.append(rows)
    return compare.finalise(pd.concat(parts, ignore_index=True), cfg)


def test_true_crw_animals_are_rejected_at_the_nominal_rate():
    cfg = Config(replicates=199, nulls=("crw",), alpha=ALPHA)
    table = deployment(lambda rng: crw_track(60, STEP, TURN, rng), N_ANIMALS, cfg, 101, fitted=False)
    n_p = int((table["p_value"] <= ALPHA).sum())
    n_curve = int((table["p_curve"] <= ALPHA).sum())
    assert BAND[0] <= n_p <= BAND[1], n_p
    # ERL p-values are exact up to ties, which only make them conservative (Myllymäki et al. 2017)
    assert BAND[0] <= n_curve <= BAND[1], n_curve
    # q-values: Benjamini & Hochberg (1995) step-up, reference scipy.stats.false_discovery_control
    assert table["q_value"].to_numpy() == pytest.approx(stats.false_discovery_control(table["p_value"]), rel=1e-12)


def test_fitted_crw_and_shuffle_nulls_hold_their_level_on_crw_animals():
    # the real pipeline: models.fit_animal on each simulated track, then the crw and shuffle nulls;
    # estimated parameters make the test approximate, yet the rate must stay in the two-sided band
    # (a test that never rejects, or rejects too often, fails)
    cfg = Config(replicates=199, nulls=("crw", "shuffle"), alpha=ALPHA)
    table = deployment(lambda rng: crw_track(100, STEP, TURN, rng), N_ANIMALS, cfg, 202, fitted=True)
    for null, rows in table.groupby("null_model"):
        n_p = int((rows["p_value"] <= ALPHA).sum())
        assert BAND[0] <= n_p <= BAND[1], (null, n_p)


def test_goal_directed_walks_are_farther_and_home_ranging_walks_closer():
    # Power.  Biased random walk (every heading von Mises about a goal): net displacement grows like n,
    # not sqrt(n).  Discrete Ornstein-Uhlenbeck walk (attraction to the start): displacement stays bounded.
    cfg = Config(replicates=199, alpha=ALPHA)
    farther = deployment(lambda rng: biased_track(300, rng), 5, cfg, 303, fitted=True)
    assert (farther["verdict"] == "farther").all()
    assert (farther["p_curve"] <= ALPHA).all()
    closer = deployment(lambda rng: home_range_track(2000, rng), 5, cfg, 404, fitted=True)
    assert (closer["verdict"] == "closer").all()


def test_levy_walks_are_not_called_farther_under_the_levy_null():
    # Lévy walks (uniform turns, Pareto tail in a fixed share; Viswanathan et al. 1999), tail fitted by
    # models.fit_animal.  A "farther" call at p <= alpha is one side of the two-sided test: nominal alpha / 2.
    cfg = Config(replicates=199, nulls=("levy",), alpha=ALPHA)
    n = 150
    table = deployment(lambda rng: levy_track(300, rng), n, cfg, 505, fitted=True)
    tested = table[table["verdict"] != "insufficient"]
    assert len(tested) >= 0.9 * n  # the tail model was fitted for nearly all of them
    farther_p = int(((tested["p_value"] <= ALPHA) & (tested["observed_net_m"] > tested["null_median_m"])).sum())
    low, high = stats.binom.interval(0.99, len(tested), ALPHA / 2)
    assert low <= farther_p <= high, farther_p
