"""Mean radiant temperature: from a globe thermometer, and from radiant fluxes.

Two routes to the same quantity:

* recorded walks carry a globe thermometer: :func:`tmrt_from_globe` (ISO 7726,
  forced or natural convection, any globe diameter and emissivity) and its inverse
  :func:`globe_from_tmrt` (used by the demo simulator and for sanity checks);
* planned routes have no globe: :func:`outdoor_fluxes` builds the six-direction short-
  and long-wave fluxes from sun, sky view and surface temperatures, and
  :func:`tmrt_from_fluxes` turns them into Tmrt (VDI 3787-2; Thorsson et al. 2007).

References
----------
.. [1] ISO 7726:1998 Ergonomics of the thermal environment — Instruments for measuring
   physical quantities, Annex B (mean radiant temperature from a globe thermometer).
.. [2] VDI 3787 Blatt 2 (2008) Environmental meteorology — Methods for the human
   biometeorological evaluation of climate and air quality for urban and regional
   planning. Part I: Climate.
.. [3] Thorsson, S., Lindberg, F., Eliasson, I., Holmer, B. (2007). Different methods for
   estimating the mean radiant temperature in an outdoor urban setting. Int. J.
   Climatol. 27, 1983–1993. doi:10.1002/joc.1537
.. [4] Matzarakis, A., Rutz, F., Mayer, H. (2007). Modelling radiation fluxes in simple
   and complex environments. Int. J. Biometeorol. 51, 323–334.
   doi:10.1007/s00484-006-0061-8
.. [5] Brutsaert, W. (1975). On a derivable formula for long-wave radiation from clear
   skies. Water Resour. Res. 11, 742–744. doi:10.1029/WR011i005p00742
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from walkcomfort.environment._arrays import all_scalar, as_float_arrays, first_index, frame, wrap
from walkcomfort.environment.utci import vapour_pressure_hpa

SIGMA = 5.670374419e-8  #: Stefan–Boltzmann constant [W m⁻² K⁻⁴] (CODATA 2018)

#: Six-direction weighting factors for a standing or walking person
#: (VDI 3787-2; Thorsson et al. 2007): four lateral directions and up/down.
F_LATERAL = 0.22
F_VERTICAL = 0.06
#: Absorption coefficient for short-wave radiation of the human body (VDI 3787-2).
ABSORPTIVITY_SW = 0.7
#: Emissivity (= long-wave absorptivity) of the human body (VDI 3787-2).
EMISSIVITY_BODY = 0.97

# ISO 7726 Annex B prints the globe equations with these rounded constants (already
# divided by the Stefan–Boltzmann constant) and with 273 as the kelvin offset; we keep
# them so that results match the standard's own formulas digit for digit.
_ISO_FORCED = 1.1e8    # = 6.3 / sigma, with h_cg = 6.3 v^0.6 / D^0.4
_ISO_NATURAL = 0.25e8  # = 1.4 / sigma, with h_cg = 1.4 (|dT| / D)^0.25
_ISO_K = 273.0


def _globe_factor(t_globe_c, t_air_c, wind_ms, diameter_m):
    """max(forced, natural) convective coefficient over sigma [K³]; ISO 7726 Annex B."""
    with np.errstate(invalid="ignore", divide="ignore"):
        forced = _ISO_FORCED * np.power(np.maximum(wind_ms, 0.0), 0.6) / np.power(diameter_m, 0.4)
        natural = _ISO_NATURAL * np.power(np.abs(t_globe_c - t_air_c) / diameter_m, 0.25)
    out = np.maximum(forced, natural)
    return np.where(np.isfinite(forced) & np.isfinite(natural), out, np.nan)


def tmrt_from_globe(t_globe_c, t_air_c, wind_ms, diameter_m=0.15, emissivity=0.95):
    """Mean radiant temperature from a globe thermometer (ISO 7726, Annex B).

    .. math::

        T_{mrt} = \\left[(t_g + 273)^4 + \\frac{h_{cg}}{\\varepsilon\\,\\sigma}(t_g - t_a)\\right]^{1/4} - 273

    with :math:`h_{cg}` the larger of the forced-convection coefficient
    :math:`6.3\\,v^{0.6}/D^{0.4}` and the natural-convection coefficient
    :math:`1.4\\,(|t_g - t_a|/D)^{1/4}`, as the standard prescribes; in the standard's
    printed form :math:`h_{cg}/\\sigma` is :math:`1.1\\cdot10^8 v^{0.6}/D^{0.4}` and
    :math:`0.25\\cdot10^8 (|t_g-t_a|/D)^{1/4}`, which are the constants used here.

    Parameters
    ----------
    t_globe_c : float, array or Series
        Globe temperature in equilibrium [°C]. A small globe (38–40 mm) settles in a
        few minutes; a 150 mm globe needs 20–30 min, so on a walk apply the sensor-lag
        correction of the timeline first.
    t_air_c : float, array or Series
        Air temperature [°C].
    wind_ms : float, array or Series
        Air speed at the globe [m s⁻¹] (not the 10 m wind).
    diameter_m : float, default 0.15
        Globe diameter [m] (e.g. 0.038 for a table-tennis-ball globe).
    emissivity : float, default 0.95
        Globe emissivity [-] (0.95 for a matt black or grey painted globe).

    Returns
    -------
    float, array or Series
        Mean radiant temperature [°C].

    References
    ----------
    ISO 7726:1998, Annex B, equations (B.2) forced and (B.3) natural convection.
    """
    index, scalar = first_index(t_globe_c, t_air_c, wind_ms), all_scalar(t_globe_c, t_air_c, wind_ms)
    tg, ta, v, d, eps = as_float_arrays(t_globe_c, t_air_c, wind_ms, diameter_m, emissivity)
    f = _globe_factor(tg, ta, v, d)
    with np.errstate(invalid="ignore"):
        t4 = (tg + _ISO_K) ** 4 + f / eps * (tg - ta)
        out = np.power(np.maximum(t4, 0.0), 0.25) - _ISO_K
    return wrap(out, index, scalar, name="tmrt_c")


def globe_from_tmrt(tmrt_c, t_air_c, wind_ms, diameter_m=0.15, emissivity=0.95, tol_k: float = 1e-6):
    """Globe temperature that a globe thermometer would show at a given Tmrt.

    The exact inverse of :func:`tmrt_from_globe`: the globe's heat balance
    :math:`\\varepsilon\\sigma[(t_g+273)^4 - (T_{mrt}+273)^4] + h_{cg}(t_g - t_a) = 0` is
    monotonic in :math:`t_g` and its root lies between :math:`t_a` and :math:`T_{mrt}`;
    it is found by vectorised bisection to ``tol_k``.

    Parameters
    ----------
    tmrt_c : float, array or Series
        Mean radiant temperature [°C].
    t_air_c : float, array or Series
        Air temperature [°C].
    wind_ms : float, array or Series
        Air speed at the globe [m s⁻¹].
    diameter_m : float, default 0.15
        Globe diameter [m].
    emissivity : float, default 0.95
        Globe emissivity [-].
    tol_k : float, default 1e-6
        Bracket width at which the bisection stops [K].

    Returns
    -------
    float, array or Series
        Globe temperature [°C].

    References
    ----------
    ISO 7726:1998, Annex B (the same equations solved for the globe temperature).
    """
    index, scalar = first_index(tmrt_c, t_air_c, wind_ms), all_scalar(tmrt_c, t_air_c, wind_ms)
    tr, ta, v, d, eps = (np.array(a, dtype=float) for a in as_float_arrays(tmrt_c, t_air_c, wind_ms,
                                                                            diameter_m, emissivity))
    lo = np.minimum(ta, tr)
    hi = np.maximum(ta, tr)
    target = (tr + _ISO_K) ** 4

    def residual(tg):  # increasing in tg
        return (tg + _ISO_K) ** 4 + _globe_factor(tg, ta, v, d) / eps * (tg - ta) - target

    width = np.nanmax(hi - lo) if np.isfinite(hi - lo).any() else 0.0
    n_iter = int(np.ceil(np.log2(max(width, tol_k) / tol_k))) + 1
    with np.errstate(invalid="ignore"):
        for _ in range(n_iter):
            mid = 0.5 * (lo + hi)
            up = residual(mid) > 0
            hi = np.where(up, mid, hi)
            lo = np.where(up, lo, mid)
    return wrap(0.5 * (lo + hi), index, scalar, name="t_globe_c")


def projected_area_factor(sun_elev_deg):
    """Projected-area factor of a standing person for direct sun, averaged over azimuth.

    .. math:: f_p = 0.308 \\cos\\left(\\gamma\\,(0.998 - \\gamma^2/50000)\\right)

    with the sun altitude :math:`\\gamma` in degrees (Jendritzky et al. 1990, used in
    VDI 3787-2 and by Matzarakis et al. 2007 [4] — formula from memory). The test
    suite checks it against the azimuth-averaged standing table of ASHRAE 55
    Appendix C (SolarCal) to ±0.03. Below the horizon the value is 0.

    Parameters
    ----------
    sun_elev_deg : float, array or Series
        Sun elevation (altitude) [°].

    Returns
    -------
    float, array or Series
        Projected area / effective radiating area of the body [-].

    References
    ----------
    Matzarakis et al. (2007), doi:10.1007/s00484-006-0061-8.
    """
    index, scalar = first_index(sun_elev_deg), all_scalar(sun_elev_deg)
    (g,) = as_float_arrays(sun_elev_deg)
    gc = np.clip(g, 0.0, 90.0)
    fp = 0.308 * np.cos(np.radians(gc * (0.998 - gc ** 2 / 50000.0)))
    fp = np.where(g > 0, fp, np.where(np.isnan(g), np.nan, 0.0))
    return wrap(fp, index, scalar)


def sky_emissivity(t_air_c, rh_pct):
    """Clear-sky emissivity from screen-level air temperature and humidity (Brutsaert 1975).

    .. math:: \\varepsilon_{sky} = 1.24\\,(e_a / T_a)^{1/7}

    with :math:`e_a` the vapour pressure [hPa] and :math:`T_a` the air temperature [K].
    Clouds raise the real value; pass a measured or modelled emissivity to
    :func:`outdoor_fluxes` for overcast conditions.

    Parameters
    ----------
    t_air_c : float, array or Series
        Air temperature [°C].
    rh_pct : float, array or Series
        Relative humidity [%].

    Returns
    -------
    float, array or Series
        Effective emissivity of the clear sky [-], at most 1.

    References
    ----------
    Brutsaert (1975), doi:10.1029/WR011i005p00742.
    """
    index, scalar = first_index(t_air_c, rh_pct), all_scalar(t_air_c, rh_pct)
    ta, rh = as_float_arrays(t_air_c, rh_pct)
    e = np.asarray(vapour_pressure_hpa(ta, rh), dtype=float)
    with np.errstate(invalid="ignore"):
        eps = np.minimum(1.24 * np.power(np.maximum(e, 0.0) / (ta + 273.15), 1.0 / 7.0), 1.0)
    return wrap(eps, index, scalar)


def tmrt_from_fluxes(k_down, k_up, k_side, l_down, l_up, l_side, beam_normal_wm2=0.0, sun_elev_deg=90.0,
                     absorptivity_sw: float = ABSORPTIVITY_SW, emissivity: float = EMISSIVITY_BODY):
    """Mean radiant temperature by the six-direction method.

    .. math::

        S = a_k\\left(\\sum_i F_i K_i + f_p I\\right) + \\varepsilon_p \\sum_i F_i L_i,\\qquad
        T_{mrt} = \\left(\\frac{S}{\\varepsilon_p\\,\\sigma}\\right)^{1/4} - 273.15

    with :math:`F_i` = 0.22 for the four lateral directions and 0.06 for up and down
    (standing or walking person). The direct beam is not part of the :math:`K_i`: it
    enters once, through the projected-area factor :math:`f_p` of
    :func:`projected_area_factor` times the beam normal irradiance :math:`I` reaching
    the person. Because the four lateral factors are equal, only the mean of the four
    lateral fluxes matters; ``k_side`` and ``l_side`` are that mean.

    Parameters
    ----------
    k_down : float, array or Series
        Short-wave flux from the upper hemisphere onto an upward-facing surface,
        diffuse and reflected only [W m⁻²].
    k_up : float, array or Series
        Short-wave flux from the ground onto a downward-facing surface [W m⁻²].
    k_side : float, array or Series
        Mean diffuse + reflected short-wave flux on the four vertical faces [W m⁻²].
    l_down, l_up, l_side : float, array or Series
        Long-wave fluxes from above, from below and the lateral mean [W m⁻²].
    beam_normal_wm2 : float, array or Series, default 0
        Direct-beam normal irradiance reaching the person (after shade) [W m⁻²].
    sun_elev_deg : float, array or Series, default 90
        Sun elevation [°], for the projected-area factor.
    absorptivity_sw : float, default 0.7
        Short-wave absorption coefficient of the body [-].
    emissivity : float, default 0.97
        Emissivity of the body [-].

    Returns
    -------
    float, array or Series
        Mean radiant temperature [°C].

    References
    ----------
    VDI 3787-2 (2008); Thorsson et al. (2007), doi:10.1002/joc.1537, eq. (3).
    """
    args = (k_down, k_up, k_side, l_down, l_up, l_side, beam_normal_wm2, sun_elev_deg)
    index, scalar = first_index(*args), all_scalar(*args)
    kd, ku, ks, ld, lu, ls, beam, elev = as_float_arrays(*args)
    fp = np.asarray(projected_area_factor(elev), dtype=float)
    absorbed = (absorptivity_sw * (F_VERTICAL * (kd + ku) + 4 * F_LATERAL * ks + fp * np.maximum(beam, 0.0))
                + emissivity * (F_VERTICAL * (ld + lu) + 4 * F_LATERAL * ls))
    with np.errstate(invalid="ignore"):
        out = np.power(absorbed / (emissivity * SIGMA), 0.25) - 273.15
    return wrap(out, index, scalar, name="tmrt_c")


#: Documented defaults for :func:`outdoor_fluxes` (common practice for paved streets;
#: Oke, Boundary Layer Climates, 2nd ed., Table 1.1 gives albedo 0.05–0.20 for asphalt
#: and 0.10–0.35 for concrete, emissivities 0.95 and 0.71–0.90 — from memory).
GROUND_ALBEDO = 0.2
GROUND_EMISSIVITY = 0.95
WALL_EMISSIVITY = 0.90
#: Ground surface excess over air temperature for fully sunlit paving under a
#: 1000 W m⁻² beam on the horizontal [K] (common practice: sunlit asphalt and concrete
#: at midday in summer are typically 10–20 K above air; shaded ground about air temperature).
GROUND_SUN_EXCESS_K = 15.0


def outdoor_fluxes(sun_elev_deg, dni_wm2, dhi_wm2, beam_trans_frac, svf, t_air_c, rh_pct,
                   ground_albedo=GROUND_ALBEDO, ground_emissivity=GROUND_EMISSIVITY,
                   wall_emissivity=WALL_EMISSIVITY, ground_sun_excess_k=GROUND_SUN_EXCESS_K,
                   wall_excess_k=0.0, sky_emissivity_frac=None) -> pd.DataFrame:
    """Six-direction short- and long-wave fluxes on a person outdoors.

    Model (each term documented so it can be questioned):

    * beam reaching the person and the ground near them: :math:`I = DNI\\cdot\\tau_b`
      (zero when the sun is at or below the horizon); on the horizontal
      :math:`I\\sin\\gamma`;
    * diffuse sky: isotropic, seen through the sky view factor :math:`\\psi`:
      :math:`K_{down} = \\psi\\,DHI`, on a vertical face :math:`\\psi\\,DHI/2`;
    * ground-reflected short wave: :math:`K_{up} = \\alpha_g G_g` with the ground
      irradiance :math:`G_g = I\\sin\\gamma + \\psi\\,DHI`; a vertical face sees half of
      the ground: :math:`\\alpha_g G_g/2`. Short wave reflected by walls is neglected
      (an underestimate in deep canyons with bright façades);
    * long wave from above: sky :math:`\\psi\\,\\varepsilon_{sky}\\sigma T_a^4` plus walls
      :math:`(1-\\psi)\\,\\varepsilon_w\\sigma T_w^4` with :math:`T_w = T_a` + ``wall_excess_k``;
      sky emissivity by Brutsaert (1975) unless given;
    * long wave from the ground :math:`\\varepsilon_g\\sigma T_g^4 + (1-\\varepsilon_g)L_{down}`
      with :math:`T_g = T_a + \\Delta T_{sun}\\,I\\sin\\gamma/1000` (sunlit ground warmer
      than shaded ground, which stays at air temperature);
    * a vertical face sees half "above" and half ground: :math:`L_{side} = (L_{down}+L_{up})/2`.

    Parameters
    ----------
    sun_elev_deg : array or Series
        Apparent sun elevation [°].
    dni_wm2, dhi_wm2 : array or Series
        Direct normal and diffuse horizontal irradiance in the open [W m⁻²].
    beam_trans_frac : array or Series
        Direct-beam transmittance at the person, 0 (shade) … 1 (sun) [-].
    svf : array or Series
        Sky view factor at the person [-] (1 in the open).
    t_air_c : array or Series
        Air temperature [°C].
    rh_pct : array or Series
        Relative humidity [%].
    ground_albedo : float, default 0.2
        Short-wave albedo of the ground [-].
    ground_emissivity, wall_emissivity : float, default 0.95, 0.90
        Long-wave emissivities [-].
    ground_sun_excess_k : float, default 15
        Ground surface temperature above air under a 1000 W m⁻² horizontal beam [K].
    wall_excess_k : float, default 0
        Wall surface temperature above air [K].
    sky_emissivity_frac : array, optional
        Sky emissivity [-]; default :func:`sky_emissivity` (clear sky).

    Returns
    -------
    DataFrame
        ``k_down, k_up, k_side, l_down, l_up, l_side, beam_normal_wm2`` [W m⁻²] and
        ``t_ground_c`` [°C]; index of the first Series argument.

    References
    ----------
    Thorsson et al. (2007), doi:10.1002/joc.1537; Brutsaert (1975),
    doi:10.1029/WR011i005p00742.
    """
    args = (sun_elev_deg, dni_wm2, dhi_wm2, beam_trans_frac, svf, t_air_c, rh_pct)
    index = first_index(*args)
    elev, dni, dhi, tau, psi, ta, rh = (np.atleast_1d(a) for a in as_float_arrays(*args))
    up = elev > 0  # no direct beam at or below the horizon
    sin_g = np.where(up, np.sin(np.radians(np.clip(elev, 0.0, 90.0))), 0.0)
    beam = np.where(up, np.maximum(dni, 0.0) * np.clip(tau, 0.0, 1.0), 0.0)
    beam = np.where(np.isnan(dni) | np.isnan(tau) | np.isnan(elev), np.nan, beam)
    diffuse = np.maximum(dhi, 0.0) * psi
    g_ground = beam * sin_g + diffuse
    k_down = diffuse
    k_up = ground_albedo * g_ground
    k_side = 0.5 * diffuse + 0.5 * ground_albedo * g_ground
    tak = ta + 273.15
    eps_sky = (np.asarray(sky_emissivity(ta, rh), dtype=float) if sky_emissivity_frac is None
               else np.broadcast_to(np.asarray(sky_emissivity_frac, dtype=float), ta.shape))
    l_down = psi * eps_sky * SIGMA * tak ** 4 + (1 - psi) * wall_emissivity * SIGMA * (tak + wall_excess_k) ** 4
    t_ground_c = ta + ground_sun_excess_k * beam * sin_g / 1000.0
    l_up = ground_emissivity * SIGMA * (t_ground_c + 273.15) ** 4 + (1 - ground_emissivity) * l_down
    l_side = 0.5 * (l_down + l_up)
    return frame({"k_down": k_down, "k_up": k_up, "k_side": k_side, "l_down": l_down, "l_up": l_up,
                  "l_side": l_side, "beam_normal_wm2": beam, "t_ground_c": t_ground_c}, index)


def tmrt_outdoor(sun_elev_deg, dni_wm2, dhi_wm2, beam_trans_frac, svf, t_air_c, rh_pct, **kwargs):
    """Mean radiant temperature of a walker outdoors from sun, shade, sky view and weather.

    :func:`outdoor_fluxes` followed by :func:`tmrt_from_fluxes`; keyword arguments go to
    :func:`outdoor_fluxes`.

    Returns
    -------
    float, array or Series
        Mean radiant temperature [°C], same type as ``t_air_c`` / the first Series.
    """
    args = (sun_elev_deg, dni_wm2, dhi_wm2, beam_trans_frac, svf, t_air_c, rh_pct)
    index, scalar = first_index(*args), all_scalar(*args)
    fl = outdoor_fluxes(*args, **kwargs)
    elev = np.atleast_1d(as_float_arrays(*args)[0])
    out = tmrt_from_fluxes(fl["k_down"].to_numpy(), fl["k_up"].to_numpy(), fl["k_side"].to_numpy(),
                           fl["l_down"].to_numpy(), fl["l_up"].to_numpy(), fl["l_side"].to_numpy(),
                           fl["beam_normal_wm2"].to_numpy(), elev)
    return wrap(out, index, scalar, name="tmrt_c")
