"""Direct-beam shade: published geometry, trees and canopies, and the vectorised kernel vs a plain loop."""

from __future__ import annotations

import numpy as np
import pytest
from shapely.geometry import Point, Polygon

from walkcomfort.environment import shade
from walkcomfort.environment.geo import LocalFrame
from walkcomfort.environment.scene import Scene, scene_from_local
from walkcomfort.environment.synthetic import random_scene

LAT, LON = 40.4168, -3.7038
FRAME = LocalFrame(LON, LAT)
X0, Y0 = FRAME.project(LON, LAT)


def _rect(x0, y0, x1, y1):
    return Polygon([(X0 + x0, Y0 + y0), (X0 + x1, Y0 + y0), (X0 + x1, Y0 + y1), (X0 + x0, Y0 + y1)])


def _wall_scene(h, d):
    # a 2 km long east-west wall whose north face is d metres south of the point
    return scene_from_local([(_rect(-1000, -d - 1, 1000, -d), {"id": "wall", "kind": "building", "height_m": h})],
                            LAT, LON)


@pytest.mark.parametrize("h, d", [(10.0, 8.0), (20.0, 5.0), (6.0, 30.0)])
def test_long_wall_shades_iff_tan_elevation_below_ratio(h, d):
    # From the geometry (issue 3): with the sun due south, a long wall of height H at
    # distance d south of a point at body height z shades it iff tan(e) < (H - z)/d.
    z = 1.1
    thr = np.degrees(np.arctan((h - z) / d))
    e = np.array([thr - 5, thr - 0.05, thr + 0.05, thr + 5, 89.0])
    got = shade.beam_transmittance(_wall_scene(h, d), np.full(5, X0), np.full(5, Y0), e, np.full(5, 180.0), z_m=z)
    expected = (np.tan(np.radians(e)) >= (h - z) / d).astype(float)
    np.testing.assert_array_equal(got, expected)


def test_sun_below_horizon_gives_no_beam_and_nan_passes():
    sc = _wall_scene(10, 8)
    got = shade.beam_transmittance(sc, [X0, X0, X0, np.nan], [Y0 + 50, Y0 + 50, Y0 + 50, Y0],
                                   [-0.5, 0.0, 45.0, 30.0], [180, 180, 0, 180])
    assert got[:3].tolist() == [0.0, 0.0, 1.0] and np.isnan(got[3])
    assert shade.beam_transmittance(None, [X0], [Y0], [30.0], [180.0]).tolist() == [1.0]


def test_true_north_not_grid_north():
    # Near the edge of UTM zone 30 the grid is rotated ~1.9° from true north. A thin tree
    # 60 m due *true* south (same longitude) must be hit by a sun at true azimuth 180°;
    # without the convergence correction the ray would pass 2 m to the side of a 1 m crown.
    lon, lat = -5.9, 40.0
    south = (lon, lat - 60 / 111_000)
    sc = Scene.from_geojson({"type": "FeatureCollection", "walkcomfort": {"site": {"lat": lat, "lon": lon}},
                             "features": [{"type": "Feature", "geometry": {"type": "Point", "coordinates": list(south)},
                                           "properties": {"id": "t", "kind": "tree", "height_m": 40.0,
                                                          "crown_base_m": 1.0, "crown_radius_m": 1.0,
                                                          "transmissivity": 0.25}}]})
    x, y = sc.project(lon, lat)
    assert shade.beam_transmittance(sc, [x], [y], [20.0], [180.0]).tolist() == [0.25]
    assert shade.beam_transmittance(sc, [x], [y], [20.0], [184.0]).tolist() == [1.0]


def _tree_scene(**extra):
    props = {"id": "t", "kind": "tree", "height_m": 8.0, "crown_base_m": 3.0, "crown_radius_m": 3.0,
             "transmissivity": 0.2} | extra
    return scene_from_local([(Point(X0, Y0 - 10), props)], LAT, LON)


