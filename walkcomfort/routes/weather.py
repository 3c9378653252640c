"""Weather along a simulated walk: from a weather file, a logger series, or stated conditions.

Every source answers one question, :meth:`conditions` — the air temperature,
humidity, wind (with its measurement height), pressure and the three irradiance
components at given instants at a given site — so a simulated walk does not care
where its weather came from.

Hourly weather files (EPW, TMY2, TMY3, all read through :mod:`pvlib.iotools`)
need care with what a row stands for:

* irradiance is the energy received during the hour *ending* at the row's time
  (NREL TMY3 user's manual, Wilcox & Marion 2008, NREL/TP-581-43156; EPW and
  TMY2 likewise — from memory). We therefore turn each hour into a clear-sky index
  (file irradiance over the clear-sky irradiance averaged over the same hour),
  interpolate that index between hour *midpoints*, and multiply by the
  instantaneous clear-sky irradiance at the walk's actual times. The sun's daily
  course is then kept within the hour, and night stays exactly dark.
* temperature, humidity, wind and pressure are values at the time indicated
  (same manuals, from memory) and are interpolated linearly between the
  hour-ending instants.

pvlib labels TMY3 rows at the hour's end but EPW and TMY2 rows at its start (it
subtracts one from the file's hour 1…24); :func:`read_weather_file` puts all three
on one convention (``interval_end``, UTC).

Typical-year files mix years from different months; they are mapped onto the walk
by calendar date and local standard time (a walk on 15 July uses the file's
15 July), so any year can be simulated — except 29 February, which typical years
lack.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.errors import DataQualityWarning, InputError, where

#: Reference year the typical-year files are coerced to (not a leap year).
TYPICAL_YEAR = 2001
#: Weather files and loggers in the files covered here measure wind at 10 m
#: (WMO standard exposure; common practice for airport stations in TMY/EPW).
STATION_WIND_HEIGHT_M = 10.0
#: Largest distance between the walk and the weather station [km] before we refuse.
DEFAULT_MAX_DISTANCE_KM = 50.0
#: Bounds for the clear-sky indices of global and beam irradiance [-]: hours around
#: sunrise/sunset have tiny clear-sky means, where the ratio is unstable.
KC_MAX = 1.5

WEATHER_COLUMNS = (C.T_AIR_C, C.RH_PCT, C.WIND_MS, C.PRESSURE_HPA, C.GHI_WM2, C.DNI_WM2, C.DHI_WM2)

# pvlib column name -> (ours, scale to SI)
_TMY3_MAP = {"temp_air": (C.T_AIR_C, 1.0), "relative_humidity": (C.RH_PCT, 1.0), "wind_speed": (C.WIND_MS, 1.0),
             "pressure": (C.PRESSURE_HPA, 1.0), "ghi": (C.GHI_WM2, 1.0), "dni": (C.DNI_WM2, 1.0),
             "dhi": (C.DHI_WM2, 1.0)}
_EPW_MAP = {"temp_air": (C.T_AIR_C, 1.0), "relative_humidity": (C.RH_PCT, 1.0), "wind_speed": (C.WIND_MS, 1.0),
            "atmospheric_pressure": (C.PRESSURE_HPA, 0.01), "ghi": (C.GHI_WM2, 1.0), "dni": (C.DNI_WM2, 1.0),
            "dhi": (C.DHI_WM2, 1.0)}
# TMY2 values are kept in the file's units by pvlib: tenths of °C and of m/s (TMY2 manual)
_TMY2_MAP = {"DryBulb": (C.T_AIR_C, 0.1), "RHum": (C.RH_PCT, 1.0), "Wspd": (C.WIND_MS, 0.1),
             "Pressure": (C.PRESSURE_HPA, 1.0), "GHI": (C.GHI_WM2, 1.0), "DNI": (C.DNI_WM2, 1.0),
             "DHI": (C.DHI_WM2, 1.0)}
_IRR_RANGE = (0.0, 1500.0)


def _ranges():
    r = dict(C.PHYSICAL_RANGES)
    for k in (C.GHI_WM2, C.DNI_WM2, C.DHI_WM2):
        r[k] = _IRR_RANGE
    return r


@dataclass
class Site:
    """Where a weather source was measured: latitude, longitude [°], elevation [m]."""

    lat: float
    lon: float
    elev_m: float = 0.0
    name: str = ""


def distance_km(lat1, lon1, lat2, lon2) -> float:
    """Great-circle distance on a sphere of radius 6371 km [km] (haversine)."""
    p1, p2 = np.radians(lat1), np.radians(lat2)
    dp = p2 - p1
    dl = np.radians(lon2 - lon1)
    a = np.sin(dp / 2) ** 2 + np.cos(p1) * np.cos(p2) * np.sin(dl / 2) ** 2
    return float(2 * 6371.0 * np.arcsin(np.sqrt(a)))


# --------------------------------------------------------------------------- file reading
def read_weather_file(path: str | os.PathLike, typical: bool = True) -> tuple[pd.DataFrame, dict]:
    """Read an EPW, TMY2 or TMY3 file into our columns, one row per hour.

    Parameters
    ----------
    path : path
        ``.epw``, ``.tm2`` (TMY2) or ``.csv`` (TMY3).
    typical : bool, default True
        The file is a typical year: coerce every row to :data:`TYPICAL_YEAR`.

    Returns
    -------
    data : DataFrame
        Index ``interval_end`` (tz-aware UTC): the end of the hour a row stands for.
        Columns :data:`WEATHER_COLUMNS` (°C, %, m s⁻¹ at 10 m, hPa, W m⁻²). Values
        outside physical ranges (missing-value markers such as 9999) become NaN.
    meta : dict
        ``format``, ``site`` (:class:`Site`), ``utc_offset_h`` (the file's standard
        time), ``quarantine`` (DataFrame: ``source, file, row, reason, raw``),
        ``typical``.
    """
    from pvlib import iotools

    path = Path(path)
    if not path.exists():
        raise InputError("weather file does not exist", where=path, fix="check the path")
    suffix = path.suffix.lower()
    try:
        if suffix == ".epw":
            raw, meta = iotools.read_epw(str(path), coerce_year=TYPICAL_YEAR if typical else None)
            fmt, mapping, label_is_start = "epw", _EPW_MAP, True
            name = meta.get("city", "")
        elif suffix == ".tm2":
            raw, meta = iotools.read_tmy2(str(path))
            fmt, mapping, label_is_start = "tmy2", _TMY2_MAP, True
            name = meta.get("City", "")
            if typical:  # pvlib keeps the first row's year for every row
                raw.index = raw.index.map(lambda t: t.replace(year=TYPICAL_YEAR))
        elif suffix == ".csv":
            raw, meta = iotools.read_tmy3(str(path), coerce_year=TYPICAL_YEAR if typical else None,
                                          map_variables=True)
            fmt, mapping, label_is_start = "tmy3", _TMY3_MAP, False
            name = meta.get("Name", "")
        else:
            raise InputError(f"weather file type {suffix!r} is not known; allowed .epw, .tm2 (TMY2), .csv (TMY3)",
                             where=path, fix="give an EPW, TMY2 or TMY3 file")
    except InputError:
        raise
    except Exception as exc:  # pvlib raises many kinds on malformed files
        raise InputError(f"cannot read it as {suffix.lstrip('.').upper() or 'weather'} "
                         f"({type(exc).__name__}: {' '.join(str(exc).split())[:160]})", where=path,
                         fix="check the file is a complete, unmodified weather file") from None
    missing = [k for k in mapping if k not in raw.columns]
    if missing:
        raise InputError(f"columns {missing} missing", where=path, fix="give a complete weather file")
    offset_h = float(meta.get("TZ"))
    data = pd.DataFrame({ours: pd.to_numeric(raw[k], errors="coerce").to_numpy(float) * scale
                         for k, (ours, scale) in mapping.items()})
    idx = pd.DatetimeIndex(raw.index)
    if label_is_start:
        idx = idx + pd.Timedelta(hours=1)
    data.index = idx.tz_convert("UTC").rename("interval_end")
    qrows = []
    for col, (lo, hi) in _ranges().items():
        if col not in data.columns:
            continue
        v = data[col].to_numpy()
        bad = ~np.isfinite(v) | (v < lo) | (v > hi)
        for i in np.flatnonzero(bad):
            qrows.append({"source": "weather_file", "file": str(path), "row": int(i), "reason":
                          f"{col} {v[i]!r} outside {lo}…{hi} (missing-value marker?)", "raw": repr(v[i])})
        data.loc[bad, col] = np.nan
    quarantine = pd.DataFrame(qrows, columns=["source", "file", "row", "reason", "raw"])
    if len(quarantine):
        import warnings

        warnings.warn(f"{path}: {len(quarantine)} weather values outside physical ranges were set missing and are "
                      "interpolated across (see metadata['quarantine'])", DataQualityWarning, stacklevel=2)
    site = Site(float(meta["latitude"]), float(meta["longitude"]), float(meta.get("altitude", 0.0)),
                str(name).strip('" '))
    if data.index.has_duplicates or not data.index.is_monotonic_increasing:
        order = np.argsort(data.index.asi8, kind="stable")
        data = data.iloc[order]
        data = data[~data.index.duplicated(keep="first")]
    return data, {"format": fmt, "site": site, "utc_offset_h": offset_h, "quarantine": quarantine,
                  "typical": typical, "path": str(path)}


# --------------------------------------------------------------------------- sun helpers
def _sun(times: pd.DatetimeIndex, lat: float, lon: float, elev_m: float) -> pd.DataFrame:
    from walkcomfort.environment import sun

    return sun.solar_position(times, lat, lon, elev_m=elev_m)


def _clearsky(times: pd.DatetimeIndex, lat: float, lon: float, elev_m: float) -> pd.DataFrame:
    from walkcomfort.environment import sun

    return sun.clearsky_irradiance(times, lat, lon, elev_m=elev_m)


def _split_ghi(ghi: np.ndarray, times: pd.DatetimeIndex, lat: float, lon: float, elev_m: float):
    """Direct and diffuse from global horizontal (Erbs et al. 1982 via the environment stage)."""
    from walkcomfort.environment import sun

    zen = _sun(times, lat, lon, elev_m)[C.SUN_ZENITH_DEG]
    parts = sun.decompose_ghi(pd.Series(ghi, index=times), zen, times)
    return parts[C.DNI_WM2].to_numpy(float), parts[C.DHI_WM2].to_numpy(float)


def cloud_scaled_ghi(ghi_clear_wm2, cloud_frac):
    """Global irradiance under a cloud cover, Kasten & Czeplak (1980) [W m⁻²].

    GHI = GHI_clear · (1 − 0.75 · N^3.4), N the cloud cover fraction 0…1.

    References
    ----------
    Kasten, F. & Czeplak, G. (1980). Solar and terrestrial radiation dependent on
    the amount and type of cloud. Solar Energy 24, 177–189,
    doi:10.1016/0038-092X(80)90391-6.
    """
    n = np.clip(np.asarray(cloud_frac, float), 0.0, 1.0)
    return np.asarray(ghi_clear_wm2, float) * (1.0 - 0.75 * n ** 3.4)


# --------------------------------------------------------------------------- sources
class WeatherSource:
    """Base: something that gives weather at given instants at a site."""

    #: wind measurement height [m] of the ``wind_ms`` this source returns
    wind_height_m: float = STATION_WIND_HEIGHT_M
    label: str = "weather"
    notices: list

    def conditions(self, times, lat: float, lon: float, elev_m: float = 0.0) -> pd.DataFrame:  # pragma: no cover
        raise NotImplementedError

    def describe(self) -> dict:
        return {"kind": type(self).__name__, "label": self.label, "wind_height_m": self.wind_height_m}


class WeatherFile(WeatherSource):
    """An hourly EPW/TMY2/TMY3 weather file.

    Parameters
    ----------
    path : path
        The file.
    typical : bool, default True
        Treat it as a typical year (map walks by calendar date).
    max_distance_km : float, default 50
        Refuse walks farther than this from the station [km].
    """

    def __init__(self, path, typical: bool = True, max_distance_km: float = DEFAULT_MAX_DISTANCE_KM):
        self.path = Path(path)
        self.data, self.meta = read_weather_file(self.path, typical=typical)
        self.site: Site = self.meta["site"]
        self.typical = typical
        self.max_distance_km = float(max_distance_km)
        self.wind_height_m = STATION_WIND_HEIGHT_M
        self.label = f"{self.meta['format'].upper()} {self.site.name or self.path.name}"
        self.notices = []
        # extended copy for typical years: the last day before the first, the first after
        # the last, so walks across New Year (local or UTC) interpolate without a gap
        d = self.data
        if typical:
            yr = pd.DateOffset(years=1)
            head = d[d.index < d.index[0] + pd.Timedelta(days=2)]
            tail = d[d.index > d.index[-1] - pd.Timedelta(days=2)]
            tail_prev = tail.set_axis(tail.index - yr)
            head_next = head.set_axis(head.index + yr)
            ext = pd.concat([tail_prev, d, head_next])
            ext = ext[~ext.index.duplicated(keep="first")].sort_index()
        else:
            ext = d
        # fill the quarantined holes by time interpolation (announced in read_weather_file)
        self._ext = ext.interpolate(method="time", limit_direction="both")
        self._cs_cache: dict = {}

    # ---- time mapping
    def _map_times(self, times: pd.DatetimeIndex) -> pd.DatetimeIndex:
        """Walk instants -> the file's timeline (same calendar date and local standard time)."""
        if not self.typical:
            lo, hi = self._ext.index[0], self._ext.index[-1]
            if times.min() < lo or times.max() > hi:
                raise InputError(f"the walk ({times.min().isoformat()} … {times.max().isoformat()}) is outside the "
                                 f"period of the file ({lo.isoformat()} … {hi.isoformat()})", where=self.path,
                                 fix="choose a date the file covers, or read it as a typical year (typical=True)")
            return times
        off = pd.Timedelta(hours=self.meta["utc_offset_h"])
        local = (times.tz_convert("UTC").tz_localize(None) + off)
        leap = (local.month == 2) & (local.day == 29)
        if leap.any():
            raise InputError(f"the walk falls on 29 February ({local[leap][0].date()}), which a typical-year file "
                             "does not hold", where=self.path, fix="choose another date (e.g. 28 February or 1 March)")
        mapped = pd.to_datetime(pd.DataFrame({"year": TYPICAL_YEAR, "month": local.month, "day": local.day,
                                              "hour": local.hour, "minute": local.minute, "second": local.second,
                                              "microsecond": local.microsecond}))
        return pd.DatetimeIndex(mapped - off).tz_localize("UTC")

    def check_site(self, lat: float, lon: float) -> None:
        """Raise :class:`InputError` when the walk is too far from the weather station."""
        d = distance_km(lat, lon, self.site.lat, self.site.lon)
        if d > self.max_distance_km:
            raise InputError(f"the route is {d:.0f} km from the weather station '{self.site.name}' "
                             f"({self.site.lat:.3f}, {self.site.lon:.3f}); the limit is {self.max_distance_km:g} km",
                             where=self.path, fix="use a weather file for the route's site, or raise max_distance_km "
                             "(--max-station-km) if the climate is known to be the same")

    def _hour_clearsky_mean(self, ends: pd.DatetimeIndex, lat, lon, elev_m) -> pd.DataFrame:
        # mean over the hour from six 10-min samples at the interval's 5, 15, … 55 min
        offs = pd.to_timedelta(np.arange(-55, 0, 10), unit="min").as_unit("ns").asi8
        ends_ns = ends.as_unit("ns").asi8
        samples = pd.DatetimeIndex((ends_ns[:, None] + offs[None, :]).ravel().astype("datetime64[ns]")
                                   ).tz_localize("UTC")
        cs = _clearsky(samples, lat, lon, elev_m)
        g = cs[[C.GHI_WM2, C.DNI_WM2]].to_numpy(float).reshape(len(ends), len(offs), 2).mean(axis=1)
        return pd.DataFrame({C.GHI_WM2: g[:, 0], C.DNI_WM2: g[:, 1]}, index=ends)

    def conditions(self, times, lat: float, lon: float, elev_m: float = 0.0) -> pd.DataFrame:
        """Weather at the walk's instants.

        Parameters
        ----------
        times : DatetimeIndex
            tz-aware instants of the walk.
        lat, lon : float
            Site of the walk [°] (checked against the station).
        elev_m : float
            Site elevation [m] (for the clear-sky model).

        Returns
        -------
        DataFrame
            Index ``times``; columns :data:`WEATHER_COLUMNS`; ``attrs["wind_height_m"]``.
        """
        times = _utc_index(times)
        self.check_site(lat, lon)
        mapped = self._map_times(times)
        ext = self._ext
        ends_ns = ext.index.as_unit("ns").asi8
        m_ns = mapped.as_unit("ns").asi8
        out = pd.DataFrame(index=times)
        for col in (C.T_AIR_C, C.RH_PCT, C.WIND_MS, C.PRESSURE_HPA):
            out[col] = np.interp(m_ns, ends_ns, ext[col].to_numpy(float))
        # irradiance: clear-sky index per hour, interpolated between hour midpoints
        i0 = max(int(np.searchsorted(ends_ns, m_ns.min())) - 2, 0)
        i1 = min(int(np.searchsorted(ends_ns, m_ns.max())) + 3, len(ext))
        win = ext.iloc[i0:i1]
        # the clear-sky mean of each hour is computed in the file's year at the site
        csm = self._hour_clearsky_mean(win.index, lat, lon, elev_m)
        kc = _index(win[C.GHI_WM2].to_numpy(float), csm[C.GHI_WM2].to_numpy(float))
        kb = _index(win[C.DNI_WM2].to_numpy(float), csm[C.DNI_WM2].to_numpy(float))
        mid_ns = win.index.as_unit("ns").asi8 - np.int64(1800) * 10**9
        kc_t = np.interp(m_ns, mid_ns, kc)
        kb_t = np.interp(m_ns, mid_ns, kb)
        cs = _clearsky(times, lat, lon, elev_m)
        zen = _sun(times, lat, lon, elev_m)[C.SUN_ZENITH_DEG].to_numpy(float)
        ghi = kc_t * cs[C.GHI_WM2].to_numpy(float)
        dni = kb_t * cs[C.DNI_WM2].to_numpy(float)
        cosz = np.clip(np.cos(np.radians(zen)), 0.0, None)
        beam_h = dni * cosz
        # the beam on the horizontal cannot exceed the global: scale it down where it would
        over = beam_h > ghi
        dni = np.where(over & (cosz > 0), ghi / np.where(cosz > 0, cosz, 1.0), dni)
        dni = np.where(zen >= 90.0, 0.0, dni)
        out[C.GHI_WM2] = ghi
        out[C.DNI_WM2] = dni
        out[C.DHI_WM2] = np.clip(ghi - dni * cosz, 0.0, None)
        out.attrs["wind_height_m"] = self.wind_height_m
        out.attrs["weather"] = self.label
        return out

    def describe(self) -> dict:
        d = super().describe()
        d.update({"path": str(self.path), "format": self.meta["format"], "station": self.site.name,
                  "station_lat": self.site.lat, "station_lon": self.site.lon, "typical": self.typical})
        return d


