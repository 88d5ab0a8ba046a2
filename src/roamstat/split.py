"""Null replicates of one big animal split into chunks that run side by side.

When one animal dominates a run (say 2,000,000 fixes), its replicate walks
are the bulk of the work and a per-animal pool leaves all but one core idle.
Above ``SPLIT_DRAWS`` replicate x step draws, the replicates are split into
``CHUNKS`` chunks, each simulated with its own child generator spawned from
the animal's generator (``numpy.random.Generator.spawn``, independent streams
by SeedSequence spawning, O'Neill 2015 / NumPy documentation), and the chunks
run on threads (numpy releases the GIL in its bulk random draws and array
arithmetic).  The chunk count is fixed, never the worker count, so the
results are the same for any ``--workers``; below the threshold the animal's
generator is used as before.

References
----------
O'Neill, M. E. (2015). PCG: A family of simple fast space-efficient
statistically good algorithms for random number generation. HMC-CS-2014-0905.
"""

from __future__ import annotations

from concurrent.futures import ThreadPoolExecutor

import numpy as np

SPLIT_DRAWS = 50_000_000  # replicates x steps above which replicates are split (judgement, no source)
CHUNKS = 16  # fixed: the draws must not depend on how many workers share them


def simulate_replicates(null, n_steps: int, replicates: int, rng: np.random.Generator, eval_idx,
                        workers: int = 1) -> np.ndarray:
    """``null.simulate(n_steps, replicates, rng, eval_idx)``, split into chunks for big tracks.

    Parameters
    ----------
    null : object with ``simulate(n_steps, n_reps, rng, eval_idx)``
    n_steps, replicates : int
    rng : numpy.random.Generator
        The animal's generator for this null.
    eval_idx : array of int
        Step indices the NSD is wanted at.
    workers : int
        Threads the chunks run on (does not change the result).

    Returns
    -------
    ndarray, shape (replicates, len(eval_idx))
    """
    if n_steps * replicates <= SPLIT_DRAWS or replicates < CHUNKS:
        return null.simulate(n_steps, replicates, rng, eval_idx)
    sizes = np.diff(np.linspace(0, replicates, CHUNKS + 1).round().astype(int))
    jobs = list(zip(sizes.tolist(), rng.spawn(CHUNKS)))
    with ThreadPoolExecutor(max(1, int(workers))) as pool:
        parts = list(pool.map(lambda job: null.simulate(n_steps, job[0], job[1], eval_idx), jobs))
    return np.vstack(parts)