def test_tree_crown_transmissivity_and_height_band():
    # From the geometry: trunk 10 m south, crown 3..8 m, radius 3 m, point at 1.1 m.
    # The ray at horizontal distance s is at 1.1 + s tan e; it is inside the crown's
    # disc for s in [7, 13]. e = 30°: heights 5.1..8.6 -> passes the crown (x 0.2);
    # e = 70°: above 8 m already at s = 7 -> sun; e = 5°: below 3 m over the disc -> sun.
    sc = _tree_scene()
    got = shade.beam_transmittance(sc, np.full(3, X0), np.full(3, Y0), [30.0, 70.0, 5.0], [180.0] * 3)
    np.testing.assert_allclose(got, [0.2, 1.0, 1.0])
    by_month = _tree_scene(transmissivity_by_month={"1": 0.7})
    assert shade.beam_transmittance(by_month, [X0], [Y0], [30.0], [180.0], month=1)[0] == pytest.approx(0.7)
    assert shade.beam_transmittance(by_month, [X0], [Y0], [30.0], [180.0], month=7)[0] == pytest.approx(0.2)
    assert shade.beam_transmittance(by_month, [X0], [Y0], [30.0], [180.0])[0] == pytest.approx(0.2)


def test_crossings_multiply_and_canopy_overhead():
    # From the definition (each crossing passes its transmissivity): two crowns in line.
    items = [(Point(X0, Y0 - 8), {"id": "a", "kind": "tree", "height_m": 30.0, "crown_base_m": 0.5,
                                  "crown_radius_m": 2.0, "transmissivity": 0.5}),
             (Point(X0, Y0 - 16), {"id": "b", "kind": "tree", "height_m": 30.0, "crown_base_m": 0.5,
                                   "crown_radius_m": 2.0, "transmissivity": 0.3}),
             (_rect(30, -5, 40, 5), {"id": "p", "kind": "canopy", "height_m": 3.0, "transmissivity": 0.4})]
    sc = scene_from_local(items, LAT, LON)
    got = shade.beam_transmittance(sc, [X0, X0 + 35, X0 + 35], [Y0, Y0, Y0], [20.0, 60.0, 60.0], [180.0, 180.0, 0.0])
    # under the canopy's middle: sun at 60° leaves the slab 1.1-1.3 m away -> still under it
    np.testing.assert_allclose(got, [0.15, 0.4, 0.4])
    assert shade.beam_transmittance(sc, [X0 + 35], [Y0 + 5.5], [80.0], [0.0])[0] == 1.0  # just outside, sun away


def test_courtyard_hole_and_inside_footprint():
    # From the geometry: a 40 m square block with a 20 m courtyard, 12 m tall.
    block = Polygon([(X0 - 20, Y0 - 20), (X0 + 20, Y0 - 20), (X0 + 20, Y0 + 20), (X0 - 20, Y0 + 20)],
                    holes=[[(X0 - 10, Y0 - 10), (X0 + 10, Y0 - 10), (X0 + 10, Y0 + 10), (X0 - 10, Y0 + 10)]])
    sc = scene_from_local([(block, {"id": "blk", "kind": "building", "height_m": 12.0})], LAT, LON)
    # courtyard centre: wall 10 m away, (12-1.1)/10 -> threshold 47.5°
    got = shade.beam_transmittance(sc, [X0] * 3 + [X0 + 15], [Y0] * 3 + [Y0], [60.0, 40.0, 89.0, 60.0], [180.0] * 4)
    assert got.tolist() == [1.0, 0.0, 1.0, 0.0]  # last point stands inside the footprint


def test_vectorised_equals_plain_loop_on_random_scene():
    # Reference: the plain shapely loop (shade.beam_transmittance_naive) on an invented
    # scene with L-shaped buildings, point trees, crown polygons with monthly values and canopies.
    sc, (x0, y0) = random_scene(40, 30, 200, seed=3, n_crowns=10, n_canopies=10)
    rng = np.random.default_rng(11)
    m = 400
    x, y = x0 + rng.uniform(-100, 100, m), y0 + rng.uniform(-100, 100, m)
    e, a = rng.uniform(-3, 85, m), rng.uniform(0, 360, m)
    z = rng.uniform(0.3, 2.0, m)
    month = rng.integers(1, 13, m)
    fast = shade.beam_transmittance(sc, x, y, e, a, z_m=z, month=month)
    slow = shade.beam_transmittance_naive(sc, x, y, e, a, z_m=z, month=month)
    np.testing.assert_allclose(fast, slow, atol=1e-12)
    assert 0.05 < np.mean(fast[e > 0] < 1) < 0.95  # the test scene really shades some rays