def _index(measured: np.ndarray, clear: np.ndarray) -> np.ndarray:
    """Clear-sky index with night hours filled from the nearest daylight hour."""
    with np.errstate(divide="ignore", invalid="ignore"):
        k = np.where(clear > 1.0, measured / clear, np.nan)
    k = np.clip(k, 0.0, KC_MAX)
    s = pd.Series(k)
    if s.notna().any():
        s = s.bfill().ffill()
    else:
        s = s.fillna(0.0)
    return s.to_numpy(float)


class StatedConditions(WeatherSource):
    """Weather stated by the user: constant air, humidity and wind; sun from clear sky.

    Parameters
    ----------
    t_air_c : float
        Air temperature [°C].
    rh_pct : float
        Relative humidity [%].
    wind_ms : float
        Wind speed [m s⁻¹] at ``wind_height_m``.
    wind_height_m : float, default 10
        Height of that wind speed [m].
    cloud_frac : float, optional
        Cloud cover 0…1: clear-sky global irradiance scaled by Kasten & Czeplak (1980),
        then split into direct and diffuse by Erbs et al. (1982).
    ghi_wm2 : float, optional
        Global horizontal irradiance [W m⁻²] instead (split by Erbs); set to 0 when the
        sun is down.
    pressure_hpa : float, optional
        Station pressure [hPa]; default from the site elevation (standard atmosphere).
    """

    def __init__(self, t_air_c: float, rh_pct: float, wind_ms: float, wind_height_m: float = 10.0,
                 cloud_frac: float | None = None, ghi_wm2: float | None = None, pressure_hpa: float | None = None):
        checks = {C.T_AIR_C: t_air_c, C.RH_PCT: rh_pct, C.WIND_MS: wind_ms}
        for k, v in checks.items():
            lo, hi = C.PHYSICAL_RANGES[k]
            if v is None or not np.isfinite(v) or not lo <= v <= hi:
                raise InputError(f"stated {k} {v!r} is outside {lo}…{hi}", fix=f"give {k} within {lo}…{hi}")
        if not wind_height_m > 0:
            raise InputError(f"wind height {wind_height_m!r} m is not positive", fix="give the height in metres")
        if cloud_frac is not None and ghi_wm2 is not None:
            raise InputError("both cloud cover and global irradiance were stated", fix="give one of them")
        if cloud_frac is not None and not 0.0 <= cloud_frac <= 1.0:
            raise InputError(f"cloud cover {cloud_frac!r} is outside 0…1", fix="give a fraction 0…1 (oktas/8)")
        if ghi_wm2 is not None and not _IRR_RANGE[0] <= ghi_wm2 <= _IRR_RANGE[1]:
            raise InputError(f"global irradiance {ghi_wm2!r} W/m² is outside 0…1500", fix="give GHI in W/m²")
        self.t_air_c, self.rh_pct, self.wind_ms = float(t_air_c), float(rh_pct), float(wind_ms)
        self.wind_height_m = float(wind_height_m)
        self.cloud_frac, self.ghi_wm2, self.pressure_hpa = cloud_frac, ghi_wm2, pressure_hpa
        sky = ("clear sky" if cloud_frac is None and ghi_wm2 is None else
               f"cloud {cloud_frac:g}" if cloud_frac is not None else f"GHI {ghi_wm2:g} W/m²")
        self.label = f"stated: {t_air_c:g} °C, {rh_pct:g} %, {wind_ms:g} m/s at {wind_height_m:g} m, {sky}"
        self.notices = []

    def conditions(self, times, lat: float, lon: float, elev_m: float = 0.0) -> pd.DataFrame:
        times = _utc_index(times)
        n = len(times)
        out = pd.DataFrame({C.T_AIR_C: np.full(n, self.t_air_c), C.RH_PCT: np.full(n, self.rh_pct),
                            C.WIND_MS: np.full(n, self.wind_ms)}, index=times)
        if self.pressure_hpa is not None:
            out[C.PRESSURE_HPA] = float(self.pressure_hpa)
        else:
            from pvlib.atmosphere import alt2pres

            out[C.PRESSURE_HPA] = float(alt2pres(elev_m)) / 100.0
        _add_irradiance(out, times, lat, lon, elev_m, ghi=self.ghi_wm2, cloud_frac=self.cloud_frac)
        out.attrs["wind_height_m"] = self.wind_height_m
        out.attrs["weather"] = self.label
        return out

    def describe(self) -> dict:
        d = super().describe()
        d.update({"t_air_c": self.t_air_c, "rh_pct": self.rh_pct, "wind_ms": self.wind_ms,
                  "cloud_frac": self.cloud_frac, "ghi_wm2": self.ghi_wm2})
        return d


