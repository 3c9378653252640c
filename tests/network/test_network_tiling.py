"""Scene tiling: every obstacle that can shade a tile's points travels with the tile."""

from __future__ import annotations

import math

import numpy as np
import pytest

from walkcomfort import columns as C
from walkcomfort.errors import InputError
from walkcomfort.network.segments import network_from_geojson
from walkcomfort.network.tiling import make_tiles, obstacle_table, shadow_reach_m, subset_scene

M_PER_DEG = 111_320.0  # as in walkcomfort.network.synthetic


def _ll(x, y, lon0=3.0, lat0=0.0):
    return [lon0 + x / (M_PER_DEG * math.cos(math.radians(lat0))), lat0 + y / M_PER_DEG]


def _building(fid, x0, y0, x1, y1, h):
    ring = [_ll(x, y) for x, y in ((x0, y0), (x1, y0), (x1, y1), (x0, y1), (x0, y0))]
    return {"type": "Feature", "properties": {"id": fid, "kind": "building", "height_m": h},
            "geometry": {"type": "Polygon", "coordinates": [ring]}}


def _street(fid, x0, y0, x1, y1):
    return {"type": "Feature", "properties": {"id": fid},
            "geometry": {"type": "LineString", "coordinates": [_ll(x0, y0), _ll(x1, y1)]}}


def test_shadow_reach_from_the_geometry_of_a_shadow():
    # from the definition: (H - z) / tan(e); 20 m wall, point at 1.1 m, sun at 5° -> 216.03 m
    assert shadow_reach_m(20.0, 5.0) == pytest.approx(18.9 / math.tan(math.radians(5.0)), rel=1e-12)
    assert shadow_reach_m(20.0, 5.0) == pytest.approx(216.03, abs=0.01)
    # sun at 45°: reach equals the height above the point
    assert np.allclose(shadow_reach_m([1.1, 11.1], 45.0), [0.0, 10.0])
    with pytest.raises(InputError):
        shadow_reach_m(10.0, 0.0)


def test_tall_building_outside_a_tile_travels_with_it_low_one_does_not():
    # two tiles side by side (100 m each); a street in the west tile ends 2 m from the edge.
    # east of the edge: a 40 m tower 80 m from the street's end (reach 444 m at 5°) and a
    # 3 m wall about as far (reach 21.7 m), but 10 m from the east tile's street
    net = network_from_geojson({"type": "FeatureCollection", "features": [
        _street("w", 10, 50, 98, 50), _street("e", 110, 20, 190, 20)]}, segment_length_m=100, spacing_m=10)
    scene = {"type": "FeatureCollection", "features": [
        _building("tower", 178, 40, 190, 60, 40.0), _building("wall", 178, 30, 190, 35, 3.0),
        _building("far", 700, 40, 710, 60, 40.0)]}
    obst = obstacle_table(scene, net.crs)
    # the shadow rule alone (no sky-view radius)
    tiles = {t.tile_id: t for t in make_tiles(net, obst, tile_size_m=100.0, min_sun_elev_deg=5.0, svf_radius_m=0)}
    west = [t for t in tiles.values() if "w#000" in t.segment_ids][0]
    east = [t for t in tiles.values() if "e#000" in t.segment_ids][0]
    assert west.tile_id != east.tile_id
    # shadow reach = (H − z) / tan(e) with z = 1.1 m: (40 − 1.1) / tan 5° = 444.6 m,
    # (3 − 1.1) / tan 5° = 21.7 m, (40 − 1.1) / tan 30° = 67.4 m (from the geometry)
    assert west.obstacle_ids == ["tower"]            # outside the tile, but its shadow reaches in
    assert east.obstacle_ids == ["tower", "wall"]    # the wall is 10 m from the east street
    sub = subset_scene(scene, west.obstacle_ids)
    assert [f["properties"]["id"] for f in sub["features"]] == ["tower"]
    # a higher sun shortens the reach: at 30° the tower reaches 67.4 m < 80 m
    tiles30 = make_tiles(net, obst, tile_size_m=100.0, min_sun_elev_deg=30.0, svf_radius_m=0)
    assert [t.obstacle_ids for t in tiles30 if "w#000" in t.segment_ids] == [[]]
    # the sky view looks 200 m around whatever the height: with it, the wall and the tower
    # travel with the west tile, the building 600 m away does not
    tiles_svf = make_tiles(net, obst, tile_size_m=100.0, min_sun_elev_deg=30.0)
    assert [t.obstacle_ids for t in tiles_svf if "w#000" in t.segment_ids] == [["tower", "wall"]]