def test_grid_equals_rowwise():
    sc, (x0, y0) = random_scene(40, 30, 200, seed=4)
    rng = np.random.default_rng(5)
    x, y = x0 + rng.uniform(-80, 80, 30), y0 + rng.uniform(-80, 80, 30)
    e = np.array([-2.0, 3.0, 15.0, 40.0, 70.0, np.nan])
    a = np.array([80.0, 90.0, 120.0, 180.0, 240.0, 200.0])
    g = shade.beam_transmittance_grid(sc, x, y, e, a, month=[7] * 6)
    ii, jj = np.repeat(np.arange(30), 6), np.tile(np.arange(6), 30)
    rows = shade.beam_transmittance(sc, x[ii], y[ii], e[jj], a[jj], month=7).reshape(30, 6)
    np.testing.assert_array_equal(np.isnan(g), np.isnan(rows))
    np.testing.assert_allclose(g[:, :5], rows[:, :5])
    assert (g[:, 0] == 0).all() and np.isnan(g[:, 5]).all()


def test_beer_lambert_path_length_option():
    # From the definition of crown_model="path_length": tau^(l / l_mean), l the 3-D path in
    # the crown and l_mean = 4V/S (Cauchy). Crown: cylinder r = 3 m, 3..8 m, 10 m south;
    # sun due south at 30°: in the disc for s in [7, 13], in the height band for
    # s in [3.29, 11.95] -> horizontal chord 4.95 m, 3-D 4.95/cos 30°; l_mean = 2rH/(r+H) = 3.75 m.
    # (The crown is declared a cylinder: point-tree crowns are spheroids by default.)
    tan30 = np.tan(np.radians(30))
    s_top = (8.0 - 1.1) / tan30
    l3d = (s_top - 7.0) / np.cos(np.radians(30))
    expected = 0.2 ** (l3d / 3.75)
    sc = _tree_scene(crown_shape="cylinder")
    south = 180.0 - FRAME.grid_convergence_deg  # grid south (the trees sit on the local grid)
    got = shade.beam_transmittance(sc, [X0], [Y0], [30.0], [south], crown_model="path_length")[0]
    assert got == pytest.approx(expected, rel=1e-9)
    # a ray grazing the crown's side (2.9 m east) passes much more light than tau
    half = np.sqrt(3.0 ** 2 - 2.9 ** 2)
    graze = 0.2 ** ((2 * half / np.cos(np.radians(30))) / 3.75)
    got2 = shade.beam_transmittance(sc, [X0 + 2.9], [Y0], [30.0], [south], crown_model="path_length")[0]
    assert got2 == pytest.approx(graze, rel=1e-6) and got2 > 0.4
    # the square crown 6 m x 6 m has the same mean chord 4AH/(2A + PH) = 3.75 m and chord
    square = scene_from_local([(_rect(-3, -13, 3, -7), {"id": "sq", "kind": "tree", "height_m": 8.0,
                                                         "crown_base_m": 3.0, "transmissivity": 0.2})], LAT, LON)
    got3 = shade.beam_transmittance(square, [X0], [Y0], [30.0], [south], crown_model="path_length")[0]
    assert got3 == pytest.approx(expected, rel=1e-9)
    # default unchanged; unknown model refused
    assert shade.beam_transmittance(sc, [X0], [Y0], [30.0], [180.0])[0] == pytest.approx(0.2)
    from walkcomfort.errors import InputError

    with pytest.raises(InputError, match="crown_model"):
        shade.beam_transmittance(sc, [X0], [Y0], [30.0], [180.0], crown_model="fog")


