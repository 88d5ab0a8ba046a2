"""The report's empirical semi-variogram against a brute-force pass over every pair of fixes."""

import numpy as np

from roamstat.report.motion_figures import empirical_semivariance


def _all_pairs(t, x, y, n_bins):
    # Independent reference: every pair (i < j) from outer differences, binned by np.digitize
    # on log-spaced edges; semi-variance per axis = half the mean squared displacement over two
    # axes, i.e. a quarter of the squared distance (Fleming et al. 2014, eq. 1; common practice).
    i, j = np.triu_indices(t.size, k=1)
    lag = t[j] - t[i]
    half = 0.25 * ((x[j] - x[i]) ** 2 + (y[j] - y[i]) ** 2)
    keep = lag > 0
    lag, half = lag[keep], half[keep]
    edges = np.geomspace(lag.min(), lag.max() * (1 + 1e-9), n_bins + 1)
    which = np.clip(np.digitize(lag, edges) - 1, 0, n_bins - 1)
    rows = [(lag[which == k].mean(), half[which == k].mean(), np.sum(which == k))
            for k in range(n_bins) if np.any(which == k)]
    return tuple(np.array(col) for col in zip(*rows))


def test_every_pair_binned_as_a_direct_computation():
    rng = np.random.default_rng(5)
    t = np.sort(rng.uniform(0, 1e6, 300))
    t[10] = t[11]  # a duplicated time: its zero lag is skipped
    x, y = np.cumsum(rng.normal(0, 50, 300)), np.cumsum(rng.normal(0, 50, 300))
    lag, gamma, count = empirical_semivariance(t, x, y, n_bins=25)
    ref_lag, ref_gamma, ref_count = _all_pairs(t, x, y, 25)
    np.testing.assert_array_equal(count, ref_count)
    np.testing.assert_allclose(lag, ref_lag, rtol=1e-10)
    np.testing.assert_allclose(gamma, ref_gamma, rtol=1e-10)
    assert count.sum() == 300 * 299 // 2 - 1


def test_thinned_offsets_use_only_their_pairs():
    rng = np.random.default_rng(6)
    t = np.cumsum(rng.uniform(1800, 5400, 400))
    x, y = np.cumsum(rng.normal(0, 100, 400)), np.cumsum(rng.normal(0, 100, 400))
    lag, gamma, count = empirical_semivariance(t, x, y, n_bins=20, max_pairs=4000)
    offsets = np.unique(np.rint(np.geomspace(1, 399, 4000 // 400)).astype(int))
    assert count.sum() == sum(400 - d for d in offsets)  # far fewer than the 79,800 pairs
    # Brownian motion: semi-variance grows with lag, so the first bin must sit far below the last.
    assert gamma[0] < gamma[-1] / 10
    assert np.all(np.diff(lag) > 0)
