"""Protocol-following test doubles and simulated tracks for the null-walk tests.

The doubles wrap scipy.stats frozen distributions (a general-purpose reference
library): their moments come from scipy (``moment``, numerical ``expect``), not
from roamstat, so the engine and the Kareiva & Shigesada expectation are checked
against something outside the project.  Tracks are simulated from known
parameters with plain numpy, independently of the engine.
"""

from __future__ import annotations

import math
from types import SimpleNamespace

import numpy as np
import pandas as pd
from scipy import stats

START = pd.Timestamp("2022-05-01", tz="UTC")


class StepDouble:
    """A step-length model: scipy frozen distribution behind the fitted-model protocol."""

    def __init__(self, frozen, name="step_double", params=None):
        self.frozen, self.name, self.params = frozen, name, dict(params or {})
        self.n, self.k, self.loglik = 0, 0, 0.0
        self.support = frozen.support()

    def logpdf(self, x):
        return self.frozen.logpdf(x)

    def sample(self, n, rng):
        return np.asarray(self.frozen.rvs(size=n, random_state=rng), dtype=float)

    def mean(self):
        return float(self.frozen.mean())

    def second_moment(self):
        return float(self.frozen.moment(2))


class TurnDouble:
    """A turning-angle model on (-pi, pi]: scipy circular distribution shifted to mean direction mu."""

    def __init__(self, frozen, name="turn_double"):
        self.frozen, self.name, self.params = frozen, name, {}
        self.n, self.k, self.loglik = 0, 0, 0.0

    def logpdf(self, x):
        return self.frozen.logpdf(x)

    def sample(self, n, rng):
        x = np.asarray(self.frozen.rvs(size=n, random_state=rng), dtype=float)
        return np.pi - np.mod(np.pi - x, 2 * np.pi)

    def mean_cos(self):
        return float(self.frozen.expect(np.cos))  # numerical integration by scipy

    def mean_sin(self):
        return float(self.frozen.expect(np.sin))


def fits_double(step=None, turn=None, tail=None, step_values=(), turn_values=(), note=""):
    """An AnimalFits-like object with only the attributes of the protocol."""
    return SimpleNamespace(best_step=step, best_turn=turn, tail=tail, note=note,
                           step_values=np.asarray(step_values, dtype=float),
                           turn_values=np.asarray(turn_values, dtype=float))


def gamma_steps(shape=2.0, scale=30.0):
    return StepDouble(stats.gamma(shape, scale=scale), "gamma", {"shape": shape, "scale": scale})


def von_mises_turns(kappa=1.5, mu=0.0):
    return TurnDouble(stats.vonmises(kappa, loc=mu), "von_mises")


def track_from_increments(dx, dy, dt_s=3600.0, animal_id="a"):
    """Fixes (time, x_m, y_m) and steps (step_m, turn_rad) of a track given its increments."""
    x = np.r_[0.0, np.cumsum(dx)]
    y = np.r_[0.0, np.cumsum(dy)]
    fixes = pd.DataFrame({"animal_id": animal_id, "time": START + pd.to_timedelta(np.arange(x.size) * dt_s, unit="s"),
                          "x_m": x, "y_m": y, "segment": 0})
    step = np.hypot(dx, dy)
    heading = np.arctan2(dx, dy)  # clockwise from north, as the steps table
    turn = np.r_[np.nan, np.pi - np.mod(np.pi - np.diff(heading), 2 * np.pi)]
    steps = pd.DataFrame({"animal_id": animal_id, "segment": 0, "step_m": step, "turn_rad": turn,
                          "dt_s": dt_s})
    return fixes, steps


def crw_track(n_steps, step_frozen, turn_frozen, rng, **kw):
    """A correlated random walk of known step and turn distributions."""
    steps = step_frozen.rvs(size=n_steps, random_state=rng)
    heading = np.cumsum(turn_frozen.rvs(size=n_steps, random_state=rng))
    return track_from_increments(steps * np.sin(heading), steps * np.cos(heading), **kw)


def biased_track(n_steps, rng, goal=0.7, kappa=1.0, shape=2.0, scale=30.0, **kw):
    """Biased random walk: every heading von Mises about a fixed goal direction (persistent travel)."""
    steps = rng.gamma(shape, scale, n_steps)
    heading = goal + rng.vonmises(0.0, kappa, n_steps)
    return track_from_increments(steps * np.sin(heading), steps * np.cos(heading), **kw)


def home_range_track(n_steps, rng, beta=0.2, sigma=50.0, **kw):
    """Discrete Ornstein-Uhlenbeck walk x_{k+1} = (1 - beta) x_k + sigma e_k about the start (home ranging)."""
    xy = np.zeros((n_steps + 1, 2))
    noise = rng.normal(0.0, sigma, (n_steps, 2))
    for k in range(n_steps):
        xy[k + 1] = (1 - beta) * xy[k] + noise[k]
    d = np.diff(xy, axis=0)
    return track_from_increments(d[:, 0], d[:, 1], **kw)


def levy_track(n_steps, rng, exponent=2.2, xmin=60.0, p_tail=0.3, body_scale=25.0, **kw):
    """Lévy walk: uniform headings, Pareto tail above xmin in proportion p_tail, gamma body below xmin."""
    tail = xmin * (1.0 - rng.random(n_steps)) ** (-1.0 / (exponent - 1.0))
    body = rng.gamma(2.0, body_scale, n_steps)
    while np.any(body >= xmin):  # the body lives below xmin
        redo = body >= xmin
        body[redo] = rng.gamma(2.0, body_scale, int(redo.sum()))
    steps = np.where(rng.random(n_steps) < p_tail, tail, body)
    heading = rng.uniform(-math.pi, math.pi, n_steps)
    return track_from_increments(steps * np.sin(heading), steps * np.cos(heading), **kw)