def _add_irradiance(out: pd.DataFrame, times, lat, lon, elev_m, ghi=None, cloud_frac=None) -> None:
    cs = _clearsky(times, lat, lon, elev_m)
    if ghi is None and cloud_frac is None:
        for k in (C.GHI_WM2, C.DNI_WM2, C.DHI_WM2):
            out[k] = cs[k].to_numpy(float)
        return
    if cloud_frac is not None:
        g = cloud_scaled_ghi(cs[C.GHI_WM2].to_numpy(float), cloud_frac)
    else:
        g = np.broadcast_to(np.asarray(ghi, float), (len(times),)).astype(float).copy()
        zen = _sun(times, lat, lon, elev_m)[C.SUN_ZENITH_DEG].to_numpy(float)
        g[zen >= 90.0] = 0.0
    g = np.nan_to_num(g, nan=0.0)
    dni, dhi = _split_ghi(g, times, lat, lon, elev_m)
    out[C.GHI_WM2] = g
    out[C.DNI_WM2] = np.nan_to_num(dni, nan=0.0)
    out[C.DHI_WM2] = np.nan_to_num(dhi, nan=0.0)


class LoggerSeries(WeatherSource):
    """A measured weather series (a logger on site), interpolated to the walk.

    Parameters
    ----------
    data : DataFrame
        tz-aware time index; columns ``t_air_c`` [°C], ``rh_pct`` [%], ``wind_ms``
        [m s⁻¹]; optional ``ghi_wm2`` [W m⁻²] (split by Erbs) and ``pressure_hpa``.
        Without ``ghi_wm2`` the sky is taken as clear (or ``cloud_frac``).
    wind_height_m : float
        Height of the wind sensor [m].
    cloud_frac : float, optional
        Cloud cover 0…1 when the logger has no pyranometer.
    source : str
        Where the series came from (for messages).
    max_gap_s : float, default 900
        Refuse to interpolate across a hole in the series longer than this [s].
    """

    def __init__(self, data: pd.DataFrame, wind_height_m: float, cloud_frac: float | None = None,
                 source: str = "logger series", max_gap_s: float = 900.0):
        if not isinstance(data.index, pd.DatetimeIndex) or data.index.tz is None:
            raise InputError("the logger series needs a tz-aware time index", where=source,
                             fix="give times with a UTC offset")
        need = [C.T_AIR_C, C.RH_PCT, C.WIND_MS]
        missing = [c for c in need if c not in data.columns]
        if missing:
            raise InputError(f"the logger series lacks columns {missing}", where=source,
                             fix=f"give columns {need} (optional ghi_wm2, pressure_hpa)")
        if not wind_height_m or not wind_height_m > 0:
            raise InputError(f"logger wind height {wind_height_m!r} m is not positive", where=source,
                             fix="state the wind sensor height in metres")
        keep = [c for c in (*need, C.GHI_WM2, C.PRESSURE_HPA) if c in data.columns]
        d = data[keep].apply(pd.to_numeric, errors="coerce").sort_index()
        d.index = d.index.tz_convert("UTC")
        self.quarantine = d[d[need].isna().any(axis=1)]
        if len(self.quarantine):
            import warnings

            warnings.warn(f"{source}: {len(self.quarantine)} logger rows lack a value and are not used",
                          DataQualityWarning, stacklevel=2)
        self.data = d.dropna(subset=need)
        if len(self.data) < 2:
            raise InputError(f"the logger series has {len(self.data)} usable rows, at least 2 are needed",
                             where=source, fix="give a longer series")
        self.wind_height_m = float(wind_height_m)
        self.cloud_frac = cloud_frac
        self.source = source
        self.max_gap_s = float(max_gap_s)
        self.label = f"logger {source}"
        self.notices = [] if C.GHI_WM2 in self.data.columns else [
            "the logger series has no global irradiance: the sun is taken from the clear-sky model"
            + (f" scaled for cloud {cloud_frac:g}" if cloud_frac is not None else "")]

    @classmethod
    def from_file(cls, path, wind_height_m: float | None = None, cloud_frac: float | None = None) -> LoggerSeries:
        """Read a CSV (``time`` column, ISO 8601 with offset, canonical columns) or a timeline Parquet."""
        path = Path(path)
        if not path.exists():
            raise InputError("logger file does not exist", where=path, fix="check the path")
        if path.suffix.lower() == ".parquet":
            from walkcomfort._io import read_parquet_metadata

            df = pd.read_parquet(path)
            meta = read_parquet_metadata(path)
            sess = meta.get("session", {}) if isinstance(meta, dict) else {}
            if wind_height_m is None:
                wind_height_m = sess.get("wind_height_m")
        else:
            df = pd.read_csv(path)
            if C.TIME not in df.columns:
                raise InputError(f"no '{C.TIME}' column (columns: {list(df.columns)})", where=path,
                                 fix="name the time column 'time' (ISO 8601 with offset)")
            t = pd.to_datetime(df[C.TIME], errors="coerce", utc=False, format="ISO8601")
            if t.isna().any():
                row = int(np.flatnonzero(t.isna().to_numpy())[0])
                raise InputError(f"time {df[C.TIME].iloc[row]!r} is not an ISO 8601 date-time", where=where(path, row=row + 2),
                                 fix="write times like 2026-07-15T15:00:00+02:00")
            if getattr(t.dt, "tz", None) is None:
                raise InputError("logger times have no UTC offset", where=path,
                                 fix="write times with an offset, e.g. 2026-07-15T15:00:00+02:00")
            df = df.drop(columns=[C.TIME]).set_index(pd.DatetimeIndex(t).tz_convert("UTC").rename(C.TIME))
        if wind_height_m is None:
            raise InputError("the wind sensor height is not known", where=path,
                             fix="state it (--logger-wind-height 1.1)")
        return cls(df, wind_height_m=float(wind_height_m), cloud_frac=cloud_frac, source=str(path))

    def conditions(self, times, lat: float, lon: float, elev_m: float = 0.0) -> pd.DataFrame:
        times = _utc_index(times)
        idx_ns = self.data.index.as_unit("ns").asi8
        t_ns = times.as_unit("ns").asi8
        if t_ns.min() < idx_ns[0] or t_ns.max() > idx_ns[-1]:
            raise InputError(f"the walk ({times.min().isoformat()} … {times.max().isoformat()}) is outside the logger "
                             f"series ({self.data.index[0].isoformat()} … {self.data.index[-1].isoformat()})",
                             where=self.source, fix="choose a departure within the logged period")
        gaps = np.diff(idx_ns) / 1e9
        j = np.clip(np.searchsorted(idx_ns, t_ns, side="right") - 1, 0, len(gaps) - 1)
        if len(gaps) and (gaps[j] > self.max_gap_s).any():
            k = int(np.flatnonzero(gaps[j] > self.max_gap_s)[0])
            raise InputError(f"the walk at {times[k].isoformat()} falls in a {gaps[j][k]:.0f} s hole in the logger "
                             f"series (max {self.max_gap_s:g} s)", where=self.source,
                             fix="choose another departure or fill the series")
        out = pd.DataFrame(index=times)
        for c in self.data.columns:
            v = self.data[c].to_numpy(float)
            ok = np.isfinite(v)
            out[c] = np.interp(t_ns, idx_ns[ok], v[ok]) if ok.sum() >= 2 else np.nan
        if C.PRESSURE_HPA not in out.columns or out[C.PRESSURE_HPA].isna().all():
            from pvlib.atmosphere import alt2pres

            out[C.PRESSURE_HPA] = float(alt2pres(elev_m)) / 100.0
        if C.GHI_WM2 in out.columns:
            g = np.clip(out.pop(C.GHI_WM2).to_numpy(float), 0.0, None)
            _add_irradiance(out, times, lat, lon, elev_m, ghi=g)
        else:
            _add_irradiance(out, times, lat, lon, elev_m, cloud_frac=self.cloud_frac)
        out = out[list(WEATHER_COLUMNS)]
        out.attrs["wind_height_m"] = self.wind_height_m
        out.attrs["weather"] = self.label
        return out


