"""Weather-file formats: what each one's stamps, units and encodings mean, and its pvlib loader.

Each loader takes a text buffer, calls the format's reader in :mod:`pvlib.iotools`
and returns a :class:`Loaded`: our columns in SI units on the file's own stamps, the
station, the unit conversions made and anything the file says about its time
convention. :mod:`walkcomfort.routes.weatherfiles` recognises, decodes and normalises.
The sources of each convention are given in that module's docstring.
"""

from __future__ import annotations

import io
import re
import tempfile
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from walkcomfort import columns as C

IRRADIANCE_COLUMNS = (C.GHI_WM2, C.DNI_WM2, C.DHI_WM2)


@dataclass(frozen=True)
class FormatSpec:
    """What a weather-file format means by its stamps, units and encoding.

    Attributes
    ----------
    name, label : str
        Short name (``--weather-format``) and a readable one.
    typical : bool or None
        True: always a typical year; False: always an actual period; None: decided from
        the file (several source years in one file = a typical year).
    label_kind : {"interval_end", "instant"}
        What a row's stamp marks.
    irradiance : {"interval_mean", "instant"}
        Irradiance is the mean over the interval before the stamp, or a value at the
        stamp (plus ``irradiance_offset_s``).
    met : {"instant", "interval_mean"}
        Temperature, humidity, wind and pressure: at the stamp, or means over the
        interval before it.
    zone : str
        How the file gives time ("local standard time" or "UTC").
    wind_height_m : float or None
        Documented wind measurement height [m]; None when the file must say.
    wind_height_source : str
        Where that height comes from.
    encodings : tuple of str
        Documented encodings tried after strict UTF-8.
    """

    name: str
    label: str
    typical: bool | None
    label_kind: str
    irradiance: str
    met: str
    zone: str
    wind_height_m: float | None
    wind_height_source: str
    encodings: tuple[str, ...] = ()
    extensions: tuple[str, ...] = field(default=())


_EPW_TMY_NOTE = "10 m, WMO standard exposure of the stations (common practice)"
FORMATS: dict[str, FormatSpec] = {s.name: s for s in (
    FormatSpec("epw", "EPW", True, "interval_end", "interval_mean", "instant", "local standard time", 10.0,
               _EPW_TMY_NOTE, (), (".epw",)),
    FormatSpec("tmy3", "TMY3", True, "interval_end", "interval_mean", "instant", "local standard time", 10.0,
               _EPW_TMY_NOTE, ("iso-8859-1",), (".csv",)),
    FormatSpec("tmy2", "TMY2", True, "interval_end", "interval_mean", "instant", "local standard time", 10.0,
               _EPW_TMY_NOTE, (), (".tm2",)),
    FormatSpec("pvgis-tmy", "PVGIS typical year", True, "instant", "instant", "instant", "UTC", 10.0,
               "10 m (the file's WS10m column)", (), (".csv", ".json")),
    FormatSpec("pvgis-hourly", "PVGIS hourly series", False, "instant", "instant", "instant", "UTC", 10.0,
               "10 m (the file's WS10m column)", (), (".csv", ".json")),
    FormatSpec("nsrdb", "NSRDB PSM", None, "instant", "instant", "instant", "local standard time", 2.0,
               "2 m (NSRDB wind speed, from memory)", (), (".csv",)),
    FormatSpec("midc", "MIDC station", False, "instant", "instant", "instant", "as named in the time column",
               None, "the column name (e.g. '@ 6ft')", (), (".txt", ".csv")),
    FormatSpec("surfrad", "SURFRAD station", False, "instant", "instant", "instant", "UTC", 10.0,
               "10 m tower (from memory)", (), (".dat",)),
    FormatSpec("crn", "USCRN station", False, "interval_end", "interval_mean", "interval_mean", "UTC", 1.5,
               "1.5 m (pvlib read_crn documentation)", (), (".txt",)),
)}


@dataclass
class Site:
    """Where a weather source was measured: latitude, longitude [°], elevation [m]."""

    lat: float
    lon: float
    elev_m: float = 0.0
    name: str = ""


@dataclass
class Loaded:
    """A format loader's result: our columns in SI units on the file's own (tz-aware) stamps."""

    data: pd.DataFrame
    site: Site
    units: dict = field(default_factory=dict)
    notices: list = field(default_factory=list)
    irradiance_offset_s: float = 0.0
    wind_height_m: float | None = None
    wind_height_source: str | None = None
    label_shift_h: float = 0.0  # added to pvlib's stamps to reach what the format's stamp means
    irradiance: str | None = None  # overrides the format's irradiance convention for this file


def _columns(raw: pd.DataFrame, mapping: dict) -> tuple[pd.DataFrame, dict]:
    out = pd.DataFrame(index=raw.index)
    units = {}
    for k, (ours, scale, note) in mapping.items():
        if k in raw.columns:
            out[ours] = pd.to_numeric(raw[k], errors="coerce").to_numpy(float) * scale
            if note:
                units[ours] = note
    return out, units


