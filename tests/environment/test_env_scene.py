"""Scene GeoJSON: validation with one-line errors, round trip, local frame."""

from __future__ import annotations

import json

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from shapely.geometry import Point, Polygon, mapping

from walkcomfort.environment.geo import LocalFrame, utm_crs
from walkcomfort.environment.scene import Scene, load_scene, scene_from_local
from walkcomfort.errors import InputError

LAT, LON = 40.4168, -3.7038


def _feat(geom, **props):
    return {"type": "Feature", "geometry": mapping(geom), "properties": props}


def _box_ll(dx=0.0):
    return Polygon([(LON + dx, LAT), (LON + dx + 1e-4, LAT), (LON + dx + 1e-4, LAT + 1e-4), (LON + dx, LAT + 1e-4)])


def _fc(*features, site=True):
    obj = {"type": "FeatureCollection", "features": list(features)}
    if site:
        obj["walkcomfort"] = {"site": {"lat": LAT, "lon": LON, "elev_m": 650}}
    return obj


def test_round_trip_and_frame():
    fc = _fc(_feat(_box_ll(), id="b1", kind="building", height_m=12),
             _feat(Point(LON + 2e-4, LAT), id="t1", kind="tree", height_m=9, crown_base_m=3, crown_radius_m=3,
                   transmissivity=0.2, transmissivity_by_month={"1": 0.6}),
             _feat(_box_ll(3e-4), id="c1", kind="canopy", height_m=3, transmissivity=0.5))
    sc = Scene.from_geojson(fc)
    assert sc.ids == ["b1", "t1", "c1"] and len(sc) == 3
    assert sc.crs.to_epsg() == 32630  # Madrid lies in UTM zone 30N (from the zone definition)
    again = Scene.from_geojson(json.dumps(sc.to_geojson()))
    assert again.to_geojson() == sc.to_geojson()
    x, y = sc.project(LON, LAT)
    lon, lat = sc.unproject(x, y)
    assert (lon, lat) == pytest.approx((LON, LAT), abs=1e-9)
    obs = sc.obstacles
    assert obs.n == 3 and obs.tau_month[obs.kind == 1][0, 0] == 0.6 and obs.tau_month[obs.kind == 1][0, 6] == 0.2
    # editing the returned features does not change the scene
    f = sc.features
    f[0]["properties"]["height_m"] = 99
    assert sc.features[0]["properties"]["height_m"] == 12


def test_utm_zone_choice():
    # UTM zone number = floor((lon + 180) / 6) + 1 (from the definition of the grid)
    assert utm_crs(-3.7, 40.4).to_epsg() == 32630
    assert utm_crs(151.2, -33.9).to_epsg() == 32756
    # meridian convergence is small near the central meridian and grows toward the zone edge
    assert abs(LocalFrame(-3.0, 40.0).grid_convergence_deg) < 1e-6
    assert LocalFrame(-5.9, 40.0).grid_convergence_deg == pytest.approx(2.9 * np.sin(np.radians(40)), abs=0.05)


@pytest.mark.parametrize("props, geom, message", [
    ({"id": "b", "kind": "building"}, _box_ll(), "missing 'height_m'"),
    ({"id": "b", "kind": "building", "height_m": -3}, _box_ll(), "must be > 0"),
    ({"id": "b", "kind": "building", "height_m": "tall"}, _box_ll(), "finite number"),
    ({"id": "b", "kind": "building", "height_m": 5}, Point(LON, LAT), "needs a Polygon"),
    ({"id": "t", "kind": "tree", "height_m": 5, "crown_base_m": 6, "transmissivity": 0.2, "crown_radius_m": 2},
     Point(LON, LAT), "must be below height_m"),
    ({"id": "t", "kind": "tree", "height_m": 5, "crown_base_m": 2, "transmissivity": 1.2, "crown_radius_m": 2},
     Point(LON, LAT), "must be <= 1"),
    ({"id": "t", "kind": "tree", "height_m": 5, "crown_base_m": 2, "transmissivity": 0.2}, Point(LON, LAT),
     "missing 'crown_radius_m'"),
    ({"id": "t", "kind": "tree", "height_m": 5, "crown_base_m": 2, "transmissivity": 0.2, "crown_radius_m": 2,
      "transmissivity_by_month": {"13": 0.5}}, Point(LON, LAT), "month '13'"),
    ({"id": "c", "kind": "canopy", "height_m": 3}, _box_ll(), "missing 'transmissivity'"),
    ({"id": "x", "kind": "fountain", "height_m": 3}, _box_ll(), "is not one of"),
    ({"id": "b", "kind": "building", "height_m": 5},
     Polygon([(LON, LAT), (LON + 1e-4, LAT + 1e-4), (LON + 1e-4, LAT), (LON, LAT + 1e-4)]), "invalid geometry"),
    ({"id": "b", "kind": "building", "height_m": 5},
     Polygon([(440000, 4470000), (440010, 4470000), (440010, 4470010)]), "not WGS84"),
])
def test_validation_errors_are_one_line_with_where(props, geom, message):
    with pytest.raises(InputError, match=message) as info:
        Scene.from_geojson(_fc(_feat(geom, **props)), source="town.geojson")
    text = str(info.value)
    assert "\n" not in text and text.startswith("town.geojson feature 0") and "Fix:" in text


