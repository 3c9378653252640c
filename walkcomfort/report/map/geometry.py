"""Geometry for the map: line simplification that keeps colour changes, rounding, outlines."""

from __future__ import annotations

import math

import numpy as np

from walkcomfort.environment.geo import LocalFrame


def local_frame(lon: float, lat: float) -> LocalFrame:
    """The site's local metric frame (UTM zone of the point)."""
    return LocalFrame(float(lon), float(lat))


def rdp_keep(x: np.ndarray, y: np.ndarray, tolerance_m: float, forced: np.ndarray | None = None) -> np.ndarray:
    """Which points of a polyline to keep (Ramer–Douglas–Peucker).

    Parameters
    ----------
    x, y : array of float
        Vertex coordinates in a metric frame [m].
    tolerance_m : float
        Largest allowed distance of a dropped point from the simplified line [m];
        0 keeps every point.
    forced : array of bool, optional
        Points that must be kept (ends of colour runs); the line is simplified piecewise
        between them.

    Returns
    -------
    ndarray of bool
        True for kept vertices. The first and last are always kept.

    References
    ----------
    Douglas, D. H., Peucker, T. K. (1973). Algorithms for the reduction of the number of
    points required to represent a digitized line or its caricature. Cartographica 10(2),
    112-122, doi:10.3138/FM57-6770-U75U-7727.
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    n = len(x)
    keep = np.zeros(n, dtype=bool)
    if n == 0:
        return keep
    keep[0] = keep[-1] = True
    if forced is not None:
        keep |= np.asarray(forced, dtype=bool)
    if tolerance_m <= 0 or n < 3:
        return np.ones(n, dtype=bool) if tolerance_m <= 0 else keep
    anchors = np.flatnonzero(keep)
    stack = [(int(a), int(b)) for a, b in zip(anchors[:-1], anchors[1:], strict=False) if b - a > 1]
    while stack:
        a, b = stack.pop()
        xs, ys = x[a + 1:b], y[a + 1:b]
        dx, dy = x[b] - x[a], y[b] - y[a]
        length = math.hypot(dx, dy)
        # distance to the chord (to the anchor itself when the chord has no length)
        dist = (np.hypot(xs - x[a], ys - y[a]) if length == 0.0
                else np.abs(dy * (xs - x[a]) - dx * (ys - y[a])) / length)
        k = int(np.argmax(dist))
        if dist[k] > tolerance_m:
            m = a + 1 + k
            keep[m] = True
            if m - a > 1:
                stack.append((a, m))
            if b - m > 1:
                stack.append((m, b))
    return keep



def ring(coords, decimals: int) -> list:
    """A GeoJSON ring (lon, lat) as rounded [lat, lon] pairs, as Leaflet draws them."""
    return [[round(float(c[1]), decimals), round(float(c[0]), decimals)] for c in coords]


def simplify_geometry(geom: dict, simplify_m: float) -> dict:
    """A polygon or line simplified to about ``simplify_m`` metres (shapely, topology kept)."""
    if simplify_m <= 0 or geom.get("type") not in ("Polygon", "MultiPolygon", "LineString"):
        return geom
    from shapely.geometry import mapping, shape

    shp = shape(geom)
    # degrees per metre of latitude: good enough for a display tolerance
    simple = shp.simplify(simplify_m / 111_320.0, preserve_topology=True)
    return mapping(simple) if not simple.is_empty else geom
