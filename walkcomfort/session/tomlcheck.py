"""Checks of values read from a TOML manifest: each failure is one line naming the key and the fix.

Shared by :mod:`walkcomfort.session.manifest` and :mod:`walkcomfort.session.limits`.
"""

from __future__ import annotations

import datetime as _dt
import difflib
import math
import re
from pathlib import Path, PurePosixPath, PureWindowsPath
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

import pandas as pd

from walkcomfort.errors import InputError

# a date and a time of day (pandas alone would read "10:00" as today at 10:00)
_ISO_DATETIME = re.compile(r"^\d{4}-\d{2}-\d{2}[T ]\d{2}:\d{2}")
_CONTROL = re.compile(r"[\x00-\x1f\x7f]")


def safe_path(folder: Path, rel: str, where: str) -> Path:
    """Resolve ``rel`` inside ``folder``; refuse absolute paths, ``..`` and symlinks leading out."""
    if not rel or rel.strip() != rel:
        raise InputError(f"path {rel!r} is empty or has surrounding spaces", where=where, fix="write the path exactly")
    if _CONTROL.search(rel):
        raise InputError(f"path {rel!r} holds a control character (a NUL byte or a line break)", where=where,
                         fix="retype the path: letters, digits, '/', '-', '_' and '.'")
    if PurePosixPath(rel).is_absolute() or PureWindowsPath(rel).is_absolute() or PureWindowsPath(rel).drive:
        raise InputError(f"path '{rel}' is absolute", where=where,
                         fix="write paths relative to the session folder and keep the files inside it")
    parts = PurePosixPath(rel.replace("\\", "/")).parts
    if ".." in parts:
        raise InputError(f"path '{rel}' leaves the session folder ('..')", where=where,
                         fix="copy the file into the session folder and give its relative path")
    base = folder.resolve()
    target = (base / Path(*parts)).resolve()
    if target != base and base not in target.parents:
        raise InputError(f"path '{rel}' resolves outside the session folder (a symlink out)", where=where,
                         fix="copy the file into the session folder instead of linking to it")
    return folder / Path(*parts)


def no_unknown(table: dict, allowed, m: str, w: str) -> None:
    for key in table:
        if key not in allowed:
            hint = suggest(key, allowed)
            raise InputError(f"unknown key '{key}'" + (f" in {w}" if w else ""), where=f"{m} {w} {key}".replace("  ", " "),
                             fix=hint or f"allowed keys: {', '.join(allowed)}")


def suggest(word: str, options) -> str | None:
    close = difflib.get_close_matches(str(word), [str(o) for o in options], n=1, cutoff=0.6)
    return f"use '{close[0]}' (the closest known name)" if close else None


def table(data: dict, key: str, m: str, required: bool = False) -> dict:
    if key not in data:
        if required:
            raise InputError(f"missing [{key}] table", where=m, fix=f"add a [{key}] table (see docs/formats/session-manifest.md)")
        return {}
    v = data[key]
    if not isinstance(v, dict):
        raise InputError(f"{key} must be a table", where=f"{m} {key}", fix=f"write it as [{key}]")
    return v


def string(t: dict, key: str, m: str, w: str, required: bool = False) -> str | None:
    if key not in t:
        if required:
            raise InputError(f"missing key '{key}'", where=f"{m} {w}", fix=f'add {key} = "..."')
        return None
    v = t[key]
    if not isinstance(v, str):
        raise InputError(f"{key} is {v!r}, expected text", where=f"{m} {w} {key}", fix=f'quote it: {key} = "{v}"')
    if required and not v.strip():
        raise InputError(f"{key} is empty", where=f"{m} {w} {key}", fix=f"give {key} a value")
    return v


def str_table(t: dict, key: str, m: str, w: str) -> dict[str, str]:
    v = t.get(key, {})
    if not isinstance(v, dict) or not all(isinstance(x, str) for x in v.values()):
        raise InputError(f"{key} must be a table of text values", where=f"{m} {w} {key}",
                         fix=f'write [source.{key}] with lines like t_air = "..."')
    return dict(v)


def number(t: dict, key: str, m: str, w: str, lo: float, hi: float) -> float:
    v = t[key]
    if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
        raise InputError(f"{key} is {v!r}, expected a number", where=f"{m} {w} {key}", fix=f"write {key} = <number>")
    if not lo <= v <= hi:
        raise InputError(f"{key} = {v} is outside the plausible range {lo}…{hi}", where=f"{m} {w} {key}",
                         fix="check the value and its unit (the key's suffix)")
    return float(v)


def zone(name: str, where: str) -> None:
    try:
        ZoneInfo(name)
    except (ZoneInfoNotFoundError, ValueError, TypeError):
        raise InputError(f"time zone '{name}' is not an IANA zone name", where=where,
                         fix="write a name such as \"Europe/Madrid\" or \"America/Phoenix\"") from None


def manifest_time(v, tz, where: str, required: bool = False) -> pd.Timestamp | None:
    """A manifest time (TOML datetime or ISO text) as UTC; naive values are in the session zone."""
    if v is None:
        if required:
            raise InputError("missing time", where=where, fix='write an ISO time such as "2026-07-14T10:00:00"')
        return None
    if isinstance(v, _dt.datetime):
        ts = pd.Timestamp(v)
    elif isinstance(v, str):
        try:
            if not _ISO_DATETIME.match(v.strip()):
                raise ValueError(v)
            ts = pd.Timestamp(v)
        except (ValueError, TypeError):
            raise InputError(f"time '{v}' is not an ISO 8601 date and time", where=where,
                             fix='write e.g. "2026-07-14T10:00:00" (local) or "2026-07-14T08:00:00Z"') from None
        if ts is pd.NaT:
            raise InputError(f"time '{v}' is empty", where=where, fix="give a date and time")
    else:
        raise InputError(f"time {v!r} is not a date and time", where=where,
                         fix='write e.g. "2026-07-14T10:00:00" (date and time, not only a time of day)')
    if ts.tzinfo is None:
        try:
            ts = ts.tz_localize(tz, ambiguous="raise", nonexistent="raise")
        except Exception:
            raise InputError(f"local time '{v}' does not exist or is ambiguous (daylight-saving change)",
                             where=where, fix="write it with its UTC offset, e.g. '2026-10-25T02:30:00+01:00'") from None
    return ts.tz_convert("UTC")
