"""Indices beside UTCI, computed by the environment chain when asked: PET and WBGT.

:func:`extra_index_columns` takes what the chain has already computed (air, humidity,
Tmrt, wind at 10 m, sun, irradiance, shade, sky view, the globe where one was read) and
adds

* ``pet_c`` [°C] and ``pet_class`` — PET of the reference person
  (:mod:`walkcomfort.environment.pet`, interpolated between grid corners), with the wind
  brought from 10 m to 1.1 m by the same log profile the chain used to go up;
* ``wbgt_c`` [°C] — WBGT: from the logger's globe where one was read
  (:func:`walkcomfort.session.heat_safety.wbgt_from_logger`), otherwise from the radiation
  (:func:`walkcomfort.environment.wbgt.wbgt_from_radiation`).

Caution: WBGT for planned walks is a planning estimate, not a heat-safety assessment
(:data:`walkcomfort.environment.wbgt.PLANNING_CAUTION`).
"""

from __future__ import annotations

import numpy as np

from walkcomfort.environment import pet as _pet
from walkcomfort.environment import wbgt as _wbgt
from walkcomfort.errors import InputError

#: Index names a caller may ask for, beside UTCI (always computed).
EXTRA_INDICES = ("pet", "wbgt")
#: Columns each adds.
INDEX_COLUMNS = {"pet": (_pet.PET_C, _pet.PET_CLASS), "wbgt": (_wbgt.WBGT_C,)}


def check_indices(names) -> tuple[str, ...]:
    """The requested extra indices, checked (an unknown name is an InputError naming the allowed ones)."""
    names = tuple(dict.fromkeys(str(n).strip().lower() for n in (names or ())))
    unknown = [n for n in names if n not in EXTRA_INDICES and n != "utci"]
    if unknown:
        raise InputError(f"unknown index {unknown[0]!r}", where="indices",
                         fix=f"choose from utci (always computed), {', '.join(EXTRA_INDICES)}")
    return tuple(n for n in names if n != "utci")


def extra_columns(names) -> tuple[str, ...]:
    """The column names the requested extra indices add (checked as :func:`check_indices` does)."""
    return tuple(c for n in check_indices(names) for c in INDEX_COLUMNS[n])


def wind_from_10m(wind10_ms, height_m: float, z0_m: float):
    """Wind at ``height_m`` from the wind at 10 m, by the logarithmic profile with roughness ``z0_m`` [m s⁻¹]."""
    return np.asarray(wind10_ms, dtype=float) * np.log(height_m / z0_m) / np.log(10.0 / z0_m)


def extra_index_columns(names, *, t_air_c, rh_pct, tmrt_c, wind10_ms, pressure_hpa, sun_elev_deg, dni_wm2,
                        dhi_wm2, beam_trans_frac, svf, t_globe_c=None, globe=None, z0_m: float = 0.01,
                        flux_options: dict | None = None) -> dict:
    """The columns of the requested extra indices, as 1-D arrays (one value per chain row).

    Parameters
    ----------
    names : iterable of str
        Any of :data:`EXTRA_INDICES` ("utci" is accepted and ignored: the chain always computes it).
    t_air_c, rh_pct, tmrt_c, wind10_ms, pressure_hpa : arrays
        Air temperature [°C], relative humidity [%], Tmrt [°C], wind at 10 m [m s⁻¹],
        pressure [hPa] (NaN: 1013.25 hPa).
    sun_elev_deg, dni_wm2, dhi_wm2, beam_trans_frac, svf : arrays
        Sun, irradiance and shade as the chain computed them (WBGT without a globe).
    t_globe_c : array, optional
        The logger globe's reading [°C] where one was read (NaN elsewhere).
    globe : dict, optional
        ``diameter_m, emissivity`` of that globe.
    z0_m : float
        Roughness length of the chain's wind profile [m].
    flux_options : dict, optional
        As given to the chain for Tmrt (WBGT from radiation uses the same fluxes).
    """
    names = check_indices(names)
    out: dict = {}
    if not names:
        return out
    ta, rh, tmrt = (np.asarray(a, dtype=float) for a in (t_air_c, rh_pct, tmrt_c))
    p = np.asarray(pressure_hpa, dtype=float)
    p = np.where(np.isfinite(p), p, _wbgt.STANDARD_PRESSURE_HPA)
    v11 = wind_from_10m(wind10_ms, _wbgt.WBGT_HEIGHT_M, z0_m)
    if "pet" in names:
        pet = np.asarray(_pet.pet_interpolated(ta, tmrt, v11, rh, p), dtype=float)
        out[_pet.PET_C] = pet
        out[_pet.PET_CLASS] = _pet.pet_class(pet)
    if "wbgt" in names:
        w = np.asarray(_wbgt.wbgt_from_radiation(sun_elev_deg, dni_wm2, dhi_wm2, beam_trans_frac, svf, ta, rh, v11,
                                                 p, **dict(flux_options or {}))[_wbgt.WBGT_C], dtype=float)
        tg = None if t_globe_c is None else np.asarray(t_globe_c, dtype=float)
        if globe is not None and tg is not None and np.isfinite(tg).any():
            from_globe = np.asarray(_wbgt.wbgt_from_logger(ta, rh, v11, tg, globe_diameter_m=float(globe["diameter_m"]),
                                                           globe_emissivity=float(globe["emissivity"]),
                                                           pressure_hpa=p)[_wbgt.WBGT_C], dtype=float)
            w = np.where(np.isfinite(from_globe), from_globe, w)
        out[_wbgt.WBGT_C] = w
    return out


def with_pet(frame, z0_m: float = 0.01):
    """``frame`` with a ``pet_c`` column: kept if present, else computed from its environment columns.

    Needs ``t_air_c, tmrt_c, wind10_ms, rh_pct`` (``pressure_hpa`` if present); a frame without
    them gets an all-NaN ``pet_c`` (the features built from it are then missing, never invented).
    Returns a new frame; the input is not changed.
    """
    if _pet.PET_C in frame.columns:
        return frame
    out = frame.copy()
    need = ("t_air_c", "tmrt_c", "wind10_ms", "rh_pct")
    if not all(c in frame.columns for c in need):
        out[_pet.PET_C] = np.nan
        return out
    pressure = frame["pressure_hpa"] if "pressure_hpa" in frame.columns else None
    pet = _pet.pet_interpolated(frame["t_air_c"], frame["tmrt_c"],
                                wind_from_10m(frame["wind10_ms"], _wbgt.WBGT_HEIGHT_M, z0_m), frame["rh_pct"],
                                pressure)
    out[_pet.PET_C] = np.asarray(pet, dtype=float)
    return out
