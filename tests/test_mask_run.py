"""One hidden origin per masked run: fixes.csv, ranges.geojson and the report's points line up.

The origin is drawn from fresh entropy here, as in production.  Distances
between masked points are checked against geodesic distances between the
true positions (pyproj.Geod; Karney 2013, J. Geodesy 87:43-55): they agree
only if both points were masked with the same origin, also across the
batches of a ``--low-memory`` run.  The MCP 100 % outline's vertices are
fixes (Mohr 1947), so the masked outline is the hull of the masked fixes.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from pyproj import Geod
from shapely.geometry import MultiPoint, Polygon

from roamstat.cli import build_parser, config_from_args
from roamstat.outputs import report_tables
from roamstat.ranges.mask import MASKED_FRAME
from roamstat.run import run_command

SAMPLE = Path(__file__).resolve().parents[1] / "sample_tracks" / "collars.csv"
GEOD = Geod(ellps="WGS84")


@pytest.fixture(scope="module")
def subset(tmp_path_factory) -> Path:
    table = pd.read_csv(SAMPLE, dtype=str)
    parts = [table[table["animal_id"] == "CU-R07"].head(480), table[table["animal_id"] == "CU-Q30"]]
    path = tmp_path_factory.mktemp("mask") / "subset.csv"
    pd.concat(parts).to_csv(path, index=False)
    return path


def _masked_run(subset: Path, out: Path, *extra: str):
    argv = ["ranges", str(subset), "--out", str(out), "--quiet", "--mask-locations", *extra]
    cfg = config_from_args(build_parser().parse_args(argv))
    return run_command("ranges", [str(subset)], out, cfg, argv, batch_animals=1), cfg


def _pairwise(x, y):
    return np.hypot(x[:, None] - x[None, :], y[:, None] - y[None, :])


@pytest.mark.parametrize("extra", [(), ("--low-memory",)], ids=["ordinary", "low-memory"])
def test_every_masked_output_shares_one_origin(subset, tmp_path, extra):
    result, cfg = _masked_run(subset, tmp_path / "o", *extra)
    fixes = pd.read_csv(tmp_path / "o" / "fixes.csv")
    fixes = fixes[~fixes["interpolated"].astype(bool)].reset_index(drop=True)
    # The true positions of the kept rows, in fixes.csv order (source_row 2 is the first data line).
    rejected_at = pd.read_csv(tmp_path / "o" / "rejected.csv")["source_row"].to_numpy() - 2
    inputs = pd.read_csv(subset)
    truth = inputs.drop(index=rejected_at).sort_values(["animal_id", "timestamp"], kind="stable").reset_index(drop=True)
    assert len(truth) == len(fixes)

    # Across animals (different batches when streamed): masked distances are true distances.
    pick = np.r_[0:len(fixes):37]
    lon, lat = truth["longitude"].to_numpy(float)[pick], truth["latitude"].to_numpy(float)[pick]
    true_d = GEOD.inv(*np.broadcast_arrays(lon[:, None], lat[:, None], lon[None, :], lat[None, :]))[2]
    masked_d = _pairwise(fixes["x_m"].to_numpy()[pick], fixes["y_m"].to_numpy()[pick])
    assert fixes["animal_id"].iloc[pick].nunique() == 2
    assert np.allclose(masked_d, true_d, rtol=1e-3, atol=1.0)

    # ranges.geojson: the MCP 100 % outline is the convex hull of that animal's masked fixes (Mohr 1947).
    collection = json.loads((tmp_path / "o" / "ranges.geojson").read_text())
    for feature in collection["features"]:
        props = feature["properties"]
        if (props["method"], props["level"]) != ("mcp", 100):
            continue
        ring = np.asarray(feature["geometry"]["coordinates"][0])
        outline = Polygon(np.column_stack(MASKED_FRAME.forward(ring[:, 0], ring[:, 1])))
        hull = MultiPoint(fixes.loc[fixes["animal_id"] == props["animal_id"], ["x_m", "y_m"]].to_numpy()).convex_hull
        assert outline.hausdorff_distance(hull) < 1.0  # metres; GeoJSON keeps 7 decimals of a degree

    # The report's points: track maps and range figures in the same masked frame as fixes.csv.
    drawn = report_tables(result.loaded, result.tables, cfg)
    for animal in result.animals:
        own = fixes[fixes["animal_id"] == animal.animal_id][["x_m", "y_m"]].to_numpy()
        assert np.allclose(animal.range_extras.track_xy.to_numpy(), own, atol=1e-6)
        if len(drawn["fixes"]):
            mine = drawn["fixes"][drawn["fixes"]["animal_id"] == animal.animal_id][["x_m", "y_m"]].to_numpy()
            assert np.allclose(mine, own, atol=1e-6)
    # Rejected points (spikes) sit at their true distance from the first masked fix.
    spikes = drawn["rejected_xy"]
    assert len(spikes) == 2
    lon, lat = inputs["longitude"].to_numpy(float)[rejected_at], inputs["latitude"].to_numpy(float)[rejected_at]
    d_true = GEOD.inv(lon, lat, np.full(2, truth["longitude"][0]), np.full(2, truth["latitude"][0]))[2]
    d_masked = np.hypot(spikes["x_m"] - fixes["x_m"][0], spikes["y_m"] - fixes["y_m"][0])
    assert np.allclose(d_masked, d_true, rtol=1e-3)


def test_each_masked_run_draws_its_own_origin(subset, tmp_path):
    # Fresh entropy, not the seed: two runs with the same seed get different origins.
    _masked_run(subset, tmp_path / "a")
    _masked_run(subset, tmp_path / "b")
    a, b = (pd.read_csv(tmp_path / d / "fixes.csv")[["x_m", "y_m"]].to_numpy() for d in ("a", "b"))
    assert np.hypot(*(a - b).T).min() > 1.0
