"""The walk engine and the three nulls' variate sources."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from nulls_doubles import StepDouble, fits_double, gamma_steps, von_mises_turns
from roamstat.nulls import (CrwNull, LevyNull, NullUnavailable, ShuffleNull, build_null, short_steps,
                            simulate_nsd)
from roamstat.nulls.walk import RENORMALISE, UnitTurns, turn_resampler


def replay(values):
    """A source handing out the given values in order, call after call."""
    flat, used = np.asarray(values, dtype=float).ravel(), [0]

    def draw(n, rng):
        out = flat[used[0]:used[0] + n].copy()
        used[0] += n
        return out

    return draw


def test_engine_matches_direct_positions_on_the_same_variates():
    # Reference: positions as the plain cumulative sum of l (cos, sin) of the cumulative heading
    # (definition of a random walk in the plane, common knowledge), for every step.
    rng = np.random.default_rng(1)
    steps, turns = rng.gamma(2.0, 10.0, (7, 300)), rng.vonmises(0.2, 1.0, (7, 300))
    heading = np.cumsum(turns, axis=1)
    x, y = np.cumsum(steps * np.cos(heading), axis=1), np.cumsum(steps * np.sin(heading), axis=1)
    reference = np.hstack([np.zeros((7, 1)), x ** 2 + y ** 2])
    idx = np.array([0, 1, 2, 3, 50, 51, 299, 300])
    for chunk in (300, 600, 10 ** 6):  # one replicate per chunk, two, all at once
        nsd = simulate_nsd(replay(steps), replay(turns), 300, 7, rng, idx, chunk_elements=chunk)
        np.testing.assert_allclose(nsd, reference[:, idx], rtol=1e-10)
    # evaluation stops at the last requested index: only that many steps are drawn
    asked = []
    simulate_nsd(lambda n, r: (asked.append(n), np.ones(n))[1], lambda n, r: np.zeros(n), 300, 2, rng,
                 np.array([0, 10, 40]))
    assert asked == [80]


def test_turns_given_as_cosines_and_sines_walk_the_same_track():
    # same reference as above; the turns come as (cos, sin) pairs, the walk rotates its heading by them,
    # over a walk long enough to cross the heading's renormalisation several times
    rng = np.random.default_rng(2)
    n = 3 * RENORMALISE + 5
    steps, turns = rng.gamma(2.0, 10.0, (2, n)), rng.vonmises(-0.3, 2.0, (2, n))
    heading = np.cumsum(turns, axis=1)
    x, y = np.cumsum(steps * np.cos(heading), axis=1), np.cumsum(steps * np.sin(heading), axis=1)
    idx = np.array([0, 1, 4096, n])
    unit = UnitTurns(replay(turns), lambda k, r: (replay(np.cos(turns))(k, r), replay(np.sin(turns))(k, r)))
    nsd = simulate_nsd(replay(steps), unit, n, 2, rng, idx)
    np.testing.assert_allclose(nsd[:, 1:], (x ** 2 + y ** 2)[:, idx[1:] - 1], rtol=1e-9)


def test_resampled_turns_as_cosines_and_sines_are_the_resampled_angles():
    values = np.random.default_rng(3).uniform(-np.pi, np.pi, 50)
    source = turn_resampler(values)
    angles = source(1000, np.random.default_rng(4))
    cos_t, sin_t = source.unit(1000, np.random.default_rng(4))
    assert set(angles) <= set(values)
    np.testing.assert_array_equal(cos_t, np.cos(angles))
    np.testing.assert_array_equal(sin_t, np.sin(angles))


def test_chunks_cover_every_replicate_once():
    # chunking bookkeeping: straight walks of unit steps reach n^2 at step n in every replicate
    ones, zeros = (lambda n, r: np.ones(n)), (lambda n, r: np.zeros(n))
    nsd = simulate_nsd(ones, zeros, 50, 23, np.random.default_rng(0), np.array([0, 7, 50]), chunk_elements=120)
    assert nsd.shape == (23, 3)
    np.testing.assert_array_equal(nsd, np.tile([0.0, 49.0, 2500.0], (23, 1)))


@pytest.mark.parametrize("idx", [[3, 2], [0, 51], [-1, 4], []])
def test_bad_evaluation_indices_are_refused(idx):
    with pytest.raises(ValueError):
        simulate_nsd(lambda n, r: np.ones(n), lambda n, r: np.zeros(n), 50, 2, np.random.default_rng(0), idx)


def test_shuffle_draws_only_observed_values_in_their_frequencies():
    # resampling with replacement (Manly 2007): each observed value equally likely
    steps, turns = np.array([1.0, 2.0, 2.0, 7.0]), np.array([-0.5, 0.25, 1.0])
    null = ShuffleNull(fits_double(step_values=steps, turn_values=turns))
    rng = np.random.default_rng(2)
    drawn = null.step_source(40000, rng)
    assert set(np.unique(drawn)) == {1.0, 2.0, 7.0}
    assert np.mean(drawn == 2.0) == pytest.approx(0.5, abs=0.01)
    assert set(np.unique(null.turn_source(1000, rng))) == set(turns)


def test_levy_keeps_the_observed_tail_share_and_body_with_uniform_turns():
    # Lévy walk null: steps >= xmin from the tail model in the observed share, the body resampled below xmin,
    # uniform turns (Viswanathan et al. 1999).  The tail is a double (Pareto from scipy) with params["xmin"].
    xmin = 50.0
    tail = StepDouble(stats.pareto(1.5, scale=xmin), "pareto_double", {"xmin": xmin})
    observed = np.r_[np.linspace(1, 49, 70), np.linspace(50, 500, 30)]
    null = LevyNull(fits_double(tail=tail, step_values=observed))
    rng = np.random.default_rng(3)
    drawn = null.step_source(50000, rng)
    assert np.mean(drawn >= xmin) == pytest.approx(0.3, abs=0.01)
    assert set(np.unique(drawn[drawn < xmin])) <= set(observed[observed < xmin])
    # the tail part follows the tail model (KS against scipy's Pareto)
    assert stats.kstest(drawn[drawn >= xmin], stats.pareto(1.5, scale=xmin).cdf).pvalue > 0.01
    turns = null.turn_source(20000, rng)
    assert stats.kstest(turns, stats.uniform(-np.pi, 2 * np.pi).cdf).pvalue > 0.01


def test_short_steps_enter_every_null_in_the_observed_share():
    # steps <= min_step are left out of the fits; the nulls put them back in their observed proportion
    step_m = np.r_[np.zeros(25), np.full(75, 10.0), [np.nan]]
    short = short_steps(step_m, n_used=75, min_step=0.0)
    assert short.proportion == pytest.approx(0.25)
    fits = fits_double(gamma_steps(), von_mises_turns(), step_values=np.full(75, 10.0), turn_values=[0.1, -0.1])
    for null in (CrwNull(fits, short), ShuffleNull(fits, short)):
        drawn = null.step_source(40000, np.random.default_rng(4))
        assert np.mean(drawn == 0.0) == pytest.approx(0.25, abs=0.01)


def test_missing_models_make_the_null_unavailable_with_a_reason():
    with pytest.raises(NullUnavailable, match="turning-angle"):
        build_null("crw", fits_double(gamma_steps(), None, note="turn: fewer than 10 turning angles"))
    with pytest.raises(NullUnavailable, match="tail"):
        build_null("levy", fits_double(gamma_steps(), von_mises_turns(), step_values=[1.0, 2.0]))
    with pytest.raises(NullUnavailable, match="turning angles"):
        build_null("shuffle", fits_double(step_values=[1.0, 2.0], turn_values=[np.nan]))
