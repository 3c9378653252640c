"""Pick the day schemes are compared on, by a stated rule, from a weather file.

A comparison of shade schemes is only as defensible as the day it is run on. Three
rules, all on the daily maximum air temperature in the file's local standard time:

* ``"hottest"`` — the day with the highest daily maximum (optionally within months);
* ``"percentile"`` — the day whose daily maximum is closest to the p-th percentile of
  the daily maxima in a season (e.g. the 95th percentile of June–August), a common
  way to pick a hot-but-not-freak design day (common practice in design-day
  selection);
* ``"date"`` — a stated calendar date, checked to be in the file.

Ties go to the earliest day, so the choice is reproducible.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.errors import InputError
from walkcomfort.routes.weather import WeatherFile

RULES = ("hottest", "percentile", "date")


@dataclass(frozen=True)
class DesignDay:
    """The chosen day and why.

    Attributes
    ----------
    date : datetime.date
        Calendar date (file's local standard time; in the file's year for typical years).
    t_max_c : float
        Daily maximum air temperature on that day [°C].
    rule : str
        The rule used; ``detail`` says its parameters and the target value.
    """

    date: object
    t_max_c: float
    rule: str
    detail: str

    def as_dict(self) -> dict:
        return {"date": str(self.date), "t_max_c": round(self.t_max_c, 2), "rule": self.rule, "detail": self.detail}


def daily_max_temperature(weather: WeatherFile) -> pd.Series:
    """Daily maximum air temperature [°C] by calendar day in the file's own time (local standard or UTC).

    A temperature stamped at an interval's end (EPW, TMY) is assigned to the day of that
    interval's start, so 24:00 closes the day it ends; instants (PVGIS, NSRDB) belong to
    their own day.
    """
    d = weather.data
    off = pd.Timedelta(hours=weather.meta["utc_offset_h"])
    t = weather.meta["time"]
    # a value stamped at an interval's end belongs to the day the interval starts in
    back = pd.Timedelta(seconds=t["interval_s"]) if t["label"] == "interval_end" else pd.Timedelta(0)
    start_local = d.index.tz_localize(None) + off - back
    s = pd.Series(d[C.T_AIR_C].to_numpy(float), index=start_local)
    out = s.groupby(start_local.normalize()).max()
    out.index = out.index.date
    out.index.name = "date"
    out.name = "t_max_c"
    return out.dropna()


def parse_months(months) -> tuple[int, ...] | None:
    """``"6-8"``, ``"6,7,8"``, ``"12-2"`` (wrapping) or an iterable -> months 1…12."""
    if months is None:
        return None
    if isinstance(months, str):
        text = months.strip()
        try:
            if "-" in text:
                a, b = (int(x) for x in text.split("-"))
                months = list(range(a, b + 1)) if a <= b else list(range(a, 13)) + list(range(1, b + 1))
            else:
                months = [int(x) for x in text.split(",") if x.strip()]
        except ValueError:
            raise InputError(f"months {text!r} are not understood", fix="write e.g. 6-8 or 6,7,8") from None
    months = tuple(int(m) for m in months)
    if not months or any(not 1 <= m <= 12 for m in months):
        raise InputError(f"months {months!r} must be within 1…12", fix="write e.g. 6-8")
    return months


def design_day(weather: WeatherFile, rule: str = "hottest", percentile: float | None = None,
               months=None, date=None) -> DesignDay:
    """Choose a design day from a weather file.

    Parameters
    ----------
    weather : WeatherFile
        The hourly file.
    rule : {"hottest", "percentile", "date"}
        How to choose (see module docs).
    percentile : float, optional
        For ``"percentile"``: p in 0…100 (e.g. 95).
    months : str or iterable of int, optional
        The season, e.g. ``"6-8"``; default the whole year.
    date : date-like, optional
        For ``"date"``: the day (the year is ignored for typical-year files).

    Returns
    -------
    DesignDay
    """
    if rule not in RULES:
        raise InputError(f"design-day rule {rule!r} is not known; allowed {list(RULES)}",
                         fix="use hottest, percentile or date")
    tmax = daily_max_temperature(weather)
    months_t = parse_months(months)
    if months_t is not None:
        tmax = tmax[[d.month in months_t for d in tmax.index]]
    if tmax.empty:
        raise InputError(f"no days in months {months_t} in the file", where=weather.path,
                         fix="choose months the file covers")
    season = f"months {','.join(map(str, months_t))}" if months_t else "the whole year"
    if rule == "hottest":
        day = tmax.index[int(np.argmax(tmax.to_numpy()))]
        return DesignDay(day, float(tmax[day]), rule, f"highest daily maximum in {season}")
    if rule == "percentile":
        if percentile is None or not 0.0 <= float(percentile) <= 100.0:
            raise InputError(f"percentile {percentile!r} is not within 0…100", fix="give e.g. --percentile 95")
        target = float(np.percentile(tmax.to_numpy(), float(percentile)))
        day = tmax.index[int(np.argmin(np.abs(tmax.to_numpy() - target)))]
        return DesignDay(day, float(tmax[day]), rule,
                         f"daily maximum closest to the {float(percentile):g}th percentile ({target:.1f} °C) of "
                         f"{len(tmax)} days in {season}")
    if date is None:
        raise InputError("rule 'date' needs a date", fix="give e.g. --design-day 2026-07-15")
    try:
        ts = pd.Timestamp(date)
    except (ValueError, TypeError):
        raise InputError(f"design date {date!r} is not a date", fix="write YYYY-MM-DD") from None
    matches = [d for d in tmax.index if (d.month, d.day) == (ts.month, ts.day)
               and (weather.typical or d.year == ts.year)]
    if not matches:
        raise InputError(f"date {ts.date()} is not in the file" + (f" within {season}" if months_t else ""),
                         where=weather.path, fix="choose a date the file covers")
    day = matches[0]
    return DesignDay(ts.date() if not weather.typical else day, float(tmax[day]), rule, f"stated date {ts.date()}")