def _utc_index(times) -> pd.DatetimeIndex:
    times = pd.DatetimeIndex(times)
    if times.tz is None:
        raise InputError("walk times have no time zone", fix="use tz-aware (UTC) times")
    return times.tz_convert("UTC")


#: Names accepted in stated conditions (``--conditions``), all numbers.
CONDITION_KEYS = ("t_air_c", "rh_pct", "wind_ms", "wind_height_m", "cloud_frac", "ghi_wm2", "pressure_hpa")


def parse_conditions(text: str | None) -> dict | None:
    """``"t_air_c=33,rh_pct=30,wind_ms=1.5[,wind_height_m=10][,cloud_frac=0.2]"`` -> dict of floats."""
    if text is None:
        return None
    out = {}
    for item in str(text).split(","):
        if not item.strip():
            continue
        key, sep, value = item.partition("=")
        key = key.strip()
        if not sep or key not in CONDITION_KEYS:
            raise InputError(f"stated condition {item.strip()!r} is not 'name=number' with a name of "
                             f"{list(CONDITION_KEYS)}", where="--conditions", fix="write e.g. 't_air_c=33,rh_pct=30,wind_ms=1.5'")
        try:
            out[key] = float(value)
        except ValueError:
            raise InputError(f"stated condition {key} = {value.strip()!r} is not a number", where="--conditions",
                             fix="write e.g. 't_air_c=33,rh_pct=30,wind_ms=1.5'") from None
    missing = [k for k in ("t_air_c", "rh_pct", "wind_ms") if k not in out]
    if missing:
        raise InputError(f"stated conditions lack {missing}", where="--conditions",
                         fix="write e.g. 't_air_c=33,rh_pct=30,wind_ms=1.5'")
    return out


