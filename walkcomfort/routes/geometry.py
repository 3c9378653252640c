"""Planned-route geometry: read a GPX route/track or a GeoJSON LineString and resample it.

A planned route is a line a designer drew, not a GPS trace, so it is read as-is
(no smoothing of the plan view) and resampled at a fixed spacing along the line in
the site's metric CRS (the UTM zone of the route, chosen by pyproj). Elevation comes,
in order of preference, from a DEM raster when one is given, from the file's own
vertex elevations, or is taken as flat (with a notice in :attr:`Route.notices`).

Stops (a wait at a crossing, a bus stop) are read from the route file:

* GeoJSON: the LineString feature's ``properties.stops`` list of
  ``{"dist_m": <metres along the route>, "wait_s": <seconds>, "label": "..."}``, and/or
  Point features in the same FeatureCollection with ``properties.wait_s`` (and an
  optional ``label``), snapped to the nearest place on the route (within
  :data:`STOP_SNAP_M`).
* GPX: waypoints whose ``<type>`` is ``stop`` and whose ``<desc>`` or ``<cmt>`` holds
  ``wait_s=<seconds>``; the waypoint's ``<name>`` is the label.
"""

from __future__ import annotations

import json
import os
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.errors import InputError, where

#: Default resampling spacing along the route [m].
DEFAULT_SPACING_M = 5.0
#: A stop point must lie within this distance of the route line [m].
STOP_SNAP_M = 25.0
#: Half-width of the centred window used for the along-route slope [m]; a planned
#: route's vertex elevations are sparse, and a centred difference over ±10 m keeps a
#: single vertex from producing a spike (common practice).
SLOPE_HALF_WINDOW_M = 10.0


@dataclass(frozen=True)
class Route:
    """A planned route resampled at a fixed spacing.

    Attributes
    ----------
    route_id : str
        Identifier (from the file's ``route_id``/``id``/``name``, else the file stem).
    points : pandas.DataFrame
        One row per resampled point, in walking order, columns ``lat, lon`` [°],
        ``x_m, y_m`` [m] (in :attr:`crs`), ``dist_m`` [m] along the route,
        ``elev_m`` [m], ``slope_pct`` [%] (rise over run in the walking direction),
        ``heading_deg`` [°] (0 = grid north, clockwise).
    stops : pandas.DataFrame
        Columns ``dist_m`` [m], ``wait_s`` [s], ``label``; sorted by distance.
    crs : str
        The metric CRS of ``x_m, y_m`` (``EPSG:326xx``/``EPSG:327xx``).
    elevation_source : str
        ``"dem"``, ``"file"`` or ``"flat"``.
    source : str
        The file the route was read from.
    notices : tuple of str
        Things the user should know (e.g. the route was taken as flat).
    """

    route_id: str
    points: pd.DataFrame
    stops: pd.DataFrame
    crs: str
    elevation_source: str
    source: str = ""
    notices: tuple[str, ...] = field(default_factory=tuple)

    @property
    def length_m(self) -> float:
        """Length of the route along the ground plan [m]."""
        return float(self.points[C.DIST_M].iloc[-1])


# --------------------------------------------------------------------------- CRS
def utm_crs_for(lon: float, lat: float) -> str:
    """The UTM zone CRS of (lon, lat) as ``"EPSG:326zz"``/``"EPSG:327zz"``.

    A thin wrapper over :func:`walkcomfort.environment.geo.utm_crs`, so routes and
    scenes of one site share one frame.
    """
    from walkcomfort.environment.geo import utm_crs

    return utm_crs(lon, lat).to_string()


def _transformer(crs: str, inverse: bool = False):
    from pyproj import Transformer

    if inverse:
        return Transformer.from_crs(crs, "EPSG:4326", always_xy=True)
    return Transformer.from_crs("EPSG:4326", crs, always_xy=True)


