"""Invented scenes for tests and benchmarks (not a description of any real place).

:func:`random_scene` scatters rectangular and L-shaped buildings, point trees, crown
polygons and canopies around a site, drawn in local metres and stored as lon/lat like
any scene.
"""

from __future__ import annotations

import numpy as np
import shapely
from shapely.geometry import Point

from walkcomfort.environment.geo import LocalFrame
from walkcomfort.environment.scene import Scene, scene_from_local


def random_scene(n_buildings: int, n_trees: int, size_m: float, seed: int = 0, lat: float = 40.4168,
                 lon: float = -3.7038, n_crowns: int = 0, n_canopies: int = 0) -> tuple[Scene, tuple[float, float]]:
    """A random scene in a square of side ``size_m`` centred on the site.

    Parameters
    ----------
    n_buildings, n_trees, n_crowns, n_canopies : int
        Numbers of buildings (4–30 m tall, 6–25 m sides, 30 % L-shaped), point trees
        (5–15 m, crown radius 1.5–5 m), crown polygons and canopies (2.5–4 m).
    size_m : float
        Side of the square [m].
    seed : int
        Random seed (the scene is deterministic for a seed).
    lat, lon : float
        Site [°].

    Returns
    -------
    scene : Scene
    centre : (float, float)
        Local x, y of the site [m].
    """
    rng = np.random.default_rng(seed)
    frame = LocalFrame(lon, lat)
    x0, y0 = frame.project(lon, lat)
    half = size_m / 2

    def pos():
        return x0 + rng.uniform(-half, half), y0 + rng.uniform(-half, half)

    items = []
    for i in range(n_buildings):
        cx, cy = pos()
        w, h = rng.uniform(6, 25, 2)
        ang = rng.uniform(0, 180)
        b = shapely.affinity.rotate(shapely.box(cx - w / 2, cy - h / 2, cx + w / 2, cy + h / 2), ang)
        if rng.random() < 0.3:  # L shape: cut one quadrant
            b = b.difference(shapely.affinity.rotate(shapely.box(cx, cy, cx + w, cy + h), ang, origin=(cx, cy)))
        items.append((b, {"id": f"b{i}", "kind": "building", "height_m": round(float(rng.uniform(4, 30)), 2)}))
    for i in range(n_trees):
        hgt = float(rng.uniform(5, 15))
        items.append((Point(*pos()), {"id": f"t{i}", "kind": "tree", "height_m": round(hgt, 2),
                                      "crown_base_m": round(float(rng.uniform(1.5, 0.6 * hgt)), 2),
                                      "crown_radius_m": round(float(rng.uniform(1.5, 5)), 2),
                                      "transmissivity": round(float(rng.uniform(0.05, 0.4)), 3)}))
    for i in range(n_crowns):
        crown = Point(*pos()).buffer(float(rng.uniform(2, 6)), quad_segs=3)
        items.append((crown, {"id": f"c{i}", "kind": "tree", "height_m": round(float(rng.uniform(5, 15)), 2),
                              "crown_base_m": 2.5, "transmissivity": 0.2,
                              "transmissivity_by_month": {"1": 0.7, "2": 0.7, "12": 0.7, "7": 0.1}}))
    for i in range(n_canopies):
        cx, cy = pos()
        items.append((shapely.box(cx, cy, cx + rng.uniform(3, 10), cy + rng.uniform(3, 10)),
                      {"id": f"p{i}", "kind": "canopy", "height_m": round(float(rng.uniform(2.5, 4)), 2),
                       "transmissivity": 0.4}))
    return scene_from_local(items, lat, lon), (x0, y0)
