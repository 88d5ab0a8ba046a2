"""One small interface over serial, local process pool and Dask execution.

:class:`AnimalExecutor` (one per run) applies a top-level function to
per-animal tasks and returns the results in task order, whichever backend ran them and in
whatever order they finished, so outputs are identical across backends.
Progress is reported as animals finish.

Stopping is prompt: when the run is interrupted (Ctrl-C, SIGTERM, an error)
the executor cancels the queued work and terminates its workers instead of
waiting for them; workers ignore Ctrl-C themselves (the parent decides) and,
on Linux, are killed by the kernel if the parent dies without cleaning up.
"""

from __future__ import annotations

import ctypes
import os
import signal
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


class AnimalExecutor:
    """The run's one executor: serial, a local process pool or a Dask client.

    The pool or client opens at the first :meth:`map` that needs it and is
    reused by every later call (a streamed run maps once per batch of
    animals); leaving the ``with`` block closes it.

    Parameters
    ----------
    workers : int
        Local worker processes (1: run in this process).
    scheduler : str or None
        Address of a Dask scheduler; when given, work goes there instead.
    quiet : bool
        No progress bar.
    """

    def __init__(self, workers: int = 1, scheduler: str | None = None, quiet: bool = False) -> None:
        self.workers, self.scheduler, self.quiet = workers, scheduler, quiet
        self._pool: ProcessPoolExecutor | None = None
        self._client = None

    def __enter__(self) -> AnimalExecutor:
        return self

    def __exit__(self, exc_type, *exc) -> None:
        self.close(abort=exc_type is not None)

    def close(self, abort: bool = False) -> None:
        """Shut the pool or client down (idempotent); ``abort`` cancels queued work and stops workers now."""
        if self._pool is not None:
            pool, self._pool = self._pool, None
            if abort:
                _terminate(pool)
            else:
                pool.shutdown()
        if self._client is not None:
            client, self._client = self._client, None
            if abort:
                client.close(timeout=5)
            else:
                client.close()

    def map(self, func: Callable, tasks: Sequence, desc: str = "animals") -> list:
        """``[func(t) for t in tasks]`` on this executor's backend, results in task order."""
        # disable=None: tqdm shows the bar only on a terminal, so logs stay clean.
        bar = tqdm(total=len(tasks), desc=desc, unit="animal", disable=True if self.quiet or not tasks else None,
                   leave=False, dynamic_ncols=True)
        try:
            if self.scheduler:
                return _run_dask(func, tasks, self._dask_client(), bar)
            if self.workers <= 1 or len(tasks) <= 1:
                results = []
                for task in tasks:
                    results.append(func(task))
                    bar.update(1)
                return results
            if self._pool is None:
                self._pool = ProcessPoolExecutor(max_workers=self.workers, initializer=_worker_start,
                                                 initargs=(os.getpid(),))
            return _run_pool(func, tasks, self.workers, self._pool, bar)
        finally:
            bar.close()

    def _dask_client(self):
        if self._client is None:
            try:
                from dask.distributed import Client
            except ImportError:
                raise RoamstatError(
                    "--scheduler needs Dask: install the cluster extra with "
                    "pip install 'roamstat[cluster]', or drop --scheduler to run on this machine"
                ) from None
            try:
                self._client = Client(self.scheduler, timeout="20s")
            except (OSError, TimeoutError) as exc:
                raise RoamstatError(f"--scheduler {self.scheduler}: cannot reach the Dask scheduler ({exc}); "
                                    "check the address") from None
        return self._client


def map_animals(
    func: Callable,
    tasks: Sequence,
    *,
    workers: int = 1,
    scheduler: str | None = None,
    quiet: bool = False,
    desc: str = "animals",
) -> list:
    """``[func(t) for t in tasks]`` on a backend opened for this call only, results in task order."""
    with AnimalExecutor(workers, scheduler, quiet) as executor:
        return executor.map(func, tasks, desc)


def _run_pool(func, tasks, workers, pool, bar) -> list:
    # Several animals per submission: fewer round trips between processes, same order of results.
    size = max(1, min(16, len(tasks) // (workers * 8)))
    batches = [list(range(i, min(i + size, len(tasks)))) for i in range(0, len(tasks), size)]
    results: list = [None] * len(tasks)
    futures = {pool.submit(_run_batch, func, [tasks[i] for i in batch]): batch for batch in batches}
    for future in as_completed(futures):
        for i, result in zip(futures[future], future.result()):
            results[i] = result
        bar.update(len(futures[future]))
    return results


def _terminate(pool: ProcessPoolExecutor) -> None:
    """Cancel what is queued and stop the workers at once (no orphan survives the parent)."""
    processes = list((pool._processes or {}).values())  # the stdlib offers no public way to stop a busy worker
    pool.shutdown(wait=False, cancel_futures=True)
    for process in processes:
        process.terminate()
    for process in processes:
        process.join(timeout=3)
        if process.is_alive():
            process.kill()
            process.join(timeout=3)


_PR_SET_PDEATHSIG = 1  # linux/prctl.h


def _worker_start(parent_pid: int) -> None:
    """In each worker: leave Ctrl-C to the parent, die with it, take SIGTERM plainly."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)  # a forked worker would inherit the parent's handler
    try:
        ctypes.CDLL(None, use_errno=True).prctl(_PR_SET_PDEATHSIG, signal.SIGKILL)
    except (OSError, AttributeError):
        pass  # not Linux: the pool's own broken-pipe handling ends the worker, later
    if os.getppid() != parent_pid:  # the parent died before the line above took effect
        os._exit(1)


def _run_batch(func, tasks) -> list:
    return [func(task) for task in tasks]


def _run_dask(func, tasks, client, bar) -> list:
    from dask.distributed import as_completed as dask_completed

    futures = client.map(func, list(tasks), pure=False)
    index = {f.key: i for i, f in enumerate(futures)}
    results: list = [None] * len(tasks)
    try:
        for future in dask_completed(futures):
            results[index[future.key]] = future.result()
            bar.update(1)
    except BaseException:
        client.cancel(futures)  # the cluster stops this run's work; the cluster itself stays up
        raise
    return results
