"""Wet-bulb globe temperature (WBGT): recorded walks, planned walks and open ground.

Three routes to the WBGT of ISO 7243 (0.7 natural wet-bulb + 0.2 globe + 0.1 air, outdoors):

* recorded walks, from the walking logger's globe: :func:`wbgt_from_logger` (lives in
  :mod:`walkcomfort.session.heat_safety`, because ``ingest`` needs it and the session stage
  may not import this one; re-exported here with the sensor models it uses);
* planned walks, from the environment stage's radiation (sun, shade, sky view):
  :func:`wbgt_from_radiation` — the radiant field a 150 mm black globe sees is built from
  the same six-direction fluxes as the walker's Tmrt (:func:`walkcomfort.environment.tmrt.outdoor_fluxes`)
  but with a sphere's weights and a black globe's absorptivity, then the globe and wick
  energy balances of Liljegren et al. (2008) give the globe and natural wet-bulb temperatures;
* open ground with known sun (a weather-station reading): :func:`wbgt_liljegren`, the
  Liljegren et al. (2008) model as implemented by ``thermofeel`` (its 50.8 mm globe).

Caution: WBGT estimated for a planned walk is a planning figure, not a heat-safety
assessment; on the day follow the heat-health service and a WBGT instrument
(``field_protocol/safety.md``), local occupational-health guidance and local codes.

References
----------
.. [1] Liljegren, J. C., Carhart, R. A., Lawday, P., Tschopp, S., Sharp, R. (2008).
   Modeling the wet bulb globe temperature using standard meteorological measurements.
   J. Occup. Environ. Hyg. 5(10), 645–655. doi:10.1080/15459620802310770
.. [2] ISO 7243:2017 Ergonomics of the thermal environment — Assessment of heat stress
   using the WBGT (wet bulb globe temperature) index.
.. [3] Thorsson, S., Lindberg, F., Eliasson, I., Holmer, B. (2007). Different methods for
   estimating the mean radiant temperature in an outdoor urban setting. Int. J.
   Climatol. 27, 1983–1993. doi:10.1002/joc.1537 (six-direction fluxes).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import thermofeel

from walkcomfort.environment._arrays import first_index
from walkcomfort.environment.tmrt import outdoor_fluxes
from walkcomfort.environment.utci import wind_at_10m
from walkcomfort.session.heat_safety import (
    SIGMA,
    STANDARD_GLOBE_EMISSIVITY,
    STANDARD_PRESSURE_HPA,
    T_GLOBE150_C,
    T_NWB_C,
    T_RAD_C,
    WBGT_C,
    globe_temperature_c,
    natural_wet_bulb_c,
    radiant_temperature_from_globe,
    saturation_vapour_pressure_hpa,
    wbgt_from_logger,
    wbgt_indoor_c,
    wbgt_outdoor_c,
)

__all__ = ["WBGT_C", "T_NWB_C", "T_GLOBE150_C", "T_RAD_C", "globe_temperature_c", "natural_wet_bulb_c",
           "radiant_temperature_from_globe", "saturation_vapour_pressure_hpa", "wbgt_from_logger",
           "wbgt_indoor_c", "wbgt_outdoor_c", "globe_radiant_temperature", "wbgt_from_radiation",
           "wbgt_liljegren"]

#: Projected-area factor of a sphere for a beam from any direction (cross-section / surface = 1/4).
SPHERE_PROJECTED_AREA = 0.25


def globe_radiant_temperature(fluxes: pd.DataFrame, absorptivity: float = STANDARD_GLOBE_EMISSIVITY,
                              emissivity: float = STANDARD_GLOBE_EMISSIVITY):
    """Radiant temperature a black globe sees [°C], from six-direction fluxes.

    .. math::

        T_r = \\left(\\frac{a\\,(\\bar K + \\tfrac14 I) + \\varepsilon \\bar L}{\\varepsilon\\sigma}\\right)^{1/4}

    with :math:`\\bar K, \\bar L` the means of the six directional short- and long-wave
    fluxes (a sphere weights every direction alike, 1/6) and :math:`I` the direct beam
    normal irradiance reaching the globe (projected area factor 1/4 for a sphere).

    Parameters
    ----------
    fluxes : DataFrame
        ``k_down, k_up, k_side, l_down, l_up, l_side, beam_normal_wm2`` [W m⁻²], as
        :func:`walkcomfort.environment.tmrt.outdoor_fluxes` returns them.
    absorptivity, emissivity : float
        The globe's short-wave absorptivity and emissivity [-] (0.95: a black globe).
    """
    f = fluxes
    k = (f["k_down"] + f["k_up"] + 4.0 * f["k_side"]) / 6.0
    lw = (f["l_down"] + f["l_up"] + 4.0 * f["l_side"]) / 6.0
    absorbed = absorptivity * (k + SPHERE_PROJECTED_AREA * f["beam_normal_wm2"].clip(lower=0.0)) + emissivity * lw
    with np.errstate(invalid="ignore"):
        return (np.power(absorbed / (emissivity * SIGMA), 0.25) - 273.15).rename(T_RAD_C)


def wbgt_from_radiation(sun_elev_deg, dni_wm2, dhi_wm2, beam_trans_frac, svf, t_air_c, rh_pct, wind_ms,
                        pressure_hpa=STANDARD_PRESSURE_HPA, **flux_options) -> pd.DataFrame:
    """WBGT for a walker's position from sun, shade, sky view and weather (planned walks).

    Builds the radiant field with :func:`walkcomfort.environment.tmrt.outdoor_fluxes`
    (keyword arguments go there), turns it into the radiant temperature of a black globe
    (:func:`globe_radiant_temperature`), and solves the 150 mm globe and the natural
    wet-bulb in it (Liljegren et al. 2008 energy balances) at the given wind.

    Parameters
    ----------
    sun_elev_deg : float, array or Series
        Sun elevation [°].
    dni_wm2, dhi_wm2 : float, array or Series
        Direct normal and diffuse horizontal irradiance [W m⁻²].
    beam_trans_frac, svf : float, array or Series
        Beam transmittance (1 = sunlit) and sky view factor [-].
    t_air_c, rh_pct : float, array or Series
        Air temperature [°C], relative humidity [%].
    wind_ms : float, array or Series
        Wind at about 1.1 m, the height of the WBGT instrument [m s⁻¹].
    pressure_hpa : float, array or Series
        Air pressure [hPa].

    Returns
    -------
    DataFrame
        ``wbgt_c, t_nwb_c, t_globe150_c, t_rad_c`` [°C], on the first Series' index.
    """
    args = (sun_elev_deg, dni_wm2, dhi_wm2, beam_trans_frac, svf, t_air_c, rh_pct, wind_ms, pressure_hpa)
    index = first_index(*args)
    arrays = [np.atleast_1d(np.asarray(a.to_numpy(dtype=float, na_value=np.nan) if isinstance(a, pd.Series) else a,
                                       dtype=float)) for a in args]
    elev, dni, dhi, tau, psi, ta, rh, v, p = np.broadcast_arrays(*arrays)
    fl = outdoor_fluxes(elev, dni, dhi, tau, psi, ta, rh, **flux_options)
    tr = globe_radiant_temperature(fl).to_numpy()
    p = np.where(np.isfinite(p), p, STANDARD_PRESSURE_HPA)
    tg = globe_temperature_c(tr, ta, v, p)
    tnwb = natural_wet_bulb_c(ta, rh, v, tr, p)
    return pd.DataFrame({WBGT_C: wbgt_outdoor_c(tnwb, tg, ta), T_NWB_C: tnwb, T_GLOBE150_C: tg, T_RAD_C: tr},
                        index=index if index is not None else pd.RangeIndex(len(ta)))


def wbgt_liljegren(t_air_c, rh_pct, wind10_ms, ghi_wm2, direct_frac, cos_zenith,
                   pressure_hpa=STANDARD_PRESSURE_HPA, wind_scaling: str = "liljegren"):
    """WBGT on open ground by Liljegren et al. (2008), as ``thermofeel.calculate_wbgt_liljegren`` computes it [°C].

    Inputs are those of a weather station: wind at 10 m (scaled to 2 m by Liljegren's
    stability-dependent profile), global horizontal irradiance and its direct fraction,
    the cosine of the solar zenith angle. The model's globe is 50.8 mm (not ISO 7243's
    150 mm); it knows no shade. ``wind_scaling="brode"`` uses the plain log profile instead
    of the stability-dependent one (thermofeel's option).

    Returns
    -------
    float array or Series
        WBGT [°C]; NaN where the model's iteration does not converge.
    """
    args = (t_air_c, rh_pct, wind10_ms, ghi_wm2, direct_frac, cos_zenith, pressure_hpa)
    index = first_index(*args)
    arrays = np.broadcast_arrays(*[np.atleast_1d(np.asarray(
        a.to_numpy(dtype=float, na_value=np.nan) if isinstance(a, pd.Series) else a, dtype=float)) for a in args])
    ta, rh, v, ghi, fdir, cz, p = arrays
    out = thermofeel.calculate_wbgt_liljegren(ta + 273.15, rh, p, v, ghi, fdir, cz, wind_scaling=wind_scaling) - 273.15
    return pd.Series(out, index=index, name=WBGT_C) if index is not None else out


#: Shown wherever a planned walk's WBGT appears.
PLANNING_CAUTION = ("WBGT along planned walks is a planning estimate from the weather given, not a heat-safety "
                    "assessment: on the day follow the heat-health service, a WBGT instrument on site, local "
                    "occupational-health guidance and field_protocol/safety.md")
#: Height of the WBGT instrument and of a walker's trunk [m] (ISO 7243 measures at abdomen height, from memory).
WBGT_HEIGHT_M = 1.1


def wbgt_for_points(points: pd.DataFrame) -> pd.DataFrame:
    """WBGT for a per-point table of a planned walk (the environment columns of the prediction table).

    Uses ``sun_elev_deg, dni_wm2, dhi_wm2, beam_trans_frac, svf, t_air_c, rh_pct`` and the
    wind at 10 m (``wind10_ms``, brought to 1.1 m by the log profile the UTCI stage uses),
    ``pressure_hpa`` when present. Returns :func:`wbgt_from_radiation`'s columns on the
    table's index.
    """
    need = ["sun_elev_deg", "dni_wm2", "dhi_wm2", "beam_trans_frac", "svf", "t_air_c", "rh_pct", "wind10_ms"]
    missing = [c for c in need if c not in points.columns]
    if missing:
        raise ValueError(f"the table lacks {missing} for WBGT; it needs the environment columns {need}")
    wind = points["wind10_ms"] / wind_at_10m(1.0, WBGT_HEIGHT_M)
    out = wbgt_from_radiation(points["sun_elev_deg"], points["dni_wm2"], points["dhi_wm2"], points["beam_trans_frac"],
                              points["svf"], points["t_air_c"], points["rh_pct"], wind,
                              points["pressure_hpa"] if "pressure_hpa" in points.columns else STANDARD_PRESSURE_HPA)
    out.index = points.index
    return out


def wbgt_minutes_above(points: pd.DataFrame, limit_c: float, by: list[str], step_col: str = "step_s") -> pd.DataFrame:
    """Per group of ``by``: minutes with ``wbgt_c`` above ``limit_c`` (each row counts ``step_col`` seconds),
    the peak and the time-weighted mean WBGT.

    Returns
    -------
    DataFrame
        ``by`` columns + ``wbgt_limit_c, wbgt_min_above_limit, wbgt_peak_c, wbgt_mean_c``.
    """
    dt = points[step_col].to_numpy(float)
    w = points[WBGT_C].to_numpy(float)
    frame = points[by].copy()
    frame["above"] = (np.nan_to_num(w, nan=-np.inf) > limit_c) * dt / 60.0
    frame["w_dt"], frame["dt"], frame["w"] = w * dt, np.where(np.isnan(w), 0.0, dt), w
    g = frame.groupby(by, sort=False)
    out = pd.DataFrame({"wbgt_min_above_limit": g["above"].sum(), "wbgt_peak_c": g["w"].max(),
                        "wbgt_mean_c": g["w_dt"].sum() / g["dt"].sum()}).reset_index()
    out.insert(len(by), "wbgt_limit_c", float(limit_c))
    return out
