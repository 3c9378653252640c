"""The scene: buildings, trees and canopies that cast shade and hide the sky.

A scene is a GeoJSON FeatureCollection in WGS84 lon/lat (the contract is in
DEVELOPERS.md, "Scene GeoJSON"). Every feature has ``properties.id`` (a unique
string) and ``properties.kind``:

``building``
    Polygon/MultiPolygon footprint, ``height_m`` > 0 above ground; opaque; extruded
    from the ground to its height (flat roof).
``tree``
    Point (trunk) with ``crown_radius_m`` > 0 — a spheroid of that horizontal radius
    spanning ``crown_base_m``…``height_m`` (``crown_shape: "cylinder"`` for a vertical
    cylinder instead) — or a Polygon crown outline — a prism; ``height_m`` total height, ``crown_base_m``
    (0 ≤ base < height) the crown's lowest level, ``transmissivity`` the leaf-on
    fraction of the direct beam passing through the crown, optionally
    ``transmissivity_by_month`` (``{"1": 0.6, …, "12": 0.6}``; months not listed use
    ``transmissivity``). Optional leaf area: ``lai`` (leaf area index of the crown) or
    ``crown_type`` (one of :data:`walkcomfort.environment.crowns.LAI_DEFAULTS`, default
    ``broadleaf_dense``) and ``deciduous`` (default true: leaf-off months keep only the
    woody area) — used by ``crown_model="leaf_area"``.
``canopy``
    Polygon/MultiPolygon (pergola, awning, sail), ``height_m`` its underside,
    ``transmissivity`` 0 (opaque) … 1 (open). Modelled as a slab
    :data:`CANOPY_THICKNESS_M` thick.
``ground``
    Polygon/MultiPolygon of one ground surface, ``material`` one of
    :data:`walkcomfort.environment.surfaces.MATERIALS` (asphalt, concrete, stone, brick,
    grass). Not an obstacle: it only sets the surface energy balance of the ground there.
    Ground not covered by any ``ground`` feature is ``walkcomfort.ground_material`` of the
    collection, default asphalt. Buildings may give ``wall_material`` (default concrete).

Optional top-level ``"walkcomfort": {"site": {"lat": .., "lon": .., "elev_m": ..}}``
fixes the site (and so the local UTM frame) and ``"ground_material"`` the default ground; otherwise the centre of the features'
bounding box is used. The ground is taken as flat.

By default each crossing of a crown multiplies the beam by that crown's transmissivity,
whatever the path length inside it (measured crown transmissivities are whole-crown
values). :func:`walkcomfort.environment.shade.beam_transmittance` can instead apply
Beer–Lambert attenuation along the path (``crown_model="path_length"``).
"""

from __future__ import annotations

import copy
import json
import math
import os
from dataclasses import dataclass
from functools import cached_property
from pathlib import Path

import numpy as np
import shapely
from shapely.geometry import mapping, shape

from walkcomfort.environment.geo import LocalFrame, require_lonlat
from walkcomfort.errors import InputError

KINDS = ("building", "tree", "canopy", "ground")
#: Kinds that cast shade and hide the sky (``ground`` only declares a surface material).
OBSTACLE_KINDS = ("building", "tree", "canopy")
KIND_CODE = {k: i for i, k in enumerate(KINDS)}
#: Shapes of point-tree crowns: a spheroid (default) or a vertical cylinder.
CROWN_SHAPES = ("spheroid", "cylinder")
#: Thickness given to canopies (pergolas, awnings) so that they are solids [m].
CANOPY_THICKNESS_M = 0.2

_POLY = ("Polygon", "MultiPolygon")