_EPW_MAP = {"temp_air": (C.T_AIR_C, 1.0, ""), "relative_humidity": (C.RH_PCT, 1.0, ""),
            "wind_speed": (C.WIND_MS, 1.0, ""), "atmospheric_pressure": (C.PRESSURE_HPA, 0.01, "Pa -> hPa"),
            "ghi": (C.GHI_WM2, 1.0, "Wh/m² per hour -> mean W/m²"), "dni": (C.DNI_WM2, 1.0, "Wh/m² per hour -> mean W/m²"),
            "dhi": (C.DHI_WM2, 1.0, "Wh/m² per hour -> mean W/m²")}
_TMY3_MAP = {**{k: v for k, v in _EPW_MAP.items() if k != "atmospheric_pressure"},
             "pressure": (C.PRESSURE_HPA, 1.0, "mbar = hPa")}
# TMY2 values are kept in the file's units by pvlib: tenths of °C and of m/s (TMY2 manual, from memory)
_TMY2_MAP = {"DryBulb": (C.T_AIR_C, 0.1, "tenths of °C -> °C"), "RHum": (C.RH_PCT, 1.0, ""),
             "Wspd": (C.WIND_MS, 0.1, "tenths of m/s -> m/s"), "Pressure": (C.PRESSURE_HPA, 1.0, "mbar = hPa"),
             "GHI": (C.GHI_WM2, 1.0, "Wh/m² per hour -> mean W/m²"), "DNI": (C.DNI_WM2, 1.0, "Wh/m² per hour -> mean W/m²"),
             "DHI": (C.DHI_WM2, 1.0, "Wh/m² per hour -> mean W/m²")}
_PVGIS_MAP = {"temp_air": (C.T_AIR_C, 1.0, ""), "relative_humidity": (C.RH_PCT, 1.0, ""),
              "wind_speed": (C.WIND_MS, 1.0, ""), "pressure": (C.PRESSURE_HPA, 0.01, "Pa -> hPa"),
              "ghi": (C.GHI_WM2, 1.0, ""), "dni": (C.DNI_WM2, 1.0, ""), "dhi": (C.DHI_WM2, 1.0, "")}
_NSRDB_MAP = {"temp_air": (C.T_AIR_C, 1.0, ""), "relative_humidity": (C.RH_PCT, 1.0, ""),
              "wind_speed": (C.WIND_MS, 1.0, ""), "pressure": (C.PRESSURE_HPA, 1.0, "mbar = hPa"),
              "ghi": (C.GHI_WM2, 1.0, ""), "dni": (C.DNI_WM2, 1.0, ""), "dhi": (C.DHI_WM2, 1.0, "")}
_SURFRAD_MAP = {"temp_air": (C.T_AIR_C, 1.0, ""), "relative_humidity": (C.RH_PCT, 1.0, ""),
                "wind_speed": (C.WIND_MS, 1.0, ""), "pressure": (C.PRESSURE_HPA, 1.0, "mbar = hPa"),
                "ghi": (C.GHI_WM2, 1.0, ""), "dni": (C.DNI_WM2, 1.0, ""), "dhi": (C.DHI_WM2, 1.0, "")}
_CRN_MAP = {"temp_air": (C.T_AIR_C, 1.0, ""), "relative_humidity": (C.RH_PCT, 1.0, ""),
            "wind_speed": (C.WIND_MS, 1.0, ""), "ghi": (C.GHI_WM2, 1.0, "")}


def _via_tempfile(buffer: io.TextIOBase, reader, suffix: str):
    """Run a pvlib reader that accepts only a file name on the buffer's text."""
    with tempfile.TemporaryDirectory() as d:
        p = Path(d) / f"weather{suffix}"
        p.write_text(buffer.read(), encoding="utf-8")
        return reader(str(p))


def _load_epw(buffer) -> Loaded:
    from pvlib import iotools

    text = buffer.read()
    raw, meta = iotools.read_epw(io.StringIO(text))
    data, units = _columns(raw, _EPW_MAP)
    site = Site(float(meta["latitude"]), float(meta["longitude"]), float(meta.get("altitude", 0.0)),
                str(meta.get("city", "")).strip('" '))
    # an EPW written by PVGIS states in a comment when its irradiance really belongs
    # (e.g. "-0.8239" h before the hour-ending stamp): instants, not hour means
    m = _EPW_OFFSET.search("\n".join(text.splitlines()[:8]))
    if m:
        # PVGIS states that offset against the file's hour number read as UTC (h:00Z), while its
        # values sit at the instants its CSV/JSON twins give, (h-1):00Z = our stamp when the
        # LOCATION zone is +1; in general the irradiance instant is our UTC stamp + zone + offset
        # (checked on the twins of one PVGIS download: the same values, the same instants)
        units.update({k: "instant at the stamp plus the file's irradiance time offset" for k in IRRADIANCE_COLUMNS})
        return Loaded(data, site, units, label_shift_h=1.0, irradiance="instant",
                      irradiance_offset_s=(float(m.group(1)) + float(meta.get("TZ", 0.0))) * 3600.0)
    # pvlib labels EPW rows at the hour's start (it subtracts one from the file's hour 1…24)
    return Loaded(data, site, units, label_shift_h=1.0)


