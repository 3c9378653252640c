"""Times that cannot be misread: epoch units, numeric HHMM, day of year, and patterns that drop digits.

Field loggers write time in a few conventions (common practice):

- ISO 8601 text (``2026-07-14 10:00:05``), or a strftime pattern declared in the manifest;
- a Unix epoch number, in seconds, milliseconds or microseconds (``time_format = "epoch_s"``,
  ``"epoch_ms"``, ``"epoch_us"``); the unit is declared, and a value whose size belongs to
  another unit (a 13-digit millisecond count declared as seconds) is refused, never guessed;
- separate columns, one ``time_format`` entry per column: a date pattern (``"%Y-%m-%d"``),
  ``"YEAR"``, ``"DOY"`` (day of year, 1 = 1 January; a fraction is the time of day),
  ``"HHMM"`` (hour·100 + minute as an integer, so 01:20 is ``120`` and midnight ``0``;
  ``2400`` is the end of the day) or ``"HHMMSS"`` (hour·10000 + minute·100 + second).
  Array-based data loggers commonly write Year, DOY and HHMM columns this way.

A pattern whose codes run together without a separator (``%H%M``) reads ``120`` as 12:00
by dropping a digit; such text is refused with the ``HHMM`` fix, and so are plain numbers in a
time column read with the default ISO 8601 format.
"""

from __future__ import annotations

import re

import numpy as np
import pandas as pd

from walkcomfort.errors import InputError
from walkcomfort.errors import where as _where

#: declared epoch unit -> (pandas unit, plausible range of values: 1973 … 2100 in that unit)
EPOCH_UNITS = {"epoch_s": ("s", 1e8, 4.2e9), "epoch_ms": ("ms", 1e11, 4.2e12), "epoch_us": ("us", 1e14, 4.2e15)}
#: tokens allowed in a per-column ``time_format`` list (besides strftime patterns and "ISO8601")
PART_TOKENS = ("YEAR", "DOY", "HHMM", "HHMMSS")
_DATE_CODES = ("%Y", "%y", "%m", "%d", "%j", "%b", "%B", "%F", "%D")
_NUM_CODE = r"%[YmdHMSjyIf]"
_ADJACENT = re.compile(f"{_NUM_CODE}{_NUM_CODE}")
_PADDED = {"%Y": r"\d{4}", "%m": r"\d{2}", "%d": r"\d{2}", "%H": r"\d{2}", "%M": r"\d{2}", "%S": r"\d{2}",
           "%y": r"\d{2}", "%j": r"\d{3}", "%I": r"\d{2}", "%f": r"\d{1,9}"}
_DIGITS = re.compile(r"^\d+$")


def is_date_part(fmt: str) -> bool:
    """Whether a per-column entry of ``time_format`` gives (part of) the date."""
    return fmt in ("YEAR", "DOY", "ISO8601") or any(c in fmt for c in _DATE_CODES)


def check_time_format(fmt, n_columns: int, where: str):
    """Validate a manifest ``time_format`` (text or one entry per time column); returns it normalised."""
    if fmt is None or isinstance(fmt, str):
        if isinstance(fmt, str) and fmt in PART_TOKENS:
            raise InputError(f"time_format = {fmt!r} describes one column of several",
                             where=where, fix='give one entry per time column, e.g. time_format = ["%Y-%m-%d", "HHMM"] '
                                              'with columns.time = ["Date", "Time"]')
        return fmt
    if not isinstance(fmt, list) or not all(isinstance(x, str) and x for x in fmt):
        raise InputError(f"time_format = {fmt!r} must be text or a list of text", where=where,
                         fix='write time_format = "%d/%m/%Y %H:%M" or ["YEAR", "DOY", "HHMM"]')
    if len(fmt) != n_columns:
        raise InputError(f"time_format has {len(fmt)} entries for {n_columns} time column(s)", where=where,
                         fix="give one entry per column listed in columns.time")
    bad = [x for x in fmt if x not in PART_TOKENS and x != "ISO8601" and "%" not in x]
    if bad:
        raise InputError(f"time_format entry {bad[0]!r} is neither a strftime pattern nor one of "
                         f"{', '.join(PART_TOKENS)}", where=where, fix="use a pattern with % codes or a listed token")
    if "DOY" in fmt and "YEAR" not in fmt:
        raise InputError("time_format has DOY but no YEAR column", where=where,
                         fix='add the year column: columns.time = ["Year", "DOY", "HHMM"], time_format = '
                             '["YEAR", "DOY", "HHMM"]')
    if not any(is_date_part(x) for x in fmt):
        raise InputError("time_format gives a time of day but no date", where=where,
                         fix="add the date column to columns.time and its pattern to time_format")
    return tuple(fmt)


