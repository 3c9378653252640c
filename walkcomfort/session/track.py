"""Tracks as devices record them: still periods without fixes, vehicle legs, jumps.

- Many receivers log only while moving ("smart" or motion-triggered recording): a stop
  shows as a gap between two fixes at the same place. Such a gap, up to ``max_still_fill_s``
  and with both fixes within ``still_radius_m``, is filled at the last position; a gap of up
  to ``max_sparse_gap_s`` at walking speed (a straight stretch the receiver did not log) is
  interpolated. Both are flagged ``qa_track_fill`` (sensors keep their own gaps).
- A leg in a vehicle is a sustained speed above ``vehicle_speed_ms`` for at least
  ``vehicle_min_s``: its fixes are kept and flagged ``qa_vehicle`` as one segment, and jumps
  are looked for on each side of it separately, so the leg is not a cascade of jumps.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from walkcomfort.session import qa as _qa

#: Above this a "leg" is not a road vehicle either but a jump (an airliner is faster; a walk
#: does not take one) [m s⁻¹].
MAX_VEHICLE_SPEED_MS = 70.0


def fix_speeds(t_ns: np.ndarray, lat, lon) -> np.ndarray:
    """Speed between consecutive fixes [m s⁻¹] (length n − 1; NaN for a zero interval)."""
    t = np.asarray(t_ns, dtype=np.int64)
    if len(t) < 2:
        return np.zeros(0)
    d = _qa.haversine_m(np.asarray(lat[:-1], float), np.asarray(lon[:-1], float),
                        np.asarray(lat[1:], float), np.asarray(lon[1:], float))
    dt = np.diff(t) / 1e9
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(dt > 0, d / dt, np.nan)


def vehicle_legs(t_ns: np.ndarray, lat, lon, limits: dict) -> np.ndarray:
    """Fixes inside a vehicle leg (bool per fix): a run of fast intervals lasting ``vehicle_min_s``."""
    t = np.asarray(t_ns, dtype=np.int64)
    out = np.zeros(len(t), dtype=bool)
    v = fix_speeds(t, lat, lon)
    fast = (v > limits["vehicle_speed_ms"]) & (v <= MAX_VEHICLE_SPEED_MS)
    if not fast.any():
        return out
    edges = np.flatnonzero(np.diff(np.concatenate([[0], fast.astype(np.int8), [0]])))
    runs: list[list[int]] = []
    for a, b in zip(edges[::2], edges[1::2], strict=True):   # fast intervals a..b-1 → fixes a..b
        # a short slow stretch (a junction, a stop at lights) does not end the leg
        if runs and (t[a] - t[runs[-1][1]]) / 1e9 <= limits["vehicle_min_s"] / 2:
            runs[-1][1] = b
        else:
            runs.append([a, b])
    for a, b in runs:
        if b - a >= 2 and (t[b] - t[a]) / 1e9 >= limits["vehicle_min_s"]:
            out[a:b + 1] = True
    return out


def find_jumps(times: pd.DatetimeIndex, lat, lon, max_speed_ms: float, vehicle: np.ndarray) -> np.ndarray:
    """GPS jumps looked for on each stretch between vehicle legs (fixes of a leg are never jumps)."""
    n = len(times)
    jumps = np.zeros(n, dtype=bool)
    lat, lon = np.asarray(lat, float), np.asarray(lon, float)
    walk = ~np.asarray(vehicle, dtype=bool)
    edges = np.flatnonzero(np.diff(np.concatenate([[0], walk.astype(np.int8), [0]])))
    for a, b in zip(edges[::2], edges[1::2], strict=True):
        jumps[a:b] = _qa.find_gps_jumps(times[a:b], lat[a:b], lon[a:b], max_speed_ms)
    return jumps


def fill_track_gaps(steps_ns: np.ndarray, t_ns: np.ndarray, fixes: np.ndarray, values: np.ndarray, gap: np.ndarray,
                    limits: dict) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Fill gap steps of a track recorded sparsely.

    Between two fixes at the same place (``still_radius_m``, at most ``max_still_fill_s``
    apart) the walker stood: the steps take the last fix. Between two fixes at most
    ``max_sparse_gap_s`` apart that imply walking speed (at most ``sparse_max_speed_ms``)
    the receiver logged sparsely while moving on: the steps are interpolated linearly.
    ``fixes`` (n_fixes, k) holds the fix columns with lat, lon first, ``values`` (n_steps, k)
    the same columns on the steps. Returns the values (a copy), the gap flag with filled
    steps cleared, and the flags of still-filled and sparse-filled steps.
    """
    t = np.asarray(t_ns, dtype=np.int64)
    none = np.zeros(len(steps_ns), dtype=bool)
    if len(t) < 2 or not gap.any():
        return values, gap, none, none
    lat, lon = fixes[:, 0], fixes[:, 1]
    d = _qa.haversine_m(lat[:-1], lon[:-1], lat[1:], lon[1:])
    dt = np.diff(t) / 1e9
    still = (d <= limits["still_radius_m"]) & (dt <= limits["max_still_fill_s"])
    with np.errstate(divide="ignore", invalid="ignore"):
        sparse = ~still & (dt <= limits["max_sparse_gap_s"]) & (d / dt <= limits["sparse_max_speed_ms"])
    j = np.searchsorted(t, steps_ns, side="right") - 1
    inside = gap & (j >= 0) & (j < len(t) - 1)
    jc = np.clip(j, 0, len(t) - 2)
    fill_still = inside & still[jc]
    fill_sparse = inside & sparse[jc]
    if not (fill_still.any() or fill_sparse.any()):
        return values, gap, fill_still, fill_sparse
    vals = np.array(values, dtype=float, copy=True)
    vals[fill_still] = fixes[j[fill_still]]
    k = np.flatnonzero(fill_sparse)
    w = ((steps_ns[k] - t[jc[k]]) / (t[jc[k] + 1] - t[jc[k]]))[:, None]
    vals[k] = fixes[jc[k]] + w * (fixes[jc[k] + 1] - fixes[jc[k]])
    return vals, gap & ~fill_still & ~fill_sparse, fill_still, fill_sparse
