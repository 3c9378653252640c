"""Scheme differences under the ends of the uncertain parameters' ranges (compare --sensitivity)."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from shapely.geometry import Point, box

from walkcomfort.environment.geo import LocalFrame
from walkcomfort.environment.scene import scene_from_local
from walkcomfort.routes.schemes import scheme_from_geojson
from walkcomfort.routes.sensitivity import VARIANTS, scheme_sensitivity, sensitivity_line, vary

LAT, LON = 38.8, -0.75
X0, Y0 = LocalFrame(LON, LAT).project(LON, LAT)


@pytest.fixture(scope="module")
def street(tmp_path_factory):
    scene = scene_from_local([
        (box(X0 - 100, Y0 - 24, X0, Y0 - 4), {"id": "b1", "kind": "building", "height_m": 20.0}),
        (Point(X0 - 30, Y0 + 6), {"id": "t1", "kind": "tree", "height_m": 9.0, "crown_radius_m": 3.0,
                                  "crown_base_m": 3.0, "transmissivity": 0.2}),
    ], LAT, LON, 0.0)
    lon, lat = scene.unproject(np.array([X0 - 60, X0 + 60]), np.array([Y0, Y0]))
    path = tmp_path_factory.mktemp("sens") / "street.geojson"
    path.write_text(json.dumps({"type": "FeatureCollection", "features": [{
        "type": "Feature", "properties": {"id": "street"},
        "geometry": {"type": "LineString", "coordinates": [[float(lon[0]), float(lat[0])],
                                                           [float(lon[1]), float(lat[1])]]}}]}))
    tx, ty = scene.unproject(np.array([X0 + 30.0]), np.array([Y0 - 3.0]))
    scheme = scheme_from_geojson({"type": "FeatureCollection", "walkcomfort": {"scheme": "one-tree"}, "features": [
        {"type": "Feature", "properties": {"edit": "add", "kind": "tree", "height_m": 10.0, "crown_radius_m": 3.5,
                                           "crown_base_m": 3.0, "transmissivity": 0.15},
         "geometry": {"type": "Point", "coordinates": [float(tx[0]), float(ty[0])]}}]})
    return scene, scheme, path


def test_variants_change_crowns_and_ground_and_leave_the_inputs_alone(street):
    scene, scheme, _ = street
    before_scene, before_edit = json.dumps(scene.to_geojson()), json.dumps(list(scheme.edits))
    dense, (dense_scheme,) = vary(scene, [scheme], VARIANTS["crowns denser (transmissivity x0.5)"])
    sparse, (sparse_scheme,) = vary(scene, [scheme], VARIANTS["crowns sparser (transmissivity x2, at most 0.6)"])
    light, _ = vary(scene, [scheme], VARIANTS["ground concrete (albedo 0.25)"])
    tree = {f["properties"]["id"]: f["properties"] for f in dense.features}["t1"]
    assert tree["transmissivity"] == pytest.approx(0.1)
    assert {f["properties"]["id"]: f["properties"] for f in sparse.features}["t1"]["transmissivity"] == \
        pytest.approx(0.4)
    assert dense_scheme.edits[0]["properties"]["transmissivity"] == pytest.approx(0.075)
    assert sparse_scheme.edits[0]["properties"]["transmissivity"] == pytest.approx(0.3)
    # buildings are not touched; the ground material is the scene-wide default
    assert {f["properties"]["id"]: f["properties"] for f in dense.features}["b1"] == \
        {f["properties"]["id"]: f["properties"] for f in scene.features}["b1"]
    assert light.ground_material == "concrete"
    assert json.dumps(scene.to_geojson()) == before_scene and json.dumps(list(scheme.edits)) == before_edit


def test_sensitivity_table_spans_the_variants(street):
    from walkcomfort.routes.geometry import load_route
    from walkcomfort.routes.weather import open_weather, parse_conditions

    scene, scheme, path = street
    route = load_route(path, spacing_m=5, crs=scene.crs)
    weather = open_weather(None, parse_conditions("t_air_c=33,rh_pct=30,wind_ms=1.5"))
    deps = pd.DatetimeIndex([pd.Timestamp("2026-07-15T13:00", tz="Europe/Madrid")]).tz_convert("UTC")
    table = scheme_sensitivity(route, [scheme], deps, weather, scene, timezone="Europe/Madrid")
    assert len(table) == 1
    row = table.iloc[0]
    # the tree south of the sunlit half lowers the heat dose in every variant, by an amount that moves
    assert row["delta_heat_dose_cmin_max"] < 0
    assert row["delta_heat_dose_cmin_min"] <= row["delta_heat_dose_cmin"] <= row["delta_heat_dose_cmin_max"]
    assert row["delta_heat_dose_cmin_max"] - row["delta_heat_dose_cmin_min"] > 0
    # a denser crown (lower transmissivity) helps more than a sparser one
    assert row["delta_heat_dose_cmin_min_variant"].startswith("crowns denser")
    assert bool(row["ranking_holds"])  # one scheme: nothing to swap
    assert "ranking" in sensitivity_line(table)
