"""The motion fits' forward-difference gradient against scipy's own (scipy.optimize.approx_derivative).

L-BFGS-B given no gradient differences the objective with an absolute step of 1e-8 inside its box
(scipy.optimize.minimize documentation, ``eps``); roamstat.motion.fit computes the same differences
itself, so the fits must follow the path they followed with scipy's: same gradient to the bit,
same optimum to the bit (reference: scipy.optimize, a general-purpose library).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import optimize
from scipy.optimize._numdiff import approx_derivative

from roamstat.motion.fit import _minimize, _with_gradient

LO, HI = np.array([-1.0, -2.0, 0.0]), np.array([1.0, 3.0, 0.5])


def bumpy(x):
    return float(np.sum(np.sin(3.0 * x) * np.exp(x)) + x[0] ** 3)


def test_gradient_equals_scipys_differences_inside_and_at_the_box():
    rng = np.random.default_rng(0)
    for _ in range(300):
        x = rng.uniform(LO, HI)
        edge = rng.integers(3)
        x[edge] = (LO if rng.random() < 0.5 else HI)[edge]  # on a bound: the step must turn inwards
        value, grad = _with_gradient(bumpy, LO, HI)(x)
        reference = approx_derivative(bumpy, x, method="2-point", f0=value, bounds=(LO, HI), abs_step=1e-8)
        assert value == bumpy(x)
        np.testing.assert_array_equal(grad, reference)


@pytest.mark.parametrize("start", [[0.5, 0.5, 0.25], [-0.9, 2.5, 0.01]])
def test_fit_follows_scipys_path(start):
    rosen_box = [(-2.0, 2.0), (-1.0, 1.5), (0.0, 0.5)]  # the last bound binds at the optimum
    ours = _minimize(optimize.rosen, np.array(start), rosen_box)
    reference = optimize.minimize(optimize.rosen, np.array(start), method="L-BFGS-B", bounds=rosen_box)
    np.testing.assert_array_equal(ours.x, reference.x)
    assert ours.fun == reference.fun and ours.nit == reference.nit
