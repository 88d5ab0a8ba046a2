"""The HMM recursions against brute-force enumeration of every state sequence.

The likelihood of an HMM is the sum over all K^T state sequences of
delta(c_1) prod gamma(c_{t-1}, c_t) prod f_{c_t}(x_t) (Zucchini, MacDonald &
Langrock 2016, §2.3.1, eq. 2.8); with a segment break the segments multiply.
Densities in the brute force come from scipy.stats' public logpdf.
"""

from __future__ import annotations

import itertools

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from roamstat.errors import RoamstatError
from roamstat.states.chain import build_chain
from roamstat.states.decode import decode
from roamstat.states.families import check_families
from roamstat.states.likelihood import Observations
from roamstat.states.params import Layout, stationary


def _tiny_steps(rng):
    """Seven hourly steps in two segments, one missed fix (a two-hour step) and a zero step."""
    t0 = pd.Timestamp("2025-01-01", tz="UTC")
    starts = [0, 1, 2, 4, 5, 10, 11, 12]  # hours; 2 -> 4 is a two-hour step; 10.. is a new segment
    ends = [1, 2, 4, 5, 6, 11, 12, 13]
    return pd.DataFrame({
        "animal_id": "a", "segment": [0, 0, 0, 0, 0, 1, 1, 1],
        "t_start": [t0 + pd.Timedelta(hours=h) for h in starts], "t_end": [t0 + pd.Timedelta(hours=h) for h in ends],
        "dt_s": 3600.0 * (np.array(ends) - np.array(starts)),
        "step_m": [120.0, 0.0, 300.0, 80.0, 45.0, 500.0, 60.0, 210.0],
        "turn_rad": [np.nan, np.nan, 0.4, -2.5, 2.9, np.nan, 0.1, -1.2],
    })


def _brute_force(chain, layout, theta):
    """log L, local probabilities and the most probable path by enumerating all sequences."""
    p = layout.unpack(theta)
    k, s = p.n_states, chain.n_slots
    dens = np.ones((s, k))
    for t in range(s):
        x, a = chain.step_m[t], chain.turn_rad[t]
        for j in range(k):
            if np.isfinite(x):
                z = p.zero[j] if p.zero is not None else 0.0
                dens[t, j] *= z if x == 0 else (1 - z) * stats.gamma.pdf(x, p.shape[j], scale=p.scale[j])
            if np.isfinite(a):
                dens[t, j] *= stats.vonmises.pdf(a, p.conc[j], loc=p.mu[j])
    delta = p.delta
    total, best, best_path = 0.0, -1.0, None
    marg = np.zeros((s, k))
    for seq in itertools.product(range(k), repeat=s):
        prob = 1.0
        for t, c in enumerate(seq):
            prob *= (delta[c] if chain.restart[t] else p.gamma[seq[t - 1], c]) * dens[t, c]
        total += prob
        marg[np.arange(s), seq] += prob
        if prob > best:
            best, best_path = prob, np.array(seq)
    return np.log(total), marg / total, best_path


@pytest.mark.parametrize("k", [2, 3])
def test_forward_equals_sum_over_all_state_sequences(k):
    # Zucchini, MacDonald & Langrock (2016), eq. 2.8: L = sum over sequences (brute force)
    rng = np.random.default_rng(5)
    chain = build_chain(_tiny_steps(rng))
    assert chain.n_slots == 9 and chain.restart.sum() == 2  # slot 3 missing, segment 1 restarts
    obs = Observations(chain)
    layout = Layout(k, "gamma", "von_mises", zero_mass=True)
    theta = rng.normal(0.0, 0.7, layout.size)
    theta[:k] = np.log(rng.uniform(0.8, 3.0, k))
    theta[k:2 * k] = np.log(rng.uniform(50.0, 300.0, k))
    log_l, marg, path = _brute_force(chain, layout, theta)
    assert obs.loglik(layout.unpack(theta)) == pytest.approx(log_l, rel=1e-12, abs=1e-10)
    dec = decode(obs, layout.unpack(theta))
    np.testing.assert_allclose(dec.local, marg, atol=1e-12)
    np.testing.assert_array_equal(dec.state, path)


def test_stationary_distribution_is_left_eigenvector():
    # delta Gamma = delta (Zucchini et al. 2016, §1.3.3); reference: numpy's eigen-decomposition
    gamma = np.array([[0.8, 0.15, 0.05], [0.1, 0.7, 0.2], [0.3, 0.3, 0.4]])
    w, v = np.linalg.eig(gamma.T)
    ref = np.real(v[:, np.argmin(np.abs(w - 1))])
    np.testing.assert_allclose(stationary(gamma), ref / ref.sum(), rtol=1e-12)


def test_unknown_family_is_a_user_error():
    with pytest.raises(RoamstatError, match="state step family"):
        check_families("lognormal", "von_mises")
    with pytest.raises(RoamstatError, match="state turn family"):
        check_families("gamma", "uniform")
