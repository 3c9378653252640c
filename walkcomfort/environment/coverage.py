"""Is the scene where the walks are? A check shared by every verb that takes a scene.

Positions outside the scene's extent are walked as open ground (no buildings, trees
or canopies are known there): a scene drawn for another place, with longitude and
latitude swapped, or exported in a projected CRS and relabelled as lon/lat, silently
turns shade into full sun. :func:`scene_coverage` measures the share of positions
outside the extent (plus a margin) and names the likely cause.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import shapely

from walkcomfort.environment.geodesy import great_circle_km
from walkcomfort.errors import InputError

#: Positions within this distance of the scene's extent count as covered [m].
DEFAULT_MARGIN_M = 50.0
#: Share of positions outside the extent above which the walks lie "mostly outside" [-].
MOSTLY_OUTSIDE = 0.5


@dataclass(frozen=True)
class Coverage:
    """How the positions of walks or routes sit against a scene's extent.

    Attributes
    ----------
    share_outside : float
        Share of positions farther than the margin from the extent [-].
    distance_km : float
        Great-circle distance from the positions' centre to the extent's centre [km].
    cause : str or None
        The likely cause when mostly outside (swapped coordinates, another place or CRS).
    """

    share_outside: float
    distance_km: float
    cause: str | None
    margin_m: float = DEFAULT_MARGIN_M

    @property
    def mostly_outside(self) -> bool:
        return self.share_outside > MOSTLY_OUTSIDE

    def notice(self, what: str = "the route") -> str | None:
        """One sentence for the user, or None when every position is covered."""
        if self.share_outside <= 0.0:
            return None
        text = (f"{self.share_outside:.0%} of {what} lies more than {self.margin_m:g} m outside the scene's extent: "
                "no buildings, trees or canopies are known there, so it is walked as open ground")
        if self.mostly_outside and self.cause:
            text += f" — likely cause: {self.cause}"
        return text


def _inside(lon, lat, bounds, margin_m: float) -> np.ndarray:
    x0, y0, x1, y1 = bounds
    # the margin in degrees (1° of latitude ≈ 111 km; longitude shrinks with cos φ)
    dlat = margin_m / 111_000.0
    dlon = dlat / max(float(np.cos(np.radians(np.clip(np.nanmean(lat), -89.0, 89.0)))), 1e-6)
    return (lon >= x0 - dlon) & (lon <= x1 + dlon) & (lat >= y0 - dlat) & (lat <= y1 + dlat)


def scene_bounds(scene) -> tuple[float, float, float, float] | None:
    """The scene's lon/lat extent (min lon, min lat, max lon, max lat), or None for an empty scene."""
    if scene is None or len(scene) == 0:
        return None
    from shapely.geometry import shape

    geoms = np.array([shape(f["geometry"]) for f in scene.features], dtype=object)
    return tuple(float(v) for v in shapely.total_bounds(geoms))


def scene_coverage(scene, lon, lat, margin_m: float = DEFAULT_MARGIN_M) -> Coverage | None:
    """How much of a set of positions lies outside a scene's extent, and why.

    Parameters
    ----------
    scene : Scene or None
    lon, lat : array-like
        Positions of the walks or route points [°].
    margin_m : float
        Tolerance around the extent [m].

    Returns
    -------
    Coverage or None
        None when there is no scene, an empty one, or no finite position.
    """
    bounds = scene_bounds(scene)
    lon = np.asarray(lon, float).reshape(-1)
    lat = np.asarray(lat, float).reshape(-1)
    ok = np.isfinite(lon) & np.isfinite(lat)
    if bounds is None or not ok.any():
        return None
    lon, lat = lon[ok], lat[ok]
    share = 1.0 - float(_inside(lon, lat, bounds, margin_m).mean())
    cx, cy = (bounds[0] + bounds[2]) / 2, (bounds[1] + bounds[3]) / 2
    dist = float(great_circle_km(np.nanmean(lat), np.nanmean(lon), cy, cx))
    cause = None
    if share > MOSTLY_OUTSIDE:
        swapped = 1.0 - float(_inside(lat, lon, bounds, margin_m).mean())
        if swapped <= MOSTLY_OUTSIDE:
            cause = ("swapped coordinates: with longitude and latitude exchanged the positions fall inside the scene "
                     "(GeoJSON and GPX order is longitude, latitude)")
        elif dist > 100.0:
            cause = (f"the scene is {dist:,.0f} km away: a scene of another place, or coordinates in a wrong CRS "
                     "(export both in WGS84 lon/lat, EPSG:4326)")
        else:
            cause = ("the scene covers only part of the area: extend it (e.g. `walkcomfort scene --buffer`) or trim "
                     "the walks")
    return Coverage(share, dist, cause, margin_m)


def check_scene_coverage(scene, lon, lat, what: str, strict: bool = False, where=None,
                         margin_m: float = DEFAULT_MARGIN_M) -> str | None:
    """The notice for ``what`` against a scene; with ``strict`` refuse walks mostly outside it.

    Returns
    -------
    str or None
        The notice (prefix it with "warning:" or "note:" when printing).

    Raises
    ------
    InputError
        ``strict`` and the positions lie mostly outside the scene.
    """
    cov = scene_coverage(scene, lon, lat, margin_m)
    if cov is None:
        return None
    text = cov.notice(what)
    if strict and cov.mostly_outside:
        raise InputError(text, where=where or getattr(scene, "source", "--scene"),
                         fix="give the scene of the walks' place in WGS84 lon/lat, or leave out --strict")
    return text
