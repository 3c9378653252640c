"""Street network input: GeoJSON lines cut into segments and sampled at points.

Network GeoJSON (our own layout, documented in DEVELOPERS.md "Network scale")
----------------------------------------------------------------------------
A FeatureCollection in WGS84 lon/lat (RFC 7946). Each feature is one street (or a
path, a square's walking line...) as a ``LineString`` or ``MultiLineString`` with

- ``properties.id``   unique string (required): the street's id;
- ``properties.name`` free text (optional): the street's name for people.

Coordinates may carry a third value, the ground elevation [m]; it gives the sample
points' ``elev_m`` and the segment's slope. Other properties are kept in the file
and ignored here.

An optional top-level member ``"walkcomfort": {"network": "<name>"}`` names the
network. Open-data street exports are commonly in this form; rename their id
property to ``id`` before use.

Every street is cut into segments close to a stated length (a street of length
``D`` becomes ``max(1, round(D / L))`` equal pieces: a street shorter than ``1.5L``
stays whole, longer ones give pieces between ``0.75L`` and ``1.25L``, and no stub
is left at the end) and every segment is
sampled at the midpoints of ``ceil(length / spacing)`` equal sub-intervals, so a
segment's points represent equal lengths of pavement.

Features that cannot be used (no geometry, not a line, zero length, a missing or
duplicate id) are not dropped silently: they go to :attr:`Network.quarantine`
with a reason, and the counts reconcile (features read = used + quarantined).
"""

from __future__ import annotations

import json
import math
import os
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.errors import InputError, where

#: Property names of a network feature (our own layout).
PROP_ID = "id"
PROP_NAME = "name"

QUARANTINE_COLUMNS = ["source", "file", "row", "reason", "raw"]


def local_crs(lon: float, lat: float):
    """The metric CRS of a site: the environment stage's UTM zone (``environment.geo.utm_crs``)."""
    from walkcomfort.environment.geo import utm_crs

    return utm_crs(lon, lat)


@dataclass
class Network:
    """A street network cut into segments and sampled at points.

    Attributes
    ----------
    segments : pandas.DataFrame
        One row per segment, index ``segment_id`` (``"<street id>#<n>"``); columns
        ``street_id, street_name, seg_n, length_m, n_points, x_mid_m, y_mid_m``,
        ``elev_start_m, elev_end_m`` (ground elevation at its ends, NaN without z), and
        ``geometry_xy`` / ``geometry_lonlat`` (lists of ``(x, y)`` / ``(lon, lat)``
        vertices of the segment).
    points : pandas.DataFrame
        One row per sample point: ``segment_id, point_n, x_m, y_m, lon, lat, elev_m``
        (ground elevation interpolated from the lines' z, NaN without z); points of a
        segment are contiguous and in walking order (the line's digitised direction).
    crs : pyproj.CRS
        The metric CRS of ``x_m, y_m``.
    quarantine : pandas.DataFrame
        Features that could not be used: ``source, file, row, reason, raw``.
    name : str
        The network's name (top-level ``walkcomfort.network`` or the file stem).
    parameters : dict
        ``segment_length_m`` and ``spacing_m`` used.
    """

    segments: pd.DataFrame
    points: pd.DataFrame
    crs: object
    quarantine: pd.DataFrame = field(default_factory=lambda: pd.DataFrame(columns=QUARANTINE_COLUMNS))
    name: str = "network"
    parameters: dict = field(default_factory=dict)
    n_features_read: int = 0

    @property
    def n_segments(self) -> int:
        return len(self.segments)

    def subset(self, segment_ids) -> Network:
        """The same network restricted to ``segment_ids`` (order of the network kept)."""
        keep = self.segments.index.isin(list(segment_ids))
        seg = self.segments.loc[keep]
        pts = self.points.loc[self.points[C.SEGMENT_ID].isin(seg.index)].reset_index(drop=True)
        return Network(seg, pts, self.crs, self.quarantine, self.name, dict(self.parameters),
                       self.n_features_read)


def load_network(path: str | os.PathLike, segment_length_m: float = 50.0, spacing_m: float = 10.0,
                 crs=None) -> Network:
    """Read a network GeoJSON file and cut it into segments (see module docstring).

    Parameters
    ----------
    path : path-like
        The GeoJSON FeatureCollection.
    segment_length_m : float
        Target segment length [m] (> 0).
    spacing_m : float
        Target spacing of the sample points along a segment [m] (> 0).
    crs : pyproj.CRS, optional
        The metric CRS to work in (pass the scene's ``Scene.crs`` so segments and
        obstacles share coordinates); default the UTM zone of the network's centre.

    Returns
    -------
    Network
    """
    path = Path(path)
    try:
        obj = json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise InputError(f"street network file '{path}' does not exist", where=path,
                         fix="give the path of a GeoJSON FeatureCollection of street lines") from None
    except (UnicodeDecodeError, json.JSONDecodeError) as exc:
        line = getattr(exc, "lineno", None)
        raise InputError(f"the street network is not valid JSON ({getattr(exc, 'msg', exc)})",
                         where=where(path, line=line),
                         fix="export the network as GeoJSON (RFC 7946)") from None
    return network_from_geojson(obj, segment_length_m, spacing_m, crs=crs, source=path)


