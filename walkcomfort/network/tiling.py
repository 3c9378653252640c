"""Spatial tiles of street segments, each with only the obstacles that can shade it.

A city batch should not ship the whole city's scene to every task. Segments are
grouped into square tiles (by their midpoint), and each tile carries the scene
features that can throw a shadow on, or rise into the sky above, any of its
sample points.

Why the buffer is what it is
----------------------------
A point at height ``z`` is shaded by the top edge of an obstacle of height ``H``
only when the sun is lower than ``atan((H - z) / d)``, ``d`` being the horizontal
distance from the point to the obstacle. So for sun elevations of at least
``e_min`` an obstacle farther than ``(H - z) / tan(e_min)`` from every point of a
tile can never shade it (from the geometry of a shadow; common practice in
shadow casting). Each obstacle is kept for a tile when its footprint (a tree
crown's disc or outline) lies within its *own* reach of the tile's points'
bounding box, so a tall building outside the tile is kept and a low wall at the
same distance is not.

The sky view factor looks at every obstacle within its search radius
(``environment.skyview``, :data:`SVF_RADIUS_M`), whatever its height; so an
obstacle is also kept when it lies within that radius. With both rules the
tile's scene gives the same shade and the same sky view at the tile's points as
the whole scene, exactly (checked in the tests).

Below ``e_min`` a shadow from beyond the tile's reach can be missed: the batch flags
those times (``qa_low_sun``); the physics has no elevation cut (see
:mod:`walkcomfort.environment.chain`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.errors import InputError

#: Height of a standing walker's body centre used for shade [m] (the environment's default z).
DEFAULT_Z_M = 1.1
#: Search radius of the sky view factor [m]; passed to ``environment.skyview.sky_view_factor``.
SVF_RADIUS_M = 200.0


def shadow_reach_m(height_m, min_sun_elev_deg: float, z_m: float = DEFAULT_Z_M):
    """Longest horizontal reach of an obstacle's shadow on a point at ``z_m``.

    Parameters
    ----------
    height_m : float or array-like
        Height of the obstacle's top above ground [m].
    min_sun_elev_deg : float
        Lowest sun elevation considered [°] (0 < e < 90).
    z_m : float
        Height of the shaded point above ground [m].

    Returns
    -------
    float or ndarray
        ``max(H - z, 0) / tan(e_min)`` [m].
    """
    if not (0.0 < float(min_sun_elev_deg) < 90.0):
        raise InputError(f"lowest sun elevation considered = {min_sun_elev_deg!r}° is outside 0…90°",
                         fix="give a value such as 5 (degrees above the horizon)")
    h = np.maximum(np.asarray(height_m, dtype=float) - z_m, 0.0)
    out = h / math.tan(math.radians(float(min_sun_elev_deg)))
    return float(out) if np.ndim(out) == 0 else out


def obstacle_table(scene_geojson: dict | None, crs) -> pd.DataFrame:
    """Footprints (in ``crs``) and top heights of every feature of a scene GeoJSON.

    Returns
    -------
    pandas.DataFrame
        ``id, kind, height_m, geometry`` (shapely geometry in metres), one row per
        feature, in the scene's order. A point tree becomes its crown disc.
    """
    import shapely
    from pyproj import Transformer
    from shapely.geometry import shape

    feats = (scene_geojson or {}).get("features") or []
    if not feats:
        return pd.DataFrame(columns=["id", "kind", "height_m", "geometry"])
    fwd = Transformer.from_crs("EPSG:4326", crs, always_xy=True)
    props = [f.get("properties") or {} for f in feats]
    geoms = np.array([shape(f["geometry"]) for f in feats], dtype=object)

    def project(xy):
        x, y = fwd.transform(xy[:, 0], xy[:, 1])
        return np.column_stack([x, y])

    # one projection call for every vertex of the scene (a city has tens of thousands of features)
    geoms = shapely.make_valid(shapely.transform(geoms, project))
    point = shapely.get_type_id(geoms) == 0
    if point.any():
        radius = np.array([float(p.get("crown_radius_m") or 0.0) for p in props])
        geoms[point] = shapely.buffer(geoms[point], radius[point], quad_segs=8)
    return pd.DataFrame({"id": [str(p.get("id", i)) for i, p in enumerate(props)],
                         "kind": [p.get("kind") for p in props],
                         "height_m": [float(p.get("height_m") or 0.0) for p in props],
                         "geometry": geoms}, columns=["id", "kind", "height_m", "geometry"])


@dataclass
class Tile:
    """One square of the tile grid: its segments and the obstacles it needs."""

    tile_id: str
    segment_ids: list[str]
    bounds: tuple[float, float, float, float]   # of the tile's sample points (x0, y0, x1, y1) [m]
    obstacle_ids: list[str] = field(default_factory=list)


def tile_ids(network, tile_size_m: float) -> pd.Series:
    """The tile of every segment (by its midpoint), ``"t<ix>_<iy>"`` counted from the network's corner."""
    if not (isinstance(tile_size_m, (int, float)) and math.isfinite(tile_size_m) and tile_size_m > 0):
        raise InputError(f"tile size = {tile_size_m!r} m is not a positive length",
                         fix="give a tile size in metres, for example 250")
    seg = network.segments
    x0 = math.floor(seg["x_mid_m"].min() / tile_size_m) * tile_size_m
    y0 = math.floor(seg["y_mid_m"].min() / tile_size_m) * tile_size_m
    ix = np.floor((seg["x_mid_m"].to_numpy() - x0) / tile_size_m).astype(int)
    iy = np.floor((seg["y_mid_m"].to_numpy() - y0) / tile_size_m).astype(int)
    return pd.Series([f"t{a:03d}_{b:03d}" for a, b in zip(ix, iy, strict=False)], index=seg.index, name=C.TILE_ID)


