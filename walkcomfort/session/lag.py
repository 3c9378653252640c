"""First-order sensor response: forward model, its smoothed inverse, and settling flags.

A thermometer or globe with time constant τ follows the true temperature T as
dT̃/dt = (T − T̃)/τ. Sampled at Δt with the true value held over each step this is
exactly T̃[k] = a·T̃[k−1] + (1−a)·T[k], a = exp(−Δt/τ) (the zero-order-hold
discretisation of a first-order lag; e.g. Doebelin, *Measurement Systems*, ch. 3,
from memory). Its inverse T̂[k] = (T̃[k] − a·T̃[k−1])/(1−a) recovers T but
multiplies noise by about 2/(1−a) ≈ 2τ/Δt, so the readings are smoothed first; the
two operations are linear and commute, so the result is the smoothed true temperature.

The smoothing is *causal* (a trailing mean): a corrected value uses no reading taken
after it, so a change is never announced before it happens; the price is a delay of
half the smoothing span (e.g. 15 s for a 30 s span, instead of the sensor's minutes).

A globe's time constant falls as the air speed rises (its convective coefficient grows
as V^0.6, ISO 7726), so a declared τ is taken as the value at
:data:`TAU_REFERENCE_SPEED_MS` and scaled per sample by
τ(V) = τ_ref·(h_c(V_ref) + h_r)/(h_c(V) + h_r), with h_c = 6.3 V^0.6/D^0.4 (ISO 7726) and
h_r ≈ 6 W m⁻² K⁻¹ the radiative coefficient near 30 °C (4εσT³; from the definition).

Noise: the inverse is a linear filter T̂[k] = Σ c_j y[k−j], so reading noise of standard
deviation σ becomes σ·√Σc_j²; :func:`lag_uncertainty` reports it, with σ estimated from
the readings' second differences (common practice for white noise on a smooth signal).
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


#: Air speed at which a declared globe time constant holds [m s⁻¹] (the manifest's convention).
TAU_REFERENCE_SPEED_MS = 1.0
#: Radiative heat-transfer coefficient of a globe near 30 °C, 4εσT³ [W m⁻² K⁻¹].
H_RADIATIVE = 6.0


def tau_at_speed(tau_ref_s: float, air_speed_ms, diameter_m: float = 0.038) -> np.ndarray:
    """A globe's time constant at each air speed, from the one declared at 1 m s⁻¹ [s]."""
    def h(v):
        return 6.3 * np.power(np.clip(np.asarray(v, float), 0.05, 20.0), 0.6) / diameter_m ** 0.4 + H_RADIATIVE
    v = np.asarray(air_speed_ms, float)
    ratio = h(TAU_REFERENCE_SPEED_MS) / h(np.where(np.isfinite(v), v, TAU_REFERENCE_SPEED_MS))
    return float(tau_ref_s) * ratio


def trailing_average(values, window: int) -> np.ndarray:
    """Mean of the last ``window`` samples (fewer at the start); NaN-aware; never looks ahead."""
    v = np.asarray(values, dtype=float)
    w = max(int(window), 1)
    ok = np.isfinite(v)
    cs = np.concatenate([[0.0], np.cumsum(np.where(ok, v, 0.0))])
    cc = np.concatenate([[0.0], np.cumsum(ok.astype(float))])
    i = np.arange(1, v.size + 1)
    lo = np.maximum(i - w, 0)
    with np.errstate(invalid="ignore", divide="ignore"):
        out = (cs[i] - cs[lo]) / (cc[i] - cc[lo])
    out[~ok] = np.nan
    return out


