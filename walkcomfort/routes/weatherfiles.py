"""Weather files as designers download them, read through :mod:`pvlib.iotools`.

:func:`read_weather_file` opens a file, decodes it and calls :func:`parse_weather`,
which recognises the format from the content (:func:`detect_format`; the extension is
never trusted alone) and returns one table in our columns and units with one
description of its time convention.

Formats (:data:`FORMATS`; pvlib's reader in brackets):

============== ===================================== ============================ ==========
name           what                                  stamps                       zone
============== ===================================== ============================ ==========
epw            EnergyPlus weather (``read_epw``)     hour-ending means (irr.)     local std.
tmy3           NREL TMY3 CSV (``read_tmy3``)         hour-ending means (irr.)     local std.
tmy2           NREL TMY2 (``read_tmy2``)             hour-ending means (irr.)     local std.
pvgis-tmy      PVGIS typical year CSV/JSON           instants (+ stated offset)   UTC
               (``read_pvgis_tmy``)
pvgis-hourly   PVGIS hourly series CSV/JSON          instants                     UTC
               (``read_pvgis_hourly``)
nsrdb          NSRDB PSM3/PSM4 CSV, single year      instants                     local std.
               or typical (``read_nsrdb_psm4``)
midc           NREL MIDC station CSV (``read_midc``) one-minute samples           as named
surfrad        SURFRAD station (``read_surfrad``)    one- or three-minute samples UTC
crn            USCRN sub-hourly (``read_crn``)       5-min means, interval end    UTC
============== ===================================== ============================ ==========

Sources of the conventions: EPW/TMY2/TMY3 irradiance is the energy received during
the 60 minutes before the stamp and other values are at the stamp, in local standard
time (pvlib's ``read_tmy3``/``read_epw`` documentation, after Wilcox & Marion 2008,
NREL/TP-581-43156); USCRN values are five-minute averages labelled by the interval end,
wind at 1.5 m (pvlib's ``read_crn`` documentation). The PVGIS typical year states an
"irradiance time offset" [h]: irradiance belongs to the stamp plus that offset
(read off the files: the CSV says +0.1761 h on HH:00 stamps, its EPW twin −0.8239 h on
hour-ending stamps, i.e. the same HH:10:34). PVGIS hourly stamps (HH:10) and NSRDB
stamps are taken as instants (from memory). Wind heights: 10 m for EPW/TMY and PVGIS
(WMO standard exposure; PVGIS names its column WS10m), 2 m for NSRDB (from memory),
10 m for SURFRAD (from memory); MIDC columns state the height in their name.

Encodings: strict UTF-8 first (a byte-order mark is allowed); then, only where the
format documents one, its own encoding (TMY3: ISO-8859-1, the encoding pvlib documents
for SolarAnywhere TMY3 files); the encoding used is recorded. Anything else is refused
with the line of the first undecodable byte — never a silent guess.
"""

from __future__ import annotations

import io
import json
import os
import re
import warnings
from pathlib import Path

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.errors import DataQualityWarning, InputError, where
from walkcomfort.routes.weatherformats import FORMATS, IRRADIANCE_COLUMNS, LOADERS, FormatSpec, Loaded, Site

__all__ = ["FORMATS", "IRRADIANCE_COLUMNS", "TYPICAL_YEAR", "WEATHER_COLUMNS", "FormatSpec", "Site", "decode_text",
           "describe_time", "detect_format", "parse_weather", "read_weather_file", "sniff_file"]

#: Reference year typical-year files are coerced to (not a leap year).
TYPICAL_YEAR = 2001
#: Our weather columns: °C, %, m s⁻¹ (at the source's wind height), hPa, W m⁻².
WEATHER_COLUMNS = (C.T_AIR_C, C.RH_PCT, C.WIND_MS, C.PRESSURE_HPA, C.GHI_WM2, C.DNI_WM2, C.DHI_WM2)
_IRR_RANGE = (0.0, 1500.0)
#: Irradiance down to this value [W m⁻²] is read as 0 (pyranometer night-time offset).
NIGHT_OFFSET_WM2 = -25.0
#: Bytes read to recognise a format.
SNIFF_BYTES = 4096


# --------------------------------------------------------------------------- detection
_TMY2_HEAD = re.compile(r"^\s*\d{5}\s+\S.*\s[NS]\s*\d+\s+\d+\s+[EW]\s*\d+\s+\d+\s+-?\d+\s*$")
_SURFRAD_LINE2 = re.compile(r"^\s*-?\d+\.\d+\s+-?\d+\.\d+\s+-?\d+\s*m\s+version\s+\d+", re.I)
_CRN_LINE = re.compile(r"^\d{5} \d{8} \d{4} \d{8} \d{4} ")