# --------------------------------------------------------------------------- readers
def _read_geojson(path: Path, route_id: str | None):
    features = _geojson_features(path)
    lines, stop_points = [], []
    for i, feat in enumerate(features):
        geom = feat.get("geometry") or {}
        props = feat.get("properties") or {}
        if geom.get("type") == "LineString":
            lines.append((i, geom, props))
        elif geom.get("type") == "Point" and "wait_s" in props:
            stop_points.append((i, geom, props))
    idx, geom, props = _the_route_line(path, lines, route_id)
    loc = f"{path} feature {idx}"
    lon, lat, elev = _line_vertices(geom.get("coordinates") or [], loc)
    stops = _stops_from_properties(props, loc) + _stops_from_points(path, stop_points)
    rid = route_id or _props_id(props) or path.stem
    return rid, lon, lat, elev, stops


def _geojson_features(path: Path) -> list[dict]:
    try:
        obj = json.loads(path.read_text(encoding="utf-8"))
    except json.JSONDecodeError as exc:
        raise InputError(f"not valid JSON ({exc.msg})", where=where(path, line=exc.lineno),
                         fix="check the file is GeoJSON") from None
    if obj.get("type") == "Feature":
        return [obj]
    if obj.get("type") == "FeatureCollection":
        return obj.get("features") or []
    if obj.get("type") == "LineString":
        return [{"type": "Feature", "geometry": obj, "properties": {}}]
    raise InputError(f"GeoJSON type {obj.get('type')!r} is not a route; expected a LineString "
                     "Feature or a FeatureCollection holding one", where=path,
                     fix="store the route as a LineString")


def _the_route_line(path: Path, lines: list, route_id: str | None):
    if route_id is not None:
        lines = [ln for ln in lines if _props_id(ln[2]) == route_id]
    if not lines:
        what = (f"no LineString feature with route_id {route_id!r}" if route_id
                else "no LineString feature")
        raise InputError(what, where=path, fix="give the route as a GeoJSON LineString "
                         "(MultiLineString routes must be joined into one line)")
    if len(lines) > 1:
        ids = [_props_id(ln[2]) for ln in lines]
        raise InputError(f"{len(lines)} LineString features ({ids}); which one is the route is ambiguous",
                         where=path, fix="pass route_id= (CLI --route-id) or keep one line per file")
    return lines[0]


def _line_vertices(coords: list, loc: str):
    if len(coords) < 2:
        raise InputError(f"the LineString has {len(coords)} vertices, at least 2 are needed", where=loc,
                         fix="draw the route with at least two vertices")
    lon, lat, elev = [], [], []
    for j, c in enumerate(coords):
        if not isinstance(c, (list, tuple)) or len(c) < 2:
            raise InputError(f"vertex {j} is {c!r}, expected [lon, lat] or [lon, lat, elev]", where=loc,
                             fix="write each vertex as [lon, lat(, elev_m)]")
        lon.append(float(c[0]))
        lat.append(float(c[1]))
        elev.append(float(c[2]) if len(c) > 2 and c[2] is not None else np.nan)
    return np.array(lon), np.array(lat), np.array(elev)


def _stops_from_properties(props: dict, loc: str) -> list[dict]:
    stops = []
    for k, s in enumerate(props.get("stops") or []):
        try:
            stops.append({"dist_m": float(s["dist_m"]), "wait_s": float(s["wait_s"]),
                          "label": str(s.get("label", "stop")), "lonlat": None})
        except (KeyError, TypeError, ValueError):
            raise InputError(f"stop {k} is {s!r}; each stop needs numeric dist_m and wait_s", where=loc,
                             fix='write stops as [{"dist_m": 120, "wait_s": 30, "label": "crossing"}]') from None
    return stops


def _stops_from_points(path: Path, stop_points: list) -> list[dict]:
    stops = []
    for i, g, p in stop_points:
        c = g.get("coordinates") or [None, None]
        try:
            stops.append({"dist_m": None, "wait_s": float(p["wait_s"]), "label": str(p.get("label", "stop")),
                          "lonlat": (float(c[0]), float(c[1])), "where": f"{path} feature {i}"})
        except (TypeError, ValueError):
            raise InputError(f"stop point wait_s {p.get('wait_s')!r} is not a number", where=f"{path} feature {i}",
                             fix="give wait_s in seconds") from None
    return stops


