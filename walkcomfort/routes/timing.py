"""Where the walker is at each moment: walking speed on slopes, stops, departure times.

Walking speed follows Tobler's hiking function (Tobler 1993),

    W = 6 · exp(−3.5 · |S + 0.05|)  [km h⁻¹],   S = dh/dx,

whose own flat-ground value is 6·exp(−0.175) = 5.04 km h⁻¹ and whose maximum
(6 km h⁻¹) is on a 5 % downhill. Urban pedestrians on flat pavement walk near
1.3 m s⁻¹ (common practice), so the function is used as a *shape*: speed =
``flat_speed_ms`` · W(S) / W(0).

References
----------
Tobler, W. (1993). Three presentations on geographical analysis and modeling.
NCGIA Technical Report 93-1, University of California, Santa Barbara.
"""

from __future__ import annotations

import re
from datetime import datetime
from datetime import time as dtime

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.errors import InputError

#: Default walking speed on flat ground [m s⁻¹] (common practice for urban pedestrians).
DEFAULT_FLAT_SPEED_MS = 1.3
#: Time step of the rows inserted while the walker waits at a stop [s].
DEFAULT_STOP_STEP_S = 5.0


def tobler_speed_kmh(slope):
    """Tobler's hiking function: walking speed on a slope [km h⁻¹].

    Parameters
    ----------
    slope : float or array_like
        Rise over run ``dh/dx`` [-] (0.10 is a 10 % uphill, −0.05 a 5 % downhill).

    Returns
    -------
    float or numpy.ndarray
        Speed [km h⁻¹]; 5.04 on the flat, 6.0 at −5 %.
    """
    s = np.asarray(slope, dtype=float)
    out = 6.0 * np.exp(-3.5 * np.abs(s + 0.05))
    return float(out) if out.ndim == 0 else out


def walking_speed_ms(slope, flat_speed_ms: float = DEFAULT_FLAT_SPEED_MS):
    """Walking speed on a slope, Tobler's function scaled to a flat-ground speed [m s⁻¹].

    Parameters
    ----------
    slope : float or array_like
        Rise over run ``dh/dx`` [-].
    flat_speed_ms : float, default 1.3
        Speed on flat ground [m s⁻¹].
    """
    if not flat_speed_ms > 0:
        raise InputError(f"flat walking speed {flat_speed_ms!r} m/s is not positive",
                         fix="give a speed > 0, e.g. 1.3 m/s")
    return flat_speed_ms * np.asarray(tobler_speed_kmh(slope)) / tobler_speed_kmh(0.0)


def walk_schedule(points: pd.DataFrame, stops: pd.DataFrame | None = None,
                  flat_speed_ms: float = DEFAULT_FLAT_SPEED_MS,
                  stop_step_s: float = DEFAULT_STOP_STEP_S) -> pd.DataFrame:
    """Time offsets of a walk along resampled route points, with waits at stops.

    Each segment between consecutive points is walked at the Tobler speed for the
    mean slope of its two ends. At a stop the walker stays ``wait_s``; rows are
    inserted at the stop's place every ``stop_step_s`` so the wait appears on the
    timeline (and in exposure history) like any other time.

    Parameters
    ----------
    points : DataFrame
        ``Route.points`` (``dist_m``, ``slope_pct`` and position columns).
    stops : DataFrame, optional
        ``Route.stops`` (``dist_m``, ``wait_s``, ``label``).
    flat_speed_ms : float
        Walking speed on flat ground [m s⁻¹].
    stop_step_s : float
        Row spacing during a wait [s].

    Returns
    -------
    DataFrame
        The point columns plus ``t_s`` [s] since departure, ``step_s`` [s] (the
        duration the row stands for: half the interval to each neighbour, so the
        column sums to the walk time), ``speed_ms`` [m s⁻¹] (0 while waiting) and
        ``stop`` (the stop label, empty while walking). Interpolated columns at a
        stop take the stop's place.
    """
    d = points[C.DIST_M].to_numpy(float)
    slope = points[C.SLOPE_PCT].to_numpy(float) / 100.0
    seg_slope = 0.5 * (slope[1:] + slope[:-1])
    seg_len = np.diff(d)
    seg_speed = walking_speed_ms(seg_slope, flat_speed_ms)
    seg_t = seg_len / seg_speed
    t = np.concatenate([[0.0], np.cumsum(seg_t)])
    out = points.copy()
    out["t_s"] = t
    out[C.SPEED_MS] = np.append(seg_speed, seg_speed[-1] if len(seg_speed) else flat_speed_ms)
    out["stop"] = ""
    if stops is not None and len(stops):
        if not stop_step_s > 0:
            raise InputError(f"stop_step_s {stop_step_s!r} is not positive", fix="give a step > 0 s")
        pieces = []
        shift = 0.0
        prev = 0
        num_cols = [c for c in points.columns if pd.api.types.is_numeric_dtype(points[c])]
        for _, s in stops.iterrows():
            sd = float(s[C.DIST_M])
            wait = float(s["wait_s"])
            if wait <= 0:
                continue
            k = int(np.searchsorted(d, sd, side="right"))  # points strictly before the stop end at k
            block = out.iloc[prev:k].copy()
            block["t_s"] += shift
            pieces.append(block)
            # the place of the stop, interpolated along the route
            row = {c: float(np.interp(sd, d, points[c].to_numpy(float))) for c in num_cols}
            t_arrive = float(np.interp(sd, d, t)) + shift
            n = max(1, int(np.ceil(wait / stop_step_s)))
            offs = np.linspace(0.0, wait, n + 1)
            # keep the arrival instant only when no route point sits there already
            if k > 0 and abs(d[k - 1] - sd) < 1e-9:
                offs = offs[1:]
            wait_rows = pd.DataFrame([row] * len(offs))
            for c in points.columns:
                if c not in num_cols:
                    wait_rows[c] = points[c].iloc[min(k, len(points) - 1)]
            wait_rows["t_s"] = t_arrive + offs
            wait_rows[C.SPEED_MS] = 0.0
            wait_rows["stop"] = str(s["label"])
            pieces.append(wait_rows[out.columns])
            shift += wait
            prev = k
        tail = out.iloc[prev:].copy()
        tail["t_s"] += shift
        pieces.append(tail)
        out = pd.concat(pieces, ignore_index=True)
    tt = out["t_s"].to_numpy(float)
    if len(tt) > 1:
        gaps = np.diff(tt)
        out["step_s"] = 0.5 * (np.concatenate([[0.0], gaps]) + np.concatenate([gaps, [0.0]]))
    else:
        out["step_s"] = 0.0
    return out.reset_index(drop=True)


