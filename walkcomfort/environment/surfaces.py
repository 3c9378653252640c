"""Surface temperatures of ground and walls from a surface energy balance.

Each surface (a ground material, sunlit or in shade; a wall material facing one of
:data:`N_ORIENTATIONS` directions, sunlit or in shade) is a flat slab of its material
whose skin temperature :math:`T_s` obeys the force–restore equation

.. math::

    \\frac{dT_s}{dt} = \\frac{2\\sqrt{\\pi/\\tau}}{\\mu}\\,G - \\frac{2\\pi}{\\tau}(T_s - T_d),\\qquad
    \\frac{dT_d}{dt} = \\frac{T_s - T_d}{\\tau},

with :math:`\\tau` = 1 day, :math:`\\mu = \\sqrt{k C}` the thermal admittance of the
material and the flux into the material

.. math::

    G = (1-\\alpha) K_{in} + \\varepsilon L_{in} - \\varepsilon\\sigma T_s^4 - h_c (T_s - T_a) - Q_E,
    \\qquad h_c = 5.7 + 3.8\\,u,

(Bhumralkar 1975; Deardorff 1978). The force–restore form reproduces exactly the
amplitude and the 3-hour phase lag of the surface temperature of a semi-infinite solid
under a daily periodic flux, so a surface carries the memory of the hours before: a
pavement that was in sun all morning stays warm after its shade arrives, and releases
heat after sunset. Latent heat (vegetated surfaces only) follows a fixed Bowen ratio
:math:`\\beta = Q_H/Q_E` while the surface is warmer than the air, zero otherwise (no dew).

Why force–restore rather than the objective hysteresis model (OHM, Grimmond, Cleugh &
Oke 1991): OHM's coefficients are fitted to whole neighbourhoods or facets from hourly
net radiation, and solved for a skin temperature at sub-hourly steps its rate term makes
the balance ill-posed (the coefficient of :math:`Q^*` in the balance changes sign when
:math:`a_1 + a_2/\\Delta t > 1`). The force–restore needs only the material's conductivity
and heat capacity, which are tabulated per material.

The history each surface has lived through is built by :func:`diurnal_forcing`: the
sun's path of that day and the two days before (spin-up), clear-sky irradiance scaled by
the present clear-sky index, air temperature on a cosine daily course through the present
value (amplitude :data:`AIR_DIURNAL_RANGE_K`), wind and vapour pressure held at their
present values.

Limitations (stated so they can be questioned): each patch is either in sun or in shade
for its whole history (a patch that a moving shadow has just reached is taken as in shade
since morning); walls are semi-infinite (no interior); the wall's and the ground's own
sky view are those of an open square (ground 1, wall ½) unless given.

References
----------
.. [1] Bhumralkar, C. M. (1975). Numerical experiments on the computation of ground
   surface temperature in an atmospheric general circulation model. J. Appl. Meteorol.
   14, 1246–1258. doi:10.1175/1520-0450(1975)014<1246:NEOTCO>2.0.CO;2
.. [2] Deardorff, J. W. (1978). Efficient prediction of ground surface temperature and
   moisture, with inclusion of a layer of vegetation. J. Geophys. Res. 83(C4),
   1889–1903. doi:10.1029/JC083iC04p01889
.. [3] Oke, T. R. (1987). Boundary Layer Climates, 2nd ed. Routledge. Table 1.1
   (albedo, emissivity) and Table 2.1 (thermal properties) — values from memory.
.. [4] Watmuff, J. H., Charters, W. W. S., Proctor, D. (1977). Solar and wind induced
   external coefficients for solar collectors. COMPLES 2, 56 (h = 5.7 + 3.8 u, after
   McAdams 1954) — from memory.
.. [5] Grimmond, C. S. B., Cleugh, H. A., Oke, T. R. (1991). An objective urban heat
   storage model and its comparison with other schemes. Atmos. Environ. 25B, 311–326.
   doi:10.1016/0957-1272(91)90003-W
"""

from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.environment import sun as _sun
from walkcomfort.environment.utci import vapour_pressure_hpa
from walkcomfort.errors import InputError

