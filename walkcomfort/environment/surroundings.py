"""What a walker sees around them: sunlit and shaded ground and walls, weighted by view.

The short wave reflected and the long wave emitted toward a walker come from the
surfaces in view, not from the ground under their feet alone. This module samples
those surfaces and mixes their radiances with the weights the six-direction Tmrt method
gives them (VDI 3787-2; Thorsson et al. 2007):

* **ground** — points on rings around the walker, at radii chosen so that each ring
  carries an equal share of what a vertical (lateral) face sees of the ground; the
  downward face gets the same samples re-weighted by its own view factor. For a small
  surface at height :math:`h` facing down, the share of the ground within radius
  :math:`r` is :math:`r^2/(r^2+h^2)`; facing sideways (averaged over azimuth) it is
  :math:`\\frac{2}{\\pi}[\\arctan(r/h) - hr/(r^2+h^2)]` (from the view-factor integral
  :math:`\\frac{1}{\\pi}\\int \\cos\\theta_1\\cos\\theta_2/R^2\\,dA`; half of a vertical face's
  view is ground). Each sample knows its material (scene ``ground`` features) and whether
  the sun reaches it (beam transmittance at 5 cm);
* **walls** — in each azimuth sector of the sky-view computation, the building that sets
  the horizon: its band of the upper hemisphere, the facade's orientation (from the wall
  points of the neighbouring sectors), its material, and whether the sun reaches it
  (beam transmittance at two heights just in front of the facade: a facade turned away
  from the sun is reached by no beam);
* **crowns and canopies** — the rest of the obstructed upper hemisphere, radiating at air
  temperature (leaves stay within a few kelvin of the air; common practice) and passing
  diffuse sky light by their transmissivity where the scene gives it.

Limitations: ground samples behind a building are dropped (not replaced by the wall's
lower part); walls send their reflected and emitted radiation isotropically into the
upper hemisphere (no distinction between the lateral and the upward face); multiple
reflections are neglected.

References
----------
.. [1] VDI 3787 Blatt 2 (2008); Thorsson, S. et al. (2007) Int. J. Climatol. 27,
   1983–1993. doi:10.1002/joc.1537
.. [2] Howell, J. R., Mengüç, M. P., Siegel, R. (2016) Thermal Radiation Heat Transfer,
   6th ed., CRC — differential-element view factors (from memory).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from walkcomfort.environment import shade as _shade
from walkcomfort.environment import skyview as _skyview
from walkcomfort.environment import surfaces as _surf

#: Rings and azimuths of the ground samples around a walker.
GROUND_RINGS = 8
GROUND_AZIMUTHS = 8
#: Height of the ground samples for the beam test [m].
GROUND_SAMPLE_Z_M = 0.05
#: Distance in front of a facade of its beam-test points [m].
FACADE_OFFSET_M = 0.3
#: Emissivity of leaves (Campbell & Norman 1998, 0.96–0.98; from memory).
LEAF_EMISSIVITY = 0.97


def lateral_ground_share(r, h):
    """Share of the ground a vertical face at height ``h`` sees within radius ``r`` (azimuth mean)."""
    r = np.asarray(r, float)
    return (2.0 / np.pi) * (np.arctan(r / h) - h * r / (r * r + h * h))


def down_ground_share(r, h):
    """Share of the ground a downward face at height ``h`` sees within radius ``r``."""
    r = np.asarray(r, float)
    return r * r / (r * r + h * h)


def ground_rings(z_m: float, n_rings: int = GROUND_RINGS):
    """Sample radii [m] and the weights of the lateral and the downward faces (each sums to 1)."""
    h = max(float(z_m), 0.1)
    grid = h * np.logspace(-3, 3, 4001)
    share = lateral_ground_share(grid, h)
    edges_q = np.linspace(0.0, 1.0, n_rings + 1)
    edges = np.interp(edges_q, share, grid)
    edges[0], edges[-1] = 0.0, np.inf
    mid_q = 0.5 * (edges_q[1:] + edges_q[:-1])
    radii = np.interp(mid_q, share, grid)
    w_lat = np.full(n_rings, 1.0 / n_rings)
    dn = np.where(np.isinf(edges), 1.0, down_ground_share(np.where(np.isinf(edges), 0.0, edges), h))
    w_down = np.diff(dn)
    return radii, w_lat, w_down / w_down.sum()


@dataclass
class GroundView:
    """Ground seen by each row: weights per material of sunlit and shaded ground.

    ``materials`` names; ``down_sun, down_shade, lat_sun, lat_shade`` arrays (n, M); each
    face's four-way weights sum to 1 per row (NaN rows where nothing could be sampled).
    """

    materials: list
    down_sun: np.ndarray
    down_shade: np.ndarray
    lat_sun: np.ndarray
    lat_shade: np.ndarray


def ground_view(scene, x, y, sun_elev_deg, sun_azim_deg, z_m: float = 1.1, month=None,
                crown_model: str = "per_crossing") -> GroundView:
    """Sunlit and shaded shares of each ground material in view of each row."""
    x, y = np.asarray(x, float).reshape(-1), np.asarray(y, float).reshape(-1)
    n = x.size
    elev = np.broadcast_to(np.asarray(sun_elev_deg, float), (n,))
    azim = np.broadcast_to(np.asarray(sun_azim_deg, float), (n,))
    radii, w_lat, w_down = ground_rings(z_m)
    phi = np.radians((np.arange(GROUND_AZIMUTHS) + 0.5) * 360.0 / GROUND_AZIMUTHS)
    rr = np.repeat(radii, GROUND_AZIMUTHS)
    pp = np.tile(phi, radii.size)
    k = rr.size
    sx = (x[:, None] + rr[None, :] * np.sin(pp)[None, :]).reshape(-1)
    sy = (y[:, None] + rr[None, :] * np.cos(pp)[None, :]).reshape(-1)
    e = np.repeat(elev, k)
    a = np.repeat(azim, k)
    mon = None if month is None else np.repeat(np.broadcast_to(np.asarray(month, float), (n,)), k)
    if scene is None:
        tau = np.where(e > 0, 1.0, np.where(np.isfinite(e), 0.0, np.nan))
        mats = np.full(sx.size, _surf.DEFAULT_GROUND, dtype=object)
        inside = np.zeros(sx.size, dtype=bool)
    else:
        tau = _shade.beam_transmittance(scene, sx, sy, e, a, z_m=GROUND_SAMPLE_Z_M, month=mon,
                                        crown_model=crown_model)
        mats = scene.ground_material_at(sx, sy)
        inside = scene.inside_buildings(sx, sy)
    wl = np.tile(np.repeat(w_lat, GROUND_AZIMUTHS) / GROUND_AZIMUTHS, n)
    wd = np.tile(np.repeat(w_down, GROUND_AZIMUTHS) / GROUND_AZIMUTHS, n)
    keep = ~inside & np.isfinite(tau)
    wl, wd = np.where(keep, wl, 0.0), np.where(keep, wd, 0.0)
    tau = np.nan_to_num(tau)
    names = sorted({str(m) for m in mats})
    code = np.searchsorted(np.array(names, dtype=object), mats)
    row = np.repeat(np.arange(n), k)
    out = {}
    for key, w in (("down", wd), ("lat", wl)):
        tot = np.bincount(row, weights=w, minlength=n)
        tot = np.where(tot > 0, tot, np.nan)
        for part, frac in (("sun", tau), ("shade", 1.0 - tau)):
            arr = np.zeros((n, len(names)))
            np.add.at(arr, (row, code), w * frac)
            out[f"{key}_{part}"] = arr / tot[:, None]
    return GroundView(names, out["down_sun"], out["down_shade"], out["lat_sun"], out["lat_shade"])


@dataclass
class WallView:
    """Walls seen by each row, per azimuth sector (arrays (n, S)).

    ``band`` share of the sector's upper hemisphere; ``sunlit`` 0…1 beam reaching the
    facade; ``cos_inc`` cosine of the sun's incidence on it; ``orient_deg`` facade azimuth;
    ``material`` names (object array).
    """

    band: np.ndarray
    sunlit: np.ndarray
    cos_inc: np.ndarray
    orient_deg: np.ndarray
    material: np.ndarray

    @property
    def fraction(self) -> np.ndarray:
        """Share of the upper hemisphere taken by walls per row [-]."""
        return self.band.mean(axis=1)


def _facade_normals(px, py, dist, feat, sdx, sdy):
    """Outward facade direction (grid azimuth, rad) per sector from the neighbouring wall points."""
    wx = px[:, None] + dist * sdx[None, :]
    wy = py[:, None] + dist * sdy[None, :]
    nxt, prv = np.roll(np.arange(sdx.size), -1), np.roll(np.arange(sdx.size), 1)
    tx, ty = wx[:, nxt] - wx[:, prv], wy[:, nxt] - wy[:, prv]
    same = (feat[:, nxt] == feat) & (feat[:, prv] == feat) & np.isfinite(tx) & np.isfinite(ty)
    nx, ny = -ty, tx
    # pointing back toward the walker (against the ray)
    flip = (nx * sdx[None, :] + ny * sdy[None, :]) > 0
    nx, ny = np.where(flip, -nx, nx), np.where(flip, -ny, ny)
    norm = np.hypot(nx, ny)
    ok = same & (norm > 1e-9)
    nx = np.where(ok, nx / np.where(ok, norm, 1.0), -sdx[None, :])
    ny = np.where(ok, ny / np.where(ok, norm, 1.0), -sdy[None, :])
    return np.arctan2(nx, ny)


def wall_view(scene, x, y, sun_elev_deg, sun_azim_deg, z_m: float = 1.1, month=None, n_sectors: int = 36,
              radius_m: float = 200.0) -> WallView:
    """Walls in view of each row: band, sunlit share, incidence, orientation and material per sector.

    The walls' geometry (which building sets each sector's horizon, how far, facing where)
    does not change with time and is found once per distinct position.
    """
    x, y = np.asarray(x, float).reshape(-1), np.asarray(y, float).reshape(-1)
    n, S = x.size, int(n_sectors)
    if scene is None:
        z = np.zeros((n, S))
        return WallView(z, z.copy(), z.copy(), z.copy(), np.full((n, S), _surf.DEFAULT_WALL, dtype=object))
    upos, inv = np.unique(np.column_stack([x, y]), axis=0, return_inverse=True)
    inv = inv.reshape(-1)
    ws = _skyview.wall_sectors(scene, upos[:, 0], upos[:, 1], z_m=z_m, n_sectors=S, radius_m=radius_m)
    conv = scene.obstacles.grid_convergence_deg
    theta = np.radians(ws["azim_deg"] + conv)
    sdx, sdy = np.sin(theta), np.cos(theta)
    orient_u = np.mod(np.degrees(_facade_normals(upos[:, 0], upos[:, 1], ws["dist_m"], ws["feature"], sdx, sdy))
                      - conv, 360.0)
    mats_u = np.full(ws["feature"].shape, _surf.DEFAULT_WALL, dtype=object)
    for f in np.unique(ws["feature"][ws["feature"] >= 0]):
        mats_u[ws["feature"] == f] = scene.wall_material(int(f))
    has = ws["feature"][inv] >= 0
    dist, top, orient = ws["dist_m"][inv], ws["top_m"][inv], orient_u[inv]
    elev = np.broadcast_to(np.asarray(sun_elev_deg, float), (n,))
    azim = np.broadcast_to(np.asarray(sun_azim_deg, float), (n,))
    cos_inc = _surf.wall_incidence(elev[:, None], azim[:, None], orient)
    sunlit = np.zeros((n, S))
    r, s = np.nonzero(has & (cos_inc > 0))
    if r.size:
        back = np.maximum(dist[r, s] - FACADE_OFFSET_M, 0.0)
        px, py = x[r] + back * sdx[s], y[r] + back * sdy[s]
        mon = None if month is None else np.broadcast_to(np.asarray(month, float), (n,))[r]
        parts = []
        for frac in (0.25, 0.75):
            pz = z_m + frac * np.maximum(top[r, s] - z_m, 0.0)
            parts.append(_shade.beam_transmittance(scene, px, py, elev[r], azim[r], z_m=pz, month=mon))
        sunlit[r, s] = np.nan_to_num(0.5 * (parts[0] + parts[1]))
    return WallView(np.where(has, ws["band"][inv], 0.0), sunlit, cos_inc, orient, mats_u[inv])


def _orient_bin(orient_deg):
    step = 360.0 / _surf.N_ORIENTATIONS
    return (np.round(np.asarray(orient_deg, float) / step).astype(np.int64)) % _surf.N_ORIENTATIONS


def _wall_terms(wv: WallView, temps, dni, dhi, ghi, ground_albedo, l_env):
    """View-weighted long wave emitted and short wave reflected by the walls in view [W m⁻²]."""
    n, S = wv.band.shape
    if n == 0 or not (wv.band > 0).any():
        return np.zeros(n), np.zeros(n)
    rows = np.repeat(np.arange(n), S).reshape(n, S)
    jb = _orient_bin(np.nan_to_num(wv.orient_deg))
    lw, sw = np.zeros((n, S)), np.zeros((n, S))
    for name in np.unique(wv.material[wv.band > 0]):
        m = _surf.material(name)
        sel = (wv.material == name) & (wv.band > 0)
        t_sun = temps.wall[m.name][0][rows[sel], jb[sel]] + 273.15
        t_sh = temps.wall[m.name][1][rows[sel]] + 273.15
        f = wv.sunlit[sel]
        emitted = m.emissivity * _surf.SIGMA * (f * t_sun ** 4 + (1 - f) * t_sh ** 4)
        lw[sel] = emitted + (1 - m.emissivity) * l_env[rows[sel]]
        k_in = f * dni[rows[sel]] * wv.cos_inc[sel] + 0.5 * dhi[rows[sel]] + 0.5 * ground_albedo * ghi[rows[sel]]
        sw[sel] = m.albedo * k_in
    return (wv.band * lw).mean(axis=1), (wv.band * sw).mean(axis=1)


def _ground_terms(gv: GroundView, temps, beam_h, diffuse, l_upper):
    """Per face (down, lateral): emitted+reflected long wave and reflected short wave of the ground."""
    n = beam_h.size
    out = {k: np.zeros(n) for k in ("l_down", "k_down", "l_lat", "k_lat")}
    shaded_diffuse = _surf.SHADED_GROUND_SVF * diffuse
    for j, name in enumerate(gv.materials):
        m = _surf.material(name)
        t_sun = temps.ground[m.name][0] + 273.15
        t_sh = temps.ground[m.name][1] + 273.15
        l_sun = m.emissivity * _surf.SIGMA * t_sun ** 4 + (1 - m.emissivity) * l_upper
        l_sh = m.emissivity * _surf.SIGMA * t_sh ** 4 + (1 - m.emissivity) * l_upper
        k_sun = m.albedo * (beam_h + diffuse)
        k_sh = m.albedo * shaded_diffuse
        for face, ws, wsh in (("down", gv.down_sun, gv.down_shade), ("lat", gv.lat_sun, gv.lat_shade)):
            a, b = np.nan_to_num(ws[:, j]), np.nan_to_num(wsh[:, j])
            out[f"l_{face}"] += a * l_sun + b * l_sh
            out[f"k_{face}"] += a * k_sun + b * k_sh
    return out


def fluxes_from_surroundings(sun_elev_deg, dni_wm2, dhi_wm2, beam_trans_frac, svf, t_air_c, rh_pct,
                             ground: GroundView, walls: WallView, temps, sky_diffuse_frac=None) -> dict:
    """Six-direction fluxes on a walker from the sky, the walls and the ground in view.

    Parameters
    ----------
    sun_elev_deg, dni_wm2, dhi_wm2 : array (n,)
        Sun elevation [°] and irradiance in the open [W m⁻²].
    beam_trans_frac : array (n,)
        Direct beam reaching the walker 0…1.
    svf : array (n,)
        Sky view factor at the walker (everything that hides sky counted opaque).
    t_air_c, rh_pct : array (n,)
        Air temperature [°C] and humidity [%].
    ground, walls : GroundView, WallView
        From :func:`ground_view` and :func:`wall_view` for the same rows.
    temps : SurfaceTemperatures
        From :func:`walkcomfort.environment.surfaces.surface_temperatures` for the same rows.
    sky_diffuse_frac : array (n,), optional
        Share of the diffuse sky reaching the walker with crowns and canopies passing it by
        their transmissivity (``sky_diffuse_frac`` of
        :func:`walkcomfort.environment.skyview.sky_view_factor`); default ``svf`` (opaque crowns).
        The same gaps let the walker see the cold sky instead of leaves in the long wave.

    Returns
    -------
    dict of arrays
        ``k_down, k_up, k_side, l_down, l_up, l_side, beam_normal_wm2`` [W m⁻²] as for
        :func:`walkcomfort.environment.tmrt.tmrt_from_fluxes`, and ``wall_frac``,
        ``ground_sunlit_frac`` (lateral-view weighted) for diagnostics.
    """
    from walkcomfort.environment.tmrt import sky_emissivity

    elev, dni, dhi, tau, psi, ta, rh = (np.asarray(v, float).reshape(-1) for v in np.broadcast_arrays(
        sun_elev_deg, dni_wm2, dhi_wm2, beam_trans_frac, svf, t_air_c, rh_pct))
    up = elev > 0
    sin_e = np.where(up, np.sin(np.radians(np.clip(elev, 0.0, 90.0))), 0.0)
    dni = np.where(up, np.maximum(dni, 0.0), 0.0)
    dhi = np.maximum(dhi, 0.0)
    beam = dni * np.clip(tau, 0.0, 1.0)
    tak = ta + 273.15
    l_sky = np.asarray(sky_emissivity(ta, rh), float) * _surf.SIGMA * tak ** 4
    l_leaf = LEAF_EMISSIVITY * _surf.SIGMA * tak ** 4 + (1 - LEAF_EMISSIVITY) * l_sky
    ghi = dni * sin_e + dhi
    f_w = walls.fraction
    f_c = np.clip(1.0 - psi - f_w, 0.0, 1.0)
    alb_g = _surf.material(ground.materials[0]).albedo if ground.materials else 0.2
    l_env = _surf.SIGMA * tak ** 4
    l_walls, k_walls = _wall_terms(walls, temps, dni, dhi, ghi, alb_g, l_env)
    extra = (np.zeros_like(psi) if sky_diffuse_frac is None
             else np.clip(np.asarray(sky_diffuse_frac, float).reshape(-1) - psi, 0.0, f_c))
    extra = np.nan_to_num(extra)
    k_upper = (psi + extra) * dhi + k_walls
    l_upper = (psi + extra) * l_sky + l_walls + (f_c - extra) * l_leaf
    g = _ground_terms(ground, temps, dni * sin_e, psi * dhi, l_upper)
    lat_sun = sum(np.nan_to_num(ground.lat_sun[:, j]) for j in range(len(ground.materials)))
    return {"k_down": k_upper, "k_up": g["k_down"], "k_side": 0.5 * k_upper + 0.5 * g["k_lat"],
            "l_down": l_upper, "l_up": g["l_down"], "l_side": 0.5 * l_upper + 0.5 * g["l_lat"],
            "beam_normal_wm2": beam, "wall_frac": f_w, "ground_sunlit_frac": lat_sun}


def walker_fluxes(scene, x, y, times, sun_elev_deg, sun_azim_deg, dni_wm2, dhi_wm2, beam_trans_frac, svf,
                  t_air_c, rh_pct, wind_ms, lat: float, lon: float, elev_m: float = 0.0, clear_index=None,
                  month=None, z_m: float = 1.1, sky_diffuse_frac=None, n_sectors: int = 36,
                  crown_model: str = "per_crossing") -> dict:
    """Six-direction fluxes on walkers at points × times from their real surroundings.

    The one entry point the environment chain calls. Every row is sampled at its own
    position, time and sun (the walls' geometry once per distinct position), so a row's
    result never depends on the other rows given with it; surface temperatures come from
    :func:`walkcomfort.environment.surfaces.surface_temperatures` for each row's time and
    weather.

    Parameters
    ----------
    scene : Scene or None
        Obstacles and ground materials (None: open asphalt ground).
    x, y : array (n,)
        Positions in the scene's frame [m].
    times : DatetimeIndex (n,)
        tz-aware instants.
    sun_elev_deg, sun_azim_deg, dni_wm2, dhi_wm2, beam_trans_frac, svf, t_air_c, rh_pct, wind_ms : array (n,)
        Per-row sun, irradiance in the open, beam at the walker, sky view and weather
        (``wind_ms`` near the ground, for the surfaces' convection).
    lat, lon, elev_m : float
        Site.
    clear_index : array (n,), optional
        Global irradiance over its clear-sky value (default 1: clear sky).
    month : array (n,), optional
        Local month for crowns' monthly transmissivity.
    sky_diffuse_frac : array (n,), optional
        Diffuse sky share with transmissive crowns (see :func:`fluxes_from_surroundings`).

    Returns
    -------
    dict
        As :func:`fluxes_from_surroundings`, plus ``t_ground_sun_c`` / ``t_ground_shade_c``
        (of the material under the walker).
    """
    x, y = np.asarray(x, float).reshape(-1), np.asarray(y, float).reshape(-1)
    n = x.size
    idx = pd.DatetimeIndex(times)
    arrs = [np.broadcast_to(np.asarray(v, float), (n,)) for v in
            (sun_elev_deg, sun_azim_deg, dni_wm2, dhi_wm2, beam_trans_frac, svf, t_air_c, rh_pct, wind_ms)]
    elev, azim, dni, dhi, tau, psi, ta, rh, u = arrs
    kc = np.ones(n) if clear_index is None else np.broadcast_to(np.asarray(clear_index, float), (n,))
    mon = None if month is None else np.broadcast_to(np.asarray(month, float), (n,))
    ok = np.isfinite(x) & np.isfinite(y) & np.isfinite(elev) & ~idx.isna()
    rows = np.flatnonzero(ok)
    out_keys = ("k_down", "k_up", "k_side", "l_down", "l_up", "l_side", "beam_normal_wm2", "wall_frac",
                "ground_sunlit_frac", "t_ground_sun_c", "t_ground_shade_c")
    out = {k: np.full(n, np.nan) for k in out_keys}
    if rows.size == 0:
        return out
    # rows at the same place, time and sun share one sampling (exact duplicates only: the result
    # of a row depends on that row alone, whichever caller gives it and with whatever other rows)
    key = np.column_stack([x[rows], y[rows], idx[rows].as_unit("ns").asi8.astype(float), elev[rows], azim[rows],
                           np.zeros(rows.size) if mon is None else mon[rows]])
    _, first, inv = np.unique(key, axis=0, return_index=True, return_inverse=True)
    rep = rows[first]
    inv = inv.reshape(-1)
    gv = ground_view(scene, x[rep], y[rep], elev[rep], azim[rep], z_m=z_m,
                     month=None if mon is None else mon[rep], crown_model=crown_model)
    wv = wall_view(scene, x[rep], y[rep], elev[rep], azim[rep], z_m=z_m,
                   month=None if mon is None else mon[rep], n_sectors=n_sectors)
    gv = GroundView(gv.materials, *(a[inv] for a in (gv.down_sun, gv.down_shade, gv.lat_sun, gv.lat_shade)))
    wv = WallView(*(a[inv] for a in (wv.band, wv.sunlit, wv.cos_inc, wv.orient_deg, wv.material)))
    here = (scene.ground_material_at(x[rows], y[rows]) if scene is not None
            else np.full(rows.size, _surf.DEFAULT_GROUND, dtype=object))
    ground_names = tuple(sorted(set(gv.materials) | {str(m) for m in here}))
    wall_names = tuple(sorted({str(m) for m in wv.material.ravel()} | {_surf.DEFAULT_WALL}))
    temps = _surf.surface_temperatures(idx[rows], lat, lon, ta[rows], rh[rows], u[rows], kc[rows], elev_m,
                                       ground=ground_names, walls=wall_names)
    f = fluxes_from_surroundings(elev[rows], dni[rows], dhi[rows], tau[rows], psi[rows], ta[rows], rh[rows],
                                 gv, wv, temps, None if sky_diffuse_frac is None else
                                 np.broadcast_to(np.asarray(sky_diffuse_frac, float), (n,))[rows])
    for k in out_keys[:9]:
        out[k][rows] = f[k]
    for name in set(here):
        sel = here == name
        out["t_ground_sun_c"][rows[sel]] = temps.ground[str(name)][0][sel]
        out["t_ground_shade_c"][rows[sel]] = temps.ground[str(name)][1][sel]
    return out