def detect_format(head: str) -> str | None:
    """The format name of a file from its first characters, or None (not a known weather file).

    Parameters
    ----------
    head : str
        The file's first few kilobytes (decoded byte-for-byte; only ASCII markers are used).
    """
    text = head.lstrip("\ufeff")
    lines = text.splitlines()
    first = lines[0] if lines else ""
    second = lines[1] if len(lines) > 1 else ""
    stripped = text.lstrip()
    if stripped.startswith("{"):
        if '"tmy_hourly"' in text or '"months_selected"' in text:
            return "pvgis-tmy"
        if '"hourly"' in text:
            return "pvgis-hourly"
        return None
    checks = (
        (first.upper().startswith("LOCATION,"), "epw"),
        (second.startswith("Date (MM/DD/YYYY)"), "tmy3"),
        (first.startswith("Source,Location ID"), "nsrdb"),
        (first.startswith("DATE (MM/DD/YYYY)"), "midc"),
        (bool(_SURFRAD_LINE2.match(second)), "surfrad"),
        (bool(_CRN_LINE.match(first)), "crn"),
        (bool(_TMY2_HEAD.match(first)), "tmy2"),
    )
    for ok, name in checks:
        if ok:
            return name
    if first.startswith("Latitude (decimal degrees)"):
        return "pvgis-tmy" if re.search(r"^time\(UTC\),", text, re.M) or "months_selected" in text.lower() or \
            re.search(r"^month,year", text, re.M) else "pvgis-hourly"
    return None


def sniff_file(path: str | os.PathLike) -> str | None:
    """:func:`detect_format` on a file's first bytes (decoded as Latin-1, which never fails)."""
    with open(path, "rb") as fh:
        return detect_format(fh.read(SNIFF_BYTES).decode("latin-1"))


def decode_text(raw: bytes, fmt: str, source) -> tuple[str, str]:
    """Bytes -> text: strict UTF-8 first, then the format's documented encodings.

    Returns
    -------
    (text, encoding)
        The encoding actually used.

    Raises
    ------
    InputError
        Naming the line of the first undecodable byte when no documented encoding fits.
    """
    try:
        return raw.decode("utf-8-sig"), "utf-8"
    except UnicodeDecodeError as exc:
        first_bad = exc
    for enc in FORMATS[fmt].encodings:
        try:
            return raw.decode(enc), enc
        except UnicodeDecodeError:
            continue
    line = raw[:first_bad.start].count(b"\n") + 1
    allowed = " or ".join(["UTF-8", *FORMATS[fmt].encodings])
    raise InputError(f"byte 0x{raw[first_bad.start]:02x} is not {allowed} text, the encodings a "
                     f"{FORMATS[fmt].label} file may use", where=where(source, line=line),
                     fix="re-save the file as UTF-8 (the character in that line is likely a symbol such as ° or ®)")


# --------------------------------------------------------------------------- reading
def read_weather_file(path: str | os.PathLike, typical: bool | None = None,
                      fmt: str | None = None) -> tuple[pd.DataFrame, dict]:
    """Read a weather file of any format in :data:`FORMATS` into our columns.

    Parameters
    ----------
    path : path
        The file.
    typical : bool, optional
        Treat it as a typical year (coerce to :data:`TYPICAL_YEAR`) or as an actual
        period; default: what the format is (and, for NSRDB, whether the file mixes years).
    fmt : str, optional
        Format name (``--weather-format``); default: recognised from the content.

    Returns
    -------
    data : DataFrame
        Index: the rows' stamps, tz-aware UTC (the interval end for hour-ending formats).
        Columns :data:`WEATHER_COLUMNS` that the file holds (°C, %, m s⁻¹, hPa, W m⁻²);
        values outside physical ranges or missing become NaN and are listed in the
        quarantine.
    meta : dict
        ``format``, ``format_label``, ``site`` (:class:`Site`), ``utc_offset_h`` (the
        file's standard time), ``time`` (``zone, label, interval_s, irradiance,
        irradiance_offset_s, met``), ``wind_height_m``, ``wind_height_source``,
        ``missing`` (our columns the file lacks), ``units`` (conversions made),
        ``encoding``, ``typical``, ``quarantine`` (DataFrame ``source, file, row,
        reason, raw``), ``notices``, ``path``.
    """
    path = Path(path)
    if not path.is_file():
        raise InputError("weather file does not exist", where=path, fix="check the path")
    raw = path.read_bytes()
    found = detect_format(raw[:SNIFF_BYTES].decode("latin-1"))
    if fmt is None:
        fmt = found
        if fmt is None:
            raise InputError("the content is not a weather file format this tool knows "
                             f"({', '.join(FORMATS)})", where=path,
                             fix="give an EPW, TMY2/TMY3, PVGIS, NSRDB, MIDC, SURFRAD or USCRN file, name the "
                                 "format with --weather-format, or give a logger CSV with --weather-map")
    elif fmt not in FORMATS:
        raise InputError(f"weather format {fmt!r} is not known; allowed {list(FORMATS)}", where="--weather-format",
                         fix="choose one of the listed names")
    text, encoding = decode_text(raw, fmt, path)
    data, meta = parse_weather(io.StringIO(text), fmt, typical=typical, source=str(path))
    meta["encoding"] = encoding
    meta["detected_format"] = found
    if encoding != "utf-8":
        meta["notices"].append(f"{path.name} is not UTF-8; read as {encoding}, the encoding the {FORMATS[fmt].label} "
                               "format documents")
    if found is not None and found != fmt:
        meta["notices"].append(f"{path.name} looks like {FORMATS[found].label} but was read as "
                               f"{FORMATS[fmt].label} as asked")
    return data, meta


