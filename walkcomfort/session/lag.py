"""First-order sensor response: forward model, its smoothed inverse, and settling flags.

A thermometer or globe with time constant τ follows the true temperature T as
dT̃/dt = (T − T̃)/τ. Sampled at Δt with the true value held over each step this is
exactly T̃[k] = a·T̃[k−1] + (1−a)·T[k], a = exp(−Δt/τ) (the zero-order-hold
discretisation of a first-order lag; e.g. Doebelin, *Measurement Systems*, ch. 3,
from memory). Its inverse T̂[k] = (T̃[k] − a·T̃[k−1])/(1−a) recovers T but
multiplies noise by about 2/(1−a) ≈ 2τ/Δt, so the readings are smoothed (centred
moving average) first; the two operations are linear and commute, so the result
is the smoothed true temperature.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from walkcomfort.errors import InputError


def _a(dt_s, tau_s):
    if tau_s is None or not np.isfinite(tau_s) or tau_s <= 0:
        raise InputError(f"time constant τ = {tau_s!r} s must be a positive number",
                         fix="declare tau_air_s / tau_globe_s in [sensors]")
    dt = np.asarray(dt_s, dtype=float)
    if np.any(~np.isfinite(dt)) or np.any(dt <= 0):
        raise InputError("time steps Δt must be positive", fix="sort the readings and remove duplicate times")
    return np.exp(-dt / float(tau_s))


def first_order_response(true_values, dt_s, tau_s, initial=None) -> np.ndarray:
    """What a first-order sensor reads when the true value is ``true_values``.

    Parameters
    ----------
    true_values : array_like
        True temperature at each sample [°C] (held constant over each step).
    dt_s : float or array_like
        Sampling interval [s] (scalar, or one per sample; the first is unused).
    tau_s : float
        Sensor time constant [s].
    initial : float, optional
        Reading at the first sample [°C] (default: the first true value, i.e. settled).

    Returns
    -------
    ndarray
        Sensor readings [°C].
    """
    x = np.asarray(true_values, dtype=float)
    if x.size == 0:
        return x.copy()
    a = np.broadcast_to(_a(dt_s, tau_s), x.shape) if np.ndim(dt_s) else np.full(x.shape, _a(dt_s, tau_s))
    y = np.empty_like(x)
    y[0] = x[0] if initial is None else float(initial)
    for k in range(1, x.size):
        y[k] = a[k] * y[k - 1] + (1.0 - a[k]) * x[k]
    return y


def moving_average(values, window: int) -> np.ndarray:
    """Centred moving average over ``window`` samples (odd), shrinking at the ends; NaN-aware."""
    v = np.asarray(values, dtype=float)
    w = int(window)
    if w <= 1 or v.size == 0:
        return v.copy()
    if w % 2 == 0:
        w += 1
    ok = np.isfinite(v)
    kernel = np.ones(w)
    s = np.convolve(np.where(ok, v, 0.0), kernel, mode="same")
    c = np.convolve(ok.astype(float), kernel, mode="same")
    with np.errstate(invalid="ignore", divide="ignore"):
        out = s / c
    out[~ok] = np.nan
    return out


def inverse_first_order(readings, dt_s, tau_s, smooth_samples: int = 1) -> np.ndarray:
    """Recover the true value from first-order sensor readings.

    Parameters
    ----------
    readings : array_like
        Sensor readings [°C], evenly or unevenly sampled.
    dt_s : float or array_like
        Sampling interval [s] (scalar, or the interval before each sample).
    tau_s : float
        Sensor time constant [s].
    smooth_samples : int
        Centred moving-average window applied to the readings first (1 = none).

    Returns
    -------
    ndarray
        Estimated true values [°C]; the first sample is returned as read.
    """
    y = moving_average(readings, smooth_samples)
    if y.size == 0:
        return y
    a = np.broadcast_to(_a(dt_s, tau_s), y.shape) if np.ndim(dt_s) else np.full(y.shape, _a(dt_s, tau_s))
    out = np.empty_like(y)
    out[0] = y[0]
    out[1:] = (y[1:] - a[1:] * y[:-1]) / (1.0 - a[1:])
    return out


def correct_lag(series: pd.Series, tau_s: float, smooth_s: float | None = None,
                max_gap_s: float = 10.0) -> pd.Series:
    """Lag-correct a time series, restarting after every gap longer than ``max_gap_s``.

    Parameters
    ----------
    series : pandas.Series
        Readings [°C] with a DatetimeIndex (sorted).
    tau_s : float
        Time constant [s].
    smooth_s : float, optional
        Smoothing span [s] (default τ/2, at least 3 samples): the price of a stable
        inverse is time resolution of about this span.
    max_gap_s : float
        Larger spacing starts a new segment (the filter state is unknown across it).
    """
    s = series.astype(float)
    if len(s) < 2:
        return s.copy()
    t = s.index.as_unit("ns").asi8.astype(np.float64) / 1e9
    dt = np.diff(t)
    med = float(np.median(dt)) if dt.size else 1.0
    span = (0.5 * tau_s) if smooth_s is None else smooth_s
    window = max(3, int(round(span / med))) if span > 0 else 1
    out = np.full(len(s), np.nan)
    breaks = np.flatnonzero(dt > max_gap_s) + 1
    bounds = np.concatenate([[0], breaks, [len(s)]])
    vals = s.to_numpy()
    for lo, hi in zip(bounds[:-1], bounds[1:], strict=False):
        if hi - lo < 2:
            out[lo:hi] = vals[lo:hi]
            continue
        d = np.concatenate([[med], dt[lo:hi - 1]])
        out[lo:hi] = inverse_first_order(vals[lo:hi], d, tau_s, smooth_samples=window)
    return pd.Series(out, index=s.index, name=s.name)


def settling_mask(sample_times: pd.DatetimeIndex, step_times: pd.DatetimeIndex, tau_s: float | None,
                  n_tau: float = 3.0, max_gap_s: float = 10.0, restarts=()) -> np.ndarray:
    """Steps at which a lagged sensor may not have settled yet.

    True within ``n_tau``·τ after the sensor's first reading, after the end of each
    gap in its readings longer than ``max_gap_s``, and after each instant in
    ``restarts`` (e.g. a change of place declared by the caller). After 3τ a
    first-order sensor has covered 95 % of a step change, after 5τ 99.3 %
    (from the definition: 1 − e⁻³, 1 − e⁻⁵).
    """
    steps = pd.DatetimeIndex(step_times).as_unit("ns").asi8
    mask = np.zeros(len(steps), dtype=bool)
    if tau_s is None or len(sample_times) == 0:
        return mask
    t = pd.DatetimeIndex(sample_times).as_unit("ns").asi8
    starts = [t[0]]
    if len(t) > 1:
        d = np.diff(t)
        starts += list(t[1:][d > max_gap_s * 1e9])
    starts += [pd.Timestamp(r).as_unit("ns").value for r in restarts]
    span = int(n_tau * tau_s * 1e9)
    for s0 in starts:
        mask |= (steps >= s0) & (steps < s0 + span)
    return mask


def lag_error(sample_times: pd.DatetimeIndex, readings, tau_s: float, smooth_s: float | None = None) -> np.ndarray:
    """Estimated lag error τ·|dT̃/dt| of each reading [K] (see :func:`unsettled_by_rate`)."""
    y = np.asarray(readings, dtype=float)
    if y.size < 3 or tau_s is None or tau_s <= 0:
        return np.zeros(y.size)
    t = pd.DatetimeIndex(sample_times).as_unit("ns").asi8.astype(np.float64) / 1e9
    med = float(np.median(np.diff(t)))
    span = 0.25 * tau_s if smooth_s is None else smooth_s
    ys = moving_average(y, max(3, int(round(span / med))) if med > 0 else 3)
    return np.abs(tau_s * np.gradient(ys, t))


def unsettled_by_rate(sample_times: pd.DatetimeIndex, readings, tau_s: float, tol_k: float = 1.0,
                      smooth_s: float | None = None) -> np.ndarray:
    """Readings still catching up with a change (e.g. a change of place from shade to sun).

    For a first-order sensor the reading lags the true value by exactly
    T − T̃ = τ·dT̃/dt (from the definition dT̃/dt = (T − T̃)/τ), so a reading is taken as
    not settled when τ·|dT̃/dt| exceeds ``tol_k``. The rate is taken on readings
    smoothed over ``smooth_s`` (default τ/4, at least 3 samples) so that noise alone
    does not trip it.

    Returns
    -------
    ndarray of bool, one per reading.
    """
    with np.errstate(invalid="ignore"):
        return lag_error(sample_times, readings, tau_s, smooth_s) > tol_k