# ------------------------------------------------------------------------------------------------
def parse_epoch(text: pd.Series, fmt: str, where: str, lines=None) -> tuple[np.ndarray, np.ndarray]:
    """Epoch numbers in the declared unit → naive UTC datetime64[ns] and a reason per row."""
    from walkcomfort.session.readers._common import to_number

    unit, lo, hi = EPOCH_UNITS[fmt]
    vals, bad = to_number(text)
    finite = np.isfinite(vals)
    if finite.any():
        med = float(np.median(np.abs(vals[finite])))
        if not lo <= med <= hi:
            likely = next((k for k, (_, a, b) in EPOCH_UNITS.items() if a <= med <= b), None)
            at = int(np.flatnonzero(finite)[0])
            raise InputError(
                f"time values like {text.iloc[at]!r} are not {fmt[6:]} since 1970 (that would be outside "
                f"1973-2100)" + (f"; their size is that of {likely[6:]}" if likely else ""),
                where=_where(where, line=int(lines[at])) if lines is not None else where,
                fix=f'declare time_format = "{likely}"' if likely else
                "check the time column and its time_format (epoch_s, epoch_ms, epoch_us or a pattern)")
    ok = finite & (np.abs(vals) >= lo / 100) & (np.abs(vals) <= hi)
    ns = np.full(len(vals), np.datetime64("NaT", "ns"), dtype="datetime64[ns]")
    scale = {"s": 1e9, "ms": 1e6, "us": 1e3}[unit]
    ns[ok] = (np.round(vals[ok] * scale)).astype(np.int64).view("datetime64[ns]")
    reason = np.where(ok, "", "bad_time").astype(object)
    return ns, reason


def refuse_digit_runs(parts: list[pd.Series], names, fmt, where: str, lines=None) -> None:
    """Refuse time text that a pattern or the ISO 8601 default would read by dropping a digit."""
    for name, s in zip(names, parts, strict=True):
        if fmt in (None, "ISO8601"):
            _refuse_plain_numbers(s, name, len(parts), where, lines)
    if isinstance(fmt, str) and _ADJACENT.search(fmt):
        _refuse_short_runs(_join(parts), fmt, where, lines)


def _refuse_plain_numbers(s: pd.Series, name: str, n_parts: int, where: str, lines) -> None:
    text = s.astype(str).str.strip()
    text = text[text != ""]
    if not len(text) or not text.str.match(_DIGITS).all():
        return
    at = int(text.index[0])
    loc = _where(where, line=int(lines[at])) if lines is not None else where
    width = text.str.len()
    if n_parts > 1 and width.max() <= 4:
        raise InputError(f"time column '{name}' holds plain numbers like {text.iloc[0]!r} (hour and minute run "
                         "together, zeros not padded); a date-time pattern would read '120' as 12:00", where=loc,
                         fix='declare one time_format entry per time column, e.g. ["%Y-%m-%d", "HHMM"]')
    if n_parts == 1:
        guess = "epoch_ms" if width.median() >= 12 else "epoch_s"
        raise InputError(f"time column '{name}' holds plain numbers like {text.iloc[0]!r}, not dates", where=loc,
                         fix=f'declare their unit, e.g. time_format = "{guess}", or give date and time columns')


def _refuse_short_runs(text: pd.Series, fmt: str, where: str, lines) -> None:
    rx = re.compile(_padded_regex(fmt))
    t = text.astype(str).str.strip()
    odd = ~t.str.fullmatch(rx) & (t != "")
    if not odd.any():
        return
    parsed = pd.to_datetime(t[odd], format=fmt, errors="coerce")
    misread = ~parsed.isna()
    if misread.any():
        at = int(parsed.index[np.flatnonzero(misread.to_numpy())[0]])
        raise InputError(f"time {t.iloc[at]!r} has fewer digits than time_format {fmt!r} expects; reading it would "
                         "drop a digit (e.g. '120' as 12:00)",
                         where=_where(where, line=int(lines[at])) if lines is not None else where,
                         fix='put the time of day in its own column and declare it "HHMM" (or "HHMMSS"), e.g. '
                             'time_format = ["%Y-%m-%d", "HHMM"]')


def _padded_regex(fmt: str) -> str:
    out, i = [], 0
    while i < len(fmt):
        code = fmt[i:i + 2]
        if code in _PADDED:
            out.append(_PADDED[code])
            i += 2
        elif fmt[i] == "%":
            out.append(".+?")
            i += 2
        else:
            out.append(re.escape(fmt[i]))
            i += 1
    return "".join(out)


