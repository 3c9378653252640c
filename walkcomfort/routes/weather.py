"""Weather along a simulated walk: from a weather file, a logger series, or stated conditions.

Every source answers one question, :meth:`~walkcomfort.routes.weathersource.WeatherSource.conditions`
— the air temperature, humidity, wind (with its measurement height), pressure and the
three irradiance components at given instants at a given site — so a simulated walk
does not care where its weather came from. :func:`open_weather` picks the source.

Weather files (:mod:`walkcomfort.routes.weatherfiles`: EPW, TMY2, TMY3, PVGIS, NSRDB,
MIDC, SURFRAD, USCRN, all read through :mod:`pvlib.iotools`) need care with what a row
stands for:

* irradiance that is a mean over the interval before the stamp (EPW, TMY) is turned
  into a clear-sky index per interval (file value over the clear-sky irradiance averaged
  over the same interval), interpolated between interval *midpoints*, and multiplied by
  the instantaneous clear-sky irradiance at the walk's actual times. The sun's daily
  course is then kept within the hour, and night stays exactly dark. Irradiance given at
  instants (PVGIS, NSRDB, station series) is indexed against the clear sky at those
  instants (plus the file's stated offset) instead.
* temperature, humidity, wind and pressure are values at the stamp (or means over the
  interval, placed at its midpoint) and are interpolated linearly.
* a file without direct and diffuse irradiance has its global split by Erbs et al.
  (1982); a file without any horizontal irradiance gets the clear-sky sun (with a notice).
* variables a file lacks (a station without a hygrometer) are refused unless stated
  with ``--conditions`` (which then only fills what the file lacks).

Typical-year files mix years from different months; they are mapped onto the walk by
calendar date and the file's time of day (local standard time or UTC, as the file
gives it), so any year can be simulated — except 29 February, which typical years lack.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.environment.geodesy import great_circle_km
from walkcomfort.environment.sky import clearsky_index
from walkcomfort.errors import InputError
from walkcomfort.routes.loggerweather import PARQUET_MAGIC, LoggerSeries
from walkcomfort.routes.weatherfiles import (
    FORMATS,
    TYPICAL_YEAR,
    WEATHER_COLUMNS,
    Site,
    describe_time,
    read_weather_file,
    sniff_file,
)
from walkcomfort.routes.weathersource import (
    STATION_WIND_HEIGHT_M,
    WeatherSource,
    add_irradiance,
    clearsky,
    split_ghi,
    standard_pressure_hpa,
    sun_position,
    utc_index,
)

__all__ = ["CONDITION_KEYS", "DEFAULT_MAX_DISTANCE_KM", "FORMAT_CHOICES", "STATION_WIND_HEIGHT_M", "TYPICAL_YEAR",
           "WEATHER_COLUMNS", "LoggerSeries", "Site", "StatedConditions", "WeatherFile", "WeatherSource",
           "open_weather", "parse_conditions", "read_weather_file"]

#: Largest distance between the walk and the weather station [km] before we refuse.
DEFAULT_MAX_DISTANCE_KM = 50.0
#: Irradiance a user may state [W m⁻²].
IRRADIANCE_RANGE = (0.0, 1500.0)
#: Values of ``--weather-format``: the file formats plus a logger CSV and a timeline Parquet.
FORMAT_CHOICES = (*FORMATS, "logger", "timeline")
#: A hole in an actual (not typical) series longer than this many steps is not bridged.
MAX_GAP_STEPS = 2.5
_MET = (C.T_AIR_C, C.RH_PCT, C.WIND_MS)


class WeatherFile(WeatherSource):
    """A weather file of any format in :data:`~walkcomfort.routes.weatherfiles.FORMATS`.

    Parameters
    ----------
    path : path
        The file.
    typical : bool, optional
        Treat it as a typical year (map walks by calendar date) or an actual period;
        default: what the format is.
    max_distance_km : float, default 50
        Refuse walks farther than this from the station [km].
    fmt : str, optional
        Format name; default: recognised from the content.
    fill : dict, optional
        Values for variables the file lacks (``t_air_c``, ``rh_pct``, ``wind_ms``,
        ``pressure_hpa``, ``cloud_frac``); never used where the file has values.
    wind_height_m : float, optional
        Wind measurement height [m]; default: the format's documented height.
    """

    def __init__(self, path, typical: bool | None = None, max_distance_km: float = DEFAULT_MAX_DISTANCE_KM,
                 fmt: str | None = None, fill: dict | None = None, wind_height_m: float | None = None):
        self.path = Path(path)
        self.data, self.meta = read_weather_file(self.path, typical=typical, fmt=fmt)
        self.site: Site | None = self.meta["site"]
        self.typical = bool(self.meta["typical"])
        self.max_distance_km = float(max_distance_km)
        self.notices = list(self.meta["notices"])
        self.fill = self._fills(dict(fill or {}))
        height = wind_height_m if wind_height_m is not None else self.meta["wind_height_m"]
        if height is None or not height > 0:
            raise InputError("the wind measurement height is not stated by this file", where=self.path,
                             fix="state it with --logger-wind-height (e.g. 10 for a mast)")
        self.wind_height_m = float(height)
        name = self.site.name if self.site is not None and self.site.name else self.path.name
        self.label = f"{self.meta['format_label']} {name}"
        self._ext = self._extended()
        self._step_s = float(self.meta["time"]["interval_s"])

    def _fills(self, fill: dict) -> dict:
        missing = self.meta["missing"]
        used = {}
        for col in (*_MET, C.PRESSURE_HPA):
            if col not in missing:
                continue
            if col in fill:
                used[col] = float(fill[col])
                self.notices.append(f"the file has no {col}: the stated {fill[col]:g} is used throughout")
            elif col == C.PRESSURE_HPA:
                self.notices.append("the file has no pressure: the standard atmosphere at the site's elevation is "
                                    "used")
            else:
                raise InputError(f"the {self.meta['format_label']} file has no {col} values", where=self.path,
                                 fix=f"state it with --conditions '{col}=...' (used only for what the file lacks), "
                                     "or give a file that has it")
        if C.GHI_WM2 in missing:
            cloud = fill.get("cloud_frac")
            used["cloud_frac"] = cloud
            self.notices.append("the file has no horizontal irradiance: the sun is taken from the clear-sky model"
                                + (f" scaled for cloud {cloud:g}" if cloud is not None else ""))
        elif C.DNI_WM2 in missing or C.DHI_WM2 in missing:
            self.notices.append("the file has global irradiance only: direct and diffuse are split from it "
                                "(Erbs et al. 1982)")
        return used

    def _extended(self) -> pd.DataFrame:
        """The data with a day wrapped around each end for typical years; quarantined holes interpolated."""
        d = self.data
        if self.typical:
            yr = pd.DateOffset(years=1)
            head = d[d.index < d.index[0] + pd.Timedelta(days=2)]
            tail = d[d.index > d.index[-1] - pd.Timedelta(days=2)]
            ext = pd.concat([tail.set_axis(tail.index - yr), d, head.set_axis(head.index + yr)])
            ext = ext[~ext.index.duplicated(keep="first")].sort_index()
        else:
            ext = d
        have = [c for c in ext.columns if ext[c].notna().any()]
        out = ext.copy()
        if have:
            out[have] = ext[have].interpolate(method="time", limit_direction="both")
        return out

    # ---- time mapping
    def _map_times(self, times: pd.DatetimeIndex) -> pd.DatetimeIndex:
        """Walk instants -> the file's timeline (same calendar date and time of day in the file's zone)."""
        if not self.typical:
            lo, hi = self._ext.index[0], self._ext.index[-1]
            if times.min() < lo or times.max() > hi:
                raise InputError(f"the walk ({times.min().isoformat()} … {times.max().isoformat()}) is outside the "
                                 f"period of the file ({lo.isoformat()} … {hi.isoformat()})", where=self.path,
                                 fix="choose a date the file covers, or read it as a typical year")
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
        if self.site is None:
            note = "the weather file does not state where it was measured: its distance to the route is not checked"
            if note not in self.notices:
                self.notices.append(note)
            return
        d = great_circle_km(lat, lon, self.site.lat, self.site.lon)
        if d > self.max_distance_km:
            raise InputError(f"the route is {d:.0f} km from the weather station '{self.site.name}' "
                             f"({self.site.lat:.3f}, {self.site.lon:.3f}); the limit is {self.max_distance_km:g} km",
                             where=self.path, fix="use a weather file for the route's site, or raise max_distance_km "
                             "(--max-station-km) if the climate is known to be the same")

    def _check_gaps(self, m_ns: np.ndarray) -> None:
        if self.typical:
            return
        idx_ns = self.data.index.as_unit("ns").asi8
        ok = self.data[list(_MET)].notna().any(axis=1).to_numpy()
        idx_ns = idx_ns[ok]
        if idx_ns.size < 2:
            raise InputError("the file holds fewer than two usable rows", where=self.path, fix="give a longer series")
        gaps = np.diff(idx_ns) / 1e9
        j = np.clip(np.searchsorted(idx_ns, m_ns, side="right") - 1, 0, len(gaps) - 1)
        limit = MAX_GAP_STEPS * self._step_s
        if (gaps[j] > limit).any():
            k = int(np.flatnonzero(gaps[j] > limit)[0])
            raise InputError(f"the walk at {pd.Timestamp(m_ns[k], tz='UTC').isoformat()} falls in a {gaps[j][k]:.0f} s "
                             f"hole in the series (rows every {self._step_s:g} s)", where=self.path,
                             fix="choose another departure or a file without that hole")

    def _interval_clearsky_mean(self, ends: pd.DatetimeIndex, lat, lon, elev_m) -> pd.DataFrame:
        # mean over the interval from six samples at its 1/12, 3/12, … 11/12 points
        step_ns = int(self._step_s * 1e9)
        offs = -(np.arange(11, 0, -2) * step_ns) // 12
        ends_ns = ends.as_unit("ns").asi8
        samples = pd.DatetimeIndex((ends_ns[:, None] + offs[None, :]).ravel().astype("datetime64[ns]")
                                   ).tz_localize("UTC")
        cs = clearsky(samples, lat, lon, elev_m)
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
        times = utc_index(times)
        self.check_site(lat, lon)
        mapped = self._map_times(times)
        m_ns = mapped.as_unit("ns").asi8
        self._check_gaps(m_ns)
        ext = self._ext
        t = self.meta["time"]
        stamps_ns = ext.index.as_unit("ns").asi8
        met_ns = stamps_ns - (int(self._step_s * 5e8) if t["met"] == "interval_mean" else 0)
        out = pd.DataFrame(index=times)
        for col in (*_MET, C.PRESSURE_HPA):
            if col in self.fill:
                out[col] = self.fill[col]
            elif ext[col].notna().any():
                out[col] = np.interp(m_ns, met_ns, ext[col].to_numpy(float))
            else:
                out[col] = standard_pressure_hpa(elev_m)
        if C.GHI_WM2 in self.meta["missing"]:
            add_irradiance(out, times, lat, lon, elev_m, cloud_frac=self.fill.get("cloud_frac"))
        else:
            self._irradiance(out, times, m_ns, lat, lon, elev_m)
        out = out[list(WEATHER_COLUMNS)]
        out.attrs["wind_height_m"] = self.wind_height_m
        out.attrs["weather"] = self.label
        return out

    def _irradiance(self, out, times, m_ns, lat, lon, elev_m) -> None:
        ext, t = self._ext, self.meta["time"]
        stamps_ns = ext.index.as_unit("ns").asi8
        i0 = max(int(np.searchsorted(stamps_ns, m_ns.min())) - 2, 0)
        i1 = min(int(np.searchsorted(stamps_ns, m_ns.max())) + 3, len(ext))
        win = ext.iloc[i0:i1]
        # the clear-sky reference of each row is computed in the file's year at the walk's site
        if t["irradiance"] == "interval_mean":
            ref = self._interval_clearsky_mean(win.index, lat, lon, elev_m)
            anchor_ns = win.index.as_unit("ns").asi8 - int(self._step_s * 5e8)
        else:
            at = win.index + pd.Timedelta(seconds=float(t["irradiance_offset_s"]))
            ref = clearsky(at, lat, lon, elev_m)
            anchor_ns = at.as_unit("ns").asi8
        has_beam = C.DNI_WM2 not in self.meta["missing"]
        kc = clearsky_index(win[C.GHI_WM2].to_numpy(float), ref[C.GHI_WM2].to_numpy(float))
        cs = clearsky(times, lat, lon, elev_m)
        ghi = np.interp(m_ns, anchor_ns, kc) * cs[C.GHI_WM2].to_numpy(float)
        if not has_beam:
            dni, dhi = split_ghi(ghi, times, lat, lon, elev_m)
            out[C.GHI_WM2] = ghi
            out[C.DNI_WM2] = np.nan_to_num(dni, nan=0.0)
            out[C.DHI_WM2] = np.nan_to_num(dhi, nan=0.0)
            return
        kb = clearsky_index(win[C.DNI_WM2].to_numpy(float), ref[C.DNI_WM2].to_numpy(float))
        dni = np.interp(m_ns, anchor_ns, kb) * cs[C.DNI_WM2].to_numpy(float)
        zen = sun_position(times, lat, lon, elev_m)[C.SUN_ZENITH_DEG].to_numpy(float)
        cosz = np.clip(np.cos(np.radians(zen)), 0.0, None)
        # the beam on the horizontal cannot exceed the global: scale it down where it would
        over = dni * cosz > ghi
        dni = np.where(over & (cosz > 0), ghi / np.where(cosz > 0, cosz, 1.0), dni)
        dni = np.where(zen >= 90.0, 0.0, dni)
        out[C.GHI_WM2] = ghi
        out[C.DNI_WM2] = dni
        out[C.DHI_WM2] = np.clip(ghi - dni * cosz, 0.0, None)

    def describe(self) -> dict:
        d = super().describe()
        site = self.site
        d.update({"path": str(self.path), "format": self.meta["format"], "station": site.name if site else None,
                  "station_lat": site.lat if site else None, "station_lon": site.lon if site else None,
                  "typical": self.typical, "time": describe_time(self.meta),
                  "filled": {k: v for k, v in self.fill.items() if v is not None}})
        return d


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
        if ghi_wm2 is not None and not IRRADIANCE_RANGE[0] <= ghi_wm2 <= IRRADIANCE_RANGE[1]:
            raise InputError(f"global irradiance {ghi_wm2!r} W/m² is outside 0…1500", fix="give GHI in W/m²")
        self.t_air_c, self.rh_pct, self.wind_ms = float(t_air_c), float(rh_pct), float(wind_ms)
        self.wind_height_m = float(wind_height_m)
        self.cloud_frac, self.ghi_wm2, self.pressure_hpa = cloud_frac, ghi_wm2, pressure_hpa
        sky = ("clear sky" if cloud_frac is None and ghi_wm2 is None else
               f"cloud {cloud_frac:g}" if cloud_frac is not None else f"GHI {ghi_wm2:g} W/m²")
        self.label = f"stated: {t_air_c:g} °C, {rh_pct:g} %, {wind_ms:g} m/s at {wind_height_m:g} m, {sky}"
        self.notices = []

    def conditions(self, times, lat: float, lon: float, elev_m: float = 0.0) -> pd.DataFrame:
        times = utc_index(times)
        n = len(times)
        out = pd.DataFrame({C.T_AIR_C: np.full(n, self.t_air_c), C.RH_PCT: np.full(n, self.rh_pct),
                            C.WIND_MS: np.full(n, self.wind_ms)}, index=times)
        if self.pressure_hpa is not None:
            out[C.PRESSURE_HPA] = float(self.pressure_hpa)
        else:
            out[C.PRESSURE_HPA] = standard_pressure_hpa(elev_m)
        add_irradiance(out, times, lat, lon, elev_m, ghi=self.ghi_wm2, cloud_frac=self.cloud_frac)
        out.attrs["wind_height_m"] = self.wind_height_m
        out.attrs["weather"] = self.label
        return out

    def describe(self) -> dict:
        d = super().describe()
        d.update({"t_air_c": self.t_air_c, "rh_pct": self.rh_pct, "wind_ms": self.wind_ms,
                  "cloud_frac": self.cloud_frac, "ghi_wm2": self.ghi_wm2})
        return d



#: Names accepted in stated conditions (``--conditions``), all numbers.
CONDITION_KEYS = ("t_air_c", "rh_pct", "wind_ms", "wind_height_m", "cloud_frac", "ghi_wm2", "pressure_hpa")


def parse_conditions(text: str | None, complete: bool = True) -> dict | None:
    """``"t_air_c=33,rh_pct=30,wind_ms=1.5[,wind_height_m=10][,cloud_frac=0.2]"`` -> dict of floats.

    ``complete=False`` accepts a partial statement (values that fill what a weather file lacks).
    """
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
    if missing and complete:
        raise InputError(f"stated conditions lack {missing}", where="--conditions",
                         fix="write e.g. 't_air_c=33,rh_pct=30,wind_ms=1.5'")
    return out



def open_weather(path=None, conditions: dict | None = None, fmt: str | None = None, column_map=None,
                 typical: bool | None = None, max_distance_km: float = DEFAULT_MAX_DISTANCE_KM,
                 wind_height_m: float | None = None, cloud_frac: float | None = None) -> WeatherSource:
    """A weather source from a file, stated conditions, or both (the statement fills what the file lacks).

    Parameters
    ----------
    path : path, optional
        A weather file (format recognised from its content), a logger CSV or a timeline Parquet.
    conditions : dict, optional
        Stated conditions (:func:`parse_conditions`).
    fmt : str, optional
        One of :data:`FORMAT_CHOICES` instead of recognising the content.
    column_map : path, optional
        TOML column map for a logger CSV (:meth:`LoggerSeries.from_file`).
    typical : bool, optional
        Read a weather file as a typical year (True) or an actual period (False); default
        what the format is.
    max_distance_km, wind_height_m, cloud_frac
        See :class:`WeatherFile` and :class:`LoggerSeries`.
    """
    if path is None:
        if conditions is None:
            raise InputError("give a weather file or stated conditions",
                             fix="pass --weather FILE or --conditions 't_air_c=..,rh_pct=..,wind_ms=..'")
        missing = [k for k in _MET if k not in conditions]
        if missing:
            raise InputError(f"stated conditions lack {missing}", where="--conditions",
                             fix="write e.g. 't_air_c=33,rh_pct=30,wind_ms=1.5'")
        return StatedConditions(**conditions)
    path = Path(path)
    if not path.is_file():
        raise InputError("weather file does not exist", where=path, fix="check the path")
    if fmt is not None and fmt not in FORMAT_CHOICES:
        raise InputError(f"weather format {fmt!r} is not known; allowed {list(FORMAT_CHOICES)}",
                         where="--weather-format", fix="choose one of the listed names")
    conditions = dict(conditions or {})
    cloud = cloud_frac if cloud_frac is not None else conditions.get("cloud_frac")
    if column_map is not None or fmt in ("logger", "timeline"):
        return LoggerSeries.from_file(path, wind_height_m=wind_height_m, cloud_frac=cloud, column_map=column_map)
    if fmt is None:
        if path.read_bytes()[:4] == PARQUET_MAGIC:
            return LoggerSeries.from_file(path, wind_height_m=wind_height_m, cloud_frac=cloud)
        fmt = sniff_file(path)
        if fmt is None:
            return LoggerSeries.from_file(path, wind_height_m=wind_height_m, cloud_frac=cloud)
    fill = {k: v for k, v in conditions.items() if k in (*_MET, C.PRESSURE_HPA, "cloud_frac")}
    height = wind_height_m if wind_height_m is not None else conditions.get("wind_height_m")
    return WeatherFile(path, typical=typical, max_distance_km=max_distance_km, fmt=fmt, fill=fill,
                       wind_height_m=height)