def open_weather(path=None, conditions: dict | None = None, **kw) -> WeatherSource:
    """A weather source from a file path (EPW/TMY2/TMY3 or a logger CSV/Parquet) or stated conditions.

    A ``.csv`` is a TMY3 file when its second line starts with the TMY3 header
    (``Date (MM/DD/YYYY)``), otherwise a logger series.
    """
    if (path is None) == (conditions is None):
        raise InputError("give exactly one of a weather file and stated conditions",
                         fix="pass --weather FILE or --conditions 't_air_c=..,rh_pct=..,wind_ms=..'")
    if conditions is not None:
        return StatedConditions(**conditions)
    path = Path(path)
    suffix = path.suffix.lower()
    if suffix in (".epw", ".tm2"):
        return WeatherFile(path, **{k: v for k, v in kw.items() if k in ("typical", "max_distance_km")})
    if suffix == ".csv":
        if not path.exists():
            raise InputError("weather file does not exist", where=path, fix="check the path")
        with open(path, encoding="utf-8", errors="replace") as fh:
            fh.readline()
            second = fh.readline()
        if second.startswith("Date (MM/DD/YYYY)"):
            return WeatherFile(path, **{k: v for k, v in kw.items() if k in ("typical", "max_distance_km")})
    if suffix in (".csv", ".parquet"):
        return LoggerSeries.from_file(path, **{k: v for k, v in kw.items() if k in ("wind_height_m", "cloud_frac")})
    raise InputError(f"weather file type {suffix!r} is not known; allowed .epw, .tm2, .csv (TMY3 or logger), .parquet",
                     where=path, fix="give an EPW/TMY file or a logger series")
