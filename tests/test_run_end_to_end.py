"""The whole job on the invented sample deployment, and its reproducibility.

Identity across reruns, worker counts and backends is the design contract
(per-animal generators keyed by run seed and animal id), not an external
reference; the statistics themselves are checked in the stage tests.
"""

from __future__ import annotations

import hashlib
import json
import re
from pathlib import Path

import pandas as pd
import pytest

from roamstat.cli import main

TABLES = ["fixes.csv", "rejected.csv", "steps.csv", "summary.csv", "fits.csv", "null_tests.csv",
          "residency.csv", "ranges.csv", "states.csv", "state_models.csv"]
SAMPLE = Path(__file__).resolve().parents[1] / "sample_tracks" / "collars.csv"
FAST = ["--replicates", "99", "--state-starts", "2", "--quiet"]


@pytest.fixture(scope="module")
def sample_run(tmp_path_factory):
    out = tmp_path_factory.mktemp("run") / "out"
    assert main(["run", str(SAMPLE), "--out", str(out), *FAST]) == 0
    return SAMPLE, out


def table_bytes(out: Path) -> dict:
    return {name: (out / name).read_bytes() for name in TABLES + ["ranges.geojson"]}


def test_every_output_is_written(sample_run):
    _, out = sample_run
    for name in TABLES + ["ranges.geojson", "report.html", "manifest.json"]:
        assert (out / name).is_file(), name
    assert (out / "figures").is_dir()


def test_report_names_every_animal_and_its_images_exist(sample_run):
    _, out = sample_run
    html = (out / "report.html").read_text(encoding="utf-8")
    for animal in pd.read_csv(out / "summary.csv")["animal_id"].astype(str):
        assert animal in html
    images = re.findall(r'<img[^>]+src="([^"]+)"', html)
    assert images
    for src in images:
        if not src.startswith("data:"):
            assert (out / src).is_file(), src


def test_manifest_describes_the_run(sample_run):
    sample, out = sample_run
    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["inputs"][0]["sha256"] == hashlib.sha256(sample.read_bytes()).hexdigest()
    assert manifest["inputs"][0]["size_bytes"] == sample.stat().st_size
    assert manifest["parameters"]["replicates"] == 99
    rows = manifest["rows"]
    assert rows["read"] == rows["kept"] + rows["rejected"]
    assert set(manifest["projections"]) == set(pd.read_csv(out / "summary.csv")["animal_id"].astype(str))
    assert {s["stage"] for s in manifest["stages"]} >= {"read", "screen", "steps", "report"}


def test_rerun_gives_byte_identical_tables(sample_run, tmp_path):
    sample, out = sample_run
    again = tmp_path / "again"
    assert main(["run", str(sample), "--out", str(again), *FAST, "--no-report"]) == 0
    assert table_bytes(again) == table_bytes(out)


def test_two_workers_give_identical_tables(sample_run, tmp_path):
    sample, out = sample_run
    parallel = tmp_path / "parallel"
    assert main(["run", str(sample), "--out", str(parallel), *FAST, "--no-report", "--workers", "2"]) == 0
    assert table_bytes(parallel) == table_bytes(out)


def test_dask_cluster_gives_identical_tables(sample_run, tmp_path):
    distributed = pytest.importorskip("dask.distributed", reason="Dask is the optional [cluster] extra")
    sample, out = sample_run
    on_cluster = tmp_path / "cluster"
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  host="127.0.0.1", dashboard_address=None) as cluster:
        code = main(["run", str(sample), "--out", str(on_cluster), *FAST, "--no-report",
                     "--scheduler", cluster.scheduler_address])
    assert code == 0
    assert table_bytes(on_cluster) == table_bytes(out)