def test_point_tree_is_its_crown_disc():
    net = network_from_geojson({"type": "FeatureCollection", "features": [_street("s", 0, 0, 50, 0)]})
    tree = {"type": "Feature", "properties": {"id": "oak", "kind": "tree", "height_m": 10.0, "crown_radius_m": 4.0,
                                               "crown_base_m": 3.0, "transmissivity": 0.2},
            "geometry": {"type": "Point", "coordinates": _ll(25, 10)}}
    obst = obstacle_table({"type": "FeatureCollection", "features": [tree]}, net.crs)
    # a crown of radius 4 m is a disc of area π·4² m² (from the definition)
    assert obst["geometry"].iloc[0].area == pytest.approx(math.pi * 16, rel=0.01)
    assert obst.loc[0, "height_m"] == 10.0
    assert make_tiles(net, obst)[0].obstacle_ids == ["oak"]


def test_every_segment_lands_in_exactly_one_tile():
    from walkcomfort.network.synthetic import grid_network

    net = network_from_geojson(grid_network(6, 5, block_m=80.0), segment_length_m=40.0)
    tiles = make_tiles(net, obstacle_table(None, net.crs), tile_size_m=130.0)
    ids = [s for t in tiles for s in t.segment_ids]
    assert sorted(ids) == sorted(net.segments.index) and len(ids) == len(set(ids))
    for t in tiles:
        pts = net.points.loc[net.points[C.SEGMENT_ID].isin(t.segment_ids)]
        assert t.bounds[0] == pts[C.X_M].min() and t.bounds[3] == pts[C.Y_M].max()


def _tower_case():
    net = network_from_geojson({"type": "FeatureCollection", "features": [
        _street("w", 10, 50, 98, 50), _street("e", 110, 20, 190, 20)]}, segment_length_m=100, spacing_m=10)
    site = {"walkcomfort": {"site": {"lat": 0.0, "lon": 3.0, "elev_m": 0.0}}}
    scene = {"type": "FeatureCollection", **site, "features": [
        _building("tower", 178, 40, 190, 60, 40.0), _building("wall", 178, 30, 190, 35, 3.0)]}
    obst = obstacle_table(scene, net.crs)
    tiles = make_tiles(net, obst, tile_size_m=100.0, min_sun_elev_deg=5.0, svf_radius_m=0.0)
    west = [t for t in tiles if "w#000" in t.segment_ids][0]
    pts = net.points.loc[net.points[C.SEGMENT_ID] == "w#000"]
    return net, scene, obst, west, pts[C.X_M].to_numpy(), pts[C.Y_M].to_numpy()


def test_tower_outside_the_tile_really_shades_points_inside_it():
    # the layout above through the environment's reference ray caster: sun due east at 15°,
    # so the 40 m tower's shadow reaches (40 - 1.1) / tan 15° = 145 m west, across the tile edge
    from walkcomfort.environment.scene import Scene
    from walkcomfort.environment.shade import beam_transmittance_naive

    net, scene, obst, west, x, y = _tower_case()
    tower_x0 = obst["geometry"].iloc[0].bounds[0]
    assert tower_x0 - west.bounds[2] > 75.0  # the tower stands well outside the tile's points
    elev, azim = np.full(x.size, 15.0), np.full(x.size, 90.0)
    tile_scene = Scene.from_geojson(subset_scene(scene, west.obstacle_ids))
    inside_only = Scene.from_geojson({**scene, "features": []})  # what a tile without a buffer would carry
    t_tile = beam_transmittance_naive(tile_scene, x, y, elev, azim)
    t_full = beam_transmittance_naive(Scene.from_geojson(scene), x, y, elev, azim)
    np.testing.assert_array_equal(t_tile, t_full)
    shaded = x > tower_x0 - 38.9 / math.tan(math.radians(15.0))
    assert shaded.sum() >= 5
    assert (t_tile[shaded] == 0.0).all() and (t_tile[~shaded] == 1.0).all()
    assert (beam_transmittance_naive(inside_only, x, y, elev, azim) == 1.0).all()  # the shadow it would lose