def parse_weather(buffer: io.TextIOBase, fmt: str, typical: bool | None = None,
                  source: str = "weather buffer") -> tuple[pd.DataFrame, dict]:
    """Parse weather text of a known format (see :func:`read_weather_file` for the result)."""
    if fmt not in FORMATS:
        raise InputError(f"weather format {fmt!r} is not known; allowed {list(FORMATS)}", where=source,
                         fix="choose one of the listed names")
    spec = FORMATS[fmt]
    loader = LOADERS[fmt]
    try:
        loaded = loader(buffer)
    except InputError:
        raise
    except Exception as exc:  # pvlib raises many kinds on malformed files
        raise InputError(f"cannot read it as {spec.label} ({type(exc).__name__}: "
                         f"{' '.join(str(exc).split())[:160]})", where=source,
                         fix="check the file is a complete, unmodified download, or name its format with "
                             "--weather-format") from None
    return _normalise(loaded, spec, typical, source)


# --------------------------------------------------------------------------- normalisation
def _utc_offset_h(idx: pd.DatetimeIndex) -> float:
    off = idx[:1].tz_localize(None) - idx[:1].tz_convert("UTC").tz_localize(None) if len(idx) else []
    return float(off[0] / pd.Timedelta(hours=1)) if len(off) else 0.0


def _interval_s(idx: pd.DatetimeIndex) -> float:
    if len(idx) < 2:
        return 3600.0
    d = np.diff(idx.as_unit("ns").asi8) / 1e9
    d = d[d > 0]
    return float(np.median(d)) if d.size else 3600.0


def _is_typical(spec: FormatSpec, local: pd.DatetimeIndex, typical: bool | None) -> bool:
    if typical is not None:
        return bool(typical)
    if spec.typical is not None:
        return spec.typical
    # several source years in one file (a month each) = a typical year; the last stamp of an
    # hour-ending year may fall on 1 January of the next year
    years = pd.Series(local.year)
    return years.nunique() > 2 or (years.nunique() == 2 and (local.month != 1).sum() > 0
                                   and pd.Series(local.month).groupby(years.to_numpy()).nunique().min() > 1)


def _coerce_year(local: pd.DatetimeIndex, shift: pd.Timedelta,
                 interval_s: float) -> tuple[pd.DatetimeIndex, np.ndarray]:
    """Move local stamps to :data:`TYPICAL_YEAR` by the start of what they stand for; drop 29 February.

    A complete hourly typical year (8760 rows in calendar order, as the formats write
    them) is placed by position, hour after hour, so a source month from a leap year
    cannot shift a row across 29 February.
    """
    start = local - shift
    months = np.asarray(start.month)
    if len(local) == 8760 and interval_s == 3600.0 and (np.diff(months[:-1]) >= 0).all():
        base = pd.Timestamp(f"{TYPICAL_YEAR}-01-01") + (pd.Timedelta(0) if shift == pd.Timedelta(0) else shift)
        return pd.DatetimeIndex(base + pd.to_timedelta(np.arange(8760), unit="h")), np.ones(8760, bool)
    keep = ~((start.month == 2) & (start.day == 29))
    s = start[keep]
    moved = pd.to_datetime(pd.DataFrame({"year": TYPICAL_YEAR, "month": s.month, "day": s.day, "hour": s.hour,
                                         "minute": s.minute, "second": s.second}))
    return pd.DatetimeIndex(moved) + shift, np.asarray(keep)


