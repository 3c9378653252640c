"""Heat safety of a recorded walk: WBGT from the logger, minutes above the field protocol's limits.

The field protocol (``field_protocol/safety.md``) asks the team to stop a walk when the
wet-bulb globe temperature (WBGT) exceeds a reference value for the walker's activity,
acclimatisation and clothing. The walking kit has no WBGT instrument, but its logger
records what an estimate needs (air and globe temperature, humidity, wind, sometimes
pressure). This module

* estimates what a standard WBGT instrument would have read next to the walker, from the
  logger's readings only (:func:`wbgt_from_logger`), by the sensor energy balances of
  Liljegren et al. (2008) and the outdoor combination of ISO 7243;
* holds the ONE table of WBGT reference values and clothing adjustments
  (:data:`WBGT_REFERENCE_VALUES`, :data:`CLOTHING_ADJUSTMENTS`) that
  ``field_protocol/safety.md`` reproduces (a test keeps the two identical);
* sums the time a walk spent above the walker's limit (:func:`walk_heat_safety`), for
  ``qa.json`` (key ``heat_safety``) and the one-line caution ``walkcomfort ingest`` prints.

It lives in the session stage because ``ingest`` needs it and a stage imports only from
its own layer or lower; :mod:`walkcomfort.environment.wbgt` re-exports the physics and adds
the radiation-driven Liljegren model for planned walks.

How the estimate works (and what it assumes)
--------------------------------------------
1. The logger's globe (often a 38–40 mm table-tennis ball, not the 150 mm globe of
   ISO 7243) is turned into the radiant temperature of its surroundings by its own
   energy balance: convection by the sphere correlation of Liljegren et al. (2008,
   Nu = 2 + 0.6 Re^½ Pr^⅓) for the logger globe's diameter and emissivity.
2. The 150 mm standard globe's temperature in the same radiant field, air temperature
   and wind is solved from the same balance (:func:`globe_temperature_c`).
3. The natural wet-bulb temperature is solved from Liljegren's wick energy balance
   (convection, evaporation, radiation), with the wick's radiant gain taken from the same
   radiant temperature (:func:`natural_wet_bulb_c`). Liljegren's model splits the
   wick's solar gain by the direct-beam fraction and the sun's zenith angle, which the
   logger does not know; against Liljegren's full model with the sun known this
   simplification stays within −0.7…+0.8 K of WBGT (5–95 %: −0.3…+0.2 K) over realistic
   sun, humidity and wind (``tests/session/test_heat_safety.py``).
4. WBGT = 0.7 natural wet-bulb + 0.2 globe + 0.1 air temperature (ISO 7243, outdoors in sun).

Globe-size caveat: a small globe responds to air temperature and wind much more than to
radiation, and faster; its conversion to the 150 mm globe amplifies its errors (gusts,
lag, a dented or dusty surface). The estimate is a screening value after the walk, not a
measurement: on the day, decide with a WBGT instrument or the weather service's
heat-health information (``field_protocol/safety.md``).

References
----------
.. [1] Liljegren, J. C., Carhart, R. A., Lawday, P., Tschopp, S., Sharp, R. (2008).
   Modeling the wet bulb globe temperature using standard meteorological measurements.
   J. Occup. Environ. Hyg. 5(10), 645–655. doi:10.1080/15459620802310770
.. [2] ISO 7243:2017 Ergonomics of the thermal environment — Assessment of heat stress
   using the WBGT (wet bulb globe temperature) index (and its 1989 edition).
.. [3] Buck, A. L. (1981). New equations for computing vapor pressure and enhancement
   factor. J. Appl. Meteorol. 20, 1527–1532.
.. [4] Bird, R. B., Stewart, W. E., Lightfoot, E. N. (2002). Transport Phenomena, 2nd ed.
   (air viscosity, thermal conductivity, diffusivity of water vapour in air).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pandas as pd

from walkcomfort.columns import PRESSURE_HPA, RH_PCT, T_AIR_C, T_GLOBE_C, WIND_MS

# --- physical constants of the Liljegren et al. (2008) sensor models ------------------
SIGMA = 5.6696e-8            # Stefan–Boltzmann constant as printed in Liljegren's code [W m⁻² K⁻⁴]
_CP = 1003.5                 # specific heat of dry air [J kg⁻¹ K⁻¹]
_M_AIR, _M_H2O = 28.97, 18.015   # molar masses [g mol⁻¹]
_R_AIR = 8314.34 / _M_AIR    # gas constant of air [J kg⁻¹ K⁻¹]
_PR = _CP / (_CP + 1.25 * _R_AIR)   # Prandtl number of air (Eucken)
_RATIO = _CP * _M_AIR / _M_H2O      # psychrometric grouping
EMIS_WICK, D_WICK_M, L_WICK_M = 0.95, 0.007, 0.0254   # Liljegren's wick
MIN_SPEED_MS = 0.13          # Liljegren's floor on the wind in the Reynolds number [m s⁻¹]
#: The globe of ISO 7243: 150 mm, black (emissivity 0.95).
STANDARD_GLOBE_DIAMETER_M, STANDARD_GLOBE_EMISSIVITY = 0.150, 0.95
STANDARD_PRESSURE_HPA = 1013.25   # used when the logger records no pressure
_K = 273.15
_BISECTION_STEPS = 40        # brackets of ≤ 100 K -> ≤ 1e-10 K

WBGT_C, T_NWB_C, T_GLOBE150_C, T_RAD_C = "wbgt_c", "t_nwb_c", "t_globe150_c", "t_rad_c"


def _arrays(*args):
    index = next((a.index for a in args if isinstance(a, pd.Series)), None)
    arrs = np.broadcast_arrays(*[np.asarray(a.to_numpy(dtype=float, na_value=np.nan)
                                            if isinstance(a, pd.Series) else a, dtype=float) for a in args])
    return index, arrs


def _out(values, index, name):
    return pd.Series(values, index=index, name=name) if index is not None else values


def saturation_vapour_pressure_hpa(t_k):
    """Saturation vapour pressure over water [hPa], Buck (1981) with his 1.004 enhancement factor."""
    y = (t_k - _K) / (t_k - 32.18)
    return 1.004 * 6.1121 * np.exp(17.502 * y)


def _viscosity(t_k):
    """Dynamic viscosity of air [kg m⁻¹ s⁻¹] (Bird et al. 2002, as used by Liljegren et al. 2008)."""
    omega = (t_k / 97.0 - 2.9) / 0.4 * (-0.034) + 1.048
    return 2.6693e-6 * np.sqrt(_M_AIR * t_k) / (3.617 ** 2 * omega)


def _conductivity(t_k):
    """Thermal conductivity of air [W m⁻¹ K⁻¹] (Eucken relation)."""
    return (_CP + 1.25 * _R_AIR) * _viscosity(t_k)


def _diffusivity(t_k, p_hpa):
    """Diffusivity of water vapour in air [m² s⁻¹] (Bird et al. 2002, p. 505)."""
    pcrit13 = (36.4 * 218.0) ** (1.0 / 3.0)
    tcrit512 = (132.0 * 647.3) ** (5.0 / 12.0)
    tcrit12 = math.sqrt(132.0 * 647.3)
    mmix = math.sqrt(1.0 / _M_AIR + 1.0 / _M_H2O)
    return 3.640e-4 * (t_k / tcrit12) ** 2.334 * pcrit13 * tcrit512 * mmix / (p_hpa / 1013.25) * 1e-4


def _latent_heat(t_k):
    """Latent heat of vaporisation [J kg⁻¹] (linear, Liljegren et al. 2008)."""
    return (313.15 - t_k) / 30.0 * (-71100.0) + 2.4073e6


def _reynolds(t_k, p_hpa, wind_ms, d_m):
    density = p_hpa * 100.0 / (_R_AIR * t_k)
    return np.maximum(wind_ms, MIN_SPEED_MS) * density * d_m / _viscosity(t_k)


def _h_sphere(t_k, p_hpa, wind_ms, d_m):
    """Convective coefficient of a sphere [W m⁻² K⁻¹]: Nu = 2 + 0.6 Re^½ Pr^⅓ (Liljegren et al. 2008)."""
    nu = 2.0 + 0.6 * np.sqrt(_reynolds(t_k, p_hpa, wind_ms, d_m)) * _PR ** 0.3333
    return nu * _conductivity(t_k) / d_m


def _h_wick(t_k, p_hpa, wind_ms):
    """Convective coefficient of the wick, a cylinder in cross-flow: Nu = 0.281 Re^0.6 Pr^0.44."""
    nu = 0.281 * _reynolds(t_k, p_hpa, wind_ms, D_WICK_M) ** 0.6 * _PR ** 0.44
    return nu * _conductivity(t_k) / D_WICK_M


def _bisect(balance, lo, hi):
    """Root of a decreasing ``balance(x)`` in [lo, hi], element-wise (NaN where inputs are NaN)."""
    for _ in range(_BISECTION_STEPS):
        mid = 0.5 * (lo + hi)
        with np.errstate(invalid="ignore"):
            pos = balance(mid) > 0.0
        lo, hi = np.where(pos, mid, lo), np.where(pos, hi, mid)
    return 0.5 * (lo + hi)


def radiant_temperature_from_globe(t_globe_c, t_air_c, wind_ms, pressure_hpa=STANDARD_PRESSURE_HPA,
                                   diameter_m=STANDARD_GLOBE_DIAMETER_M, emissivity=STANDARD_GLOBE_EMISSIVITY):
    """Radiant temperature of a globe's surroundings from its reading [°C].

    .. math:: T_r^4 = T_g^4 + \\frac{h_g}{\\varepsilon_g \\sigma}(T_g - T_a)

    with :math:`h_g` from the sphere correlation of Liljegren et al. (2008) at the film
    temperature :math:`(T_g + T_a)/2`. It is the temperature of a black enclosure giving
    the globe the radiation it absorbed (short- and long-wave alike): the globe's own
    mean radiant temperature under Liljegren's convection model.

    Parameters
    ----------
    t_globe_c, t_air_c : float, array or Series
        Globe and air temperature [°C].
    wind_ms : float, array or Series
        Wind speed at the globe [m s⁻¹] (floored at 0.13 m s⁻¹ in the Reynolds number).
    pressure_hpa : float, array or Series
        Air pressure [hPa].
    diameter_m, emissivity : float
        The globe's diameter [m] and emissivity [-].

    Returns
    -------
    float array or Series
        Radiant temperature [°C]; NaN where an input is NaN.
    """
    index, (tg, ta, v, p) = _arrays(t_globe_c, t_air_c, wind_ms, pressure_hpa)
    tg, ta = tg + _K, ta + _K
    h = _h_sphere(0.5 * (tg + ta), p, v, diameter_m)
    with np.errstate(invalid="ignore"):
        tr4 = tg ** 4 + h / (emissivity * SIGMA) * (tg - ta)
        tr = np.where(tr4 > 0, np.abs(tr4) ** 0.25, np.nan) - _K
    return _out(tr, index, T_RAD_C)


def globe_temperature_c(t_rad_c, t_air_c, wind_ms, pressure_hpa=STANDARD_PRESSURE_HPA,
                        diameter_m=STANDARD_GLOBE_DIAMETER_M, emissivity=STANDARD_GLOBE_EMISSIVITY):
    """Temperature a globe of ``diameter_m`` reaches in a radiant field [°C] (inverse of
    :func:`radiant_temperature_from_globe`; the default is the 150 mm globe of ISO 7243).

    Solves :math:`\\varepsilon\\sigma(T_r^4 - T_g^4) = h_g (T_g - T_a)` by bisection between
    the air and the radiant temperature (the balance decreases with :math:`T_g`).
    """
    index, (tr, ta, v, p) = _arrays(t_rad_c, t_air_c, wind_ms, pressure_hpa)
    tr, ta = tr + _K, ta + _K

    def balance(tg):
        return emissivity * SIGMA * (tr ** 4 - tg ** 4) - _h_sphere(0.5 * (tg + ta), p, v, diameter_m) * (tg - ta)

    tg = _bisect(balance, np.minimum(ta, tr) - 0.01, np.maximum(ta, tr) + 0.01) - _K
    tg = np.where(np.isnan(tr) | np.isnan(ta) | np.isnan(v) | np.isnan(p), np.nan, tg)
    return _out(tg, index, T_GLOBE150_C)


def natural_wet_bulb_c(t_air_c, rh_pct, wind_ms, t_rad_c, pressure_hpa=STANDARD_PRESSURE_HPA):
    """Natural (unventilated, unshielded) wet-bulb temperature [°C], Liljegren et al. (2008) wick balance.

    .. math::

        T_w = T_a - \\frac{\\Delta H}{c_p M_a/M_w}\\,\\frac{e_w - e_a}{p - e_w}
              \\left(\\frac{Pr}{Sc}\\right)^{0.56} + \\frac{F_{rad}}{h_w},
        \\qquad F_{rad} = \\varepsilon_w\\sigma (T_r^4 - T_w^4)

    Liljegren writes :math:`F_{rad}` from the sky, the ground and the sun split by the
    direct-beam fraction and the zenith angle; here the radiant field is the one the globe
    measured (:math:`T_r`), the wick absorbing it like a grey body of emissivity 0.95.
    With no sun (:math:`T_r^4 = (\\varepsilon_{sky} + \\varepsilon_{sfc}) T_a^4 / 2`)
    the two are the same equation. Solved by bisection.

    Parameters
    ----------
    t_air_c : float, array or Series
        Air temperature [°C].
    rh_pct : float, array or Series
        Relative humidity [%].
    wind_ms : float, array or Series
        Wind speed at the wick [m s⁻¹].
    t_rad_c : float, array or Series
        Radiant temperature of the surroundings [°C] (:func:`radiant_temperature_from_globe`).
    pressure_hpa : float, array or Series
        Air pressure [hPa].
    """
    index, (ta, rh, v, tr, p) = _arrays(t_air_c, rh_pct, wind_ms, t_rad_c, pressure_hpa)
    ta, tr = ta + _K, tr + _K
    e_air = np.clip(rh, 0.0, 100.0) / 100.0 * saturation_vapour_pressure_hpa(ta)

    def balance(tw):
        tref = 0.5 * (tw + ta)
        e_wick = saturation_vapour_pressure_hpa(tw)
        density = p * 100.0 / (_R_AIR * tref)
        schmidt = _viscosity(tref) / (density * _diffusivity(tref, p))
        rad = EMIS_WICK * SIGMA * (tr ** 4 - tw ** 4)
        new = (ta - _latent_heat(tref) / _RATIO * (e_wick - e_air) / (p - e_wick) * (_PR / schmidt) ** 0.56
               + rad / _h_wick(tref, p, v))
        return new - tw

    tw = _bisect(balance, np.minimum(ta, tr) - 40.0, np.maximum(ta, tr) + 5.0) - _K
    tw = np.where(np.isnan(ta) | np.isnan(rh) | np.isnan(v) | np.isnan(tr) | np.isnan(p), np.nan, tw)
    return _out(tw, index, T_NWB_C)


def wbgt_outdoor_c(t_nwb_c, t_globe_c, t_air_c):
    """WBGT outdoors with solar load [°C] (ISO 7243): 0.7 natural wet-bulb + 0.2 globe + 0.1 air."""
    return 0.7 * t_nwb_c + 0.2 * t_globe_c + 0.1 * t_air_c


def wbgt_indoor_c(t_nwb_c, t_globe_c):
    """WBGT indoors or outdoors without solar load [°C] (ISO 7243): 0.7 natural wet-bulb + 0.3 globe."""
    return 0.7 * t_nwb_c + 0.3 * t_globe_c


def wbgt_from_logger(t_air_c, rh_pct, wind_ms, t_globe_c, *, globe_diameter_m, globe_emissivity=0.95,
                     pressure_hpa=None, standard_globe_m=STANDARD_GLOBE_DIAMETER_M) -> pd.DataFrame:
    """WBGT a standard instrument would read, estimated from the walking logger's readings.

    Steps 1–4 of the module docstring: radiant temperature from the logger's globe,
    150 mm globe and natural wet-bulb in that field, ISO 7243's outdoor combination.

    Parameters
    ----------
    t_air_c, rh_pct, wind_ms, t_globe_c : float, array or Series
        Air temperature [°C], relative humidity [%], wind at the globe [m s⁻¹] and the
        logger globe's temperature [°C].
    globe_diameter_m, globe_emissivity : float
        The logger globe [m], [-] (the manifest's ``[sensors]``).
    pressure_hpa : float, array, Series or None
        Air pressure [hPa]; missing values use 1013.25 hPa.
    standard_globe_m : float
        Diameter of the globe whose reading enters the WBGT [m]: 0.150 m as ISO 7243
        prescribes (default); Liljegren et al. (2008) modelled a 50.8 mm globe, which
        reads cooler in sun (in full sun the 150 mm globe gives a WBGT 1–2 K higher).

    Returns
    -------
    DataFrame
        ``wbgt_c, t_nwb_c, t_globe150_c, t_rad_c`` [°C], on the input's index.
    """
    if not (np.isfinite(globe_diameter_m) and globe_diameter_m > 0):
        raise ValueError(f"globe diameter {globe_diameter_m!r} m: must be a positive number")
    p = STANDARD_PRESSURE_HPA if pressure_hpa is None else pressure_hpa
    index, (ta, rh, v, tg, p) = _arrays(t_air_c, rh_pct, wind_ms, t_globe_c, p)
    p = np.where(np.isfinite(p), p, STANDARD_PRESSURE_HPA)
    tr = radiant_temperature_from_globe(tg, ta, v, p, globe_diameter_m, globe_emissivity)
    tg150 = globe_temperature_c(tr, ta, v, p, diameter_m=standard_globe_m)
    tnwb = natural_wet_bulb_c(ta, rh, v, tr, p)
    out = pd.DataFrame({WBGT_C: wbgt_outdoor_c(tnwb, tg150, ta), T_NWB_C: tnwb, T_GLOBE150_C: tg150,
                        T_RAD_C: tr}, index=index if index is not None else pd.RangeIndex(np.size(ta)))
    return out


# --- the ONE table of limits (field_protocol/safety.md reproduces it; a test compares) ---

_ISO7243_SOURCE = ("ISO 7243 reference values by metabolic-rate class, 0.6 clo reference clothing "
                   "(from memory — check the edition in force)")
_CAV_SOURCE = "clothing adjustment values of ISO 7243:2017 / ACGIH (from memory)"


@dataclass(frozen=True)
class ReferenceValue:
    """A WBGT reference value [°C] for a metabolic-rate class and acclimatisation state."""

    activity_class: str
    acclimatised: bool
    wbgt_c: float
    source: str = _ISO7243_SOURCE


@dataclass(frozen=True)
class ClothingAdjustment:
    """Added to the measured WBGT [K] (equivalently taken off the limit) for clothing up to ``max_clo``."""

    max_clo: float
    adjustment_k: float
    clothing: str
    source: str = _CAV_SOURCE


#: WBGT reference values (ISO 7243 Table A.1 of the 1989 edition; metabolic classes 0–2).
WBGT_REFERENCE_VALUES = (
    ReferenceValue("resting", True, 33.0),
    ReferenceValue("resting", False, 32.0),
    ReferenceValue("light", True, 30.0),
    ReferenceValue("light", False, 29.0),
    ReferenceValue("moderate", True, 28.0),
    ReferenceValue("moderate", False, 26.0),
)

#: Clothing adjustment by the walker's stated insulation ``clo`` (first row whose max_clo is not exceeded).
CLOTHING_ADJUSTMENTS = (
    ClothingAdjustment(1.0, 0.0, "light summer or ordinary work clothing (up to 1 clo)"),
    ClothingAdjustment(math.inf, 3.0, "double-layer or heavier clothing (over 1 clo)"),
)

#: The manifest's ``activity`` -> metabolic-rate class (ISO 8996 classes; ordinary walking on the
#: level is moderate, from memory). An activity not listed is taken as walking.
ACTIVITY_CLASSES = {"walking": "moderate", "standing": "light", "strolling": "light",
                    "sitting": "resting", "resting": "resting"}


def reference_table_markdown() -> list[str]:
    """The table rows ``field_protocol/safety.md`` must contain, one string per line."""
    rows = ["| activity class | acclimatised | WBGT reference value | source |", "|---|---|---|---|"]
    rows += [f"| {r.activity_class} | {'yes' if r.acclimatised else 'no'} | {r.wbgt_c:.0f} °C | {r.source} |"
             for r in WBGT_REFERENCE_VALUES]
    rows += ["", "| walker's clothing | clothing adjustment | source |", "|---|---|---|"]
    rows += [f"| {c.clothing} | +{c.adjustment_k:.0f} °C | {c.source} |" for c in CLOTHING_ADJUSTMENTS]
    return rows


def walker_limit(clo=None, acclimatised=None, activity=None) -> dict:
    """The WBGT limit [°C] for a walker: reference value minus the clothing adjustment.

    Unknown attributes take the cautious reading and are listed in ``assumptions``:
    acclimatisation unknown -> not acclimatised; clothing unknown -> no adjustment
    (light clothing); activity unknown -> walking (moderate).
    """
    assumptions = []
    act = str(activity).strip().lower() if activity not in (None, "") else ""
    act_class = ACTIVITY_CLASSES.get(act)
    if act_class is None:
        act_class = "moderate"
        assumptions.append(f"activity {activity!r} taken as walking (moderate)" if act
                           else "activity not stated: taken as walking (moderate)")
    if acclimatised is None or (isinstance(acclimatised, float) and math.isnan(acclimatised)):
        assumptions.append("acclimatisation not stated: taken as not acclimatised")
        acclimatised = False
    acclimatised = bool(acclimatised)
    ref = next(r for r in WBGT_REFERENCE_VALUES if r.activity_class == act_class and r.acclimatised == acclimatised)
    try:
        clo_v = float(clo)
    except (TypeError, ValueError):
        clo_v = math.nan
    if math.isnan(clo_v):
        assumptions.append("clothing not stated: no clothing adjustment")
        cav = CLOTHING_ADJUSTMENTS[0]
    else:
        cav = next(c for c in CLOTHING_ADJUSTMENTS if clo_v <= c.max_clo)
    return {"limit_c": ref.wbgt_c - cav.adjustment_k, "reference_c": ref.wbgt_c,
            "clothing_adjustment_k": cav.adjustment_k, "activity_class": act_class,
            "acclimatised": acclimatised, "clo": None if math.isnan(clo_v) else clo_v,
            "clothing": cav.clothing, "assumptions": assumptions}


def _local(t, timezone) -> str:
    return pd.Timestamp(t).tz_convert(timezone).isoformat(timespec="seconds")


def time_above(wbgt_c: pd.Series, limit_c: float, step_s: float, timezone: str = "UTC",
               merge_gap_s: float = 60.0) -> dict:
    """Minutes above ``limit_c`` and the episodes when it happened.

    ``wbgt_c`` is a regular timeline (UTC index, one value per ``step_s``); each step
    above the limit counts ``step_s``. Missing values are never counted as above; their
    time is reported as ``minutes_unknown``. Runs of steps above the limit closer than
    ``merge_gap_s`` form one episode (readings hovering at the limit are one exposure, not
    many); an episode's ``minutes`` counts only its steps above. Episode times are local
    (``timezone``), from the first step above to the end of the last.
    """
    values = wbgt_c.to_numpy(dtype=float, na_value=np.nan)
    above = np.nan_to_num(values, nan=-np.inf) > limit_c
    edges = np.flatnonzero(np.diff(np.r_[0, above.astype(np.int8), 0]))
    runs: list[list[int]] = []
    for start, stop in zip(edges[::2], edges[1::2], strict=True):
        if runs and (start - runs[-1][1]) * step_s < merge_gap_s:
            runs[-1][1] = int(stop)
        else:
            runs.append([int(start), int(stop)])
    step = pd.Timedelta(seconds=step_s)
    episodes = [{"start": _local(wbgt_c.index[a], timezone), "end": _local(wbgt_c.index[b - 1] + step, timezone),
                 "minutes": round(float(above[a:b].sum()) * step_s / 60.0, 2),
                 "peak_wbgt_c": round(float(np.nanmax(values[a:b])), 2)} for a, b in runs]
    return {"minutes_above": round(float(above.sum()) * step_s / 60.0, 2),
            "minutes_unknown": round(float(np.isnan(values).sum()) * step_s / 60.0, 2),
            "episodes": episodes}


CAVEATS = (
    "WBGT is estimated from the walking logger (air and globe temperature, humidity, wind) by the "
    "Liljegren et al. (2008) sensor models and the ISO 7243 outdoor formula; it is not a WBGT measurement.",
    "The logger's globe is smaller than the 150 mm globe of ISO 7243: it follows air temperature and wind "
    "more than radiation, and its conversion to the standard globe amplifies its errors.",
    "The limits are screening values for healthy people; they do not replace the study's risk assessment, "
    "occupational-health guidance or a physician's judgement (field_protocol/safety.md).",
)


def walk_heat_safety(timeline: pd.DataFrame) -> dict:
    """The ``heat_safety`` entry of ``qa.json`` for one walk.

    Reads the logger columns (``t_air_c, rh_pct, wind_ms, t_globe_c``, optional
    ``pressure_hpa``) and ``attrs["session"]`` (globe diameter and emissivity, the walker's
    ``clo``, ``acclimatised``, ``activity``, ``timezone``, ``step_s``).

    Returns
    -------
    dict
        ``assessed`` (False with a ``reason`` when the walk lacks the readings),
        ``index`` ("WBGT"), ``limit`` (:func:`walker_limit`), ``minutes_above``,
        ``minutes_unknown``, ``episodes`` (local start/end, minutes, peak),
        ``peak_wbgt_c``, ``mean_wbgt_c``, ``globe_diameter_m``, ``lag_corrected``,
        ``caveats`` and ``caution`` (the one-line text, or None when no limit was exceeded).
    """
    attrs = timeline.attrs.get("session", {})
    limit = walker_limit(attrs.get("clo"), attrs.get("acclimatised"), attrs.get("activity"))
    out = {"index": "WBGT", "assessed": False, "limit": limit, "caveats": list(CAVEATS), "caution": None}
    needed = [T_AIR_C, RH_PCT, WIND_MS, T_GLOBE_C]
    missing = [c for c in needed if c not in timeline or timeline[c].isna().all()]
    diameter = attrs.get("globe_diameter_m")
    if missing:
        out["reason"] = f"no {', '.join(missing)} readings: WBGT not estimated"
        return out
    if diameter is None or not np.isfinite(float(diameter)) or float(diameter) <= 0:
        out["reason"] = "globe diameter not stated in the manifest ([sensors] globe_diameter_m)"
        return out
    est = wbgt_from_logger(timeline[T_AIR_C], timeline[RH_PCT], timeline[WIND_MS], timeline[T_GLOBE_C],
                           globe_diameter_m=float(diameter),
                           globe_emissivity=float(attrs.get("globe_emissivity") or STANDARD_GLOBE_EMISSIVITY),
                           pressure_hpa=timeline.get(PRESSURE_HPA))
    wbgt = est[WBGT_C]
    step_s = float(attrs.get("step_s") or _step_of(timeline.index))
    tz = attrs.get("timezone") or "UTC"
    out.update(assessed=True, globe_diameter_m=float(diameter), lag_corrected=bool(attrs.get("lag_corrected")),
               step_s=step_s, **time_above(wbgt, limit["limit_c"], step_s, tz),
               peak_wbgt_c=_round(wbgt.max()), mean_wbgt_c=_round(wbgt.mean()))
    if not out["lag_corrected"]:
        out["caveats"].append("the globe was not corrected for its lag (ingest --lag-correction): short peaks "
                              "are smoothed and shifted later")
    out["caution"] = caution_line(out)
    return out


def _step_of(index) -> float:
    return float(pd.Series(index).diff().median().total_seconds()) if len(index) > 1 else 1.0


def _round(x) -> float | None:
    return None if pd.isna(x) else round(float(x), 2)


def caution_line(summary: dict) -> str | None:
    """One line for the terminal when the walk spent time above the walker's limit (None otherwise)."""
    if not summary.get("assessed") or not summary.get("minutes_above"):
        return None
    lim = summary["limit"]
    eps = summary["episodes"]
    first, last = eps[0]["start"][11:16], eps[-1]["end"][11:16]
    who = f"{lim['activity_class']} activity, {'' if lim['acclimatised'] else 'not '}acclimatised"
    if lim["clothing_adjustment_k"]:
        who += f", clothing +{lim['clothing_adjustment_k']:g} °C"
    return (f"caution: estimated WBGT above the {lim['limit_c']:g} °C limit ({who}) for "
            f"{summary['minutes_above']:g} min in {len(eps)} episode(s) between {first} and {last} local time, "
            f"peak {summary['peak_wbgt_c']:g} °C — see qa.json heat_safety and field_protocol/safety.md")


def report_lines(summary: dict) -> list[str]:
    """Plain-text lines for a report of one walk's ``heat_safety`` entry (``qa.json``): the limit, the
    time above it with each episode (local clock times), and the caveats. Empty for no entry."""
    if not summary:
        return []
    lim = summary.get("limit", {})
    head = (f"WBGT limit {lim.get('limit_c', float('nan')):g} °C ({lim.get('activity_class', '?')} activity, "
            f"{'' if lim.get('acclimatised') else 'not '}acclimatised, {lim.get('clothing', 'clothing unknown')})")
    if not summary.get("assessed"):
        return [head, f"not assessed: {summary.get('reason', 'no reason given')}"]
    lines = [head, f"estimated WBGT: peak {summary.get('peak_wbgt_c')} °C, mean {summary.get('mean_wbgt_c')} °C; "
                   f"{summary.get('minutes_above', 0):g} min above the limit"]
    lines += [f"  {e['start'][11:19]}–{e['end'][11:19]}: {e['minutes']:g} min above, peak {e['peak_wbgt_c']:g} °C"
              for e in summary.get("episodes", [])]
    lines += [f"assumed: {a}" for a in lim.get("assumptions", [])]
    lines += [f"note: {c}" for c in summary.get("caveats", [])]
    return lines
