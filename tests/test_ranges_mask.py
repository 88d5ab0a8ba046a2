"""Location masking: no exact position leaks into masked outputs; shapes and areas are kept."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from pyproj import Geod
from shapely.geometry import shape

from ranges_sim import independent_normal
from roamstat.config import Config
from roamstat.errors import RoamstatError
from roamstat.ranges import hidden_origin, mask_fixes, ranges_animal

GEOD = Geod(ellps="WGS84")


def _positions(collection) -> np.ndarray:
    out = []
    for feat in collection["features"]:
        geom = feat["geometry"]
        polygons = [geom["coordinates"]] if geom["type"] == "Polygon" else geom["coordinates"]
        out.extend(np.asarray(r) for p in polygons for r in p)
    return np.vstack(out)


def test_masked_geojson_reveals_no_true_position():
    fixes = independent_normal(600, 1500.0, np.random.default_rng(8), lat0=-2.5, lon0=3.0)
    rows_true, features_true, _ = ranges_animal(fixes, Config())
    rows, features, extras = ranges_animal(fixes, Config(mask_locations=True))
    text = json.dumps({"type": "FeatureCollection", "features": features})
    masked = _positions(json.loads(text))
    true = np.vstack([np.column_stack([fixes["lon"], fixes["lat"]]),
                      _positions({"features": features_true})])
    # No masked position lies within 1 km (~0.009 degrees) of any fix or true outline vertex.
    nearest = np.min(np.hypot(masked[:, None, 0] - true[None, ::7, 0], masked[:, None, 1] - true[None, ::7, 1]), axis=1)
    assert nearest.min() > 0.009
    # No coordinate value of a fix appears as text in the file (7-decimal rendering, as written).
    for value in np.concatenate([fixes["lon"].to_numpy()[:50], fixes["lat"].to_numpy()[:50]]):
        assert f"{value:.5f}"[:-1] not in text
    assert all(r["masked"] and "hidden origin" in r["note"] for r in rows)
    assert all(f["properties"]["masked"] for f in features)
    # Masking moves outlines but keeps their areas on the ellipsoid (pyproj.Geod, Karney 2013).
    for feat, row in zip(features, rows_true):
        assert abs(GEOD.geometry_area_perimeter(shape(feat["geometry"]))[0]) / 1e6 == pytest.approx(row["area_km2"], rel=2e-3)
    # Figures get coordinates relative to the hidden origin, not the true frame: distances between
    # fixes are kept (geodesic, pyproj.Geod; Karney 2013), positions are not.
    _, _, true_extras = ranges_animal(fixes, Config())
    xy = extras.track_xy.to_numpy()
    d_true = GEOD.inv(fixes["lon"][:-1], fixes["lat"][:-1], fixes["lon"][1:], fixes["lat"][1:])[2]
    assert np.allclose(np.hypot(*np.diff(xy, axis=0).T), d_true, rtol=1e-3)
    assert np.min(np.hypot(*(xy - true_extras.track_xy.to_numpy()).T)) > 100.0


def test_each_masked_run_draws_a_new_hidden_origin():
    fixes = independent_normal(100, 500.0, np.random.default_rng(2))
    one = ranges_animal(fixes, Config(mask_locations=True))[2].track_xy.to_numpy()
    two = ranges_animal(fixes, Config(mask_locations=True))[2].track_xy.to_numpy()
    assert not np.allclose(one, two)


def test_grid_masking_puts_fixes_on_cell_centres():
    fixes = independent_normal(200, 3000.0, np.random.default_rng(4))
    grid = 1000.0
    origin = hidden_origin(fixes["lat"], fixes["lon"], grid, np.random.default_rng(1))
    _, _, extras = ranges_animal(fixes, Config(mask_locations=True, mask_grid=grid), origin)
    xy = extras.track_xy.to_numpy()
    assert np.allclose(np.mod(xy, grid), grid / 2)


def test_mask_fixes_drops_positions_and_raw_text():
    fixes = independent_normal(50, 800.0, np.random.default_rng(6))
    fixes["orig_lat"] = fixes["lat"].map(lambda v: f"{v:.6f}")
    fixes["x_in"] = fixes["x_m"]
    out = mask_fixes(fixes, hidden_origin(fixes["lat"], fixes["lon"]))
    assert not {"lat", "lon", "x_in", "orig_lat"} & set(out.columns)
    assert out["masked"].all() and len(out) == len(fixes)
    # Relative geometry is kept: distances between fixes agree with the geodesic ones (Karney 2013).
    d_masked = np.hypot(np.diff(out["x_m"]), np.diff(out["y_m"]))
    d_true = GEOD.inv(fixes["lon"][:-1], fixes["lat"][:-1], fixes["lon"][1:], fixes["lat"][1:])[2]
    assert np.allclose(d_masked, d_true, rtol=1e-3)
    assert not np.allclose(out["x_m"], fixes["x_m"])
    assert isinstance(out, pd.DataFrame)


def test_bad_mask_grid_is_a_user_error():
    fixes = independent_normal(50, 800.0, np.random.default_rng(6))
    with pytest.raises(RoamstatError, match="--mask-grid"):
        ranges_animal(fixes, Config(mask_locations=True, mask_grid=0.0))


def test_one_origin_masks_outlines_and_fixes_alike():
    # The MCP 100 % outline's vertices are fixes (Mohr 1947): masked with the same origin, each
    # vertex of the masked outline is a masked fix (common practice, no source).
    fixes = independent_normal(80, 2000.0, np.random.default_rng(3))
    origin = hidden_origin(fixes["lat"], fixes["lon"], rng=np.random.default_rng(5))
    _, _, extras = ranges_animal(fixes, Config(mask_locations=True), origin)
    masked = mask_fixes(fixes, origin)[["x_m", "y_m"]].to_numpy()
    mcp = next(c["geometry"] for c in extras.contours if (c["method"], c["level"]) == ("mcp", 100))
    vertices = np.asarray(mcp.exterior.coords)
    gap = np.min(np.hypot(vertices[:, None, 0] - masked[None, :, 0], vertices[:, None, 1] - masked[None, :, 1]), axis=1)
    assert gap.max() < 0.05  # metres
    assert np.allclose(extras.track_xy.to_numpy(), masked)
