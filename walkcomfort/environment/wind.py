"""Wind as UTCI expects it: ambient speed, not speed relative to a walker; street level, not a mast.

UTCI takes the ambient wind at 10 m in the open and already assumes a person walking at
about 1.1 m s⁻¹ (Bröde et al. 2012), so two corrections are made before it:

* **carried anemometer** — a sensor carried by a walker reads the air speed relative to
  them, :math:`\\vec v_{rel} = \\vec v_{amb} - \\vec v_{walk}`. For a scalar (cup or hot-wire)
  anemometer whose relative direction to the wind is random over a window,
  :math:`\\overline{v_{rel}^2} = \\overline{v_{amb}^2} + \\overline{v_{walk}^2}` (the cross
  term :math:`-2 v_{amb} v_{walk}\\cos\\theta` averages to zero), so
  :math:`v_{amb} = \\sqrt{\\max(\\overline{v_{rel}^2} - \\overline{v_{walk}^2}, 0)}` over the
  window (:func:`ambient_from_carried`). The relative speed is kept for the globe, which
  is carried too. The estimate is biased low where the walk keeps one heading against a
  steady wind for the whole window; the window should span turns.
* **station wind to street level** — for planned routes and the city batch a 10 m wind
  measured over open ground is brought to the street by logarithmic profiles joined at a
  blending height, with the urban displacement height and roughness length from the
  mean building height by the rule of thumb of Grimmond & Oke (1999),
  :math:`z_d = 0.7 z_H`, :math:`z_0 = 0.1 z_H`, and an exponential decay inside the
  canopy (Cionco 1965), :math:`u(z) = u(z_H) \\exp(a (z/z_H - 1))`; the street-level speed
  is then expressed as the 10 m open-ground speed that UTCI's own log law (z₀ = 0.01 m)
  maps onto it (:func:`street_equivalent_10m`).

References
----------
.. [1] Bröde, P. et al. (2012). Deriving the operational procedure for the Universal
   Thermal Climate Index (UTCI). Int. J. Biometeorol. 56, 481–494.
   doi:10.1007/s00484-011-0454-1
.. [2] Grimmond, C. S. B., Oke, T. R. (1999). Aerodynamic properties of urban areas derived
   from analysis of surface form. J. Appl. Meteorol. 38, 1262–1292.
   doi:10.1175/1520-0450(1999)038<1262:APOUAD>2.0.CO;2 (rule of thumb from memory)
.. [3] Cionco, R. M. (1965). A mathematical model for air flow in a vegetative canopy.
   J. Appl. Meteorol. 4, 517–522 (exponential canopy profile; coefficient from memory).
.. [4] WMO (2018) Guide to Instruments and Methods of Observation, No. 8, Part I ch. 5
   (10 m over open terrain, roughness about 0.03 m; from memory).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import shapely

from walkcomfort.environment.scene import KIND_CODE
from walkcomfort.environment.utci import Z0_UTCI_M

#: Window over which the walker's own motion is removed from a carried anemometer [s].
CARRIED_WINDOW_S = 60.0
#: Roughness length of the open terrain around a standard wind mast [m] (WMO; from memory).
Z0_STATION_M = 0.03
#: Blending height where the open-terrain and the urban profile meet, as a multiple of
#: the mean building height, and at least 40 m (common practice: 2–5 building heights).
BLENDING_FACTOR = 3.0
BLENDING_MIN_M = 40.0
#: Displacement height and roughness length as fractions of the mean building height
#: (Grimmond & Oke 1999 rule of thumb; from memory).
ZD_FRACTION = 0.7
Z0_FRACTION = 0.1
#: Attenuation coefficient of the exponential wind profile inside the urban canopy
#: (Cionco 1965 form; 1 for streets of mid-rise buildings, from memory — the documented
#: range for urban canopies is about 0.5–3, a larger value means calmer streets).
CANOPY_ATTENUATION = 1.0
#: Height of the walker's wind [m] (the centre of a standing body).
STREET_HEIGHT_M = 1.1


def ambient_from_carried(relative_ms, walk_speed_ms, times=None, window_s: float = CARRIED_WINDOW_S) -> np.ndarray:
    """Ambient wind speed from a carried scalar anemometer and the walker's own speed [m s⁻¹].

    Parameters
    ----------
    relative_ms : array (n,)
        Readings of the carried anemometer (air speed relative to the walker).
    walk_speed_ms : array (n,)
        The walker's ground speed at the same instants (from GPS).
    times : DatetimeIndex, optional
        Instants of the rows; default one second apart.
    window_s : float
        Centred averaging window [s].

    Returns
    -------
    ndarray
        :math:`\\sqrt{\\max(\\overline{v_{rel}^2} - \\overline{v_{walk}^2}, 0)}` per row; NaN where
        the window holds no reading.
    """
    v = np.asarray(relative_ms, float)
    w = np.nan_to_num(np.asarray(walk_speed_ms, float), nan=0.0)
    idx = (pd.date_range("2000-01-01", periods=v.size, freq="1s", tz="UTC") if times is None
           else pd.DatetimeIndex(times))
    frame = pd.DataFrame({"v2": v * v, "w2": np.where(np.isfinite(v), w * w, np.nan)}, index=idx)
    roll = frame.rolling(pd.Timedelta(seconds=window_s), center=True, min_periods=1).mean()
    diff = roll["v2"].to_numpy() - roll["w2"].to_numpy()
    return np.sqrt(np.maximum(diff, 0.0))


def urban_parameters(mean_building_height_m: float) -> dict:
    """Displacement height, roughness length and blending height of a neighbourhood [m]."""
    zh = float(mean_building_height_m)
    return {"z_h_m": zh, "z_d_m": ZD_FRACTION * zh, "z0_m": Z0_FRACTION * zh,
            "blending_m": max(BLENDING_FACTOR * zh, BLENDING_MIN_M)}


def street_wind(station_10m_ms, mean_building_height_m, z_m: float = STREET_HEIGHT_M,
                attenuation: float = CANOPY_ATTENUATION) -> np.ndarray:
    """Wind speed at height ``z_m`` in a street from a 10 m open-terrain station wind [m s⁻¹].

    No buildings (height ≤ 1 m): the open-terrain log law alone.
    """
    u10 = np.asarray(station_10m_ms, float)
    zh = float(mean_building_height_m) if mean_building_height_m is not None else 0.0
    if not np.isfinite(zh) or zh <= 1.0:
        return u10 * np.log(z_m / Z0_STATION_M) / np.log(10.0 / Z0_STATION_M)
    p = urban_parameters(zh)
    zb = p["blending_m"]
    u_b = u10 * np.log(zb / Z0_STATION_M) / np.log(10.0 / Z0_STATION_M)
    u_h = u_b * np.log((zh - p["z_d_m"]) / p["z0_m"]) / np.log((zb - p["z_d_m"]) / p["z0_m"])
    if z_m >= zh:
        return u_b * np.log((z_m - p["z_d_m"]) / p["z0_m"]) / np.log((zb - p["z_d_m"]) / p["z0_m"])
    return u_h * np.exp(attenuation * (z_m / zh - 1.0))


def street_equivalent_10m(station_10m_ms, mean_building_height_m, attenuation: float = CANOPY_ATTENUATION):
    """The 10 m wind UTCI should be given so that its own log law (z₀ = 0.01 m) finds the
    street-level wind of :func:`street_wind` at 1.1 m [m s⁻¹]."""
    u_s = street_wind(station_10m_ms, mean_building_height_m, STREET_HEIGHT_M, attenuation)
    return u_s * np.log(10.0 / Z0_UTCI_M) / np.log(STREET_HEIGHT_M / Z0_UTCI_M)


def describe_street_profile(mean_building_height_m: float, attenuation: float = CANOPY_ATTENUATION) -> str:
    """One line for provenance: how a station wind was brought to the street."""
    if mean_building_height_m is None or mean_building_height_m <= 1.0:
        return "station 10 m wind over open terrain (z0 0.03 m) used as is: no buildings"
    p = urban_parameters(mean_building_height_m)
    ratio = float(street_equivalent_10m(1.0, mean_building_height_m, attenuation))
    return (f"station 10 m wind (open terrain, z0 {Z0_STATION_M} m) -> blending height {p['blending_m']:.0f} m -> "
            f"urban log profile zd {p['z_d_m']:.1f} m, z0 {p['z0_m']:.1f} m (Grimmond & Oke 1999, mean building "
            f"height {p['z_h_m']:.1f} m) -> exponential canopy decay a={attenuation:g} (Cionco 1965) -> "
            f"1.1 m; UTCI 10 m-equivalent = {ratio:.2f} x station wind")


def mean_building_height(scene) -> float:
    """Plan-area-weighted mean height of a scene's buildings [m] (0 without buildings).

    Grimmond & Oke (1999) use the plan-area-weighted mean height of the roughness elements.
    """
    if scene is None:
        return 0.0
    obs = scene.obstacles
    bld = obs.kind == KIND_CODE["building"]
    if not bld.any():
        return 0.0
    area = shapely.area(obs.footprints[bld])
    return float(np.sum(area * obs.z_top[bld]) / np.sum(area)) if np.sum(area) > 0 else 0.0
