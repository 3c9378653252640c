"""Sun position and irradiance (through pvlib).

One convention everywhere: elevation is the *apparent* (refraction-corrected)
topocentric elevation, zenith = 90° − elevation, azimuth 0° = north, clockwise
(90° east, 180° south). Times are tz-aware; a naive timestamp is refused.

Sun at or below the horizon means no direct beam; nothing here divides by
cos(zenith) without the low-sun guard.

References
----------
.. [1] Reda, I., Andreas, A. (2004). Solar position algorithm for solar radiation
   applications. Solar Energy 76, 577–589. doi:10.1016/j.solener.2003.12.003
   (NREL/TP-560-34302).
.. [2] Ineichen, P., Perez, R. (2002). A new airmass independent formulation for the
   Linke turbidity coefficient. Solar Energy 73, 151–157.
   doi:10.1016/S0038-092X(02)00045-2
.. [3] Erbs, D. G., Klein, S. A., Duffie, J. A. (1982). Estimation of the diffuse
   radiation fraction for hourly, daily and monthly-average global radiation. Solar
   Energy 28, 293–302. doi:10.1016/0038-092X(82)90302-4
.. [5] Long, C. N., Shi, Y. (2008). An automated quality assessment and control algorithm
   for surface radiation measurements. Open Atmos. Sci. J. 2, 23–37.
   doi:10.2174/1874282300802010023 (BSRN "extremely rare" limits; from memory)
.. [4] Holmgren, W. F., Hansen, C. W., Mikofski, M. A. (2018). pvlib python: a python
   package for modeling solar energy systems. JOSS 3(29), 884. doi:10.21105/joss.00884
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pvlib
from pvlib import spa

from walkcomfort import columns as C
from walkcomfort.environment._arrays import first_index, frame
from walkcomfort.errors import InputError

#: Default air temperature for the refraction correction when none is measured [°C]
#: (pvlib's and SPA's default annual mean).
DEFAULT_T_AIR_C = 12.0
#: Atmospheric refraction at sunrise/sunset used by SPA [°] (SPA default).
ATMOS_REFRACT_DEG = 0.5667


def utc_index(times, where: str = "times") -> pd.DatetimeIndex:
    """Instants as a UTC DatetimeIndex; naive instants are refused (InputError naming ``where``)."""
    idx = pd.DatetimeIndex(times)
    if idx.tz is None:
        raise InputError("times are naive (no time zone)", where=where,
                         fix="localise them, e.g. times.tz_localize('Europe/Madrid') or give UTC")
    return idx.tz_convert("UTC")


def _per_row(value, n: int, default: float) -> np.ndarray:
    if value is None:
        return np.full(n, default, dtype=float)
    arr = np.asarray(value.to_numpy(dtype=float, na_value=np.nan) if isinstance(value, (pd.Series, pd.Index))
                     else value, dtype=float)
    arr = np.broadcast_to(arr, (n,)).astype(float)
    return np.where(np.isfinite(arr), arr, default)


def _unix_seconds(idx: pd.DatetimeIndex) -> np.ndarray:
    return (idx.as_unit("ns").asi8 / 1e9).astype(float)


def solar_position(times, lat, lon, elev_m=0.0, pressure_hpa=None, t_air_c=None,
                   delta_t_s=None) -> pd.DataFrame:
    """Apparent solar elevation, zenith and azimuth by the NREL SPA (pvlib).

    Parameters
    ----------
    times : DatetimeIndex or array of tz-aware timestamps
        Instants of interest (any time zone; naive times are refused).
    lat, lon : float, array or Series
        Latitude and longitude [°] (WGS84), one value or one per time.
    elev_m : float, array or Series, default 0
        Site elevation above sea level [m].
    pressure_hpa : float, array or Series, optional
        Station pressure for the refraction correction [hPa]; default from the
        elevation by the standard atmosphere (pvlib ``alt2pres``). NaN rows use the default.
    t_air_c : float, array or Series, optional
        Air temperature for the refraction correction [°C]; default 12 °C.
    delta_t_s : float, optional
        TT − UT1 [s]; default pvlib's polynomial estimate for the year and month.

    Returns
    -------
    DataFrame
        Index ``times`` (as given); ``sun_elev_deg``, ``sun_zenith_deg`` [°] apparent
        (refraction-corrected), ``sun_azim_deg`` [°] 0 = north, clockwise. NaN where
        the position or time is missing.

    References
    ----------
    Reda & Andreas (2004), doi:10.1016/j.solener.2003.12.003; pvlib ``spa``.
    """
    given = times if isinstance(times, pd.DatetimeIndex) else pd.DatetimeIndex(times)
    idx = utc_index(given)
    n = len(idx)
    lat_a = np.broadcast_to(np.asarray(lat.to_numpy(dtype=float, na_value=np.nan) if isinstance(lat, pd.Series)
                                       else lat, dtype=float), (n,))
    lon_a = np.broadcast_to(np.asarray(lon.to_numpy(dtype=float, na_value=np.nan) if isinstance(lon, pd.Series)
                                       else lon, dtype=float), (n,))
    bad = (np.abs(lat_a) > 90) | (np.abs(lon_a) > 180)
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise InputError(f"latitude/longitude out of range at row {i}: ({lat_a[i]}, {lon_a[i]})",
                         where="solar_position", fix="give WGS84 degrees, latitude -90..90, longitude -180..180")
    elev = _per_row(elev_m, n, 0.0)
    default_p = pvlib.atmosphere.alt2pres(elev) / 100.0
    pres = _per_row(pressure_hpa, n, np.nan)
    pres = np.where(np.isfinite(pres), pres, default_p)
    temp = _per_row(t_air_c, n, DEFAULT_T_AIR_C)
    nat = idx.isna()
    if delta_t_s is None:
        years = np.nan_to_num(np.asarray(idx.year, dtype=float), nan=2000.0)
        months = np.nan_to_num(np.asarray(idx.month, dtype=float), nan=1.0)
        delta_t = np.asarray(spa.calculate_deltat(years, months), dtype=float)
    else:
        delta_t = np.full(n, float(delta_t_s))
    ok = np.isfinite(lat_a) & np.isfinite(lon_a) & ~nat
    zen = np.full(n, np.nan)
    azi = np.full(n, np.nan)
    if ok.any():
        ut = _unix_seconds(idx[ok])
        res = spa.solar_position_numpy(ut, lat_a[ok], lon_a[ok], elev[ok], pres[ok], temp[ok],
                                       np.broadcast_to(delta_t, (n,))[ok], ATMOS_REFRACT_DEG, 1)
        # order returned by SPA: apparent zenith, zenith, apparent elevation, elevation, azimuth, EoT
        zen[ok], azi[ok] = res[0], res[4]
    return pd.DataFrame({C.SUN_ELEV_DEG: 90.0 - zen, C.SUN_ZENITH_DEG: zen, C.SUN_AZIM_DEG: azi}, index=given)


def interval_midpoints(times, period="1h", label: str = "end") -> pd.DatetimeIndex:
    """Instants at which to compute the sun for values that stand for an interval.

    Hourly weather files give each value for the hour that *ends* at its time stamp
    (EPW, TMY3) or *starts* there; the sun for that value belongs to the middle of
    the hour, not to its edge (an error of up to 7.5° in azimuth otherwise).

    Parameters
    ----------
    times : DatetimeIndex
        The file's time stamps (tz-aware).
    period : str or Timedelta, default "1h"
        Length of the interval each value stands for.
    label : {"end", "start"}
        Whether a time stamp marks the end (EPW) or the start of its interval.

    Returns
    -------
    DatetimeIndex
        The interval midpoints, same time zone as ``times``.
    """
    idx = pd.DatetimeIndex(times)
    if idx.tz is None:
        raise InputError("times are naive (no time zone)", where="interval_midpoints",
                         fix="localise the weather file's times to its stated zone first")
    half = pd.Timedelta(period) / 2
    if label == "end":
        return idx - half
    if label == "start":
        return idx + half
    raise InputError(f"label must be 'end' or 'start', got {label!r}", where="interval_midpoints",
                     fix="use label='end' for EPW/TMY files")


def extraterrestrial_irradiance(times) -> pd.Series:
    """Extraterrestrial normal irradiance for each time (Spencer 1971 via pvlib) [W m⁻²].

    Parameters
    ----------
    times : DatetimeIndex
        tz-aware instants.

    Returns
    -------
    Series
        Irradiance at the top of the atmosphere on a plane normal to the sun [W m⁻²].
    """
    idx = pd.DatetimeIndex(times)
    utc_index(idx)
    doy = np.asarray(idx.day_of_year, dtype=float)  # day numbers, not the index (pandas deprecations)
    e0 = np.asarray(pvlib.irradiance.get_extra_radiation(np.nan_to_num(doy, nan=1.0)), dtype=float)
    return pd.Series(np.where(np.isnan(doy), np.nan, e0), index=idx, name="dni_extra_wm2")


def linke_turbidity_by_month(lat: float, lon: float) -> dict[int, float]:
    """Monthly Linke turbidity of a site from pvlib's climatology (one look-up per site).

    Parameters
    ----------
    lat, lon : float
        Site latitude and longitude [°].

    Returns
    -------
    dict
        ``{month: TL}`` for months 1…12 [-].

    References
    ----------
    Remund et al. (2003) climatology shipped with pvlib (``LinkeTurbidities.h5``).
    """
    mid = pd.DatetimeIndex([pd.Timestamp(2001, m, 15, tz="UTC") for m in range(1, 13)])
    tl = pvlib.clearsky.lookup_linke_turbidity(mid, float(lat), float(lon), interp_turbidity=False)
    return {int(m): round(float(v), 4) for m, v in zip(range(1, 13), np.asarray(tl), strict=False)}


def clearsky_irradiance(times, lat, lon, elev_m=0.0, linke_turbidity=None, position=None) -> pd.DataFrame:
    """Clear-sky global, direct and diffuse irradiance (Ineichen–Perez, pvlib).

    The Linke turbidity is looked up once for the site (the mean of ``lat``/``lon``,
    whose 5′ climatology cell covers any walk) and month, and recorded in
    ``attrs["linke_turbidity"]``.

    Parameters
    ----------
    times : DatetimeIndex
        tz-aware instants.
    lat, lon : float, array or Series
        Position [°], one value or one per time.
    elev_m : float, array or Series, default 0
        Elevation above sea level [m].
    linke_turbidity : float or dict, optional
        A fixed TL, or ``{month: TL}``; default the climatology look-up.
    position : DataFrame, optional
        Output of :func:`solar_position` for the same times (saves recomputing it).

    Returns
    -------
    DataFrame
        ``ghi_wm2, dni_wm2, dhi_wm2`` [W m⁻²], zero with the sun at or below the horizon.
        ``attrs["linke_turbidity"] = {"site": [lat, lon], "by_month": {...}}``.

    References
    ----------
    Ineichen & Perez (2002), doi:10.1016/S0038-092X(02)00045-2.
    """
    given = times if isinstance(times, pd.DatetimeIndex) else pd.DatetimeIndex(times)
    idx = utc_index(given)
    n = len(idx)
    if position is None:
        position = solar_position(given, lat, lon, elev_m)
    lat_a = np.broadcast_to(np.asarray(lat, dtype=float), (n,))
    lon_a = np.broadcast_to(np.asarray(lon, dtype=float), (n,))
    site = (float(np.nanmean(lat_a)), float(np.nanmean(lon_a))) if n else (0.0, 0.0)
    months = idx.month.to_numpy() if n else np.array([], dtype=int)
    if linke_turbidity is None:
        by_month = linke_turbidity_by_month(*site) if n and np.isfinite(site).all() else {}
    elif isinstance(linke_turbidity, dict):
        by_month = {int(k): float(v) for k, v in linke_turbidity.items()}
    else:
        by_month = {m: float(linke_turbidity) for m in range(1, 13)}
    tl = np.array([by_month.get(int(m), np.nan) for m in months], dtype=float)
    elev = _per_row(elev_m, n, 0.0)
    zen = position[C.SUN_ZENITH_DEG].to_numpy(dtype=float)
    up = zen < 90.0
    am_rel = pvlib.atmosphere.get_relative_airmass(np.where(up, zen, 89.0), model="kastenyoung1989")
    am_abs = pvlib.atmosphere.get_absolute_airmass(am_rel, pvlib.atmosphere.alt2pres(elev))
    dni_extra = extraterrestrial_irradiance(idx).to_numpy()
    cs = pvlib.clearsky.ineichen(np.where(up, zen, 90.0), am_abs, tl, altitude=elev, dni_extra=dni_extra)
    out = {}
    for key, col in (("ghi", C.GHI_WM2), ("dni", C.DNI_WM2), ("dhi", C.DHI_WM2)):
        v = np.asarray(cs[key], dtype=float)
        v = np.where(up, np.maximum(v, 0.0), 0.0)
        out[col] = np.where(np.isnan(zen), np.nan, v)
    df = pd.DataFrame(out, index=given)
    used = sorted({int(m) for m in months})
    df.attrs["linke_turbidity"] = {"site": [round(site[0], 6), round(site[1], 6)],
                                   "by_month": {str(m): by_month.get(m) for m in used},
                                   "source": "pvlib LinkeTurbidities.h5 (monthly, not interpolated)"
                                   if linke_turbidity is None else "given"}
    return df


def decompose_ghi(ghi_wm2, sun_zenith_deg, times, min_cos_zenith: float = 0.065,
                  max_zenith_deg: float = 87.0) -> pd.DataFrame:
    """Split measured global horizontal irradiance into direct normal and diffuse (Erbs).

    The direct normal irradiance is then bounded by :func:`max_dni` (never above the
    extraterrestrial value times the clear-sky bound) and by GHI/cos Z (the beam on the
    horizontal cannot exceed the global), and the diffuse is the remainder, so
    GHI = DNI·cos Z + DHI holds on every row.

    Low-sun guard: the clearness index uses ``max(cos Z, min_cos_zenith)`` and the
    direct beam is set to zero for zenith above ``max_zenith_deg`` (pvlib's guards);
    with the sun at or below the horizon all of GHI is diffuse and DNI is zero.
    Negative GHI (thermopile offset at night) is treated as zero.

    Parameters
    ----------
    ghi_wm2 : array or Series
        Global horizontal irradiance [W m⁻²].
    sun_zenith_deg : array or Series
        Solar zenith [°]. Erbs et al. used the true zenith; the apparent zenith of
        :func:`solar_position` differs by < 0.1° above 10° elevation, below the guard
        the difference does not matter.
    times : DatetimeIndex
        tz-aware instants (for the day of year).
    min_cos_zenith : float, default 0.065
        Floor of cos Z in the clearness index [-].
    max_zenith_deg : float, default 87
        Zenith above which DNI is set to 0 [°].

    Returns
    -------
    DataFrame
        ``dni_wm2, dhi_wm2`` [W m⁻²]; index of ``ghi_wm2`` if a Series, else ``times``.

    References
    ----------
    Erbs et al. (1982), doi:10.1016/0038-092X(82)90302-4; pvlib ``irradiance.erbs``.
    """
    given = times if isinstance(times, pd.DatetimeIndex) else pd.DatetimeIndex(times)
    idx = utc_index(given)
    index = first_index(ghi_wm2, sun_zenith_deg)
    index = given if index is None else index
    ghi = np.maximum(np.asarray(ghi_wm2, dtype=float), 0.0)
    ghi = np.where(np.isnan(np.asarray(ghi_wm2, dtype=float)), np.nan, ghi)
    zen = np.asarray(sun_zenith_deg, dtype=float)
    doy = idx.day_of_year.to_numpy(dtype=float)
    res = pvlib.irradiance.erbs(ghi, np.where(np.isnan(zen), 90.0, zen), doy,
                                min_cos_zenith=min_cos_zenith, max_zenith=max_zenith_deg)
    dni = np.asarray(res["dni"], dtype=float)
    dni = np.minimum(dni, max_dni(zen, idx))  # never above the clear-sky bound
    cosz = np.clip(np.cos(np.radians(np.where(np.isnan(zen), 90.0, zen))), 0.0, None)
    dni = np.clip(np.minimum(dni, np.where(cosz > 0, ghi / np.where(cosz > 0, cosz, 1.0), 0.0)), 0.0, None)
    dhi = ghi - dni * cosz  # closure: the diffuse takes what the beam cannot
    night = zen >= 90.0
    dni = np.where(night, 0.0, dni)
    dhi = np.where(night, ghi, dhi)
    bad = np.isnan(ghi) | np.isnan(zen)
    return frame({C.DNI_WM2: np.where(bad, np.nan, dni), C.DHI_WM2: np.where(bad, np.nan, dhi)}, index)


#: Share of the extraterrestrial normal irradiance a clear atmosphere can pass toward a
#: sun at the zenith, and the air-mass exponent, of the BSRN "extremely rare" upper limit
#: for direct normal irradiance, DNI ≤ 0.95·E₀·cos(Z)^0.2 + 10 W m⁻² (Long & Shi 2008;
#: from memory). The +10 W m⁻² instrument allowance is dropped here: it is a bound for
#: modelled beams, not for noisy measurements.
DNI_BOUND_FRAC = 0.95
DNI_BOUND_EXP = 0.2
#: Largest clear-sky index a stated global irradiance may imply (cloud enhancement under
#: broken cloud reaches 1.1–1.5 for minutes, not for an hour; common practice).
MAX_CLEAR_INDEX = 1.2


def max_dni(sun_zenith_deg, times) -> np.ndarray:
    """Largest physically plausible direct normal irradiance [W m⁻²] at each time.

    ``0.95·E₀·cos(Z)^0.2`` with E₀ the extraterrestrial normal irradiance of the day
    (Spencer 1971 via pvlib) — the BSRN "extremely rare" limit of Long & Shi (2008), from
    memory; zero with the sun at or below the horizon. Always below E₀.
    """
    zen = np.asarray(sun_zenith_deg, dtype=float)
    e0 = extraterrestrial_irradiance(times).to_numpy()
    cosz = np.clip(np.cos(np.radians(np.where(np.isnan(zen), 90.0, zen))), 0.0, None)
    out = DNI_BOUND_FRAC * e0 * np.power(cosz, DNI_BOUND_EXP)
    return np.where(np.isnan(zen), np.nan, np.where(zen < 90.0, out, 0.0))


def stated_ghi_to_series(ghi_wm2: float, times, lat, lon, elev_m=0.0, position=None,
                         where: str = "ghi_wm2") -> pd.DataFrame:
    """A single stated global irradiance turned into a clear-sky index applied at each time.

    The stated value is read as the global irradiance at the day's highest sun: its
    ratio to the clear-sky global irradiance at solar noon of that day (Ineichen–Perez)
    is the clear-sky index :math:`k_c`, and each time step gets
    :math:`k_c \\cdot GHI_{clear}(t)`, split by Erbs with the bounds of :func:`decompose_ghi`.
    A stated value that would need :math:`k_c` above :data:`MAX_CLEAR_INDEX` is refused:
    no sky at that site and date gives it.

    Returns
    -------
    DataFrame
        ``ghi_wm2, dni_wm2, dhi_wm2`` [W m⁻²] on ``times``; ``attrs["clear_index"]``.
    """
    given = times if isinstance(times, pd.DatetimeIndex) else pd.DatetimeIndex(times)
    idx = utc_index(given, where)
    if position is None:
        position = solar_position(given, lat, lon, elev_m)
    cs = clearsky_irradiance(given, lat, lon, elev_m=elev_m, position=position)
    lat_m = float(np.nanmean(np.broadcast_to(np.asarray(lat, float), (len(idx),)))) if len(idx) else 0.0
    lon_m = float(np.nanmean(np.broadcast_to(np.asarray(lon, float), (len(idx),)))) if len(idx) else 0.0
    days = idx.floor("D").unique()
    noon_ghi = {}
    for d in days:
        fine = pd.date_range(d, periods=24 * 12, freq="5min")
        c = clearsky_irradiance(fine, lat_m, lon_m, elev_m=float(np.nanmean(np.asarray(elev_m, float))))
        noon_ghi[d] = float(c[C.GHI_WM2].max())
    ref = np.array([noon_ghi[d] for d in idx.floor("D")], dtype=float)
    kc = np.where(ref > 0, float(ghi_wm2) / np.where(ref > 0, ref, 1.0), 0.0)
    if (kc > MAX_CLEAR_INDEX).any():
        i = int(np.argmax(kc))
        raise InputError(f"a global irradiance of {ghi_wm2:g} W/m² is {kc[i]:.2f}× the clear-sky value at the "
                         f"highest sun of {idx[i].date()} here ({ref[i]:.0f} W/m²), more than any sky gives",
                         where=where, fix=f"state at most {MAX_CLEAR_INDEX * ref[i]:.0f} W/m² (the value at the "
                         "day's highest sun), or give a weather file with hourly irradiance")
    ghi = kc * cs[C.GHI_WM2].to_numpy(float)
    dec = decompose_ghi(ghi, position[C.SUN_ZENITH_DEG].to_numpy(float), given)
    out = pd.DataFrame({C.GHI_WM2: ghi, C.DNI_WM2: dec[C.DNI_WM2].to_numpy(), C.DHI_WM2: dec[C.DHI_WM2].to_numpy()},
                       index=given)
    out.attrs["clear_index"] = {str(d.date()): round(float(ghi_wm2) / noon_ghi[d], 4) if noon_ghi[d] > 0 else None
                                for d in days}
    return out