@dataclass(frozen=True)
class Obstacles:
    """Scene obstacles in the local frame, as flat arrays for the vectorised kernels.

    One row per solid part (a MultiPolygon gives one row per polygon). Circle
    obstacles (point trees) have no edges; polygon obstacles own the edges
    ``edge_ptr[i]:edge_ptr[i+1]`` (exterior and holes, so the crossing-number test
    is exact for holes too).
    """

    kind: np.ndarray        # int8 code, see KIND_CODE
    feature: np.ndarray     # int index into Scene.features
    z_bottom: np.ndarray    # [m] lowest level of the solid
    z_top: np.ndarray       # [m] highest level
    tau_base: np.ndarray    # (n,) leaf-on beam transmittance (0 for buildings)
    tau_month: np.ndarray   # (n, 12) beam transmittance per month (0 for buildings)
    is_circle: np.ndarray   # bool
    cx: np.ndarray          # [m] bounding-circle centre (the trunk for point trees)
    cy: np.ndarray
    r: np.ndarray           # [m] bounding-circle radius (crown radius for point trees)
    edge_ptr: np.ndarray    # (n+1,) CSR pointer into the edge arrays
    ex1: np.ndarray
    ey1: np.ndarray
    ex2: np.ndarray
    ey2: np.ndarray
    footprints: np.ndarray  # shapely geometries (circles as polygons) for the STRtree
    tree: shapely.STRtree
    grid_convergence_deg: float = 0.0  # add to a true azimuth to get the local-grid direction
    mean_chord_m: np.ndarray | None = None  # [m] mean chord 4V/S of each solid (Cauchy), for Beer–Lambert
    is_spheroid: np.ndarray | None = None  # bool: point-tree crowns that are spheroids (else cylinders)
    area_index: np.ndarray | None = None   # (n, 13) leaf (or woody) area index: leaf-on, then months 1..12

    @property
    def n(self) -> int:
        return int(self.kind.size)

    @property
    def z_max(self) -> float:
        return float(self.z_top.max()) if self.n else 0.0


