"""What every weather source shares: the interface and the sky helpers.

A source answers :meth:`WeatherSource.conditions` — air temperature, humidity, wind
(with its measurement height), pressure and the three irradiance components at
given instants at a given site — so a simulated walk does not care where its
weather came from (a file, a logger, stated values).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.environment import sun
from walkcomfort.environment.sky import cloud_scaled_ghi
from walkcomfort.routes.weatherfiles import WEATHER_COLUMNS

#: Weather files and loggers without a stated height measure wind at 10 m
#: (WMO standard exposure; common practice for airport stations in TMY/EPW).
STATION_WIND_HEIGHT_M = 10.0

__all__ = ["STATION_WIND_HEIGHT_M", "WEATHER_COLUMNS", "WeatherSource", "add_irradiance", "clearsky",
           "standard_pressure_hpa", "split_ghi", "sun_position", "utc_index"]


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


def utc_index(times) -> pd.DatetimeIndex:
    """Walk instants as a UTC DatetimeIndex (naive instants are refused)."""
    return sun.utc_index(times, where="walk times")


def sun_position(times: pd.DatetimeIndex, lat: float, lon: float, elev_m: float) -> pd.DataFrame:
    return sun.solar_position(times, lat, lon, elev_m=elev_m)


def clearsky(times: pd.DatetimeIndex, lat: float, lon: float, elev_m: float) -> pd.DataFrame:
    return sun.clearsky_irradiance(times, lat, lon, elev_m=elev_m)


def standard_pressure_hpa(elev_m: float) -> float:
    """Station pressure of the standard atmosphere at an elevation [hPa] (pvlib ``alt2pres``)."""
    from pvlib.atmosphere import alt2pres

    return float(alt2pres(elev_m)) / 100.0


def split_ghi(ghi: np.ndarray, times: pd.DatetimeIndex, lat: float, lon: float, elev_m: float):
    """Direct normal and diffuse from global horizontal (Erbs et al. 1982 via the environment stage)."""
    zen = sun_position(times, lat, lon, elev_m)[C.SUN_ZENITH_DEG]
    parts = sun.decompose_ghi(pd.Series(ghi, index=times), zen, times)
    return parts[C.DNI_WM2].to_numpy(float), parts[C.DHI_WM2].to_numpy(float)


def add_irradiance(out: pd.DataFrame, times, lat, lon, elev_m, ghi=None, cloud_frac=None) -> None:
    """Add ``ghi/dni/dhi_wm2`` to ``out``: clear sky, clear sky under a cloud cover, or a given GHI split.

    One stated GHI is read as the value at the day's highest sun and becomes a clear-sky
    index applied at every time (:func:`walkcomfort.environment.sun.stated_ghi_to_series`).
    """
    cs = clearsky(times, lat, lon, elev_m)
    if ghi is None and cloud_frac is None:
        for k in (C.GHI_WM2, C.DNI_WM2, C.DHI_WM2):
            out[k] = cs[k].to_numpy(float)
        return
    if cloud_frac is None and np.ndim(ghi) == 0:
        # one stated GHI: a clear-sky index applied at each time (refused when no sky gives it)
        st = sun.stated_ghi_to_series(float(ghi), times, lat, lon, elev_m, where="--conditions ghi_wm2")
        for k in (C.GHI_WM2, C.DNI_WM2, C.DHI_WM2):
            out[k] = st[k].to_numpy(float)
        return
    if cloud_frac is not None:
        g = cloud_scaled_ghi(cs[C.GHI_WM2].to_numpy(float), cloud_frac)
    else:
        g = np.broadcast_to(np.asarray(ghi, float), (len(times),)).astype(float).copy()
        zen = sun_position(times, lat, lon, elev_m)[C.SUN_ZENITH_DEG].to_numpy(float)
        g[zen >= 90.0] = 0.0
    g = np.nan_to_num(g, nan=0.0)
    dni, dhi = split_ghi(g, times, lat, lon, elev_m)
    out[C.GHI_WM2] = g
    out[C.DNI_WM2] = np.nan_to_num(dni, nan=0.0)
    out[C.DHI_WM2] = np.nan_to_num(dhi, nan=0.0)
