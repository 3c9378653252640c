"""Sky view factor from horizon angles around a point.

For each point, ``n_sectors`` horizontal rays (sector centres at azimuths
``(k + ½)·360°/n``) are cast up to ``radius_m``. Every obstacle a ray meets hides an
elevation band of the sky in that direction: seen in the vertical plane of the ray
it occupies the distances ``[s_in, s_out]`` and heights ``[z_b, z_t]``, so it hides
elevations from ``atan2(z_b − z, s_out)`` (or the horizon when its base is below the
eye) up to ``atan2(z_t − z, s_in)`` (the zenith when the point stands under it). The
bands of all obstacles are merged per sector and the sky view factor of an
upward-facing horizontal surface is

.. math::

    \\psi = \\frac{1}{n}\\sum_k \\left(1 - \\left|\\bigcup_i [\\beta^{lo}_{ik}, \\beta^{hi}_{ik}]\\right|_{\\sin^2}\\right),
    \\qquad |[a, b]|_{\\sin^2} = \\sin^2 b - \\sin^2 a,

which for plain horizon angles :math:`\\beta_k` reduces to the classical
:math:`\\psi = 1 - \\frac{1}{n}\\sum_k \\sin^2\\beta_k = \\frac{1}{n}\\sum_k\\cos^2\\beta_k`
(Johnson & Watson 1984). Buildings, crowns and canopies all count as opaque for
``svf``; ``sky_frac_crowns`` is the same measure with crowns only (buildings and
canopies ignored); ``sky_diffuse_frac`` lets crowns and canopies pass diffuse sky light
by their transmissivity (a sail of transmissivity 0.5 passes half the sky it covers).
Spheroid crowns hide the band between the lowest and highest elevation of their
cross-section in each sector's vertical plane. Non-convex outlines are treated as convex along each ray
(first entry to last exit), which matters only for crowns and canopies seen from below.

References
----------
.. [1] Johnson, G. T., Watson, I. D. (1984). The determination of view-factors in urban
   canyons. J. Clim. Appl. Meteorol. 23, 329–335.
   doi:10.1175/1520-0450(1984)023<0329:TDOVFI>2.0.CO;2
.. [2] Oke, T. R. (1987). Boundary Layer Climates, 2nd ed. Routledge (canyon sky view
   factor at the centre of an infinitely long canyon: cos(arctan(2H/W))).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.environment.scene import KIND_CODE, Obstacles
from walkcomfort.environment.shade import _EMPTY, _arr, _obstacles, ray_pairs, segment_polygon_crossings

_CHUNK_RAYS = 100_000
#: Column: share of the isotropic diffuse sky light reaching the point, crowns and
#: canopies passing it by their transmissivity (buildings opaque) [-].
SKY_DIFFUSE_FRAC = C.SKY_DIFFUSE_FRAC


def _union_sin2(ray, lo, hi, n_rays):
    """Per ray, the sin² measure of the union of elevation bands [lo, hi] [rad]."""
    out = np.zeros(n_rays)
    if ray.size == 0:
        return out
    off = ray * 4.0  # bands live in [0, pi/2] < 4: offsets keep rays apart in one sort
    order = np.argsort(off + lo, kind="stable")
    ray, lo, hi, off = ray[order], lo[order], hi[order], off[order]
    run = np.maximum.accumulate(off + hi)
    prev = np.concatenate([[-np.inf], run[:-1]])
    start = np.maximum(off + lo, prev) - off
    seg = np.where(hi > start, np.sin(hi) ** 2 - np.sin(start) ** 2, 0.0)
    return np.bincount(ray, weights=seg, minlength=n_rays)


def _polygon_interval(obs, ob, px, py, dx, dy, radius):
    """First entry and last exit distance of rays in polygon obstacles (NaN where missed)."""
    ax, ay = px, py
    inside, n_cross, t_min, t_max = segment_polygon_crossings(obs, ob, ax, ay, ax + dx * radius, ay + dy * radius)
    met = inside | (n_cross > 0)
    ends_inside = inside ^ (n_cross % 2 == 1)
    s_in = np.where(inside, 0.0, t_min * radius)
    s_out = np.where(ends_inside | (n_cross == 0), radius, t_max * radius)
    return np.where(met, s_in, np.nan), np.where(met, s_out, np.nan)


def _band_angles(obs, ob, z, s_in, s_out):
    hi = np.arctan2(obs.z_top[ob] - z, s_in)  # s_in = 0 under the obstacle -> pi/2
    zb = obs.z_bottom[ob]
    lo = np.where(zb > z, np.arctan2(zb - z, np.maximum(s_out, 1e-9)), 0.0)
    return np.clip(lo, 0.0, np.pi / 2), np.clip(hi, 0.0, np.pi / 2)


_ELLIPSE_SAMPLES = 48


def _spheroid_band(obs, ob, px, py, pz, dx, dy):
    """Elevation band [rad] a spheroid crown hides in the vertical half-plane of a ray.

    The plane at horizontal distance d from the crown's axis cuts the spheroid in an
    ellipse of semi-axes sqrt(a² − d²) and c·sqrt(1 − d²/a²); the band runs from the lowest
    to the highest elevation of its points in front of the eye (sampled at 48 points), up
    to the zenith when the ellipse reaches over the eye.
    """
    a = obs.r[ob]
    c = 0.5 * (obs.z_top[ob] - obs.z_bottom[ob])
    cx, cy = obs.cx[ob] - px, obs.cy[ob] - py
    t = cx * dx + cy * dy
    d2 = cx * cx + cy * cy - t * t
    f = np.sqrt(np.clip(1.0 - d2 / (a * a), 0.0, 1.0))
    ah, bh = a * f, c * f
    w = 0.5 * (obs.z_top[ob] + obs.z_bottom[ob]) - pz
    th = np.linspace(0.0, 2 * np.pi, _ELLIPSE_SAMPLES, endpoint=False)
    ss = t[:, None] + ah[:, None] * np.cos(th)[None, :]
    zz = w[:, None] + bh[:, None] * np.sin(th)[None, :]
    ang = np.where(ss > 0, np.arctan2(zz, ss), np.nan)
    with np.errstate(invalid="ignore"):
        lo = np.nanmin(np.where(np.isfinite(ang), ang, np.inf), axis=1)
        hi = np.nanmax(np.where(np.isfinite(ang), ang, -np.inf), axis=1)
    over = (t - ah < 0) & (t + ah > 0) & (w + bh > 0)  # reaches over the eye: hides the zenith
    inside = (t * t) / np.maximum(ah * ah, 1e-12) + (w * w) / np.maximum(bh * bh, 1e-12) < 1.0
    hi = np.where(over, np.pi / 2, hi)
    lo = np.where(inside, 0.0, lo)
    lo = np.clip(np.where(np.isfinite(lo), lo, 0.0), 0.0, np.pi / 2)
    hi = np.clip(np.where(np.isfinite(hi), hi, 0.0), 0.0, np.pi / 2)
    return lo, np.where(f > 0, hi, lo)


#: Rounds of the "tallest first" search for the building horizon before testing all the rest.
_MAX_ROUNDS = 6


def _bands(obs: Obstacles, px, py, pz, dx, dy, radius, prune: bool = True):
    """Elevation bands hidden along each ray: one per crown/canopy met, one per ray for buildings.

    Buildings stand on the ground, so the bands they hide all start at the horizon and
    only the highest matters. Its search is pruned: a building's band cannot reach above
    ``atan2(z_t - z, d)`` with ``d`` the distance at which the ray enters its enclosing
    circle, so candidates are tested tallest-bound first and those whose bound is below
    the best exact value found are skipped (exact; ``prune=False`` tests all, for checks).
    """
    length = np.full(px.size, float(radius))
    ray, ob, enter, exit_ = ray_pairs(obs, px, py, dx, dy, length)
    keep = obs.z_top[ob] > pz[ray]
    ray, ob, enter, exit_ = ray[keep], ob[keep], enter[keep], exit_[keep]
    s_in = np.maximum(enter, 0.0)
    s_out = np.minimum(exit_, radius)
    # buildings (opaque, from the ground); crowns always keep their own bands for sky_frac_crowns
    grounded = (obs.kind[ob] == KIND_CODE["building"]) & (obs.z_bottom[ob] <= pz[ray]) & ~obs.is_circle[ob]
    out_ray, out_ob, out_lo, out_hi = [], [], [], []
    # crowns, canopies and point trees: every band counts
    other = ~grounded
    if other.any():
        r, o, si, so = ray[other], ob[other], s_in[other], s_out[other]
        poly = ~obs.is_circle[o]
        if poly.any():
            si = si.copy()
            so = so.copy()
            si[poly], so[poly] = _polygon_interval(obs, o[poly], px[r[poly]], py[r[poly]], dx[r[poly]],
                                                   dy[r[poly]], radius)
        ok = np.isfinite(si) & np.isfinite(so)
        r, o, si, so = r[ok], o[ok], si[ok], so[ok]
        lo, hi = _band_angles(obs, o, pz[r], si, so)
        if obs.is_spheroid is not None and obs.is_spheroid.any():
            sph = obs.is_spheroid[o]
            if sph.any():
                lo[sph], hi[sph] = _spheroid_band(obs, o[sph], px[r[sph]], py[r[sph]], pz[r[sph]],
                                                  dx[r[sph]], dy[r[sph]])
            keep = hi > lo
            r, o, lo, hi = r[keep], o[keep], lo[keep], hi[keep]
        out_ray.append(r), out_ob.append(o), out_lo.append(lo), out_hi.append(hi)
    # grounded polygons (buildings): the highest band per ray
    if grounded.any():
        r, o, d = ray[grounded], ob[grounded], s_in[grounded]
        bound = np.arctan2(obs.z_top[o] - pz[r], d)
        best = np.full(px.size, -1.0)
        best_ob = np.full(px.size, -1, dtype=np.int64)
        order = np.lexsort((-bound, r))
        r, o, bound = r[order], o[order], bound[order]
        rounds = 0
        while r.size:
            rounds += 1
            if prune and rounds <= _MAX_ROUNDS:
                first = np.ones(r.size, dtype=bool)
                first[1:] = r[1:] != r[:-1]
            else:
                first = np.ones(r.size, dtype=bool)
            tr, to = r[first], o[first]
            si, so = _polygon_interval(obs, to, px[tr], py[tr], dx[tr], dy[tr], radius)
            met = np.isfinite(si)
            _, hi = _band_angles(obs, to[met], pz[tr[met]], si[met], so[met])
            # keep the highest per ray
            cand = np.full(px.size, -1.0)
            np.maximum.at(cand, tr[met], hi)
            better = cand > best
            best = np.where(better, cand, best)
            if better.any():
                rr = tr[met]
                winner = hi >= cand[rr] - 1e-15
                best_ob[rr[winner]] = to[met][winner]
            rest = ~first
            r, o, bound = r[rest], o[rest], bound[rest]
            keep = bound > best[r]
            r, o, bound = r[keep], o[keep], bound[keep]
        has = best >= 0
        out_ray.append(np.flatnonzero(has)), out_ob.append(best_ob[has])
        out_lo.append(np.zeros(int(has.sum()))), out_hi.append(best[has])
    if not out_ray:
        e = np.empty(0)
        return np.empty(0, np.int64), np.empty(0, np.int64), e, e
    return (np.concatenate(out_ray), np.concatenate(out_ob), np.concatenate(out_lo), np.concatenate(out_hi))


def sky_view_factor(scene, x_m, y_m, z_m=1.1, n_sectors: int = 36, radius_m: float = 200.0,
                    _prune: bool = True) -> pd.DataFrame:
    """Sky view factor and crown-free sky fraction at points.

    Parameters
    ----------
    scene : Scene or None
        Obstacles; ``None`` gives 1 everywhere.
    x_m, y_m : array-like or Series
        Points in the scene's local frame [m].
    z_m : float or array-like, default 1.1
        Height of the viewpoint above ground [m] (use 0 for the ground-level SVF of
        the urban-climate literature).
    n_sectors : int, default 36
        Number of azimuth sectors (10° each by default).
    radius_m : float, default 200
        Farthest obstacle considered [m]. A 30 m building 200 m away hides 8.5° of
        elevation, i.e. changes its sector by sin²(8.5°) ≈ 0.02.

    Returns
    -------
    DataFrame
        ``svf`` and ``sky_frac_crowns`` [-] in 0…1, and ``sky_diffuse_frac``: the share of
        isotropic diffuse sky light reaching the point when crowns and canopies pass it by
        their ``transmissivity`` (``svf`` ≤ it ≤ the buildings-only sky view). Circumsolar
        diffuse light is treated as part of the isotropic sky (it is not sent along the
        beam), which overstates diffuse light in the shade of a crown on clear days.
        Index of ``x_m`` if a Series.
        NaN where the position is missing.

    References
    ----------
    Johnson & Watson (1984), doi:10.1175/1520-0450(1984)023<0329:TDOVFI>2.0.CO;2.
    """
    index = x_m.index if isinstance(x_m, pd.Series) else None
    x = _arr(x_m)
    n = x.size
    y, z = _arr(y_m, n), _arr(z_m, n)
    if int(n_sectors) < 4:
        from walkcomfort.errors import InputError

        raise InputError(f"n_sectors = {n_sectors} is too few", where="sky_view_factor", fix="use 36 or more")
    obs = _obstacles(scene) or _EMPTY
    S = int(n_sectors)
    svf = np.full(n, np.nan)
    crowns = np.full(n, np.nan)
    ok = np.isfinite(x) & np.isfinite(y) & np.isfinite(z)
    svf[ok] = 1.0
    crowns[ok] = 1.0
    pts = np.flatnonzero(ok & (z < obs.z_max)) if obs.n else np.empty(0, np.int64)
    theta = np.radians((np.arange(S) + 0.5) * 360.0 / S + obs.grid_convergence_deg)
    sdx, sdy = np.sin(theta), np.cos(theta)
    per_chunk = max(1, _CHUNK_RAYS // S)
    is_crown = obs.kind == KIND_CODE["tree"]
    is_bld = obs.kind == KIND_CODE["building"]
    diffuse = np.full(n, np.nan)
    diffuse[ok] = 1.0
    for c0 in range(0, pts.size, per_chunk):
        p = pts[c0:c0 + per_chunk]
        px, py, pz = np.repeat(x[p], S), np.repeat(y[p], S), np.repeat(z[p], S)
        dx, dy = np.tile(sdx, p.size), np.tile(sdy, p.size)
        ray, ob, lo, hi = _bands(obs, px, py, pz, dx, dy, radius_m, prune=_prune)
        blocked = _union_sin2(ray, lo, hi, px.size).reshape(p.size, S)
        cr = is_crown[ob]
        blocked_c = _union_sin2(ray[cr], lo[cr], hi[cr], px.size).reshape(p.size, S)
        svf[p] = np.clip(1.0 - blocked.mean(axis=1), 0.0, 1.0)
        crowns[p] = np.clip(1.0 - blocked_c.mean(axis=1), 0.0, 1.0)
        # crowns and canopies pass diffuse light by their transmissivity: the part of the
        # sky they hide (beyond the buildings) is weighted by the mean transmissivity of the
        # crowns and canopies in that sector (each weighted by the sky it hides)
        b = is_bld[ob]
        blocked_b = _union_sin2(ray[b], lo[b], hi[b], px.size)
        m = np.sin(hi[~b]) ** 2 - np.sin(lo[~b]) ** 2
        wsum = np.bincount(ray[~b], weights=m, minlength=px.size)
        tsum = np.bincount(ray[~b], weights=m * obs.tau_base[ob[~b]], minlength=px.size)
        tbar = np.where(wsum > 0, tsum / np.where(wsum > 0, wsum, 1.0), 0.0)
        hidden = blocked_b + (1.0 - tbar) * np.maximum(blocked.ravel() - blocked_b, 0.0)
        diffuse[p] = np.clip(1.0 - hidden.reshape(p.size, S).mean(axis=1), 0.0, 1.0)
    return pd.DataFrame({C.SVF: svf, C.SKY_VIEW_CROWN_FRAC: crowns, SKY_DIFFUSE_FRAC: diffuse},
                        index=index if index is not None else pd.RangeIndex(n))


def wall_sectors(scene, x_m, y_m, z_m=1.1, n_sectors: int = 36, radius_m: float = 200.0) -> dict:
    """The building wall seen in each azimuth sector above the horizon of a point.

    For every point and sector the building that sets the sector's horizon (as in
    :func:`sky_view_factor`): the sin² measure of the band it hides (its share of the
    sector's upper hemisphere), the horizontal distance to the wall, the wall's top
    height and the scene feature it belongs to.

    Returns
    -------
    dict of ndarray, each shape (N, n_sectors)
        ``band`` [-] (0 where no building), ``dist_m``, ``top_m`` (NaN where none),
        ``feature`` (−1 where none); and ``azim_deg`` (n_sectors,) the sector directions
        (true azimuth, 0 = north, clockwise).
    """
    x = _arr(x_m)
    n = x.size
    y, z = _arr(y_m, n), _arr(z_m, n)
    obs = _obstacles(scene) or _EMPTY
    S = int(n_sectors)
    band = np.zeros((n, S))
    dist = np.full((n, S), np.nan)
    top = np.full((n, S), np.nan)
    feat = np.full((n, S), -1, dtype=np.int64)
    azim = (np.arange(S) + 0.5) * 360.0 / S
    ok = np.isfinite(x) & np.isfinite(y) & np.isfinite(z)
    pts = np.flatnonzero(ok & (z < obs.z_max)) if obs.n else np.empty(0, np.int64)
    theta = np.radians(azim + obs.grid_convergence_deg)
    sdx, sdy = np.sin(theta), np.cos(theta)
    per_chunk = max(1, _CHUNK_RAYS // S)
    for c0 in range(0, pts.size, per_chunk):
        p = pts[c0:c0 + per_chunk]
        px, py, pz = np.repeat(x[p], S), np.repeat(y[p], S), np.repeat(z[p], S)
        dx, dy = np.tile(sdx, p.size), np.tile(sdy, p.size)
        ray, ob, lo, hi = _bands(obs, px, py, pz, dx, dy, radius_m)
        wall = (obs.kind[ob] == KIND_CODE["building"]) & (lo <= 0.0) & (hi > 0.0)
        ray, ob, hi = ray[wall], ob[wall], hi[wall]
        best = np.full(px.size, -1.0)
        np.maximum.at(best, ray, hi)
        win = hi >= best[ray]
        ray, ob, hi = ray[win], ob[win], hi[win]
        b = np.zeros(px.size)
        d = np.full(px.size, np.nan)
        t = np.full(px.size, np.nan)
        f = np.full(px.size, -1, dtype=np.int64)
        b[ray] = np.sin(hi) ** 2
        d[ray] = (obs.z_top[ob] - pz[ray]) / np.tan(np.maximum(hi, 1e-9))
        t[ray] = obs.z_top[ob]
        f[ray] = obs.feature[ob]
        band[p], dist[p], top[p], feat[p] = (v.reshape(p.size, S) for v in (b, d, t, f))
    return {"band": band, "dist_m": dist, "top_m": top, "feature": feat, "azim_deg": azim}
