"""Readings to a regular time grid, and the walk's geometry (distance, speed, heading, slope).

Readings faster than the step are averaged per step (sound levels on energy,
ISO 1996-1), then values are interpolated linearly only between readings at most
the maximum gap apart; beyond it the value is NaN and the step is flagged as a gap.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from walkcomfort.columns import DIST_M, ELEV_M, HEADING_DEG, LAT, LON, SLOPE_PCT, SPEED_MS
from walkcomfort.session import qa as _qa
from walkcomfort.session.lag import moving_average


def max_gap_for(spec, times: pd.DatetimeIndex, default: float) -> float:
    if spec.max_gap_s is not None:
        return float(spec.max_gap_s)
    t = times.asi8
    if len(t) < 2:
        return float(default)
    med = float(np.median(np.diff(t))) / 1e9
    return max(float(default), 2.0 * med)


def gap_extra(times, max_gap, steps, gapflag) -> dict:
    st = _qa.gap_stats(times, max_gap, steps[0], steps[-1])
    st["coverage_frac"] = round(float(1.0 - gapflag.mean()) if len(gapflag) else 0.0, 6)
    return st


def to_steps(t_ns: np.ndarray, values: np.ndarray, steps_ns: np.ndarray, step_ns: int, max_gap_s: float,
              energy: bool = False) -> tuple[np.ndarray, np.ndarray]:
    """Values (n, k) at times ``t_ns`` → values at the steps, and the gap flag per step.

    Readings faster than the step are first averaged per step (arithmetic, or on
    energy for sound levels); then values are interpolated linearly between the two
    readings around each step when they are at most ``max_gap_s`` apart.
    """
    v = np.asarray(values, dtype=float)
    if v.ndim == 1:
        v = v[:, None]
    n_steps, k = len(steps_ns), v.shape[1]
    res = np.full((n_steps, k), np.nan)
    if len(t_ns) == 0:
        return res, np.ones(n_steps, dtype=bool)
    if energy:
        with np.errstate(over="ignore"):
            v = 10.0 ** (v / 10.0)
    t = np.asarray(t_ns, dtype=np.int64)
    if len(t) > 1 and np.median(np.diff(t)) < step_ns:
        # bin readings on the step they are nearest to, then treat bins as readings
        b = np.floor((t - steps_ns[0] + step_ns / 2) / step_ns).astype(np.int64)
        ub, inv = np.unique(b, return_inverse=True)
        ok = np.isfinite(v)
        sums = np.zeros((len(ub), k))
        cnts = np.zeros((len(ub), k))
        for j in range(k):
            sums[:, j] = np.bincount(inv, weights=np.where(ok[:, j], v[:, j], 0.0), minlength=len(ub))
            cnts[:, j] = np.bincount(inv, weights=ok[:, j].astype(float), minlength=len(ub))
        with np.errstate(invalid="ignore", divide="ignore"):
            v = sums / cnts
        t = steps_ns[0] + ub * step_ns
    max_gap_ns = max_gap_s * 1e9
    # the gap flag depends on when readings exist, whatever the column
    j = np.searchsorted(t, steps_ns, side="right") - 1
    jc = np.clip(j, 0, len(t) - 1)
    jn = np.clip(j + 1, 0, len(t) - 1)
    exact = (j >= 0) & (t[jc] == steps_ns)
    bridged = (j >= 0) & (j + 1 < len(t)) & ((t[jn] - t[jc]) <= max_gap_ns)
    gap = ~(exact | bridged)
    for col in range(k):
        ok = np.isfinite(v[:, col])
        tt, vv = t[ok], v[ok, col]
        if len(tt) == 0:
            continue
        jj = np.searchsorted(tt, steps_ns, side="right") - 1
        a = np.clip(jj, 0, len(tt) - 1)
        c = np.clip(jj + 1, 0, len(tt) - 1)
        span = (tt[c] - tt[a]).astype(float)
        ex = (jj >= 0) & (tt[a] == steps_ns)
        use = (jj >= 0) & (jj + 1 < len(tt)) & (span <= max_gap_ns) & (span > 0)
        with np.errstate(invalid="ignore", divide="ignore"):
            w = (steps_ns - tt[a]) / np.where(span > 0, span, 1.0)
        r = np.full(n_steps, np.nan)
        r[use] = vv[a][use] + w[use] * (vv[c][use] - vv[a][use])
        r[ex] = vv[a][ex]
        res[:, col] = r
    if energy:
        with np.errstate(divide="ignore", invalid="ignore"):
            res = 10.0 * np.log10(res)
    return res, gap


def _window(span_s: float, step_s: float, n: int) -> int:
    """Samples of a centred smoothing window, never longer than the track (an odd count ≤ n)."""
    w = max(1, int(round(span_s / step_s)))
    longest = n if n % 2 else n - 1
    return max(1, min(w, longest))


def _geod():
    from pyproj import Geod

    return Geod(ellps="WGS84")


def add_track(out: pd.DataFrame, step_s: float, elev_smooth_s: float, track_smooth_s: float) -> None:
    """Distance, speed, heading, smoothed elevation and slope from the stepped positions."""
    lat = out[LAT].to_numpy(float)
    lon = out[LON].to_numpy(float)
    n = len(out)
    w = _window(track_smooth_s, step_s, n)
    la = moving_average(lat, w)
    lo = moving_average(lon, w)
    ok = np.isfinite(la) & np.isfinite(lo)
    dist = np.full(n, np.nan)
    idx = np.flatnonzero(ok)
    # distances and azimuths on the WGS84 ellipsoid (Karney's geodesic via pyproj)
    geod = _geod()
    if len(idx):
        d = np.zeros(len(idx))
        if len(idx) > 1:
            _, _, d[1:] = geod.inv(lo[idx[:-1]], la[idx[:-1]], lo[idx[1:]], la[idx[1:]])
        dist[idx] = np.cumsum(d)
    h = max(1, int(round(track_smooth_s / 2 / step_s)))
    i0 = np.clip(np.arange(n) - h, 0, n - 1)
    i1 = np.clip(np.arange(n) + h, 0, n - 1)
    dt = (i1 - i0) * step_s
    with np.errstate(invalid="ignore", divide="ignore"):
        speed = (dist[i1] - dist[i0]) / np.where(dt > 0, dt, np.nan)
    heading = np.full(n, np.nan)
    both = ok[i0] & ok[i1]
    if both.any():
        az, _, disp = geod.inv(lo[i0][both], la[i0][both], lo[i1][both], la[i1][both])
        # standing still: no direction of walking
        heading[both] = np.where(disp >= 0.5, np.mod(az, 360.0), np.nan)
    if ELEV_M in out.columns:
        we = _window(elev_smooth_s, step_s, n)
        elev = moving_average(out[ELEV_M].to_numpy(float), we)
        elev[~ok] = np.nan
        h2 = max(1, int(round(elev_smooth_s / 2 / step_s)))
        j0 = np.clip(np.arange(n) - h2, 0, n - 1)
        j1 = np.clip(np.arange(n) + h2, 0, n - 1)
        run = dist[j1] - dist[j0]
        with np.errstate(invalid="ignore", divide="ignore"):
            slope = np.where(run >= 3.0, (elev[j1] - elev[j0]) / run * 100.0, np.nan)
        out[ELEV_M] = elev
    else:
        out[ELEV_M] = np.nan
        slope = np.full(n, np.nan)
    out[DIST_M] = dist
    out[SPEED_MS] = speed
    out[HEADING_DEG] = heading
    out[SLOPE_PCT] = slope


