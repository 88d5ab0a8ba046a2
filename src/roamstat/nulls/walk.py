"""The common walk engine: (step, turn) variates -> net squared displacement curves.

A null walk is fully described by two sources of variates, one for step
lengths and one for turning angles, each a callable ``(n, rng) -> ndarray``
of n independent draws.  :func:`simulate_nsd` walks ``n_reps`` replicates of
``n_steps`` steps, vectorised over replicates and steps, in chunks of at most
``CHUNK_ELEMENTS`` steps so memory stays flat whatever the replicate count.

Headings are the cumulative sum of the turns (the first turn sets the first
heading; net displacement does not depend on the frame's orientation), and
the position after k steps is the sum of l_j (cos Phi_j, sin Phi_j) for
j <= k.  The heading is carried as a unit vector and turned by each turn's
cosine and sine (a rotation), so a turn source that gives those directly
(:class:`UnitTurns`: resampled turns, von Mises draws) costs no trigonometry
per step; for plain angle sources they are computed in bulk.  Only positions
at the requested step indices are kept: one compiled pass per replicate
(numba, releasing the GIL so that :mod:`roamstat.split`'s threads walk side by
side) accumulates heading and position and records the squared distance at
each requested index, so no per-step heading or position array is ever built.
"""

from __future__ import annotations

from typing import Callable

import numba
import numpy as np

#: Steps walked per chunk (replicates x steps); ~16 MB per float64 work array.
CHUNK_ELEMENTS = 2_000_000

#: Steps between renormalisations of the heading vector (its length drifts by ~1e-16 per rotation).
RENORMALISE = 4096

Source = Callable[[int, np.random.Generator], np.ndarray]


class UnitTurns:
    """A turning-angle source that can also give the cosines and sines of its turns directly.

    Parameters
    ----------
    angles : callable
        ``(n, rng) -> ndarray`` of n turning angles (rad).
    unit : callable
        ``(n, rng) -> (cos, sin)`` of the angles ``angles`` would draw from the same generator state.
    """

    def __init__(self, angles: Source, unit: Callable[[int, np.random.Generator], tuple]):
        self.angles, self.unit = angles, unit

    def __call__(self, n: int, rng: np.random.Generator) -> np.ndarray:
        return self.angles(n, rng)


class NullUnavailable(Exception):
    """A null walk cannot be built for this animal; the message says why."""


