"""Distances on the Earth between WGS84 positions (pure functions, no I/O)."""

from __future__ import annotations

import numpy as np

#: Mean Earth radius [km] (IUGG mean radius R1, 6371.0088 km; rounded, common practice).
EARTH_RADIUS_KM = 6371.0


def great_circle_km(lat1, lon1, lat2, lon2):
    """Great-circle distance on a sphere of radius :data:`EARTH_RADIUS_KM` (haversine) [km].

    Parameters
    ----------
    lat1, lon1, lat2, lon2 : float or array-like
        Positions [°] (WGS84; the sphere's error is below 0.5 %).

    Returns
    -------
    float or ndarray
        Distance [km]; a float for scalar input.

    References
    ----------
    Sinnott, R. W. (1984). Virtues of the haversine. Sky and Telescope 68(2), 159.
    """
    p1, p2 = np.radians(lat1), np.radians(lat2)
    dp = p2 - p1
    dl = np.radians(np.asarray(lon2, float) - np.asarray(lon1, float))
    a = np.sin(dp / 2) ** 2 + np.cos(p1) * np.cos(p2) * np.sin(dl / 2) ** 2
    d = 2 * EARTH_RADIUS_KM * np.arcsin(np.sqrt(np.clip(a, 0.0, 1.0)))
    return float(d) if np.ndim(d) == 0 else d