_EPW_OFFSET = re.compile(r"^COMMENTS \d,\s*Irradiance Time Offset \(h\):\s*(-?[\d.]+)", re.M | re.I)


def _load_tmy3(buffer) -> Loaded:
    from pvlib import iotools

    raw, meta = iotools.read_tmy3(buffer, map_variables=True)
    data, units = _columns(raw, _TMY3_MAP)
    return Loaded(data, Site(float(meta["latitude"]), float(meta["longitude"]), float(meta.get("altitude", 0.0)),
                              str(meta.get("Name", "")).strip('" ')), units)


def _load_tmy2(buffer) -> Loaded:
    from pvlib import iotools

    raw, meta = _via_tempfile(buffer, iotools.read_tmy2, ".tm2")
    data, units = _columns(raw, _TMY2_MAP)
    # pvlib labels TMY2 rows at the hour's start, like EPW
    return Loaded(data, Site(float(meta["latitude"]), float(meta["longitude"]), float(meta.get("altitude", 0.0)),
                              str(meta.get("City", "")).strip('" ')), units, label_shift_h=1.0)


def _pvgis_format(buffer, csv_bytes: bool) -> tuple[str, io.IOBase]:
    text = buffer.read()
    if text.lstrip().startswith("{"):
        return "json", io.StringIO(text)
    # pvlib's typical-year CSV parser reads a byte buffer, its hourly one a text buffer
    return "csv", io.BytesIO(text.encode("utf-8")) if csv_bytes else io.StringIO(text)


def _load_pvgis_tmy(buffer) -> Loaded:
    from pvlib import iotools

    kind, buf = _pvgis_format(buffer, csv_bytes=True)
    raw, meta = iotools.read_pvgis_tmy(buf, pvgis_format=kind, map_variables=True)
    inputs = meta.get("inputs") or {}
    loc = inputs.get("location", inputs)
    offset_h = loc.get("irradiance_time_offset", loc.get("irradiance time offset", 0.0)) or 0.0
    data, units = _columns(raw, _PVGIS_MAP)
    site = Site(float(loc["latitude"]), float(loc["longitude"]), float(loc.get("elevation", 0.0)), "PVGIS")
    return Loaded(data, site, units, irradiance_offset_s=float(offset_h) * 3600.0)


def _slope_deg(inputs: dict) -> float | None:
    if "Slope" in inputs:  # CSV: "30 deg."
        m = re.match(r"\s*(-?[\d.]+)", str(inputs["Slope"]))
        return float(m.group(1)) if m else None
    try:
        return float(inputs["mounting_system"]["fixed"]["slope"]["value"])
    except (KeyError, TypeError, ValueError):
        return None


def _load_pvgis_hourly(buffer) -> Loaded:
    from pvlib import iotools

    kind, buf = _pvgis_format(buffer, csv_bytes=False)
    raw, meta = iotools.read_pvgis_hourly(buf, pvgis_format=kind, map_variables=True)
    inputs = meta.get("inputs") or {}
    loc = inputs.get("location", inputs)
    data, units = _columns(raw, _PVGIS_MAP)
    notices = []
    slope = _slope_deg(inputs)
    if C.GHI_WM2 not in data.columns and {"poa_direct", "poa_sky_diffuse"} <= set(raw.columns):
        if slope is not None and abs(slope) < 1e-9:
            # a horizontal "plane of array" is the horizontal: beam + sky diffuse (+ ground, 0 here)
            beam_h = raw["poa_direct"].to_numpy(float)
            diff = raw["poa_sky_diffuse"].to_numpy(float)
            ground = raw.get("poa_ground_diffuse", pd.Series(0.0, index=raw.index)).to_numpy(float)
            elev = np.radians(raw["solar_elevation"].to_numpy(float))
            data[C.GHI_WM2] = beam_h + diff + ground
            data[C.DHI_WM2] = diff
            with np.errstate(divide="ignore", invalid="ignore"):
                data[C.DNI_WM2] = np.where(np.sin(elev) > 0.02, beam_h / np.sin(elev), 0.0)
            units[C.GHI_WM2] = "horizontal plane: Gb(i) + Gd(i) + Gr(i)"
            units[C.DNI_WM2] = "Gb(i) / sin(H_sun)"
        else:
            notices.append(f"the PVGIS series gives irradiance on a plane tilted {slope if slope is not None else '?'}° "
                           "only, not on the horizontal: the sun is taken from the clear-sky model (download it "
                           "with slope 0 or with the horizontal components to use the measured sky)")
    site = Site(float(loc["latitude"]), float(loc["longitude"]), float(loc.get("elevation", 0.0)), "PVGIS")
    return Loaded(data, site, units, notices)