class Scene:
    """Validated obstacles of a site plus its local metric frame.

    Build with :func:`load_scene` or :meth:`Scene.from_geojson`; :meth:`to_geojson`
    gives the GeoJSON back. ``Scene.crs`` is the site's UTM CRS and
    :meth:`project` maps lon/lat to local x/y metres.
    """

    def __init__(self, features: list[dict], site: dict | None = None, source: str = "scene",
                 ground_material: str | None = None):
        try:  # own copy; a JSON round trip is much faster than deepcopy for GeoJSON content
            self._features = json.loads(json.dumps(list(features)))
        except (TypeError, ValueError):
            self._features = [copy.deepcopy(f) for f in features]
        self.source = source
        self._geoms = [_validate_feature(f, i, source) for i, f in enumerate(self._features)]
        ids = [f["properties"]["id"] for f in self._features]
        seen: dict[str, int] = {}
        for i, fid in enumerate(ids):
            if fid in seen:
                raise InputError(f"feature id {fid!r} is used twice (features {seen[fid]} and {i})",
                                 where=f"{source} feature {i}", fix="give every feature a unique properties.id")
            seen[fid] = i
        self.site = _site(site, self._geoms, source)
        self.frame = LocalFrame(self.site["lon"], self.site["lat"])
        self.ground_material = _material_name(ground_material or _DEFAULT_GROUND, f"{source} walkcomfort.ground_material")

    # --- construction / export -----------------------------------------------------
    @classmethod
    def from_geojson(cls, obj: dict | str, source: str = "scene") -> Scene:
        """Scene from a GeoJSON FeatureCollection (a dict or JSON text)."""
        if isinstance(obj, str):
            try:
                obj = json.loads(obj)
            except json.JSONDecodeError as exc:
                raise InputError(f"not valid JSON ({exc.msg})", where=f"{source}:{exc.lineno}",
                                 fix="check the file is GeoJSON") from None
        if not isinstance(obj, dict) or obj.get("type") != "FeatureCollection":
            got = obj.get("type") if isinstance(obj, dict) else type(obj).__name__
            raise InputError(f"expected a GeoJSON FeatureCollection, got type {got!r}", where=source,
                             fix='wrap the features in {"type": "FeatureCollection", "features": [...]}')
        feats = obj.get("features")
        if not isinstance(feats, list):
            raise InputError("FeatureCollection has no 'features' list", where=source,
                             fix="add a 'features' array")
        meta = obj.get("walkcomfort") or {}
        site = meta.get("site") if isinstance(meta, dict) else None
        ground = meta.get("ground_material") if isinstance(meta, dict) else None
        return cls(feats, site=site, source=source, ground_material=ground)

    @classmethod
    def empty(cls, lat: float, lon: float, elev_m: float = 0.0) -> Scene:
        """A scene with no obstacles at a site (open ground everywhere)."""
        return cls([], site={"lat": lat, "lon": lon, "elev_m": elev_m})

    def to_geojson(self) -> dict:
        """The scene as a GeoJSON FeatureCollection dict (site included)."""
        meta = {"site": dict(self.site)}
        if self.ground_material != _DEFAULT_GROUND:
            meta["ground_material"] = self.ground_material
        return {"type": "FeatureCollection", "walkcomfort": meta,
                "features": copy.deepcopy(self._features)}

    # --- access ------------------------------------------------------------------------
    @property
    def features(self) -> list[dict]:
        """Copies of the GeoJSON features (editing them does not change the scene)."""
        return copy.deepcopy(self._features)

    @property
    def ids(self) -> list[str]:
        return [f["properties"]["id"] for f in self._features]

    def __len__(self) -> int:
        return len(self._features)

    def __repr__(self) -> str:
        kinds = {k: sum(1 for f in self._features if f["properties"]["kind"] == k) for k in KINDS}
        return (f"Scene({len(self)} features: {kinds['building']} buildings, {kinds['tree']} trees, "
                f"{kinds['canopy']} canopies; site {self.site['lat']:.5f}, {self.site['lon']:.5f}; {self.crs.name})")

    @property
    def crs(self):
        """The local projected CRS (UTM zone of the site)."""
        return self.frame.crs

    def project(self, lon, lat):
        """WGS84 lon/lat [°] -> local x, y [m]."""
        return self.frame.project(lon, lat)

    def unproject(self, x, y):
        """Local x, y [m] -> WGS84 lon/lat [°]."""
        return self.frame.unproject(x, y)

    def inside_buildings(self, x, y) -> np.ndarray:
        """Whether local points ``(x, y)`` [m] fall inside a building footprint (bool per point)."""
        x = np.asarray(x, dtype=float).reshape(-1)
        y = np.asarray(y, dtype=float).reshape(-1)
        out = np.zeros(x.size, dtype=bool)
        obs = self.obstacles
        ok = np.isfinite(x) & np.isfinite(y)
        if not ok.any() or obs.n == 0:
            return out
        pts = shapely.points(x[ok], y[ok])
        pi, oi = obs.tree.query(pts, predicate="within")
        bld = obs.kind[oi] == KIND_CODE["building"]
        out[np.flatnonzero(ok)[pi[bld]]] = True
        return out

    def snap_outside(self, x, y, clearance_m: float = 0.5):
        """Move points that fall inside a building to just outside its nearest wall.

        Parameters
        ----------
        x, y : array-like
            Local points [m].
        clearance_m : float, default 0.5
            Distance outside the wall to place the point [m].

        Returns
        -------
        x, y : ndarray
            Moved copies (points outside buildings unchanged).
        moved : ndarray of bool
            Which points were moved.
        """
        x = np.array(x, dtype=float).reshape(-1)
        y = np.array(y, dtype=float).reshape(-1)
        inside = self.inside_buildings(x, y)
        if not inside.any():
            return x, y, inside
        obs = self.obstacles
        idx = np.flatnonzero(inside)
        pts = shapely.points(x[idx], y[idx])
        pi, oi = obs.tree.query(pts, predicate="within")
        keep = obs.kind[oi] == KIND_CODE["building"]
        pi, oi = pi[keep], oi[keep]
        first = np.unique(pi, return_index=True)[1]
        pi, oi = pi[first], oi[first]
        rings = shapely.boundary(obs.footprints[oi])
        at = shapely.line_interpolate_point(rings, shapely.line_locate_point(rings, pts[pi]))
        bx, by = shapely.get_x(at), shapely.get_y(at)
        px, py = x[idx[pi]], y[idx[pi]]
        dx, dy = bx - px, by - py
        d = np.hypot(dx, dy)
        d = np.where(d > 0, d, 1.0)
        x[idx[pi]] = bx + dx / d * clearance_m
        y[idx[pi]] = by + dy / d * clearance_m
        return x, y, inside

    def ground_material_at(self, x, y) -> np.ndarray:
        """Ground material name at local points ``(x, y)`` [m] (object array; the scene default elsewhere)."""
        x = np.asarray(x, dtype=float).reshape(-1)
        y = np.asarray(y, dtype=float).reshape(-1)
        out = np.full(x.size, self.ground_material, dtype=object)
        polys, names = self._ground_index
        ok = np.isfinite(x) & np.isfinite(y)
        if not ok.any() or not len(names):
            return out
        pi, gi = polys.query(shapely.points(x[ok], y[ok]), predicate="within")
        out[np.flatnonzero(ok)[pi]] = names[gi]
        return out

    def wall_material(self, feature: int) -> str:
        """Wall material of feature ``feature`` (a building), default concrete."""
        return str(self._features[int(feature)]["properties"].get("wall_material") or _DEFAULT_WALL)

    @cached_property
    def _ground_index(self):
        idx = [i for i, f in enumerate(self._features) if f["properties"]["kind"] == "ground"]
        if not idx:
            return shapely.STRtree([]), np.empty(0, dtype=object)
        geoms = np.empty(len(idx), dtype=object)
        geoms[:] = [self._geoms[i] for i in idx]
        local = shapely.transform(geoms, lambda xy: np.column_stack(self.frame.project(xy[:, 0], xy[:, 1])))
        names = np.array([self._features[i]["properties"]["material"].strip().lower() for i in idx], dtype=object)
        return shapely.STRtree(local), names

    @cached_property
    def obstacles(self) -> Obstacles:
        """Obstacles in local metres, prepared once for the shade and sky-view kernels."""
        return _prepare(self)


