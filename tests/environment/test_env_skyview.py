"""Sky view factor: Oke's infinite canyon, a single long wall, a point under a crown."""

from __future__ import annotations

import numpy as np
import pytest
from shapely.geometry import Point, Polygon

from walkcomfort import columns as C
from walkcomfort.environment.geo import LocalFrame
from walkcomfort.environment.scene import scene_from_local
from walkcomfort.environment.skyview import SKY_DIFFUSE_FRAC, sky_view_factor

LAT, LON = 40.4168, -3.7038
X0, Y0 = LocalFrame(LON, LAT).project(LON, LAT)


def _wall(y0, y1, h, name, length=4000.0):
    return (Polygon([(X0 - length / 2, Y0 + y0), (X0 + length / 2, Y0 + y0), (X0 + length / 2, Y0 + y1),
                     (X0 - length / 2, Y0 + y1)]), {"id": name, "kind": "building", "height_m": h})


@pytest.mark.parametrize("n_sectors", [36, 72])
def test_infinite_canyon_centre_matches_oke(n_sectors):
    # Oke (1987), Boundary Layer Climates: SVF at the centre of the floor of an infinitely
    # long canyon = cos(arctan(2H/W)); H/W = 1 -> 0.447. Walls 4 km long, W = H = 20 m,
    # viewpoint on the ground (z = 0).
    sc = scene_from_local([_wall(10, 30, 20.0, "n"), _wall(-30, -10, 20.0, "s")], LAT, LON)
    out = sky_view_factor(sc, [X0], [Y0], z_m=0.0, n_sectors=n_sectors, radius_m=1500.0)
    expected = np.cos(np.arctan(2 * 1.0))
    assert expected == pytest.approx(0.447, abs=5e-4)
    assert out[C.SVF].iloc[0] == pytest.approx(expected, abs=0.01)
    assert out[C.SKY_VIEW_CROWN_FRAC].iloc[0] == 1.0  # no crowns in this scene


@pytest.mark.parametrize("hw", [0.5, 2.0])
def test_canyon_other_aspect_ratios(hw):
    # Same formula (Oke 1987) for H/W = 0.5 and 2.
    w = 20.0
    h = hw * w
    sc = scene_from_local([_wall(w / 2, w / 2 + 5, h, "n"), _wall(-w / 2 - 5, -w / 2, h, "s")], LAT, LON)
    out = sky_view_factor(sc, [X0], [Y0], z_m=0.0, n_sectors=72, radius_m=1500.0)
    assert out[C.SVF].iloc[0] == pytest.approx(np.cos(np.arctan(2 * hw)), abs=0.01)


def test_single_long_wall():
    # From the same integral (one wall of height H at distance d): SVF = (1 + cos(arctan(H/d)))/2;
    # H = d -> 0.8536.
    sc = scene_from_local([_wall(10, 15, 10.0, "n")], LAT, LON)
    out = sky_view_factor(sc, [X0], [Y0], z_m=0.0, n_sectors=72, radius_m=1500.0)
    assert out[C.SVF].iloc[0] == pytest.approx((1 + np.cos(np.pi / 4)) / 2, abs=0.01)


def test_under_a_crown():
    # From the geometry: a crown disc of radius 5 m from 3 to 10 m straight above the
    # viewpoint at 1.1 m hides, in every direction, elevations above atan(1.9/5);
    # visible sky = sin²(atan(1.9/5)) = 0.1261 for both measures. (Declared a cylinder:
    # point-tree crowns are spheroids by default; the spheroid case is the next test.)
    sc = scene_from_local([(Point(X0, Y0), {"id": "t", "kind": "tree", "height_m": 10.0, "crown_base_m": 3.0,
                                            "crown_radius_m": 5.0, "transmissivity": 0.2,
                                            "crown_shape": "cylinder"})], LAT, LON)
    out = sky_view_factor(sc, [X0, X0 + 500, np.nan], [Y0, Y0, Y0], z_m=1.1, n_sectors=36)
    expected = np.sin(np.arctan(1.9 / 5.0)) ** 2
    assert out[C.SVF].iloc[0] == pytest.approx(expected, abs=1e-9)
    assert out[C.SKY_VIEW_CROWN_FRAC].iloc[0] == pytest.approx(expected, abs=1e-9)
    assert out[C.SVF].iloc[1] == 1.0  # far away, beyond radius_m
    assert np.isnan(out[C.SVF].iloc[2])


