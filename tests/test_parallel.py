"""Backends of map_animals: identical, ordered results; clear errors; one executor per run.

Identity across backends is the design contract, not an external reference.
"""

from __future__ import annotations

import builtins
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from roamstat.cli import build_parser, config_from_args
from roamstat.errors import RoamstatError
import roamstat.parallel
from roamstat.parallel import AnimalExecutor, map_animals, resolve_workers
from roamstat.run import run_command
from roamstat.seeds import animal_rng

SAMPLE = Path(__file__).resolve().parents[1] / "sample_tracks" / "collars.csv"


def draw(animal_id: str) -> tuple[str, list[float]]:
    """A stand-in per-animal task: a few variates from the animal's own generator."""
    return animal_id, animal_rng(7, animal_id, "test").normal(size=3).tolist()


IDS = [f"animal-{i:02d}" for i in range(12)]


def test_generators_do_not_depend_on_order():
    forward = dict(map_animals(draw, IDS, quiet=True))
    backward = dict(map_animals(draw, IDS[::-1], quiet=True))
    assert forward == backward


def test_generators_differ_between_animals_and_stages():
    a = animal_rng(7, "A", "null").random(4)
    assert not np.array_equal(a, animal_rng(7, "B", "null").random(4))
    assert not np.array_equal(a, animal_rng(7, "A", "fit").random(4))
    assert not np.array_equal(a, animal_rng(8, "A", "null").random(4))


def test_process_pool_matches_serial_in_order():
    assert map_animals(draw, IDS, workers=2, quiet=True) == map_animals(draw, IDS, quiet=True)


def test_workers_parsing():
    assert resolve_workers("auto") >= 1
    assert resolve_workers("3") == 3
    for bad in ("0", "-1", "two"):
        with pytest.raises(RoamstatError, match="--workers"):
            resolve_workers(bad)


def test_dask_local_cluster_matches_serial_with_one_client(monkeypatch):
    distributed = pytest.importorskip("dask.distributed", reason="Dask is the optional [cluster] extra")
    opened = []

    class CountingClient(distributed.Client):
        def __init__(self, *args, **kwargs):
            opened.append(self)
            super().__init__(*args, **kwargs)

    monkeypatch.setattr(distributed, "Client", CountingClient)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  host="127.0.0.1", dashboard_address=None) as cluster:
        with AnimalExecutor(scheduler=cluster.scheduler_address, quiet=True) as executor:
            first, second = executor.map(draw, IDS), executor.map(draw, IDS[::-1])
        assert len(opened) == 1 and opened[0].status == "closed"
    assert first == map_animals(draw, IDS, quiet=True) and second == first[::-1]


class CountingPool(ProcessPoolExecutor):
    """A process pool that records how many were opened and shut down."""

    opened: list = []
    closed: list = []

    def __init__(self, *args, **kwargs):
        CountingPool.opened.append(self)
        super().__init__(*args, **kwargs)

    def shutdown(self, *args, **kwargs):
        CountingPool.closed.append(self)
        super().shutdown(*args, **kwargs)


@pytest.fixture
def counting_pool(monkeypatch):
    CountingPool.opened, CountingPool.closed = [], []
    monkeypatch.setattr(roamstat.parallel, "ProcessPoolExecutor", CountingPool)
    return CountingPool


def test_one_pool_serves_every_map_and_closes(counting_pool):
    with AnimalExecutor(workers=2, quiet=True) as executor:
        first, second = executor.map(draw, IDS), executor.map(draw, IDS[::-1])
        assert len(counting_pool.opened) == 1 and not counting_pool.closed
    assert counting_pool.closed == counting_pool.opened
    assert first == map_animals(draw, IDS, quiet=True) and second == first[::-1]


def test_streamed_run_opens_one_pool_for_all_batches(counting_pool, tmp_path):
    table = pd.read_csv(SAMPLE, dtype=str)
    subset = tmp_path / "four.csv"
    table.groupby("animal_id").head(120).to_csv(subset, index=False)
    argv = ["ranges", str(subset), "--out", str(tmp_path / "o"), "--quiet", "--low-memory", "--workers", "2"]
    result = run_command("ranges", [str(subset)], tmp_path / "o", config_from_args(build_parser().parse_args(argv)),
                         argv, batch_animals=2)  # three batches of two animals
    assert len(result.animals) == 6
    assert len(counting_pool.opened) == 1 and counting_pool.closed == counting_pool.opened


def test_scheduler_without_dask_names_the_extra(monkeypatch):
    real_import = builtins.__import__

    def no_dask(name, *args, **kwargs):
        if name.startswith("dask"):
            raise ImportError(name)
        return real_import(name, *args, **kwargs)

    monkeypatch.setattr(builtins, "__import__", no_dask)
    with pytest.raises(RoamstatError, match=r"roamstat\[cluster\]"):
        map_animals(draw, IDS, scheduler="tcp://127.0.0.1:1", quiet=True)