def make_tiles(network, obstacles: pd.DataFrame, tile_size_m: float = 250.0,
               min_sun_elev_deg: float = 5.0, z_m: float = DEFAULT_Z_M,
               svf_radius_m: float = SVF_RADIUS_M) -> list[Tile]:
    """Cut ``network`` into tiles and attach to each the obstacles that can shade it.

    Parameters
    ----------
    network : walkcomfort.network.segments.Network
    obstacles : pandas.DataFrame
        From :func:`obstacle_table` (same CRS as the network).
    tile_size_m : float
        Side of a tile [m].
    min_sun_elev_deg : float
        Lowest sun elevation the batch uses for shade [°].
    z_m : float
        Height of the sample points [m].
    svf_radius_m : float
        Sky-view search radius [m]: obstacles this close are kept whatever their height.

    Returns
    -------
    list of Tile
        Sorted by tile id; segments inside a tile keep the network's order.
    """
    from shapely import STRtree, box

    tid = tile_ids(network, tile_size_m)
    pts = network.points.merge(tid.rename(C.TILE_ID), left_on=C.SEGMENT_ID, right_index=True)
    have = len(obstacles) > 0
    if have:
        geoms = obstacles["geometry"].to_numpy()
        tree = STRtree(geoms)
        reach = np.maximum(shadow_reach_m(obstacles["height_m"].to_numpy(), min_sun_elev_deg, z_m),
                           float(svf_radius_m))
        max_reach = float(np.max(reach)) if len(reach) else 0.0
    tiles = []
    ext = pts.groupby(C.TILE_ID, sort=True).agg(x0=(C.X_M, "min"), y0=(C.Y_M, "min"), x1=(C.X_M, "max"),
                                                y1=(C.Y_M, "max"))
    ids = obstacles["id"].to_numpy() if have else None
    for t, seg_ids in tid.groupby(tid, sort=True):
        e = ext.loc[t]
        bounds = (float(e["x0"]), float(e["y0"]), float(e["x1"]), float(e["y1"]))
        keep: list[str] = []
        if have:
            area = box(*bounds)
            cand = np.sort(tree.query(area.buffer(max_reach + 1.0, join_style="mitre")))
            if len(cand):
                dist = area.distance(geoms[cand])
                # 1 m of slack: a footprint exactly at its reach must not be lost to rounding
                ok = cand[dist <= reach[cand] + 1.0]
                keep = [str(v) for v in ids[ok]]
        tiles.append(Tile(str(t), list(seg_ids.index), bounds, keep))
    return tiles


def feature_positions(scene_geojson: dict | None) -> dict[str, int]:
    """``{feature id: position}`` of a scene GeoJSON (for repeated :func:`subset_scene` calls)."""
    feats = (scene_geojson or {}).get("features") or []
    return {str((f.get("properties") or {}).get("id", i)): i for i, f in enumerate(feats)}


def subset_scene(scene_geojson: dict | None, obstacle_ids, positions: dict[str, int] | None = None) -> dict | None:
    """A copy of the scene GeoJSON holding only the features in ``obstacle_ids`` (scene order kept).

    ``positions`` (from :func:`feature_positions`) saves a scan of the whole scene per call.
    """
    if scene_geojson is None:
        return None
    pos = positions if positions is not None else feature_positions(scene_geojson)
    feats = scene_geojson.get("features") or []
    out = {k: v for k, v in scene_geojson.items() if k != "features"}
    out["features"] = [feats[i] for i in sorted(pos[o] for o in set(obstacle_ids))]
    return out