def test_fast_shade_kernel_sees_the_tower_too():
    # the batch uses the fast grid kernel: on a tile's small scene it must agree with the reference
    # (it once capped the search at the obstacles' own extent and missed this shadow)
    from walkcomfort.environment.scene import Scene
    from walkcomfort.environment.shade import beam_transmittance_grid, beam_transmittance_naive

    net, scene, obst, west, x, y = _tower_case()
    tile_scene = Scene.from_geojson(subset_scene(scene, west.obstacle_ids))
    fast = beam_transmittance_grid(tile_scene, x, y, np.array([15.0]), np.array([90.0]))[:, 0]
    ref = beam_transmittance_naive(tile_scene, x, y, np.full(x.size, 15.0), np.full(x.size, 90.0))
    np.testing.assert_array_equal(fast, ref)


def test_tiled_shade_equals_whole_scene_shade_on_a_grid_town():
    # every point of every tile, sun all round the sky at or above the lowest elevation considered
    from walkcomfort.environment.scene import Scene
    from walkcomfort.environment.shade import beam_transmittance_grid
    from walkcomfort.network.synthetic import grid_network, grid_scene

    net = network_from_geojson(grid_network(5, 4, block_m=60.0), segment_length_m=30.0, spacing_m=10.0)
    scene = grid_scene(5, 4, block_m=60.0, setback_m=6.0, heights_m=(30.0, 6.0, 18.0))
    tiles = make_tiles(net, obstacle_table(scene, net.crs), tile_size_m=70.0, min_sun_elev_deg=8.0,
                       svf_radius_m=0.0)  # shade only: the shadow rule alone must be exact
    assert len(tiles) >= 4
    full = Scene.from_geojson(scene)
    rng = np.random.default_rng(7)
    elev = np.r_[8.0, rng.uniform(8.0, 70.0, 11)]
    azim = rng.uniform(0.0, 360.0, 12)
    n_shaded = 0
    for t in tiles:
        assert len(t.obstacle_ids) < len(scene["features"])  # tiles do carry less than the whole scene
        pts = net.points.loc[net.points[C.SEGMENT_ID].isin(t.segment_ids)]
        x, y = pts[C.X_M].to_numpy(), pts[C.Y_M].to_numpy()
        a = beam_transmittance_grid(Scene.from_geojson(subset_scene(scene, t.obstacle_ids)), x, y, elev, azim,
                                    month=7)
        b = beam_transmittance_grid(full, x, y, elev, azim, month=7)
        np.testing.assert_array_equal(a, b)
        n_shaded += int((b < 1).sum())
    assert n_shaded > 0


def test_a_street_point_inside_a_building_is_flagged(tmp_path):
    from walkcomfort.network.batch import plan_job, time_range
    from walkcomfort.network.engines import read_segment_hours, run_job
    from walkcomfort.routes.weather import StatedConditions

    net = network_from_geojson({"type": "FeatureCollection", "features": [_street("s", 0, 0, 100, 0)]},
                               segment_length_m=50.0)
    site = {"lat": 0.0, "lon": 3.0, "elev_m": 0.0}
    scene = {"type": "FeatureCollection", "walkcomfort": {"site": site},
             "features": [_building("across", 60, -5, 80, 5, 10.0)]}  # built over the second half
    times = time_range("2026-03-20T11:00", "2026-03-20T12:00", "1h", "UTC")
    weather = StatedConditions(t_air_c=25.0, rh_pct=50.0, wind_ms=2.0).conditions(times, 0.0, 3.0)
    weather.attrs = {}
    job = plan_job(net, times, {"base": scene}, weather, site=site, context={"wind_height_m": 10.0})
    assert run_job(job, tmp_path).ok
    rows = read_segment_hours(tmp_path)
    flagged = rows.groupby(C.SEGMENT_ID)[C.QA_INSIDE_BUILDING].all()
    assert flagged.to_dict() == {"s#000": False, "s#001": True}
