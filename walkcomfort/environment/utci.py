"""Universal Thermal Climate Index (UTCI) and its ten stress bands.

The index itself is the operational polynomial of Bröde et al. (2012) as implemented
by ``thermofeel``; this module adds what a walking study needs around it: the wind
height conversion the index expects (10 m), the validity range flagged row by row,
the 0.5 m s⁻¹ wind floor applied with a flag and a count, and the assessment-scale
band names from :data:`walkcomfort.columns.UTCI_BANDS`.

Caution: UTCI describes the thermal stress of a reference person walking at
4 km h⁻¹; it is not an occupational exposure limit. For heat-health decisions during
field work follow local occupational-health guidance.

References
----------
.. [1] Bröde, P., Fiala, D., Błażejczyk, K., Holmér, I., Jendritzky, G., Kampmann, B.,
   Tinz, B., Havenith, G. (2012). Deriving the operational procedure for the Universal
   Thermal Climate Index (UTCI). Int. J. Biometeorol. 56, 481–494.
   doi:10.1007/s00484-011-0454-1
.. [2] Hardy, B. (1998). ITS-90 formulations for vapor pressure, frostpoint
   temperature, dewpoint temperature, and enhancement factors in the range −100 to
   +100 °C. Proc. Third Int. Symp. Humidity & Moisture, London.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import thermofeel

from walkcomfort import columns as C
from walkcomfort.environment._arrays import all_scalar, as_float_arrays, first_index, frame, wrap
from walkcomfort.errors import InputError, ValidityRangeWarning

#: Validity range of the UTCI polynomial (Bröde et al. 2012, section "Operational procedure").
VALID_T_AIR_C = (-50.0, 50.0)
VALID_TMRT_MINUS_TAIR_K = (-30.0, 70.0)
VALID_WIND10_MS = (0.5, 17.0)
VALID_VAPOUR_HPA = (0.0, 50.0)

#: Roughness length of the log wind profile assumed by the UTCI procedure [m]
#: (Bröde et al. 2012 use z0 = 0.01 m to relate 10 m wind to lower heights).
Z0_UTCI_M = 0.01


def wind_at_10m(wind_ms, height_m, z0_m: float = Z0_UTCI_M):
    """Convert wind measured at ``height_m`` to 10 m by the logarithmic profile.

    .. math:: v_{10} = v_z \\, \\ln(10/z_0) / \\ln(z/z_0)

    Parameters
    ----------
    wind_ms : float, array or Series
        Wind speed at the sensor height [m s⁻¹].
    height_m : float, array or Series
        Sensor height above ground [m]; must exceed ``z0_m``.
    z0_m : float, default 0.01
        Aerodynamic roughness length [m]. 0.01 m is the value the UTCI operational
        procedure assumes; it is not a description of the street's real roughness.

    Returns
    -------
    float, array or Series
        Wind speed at 10 m [m s⁻¹], same type as ``wind_ms``.

    References
    ----------
    Bröde et al. (2012), doi:10.1007/s00484-011-0454-1.
    """
    index, scalar = first_index(wind_ms, height_m), all_scalar(wind_ms, height_m)
    v, z = as_float_arrays(wind_ms, height_m)
    if np.any(z[np.isfinite(z)] <= z0_m) or z0_m <= 0:
        raise InputError(f"wind sensor height must be above the roughness length z0 = {z0_m} m "
                         f"(got min {np.nanmin(z)} m)", where="wind_at_10m",
                         fix="give the sensor height in metres above ground (e.g. wind_height_m = 1.1)")
    out = v * np.log(10.0 / z0_m) / np.log(z / z0_m)
    return wrap(out, index, scalar, name=C.WIND10_MS)


def vapour_pressure_hpa(t_air_c, rh_pct):
    """Water vapour pressure from air temperature and relative humidity.

    Saturation over water by Hardy (1998) (the ITS-90 formulation that
    ``thermofeel`` and the UTCI reference code use), times ``rh_pct / 100``.

    Parameters
    ----------
    t_air_c : float, array or Series
        Air temperature [°C].
    rh_pct : float, array or Series
        Relative humidity [%].

    Returns
    -------
    float, array or Series
        Vapour pressure [hPa].
    """
    index, scalar = first_index(t_air_c, rh_pct), all_scalar(t_air_c, rh_pct)
    ta, rh = as_float_arrays(t_air_c, rh_pct)
    with np.errstate(invalid="ignore"):
        e = thermofeel.calculate_saturation_vapour_pressure(ta + 273.15) * rh / 100.0
    return wrap(e, index, scalar)


def utci_from_conditions(t_air_c, tmrt_c, wind10_ms, rh_pct, warn: bool = True) -> pd.DataFrame:
    """UTCI from air temperature, mean radiant temperature, 10 m wind and humidity.

    Rows outside the polynomial's validity range are computed anyway (the polynomial
    extrapolates) and flagged in ``qa_utci_out_of_range``; treat their values with
    care. Wind below 0.5 m s⁻¹ at 10 m is raised to 0.5 m s⁻¹, the lowest wind the
    polynomial was fitted for, and flagged in ``qa_wind_clamped``. Nothing is dropped.

    Parameters
    ----------
    t_air_c : float, array or Series
        Air temperature [°C]; valid −50…50 °C.
    tmrt_c : float, array or Series
        Mean radiant temperature [°C]; valid from 30 K below to 70 K above air temperature.
    wind10_ms : float, array or Series
        Wind speed at 10 m [m s⁻¹] (see :func:`wind_at_10m`); valid 0.5…17 m s⁻¹.
    rh_pct : float, array or Series
        Relative humidity [%]; the vapour pressure must stay ≤ 50 hPa.
    warn : bool, default True
        Emit one :class:`~walkcomfort.errors.ValidityRangeWarning` when any row is
        outside the validity range (wind clamps alone do not warn; they are counted).

    Returns
    -------
    DataFrame
        ``utci_c`` [°C], ``qa_utci_out_of_range`` (bool), ``qa_wind_clamped`` (bool);
        index of the first Series argument (else a RangeIndex). ``attrs["qa_counts"]``
        holds the number of out-of-range and clamped rows. NaN inputs give NaN
        ``utci_c`` and False flags.

    References
    ----------
    Bröde et al. (2012), doi:10.1007/s00484-011-0454-1 (polynomial and validity range);
    thermofeel ``calculate_utci`` (implementation, inputs in K and hPa).
    """
    index = first_index(t_air_c, tmrt_c, wind10_ms, rh_pct)
    ta, tr, v, rh = (np.atleast_1d(a) for a in as_float_arrays(t_air_c, tmrt_c, wind10_ms, rh_pct))
    ehpa = np.atleast_1d(vapour_pressure_hpa(ta, rh))
    finite = np.isfinite(ta) & np.isfinite(tr) & np.isfinite(v) & np.isfinite(rh)
    with np.errstate(invalid="ignore"):
        clamped = finite & (v < VALID_WIND10_MS[0])
        v_used = np.where(clamped, VALID_WIND10_MS[0], v)
        dtr = tr - ta
        out_of_range = finite & (
            (ta < VALID_T_AIR_C[0]) | (ta > VALID_T_AIR_C[1])
            | (dtr < VALID_TMRT_MINUS_TAIR_K[0]) | (dtr > VALID_TMRT_MINUS_TAIR_K[1])
            | (v_used > VALID_WIND10_MS[1])
            | (ehpa < VALID_VAPOUR_HPA[0]) | (ehpa > VALID_VAPOUR_HPA[1]) | (rh > 100.0) | (rh < 0.0)
        )
        utci = np.full(ta.shape, np.nan)
        if finite.any():
            # thermofeel expects kelvin for both temperatures and hPa for vapour pressure
            utci_k = thermofeel.calculate_utci(t2_k=ta[finite] + 273.15, va=v_used[finite],
                                               mrt=tr[finite] + 273.15, ehPa=ehpa[finite])
            utci[finite] = np.asarray(utci_k, dtype=float) - 273.15
    df = frame({C.UTCI_C: utci, C.QA_UTCI_RANGE: out_of_range, C.QA_WIND_CLAMPED: clamped}, index)
    counts = {"rows": int(len(df)), "out_of_range": int(out_of_range.sum()), "wind_clamped": int(clamped.sum())}
    df.attrs["qa_counts"] = counts
    if warn and counts["out_of_range"]:
        warnings.warn(f"{counts['out_of_range']} of {counts['rows']} rows are outside the UTCI validity range "
                      "(Ta -50..50 °C, Tmrt-Ta -30..70 K, v10 0.5..17 m/s, e <= 50 hPa); values are "
                      f"extrapolated and flagged in {C.QA_UTCI_RANGE}", ValidityRangeWarning, stacklevel=2)
    return df


#: UTCI band edges ascending [°C]; a value equal to an edge belongs to the lower band
#: (upper bounds inclusive, as in :data:`walkcomfort.columns.UTCI_BANDS`).
_BANDS_ASC = tuple(reversed(C.UTCI_BANDS))
_EDGES = np.array([b[1] for b in _BANDS_ASC[:-1]])
_NAMES = np.array([b[2] for b in _BANDS_ASC], dtype=object)


def utci_band(utci_c):
    """Name of the UTCI assessment-scale stress band of each value.

    Parameters
    ----------
    utci_c : float, array or Series
        UTCI [°C].

    Returns
    -------
    str, ndarray of object or Series
        One of the ten names in :data:`walkcomfort.columns.UTCI_BANDS` (``None``/NaN
        where the UTCI is missing). Upper bounds are inclusive: 46.0 °C is
        "very strong heat stress", 46.01 °C "extreme heat stress".

    References
    ----------
    Bröde et al. (2012), doi:10.1007/s00484-011-0454-1, Table of the assessment scale.
    """
    index, scalar = first_index(utci_c), all_scalar(utci_c)
    (u,) = as_float_arrays(utci_c)
    u1 = np.atleast_1d(u)
    idx = np.searchsorted(_EDGES, np.where(np.isfinite(u1), u1, 0.0), side="left")
    names = _NAMES[idx].astype(object)
    names[~np.isfinite(u1)] = None
    if index is not None:
        return pd.Series(names, index=index, name=C.UTCI_BAND, dtype=object)
    if scalar:
        return names[0]
    return names.reshape(np.shape(u))