def scene_from_local(items, lat: float, lon: float, elev_m: float = 0.0) -> Scene:
    """Build a scene from geometries drawn in the site's local metres.

    Parameters
    ----------
    items : iterable of (shapely geometry, dict)
        Geometry in local UTM metres of the site and the feature properties
        (``id``, ``kind``, heights …, as in the scene contract).
    lat, lon : float
        The site [°]; fixes the local frame.
    elev_m : float, default 0
        Site elevation [m].

    Returns
    -------
    Scene
        Validated like any GeoJSON scene; coordinates are stored as lon/lat.
    """
    items = list(items)
    frame = LocalFrame(lon, lat)
    geoms = np.empty(len(items), dtype=object)
    geoms[:] = [g for g, _ in items]
    if len(items):
        geoms = shapely.transform(geoms, lambda xy: np.column_stack(frame.unproject(xy[:, 0], xy[:, 1])))
    feats = [feature_to_geojson(g, p) for g, (_, p) in zip(geoms, items, strict=False)]
    return Scene(feats, site={"lat": float(lat), "lon": float(lon), "elev_m": float(elev_m)})


def load_scene(path: str | os.PathLike) -> Scene:
    """Read and validate a scene GeoJSON file (see the module docstring for its contract)."""
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise InputError("scene file not found", where=str(path), fix="give the path of a .geojson scene") from None
    return Scene.from_geojson(text, source=str(path))


# --- validation ----------------------------------------------------------------------------

def _num(props: dict, key: str, where: str, *, required: bool = True, lo: float | None = None,
         hi: float | None = None, lo_open: bool = False, default=None):
    if key not in props or props[key] is None:
        if required:
            raise InputError(f"missing '{key}'", where=where, fix=f"add properties.{key} (a number)")
        return default
    val = props[key]
    if isinstance(val, bool) or not isinstance(val, (int, float)) or not math.isfinite(val):
        raise InputError(f"'{key}' must be a finite number, got {val!r}", where=where,
                         fix=f"write properties.{key} as a number")
    val = float(val)
    if lo is not None and (val <= lo if lo_open else val < lo):
        raise InputError(f"'{key}' = {val:g} must be {'>' if lo_open else '>='} {lo:g}", where=where,
                         fix=f"correct properties.{key}")
    if hi is not None and val > hi:
        raise InputError(f"'{key}' = {val:g} must be <= {hi:g}", where=where, fix=f"correct properties.{key}")
    return val


