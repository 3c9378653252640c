"""Stand-ins for environment functions that have not landed yet (used only while missing).

The demo's physics of truth is meant to come from :mod:`walkcomfort.environment`.
While a function named in the DEVELOPERS.md contract is not importable yet, the
simulator falls back to the small implementation here, so the scenario can be
generated and committed early. Each stand-in follows the same published method
the contract names, restricted to what the invented town needs (axis-aligned
rectangular footprints, round crowns). :func:`physics_sources` says which
implementation produced each quantity; it is written into ``demo_walks/provenance.json``.
"""

from __future__ import annotations

import numpy as np

SIGMA = 5.670374419e-8  # Stefan–Boltzmann constant [W m⁻² K⁻⁴] (CODATA 2018)


def _has(module: str, name: str) -> bool:
    import importlib

    try:
        mod = importlib.import_module(f"walkcomfort.environment.{module}")
    except ImportError:
        return False
    return hasattr(mod, name)


def physics_sources() -> dict:
    """Which implementation each quantity of truth comes from ("environment" or "demo-interim")."""
    pick = {
        "solar_position": ("sun", "solar_position"),
        "clearsky_irradiance": ("sun", "clearsky_irradiance"),
        "beam_transmittance": ("shade", "beam_transmittance"),
        "sky_view_factor": ("skyview", "sky_view_factor"),
        "tmrt_from_fluxes": ("tmrt", "tmrt_from_fluxes"),
        "globe_from_tmrt": ("tmrt", "globe_from_tmrt"),
        "utci_from_conditions": ("utci", "utci_from_conditions"),
        "wind_at_10m": ("utci", "wind_at_10m"),
    }
    return {k: ("environment" if _has(*v) else "demo-interim") for k, v in pick.items()}


# --- sun (NREL SPA and Ineichen clear sky through pvlib) -----------------------------------

def solar_position(times, lat, lon, elev_m=0.0):
    import pandas as pd
    import pvlib

    sp = pvlib.solarposition.get_solarposition(times, lat, lon, altitude=elev_m)
    return pd.DataFrame({"sun_elev_deg": sp["apparent_elevation"].to_numpy(),
                         "sun_zenith_deg": sp["apparent_zenith"].to_numpy(),
                         "sun_azim_deg": sp["azimuth"].to_numpy()}, index=times)


def clearsky_irradiance(times, lat, lon, elev_m=0.0):
    import pandas as pd
    from pvlib.location import Location

    cs = Location(lat, lon, altitude=elev_m).get_clearsky(times, model="ineichen")
    return pd.DataFrame({"ghi_wm2": cs["ghi"].to_numpy(), "dni_wm2": cs["dni"].to_numpy(),
                         "dhi_wm2": cs["dhi"].to_numpy()}, index=times)


# --- shade and sky view on rectangles and round crowns ---------------------------------------

def _obstacles(town):
    b = np.array([[min(p[0] for p in o["polygon"]), min(p[1] for p in o["polygon"]),
                   max(p[0] for p in o["polygon"]), max(p[1] for p in o["polygon"]), o["height_m"]]
                  for o in town.buildings], float)
    t = np.array([[o["x"], o["y"], o["crown_radius_m"], o["crown_base_m"], o["height_m"], o["transmissivity"]]
                  for o in town.trees], float)
    c = np.array([[min(p[0] for p in o["polygon"]), min(p[1] for p in o["polygon"]),
                   max(p[0] for p in o["polygon"]), max(p[1] for p in o["polygon"]), o["height_m"],
                   o["transmissivity"]] for o in town.canopies], float)
    return b, t, c