def _normalise(loaded: Loaded, spec: FormatSpec, typical: bool | None, source: str) -> tuple[pd.DataFrame, dict]:
    data = loaded.data
    if not len(data):
        raise InputError(f"the {spec.label} file holds no data rows", where=source, fix="give a complete file")
    idx = pd.DatetimeIndex(data.index)
    if idx.tz is None:
        idx = idx.tz_localize("UTC")
    idx = idx + pd.Timedelta(hours=loaded.label_shift_h)
    offset_h = _utc_offset_h(idx)
    local = idx.tz_localize(None)  # wall time in the file's own zone
    interval_s = _interval_s(idx)
    is_typical = _is_typical(spec, local, typical)
    notices = list(loaded.notices)
    if is_typical:
        shift = pd.Timedelta(seconds=interval_s) if spec.label_kind == "interval_end" else pd.Timedelta(0)
        local, keep = _coerce_year(local, shift, interval_s)
        if not keep.all():
            notices.append(f"{int((~keep).sum())} rows on 29 February left out (the typical year is {TYPICAL_YEAR})")
        data = data.iloc[np.flatnonzero(keep)]
    utc = (local - pd.Timedelta(hours=offset_h)).tz_localize("UTC")
    data = data.set_axis(utc.rename("interval_end" if spec.label_kind == "interval_end" else "time"))
    data, quarantine = _quarantine(data, source)
    if data.index.has_duplicates or not data.index.is_monotonic_increasing:
        order = np.argsort(data.index.asi8, kind="stable")
        data = data.iloc[order]
        data = data[~data.index.duplicated(keep="first")]
    site = loaded.site
    if not (np.isfinite(site.lat) and np.isfinite(site.lon)):
        site = None
    wind_h = loaded.wind_height_m if loaded.wind_height_m is not None else spec.wind_height_m
    wind_src = loaded.wind_height_source or spec.wind_height_source
    missing = [c for c in WEATHER_COLUMNS if c not in data.columns or data[c].isna().all()]
    for c in WEATHER_COLUMNS:
        if c not in data.columns:
            data[c] = np.nan
    data = data[list(WEATHER_COLUMNS)]
    time = {"zone": spec.zone, "utc_offset_h": offset_h, "label": spec.label_kind, "interval_s": interval_s,
            "irradiance": loaded.irradiance or spec.irradiance, "irradiance_offset_s": loaded.irradiance_offset_s,
            "met": spec.met}
    meta = {"format": spec.name, "format_label": spec.label, "site": site, "utc_offset_h": offset_h,
            "time": time, "wind_height_m": wind_h, "wind_height_source": wind_src, "missing": missing,
            "units": loaded.units, "typical": is_typical, "quarantine": quarantine, "notices": notices,
            "path": source, "encoding": "utf-8"}
    return data, meta


def _ranges() -> dict:
    r = {k: C.PHYSICAL_RANGES[k] for k in (C.T_AIR_C, C.RH_PCT, C.WIND_MS, C.PRESSURE_HPA)}
    for k in IRRADIANCE_COLUMNS:
        r[k] = _IRR_RANGE
    return r


def _quarantine(data: pd.DataFrame, source: str) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Values outside physical ranges or missing -> NaN, each listed with its row and reason."""
    data = data.copy()
    qrows = []
    # thermopile pyranometers read slightly below zero at night (thermal offset): that is zero
    # irradiance, not a bad value (common practice)
    for col in IRRADIANCE_COLUMNS:
        if col in data.columns:
            v = data[col].to_numpy(float)
            with np.errstate(invalid="ignore"):
                data[col] = np.where((v < 0) & (v >= NIGHT_OFFSET_WM2), 0.0, v)
    for col, (lo, hi) in _ranges().items():
        if col not in data.columns or data[col].isna().all():
            continue
        v = data[col].to_numpy(float)
        with np.errstate(invalid="ignore"):
            bad = ~np.isfinite(v) | (v < lo) | (v > hi)
        for i in np.flatnonzero(bad):
            reason = (f"{col} missing in the file" if not np.isfinite(v[i]) else
                      f"{col} {v[i]!r} outside {lo}…{hi} (missing-value marker?)")
            qrows.append({"source": "weather_file", "file": source, "row": int(i), "reason": reason, "raw": repr(v[i])})
        data.loc[bad, col] = np.nan
    quarantine = pd.DataFrame(qrows, columns=["source", "file", "row", "reason", "raw"])
    if len(quarantine):
        warnings.warn(f"{source}: {len(quarantine)} weather values missing or outside physical ranges were set "
                      "missing and are interpolated across (see metadata['quarantine'])", DataQualityWarning,
                      stacklevel=4)
    return data, quarantine


def describe_time(meta: dict) -> dict:
    """The time convention of a read file, for provenance (JSON-ready)."""
    t = dict(meta["time"])
    t["format"] = meta["format"]
    t["typical"] = bool(meta["typical"])
    t["encoding"] = meta.get("encoding", "utf-8")
    t["units"] = dict(meta.get("units", {}))
    t["wind_height_m"] = meta.get("wind_height_m")
    t["wind_height_source"] = meta.get("wind_height_source")
    return json.loads(json.dumps(t, default=str))