def _validate_feature(f, i: int, source: str):
    where = f"{source} feature {i}"
    if not isinstance(f, dict) or f.get("type") != "Feature":
        raise InputError("not a GeoJSON Feature", where=where, fix="each entry of 'features' must be a Feature")
    props = f.get("properties")
    if not isinstance(props, dict):
        raise InputError("feature has no properties", where=where, fix="add properties with id, kind and height_m")
    fid = props.get("id")
    if not isinstance(fid, str) or not fid:
        raise InputError(f"properties.id must be a non-empty string, got {fid!r}", where=where,
                         fix="give every feature a unique string id")
    where = f"{source} feature {i} (id {fid!r})"
    kind = props.get("kind")
    if kind not in KINDS:
        raise InputError(f"kind {kind!r} is not one of {', '.join(KINDS)}", where=where, fix="set properties.kind")
    try:
        geom = shape(f.get("geometry"))
    except Exception as exc:  # shapely raises several types for malformed GeoJSON
        raise InputError(f"geometry cannot be read ({exc})", where=where, fix="write a GeoJSON geometry") from None
    gtype = geom.geom_type
    if geom.is_empty:
        raise InputError("geometry is empty", where=where, fix="give the outline or the trunk position")
    if not shapely.is_valid(geom):
        raise InputError(f"invalid geometry: {shapely.is_valid_reason(geom)}", where=where,
                         fix="repair the polygon (no self-intersections, closed rings)")
    require_lonlat(geom, where, fix="export the scene in EPSG:4326 (lon, lat) as GeoJSON requires")
    if kind == "building":
        if gtype not in _POLY:
            raise InputError(f"a building needs a Polygon footprint, got {gtype}", where=where,
                             fix="draw the footprint as a Polygon")
        _num(props, "height_m", where, lo=0.0, lo_open=True)
        if props.get("wall_material") is not None:
            _material_name(props["wall_material"], f"{where} wall_material")
    elif kind == "tree":
        h = _num(props, "height_m", where, lo=0.0, lo_open=True)
        cb = _num(props, "crown_base_m", where, lo=0.0)
        if cb >= h:
            raise InputError(f"crown_base_m = {cb:g} must be below height_m = {h:g}", where=where,
                             fix="give the height of the lowest branches, below the tree top")
        _num(props, "transmissivity", where, lo=0.0, hi=1.0)
        if gtype == "Point":
            _num(props, "crown_radius_m", where, lo=0.0, lo_open=True)
        elif gtype not in _POLY:
            raise InputError(f"a tree needs a Point trunk or a Polygon crown, got {gtype}", where=where,
                             fix="use a Point with crown_radius_m or a crown Polygon")
        shape_ = props.get("crown_shape", "spheroid")
        if shape_ not in CROWN_SHAPES:
            raise InputError(f"crown_shape {shape_!r} is not known", where=where,
                             fix=f"use one of {', '.join(CROWN_SHAPES)}")
        _num(props, "lai", where, required=False, lo=0.0, hi=15.0)
        ctype = props.get("crown_type")
        if ctype is not None:
            from walkcomfort.environment.crowns import LAI_DEFAULTS

            if ctype not in LAI_DEFAULTS:
                raise InputError(f"crown_type {ctype!r} is not known", where=where,
                                 fix=f"use one of {', '.join(LAI_DEFAULTS)} or give lai")
        if not isinstance(props.get("deciduous", True), bool):
            raise InputError("deciduous must be true or false", where=where, fix="write deciduous: true")
        by_month = props.get("transmissivity_by_month")
        if by_month is not None:
            if not isinstance(by_month, dict):
                raise InputError("transmissivity_by_month must be an object {\"1\": 0.6, ...}", where=where,
                                 fix="key months 1..12 as strings")
            for k, v in by_month.items():
                if str(k) not in {str(m) for m in range(1, 13)}:
                    raise InputError(f"transmissivity_by_month has month {k!r}", where=where,
                                     fix="use months \"1\" … \"12\"")
                _num({"v": v}, "v", f"{where} transmissivity_by_month[{k}]", lo=0.0, hi=1.0)
    elif kind == "ground":
        if gtype not in _POLY:
            raise InputError(f"a ground surface needs a Polygon, got {gtype}", where=where,
                             fix="draw the paved or planted area as a Polygon")
        _material_name(props.get("material"), f"{where} material")
    else:  # canopy
        if gtype not in _POLY:
            raise InputError(f"a canopy needs a Polygon, got {gtype}", where=where, fix="draw its outline as a Polygon")
        _num(props, "height_m", where, lo=0.0, lo_open=True)
        _num(props, "transmissivity", where, lo=0.0, hi=1.0)
    return geom


def _site(site, geoms, source: str) -> dict:
    if site is not None:
        if not isinstance(site, dict):
            raise InputError("walkcomfort.site must be an object with lat, lon", where=source, fix="see DEVELOPERS.md")
        lat = _num(site, "lat", f"{source} walkcomfort.site", lo=-90, hi=90)
        lon = _num(site, "lon", f"{source} walkcomfort.site", lo=-180, hi=180)
        elev = _num(site, "elev_m", f"{source} walkcomfort.site", required=False, default=0.0)
        return {"lat": lat, "lon": lon, "elev_m": elev}
    if not geoms:
        raise InputError("an empty scene needs walkcomfort.site to fix its location", where=source,
                         fix="add {\"walkcomfort\": {\"site\": {\"lat\": .., \"lon\": ..}}}")
    b = shapely.total_bounds(np.array(geoms, dtype=object))
    return {"lat": float((b[1] + b[3]) / 2), "lon": float((b[0] + b[2]) / 2), "elev_m": 0.0}