def test_under_a_spheroid_crown():
    # From the geometry: a spheroid (a = 5 m, c = 3.5 m, centre 5.4 m above the eye) seen from
    # its axis: the tangent from the eye to the ellipse rises at atan(sqrt(w² - c²)/a) in
    # every direction, so the visible sky is sin² of it = 0.4036 (ellipse sampled: ±0.005).
    sc = scene_from_local([(Point(X0, Y0), {"id": "t", "kind": "tree", "height_m": 10.0, "crown_base_m": 3.0,
                                            "crown_radius_m": 5.0, "transmissivity": 0.2})], LAT, LON)
    out = sky_view_factor(sc, [X0], [Y0], z_m=1.1, n_sectors=36)
    w, c, a = 5.4, 3.5, 5.0
    expected = np.sin(np.arctan(np.sqrt(w * w - c * c) / a)) ** 2
    assert out[C.SVF].iloc[0] == pytest.approx(expected, abs=0.005)


def test_crowns_only_measure_ignores_buildings():
    sc = scene_from_local([_wall(10, 30, 20.0, "n"),
                           (Point(X0, Y0 - 8), {"id": "t", "kind": "tree", "height_m": 9.0, "crown_base_m": 2.0,
                                                "crown_radius_m": 3.0, "transmissivity": 0.2})], LAT, LON)
    out = sky_view_factor(sc, [X0], [Y0], z_m=1.1)
    assert out[C.SVF].iloc[0] < out[C.SKY_VIEW_CROWN_FRAC].iloc[0] < 1.0


def test_pruned_horizon_search_equals_testing_every_obstacle():
    # From the definition: the tallest-bound-first pruning may only skip obstacles that
    # cannot change the result, so it must equal the exhaustive computation.
    from walkcomfort.environment.synthetic import random_scene

    sc, (x0, y0) = random_scene(60, 40, 250, seed=8, n_crowns=15, n_canopies=15)
    rng = np.random.default_rng(9)
    x, y = x0 + rng.uniform(-120, 120, 150), y0 + rng.uniform(-120, 120, 150)
    a = sky_view_factor(sc, x, y, z_m=1.1)
    b = sky_view_factor(sc, x, y, z_m=1.1, _prune=False)
    np.testing.assert_allclose(a.to_numpy(), b.to_numpy(), atol=1e-12)
    assert (a[C.SVF] < 1).mean() > 0.5


def test_transmissive_canopy_passes_its_share_of_diffuse_sky():
    # a wide sail (transmissivity 0.5) overhead hides almost all the sky: opaque svf ~ 0,
    # the diffuse sky reaching the point is about half of it; an opaque one passes none
    def sail(tau):
        box = Polygon([(X0 - 200, Y0 - 200), (X0 + 200, Y0 - 200), (X0 + 200, Y0 + 200), (X0 - 200, Y0 + 200)])
        return scene_from_local([(box, {"id": "s", "kind": "canopy", "height_m": 4.0,
                                                                "transmissivity": tau})], LAT, LON)
    half = sky_view_factor(sail(0.5), [X0], [Y0], z_m=1.1)
    opaque = sky_view_factor(sail(0.0), [X0], [Y0], z_m=1.1)
    assert half[C.SVF].iloc[0] < 0.01
    assert half[SKY_DIFFUSE_FRAC].iloc[0] == pytest.approx(0.5, abs=0.01)
    assert opaque[SKY_DIFFUSE_FRAC].iloc[0] == pytest.approx(opaque[C.SVF].iloc[0], abs=1e-12)