def test_more_obstacles_never_let_more_sun_or_sky_through():
    # From the definitions: transmittance is a product of factors <= 1 and the hidden sky a
    # union of bands, so adding obstacles can only lower both (checked on invented scenes).
    from walkcomfort.environment.skyview import sky_view_factor

    big, (x0, y0) = random_scene(40, 30, 200, seed=21, n_crowns=8, n_canopies=8)
    feats = big.features
    small = Scene(feats[::2], site=big.site)
    rng = np.random.default_rng(22)
    m = 300
    x, y = x0 + rng.uniform(-100, 100, m), y0 + rng.uniform(-100, 100, m)
    e, a = rng.uniform(1, 80, m), rng.uniform(0, 360, m)
    t_small = shade.beam_transmittance(small, x, y, e, a, month=7, crown_model="path_length")
    t_big = shade.beam_transmittance(big, x, y, e, a, month=7, crown_model="path_length")
    assert np.all((t_big >= 0) & (t_big <= 1)) and np.all(t_big <= t_small + 1e-12)
    s_small = sky_view_factor(small, x[:80], y[:80])
    s_big = sky_view_factor(big, x[:80], y[:80])
    assert np.all(s_big.to_numpy() <= s_small.to_numpy() + 1e-12)


@pytest.mark.parametrize("elev", [30.0, 45.0, 60.0])
def test_spheroid_shadow_area_equals_analytic_ellipse_projection(elev):
    # A spheroid (horizontal semi-axis a, vertical c) projected on the ground along a sun at
    # elevation b is an ellipse of semi-axes a and sqrt(a² sin²b + c² cos²b)/sin b (parallel
    # projection of an ellipsoid; from the geometry). The cylinder of the same radius and
    # depth casts a stadium pi a² + 2a·2c/tan b.
    a, c, base = 3.0, 2.5, 3.0
    opaque = {"kind": "tree", "height_m": base + 2 * c, "crown_base_m": base, "crown_radius_m": a,
              "transmissivity": 0.0}
    sph = scene_from_local([(Point(X0, Y0), {"id": "s", **opaque})], LAT, LON)
    cyl = scene_from_local([(Point(X0, Y0), {"id": "c", "crown_shape": "cylinder", **opaque})], LAT, LON)
    step = 0.1  # the shadow lies north of the trunk (sun due south)
    gx, gy = np.meshgrid(X0 + np.arange(-6, 6, step) + step / 2, Y0 + np.arange(-4, 26, step) + step / 2)
    gx, gy = gx.ravel(), gy.ravel()
    south = 180.0 - FRAME.grid_convergence_deg
    b = np.radians(elev)
    for scene, expected in (
        (sph, np.pi * a * np.sqrt(a * a * np.sin(b) ** 2 + c * c * np.cos(b) ** 2) / np.sin(b)),
        (cyl, np.pi * a * a + 2 * a * 2 * c / np.tan(b)),
    ):
        tau = shade.beam_transmittance(scene, gx, gy, np.full(gx.size, elev), np.full(gx.size, south), z_m=0.0)
        area = float((tau < 0.5).sum()) * step * step
        assert area == pytest.approx(expected, rel=0.02)
    # the cylinder's shadow is 1.2-1.6 times the spheroid's at these elevations
    assert 1.1 < (np.pi * a * a + 4 * a * c / np.tan(b)) / (
        np.pi * a * np.sqrt(a * a * np.sin(b) ** 2 + c * c * np.cos(b) ** 2) / np.sin(b)) < 1.7


def test_leaf_area_model_matches_campbell_norman_through_a_layer():
    # a wide flat crown (prism) seen from below: a ray through its full depth at elevation b
    # crosses a layer of leaf area index LAI, so tau = exp(-G Omega LAI / sin b) exactly
    from walkcomfort.environment import crowns

    layer = scene_from_local([(_rect(-50, -50, 50, 50), {"id": "p", "kind": "tree", "height_m": 9.0,
                                                          "crown_base_m": 5.0, "transmissivity": 0.3,
                                                          "lai": 3.0})], LAT, LON)
    for elev in (30.0, 60.0, 90.0):
        got = shade.beam_transmittance(layer, [X0], [Y0], [elev], [180.0], crown_model="leaf_area")[0]
        assert got == pytest.approx(float(crowns.beam_transmissivity(3.0, elev)), rel=1e-9)
    # leaf-off month: only the woody area is left
    jan = shade.beam_transmittance(layer, [X0], [Y0], [60.0], [180.0], month=1, crown_model="leaf_area")[0]
    assert jan == pytest.approx(float(crowns.beam_transmissivity(crowns.WOODY_AREA_INDEX, 60.0)), rel=1e-9)