SIGMA = 5.670374419e-8  #: Stefan–Boltzmann constant [W m⁻² K⁻⁴] (CODATA 2018)
DAY_S = 86400.0
#: Integration step of the surface energy balance [s].
STEP_S = 600.0
#: Days of history simulated before the day of interest (spin-up of the deep temperature).
SPINUP_DAYS = 2
#: Daily range of air temperature on a clear summer day used for the history [K]
#: (common practice: 8–15 K for clear, dry summer days at mid latitudes).
AIR_DIURNAL_RANGE_K = 10.0
#: Local solar hour of the daily air-temperature maximum (common practice: 14–16 h).
AIR_MAX_SOLAR_HOUR = 15.0
#: Sky view left to shaded ground relative to sunlit ground (what shades it also hides part
#: of its sky); a typical street tree or sail hides about half of the sky of the ground
#: beneath it (common practice; sky view under single crowns is 0.2–0.6).
SHADED_GROUND_SVF = 0.5
#: Facade orientations at which wall temperatures are computed (azimuth of the outward normal).
N_ORIENTATIONS = 16


@dataclass(frozen=True)
class Material:
    """Radiative and thermal properties of one surface material.

    ``albedo`` and ``emissivity`` [-]; ``conductivity`` k [W m⁻¹ K⁻¹];
    ``heat_capacity`` C [J m⁻³ K⁻¹]; ``bowen_ratio`` β = Q_H/Q_E for evaporating
    surfaces (``inf`` for impervious ones); ``albedo_range`` the documented span used
    for sensitivity runs; ``source`` where the numbers come from.
    """

    name: str
    albedo: float
    emissivity: float
    conductivity: float
    heat_capacity: float
    bowen_ratio: float = np.inf
    albedo_range: tuple[float, float] = (np.nan, np.nan)
    source: str = ""

    @property
    def admittance(self) -> float:
        """Thermal admittance μ = √(kC) [J m⁻² K⁻¹ s⁻½]."""
        return float(np.sqrt(self.conductivity * self.heat_capacity))


_OKE = "Oke (1987) Boundary Layer Climates, Tables 1.1 and 2.1 (from memory)"
#: Documented default materials. Thermal properties from Oke (1987) Table 2.1, albedo
#: and emissivity from Oke (1987) Table 1.1 (values from memory; ranges in ``albedo_range``).
#: Grass stands on moist clay soil (Table 2.1, between dry and saturated, from memory);
#: its Bowen ratio 0.4 is that of well-watered summer grass (Oke 1987 ch. 4 gives
#: 0.1–0.5 for irrigated grass; from memory).
MATERIALS: dict[str, Material] = {
    "asphalt": Material("asphalt", 0.10, 0.95, 0.75, 1.94e6, np.inf, (0.05, 0.20), _OKE),
    "concrete": Material("concrete", 0.25, 0.90, 1.51, 2.11e6, np.inf, (0.10, 0.35), _OKE),
    "stone": Material("stone", 0.25, 0.90, 2.19, 2.25e6, np.inf, (0.20, 0.35), _OKE),
    "brick": Material("brick", 0.30, 0.90, 0.83, 1.37e6, np.inf, (0.20, 0.40), _OKE),
    "grass": Material("grass", 0.23, 0.95, 1.18, 2.56e6, 0.4, (0.16, 0.26), _OKE),
}
#: Material of the ground where a scene declares none, and of walls without ``wall_material``.
DEFAULT_GROUND = "asphalt"
DEFAULT_WALL = "concrete"


def material(name: str, where: str = "material") -> Material:
    """The :class:`Material` called ``name``; an unknown name is refused with the choices."""
    if isinstance(name, Material):
        return name
    m = MATERIALS.get(str(name).strip().lower())
    if m is None:
        raise InputError(f"surface material {name!r} is not known", where=where,
                         fix=f"use one of {', '.join(sorted(MATERIALS))}")
    return m


def convective_coefficient(wind_ms):
    """Convective heat-transfer coefficient of an outdoor surface, h = 5.7 + 3.8 u [W m⁻² K⁻¹].

    McAdams (1954) as used by Watmuff et al. (1977) (from memory), ``u`` the wind
    speed near the surface [m s⁻¹] (clipped to 0…10).
    """
    return 5.7 + 3.8 * np.clip(np.asarray(wind_ms, dtype=float), 0.0, 10.0)