def test_duplicate_ids_and_collection_errors(tmp_path):
    with pytest.raises(InputError, match="used twice"):
        Scene.from_geojson(_fc(_feat(_box_ll(), id="a", kind="building", height_m=3),
                               _feat(_box_ll(2e-4), id="a", kind="building", height_m=3)))
    with pytest.raises(InputError, match="FeatureCollection"):
        Scene.from_geojson({"type": "Feature"})
    with pytest.raises(InputError, match="needs walkcomfort.site"):
        Scene.from_geojson(_fc(site=False))
    bad = tmp_path / "bad.geojson"
    bad.write_text('{"type": "FeatureCollection",\n "features": [,]}')
    with pytest.raises(InputError, match=r"bad.geojson:2"):
        load_scene(bad)
    with pytest.raises(InputError, match="not found"):
        load_scene(tmp_path / "missing.geojson")


def test_scene_from_local_keeps_metres():
    frame = LocalFrame(LON, LAT)
    x0, y0 = frame.project(LON, LAT)
    sc = scene_from_local([(Polygon([(x0, y0), (x0 + 10, y0), (x0 + 10, y0 + 20), (x0, y0 + 20)]),
                            {"id": "b", "kind": "building", "height_m": 10.0})], LAT, LON)
    obs = sc.obstacles
    assert obs.cx[0] == pytest.approx(x0 + 5, abs=1e-6) and obs.cy[0] == pytest.approx(y0 + 10, abs=1e-6)
    assert obs.edge_ptr[-1] == 4
    empty = Scene.empty(LAT, LON)
    assert empty.obstacles.n == 0


_values = st.one_of(st.none(), st.booleans(), st.integers(-5, 50), st.floats(allow_nan=True, allow_infinity=True),
                    st.text(max_size=5), st.lists(st.integers(), max_size=2), st.dictionaries(st.text(max_size=2),
                                                                                             st.floats(), max_size=2))
_geoms = st.sampled_from([
    mapping(Point(LON, LAT)), mapping(_box_ll()), {"type": "LineString", "coordinates": [[LON, LAT], [LON, LAT + 1e-4]]},
    {"type": "Polygon", "coordinates": [[[LON, LAT], [LON + 1e-4, LAT + 1e-4], [LON + 1e-4, LAT], [LON, LAT + 1e-4],
                                         [LON, LAT]]]},
    {"type": "Polygon", "coordinates": []}, {"type": "Nonsense"}, None, "text"])


@settings(max_examples=150, deadline=None)
@given(kind=st.sampled_from(["building", "tree", "canopy", "bench", None]), geom=_geoms,
       props=st.dictionaries(st.sampled_from(["height_m", "crown_base_m", "crown_radius_m", "transmissivity",
                                              "transmissivity_by_month"]), _values, max_size=5))
def test_any_malformed_feature_gives_input_error_not_a_crash(kind, geom, props):
    # Bad scenes must end in a one-line InputError (or load), never another exception.
    feat = {"type": "Feature", "geometry": geom, "properties": {"id": "f", "kind": kind, **props}}
    try:
        Scene.from_geojson(_fc(feat))
    except InputError as exc:
        assert "\n" not in str(exc) and "Fix:" in str(exc)


def test_coordinates_outside_lon_lat_are_refused_in_scenes_and_schemes():
    # |lon| <= 180°, |lat| <= 90° (WGS84 definition): projected metres pasted as lon/lat are refused
    from walkcomfort.environment.geo import require_lonlat
    from walkcomfort.routes.schemes import scheme_from_geojson

    square = {"type": "Polygon", "coordinates": [[[440000, 4470000], [440010, 4470000], [440010, 4470010],
                                                  [440000, 4470000]]]}
    feat = {"type": "Feature", "geometry": square, "properties": {"id": "b1", "kind": "building", "height_m": 10.0}}
    with pytest.raises(InputError, match="not WGS84 lon/lat"):
        Scene.from_geojson(json.dumps({"type": "FeatureCollection", "features": [feat]}))
    add = {"type": "Feature", "geometry": square, "properties": {"edit": "add", "kind": "canopy", "height_m": 4.0}}
    with pytest.raises(InputError, match="not WGS84 lon/lat"):
        scheme_from_geojson({"type": "FeatureCollection", "walkcomfort": {"scheme": "canopy"}, "features": [add]})
    require_lonlat(Point(-3.7, 40.4), "here")   # a lon/lat point passes