def _props_id(props: dict) -> str | None:
    for key in ("route_id", "id", "name"):
        if props.get(key) not in (None, ""):
            return str(props[key])
    return None


_WAIT_RE = re.compile(r"wait_s\s*=\s*([0-9.]+)")


def _read_gpx(path: Path, route_id: str | None):
    import gpxpy
    import gpxpy.gpx

    try:
        gpx = gpxpy.parse(path.read_text(encoding="utf-8"))
    except (gpxpy.gpx.GPXException, ValueError) as exc:
        raise InputError(f"not a readable GPX file ({' '.join(str(exc).split())})", where=path,
                         fix="export the route again as GPX 1.1") from None
    candidates = []
    for r in gpx.routes:
        candidates.append((r.name, [(p.longitude, p.latitude, p.elevation) for p in r.points]))
    for t in gpx.tracks:
        pts = [(p.longitude, p.latitude, p.elevation) for seg in t.segments for p in seg.points]
        candidates.append((t.name, pts))
    if route_id is not None:
        candidates = [c for c in candidates if c[0] == route_id]
    if not candidates:
        raise InputError("no route (<rte>) or track (<trk>) " + (f"named {route_id!r}" if route_id else "found"),
                         where=path, fix="save the planned route as a GPX route or track")
    if len(candidates) > 1:
        raise InputError(f"{len(candidates)} routes/tracks ({[c[0] for c in candidates]}); which one is the "
                         "route is ambiguous", where=path, fix="pass route_id= (CLI --route-id) with the name")
    name, pts = candidates[0]
    if len(pts) < 2:
        raise InputError(f"the route has {len(pts)} points, at least 2 are needed", where=path,
                         fix="draw the route with at least two points")
    lon = np.array([p[0] for p in pts], float)
    lat = np.array([p[1] for p in pts], float)
    elev = np.array([np.nan if p[2] is None else p[2] for p in pts], float)
    stops = []
    for k, w in enumerate(gpx.waypoints):
        if (w.type or "").strip().lower() != "stop":
            continue
        text = " ".join(filter(None, [w.description, w.comment]))
        m = _WAIT_RE.search(text)
        if not m:
            raise InputError(f"stop waypoint {w.name or k!r} has no 'wait_s=<seconds>' in <desc> or <cmt>",
                             where=f"{path} waypoint {k}", fix="write e.g. <desc>wait_s=30</desc>")
        stops.append({"dist_m": None, "wait_s": float(m.group(1)), "label": w.name or "stop",
                      "lonlat": (w.longitude, w.latitude), "where": f"{path} waypoint {k}"})
    rid = route_id or name or path.stem
    return rid, lon, lat, elev, stops


# --------------------------------------------------------------------------- DEM
def sample_dem(dem_path: str | os.PathLike, lon: np.ndarray, lat: np.ndarray) -> np.ndarray:
    """Elevation from a DEM raster at (lon, lat) points: the value of the cell under each point.

    Needs the optional ``rasterio`` package (``pip install rasterio``).

    Parameters
    ----------
    dem_path : path
        Any raster rasterio reads (GeoTIFF, ...), in any CRS.
    lon, lat : array_like
        Points [°] on WGS84.

    Returns
    -------
    numpy.ndarray
        Elevation [m]; NaN where the raster has no data.
    """
    try:
        import rasterio
    except ImportError:
        raise InputError("reading a DEM raster needs the optional package rasterio", where=dem_path,
                         fix="pip install rasterio, or leave out the DEM to use the route file's elevations") from None
    from pyproj import Transformer

    with rasterio.open(dem_path) as ds:
        tr = Transformer.from_crs("EPSG:4326", ds.crs.to_string(), always_xy=True)
        x, y = tr.transform(np.asarray(lon), np.asarray(lat))
        vals = np.array([v[0] for v in ds.sample(list(zip(x, y, strict=False)), masked=True)], dtype=object)
        out = np.array([np.nan if np.ma.is_masked(v) else float(v) for v in vals])
    if np.all(np.isnan(out)):
        raise InputError("the route lies outside the DEM raster (no cell under any point)", where=dem_path,
                         fix="give a DEM that covers the route")
    return out