def force_restore(k_in, l_in, t_air_c, wind_ms, mat: Material, step_s: float = STEP_S,
                  h_conv=None) -> np.ndarray:
    """Integrate the force–restore surface energy balance over a forcing history.

    Parameters
    ----------
    k_in : ndarray, shape (T, ...)
        Short-wave irradiance on the surface [W m⁻²], one row per step.
    l_in : ndarray, shape (T, ...)
        Long-wave irradiance on the surface [W m⁻²].
    t_air_c : ndarray, shape (T, ...)
        Air temperature [°C].
    wind_ms : ndarray, broadcastable to (T, ...)
        Wind speed near the surface [m s⁻¹].
    mat : Material
        The surface material.
    step_s : float
        Time step of the rows [s].
    h_conv : float, optional
        Convective coefficient [W m⁻² K⁻¹] instead of :func:`convective_coefficient` (for checks).

    Returns
    -------
    ndarray, shape (T, ...)
        Skin temperature [°C] at each step (the first row is the start state, T_s = T_a).

    Each step is implicit in :math:`T_s` with the emitted long wave linearised about the
    previous value (unconditionally stable at any step).
    """
    k_in, l_in, ta, h = np.broadcast_arrays(*(np.asarray(a, dtype=float) for a in
                                              (k_in, l_in, t_air_c, convective_coefficient(wind_ms) if h_conv is None else h_conv)))
    tau = DAY_S
    c1 = 2.0 * np.sqrt(np.pi / tau) / mat.admittance
    c2 = 2.0 * np.pi / tau
    # latent heat as a multiple of sensible heat while T_s > T_a (fixed Bowen ratio)
    lat = 0.0 if not np.isfinite(mat.bowen_ratio) else 1.0 / mat.bowen_ratio
    eps = mat.emissivity
    out = np.empty(ta.shape)
    ts = ta[0].copy()
    td = ta[0].copy()
    out[0] = ts
    dt = float(step_s)
    for k in range(1, ta.shape[0]):
        tk = ts + 273.15
        e0 = eps * SIGMA * tk ** 4
        de = 4.0 * eps * SIGMA * tk ** 3
        warm = ts > ta[k]
        hh = h[k] * (1.0 + np.where(warm, lat, 0.0))
        # G(T) = A - B T  (linearised about the previous skin temperature)
        a = (1 - mat.albedo) * k_in[k] + eps * l_in[k] - e0 + de * ts + hh * ta[k]
        b = de + hh
        ts = (ts + dt * (c1 * a + c2 * td)) / (1.0 + dt * (c1 * b + c2))
        td = td + dt * (ts - td) / tau
        out[k] = ts
    return out


def air_temperature_course(t_now_c, solar_hours, solar_hour_now, diurnal_range_k: float = AIR_DIURNAL_RANGE_K):
    """Air temperature on a cosine daily course that passes through the present value.

    ``T(h) = T_now + R/2 [cos(2π(h − h_max)/24) − cos(2π(h_now − h_max)/24)]``, with the
    maximum at :data:`AIR_MAX_SOLAR_HOUR` local solar time (common practice).
    """
    w = 2 * np.pi / 24.0
    return (np.asarray(t_now_c, float)
            + 0.5 * diurnal_range_k * (np.cos(w * (np.asarray(solar_hours, float) - AIR_MAX_SOLAR_HOUR))
                                       - np.cos(w * (np.asarray(solar_hour_now, float) - AIR_MAX_SOLAR_HOUR))))


def diurnal_forcing(time_now, lat: float, lon: float, elev_m: float = 0.0, step_s: float = STEP_S,
                    spinup_days: int = SPINUP_DAYS) -> pd.DataFrame:
    """Sun and clear-sky irradiance over the history that leads to ``time_now``.

    Returns a frame indexed by time (step ``step_s``, ending at ``time_now``) with
    ``sun_elev_deg, sun_azim_deg, dni_wm2, dhi_wm2, ghi_wm2`` (clear sky, Ineichen–Perez)
    and ``solar_hour`` (local mean solar hour from the longitude).
    """
    t_now = pd.Timestamp(time_now)
    if t_now.tz is None:
        raise InputError("time is naive (no time zone)", where="diurnal_forcing", fix="give a tz-aware time")
    n = int(round((spinup_days + 1) * DAY_S / step_s))
    times = pd.date_range(end=t_now.tz_convert("UTC"), periods=n + 1, freq=pd.Timedelta(seconds=step_s))
    pos = _sun.solar_position(times, lat, lon, elev_m)
    cs = _sun.clearsky_irradiance(times, lat, lon, elev_m=elev_m, position=pos)
    utc_h = (times.hour + times.minute / 60.0 + times.second / 3600.0).to_numpy(float)
    out = pd.DataFrame({C.SUN_ELEV_DEG: pos[C.SUN_ELEV_DEG].to_numpy(), C.SUN_AZIM_DEG: pos[C.SUN_AZIM_DEG].to_numpy(),
                        C.DNI_WM2: cs[C.DNI_WM2].to_numpy(), C.DHI_WM2: cs[C.DHI_WM2].to_numpy(),
                        C.GHI_WM2: cs[C.GHI_WM2].to_numpy(), "solar_hour": np.mod(utc_h + lon / 15.0, 24.0)},
                       index=times)
    return out