def _load_nsrdb(buffer) -> Loaded:
    from pvlib import iotools

    raw, meta = iotools.read_nsrdb_psm4(buffer, map_variables=True)
    data, units = _columns(raw, _NSRDB_MAP)
    name = str(meta.get("City") or meta.get("Location ID") or "NSRDB")
    site = Site(float(meta["latitude"]), float(meta["longitude"]), float(meta.get("altitude", 0.0) or 0.0),
                f"NSRDB {meta.get('Location ID', '')}".strip() if name in ("-", "") else name)
    return Loaded(data, site, units)


#: MIDC column names (regular expressions on the lower-cased name) -> our column.
_MIDC_PATTERNS = (
    (C.T_AIR_C, r"^(air )?temperature( @ ?[\d.]+ ?(m|ft))? \[deg c\]$|^temperature @ 2m|^air temperature"),
    (C.RH_PCT, r"rel(ative)? humidity"),
    (C.WIND_MS, r"^avg wind speed|^wind speed"),
    (C.PRESSURE_HPA, r"station pressure"),
    (C.GHI_WM2, r"^global (horizontal|psp|ch1|cmp)"),
    (C.DNI_WM2, r"^direct (normal|nip|ch1|chp)"),
    (C.DHI_WM2, r"^diffuse (horizontal|cm|psp)"),
)


def _height_m(name: str) -> float | None:
    m = re.search(r"@\s*([\d.]+)\s*(m|ft)\b", name, re.I)
    if not m:
        return None
    v = float(m.group(1))
    return v * 0.3048 if m.group(2).lower() == "ft" else v


def _load_midc(buffer) -> Loaded:
    from pvlib import iotools

    raw = iotools.read_midc(buffer)
    data = pd.DataFrame(index=raw.index)
    units: dict = {}
    wind_h = None
    for ours, pattern in _MIDC_PATTERNS:
        for col in raw.columns:
            if re.search(pattern, col.lower()) and ours not in data.columns:
                vals = pd.to_numeric(raw[col], errors="coerce").to_numpy(float)
                if ours == C.PRESSURE_HPA and "[kpa]" in col.lower():
                    vals = vals * 10.0
                if ours == C.T_AIR_C and "[deg f]" in col.lower():
                    vals = (vals - 32.0) / 1.8
                data[ours] = vals
                units[ours] = f"from column {col!r}"
                if ours == C.WIND_MS:
                    wind_h = _height_m(col)
    return Loaded(data, Site(np.nan, np.nan, 0.0, "MIDC station"), units,
                   wind_height_m=wind_h, wind_height_source="the wind column's name" if wind_h else None)


def _load_surfrad(buffer) -> Loaded:
    from pvlib import iotools

    raw, meta = _via_tempfile(buffer, iotools.read_surfrad, ".dat")
    data, units = _columns(raw, _SURFRAD_MAP)
    lon = float(meta["longitude"])
    notices = []
    if lon > 0:
        # SURFRAD headers give degrees west as positive numbers (Alamosa, Colorado, at 105.92° W is
        # written 105.92); every SURFRAD station lies in the western hemisphere
        lon = -lon
        notices.append("the SURFRAD header gives longitude as degrees west; read as east-positive "
                       f"{lon:.2f}°")
    return Loaded(data, Site(float(meta["latitude"]), lon, float(meta.get("elevation", 0.0)),
                              str(meta.get("name", "SURFRAD"))), units, notices)


def _load_crn(buffer) -> Loaded:
    from pvlib import iotools

    raw = iotools.read_crn(buffer, map_variables=True)
    data, units = _columns(raw, _CRN_MAP)
    lat = float(pd.to_numeric(raw["latitude"], errors="coerce").median())
    lon = float(pd.to_numeric(raw["longitude"], errors="coerce").median())
    return Loaded(data, Site(lat, lon, 0.0, f"USCRN {raw['WBANNO'].iloc[0]}" if len(raw) else "USCRN"), units)


LOADERS = {"epw": _load_epw, "tmy3": _load_tmy3, "tmy2": _load_tmy2, "pvgis-tmy": _load_pvgis_tmy,
            "pvgis-hourly": _load_pvgis_hourly, "nsrdb": _load_nsrdb, "midc": _load_midc,
            "surfrad": _load_surfrad, "crn": _load_crn}