# --------------------------------------------------------------------------- resampling
def resample_line(x_m: np.ndarray, y_m: np.ndarray, spacing_m: float = DEFAULT_SPACING_M):
    """Points every ``spacing_m`` along a polyline, always keeping both ends.

    Parameters
    ----------
    x_m, y_m : array_like
        Vertices [m] in a metric CRS.
    spacing_m : float
        Spacing along the line [m] (> 0).

    Returns
    -------
    dist_m, x_m, y_m, vertex_dist_m : numpy.ndarray
        Distance along the line [m] of each sample and its coordinates; and the
        distance of each input vertex (to interpolate vertex attributes).
    """
    if not spacing_m > 0:
        raise InputError(f"spacing {spacing_m!r} m is not positive", fix="give a spacing > 0 m, e.g. 5")
    x_m = np.asarray(x_m, float)
    y_m = np.asarray(y_m, float)
    seg = np.hypot(np.diff(x_m), np.diff(y_m))
    vd = np.concatenate([[0.0], np.cumsum(seg)])
    total = vd[-1]
    n = int(np.floor(total / spacing_m + 1e-9))
    d = np.arange(n + 1) * spacing_m
    if total - d[-1] > 1e-6:
        d = np.append(d, total)
    # repeated vertices give zero-length segments: np.interp needs increasing xp
    keep = np.concatenate([[True], seg > 0])
    return d, np.interp(d, vd[keep], x_m[keep]), np.interp(d, vd[keep], y_m[keep]), vd


def along_route_slope_pct(dist_m: np.ndarray, elev_m: np.ndarray,
                          half_window_m: float = SLOPE_HALF_WINDOW_M) -> np.ndarray:
    """Slope in the walking direction by a centred difference over ±``half_window_m`` [%].

    Near the ends the window is one-sided (clipped to the route).
    """
    d = np.asarray(dist_m, float)
    z = np.asarray(elev_m, float)
    if len(d) < 2 or d[-1] <= 0:
        return np.zeros_like(d)
    lo = np.clip(d - half_window_m, 0.0, d[-1])
    hi = np.clip(d + half_window_m, 0.0, d[-1])
    dz = np.interp(hi, d, z) - np.interp(lo, d, z)
    return 100.0 * dz / np.where(hi > lo, hi - lo, np.nan)