@functools.lru_cache(maxsize=1024)
def _forcing(key_ns: int, lat: float, lon: float, elev_m: float, step_s: float) -> pd.DataFrame:
    """:func:`diurnal_forcing` kept per process: the same site and step recur in every row set and
    every partition of a batch, and the sun and clear sky of the days before do not change.
    Callers only read the frame."""
    return diurnal_forcing(pd.Timestamp(key_ns, tz="UTC"), lat, lon, elev_m, step_s)


def _sky_longwave(t_air_c, e_hpa):
    tak = np.asarray(t_air_c, float) + 273.15
    eps = np.minimum(1.24 * np.power(np.maximum(e_hpa, 0.0) / tak, 1.0 / 7.0), 1.0)  # Brutsaert (1975)
    return eps * SIGMA * tak ** 4


def wall_incidence(sun_elev_deg, sun_azim_deg, facade_azim_deg):
    """Cosine of the sun's incidence on a vertical facade facing ``facade_azim_deg`` (≥ 0)."""
    e = np.radians(np.asarray(sun_elev_deg, float))
    c = np.cos(e) * np.cos(np.radians(np.asarray(sun_azim_deg, float) - np.asarray(facade_azim_deg, float)))
    return np.where(np.asarray(sun_elev_deg, float) > 0, np.maximum(c, 0.0), 0.0)


@dataclass
class SurfaceTemperatures:
    """Surface temperatures [°C] at the times asked for, one entry per time.

    ``ground[name] = (sunlit, shaded)`` arrays (T,); ``wall[name] = (sunlit (T, N_ORIENTATIONS),
    shaded (T,))``; ``orientations_deg`` the facade azimuths of the wall columns.
    """

    ground: dict
    wall: dict
    orientations_deg: np.ndarray