def network_from_geojson(obj: dict, segment_length_m: float = 50.0, spacing_m: float = 10.0,
                         crs=None, source: str | os.PathLike = "<network>") -> Network:
    """Build a :class:`Network` from a GeoJSON FeatureCollection already in memory."""
    from pyproj import Transformer

    source = str(source)
    _check_inputs(obj, segment_length_m, spacing_m, source)
    meta = obj.get("walkcomfort") if isinstance(obj.get("walkcomfort"), dict) else {}
    net_name = str(meta.get("network") or Path(source).stem or "network")
    streets, quarantine = _read_streets(obj, source)
    if not streets:
        raise InputError(f"the street network has no usable line feature ({len(quarantine)} quarantined, "
                         f"first reason: {quarantine[0]['reason'] if quarantine else 'no features'})",
                         where=source, fix="give LineString features with a unique properties.id each")
    if crs is None:
        allxy = np.array([c for _, _, parts in streets for p in parts for c in p])
        crs = local_crs(float(allxy[:, 0].mean()), float(allxy[:, 1].mean()))
    fwd = Transformer.from_crs("EPSG:4326", crs, always_xy=True)
    inv = Transformer.from_crs(crs, "EPSG:4326", always_xy=True)

    seg_rows: list[dict] = []
    pt_rows: list[tuple] = []
    for sid, sname, parts in streets:
        pieces = _cut_street(parts, fwd, segment_length_m)
        if not pieces:
            quarantine.append({"source": "network", "file": source, "row": _row_of(obj, sid),
                               "reason": "zero_length", "raw": sid})
            continue
        for k, piece in enumerate(pieces):
            seg, pts = _segment_rows(f"{sid}#{k:03d}", sid, sname, k, piece, spacing_m, inv)
            seg_rows.append(seg)
            pt_rows.extend(pts)

    if not seg_rows:
        raise InputError("every street in the network has zero length", where=source,
                         fix="give lines with at least two distinct vertices")
    segments = pd.DataFrame(seg_rows).set_index(C.SEGMENT_ID)
    points = pd.DataFrame(pt_rows, columns=[C.SEGMENT_ID, "point_n", C.X_M, C.Y_M, C.LON, C.LAT, C.ELEV_M])
    qdf = pd.DataFrame(quarantine, columns=QUARANTINE_COLUMNS)
    return Network(segments, points, crs, qdf, net_name,
                   {"segment_length_m": float(segment_length_m), "spacing_m": float(spacing_m)},
                   n_features_read=len(obj["features"]))


def _check_inputs(obj, segment_length_m, spacing_m, source: str) -> None:
    for name, value in (("segment_length_m", segment_length_m), ("spacing_m", spacing_m)):
        if not (isinstance(value, (int, float)) and math.isfinite(value) and value > 0):
            raise InputError(f"{name} = {value!r} is not a positive length in metres",
                             fix=f"give {name} > 0, for example 50 for segments or 10 for spacing")
    if not isinstance(obj, dict) or obj.get("type") != "FeatureCollection" or not isinstance(
            obj.get("features"), list):
        raise InputError("the street network is not a GeoJSON FeatureCollection", where=source,
                         fix="give a FeatureCollection whose features are LineString/MultiLineString streets")


def _read_streets(obj: dict, source: str):
    """Usable street features as ``(id, name, parts)`` and the quarantined ones (with reasons)."""
    quarantine: list[dict] = []
    streets: list[tuple[str, str, list[list[tuple[float, float, float]]]]] = []
    seen: set[str] = set()
    for row, feat in enumerate(obj["features"]):
        props = feat.get("properties") or {} if isinstance(feat, dict) else {}
        sid = props.get(PROP_ID) if isinstance(props, dict) else None
        reason, parts = _feature_parts(feat, sid, seen)
        if reason is not None:
            raw = json.dumps(feat, sort_keys=True)[:500]
            quarantine.append({"source": "network", "file": source, "row": row, "reason": reason, "raw": raw})
            continue
        seen.add(str(sid))
        streets.append((str(sid), str(props.get(PROP_NAME) or ""), parts))
    return streets, quarantine