def load_route(path: str | os.PathLike, spacing_m: float = DEFAULT_SPACING_M, dem: str | os.PathLike | None = None,
               route_id: str | None = None, crs: str | None = None) -> Route:
    """Read a planned route and resample it at ``spacing_m``.

    Parameters
    ----------
    path : path
        ``.gpx`` (route or track) or ``.geojson``/``.json`` (LineString).
    spacing_m : float, default 5
        Resampling spacing along the route [m].
    dem : path, optional
        DEM raster for elevations (needs rasterio); overrides the file's elevations.
    route_id : str, optional
        Which line to use when the file holds several (by id/name).
    crs : str or pyproj.CRS, optional
        Metric CRS for ``x_m, y_m``; default the UTM zone of the route's first vertex.
        Pass the scene's ``crs`` so route and scene share coordinates.

    Returns
    -------
    Route
    """
    path = Path(path)
    if not path.exists():
        raise InputError("route file does not exist", where=path, fix="check the path")
    suffix = path.suffix.lower()
    if suffix == ".gpx":
        rid, lon, lat, elev, stops = _read_gpx(path, route_id)
    elif suffix in (".geojson", ".json"):
        rid, lon, lat, elev, stops = _read_geojson(path, route_id)
    else:
        raise InputError(f"route file type {suffix!r} is not known; allowed .gpx, .geojson, .json", where=path,
                         fix="export the route as GPX or GeoJSON")
    bad = ~(np.isfinite(lon) & np.isfinite(lat)) | (np.abs(lat) > 90) | (np.abs(lon) > 180)
    if bad.any():
        k = int(np.flatnonzero(bad)[0])
        raise InputError(f"vertex {k} has lon/lat ({lon[k]}, {lat[k]}) outside WGS84 ranges", where=path,
                         fix="write coordinates as longitude, latitude in degrees")
    crs = utm_crs_for(lon[0], lat[0]) if crs is None else (crs if isinstance(crs, str) else crs.to_string())
    x, y = _transformer(crs).transform(lon, lat)
    d, xs, ys, vd = resample_line(x, y, spacing_m)
    if d[-1] <= 0:
        raise InputError("the route has zero length (all vertices at one place)", where=path,
                         fix="draw the route with distinct vertices")
    lon_s, lat_s = _transformer(crs, inverse=True).transform(xs, ys)
    notices = []
    if dem is not None:
        z = sample_dem(dem, lon_s, lat_s)
        if np.isnan(z).any():
            good = ~np.isnan(z)
            z = np.interp(d, d[good], z[good])
            notices.append(f"{int((~good).sum())} route points had no DEM cell; their elevation was interpolated")
        esrc = "dem"
    elif np.isfinite(elev).any():
        good = np.isfinite(elev)
        if not good.all():
            notices.append(f"{int((~good).sum())} of {len(elev)} vertices have no elevation; "
                           "interpolated along the route from the others")
        keep = good & np.concatenate([[True], np.diff(vd) > 0])
        z = np.interp(d, vd[keep], elev[keep]) if keep.sum() > 1 else np.full_like(d, elev[good][0])
        esrc = "file"
    else:
        z = np.zeros_like(d)
        esrc = "flat"
        notices.append("the route has no elevations and no DEM was given: walking it as flat ground "
                       "(pass a DEM or a route with elevations to include hills)")
    slope = along_route_slope_pct(d, z)
    dx = np.diff(xs)
    dy = np.diff(ys)
    head = np.degrees(np.arctan2(dx, dy)) % 360.0
    head = np.append(head, head[-1]) if len(head) else np.zeros(1)
    pts = pd.DataFrame({C.LAT: lat_s, C.LON: lon_s, C.X_M: xs, C.Y_M: ys, C.DIST_M: d, C.ELEV_M: z,
                        C.SLOPE_PCT: slope, C.HEADING_DEG: head})
    stops_df = _place_stops(stops, pts, crs, path)
    return Route(route_id=str(rid), points=pts, stops=stops_df, crs=crs, elevation_source=esrc,
                 source=str(path), notices=tuple(notices))


def _place_stops(stops: list[dict], pts: pd.DataFrame, crs: str, path: Path) -> pd.DataFrame:
    from shapely.geometry import LineString, Point

    line = LineString(np.column_stack([pts[C.X_M], pts[C.Y_M]]))
    rows = []
    length = float(pts[C.DIST_M].iloc[-1])
    tr = _transformer(crs)
    for s in stops:
        loc = s.get("where", path)
        if s["wait_s"] < 0:
            raise InputError(f"stop wait_s {s['wait_s']} is negative", where=loc, fix="give a wait ≥ 0 s")
        if s["dist_m"] is None:
            px, py = tr.transform(*s["lonlat"])
            p = Point(px, py)
            off = line.distance(p)
            if off > STOP_SNAP_M:
                raise InputError(f"stop '{s['label']}' is {off:.0f} m from the route (max {STOP_SNAP_M:.0f} m)",
                                 where=loc, fix="move the stop onto the route or remove it")
            dist = float(line.project(p))
        else:
            dist = s["dist_m"]
            if not 0 <= dist <= length + 1e-6:
                raise InputError(f"stop '{s['label']}' at dist_m {dist} is outside the route (0…{length:.1f} m)",
                                 where=loc, fix="give dist_m along the route")
        rows.append({C.DIST_M: min(dist, length), "wait_s": s["wait_s"], "label": s["label"]})
    df = pd.DataFrame(rows, columns=[C.DIST_M, "wait_s", "label"])
    return df.sort_values(C.DIST_M, kind="stable").reset_index(drop=True)