# --- preparation --------------------------------------------------------------------------

def _tau_months(props: dict) -> np.ndarray:
    base = float(props.get("transmissivity", 0.0))
    out = np.full(12, base)
    for k, v in (props.get("transmissivity_by_month") or {}).items():
        out[int(k) - 1] = float(v)
    return out


def _prepare(scene) -> Obstacles:
    keep = [i for i, f in enumerate(scene._features) if f["properties"]["kind"] in OBSTACLE_KINDS]
    feats = [scene._features[i] for i in keep]
    geoms_in = [scene._geoms[i] for i in keep]
    nf = len(feats)
    e = np.empty(0)
    if nf == 0:
        return Obstacles(np.empty(0, np.int8), np.empty(0, np.int64), e, e, e, np.empty((0, 12)), np.empty(0, bool),
                         e, e, e, np.zeros(1, np.int64), e, e, e, e, np.empty(0, object), shapely.STRtree([]),
                         _convergence(scene), e, np.empty(0, bool), np.zeros((0, 13)))
    geoms = np.empty(nf, dtype=object)
    geoms[:] = geoms_in
    # one pyproj call for every coordinate of the scene
    local = shapely.transform(geoms, lambda xy: np.column_stack(scene.frame.project(xy[:, 0], xy[:, 1])))
    kind = np.empty(nf, np.int8)
    zb, zt, tau_base = np.empty(nf), np.empty(nf), np.zeros(nf)
    tau_m = np.zeros((nf, 12))
    radius = np.zeros(nf)
    for i, f in enumerate(feats):
        p = f["properties"]
        k = p["kind"]
        kind[i] = KIND_CODE[k]
        if k == "building":
            zb[i], zt[i] = 0.0, float(p["height_m"])
        else:
            if k == "tree":
                zb[i], zt[i] = float(p["crown_base_m"]), float(p["height_m"])
                radius[i] = float(p.get("crown_radius_m") or 0.0)
            else:
                zb[i] = float(p["height_m"])
                zt[i] = zb[i] + CANOPY_THICKNESS_M
            tau_base[i] = float(p["transmissivity"])
            tau_m[i] = _tau_months(p)
    is_point = shapely.get_type_id(local) == 0
    # point trees: circles
    pt = np.flatnonzero(is_point)
    pcx, pcy = shapely.get_x(local[pt]), shapely.get_y(local[pt])
    pfoot = shapely.buffer(local[pt], radius[pt], quad_segs=8) if pt.size else np.empty(0, object)
    # polygons: one solid per part; edges of all rings
    pg = np.flatnonzero(~is_point)
    parts, part_feat = shapely.get_parts(local[pg], return_index=True)
    part_feat = pg[part_feat]
    rings, ring_part = shapely.get_rings(parts, return_index=True)
    xy, ring_of = shapely.get_coordinates(rings, return_index=True)
    same = ring_of[1:] == ring_of[:-1]
    e1, e2 = xy[:-1][same], xy[1:][same]
    edge_part = ring_part[ring_of[:-1][same]]
    counts_poly = np.bincount(edge_part, minlength=parts.size)
    b = shapely.bounds(parts)
    qcx, qcy = (b[:, 0] + b[:, 2]) / 2, (b[:, 1] + b[:, 3]) / 2
    ext_xy, ext_of = shapely.get_coordinates(shapely.get_exterior_ring(parts), return_index=True)
    d = np.hypot(ext_xy[:, 0] - qcx[ext_of], ext_xy[:, 1] - qcy[ext_of])
    qr = np.zeros(parts.size)
    np.maximum.at(qr, ext_of, d)
    qr = qr * (1 + 1e-9) + 1e-6  # strictly enclosing
    # circles first, then polygon parts
    feat_idx = np.concatenate([pt, part_feat]).astype(np.int64)
    scene_idx = np.asarray(keep, dtype=np.int64)
    n = feat_idx.size
    # mean chord length of each solid, 4V/S (Cauchy's formula for convex bodies)
    depth = zt[feat_idx] - zb[feat_idx]
    rc = radius[pt]
    chord_c = 2 * rc * depth[:pt.size] / (rc + depth[:pt.size])
    area, perim = shapely.area(parts), shapely.length(parts)
    dp = depth[pt.size:]
    chord_p = 4 * area * dp / (2 * area + perim * dp)
    counts = np.concatenate([np.zeros(pt.size, np.int64), counts_poly.astype(np.int64)])
    fps = np.empty(n, dtype=object)
    fps[:pt.size] = pfoot
    fps[pt.size:] = parts
    sph_f = np.array([f["properties"]["kind"] == "tree" and f["properties"].get("crown_shape", "spheroid") == "spheroid"
                      for f in feats], dtype=bool)
    is_sph = np.concatenate([sph_f[pt], np.zeros(parts.size, bool)])
    # a spheroid's mean chord: 4V/S with V = 4/3 pi a^2 c and S by Thomsen's approximation
    a_, c_ = radius[pt], 0.5 * depth[:pt.size]
    p_ = 1.6075
    s_sph = 4 * np.pi * (((a_ * a_) ** p_ + 2 * (a_ * c_) ** p_) / 3.0) ** (1 / p_)
    chord_s = 4 * (4.0 / 3.0 * np.pi * a_ * a_ * c_) / np.where(s_sph > 0, s_sph, 1.0)
    chord_c = np.where(sph_f[pt], chord_s, chord_c)
    area_idx = _area_index(feats, float(scene.site["lat"]) if hasattr(scene, "site") else 0.0)
    return Obstacles(
        kind=kind[feat_idx], feature=scene_idx[feat_idx] if scene_idx.size else feat_idx, z_bottom=zb[feat_idx], z_top=zt[feat_idx],
        tau_base=tau_base[feat_idx], tau_month=tau_m[feat_idx],
        is_circle=np.concatenate([np.ones(pt.size, bool), np.zeros(parts.size, bool)]),
        cx=np.concatenate([pcx, qcx]), cy=np.concatenate([pcy, qcy]), r=np.concatenate([radius[pt], qr]),
        edge_ptr=np.concatenate([[0], np.cumsum(counts)]).astype(np.int64),
        ex1=e1[:, 0].copy(), ey1=e1[:, 1].copy(), ex2=e2[:, 0].copy(), ey2=e2[:, 1].copy(),
        footprints=fps, tree=shapely.STRtree(fps), grid_convergence_deg=_convergence(scene),
        mean_chord_m=np.concatenate([chord_c, chord_p]),
        is_spheroid=is_sph, area_index=area_idx[feat_idx],
    )


