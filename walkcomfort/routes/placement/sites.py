"""Candidate sites for trees and canopies, and the rules that screen them out.

Sites come from a GeoJSON the designer drew (points; lines, cut at a spacing; polygons,
filled with a grid) or are generated along the planned routes at an offset from the
walking line, on both sides. Every site that is screened out is kept in the
``excluded`` table with its reason, never dropped silently.

Screening rules (defaults are common practice for street planting, not a standard;
local planting guidance and utility maps decide):

* inside a building footprint: excluded;
* closer than ``min_facade_m`` (default 2 m) to a building footprint;
* closer than ``min_tree_m`` (default 4 m) to the trunk of an existing tree;
* closer than 0.5 m to another candidate (duplicates from overlapping inputs).
"""

from __future__ import annotations

import json
import os
from pathlib import Path

import numpy as np
import pandas as pd
import shapely
from shapely.geometry import LineString, shape

from walkcomfort.environment.scene import KIND_CODE, Scene
from walkcomfort.errors import InputError, where

SITE_COLUMNS = ("site_id", "x_m", "y_m", "lon", "lat", "origin")
MIN_FACADE_M = 2.0
MIN_TREE_M = 4.0
DUPLICATE_M = 0.5


def _frame(rows: list[tuple[float, float, str]], scene: Scene, prefix: str) -> pd.DataFrame:
    if not rows:
        return pd.DataFrame(columns=list(SITE_COLUMNS))
    x = np.array([r[0] for r in rows], float)
    y = np.array([r[1] for r in rows], float)
    lon, lat = scene.unproject(x, y)
    return pd.DataFrame({"site_id": [f"{prefix}{i + 1:04d}" for i in range(len(rows))], "x_m": x, "y_m": y,
                         "lon": np.round(np.asarray(lon, float), 7), "lat": np.round(np.asarray(lat, float), 7),
                         "origin": [r[2] for r in rows]})


def _points_on_line(line: LineString, spacing_m: float) -> list[tuple[float, float]]:
    n = max(1, int(np.floor(line.length / spacing_m)))
    at = (np.arange(n) + 0.5) * (line.length / n)
    pts = shapely.line_interpolate_point(line, at)
    return list(zip(shapely.get_x(pts), shapely.get_y(pts), strict=True))


def _grid_in_polygon(poly, grid_m: float) -> list[tuple[float, float]]:
    x0, y0, x1, y1 = poly.bounds
    xs = np.arange(x0 + grid_m / 2, x1, grid_m)
    ys = np.arange(y0 + grid_m / 2, y1, grid_m)
    gx, gy = np.meshgrid(xs, ys)
    pts = shapely.points(gx.ravel(), gy.ravel())
    inside = shapely.contains(poly, pts)
    return list(zip(gx.ravel()[inside], gy.ravel()[inside], strict=True))


def _local(geom, scene: Scene):
    return shapely.transform(geom, lambda xy: np.column_stack(scene.project(xy[:, 0], xy[:, 1])))


def sites_from_geojson(path: str | os.PathLike, scene: Scene, spacing_m: float = 8.0,
                       grid_m: float = 8.0) -> pd.DataFrame:
    """Candidate sites drawn by the designer.

    Parameters
    ----------
    path : path
        GeoJSON FeatureCollection in WGS84: Points (one site each), LineStrings (a verge:
        sites every ``spacing_m``), Polygons (a square: sites on a ``grid_m`` grid).
    scene : Scene
        Fixes the local metric frame.
    spacing_m, grid_m : float
        Site spacing along lines and grid step in polygons [m].

    Returns
    -------
    DataFrame
        Columns ``site_id, x_m, y_m, lon, lat, origin`` (``origin`` names the feature).
    """
    path = Path(path)
    try:
        obj = json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise InputError("candidate-site file does not exist", where=path, fix="check the path") from None
    except json.JSONDecodeError as exc:
        raise InputError(f"not valid JSON ({exc.msg})", where=where(path, line=exc.lineno),
                         fix="write the sites as a GeoJSON FeatureCollection") from None
    feats = obj.get("features") if isinstance(obj, dict) else None
    if not isinstance(feats, list):
        raise InputError("candidate sites must be a GeoJSON FeatureCollection", where=path,
                         fix="export the sites layer as GeoJSON (EPSG:4326)")
    rows: list[tuple[float, float, str]] = []
    for i, f in enumerate(feats):
        loc = f"{path} feature {i}"
        try:
            geom = shape((f or {}).get("geometry"))
        except Exception as exc:  # shapely raises several types for malformed GeoJSON
            raise InputError(f"geometry cannot be read ({exc})", where=loc, fix="write a GeoJSON geometry") from None
        from walkcomfort.environment.geo import require_lonlat

        require_lonlat(geom, loc, fix="export the sites in EPSG:4326 (lon, lat)")
        g = _local(geom, scene)
        for part in shapely.get_parts(g):
            if part.geom_type == "Point":
                rows.append((part.x, part.y, loc))
            elif part.geom_type == "LineString":
                rows += [(x, y, loc) for x, y in _points_on_line(part, spacing_m)]
            elif part.geom_type == "Polygon":
                rows += [(x, y, loc) for x, y in _grid_in_polygon(part, grid_m)]
            else:
                raise InputError(f"{part.geom_type} cannot hold candidate sites", where=loc,
                                 fix="use Points, LineStrings or Polygons")
    return _frame(rows, scene, "s")


