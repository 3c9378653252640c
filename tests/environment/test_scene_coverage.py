"""A scene with longitude and latitude swapped is far from the walks: every verb that takes a scene says so."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from walkcomfort import _io
from walkcomfort.cli import main
from walkcomfort.environment.coverage import MOSTLY_OUTSIDE, scene_coverage
from walkcomfort.environment.scene import Scene

LAT, LON = 41.3870, 2.1700  # an invented street block


def _scene_features(swap: bool) -> dict:
    d = 0.0003
    ring = [[LON - d, LAT + 0.0002], [LON + d, LAT + 0.0002], [LON + d, LAT + 0.0002 + d], [LON - d, LAT + 0.0002 + d]]
    ring = [*ring, ring[0]]
    if swap:
        ring = [[y, x] for x, y in ring]
    return {"type": "FeatureCollection",
            "features": [{"type": "Feature", "geometry": {"type": "Polygon", "coordinates": [ring]},
                          "properties": {"id": "b1", "kind": "building", "height_m": 15}}]}


@pytest.fixture
def scenes(tmp_path):
    good, bad = tmp_path / "scene.geojson", tmp_path / "swapped.geojson"
    good.write_text(json.dumps(_scene_features(False)))
    bad.write_text(json.dumps(_scene_features(True)))
    return good, bad


@pytest.fixture
def route(tmp_path):
    p = tmp_path / "street.geojson"
    p.write_text(json.dumps({"type": "Feature", "properties": {"route_id": "street"},
                             "geometry": {"type": "LineString", "coordinates": [[LON - 0.0003, LAT],
                                                                                [LON + 0.0003, LAT]]}}))
    return p


def test_coverage_names_swapped_coordinates_and_far_places():
    good = Scene.from_geojson(_scene_features(False))
    bad = Scene.from_geojson(_scene_features(True))
    lon = np.linspace(LON - 0.0003, LON + 0.0003, 20)
    lat = np.full(20, LAT)
    assert scene_coverage(good, lon, lat).share_outside == 0.0
    cov = scene_coverage(bad, lon, lat)
    assert cov.share_outside == 1.0 and cov.mostly_outside and "swapped" in cov.cause
    far = scene_coverage(good, lon + 10.0, lat)  # ten degrees east: another place
    assert far.share_outside > MOSTLY_OUTSIDE and "km away" in far.cause and far.distance_km > 800
    assert scene_coverage(None, lon, lat) is None


def test_route_and_compare_warn_and_refuse_when_strict(scenes, route, tmp_path, capsys):
    good, bad = scenes
    base = [str(route), "--depart", "2026-07-15T12:00", "--timezone", "Europe/Madrid",
            "--conditions", "t_air_c=30,rh_pct=40,wind_ms=2", "--no-reasons"]
    assert main(["route", *base, "--scene", str(good), "-o", str(tmp_path / "ok")]) == 0
    assert "swapped" not in capsys.readouterr().err
    assert main(["route", *base, "--scene", str(bad), "-o", str(tmp_path / "a")]) == 0
    err = capsys.readouterr().err
    assert "warning: 100% of the route lies" in err and "swapped coordinates" in err
    scheme = tmp_path / "empty-scheme.geojson"
    scheme.write_text(json.dumps({"type": "FeatureCollection", "walkcomfort": {"scheme": "none"}, "features": []}))
    assert main(["compare", *base, "--scene", str(bad), "--scheme", str(scheme), "-o", str(tmp_path / "b")]) == 0
    assert "swapped coordinates" in capsys.readouterr().err
    assert main(["route", *base, "--scene", str(bad), "--strict", "-o", str(tmp_path / "c")]) == 2
    err = capsys.readouterr().err
    assert err.startswith("error: ") and "swapped.geojson" in err and "swapped coordinates" in err


def test_thermal_warns_and_refuses_when_strict(scenes, tmp_path, capsys):
    good, bad = scenes
    idx = pd.date_range("2026-07-15T10:00Z", periods=60, freq="1s", name="time")
    df = pd.DataFrame({"walk_id": "w1", "participant": "P01", "lat": LAT,
                       "lon": np.linspace(LON - 0.0003, LON + 0.0003, 60), "elev_m": 10.0, "t_air_c": 30.0,
                       "rh_pct": 40.0, "wind_ms": 1.5}, index=idx)
    walk = tmp_path / "walks" / "w1" / "timeline.parquet"
    _io.write_parquet(walk, df, {"session": {"walk_id": "w1", "timezone": "Europe/Madrid", "wind_height_m": 1.1},
                                 "provenance": {}})
    assert main(["thermal", str(walk.parent), "--scene", str(bad), "--no-globe", "-o", str(tmp_path / "t")]) == 0
    err = capsys.readouterr().err
    assert "warning: 100% of walk w1 lies" in err and "swapped coordinates" in err
    assert main(["thermal", str(walk.parent), "--scene", str(bad), "--no-globe", "--strict",
                 "-o", str(tmp_path / "t2")]) == 2
    assert "swapped coordinates" in capsys.readouterr().err
    assert main(["thermal", str(walk.parent), "--scene", str(good), "--no-globe", "-o", str(tmp_path / "t3")]) == 0
    assert "warning" not in capsys.readouterr().err


def test_network_warns_and_refuses_when_strict(scenes, tmp_path, capsys):
    good, bad = scenes
    streets = tmp_path / "streets.geojson"
    streets.write_text(json.dumps({"type": "FeatureCollection", "features": [
        {"type": "Feature", "properties": {"id": "s1"},
         "geometry": {"type": "LineString", "coordinates": [[LON - 0.0003, LAT], [LON + 0.0003, LAT]]}}]}))
    args = [str(streets), "--conditions", "t_air_c=30,rh_pct=40,wind_ms=2", "--start", "2026-07-14T12:00",
            "--end", "2026-07-14T12:00", "--timezone", "Europe/Madrid"]
    assert main(["network", *args, "--scene", str(bad), "--out", str(tmp_path / "n")]) == 0
    err = capsys.readouterr().err
    assert "warning: 100% of the street network lies" in err and "swapped coordinates" in err
    assert main(["network", *args, "--scene", str(bad), "--strict", "--out", str(tmp_path / "n2")]) == 2
    assert "swapped coordinates" in capsys.readouterr().err