# --------------------------------------------------------------------------- departures
_RANGE_RE = re.compile(r"^(?P<start>[^/]+?)\.\.(?P<end>[^/]+?)/(?P<step>[0-9]+\s*(min|h|s))$")


def _to_utc(value, timezone: str | None, what: str) -> pd.Timestamp:
    try:
        ts = pd.Timestamp(value)
    except (ValueError, TypeError):
        raise InputError(f"{what} {value!r} is not a date-time", where="--depart",
                         fix="write ISO 8601, e.g. 2026-07-15T15:00") from None
    if ts.tzinfo is None:
        if timezone is None:
            raise InputError(f"{what} {value!r} has no time zone", where="--depart",
                             fix="add an offset (2026-07-15T15:00+02:00) or give the timezone (--timezone Europe/Madrid)")
        try:
            ts = ts.tz_localize(timezone, nonexistent="raise", ambiguous="raise")
        except Exception as exc:  # unknown zone name or a clock-change gap/overlap
            raise InputError(f"{what} {value!r} cannot be placed in time zone {timezone!r} ({exc})",
                             where="--depart", fix="give an IANA zone name and a time that exists on that day") from None
    return ts.tz_convert("UTC")


def parse_departures(specs, timezone: str | None = None, day=None) -> pd.DatetimeIndex:
    """Departure times (UTC) from strings: single times and sweeps.

    Parameters
    ----------
    specs : str or iterable of str or Timestamp
        Each item is an ISO date-time (``2026-07-15T15:00+02:00``), a clock time
        ``HH:MM`` (needs ``day``), or a sweep ``START..END/STEP`` with STEP like
        ``30min``, ``1h`` (both ends included when they fall on the step).
    timezone : str, optional
        IANA zone for times without an offset.
    day : date-like, optional
        The day for clock-time-only items (e.g. a design day).

    Returns
    -------
    pandas.DatetimeIndex
        Sorted, unique, tz-aware UTC.
    """
    if isinstance(specs, (str, pd.Timestamp, datetime)):
        specs = [specs]
    out: list[pd.Timestamp] = []
    for spec in specs:
        if isinstance(spec, (pd.Timestamp, datetime)):
            out.append(_to_utc(spec, timezone, "departure"))
            continue
        text = str(spec).strip()
        m = _RANGE_RE.match(text)
        if m:
            start = _to_utc(_with_day(m["start"], day), timezone, "sweep start")
            end = _to_utc(_with_day(m["end"], day), timezone, "sweep end")
            step = pd.Timedelta(m["step"].replace(" ", ""))
            if step <= pd.Timedelta(0):
                raise InputError(f"sweep {text!r} has a zero step", where="--depart",
                                 fix="write a positive STEP, e.g. 08:00..18:00/1h")
            if end < start:
                raise InputError(f"sweep {text!r} ends before it starts", where="--depart",
                                 fix="write START..END/STEP with END ≥ START")
            n = int((end - start) / step)
            if n > 10_000:
                raise InputError(f"sweep {text!r} has {n + 1} departures (max 10001)", where="--depart", fix="use a coarser step")
            out.extend(start + i * step for i in range(n + 1))
        else:
            out.append(_to_utc(_with_day(text, day), timezone, "departure"))
    if not out:
        raise InputError("no departure time given", where="--depart", fix="give at least one --depart")
    return pd.DatetimeIndex(sorted(set(out)), name="departure")


def _with_day(text: str, day) -> str:
    text = text.strip()
    if re.fullmatch(r"\d{1,2}:\d{2}(:\d{2})?", text):
        if day is None:
            raise InputError(f"departure {text!r} is a clock time without a date", where="--depart",
                             fix="give a full date-time, or a design day (--design-day) to put it on")
        hh = dtime.fromisoformat(text if len(text) > 5 or len(text.split(':')[0]) == 2 else "0" + text)
        return f"{pd.Timestamp(day).date().isoformat()}T{hh.isoformat()}"
    return text
