"""Backends of map_animals: identical, ordered results; clear errors.

Identity across backends is the design contract, not an external reference.
"""

from __future__ import annotations

import builtins

import numpy as np
import pytest

from roamstat.errors import RoamstatError
from roamstat.parallel import map_animals, resolve_workers
from roamstat.seeds import animal_rng


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


def test_dask_local_cluster_matches_serial():
    distributed = pytest.importorskip("dask.distributed", reason="Dask is the optional [cluster] extra")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  host="127.0.0.1", dashboard_address=None) as cluster:
        on_cluster = map_animals(draw, IDS, scheduler=cluster.scheduler_address, quiet=True)
    assert on_cluster == map_animals(draw, IDS, quiet=True)


def test_scheduler_without_dask_names_the_extra(monkeypatch):
    real_import = builtins.__import__

    def no_dask(name, *args, **kwargs):
        if name.startswith("dask"):
            raise ImportError(name)
        return real_import(name, *args, **kwargs)

    monkeypatch.setattr(builtins, "__import__", no_dask)
    with pytest.raises(RoamstatError, match=r"roamstat\[cluster\]"):
        map_animals(draw, IDS, scheduler="tcp://127.0.0.1:1", quiet=True)