def _area_index(feats, lat: float) -> np.ndarray:
    """(n, 13) leaf area index of tree crowns: leaf-on, then months 1..12 (leaf-off: woody area)."""
    from walkcomfort.environment.crowns import crown_lai, seasonal_area_index

    out = np.zeros((len(feats), 13))
    for i, f in enumerate(feats):
        p = f["properties"]
        if p["kind"] != "tree":
            continue
        lai = crown_lai(p.get("crown_type"), p.get("lai"))
        out[i, 0] = lai
        out[i, 1:] = seasonal_area_index(lai, np.arange(1, 13), lat, bool(p.get("deciduous", True)))
    return out


_DEFAULT_GROUND = "asphalt"
_DEFAULT_WALL = "concrete"


def _material_name(name, where: str) -> str:
    """A known surface material name (lower case), else an InputError listing the choices."""
    from walkcomfort.environment.surfaces import MATERIALS  # surfaces imports sun, not scene

    key = str(name).strip().lower() if isinstance(name, str) else None
    if key not in MATERIALS:
        raise InputError(f"surface material {name!r} is not known", where=where,
                         fix=f"use one of {', '.join(sorted(MATERIALS))}")
    return key


def _convergence(scene) -> float:
    frame = getattr(scene, "frame", None)
    return frame.grid_convergence_deg if frame is not None else 0.0


def feature_to_geojson(geom, properties: dict) -> dict:
    """A GeoJSON Feature dict from a shapely lon/lat geometry and properties (helper for scene builders)."""
    return {"type": "Feature", "geometry": mapping(geom), "properties": dict(properties)}
