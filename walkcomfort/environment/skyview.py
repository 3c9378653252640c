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
canopies ignored). Non-convex outlines are treated as convex along each ray
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


def _bands(obs: Obstacles, px, py, pz, dx, dy, radius):
    """Elevation bands hidden by each (ray, obstacle) pair."""
    length = np.full(px.size, float(radius))
    ray, ob, enter, exit_ = ray_pairs(obs, px, py, dx, dy, length)
    keep = obs.z_top[ob] > pz[ray]
    ray, ob, enter, exit_ = ray[keep], ob[keep], enter[keep], exit_[keep]
    s_in = np.maximum(enter, 0.0)
    s_out = np.minimum(exit_, radius)
    poly = ~obs.is_circle[ob]
    if poly.any():
        rp = ray[poly]
        ax, ay = px[rp], py[rp]
        inside, n_cross, t_min, t_max = segment_polygon_crossings(obs, ob[poly], ax, ay, ax + dx[rp] * radius,
                                                                  ay + dy[rp] * radius)
        met = inside | (n_cross > 0)
        ends_inside = inside ^ (n_cross % 2 == 1)
        p_in = np.where(inside, 0.0, t_min * radius)
        p_out = np.where(ends_inside | (n_cross == 0), radius, t_max * radius)
        s_in[poly] = np.where(met, p_in, np.nan)
        s_out[poly] = np.where(met, p_out, np.nan)
    ok = np.isfinite(s_in) & np.isfinite(s_out)
    ray, ob, s_in, s_out = ray[ok], ob[ok], s_in[ok], s_out[ok]
    z = pz[ray]
    hi = np.arctan2(obs.z_top[ob] - z, s_in)  # s_in = 0 under the obstacle -> pi/2
    zb = obs.z_bottom[ob]
    lo = np.where(zb > z, np.arctan2(zb - z, np.maximum(s_out, 1e-9)), 0.0)
    lo = np.clip(lo, 0.0, np.pi / 2)
    hi = np.clip(hi, 0.0, np.pi / 2)
    return ray, ob, lo, hi


def sky_view_factor(scene, x_m, y_m, z_m=1.1, n_sectors: int = 36, radius_m: float = 200.0) -> pd.DataFrame:
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
        ``svf`` and ``sky_frac_crowns`` [-] in 0…1; index of ``x_m`` if a Series.
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
    for c0 in range(0, pts.size, per_chunk):
        p = pts[c0:c0 + per_chunk]
        px, py, pz = np.repeat(x[p], S), np.repeat(y[p], S), np.repeat(z[p], S)
        dx, dy = np.tile(sdx, p.size), np.tile(sdy, p.size)
        ray, ob, lo, hi = _bands(obs, px, py, pz, dx, dy, radius_m)
        blocked = _union_sin2(ray, lo, hi, px.size).reshape(p.size, S)
        cr = is_crown[ob]
        blocked_c = _union_sin2(ray[cr], lo[cr], hi[cr], px.size).reshape(p.size, S)
        svf[p] = np.clip(1.0 - blocked.mean(axis=1), 0.0, 1.0)
        crowns[p] = np.clip(1.0 - blocked_c.mean(axis=1), 0.0, 1.0)
    return pd.DataFrame({C.SVF: svf, C.SKY_VIEW_CROWN_FRAC: crowns},
                        index=index if index is not None else pd.RangeIndex(n))
