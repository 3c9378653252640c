"""Synthetic street grids and block scenes at a stated size, for benchmarks and tests.

Invented geometry, not a place: a rectangular street grid with one building per
block (heights cycling through a fixed list) and a street tree at every
crossing. Deterministic: the same arguments give the same GeoJSON.
"""

from __future__ import annotations

import math

_M_PER_DEG_LAT = 111_320.0  # [m per degree of latitude] (spherical Earth; good enough to lay out a grid)


def _lonlat(x_m: float, y_m: float, lon0: float, lat0: float) -> list[float]:
    lat = lat0 + y_m / _M_PER_DEG_LAT
    lon = lon0 + x_m / (_M_PER_DEG_LAT * math.cos(math.radians(lat0)))
    return [round(lon, 7), round(lat, 7)]


def grid_network(n_x: int, n_y: int, block_m: float = 100.0, lon0: float = -3.70, lat0: float = 40.42,
                 name: str = "synthetic-grid") -> dict:
    """A network GeoJSON of ``n_x`` north-south and ``n_y`` east-west streets, ``block_m`` apart.

    Every street is one LineString across the grid, with a vertex at every crossing.
    Cut at ``segment_length_m = block_m`` it gives ``n_x (n_y - 1) + n_y (n_x - 1)``
    segments.
    """
    feats = []
    for i in range(n_x):
        coords = [_lonlat(i * block_m, j * block_m, lon0, lat0) for j in range(n_y)]
        feats.append({"type": "Feature", "properties": {"id": f"ns{i:03d}", "name": f"North street {i}"},
                      "geometry": {"type": "LineString", "coordinates": coords}})
    for j in range(n_y):
        coords = [_lonlat(i * block_m, j * block_m, lon0, lat0) for i in range(n_x)]
        feats.append({"type": "Feature", "properties": {"id": f"ew{j:03d}", "name": f"East street {j}"},
                      "geometry": {"type": "LineString", "coordinates": coords}})
    return {"type": "FeatureCollection", "walkcomfort": {"network": name}, "features": feats}


def grid_scene(n_x: int, n_y: int, block_m: float = 100.0, setback_m: float = 12.0,
               heights_m: tuple[float, ...] = (9.0, 15.0, 21.0, 12.0), trees: bool = True,
               lon0: float = -3.70, lat0: float = 40.42) -> dict:
    """A scene GeoJSON matching :func:`grid_network`: one building per block, a tree at each crossing."""
    feats = []
    k = 0
    for i in range(n_x - 1):
        for j in range(n_y - 1):
            x0, y0 = i * block_m + setback_m, j * block_m + setback_m
            x1, y1 = (i + 1) * block_m - setback_m, (j + 1) * block_m - setback_m
            ring = [_lonlat(x, y, lon0, lat0) for x, y in ((x0, y0), (x1, y0), (x1, y1), (x0, y1), (x0, y0))]
            feats.append({"type": "Feature",
                          "properties": {"id": f"b{i:03d}_{j:03d}", "kind": "building",
                                         "height_m": float(heights_m[k % len(heights_m)])},
                          "geometry": {"type": "Polygon", "coordinates": [ring]}})
            k += 1
    if trees:
        for i in range(n_x):
            for j in range(n_y):
                feats.append({"type": "Feature",
                              "properties": {"id": f"t{i:03d}_{j:03d}", "kind": "tree", "height_m": 8.0,
                                             "crown_base_m": 3.0, "crown_radius_m": 3.0,
                                             "transmissivity": 0.2},
                              "geometry": {"type": "Point",
                                           "coordinates": _lonlat(i * block_m + 6.0, j * block_m + 6.0,
                                                                  lon0, lat0)}})
    return {"type": "FeatureCollection", "walkcomfort": {"site": {"lat": lat0, "lon": lon0, "elev_m": 650.0}},
            "features": feats}