def _box_entry(x, y, ux, uy, box):
    """Horizontal ray (x, y) + t (ux, uy), t >= 0, against boxes: entry distance or inf. Shapes (N, M)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        inv_x = 1.0 / ux[:, None]
        inv_y = 1.0 / uy[:, None]
        tx1 = (box[None, :, 0] - x[:, None]) * inv_x
        tx2 = (box[None, :, 2] - x[:, None]) * inv_x
        ty1 = (box[None, :, 1] - y[:, None]) * inv_y
        ty2 = (box[None, :, 3] - y[:, None]) * inv_y
    # a ray parallel to a slab: inside the slab -> (-inf, inf), outside -> empty
    par_x = np.abs(ux)[:, None] < 1e-12
    inside_x = (x[:, None] >= box[None, :, 0]) & (x[:, None] <= box[None, :, 2])
    tx_lo = np.where(par_x, np.where(inside_x, -np.inf, np.inf), np.minimum(tx1, tx2))
    tx_hi = np.where(par_x, np.where(inside_x, np.inf, -np.inf), np.maximum(tx1, tx2))
    par_y = np.abs(uy)[:, None] < 1e-12
    inside_y = (y[:, None] >= box[None, :, 1]) & (y[:, None] <= box[None, :, 3])
    ty_lo = np.where(par_y, np.where(inside_y, -np.inf, np.inf), np.minimum(ty1, ty2))
    ty_hi = np.where(par_y, np.where(inside_y, np.inf, -np.inf), np.maximum(ty1, ty2))
    t_in = np.maximum(np.maximum(tx_lo, ty_lo), 0.0)
    t_out = np.minimum(tx_hi, ty_hi)
    return np.where(t_out >= t_in, t_in, np.inf)


def _circle_span(x, y, ux, uy, trees):
    """Horizontal ray against circles: (t_near, t_far) clipped to t >= 0, inf when missed."""
    cx = trees[None, :, 0] - x[:, None]
    cy = trees[None, :, 1] - y[:, None]
    b = cx * ux[:, None] + cy * uy[:, None]
    c = cx * cx + cy * cy - trees[None, :, 2] ** 2
    disc = b * b - c
    hit = disc >= 0
    root = np.sqrt(np.where(hit, disc, 0.0))
    t1 = np.maximum(b - root, 0.0)
    t2 = b + root
    ok = hit & (t2 >= 0)
    return np.where(ok, t1, np.inf), np.where(ok, t2, np.inf)


def beam_transmittance(town, x, y, sun_elev_deg, sun_azim_deg, z_m=1.1):
    """Direct-beam transmittance 0…1 at (x, y, z) for the sun at (elevation, azimuth), row-wise.

    A ray toward the sun is blocked by a building it meets below the roof; it keeps the
    crown's transmissivity for each crown it crosses between crown base and top, and
    a canopy's transmissivity when it crosses the canopy's plane inside its outline.
    Sun at or below the horizon gives 0.
    """
    x, y, el, az = (np.asarray(a, float) for a in np.broadcast_arrays(x, y, sun_elev_deg, sun_azim_deg))
    b, t, c = _obstacles(town)
    up = el > 0
    tan_b = np.tan(np.radians(np.where(up, el, 1.0)))
    ux, uy = np.sin(np.radians(az)), np.cos(np.radians(az))
    trans = np.ones_like(x)
    t_in = _box_entry(x, y, ux, uy, b)
    blocked = (np.isfinite(t_in) & (z_m + t_in * tan_b[:, None] < b[None, :, 4])).any(axis=1)
    trans[blocked] = 0.0
    t1, t2 = _circle_span(x, y, ux, uy, t)
    z1 = z_m + t1 * tan_b[:, None]
    z2 = z_m + t2 * tan_b[:, None]
    crosses = np.isfinite(t1) & (z2 >= t[None, :, 3]) & (z1 <= t[None, :, 4])
    trans *= np.prod(np.where(crosses, t[None, :, 5], 1.0), axis=1)
    if len(c):
        th = (c[None, :, 4] - z_m) / tan_b[:, None]
        px = x[:, None] + th * ux[:, None]
        py = y[:, None] + th * uy[:, None]
        under = (th >= 0) & (px >= c[None, :, 0]) & (px <= c[None, :, 2]) & (py >= c[None, :, 1]) & (py <= c[None, :, 3])
        trans *= np.prod(np.where(under, c[None, :, 5], 1.0), axis=1)
    return np.where(up, trans, 0.0)


def _disk_view_factor(dx, dy, r, h):
    """View factor from a horizontal element to a parallel disk of radius r, height h above, offset (dx, dy).

    F = ½·[1 − (h² + a² − r²)/√((h² + a² + r²)² − 4a²r²)], a the horizontal offset
    (differential element to a parallel disk; Siegel & Howell, Thermal Radiation Heat
    Transfer, view-factor catalogue). F = r²/(r² + h²) straight below the centre.
    """
    a2 = dx * dx + dy * dy
    h = np.maximum(h, 0.05)
    num = h * h + a2 - r * r
    den = np.sqrt((h * h + a2 + r * r) ** 2 - 4.0 * a2 * r * r)
    return 0.5 * (1.0 - num / den)


def sky_view_factor(town, x, y, z_m=1.1, n_sectors=36):
    """Sky view factor: buildings by horizon angles, crowns and canopies by their undersides.

    Buildings: SVF_b = mean over ``n_sectors`` azimuth sectors of cos²(h), h the highest
    roof edge seen in the sector (the horizon-angle form for a horizontal surface under an
    isotropic sky; Oke, Boundary Layer Climates). Crowns and canopies (taken opaque) each
    remove the share F of the sky their underside subtends (a parallel disk of the same
    area, :func:`_disk_view_factor`), combined as independent: SVF = SVF_b·Π(1 − F).
    Returns (svf, sky fraction not blocked by crowns and canopies).
    """
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    b, t, c = _obstacles(town)
    cos2 = np.zeros((len(x), n_sectors))
    for k in range(n_sectors):
        az = np.radians((k + 0.5) * 360.0 / n_sectors)
        ux = np.full_like(x, np.sin(az))
        uy = np.full_like(x, np.cos(az))
        t_in = _box_entry(x, y, ux, uy, b)
        hb = np.where(np.isfinite(t_in), np.arctan2(b[None, :, 4] - z_m, np.maximum(t_in, 0.5)), 0.0)
        cos2[:, k] = np.cos(np.clip(hb.max(axis=1, initial=0.0), 0, np.pi / 2)) ** 2
    svf_b = cos2.mean(axis=1)
    free = np.ones_like(x)
    for tx, ty, r, base, _top, _tr in t:
        free *= 1.0 - _disk_view_factor(x - tx, y - ty, r, base - z_m)
    for x0, y0, x1, y1, hgt, _tr in c:
        r_eq = np.sqrt((x1 - x0) * (y1 - y0) / np.pi)
        free *= 1.0 - _disk_view_factor(x - 0.5 * (x0 + x1), y - 0.5 * (y0 + y1), r_eq, hgt - z_m)
    return svf_b * free, free


# --- mean radiant temperature -----------------------------------------------------------------

def tmrt_from_fluxes(t_air_c, rh_pct, sun_elev_deg, dni_wm2, dhi_wm2, beam_trans, svf,
                     albedo=0.15, emis_ground=0.95, emis_wall=0.9):
    """Six-direction Tmrt (Thorsson et al. 2007, doi:10.1002/joc.1537), simplified for the demo.

    S = 0.7·ΣKᵢFᵢ + 0.97·ΣLᵢFᵢ + 0.7·fp·I·τ, F = 0.06 up/down, 0.22 lateral; the direct beam
    on the body uses the standing person's projected-area factor
    fp = 0.308·cos(β·(1 − β²/48402)) (β in degrees; Fanger 1970, as used by Thorsson 2007).
    Sky emissivity by Brutsaert (1975); sunlit ground 12 K above air scaled by the beam on
    the ground, shaded ground 2 K above; walls at air temperature + 4 K.
    """
    ta = np.asarray(t_air_c, float)
    el = np.asarray(sun_elev_deg, float)
    up = el > 0
    beta = np.where(up, el, 0.0)
    i_b = np.where(up, np.asarray(dni_wm2, float), 0.0) * np.asarray(beam_trans, float)
    d = np.where(up, np.asarray(dhi_wm2, float), 0.0)
    svf = np.asarray(svf, float)
    k_down = i_b * np.sin(np.radians(beta)) + d * svf
    k_up = albedo * k_down
    k_lat = 0.5 * d * svf + 0.5 * k_up
    fp = 0.308 * np.cos(np.radians(beta * (1.0 - beta ** 2 / 48402.0)))
    tk = ta + 273.15
    es = 6.112 * np.exp(17.62 * ta / (243.12 + ta))      # Magnus form over water (WMO-No. 8)
    e = es * np.asarray(rh_pct, float) / 100.0
    eps_sky = 1.24 * (e / tk) ** (1.0 / 7.0)             # Brutsaert (1975)
    t_ground = tk + 2.0 + 12.0 * np.clip(i_b * np.sin(np.radians(beta)) / 800.0, 0, 1.5)
    l_sky = eps_sky * SIGMA * tk ** 4
    l_wall = emis_wall * SIGMA * (tk + 4.0) ** 4
    l_down = svf * l_sky + (1 - svf) * l_wall
    l_up = emis_ground * SIGMA * t_ground ** 4
    l_lat = 0.5 * (svf * l_sky + (1 - svf) * l_wall) + 0.5 * l_up
    s = 0.7 * (0.06 * (k_down + k_up) + 4 * 0.22 * k_lat) + 0.97 * (0.06 * (l_down + l_up) + 4 * 0.22 * l_lat)
    s = s + 0.7 * fp * i_b
    return (s / (0.97 * SIGMA)) ** 0.25 - 273.15


def _h_globe(t_globe_c, t_air_c, wind_ms, diameter_m):
    """Convective coefficient term of ISO 7726 Annex B: the larger of forced and natural."""
    forced = 6.3 * np.maximum(wind_ms, 0.0) ** 0.6 / diameter_m ** 0.4
    natural = 1.4 * (np.abs(t_globe_c - t_air_c) / diameter_m) ** 0.25
    return np.maximum(forced, natural)


def tmrt_from_globe(t_globe_c, t_air_c, wind_ms, diameter_m=0.15, emissivity=0.95):
    """ISO 7726 Annex B: Tmrt from globe temperature (larger of forced and natural convection)."""
    tg = np.asarray(t_globe_c, float)
    ta = np.asarray(t_air_c, float)
    h = _h_globe(tg, ta, np.asarray(wind_ms, float), diameter_m)
    return ((tg + 273.15) ** 4 + h / (emissivity * SIGMA) * (tg - ta)) ** 0.25 - 273.15


def globe_from_tmrt(tmrt_c, t_air_c, wind_ms, diameter_m=0.15, emissivity=0.95):
    """Steady-state globe temperature for a given Tmrt: the inverse of :func:`tmrt_from_globe` (bisection)."""
    tr = np.asarray(tmrt_c, float)
    ta = np.asarray(t_air_c, float)
    v = np.asarray(wind_ms, float)
    lo = np.minimum(tr, ta) - 1.0
    hi = np.maximum(tr, ta) + 1.0
    for _ in range(60):
        mid = 0.5 * (lo + hi)
        f = tmrt_from_globe(mid, ta, v, diameter_m, emissivity) - tr
        lo = np.where(f < 0, mid, lo)
        hi = np.where(f < 0, hi, mid)
    return 0.5 * (lo + hi)