def _line_parts(feat, sid, seen: set[str]):
    """``(reason, raw coordinate parts)``: the first reason a feature is unusable as a street, or None."""
    geom = feat.get("geometry") if isinstance(feat, dict) else None
    if sid is None or (isinstance(sid, str) and not sid.strip()):
        return "missing_id", []
    if str(sid) in seen:
        return "duplicate_id", []
    if not isinstance(geom, dict):
        return "no_geometry", []
    if geom.get("type") == "LineString":
        return None, [geom.get("coordinates") or []]
    if geom.get("type") == "MultiLineString":
        return None, list(geom.get("coordinates") or [])
    return f"not_a_line ({geom.get('type')})", []


def _feature_parts(feat, sid, seen: set[str]):
    """``(reason, parts)`` with parts as ``(lon, lat, z)`` vertices (z NaN when not given)."""
    reason, parts = _line_parts(feat, sid, seen)
    if reason is not None:
        return reason, []
    try:
        # a third coordinate, when given, is the ground elevation [m] (RFC 7946 altitude)
        parts = [[(float(c[0]), float(c[1]), float(c[2]) if len(c) > 2 and c[2] is not None else math.nan)
                  for c in part] for part in parts]
    except (TypeError, ValueError, IndexError):
        return "bad_coordinates", []
    parts = [p for p in parts if len(p) >= 2]
    flat = [c for p in parts for c in p]
    if not flat:
        return "too_few_vertices", []
    if not all(math.isfinite(x) and math.isfinite(y) and -180 <= x <= 180 and -90 <= y <= 90 for x, y, _ in flat):
        return "coordinates_not_lonlat", []
    return None, parts


def _cut_street(parts, fwd, segment_length_m: float) -> list[np.ndarray]:
    """A street's parts projected and cut into ``max(1, round(D / L))`` equal pieces each."""
    pieces: list[np.ndarray] = []
    for part in parts:
        lonlat = np.asarray(part, dtype=float)
        x, y = fwd.transform(lonlat[:, 0], lonlat[:, 1])
        xy = np.column_stack([x, y, lonlat[:, 2]])
        length = _polyline_length(xy)
        if length <= 0:
            continue
        n = max(1, int(round(length / segment_length_m)))
        cuts = np.linspace(0.0, length, n + 1)
        pieces.extend(_substring(xy, a, b) for a, b in zip(cuts[:-1], cuts[1:], strict=False))
    return pieces


def _segment_rows(seg_id: str, sid: str, sname: str, k: int, piece: np.ndarray, spacing_m: float, inv):
    """One segment's row and its sample points (midpoints of equal sub-intervals)."""
    length = _polyline_length(piece)
    n_pts = max(1, int(math.ceil(length / spacing_m - 1e-9)))
    at = (np.arange(n_pts) + 0.5) * (length / n_pts)
    pxy = _interpolate(piece, at)
    plon, plat = inv.transform(pxy[:, 0], pxy[:, 1])
    glon, glat = inv.transform(piece[:, 0], piece[:, 1])
    mid = _interpolate(piece, np.array([length / 2.0]))[0]
    seg = {C.SEGMENT_ID: seg_id, C.STREET_ID: sid, "street_name": sname, "seg_n": k,
           "length_m": float(length), "n_points": n_pts, "x_mid_m": float(mid[0]), "y_mid_m": float(mid[1]),
           "elev_start_m": float(piece[0, 2]), "elev_end_m": float(piece[-1, 2]),
           "geometry_xy": [(float(v[0]), float(v[1])) for v in piece],
           "geometry_lonlat": list(zip(map(float, glon), map(float, glat), strict=False))}
    pts = [(seg_id, j, float(pxy[j, 0]), float(pxy[j, 1]), float(plon[j]), float(plat[j]), float(pxy[j, 2]))
           for j in range(n_pts)]
    return seg, pts


def _row_of(obj: dict, sid: str) -> int:
    for i, f in enumerate(obj["features"]):
        if str(((f or {}).get("properties") or {}).get(PROP_ID)) == sid:
            return i
    return -1  # pragma: no cover


def _polyline_length(xy: np.ndarray) -> float:
    return float(np.hypot(*np.diff(xy[:, :2], axis=0).T).sum())


def _interpolate(xy: np.ndarray, at: np.ndarray) -> np.ndarray:
    """Points at horizontal distances ``at`` [m] along the polyline ``xy`` (every column interpolated)."""
    d = np.concatenate([[0.0], np.cumsum(np.hypot(*np.diff(xy[:, :2], axis=0).T))])
    return np.column_stack([np.interp(at, d, xy[:, k]) for k in range(xy.shape[1])])


def _substring(xy: np.ndarray, a: float, b: float) -> np.ndarray:
    """The part of polyline ``xy`` between distances ``a`` and ``b`` [m], with its inner vertices."""
    d = np.concatenate([[0.0], np.cumsum(np.hypot(*np.diff(xy[:, :2], axis=0).T))])
    inner = (d > a) & (d < b)
    ends = _interpolate(xy, np.array([a, b]))
    return np.vstack([ends[:1], xy[inner], ends[1:]])