def simulate_nsd(step_source: Source, turn_source: Source, n_steps: int, n_reps: int,
                 rng: np.random.Generator, eval_idx, chunk_elements: int = CHUNK_ELEMENTS) -> np.ndarray:
    """Net squared displacement of simulated walks at chosen step indices.

    Parameters
    ----------
    step_source, turn_source : callable
        ``(n, rng) -> ndarray`` of n step lengths (m) / turning angles (rad).
    n_steps : int
        Steps per walk.
    n_reps : int
        Number of replicate walks.
    rng : numpy.random.Generator
        The only source of randomness.  Each chunk draws its steps, then its turns.
    eval_idx : array of int
        Strictly increasing step indices in 0..n_steps (0 is the start, NSD 0).
    chunk_elements : int
        Upper bound on replicates x steps held at once.

    Returns
    -------
    ndarray, shape (n_reps, len(eval_idx))
        Squared distance (m^2) from the start after ``eval_idx`` steps.
    """
    idx = np.asarray(eval_idx, dtype=np.int64)
    if idx.ndim != 1 or idx.size == 0 or np.any(np.diff(idx) <= 0) or idx[0] < 0 or idx[-1] > n_steps:
        raise ValueError("eval_idx must be strictly increasing step indices within 0..n_steps")
    out = np.zeros((n_reps, idx.size))
    positive = idx > 0
    ends = idx[positive]
    if ends.size == 0 or n_reps == 0:
        return out
    m = int(ends[-1])  # steps after the last requested index are never needed
    chunk = max(1, min(n_reps, chunk_elements // m))
    for first in range(0, n_reps, chunk):
        c = min(chunk, n_reps - first)
        steps = _block(step_source(c * m, rng), c, m)
        unit = getattr(turn_source, "unit", None)
        if unit is None:
            turns = _block(turn_source(c * m, rng), c, m)
            cos_t, sin_t = np.cos(turns), np.sin(turns)
        else:
            cos_t, sin_t = (_block(v, c, m) for v in unit(c * m, rng))
        out[first:first + c, positive] = _walk_nsd(steps, cos_t, sin_t, ends)
    return out


@numba.njit(cache=True, nogil=True)
def _walk_nsd(steps, cos_t, sin_t, ends):
    """Squared distance from the start after ``ends[j]`` steps, per replicate (row)."""
    c, m = steps.shape
    out = np.empty((c, ends.size))
    for r in range(c):
        hx, hy, x, y = 1.0, 0.0, 0.0, 0.0
        j = 0
        for i in range(m):
            hx, hy = hx * cos_t[r, i] - hy * sin_t[r, i], hx * sin_t[r, i] + hy * cos_t[r, i]
            if i % RENORMALISE == RENORMALISE - 1:  # rounding would slowly change the vector's length
                norm = np.sqrt(hx * hx + hy * hy)
                hx, hy = hx / norm, hy / norm
            x += steps[r, i] * hx
            y += steps[r, i] * hy
            while j < ends.size and ends[j] == i + 1:
                out[r, j] = x * x + y * y
                j += 1
    return out


def _block(values, c: int, m: int) -> np.ndarray:
    values = np.asarray(values, dtype=np.float64)
    if not values.flags.writeable or not values.flags.c_contiguous:
        values = values.copy()
    if values.size != c * m:
        raise ValueError(f"a variate source returned {values.size} values, {c * m} were asked for")
    return values.reshape(c, m)


class Walk:
    """A null walk given by its step-length and turning-angle sources.

    Parameters
    ----------
    step_source, turn_source : callable
        ``(n, rng) -> ndarray`` of independent draws.
    """

    def __init__(self, step_source: Source, turn_source: Source):
        # None only in subclasses that draw steps and turns jointly and override simulate()
        self.step_source: Source | None = step_source
        self.turn_source: Source | None = turn_source

    def simulate(self, n_steps: int, n_reps: int, rng: np.random.Generator, eval_idx) -> np.ndarray:
        """Squared displacement (m^2), shape (n_reps, len(eval_idx)); see :func:`simulate_nsd`."""
        # set by __init__; subclasses that clear them override this method
        assert self.step_source is not None and self.turn_source is not None
        return simulate_nsd(self.step_source, self.turn_source, n_steps, n_reps, rng, eval_idx)


def resampler(values) -> Source:
    """Draw with replacement from observed values (each equally likely)."""
    values = np.asarray(values, dtype=np.float64)

    def draw(n: int, rng: np.random.Generator) -> np.ndarray:
        return values[rng.integers(0, values.size, n)]

    return draw


def turn_resampler(values) -> UnitTurns:
    """Turning angles drawn with replacement from observed ones, their cosines and sines computed once."""
    values = np.asarray(values, dtype=np.float64)
    cos_v, sin_v = np.cos(values), np.sin(values)

    def unit(n: int, rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray]:
        pick = rng.integers(0, values.size, n)  # the draw resampler(values) makes
        return cos_v[pick], sin_v[pick]

    return UnitTurns(resampler(values), unit)


def mixture(p_second: float, first: Source, second: Source) -> Source:
    """Each draw from ``second`` with probability ``p_second``, else from ``first``."""
    if p_second <= 0.0:
        return first
    if p_second >= 1.0:
        return second

    def draw(n: int, rng: np.random.Generator) -> np.ndarray:
        pick = rng.random(n) < p_second
        out = np.empty(n)
        k = int(pick.sum())
        out[~pick] = first(n - k, rng)
        out[pick] = second(k, rng)
        return out

    return draw


def uniform_turns(n: int, rng: np.random.Generator) -> np.ndarray:
    """Turning angles uniform on [-pi, pi) (no directional persistence)."""
    return rng.uniform(-np.pi, np.pi, n)
