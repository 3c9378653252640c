"""Scheme files: structure, validation against a scene, application, inventory."""

from __future__ import annotations

import json

import numpy as np
import pytest

from walkcomfort.errors import InputError
from walkcomfort.routes.schemes import Scheme, apply_scheme, load_scheme, scheme_from_geojson, scheme_inventory

LAT, LON = 40.40, -3.70


def _box(lon, lat, d=0.0001):
    return {"type": "Polygon", "coordinates": [[[lon, lat], [lon + d, lat], [lon + d, lat + d], [lon, lat + d],
                                                [lon, lat]]]}


@pytest.fixture
def scene():
    from walkcomfort.environment.scene import Scene

    feats = [
        {"type": "Feature", "geometry": _box(LON, LAT), "properties": {"id": "b1", "kind": "building", "height_m": 12}},
        {"type": "Feature", "geometry": {"type": "Point", "coordinates": [LON + 0.0005, LAT]},
         "properties": {"id": "t1", "kind": "tree", "height_m": 8, "crown_base_m": 2.5, "crown_radius_m": 3,
                        "transmissivity": 0.2}},
    ]
    return Scene.from_geojson({"type": "FeatureCollection", "walkcomfort": {"site": {"lat": LAT, "lon": LON}},
                               "features": feats})


def _scheme(features, name="s1"):
    return {"type": "FeatureCollection", "walkcomfort": {"scheme": name, "label": "test"}, "features": features}


def _tree(lon, lat, **kw):
    props = {"edit": "add", "kind": "tree", "height_m": 9, "crown_base_m": 3, "crown_radius_m": 4,
             "transmissivity": 0.15, **kw}
    return {"type": "Feature", "geometry": {"type": "Point", "coordinates": [lon, lat]}, "properties": props}


def test_empty_scheme_returns_the_same_scene(scene):
    assert apply_scheme(scene, Scheme.base()) is scene
    assert apply_scheme(scene, scheme_from_geojson(_scheme([]))) is scene


def test_add_remove_modify(scene):
    s = scheme_from_geojson(_scheme([
        _tree(LON + 0.001, LAT, id="new-1"),
        _tree(LON + 0.0012, LAT),
        {"type": "Feature", "geometry": None, "properties": {"edit": "remove", "target": "t1"}},
        {"type": "Feature", "geometry": None, "properties": {"edit": "modify", "target": "b1", "height_m": 20}},
    ]))
    new = apply_scheme(scene, s)
    assert sorted(new.ids) == ["b1", "new-1", "s1-2"]
    b1 = [f for f in new.features if f["properties"]["id"] == "b1"][0]
    assert b1["properties"]["height_m"] == 20
    # the input scene is unchanged
    assert sorted(scene.ids) == ["b1", "t1"]
    assert [f for f in scene.features if f["properties"]["id"] == "b1"][0]["properties"]["height_m"] == 12


def test_inventory_counts_trees_and_areas(scene):
    canopy = {"type": "Feature", "geometry": _box(LON + 0.002, LAT, 0.0002),
              "properties": {"edit": "add", "kind": "canopy", "height_m": 3.5, "transmissivity": 0.1}}
    s = scheme_from_geojson(_scheme([_tree(LON + 0.001, LAT), _tree(LON + 0.0011, LAT), canopy,
                                     {"type": "Feature", "geometry": None,
                                      "properties": {"edit": "remove", "target": "t1"}}]))
    inv = scheme_inventory(scene, s)
    assert inv["trees_added"] == 2 and inv["trees_removed"] == 1
    # crowns: 2 x pi 4^2 added, pi 3^2 removed (from the definition of a circle's area)
    assert inv["crown_m2_added"] == pytest.approx(2 * np.pi * 16 - np.pi * 9, abs=0.01)
    # 0.0002° x 0.0002° at 40.4° N: 22.2 m x 17.0 m (1° lat ≈ 111.0 km, 1° lon ≈ 111.3 km · cos φ; from memory)
    assert inv["canopy_m2_added"] == pytest.approx(22.2 * 16.96, rel=0.01)
    assert inv["shade_m2_added"] == pytest.approx(inv["crown_m2_added"] + inv["canopy_m2_added"], abs=0.02)


@pytest.mark.parametrize("features, needle", [
    ([{"type": "Feature", "geometry": None, "properties": {"edit": "remove", "target": "nope"}}], "not a feature"),
    ([{"type": "Feature", "geometry": None, "properties": {"edit": "modify", "target": "t1", "height_m": -3}}],
     "not a valid scene feature"),
    ([_tree(LON, LAT, id="b1")], "already exists"),
    ([_tree(LON, LAT, crown_base_m=20)], "not a valid scene feature"),
])
def test_edits_checked_against_the_scene(scene, features, needle):
    s = scheme_from_geojson(_scheme(features), source="s.geojson")
    with pytest.raises(InputError) as exc:
        apply_scheme(scene, s)
    assert needle in str(exc.value) and "s.geojson feature 0" in str(exc.value)


@pytest.mark.parametrize("features, needle", [
    ([{"type": "Feature", "geometry": None, "properties": {"edit": "paint"}}], "not known"),
    ([{"type": "Feature", "geometry": None, "properties": {"edit": "remove"}}], "needs properties.target"),
    ([{"type": "Feature", "geometry": None, "properties": {"edit": "remove", "target": "t1"}},
      {"type": "Feature", "geometry": None, "properties": {"edit": "remove", "target": "t1"}}], "edited twice"),
    ([{"type": "Feature", "geometry": None, "properties": {"edit": "modify", "target": "t1"}}], "changes nothing"),
    ([{"type": "Feature", "geometry": None, "properties": {"edit": "modify", "target": "t1", "kind": "building"}}],
     "cannot change the kind"),
    ([{"type": "Feature", "properties": {"edit": "add", "kind": "canopy", "height_m": 3, "transmissivity": 0},
       "geometry": {"type": "Polygon", "coordinates": [[[0, 0], [1, 1], [1, 0], [0, 1], [0, 0]]]}}], "invalid"),
    ([{"type": "Feature", "geometry": None, "properties": {"edit": "add", "kind": "tree"}}], "needs a geometry"),
    ([_tree(LON, LAT, kind="bench")], "kind"),
])
def test_structural_errors(features, needle):
    with pytest.raises(InputError) as exc:
        scheme_from_geojson(_scheme(features), source="s.geojson")
    assert needle in str(exc.value)


def test_load_scheme_file(tmp_path):
    p = tmp_path / "row.geojson"
    p.write_text(json.dumps(_scheme([_tree(LON, LAT)], name="tree-row")))
    s = load_scheme(p)
    assert s.name == "tree-row" and len(s.edits) == 1 and s.source == str(p)
    bad = tmp_path / "bad.geojson"
    bad.write_text(json.dumps(_scheme([], name="has space")))
    with pytest.raises(InputError, match="not allowed"):
        load_scheme(bad)