def surface_temperatures(times, lat: float, lon: float, t_air_c, rh_pct, wind_ms, clear_index=1.0,
                         elev_m: float = 0.0, ground=(DEFAULT_GROUND,), walls=(DEFAULT_WALL,),
                         ground_albedo_around: float | None = None, ground_svf: float = 1.0,
                         wall_svf: float = 0.5, shaded_ground_svf: float = SHADED_GROUND_SVF,
                         diurnal_range_k: float = AIR_DIURNAL_RANGE_K,
                         step_s: float = STEP_S) -> SurfaceTemperatures:
    """Skin temperatures of sunlit and shaded ground and walls at each of ``times``.

    Parameters
    ----------
    times : DatetimeIndex
        tz-aware instants (each is the end of its own simulated history).
    lat, lon, elev_m : float
        Site.
    t_air_c, rh_pct, wind_ms : array (T,) or float
        Present air temperature [°C], humidity [%] and wind near the surfaces [m s⁻¹].
    clear_index : array (T,) or float, default 1
        Ratio of the present global irradiance to the clear-sky value, applied to the
        whole history (a cloudy hour is taken as a cloudy day).
    ground, walls : iterable of str
        Materials to compute (names in :data:`MATERIALS`).
    ground_albedo_around : float, optional
        Albedo of the ground that reflects light onto walls (default that of the first ground material).
    ground_svf, wall_svf : float
        Sky view of the ground (1 in the open) and of the walls (½ for a free-standing wall).
    shaded_ground_svf : float
        Factor on the sky view of shaded ground: what casts the shade (crown, sail, wall)
        also hides part of its sky and radiates at about air temperature instead.
    diurnal_range_k : float
        Daily range of the air temperature over the history [K].

    Returns
    -------
    SurfaceTemperatures
    """
    idx = pd.DatetimeIndex(times)
    n = len(idx)
    ta_now, rh_now, u_now, kc = (np.broadcast_to(np.asarray(v, float), (n,)) for v in
                                 (t_air_c, rh_pct, wind_ms, clear_index))
    gmats = [material(g) for g in ground]
    wmats = [material(w) for w in walls]
    orient = np.arange(N_ORIENTATIONS) * 360.0 / N_ORIENTATIONS
    alb_g = gmats[0].albedo if ground_albedo_around is None else float(ground_albedo_around)
    g_out = {m.name: (np.full(n, np.nan), np.full(n, np.nan)) for m in gmats}
    w_out = {m.name: (np.full((n, N_ORIENTATIONS), np.nan), np.full(n, np.nan)) for m in wmats}
    ok = np.isfinite(ta_now) & np.isfinite(rh_now) & np.isfinite(u_now) & np.isfinite(kc) & ~idx.isna()
    if not ok.any():
        return SurfaceTemperatures(g_out, w_out, orient)
    # one history per distinct (step, weather): rows that share them share the result
    rows = np.flatnonzero(ok)
    t_key = idx[rows].floor(pd.Timedelta(seconds=step_s)).as_unit("ns").asi8
    keys = np.column_stack([t_key.astype(float), np.round(ta_now[rows], 1), np.round(rh_now[rows]),
                            np.round(u_now[rows], 1), np.round(kc[rows], 2)])
    _, first, inv = np.unique(keys, axis=0, return_index=True, return_inverse=True)
    inv = inv.reshape(-1)
    # each history is computed at its key's rounded weather (0.1 K, 1 %, 0.1 m/s, 0.01), so a
    # row's result depends on its own values only, never on which rows share its key
    uk = keys[first]
    ta_k, rh_k, u_k, kc_k = uk[:, 1], uk[:, 2], uk[:, 3], uk[:, 4]
    cols = {k: [] for k in (C.SUN_ELEV_DEG, C.SUN_AZIM_DEG, C.DNI_WM2, C.DHI_WM2)}
    hist = []
    for j, key in enumerate(t_key[first]):
        f = _forcing(int(key), float(lat), float(lon), float(elev_m), float(step_s))
        for c in cols:
            cols[c].append(f[c].to_numpy())
        sh = f["solar_hour"].to_numpy()
        hist.append(air_temperature_course(ta_k[j], sh, sh[-1], diurnal_range_k))
    hist_t = np.column_stack(hist)
    cols = {c: np.column_stack(v) for c, v in cols.items()}
    kcl = np.clip(kc_k, 0.0, 1.0)
    dni, dhi = cols[C.DNI_WM2] * kcl, cols[C.DHI_WM2] * np.maximum(kcl, 0.3)  # cloud keeps diffuse light
    elev, azim = cols[C.SUN_ELEV_DEG], cols[C.SUN_AZIM_DEG]
    sin_e = np.where(elev > 0, np.sin(np.radians(np.clip(elev, 0, 90))), 0.0)
    e_hpa = np.asarray(vapour_pressure_hpa(ta_k, rh_k), float)
    l_sky = _sky_longwave(hist_t, e_hpa[None, :])
    l_air = SIGMA * (hist_t + 273.15) ** 4
    u = u_k[None, :]
    ghi = dni * sin_e + dhi
    for m in gmats:
        l_in = ground_svf * l_sky + (1 - ground_svf) * l_air
        sunlit = force_restore(dni * sin_e + ground_svf * dhi, l_in, hist_t, u, m, step_s)[-1]
        psi = shaded_ground_svf * ground_svf
        shaded = force_restore(psi * dhi, psi * l_sky + (1 - psi) * l_air, hist_t, u, m, step_s)[-1]
        g_out[m.name][0][rows], g_out[m.name][1][rows] = sunlit[inv], shaded[inv]
    for m in wmats:
        l_in = wall_svf * l_sky + (1 - wall_svf) * l_air
        k_diff = wall_svf * dhi + 0.5 * alb_g * ghi
        shaded = force_restore(k_diff, l_in, hist_t, u, m, step_s)[-1]
        cosi = wall_incidence(elev[:, :, None], azim[:, :, None], orient[None, None, :])
        k_sun = dni[:, :, None] * cosi + k_diff[:, :, None]
        sunlit = force_restore(k_sun, l_in[:, :, None], hist_t[:, :, None], u[:, :, None], m, step_s)[-1]
        w_out[m.name][0][rows], w_out[m.name][1][rows] = sunlit[inv], shaded[inv]
    return SurfaceTemperatures(g_out, w_out, orient)