def sites_along_routes(routes, scene: Scene, offset_m: float = 3.0, spacing_m: float = 8.0) -> pd.DataFrame:
    """Candidate sites on both sides of each route, ``offset_m`` from the walking line.

    Returns
    -------
    DataFrame
        As :func:`sites_from_geojson`; ``origin`` is ``<route_id> left|right``.
    """
    if offset_m <= 0 or spacing_m <= 0:
        raise InputError(f"offset {offset_m:g} m and spacing {spacing_m:g} m must be > 0", where="--offset/--spacing",
                         fix="give positive distances in metres")
    rows: list[tuple[float, float, str]] = []
    for route in routes:
        x, y = scene.project(route.points["lon"].to_numpy(float), route.points["lat"].to_numpy(float))
        line = LineString(np.column_stack([x, y]))
        for side, sign in (("left", 1.0), ("right", -1.0)):
            off = line.offset_curve(sign * offset_m)
            for part in shapely.get_parts(off):
                if part.geom_type == "LineString" and part.length > 0:
                    rows += [(px, py, f"{route.route_id} {side}") for px, py in _points_on_line(part, spacing_m)]
    return _frame(rows, scene, "r")


def screen_sites(sites: pd.DataFrame, scene: Scene, min_facade_m: float = MIN_FACADE_M,
                 min_tree_m: float = MIN_TREE_M) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Split sites into usable ones and excluded ones with a reason each.

    Returns
    -------
    kept, excluded : DataFrame
        ``excluded`` has the site columns plus ``reason``; ``len(kept) + len(excluded)
        == len(sites)``.
    """
    reason = np.full(len(sites), "", dtype=object)
    if len(sites):
        x, y = sites["x_m"].to_numpy(float), sites["y_m"].to_numpy(float)
        pts = shapely.points(x, y)
        obs = scene.obstacles
        bld = np.flatnonzero(obs.kind == KIND_CODE["building"])
        trees = np.flatnonzero(obs.kind == KIND_CODE["tree"])
        if bld.size:
            inside = scene.inside_buildings(x, y)
            tree_b = shapely.STRtree(obs.footprints[bld])
            pi, _ = tree_b.query(pts, predicate="dwithin", distance=min_facade_m)
            near = np.zeros(len(sites), bool)
            near[pi] = True
            reason[near & (reason == "")] = f"within {min_facade_m:g} m of a building"
            reason[inside] = "inside a building"
        if trees.size:
            trunks = shapely.points(obs.cx[trees], obs.cy[trees])
            pi, _ = shapely.STRtree(trunks).query(pts, predicate="dwithin", distance=min_tree_m)
            near = np.zeros(len(sites), bool)
            near[pi] = True
            reason[near & (reason == "")] = f"within {min_tree_m:g} m of an existing tree"
        reason[_duplicates(x, y) & (reason == "")] = f"within {DUPLICATE_M:g} m of another candidate"
    excluded = sites[reason != ""].assign(reason=reason[reason != ""])
    return sites[reason == ""].reset_index(drop=True), excluded.reset_index(drop=True)


def _duplicates(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """True for every site that has an earlier site within DUPLICATE_M."""
    pts = shapely.points(x, y)
    a, b = shapely.STRtree(pts).query(pts, predicate="dwithin", distance=DUPLICATE_M)
    later = b[a < b]
    out = np.zeros(x.size, bool)
    out[later] = True
    return out
