"""One small interface over serial, local process pool and Dask execution.

:func:`map_animals` applies a top-level function to per-animal tasks and
returns the results in task order, whichever backend ran them and in
whatever order they finished, so outputs are identical across backends.
Progress is reported as animals finish.
"""

from __future__ import annotations

import os
from collections.abc import Callable, Sequence
from concurrent.futures import ProcessPoolExecutor, as_completed

from tqdm import tqdm

from roamstat.errors import RoamstatError


def resolve_workers(value: str | int) -> int:
    """Parse ``--workers``: a positive whole number or ``auto`` (all cores)."""
    if str(value).strip().lower() == "auto":
        return max(1, os.cpu_count() or 1)
    try:
        workers = int(value)
    except ValueError:
        workers = 0
    if workers < 1:
        raise RoamstatError(f"--workers {value!r}: give a whole number >= 1, or 'auto' for all cores")
    return workers


def map_animals(
    func: Callable,
    tasks: Sequence,
    *,
    workers: int = 1,
    scheduler: str | None = None,
    quiet: bool = False,
    desc: str = "animals",
) -> list:
    """``[func(t) for t in tasks]`` on the chosen backend, results in task order."""
    # disable=None: tqdm shows the bar only on a terminal, so logs stay clean.
    bar = tqdm(total=len(tasks), desc=desc, unit="animal", disable=True if quiet or not tasks else None,
               leave=False, dynamic_ncols=True)
    try:
        if scheduler:
            return _run_dask(func, tasks, scheduler, bar)
        if workers <= 1 or len(tasks) <= 1:
            results = []
            for task in tasks:
                results.append(func(task))
                bar.update(1)
            return results
        return _run_pool(func, tasks, workers, bar)
    finally:
        bar.close()


def _run_pool(func, tasks, workers, bar) -> list:
    # Several animals per submission: fewer round trips between processes, same order of results.
    size = max(1, min(16, len(tasks) // (workers * 8)))
    batches = [list(range(i, min(i + size, len(tasks)))) for i in range(0, len(tasks), size)]
    results: list = [None] * len(tasks)
    with ProcessPoolExecutor(max_workers=min(workers, len(batches))) as pool:
        futures = {pool.submit(_run_batch, func, [tasks[i] for i in batch]): batch for batch in batches}
        for future in as_completed(futures):
            for i, result in zip(futures[future], future.result()):
                results[i] = result
            bar.update(len(futures[future]))
    return results


def _run_batch(func, tasks) -> list:
    return [func(task) for task in tasks]


def _run_dask(func, tasks, scheduler, bar) -> list:
    try:
        from dask.distributed import Client, as_completed as dask_completed
    except ImportError:
        raise RoamstatError(
            "--scheduler needs Dask: install the cluster extra with "
            "pip install 'roamstat[cluster]', or drop --scheduler to run on this machine"
        ) from None
    try:
        client = Client(scheduler, timeout="20s")
    except (OSError, TimeoutError) as exc:
        raise RoamstatError(f"--scheduler {scheduler}: cannot reach the Dask scheduler ({exc}); check the address") from None
    try:
        futures = client.map(func, list(tasks), pure=False)
        index = {f.key: i for i, f in enumerate(futures)}
        results: list = [None] * len(tasks)
        for future in dask_completed(futures):
            results[index[future.key]] = future.result()
            bar.update(1)
        return results
    finally:
        client.close()