def lag_uncertainty(noise_k: float, a, window: int) -> np.ndarray:
    """Standard deviation [K] the causal inverse gives to reading noise ``noise_k``.

    The filter's weights are 1/(w(1−a)) on the newest reading, −a/(w(1−a)) on the
    one w samples back and 1/w on the w−1 between; the output's standard deviation is
    ``noise_k`` times the root of the sum of their squares.
    """
    a = np.asarray(a, float)
    w = max(int(window), 1)
    if w == 1:
        s2 = (1.0 + a * a) / (1.0 - a) ** 2
    else:
        s2 = (1.0 / (w * (1 - a))) ** 2 + (a / (w * (1 - a))) ** 2 + (w - 1) * ((1 - a) / (w * (1 - a))) ** 2
    return noise_k * np.sqrt(s2)


def reading_noise(values) -> float:
    """Standard deviation of white reading noise from second differences: std(Δ²y)/√6 [K]."""
    v = np.asarray(values, float)
    v = v[np.isfinite(v)]
    if v.size < 5:
        return 0.0
    d2 = np.diff(v, 2)
    return float(1.4826 * np.median(np.abs(d2 - np.median(d2))) / np.sqrt(6.0))


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
    """Recover the true value from first-order sensor readings (causal; see the module notes).

    ``tau_s`` may be one value or one per sample (a time constant that follows air speed).
    """
    y = np.asarray(readings, dtype=float)
    if y.size == 0:
        return y.copy()
    if np.ndim(tau_s):
        tau = np.asarray(tau_s, float)
        _a(dt_s, float(np.nanmin(tau)) if np.isfinite(tau).any() else None)
        a = np.exp(-np.broadcast_to(np.asarray(dt_s, float), y.shape) / tau)
    else:
        a = np.broadcast_to(_a(dt_s, tau_s), y.shape) if np.ndim(dt_s) else np.full(y.shape, _a(dt_s, tau_s))
    raw = np.empty_like(y)
    raw[0] = y[0]
    # the exact inverse sample by sample (exact also when tau changes), then the trailing mean
    raw[1:] = (y[1:] - a[1:] * y[:-1]) / (1.0 - a[1:])
    return trailing_average(raw, smooth_samples)


def correct_lag(series: pd.Series, tau_s: float, smooth_s: float | None = None,
                max_gap_s: float = 10.0, air_speed_ms=None, diameter_m: float | None = None) -> pd.Series:
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
    air_speed_ms : array-like, optional
        Air speed at the sensor per reading [m s⁻¹]; with ``diameter_m`` (a globe) the
        time constant follows it (:func:`tau_at_speed`), ``tau_s`` being its value at 1 m s⁻¹.
    diameter_m : float, optional
        Globe diameter [m].

    Returns
    -------
    Series
        Corrected values; ``attrs["lag"]`` holds ``noise_k`` (reading noise estimated),
        ``uncertainty_k`` (median standard deviation the correction gives that noise),
        ``tau_s_median``, ``smooth_s`` and ``delay_s`` (half the smoothing span).
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
    taus = (tau_at_speed(tau_s, air_speed_ms, diameter_m) if air_speed_ms is not None and diameter_m
            else np.full(len(s), float(tau_s)))
    breaks = np.flatnonzero(dt > max_gap_s) + 1
    bounds = np.concatenate([[0], breaks, [len(s)]])
    vals = s.to_numpy()
    for lo, hi in zip(bounds[:-1], bounds[1:], strict=False):
        if hi - lo < 2:
            out[lo:hi] = vals[lo:hi]
            continue
        d = np.concatenate([[med], dt[lo:hi - 1]])
        out[lo:hi] = inverse_first_order(vals[lo:hi], d, taus[lo:hi], smooth_samples=window)
    res = pd.Series(out, index=s.index, name=s.name)
    noise = reading_noise(vals)
    a = np.exp(-med / taus)
    res.attrs["lag"] = {"noise_k": round(noise, 4),
                        "uncertainty_k": round(float(np.nanmedian(lag_uncertainty(noise, a, window))), 4),
                        "tau_s_median": round(float(np.nanmedian(taus)), 2),
                        "smooth_s": round(window * med, 2), "delay_s": round(0.5 * (window - 1) * med, 2)}
    return res


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