def _join(parts: list[pd.Series]) -> pd.Series:
    out = parts[0].astype(str)
    for p in parts[1:]:
        out = out + " " + p.astype(str)
    return out.str.strip()


# ------------------------------------------------------------------------------------------------
def parse_parts(parts: list[pd.Series], fmts: tuple[str, ...], names, where: str,
                lines=None) -> tuple[np.ndarray, np.ndarray]:
    """Separate date / year / day-of-year / time-of-day columns → naive datetime64[ns] and reasons."""
    n = len(parts[0])
    day = np.full(n, np.datetime64("NaT", "ns"), dtype="datetime64[ns]")   # midnight of the date
    tod = np.zeros(n, dtype=np.int64)                                       # ns since midnight
    bad = np.zeros(n, dtype=bool)
    year = None
    for s, fmt in zip(parts, fmts, strict=True):
        if fmt == "YEAR":
            year, b = _integers(s, 1900, 2200)
            bad |= b
    for s, fmt, name in zip(parts, fmts, names, strict=True):
        if fmt == "YEAR":
            continue
        d, t, b = _one_part(s, fmt, name, year, where, lines)
        if d is not None:
            day = np.where(np.isnat(day), d, day)
        if t is not None:
            tod = tod + t
        bad |= b
    out = day + tod.astype("timedelta64[ns]")
    bad |= np.isnat(out)
    out[bad] = np.datetime64("NaT", "ns")
    return out, np.where(bad, "bad_time", "").astype(object)


def _integers(s: pd.Series, lo: float, hi: float, integer: bool = True):
    from walkcomfort.session.readers._common import to_number

    v, bad = to_number(s.astype(str).str.strip())
    with np.errstate(invalid="ignore"):
        bad = bad | ~np.isfinite(v) | (v < lo) | (v > hi)
        if integer:
            bad |= np.round(v) != v
    return v, bad


def _one_part(s: pd.Series, fmt: str, name: str, year, where: str, lines):
    """(date at midnight or None, ns since midnight or None, bad) for one time column."""
    n = len(s)
    if fmt == "DOY":
        doy, bad = _integers(s, 1, 367, integer=False)
        whole = np.floor(np.where(bad, 1, doy)).astype(np.int64)
        y = np.where(np.isfinite(year), year, 1970).astype(np.int64)
        start = (y - 1970).astype("datetime64[Y]").astype("datetime64[D]")
        day = (start + (whole - 1).astype("timedelta64[D]")).astype("datetime64[ns]")
        # a day of year past the year's end (366 in a common year) is not a date
        bad |= (day.astype("datetime64[Y]").astype(np.int64) + 1970) != y
        frac = np.round((np.where(bad, 0, doy) - whole) * 86400e9).astype(np.int64)
        return day, frac, bad
    if fmt in ("HHMM", "HHMMSS"):
        return None, *_clock_number(s, fmt)
    text = s.astype(str).str.strip()
    refuse_digit_runs([text], [name], fmt, where, lines)
    t = pd.to_datetime(text, format=fmt, errors="coerce")
    vals = t.to_numpy(dtype="datetime64[ns]")
    bad = np.isnat(vals)
    has_date = is_date_part(fmt)
    has_time = fmt == "ISO8601" or any(c in fmt for c in ("%H", "%I", "%M", "%S", "%T", "%R"))
    midnight = vals.astype("datetime64[D]").astype("datetime64[ns]")
    date = midnight if has_date else None
    tod = (vals - midnight).astype(np.int64) if has_time else np.zeros(n, dtype=np.int64)
    tod[bad] = 0
    return date, tod, bad


def _clock_number(s: pd.Series, fmt: str) -> tuple[np.ndarray, np.ndarray]:
    """Numeric HHMM / HHMMSS → ns since midnight (``2400`` / ``240000`` = the end of the day)."""
    v, bad = _integers(s, 0, 2400 if fmt == "HHMM" else 240000)
    x = np.where(bad, 0, v).astype(np.int64)
    if fmt == "HHMM":
        h, m, sec = x // 100, x % 100, np.zeros_like(x)
    else:
        h, m, sec = x // 10000, (x // 100) % 100, x % 100
    bad |= (m > 59) | (sec > 59) | ((h == 24) & ((m > 0) | (sec > 0)))
    ns = ((h * 3600 + m * 60 + sec) * 1_000_000_000).astype(np.int64)
    ns[bad] = 0
    return ns, bad
