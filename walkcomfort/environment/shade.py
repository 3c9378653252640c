"""Direct-beam transmittance: how much of the sun reaches a walker through the scene.

Exact vector geometry, vectorised over (ray, obstacle) pairs:

1. A ray leaves the point :math:`(x, y, z)` toward the sun (elevation :math:`\\gamma`,
   azimuth :math:`A`, 0 = north clockwise); at horizontal distance :math:`s` it is at
   height :math:`z + s\\tan\\gamma`. Its horizontal reach is cut where it rises above the
   tallest obstacle (and at the far side of the scene).
2. Candidates: the STRtree of obstacle footprints is queried with every ray's
   horizontal segment (bounding boxes), so an obstacle is only looked at if its
   footprint box meets the part of the ray that is still low enough to hit anything.
3. Exact test per pair: the obstacle occupies heights :math:`[z_b, z_t]`, so the ray can
   only meet it for :math:`s \\in [(z_b - z)/\\tan\\gamma, (z_t - z)/\\tan\\gamma]`; the ray is
   cut against the obstacle's bounding circle (analytic, exact for point trees), and for
   polygon solids the remaining segment is tested against every edge (segment–segment
   crossing) plus a crossing-number test of its start (inside a footprint). Holes and
   non-convex outlines are exact.
4. Transmittance is the product over crossed solids: 0 for buildings, the crown's
   (monthly) transmissivity for trees, the canopy's for canopies.

Sun at or below the horizon gives 0 (no direct beam); missing inputs give NaN.

The ground is flat and the walker's ``z_m`` is the height of the point that must see the
sun (1.1 m, the centre of a standing body, by default).

References
----------
.. [1] Ratti, C., Richens, P. (2004). Raster analysis of urban form. Environ. Plann. B
   31, 297–309. doi:10.1068/b2665 (the raster alternative; not used here — exact
   geometry has no resolution error).
"""

from __future__ import annotations

import numpy as np
import shapely

from walkcomfort.environment.crowns import CLUMPING, G_SPHERICAL
from walkcomfort.environment.scene import KIND_CODE, Obstacles, Scene

#: How crowns attenuate the beam (see :func:`beam_transmittance`).
CROWN_MODELS = ("per_crossing", "path_length", "leaf_area")

_CHUNK_EDGES = 4_000_000


def _arr(a, n=None):
    v = np.asarray(a, dtype=float).reshape(-1) if np.ndim(a) else np.asarray([float(a)])
    if n is not None and v.size == 1 and n != 1:
        v = np.full(n, v[0])
    return v


def _month_col(month, n: int) -> np.ndarray:
    """Column of ``tau_month`` to use: 0 = leaf-on base value, 1..12 the months."""
    if month is None:
        return np.zeros(n, dtype=np.int64)
    m = np.asarray(month).reshape(-1)
    if m.size == 1:
        m = np.full(n, m[0])
    m = np.where(np.isfinite(m.astype(float)), m.astype(float), 0).astype(np.int64)
    return np.clip(m, 0, 12)


def _tau_table(obs: Obstacles) -> np.ndarray:
    # (n, 13): column 0 = the leaf-on base transmissivity, columns 1..12 the months
    return np.column_stack([obs.tau_base, obs.tau_month]) if obs.n else np.zeros((0, 13))


def spheroid_interval(obs: Obstacles, ob, px, py, pz, dx, dy, tan_g):
    """Horizontal distances where a rising ray enters and leaves spheroid crowns (NaN if missed).

    The crown of obstacle ``ob`` is the spheroid with horizontal semi-axis ``r`` centred
    above the trunk at mid-crown height, vertical semi-axis half the crown depth. On the
    ray :math:`(p_x + s d_x, p_y + s d_y, p_z + s\tan\\gamma)` the spheroid's equation is a
    quadratic in the horizontal distance ``s``; its roots are returned unclipped.
    """
    a = obs.r[ob]
    c = 0.5 * (obs.z_top[ob] - obs.z_bottom[ob])
    k2 = (a / c) ** 2
    u = px - obs.cx[ob]
    v = py - obs.cy[ob]
    w = pz - 0.5 * (obs.z_top[ob] + obs.z_bottom[ob])
    qa = 1.0 + k2 * tan_g * tan_g
    qb = 2.0 * (u * dx + v * dy + k2 * w * tan_g)
    qc = u * u + v * v + k2 * w * w - a * a
    disc = qb * qb - 4.0 * qa * qc
    root = np.sqrt(np.where(disc > 0, disc, np.nan))
    return (-qb - root) / (2.0 * qa), (-qb + root) / (2.0 * qa)


def ray_pairs(obs: Obstacles, x, y, dx, dy, length):
    """Candidate (ray, obstacle) pairs: STRtree bounding-box query, then the bounding circle.

    Parameters
    ----------
    obs : Obstacles
        Prepared scene obstacles.
    x, y : ndarray
        Ray origins [m].
    dx, dy : ndarray
        Unit horizontal directions.
    length : ndarray
        Horizontal ray lengths [m] (> 0).

    Returns
    -------
    ray, ob : ndarray of int
        Pair indices.
    enter, exit : ndarray
        Distances along the ray where it enters and leaves the obstacle's bounding
        circle [m] (unclipped).
    """
    x2 = x + dx * length
    y2 = y + dy * length
    coords = np.empty((x.size, 2, 2))
    coords[:, 0, 0], coords[:, 0, 1], coords[:, 1, 0], coords[:, 1, 1] = x, y, x2, y2
    lines = shapely.linestrings(coords)
    ray, ob = obs.tree.query(lines)
    ccx = obs.cx[ob] - x[ray]
    ccy = obs.cy[ob] - y[ray]
    t = ccx * dx[ray] + ccy * dy[ray]
    d2 = ccx * ccx + ccy * ccy - t * t
    r2 = obs.r[ob] ** 2
    keep = d2 < r2
    h = np.sqrt(np.maximum(r2 - d2, 0.0))
    enter, exit_ = t - h, t + h
    keep &= (exit_ > 0) & (enter < length[ray])
    return ray[keep], ob[keep], enter[keep], exit_[keep]


def segment_polygon_crossings(obs: Obstacles, ob, ax, ay, bx, by, want_t: bool = True, may_start_inside=None):
    """Crossings of segment A→B with the edges of polygon obstacle ``ob``, per pair.

    Vectorised over pairs through the obstacles' edge CSR (exterior and hole rings),
    processed in bounded chunks.

    Returns
    -------
    inside : ndarray of bool
        A lies inside the polygon (crossing-number test; holes count as outside).
    n_cross : ndarray of int
        Number of edges the segment crosses.
    t_min, t_max : ndarray
        Smallest and largest crossing parameter along A→B (0…1; NaN without crossings).

    ``may_start_inside`` (bool per pair, optional) skips the crossing-number test where
    the caller knows A lies outside (e.g. on the obstacle's enclosing circle).
    """
    k = ob.size
    inside = np.zeros(k, dtype=bool)
    n_cross = np.zeros(k, dtype=np.int64)
    t_min = np.full(k, np.nan)
    t_max = np.full(k, np.nan)
    if k == 0:
        return inside, n_cross, t_min, t_max
    start = obs.edge_ptr[ob]
    counts = obs.edge_ptr[ob + 1] - start
    csum = np.cumsum(counts)
    lo = 0
    while lo < k:
        base = csum[lo - 1] if lo else 0
        hi = int(np.searchsorted(csum, base + _CHUNK_EDGES, side="right"))
        hi = min(max(hi, lo + 1), k)
        sl = slice(lo, hi)
        c = counts[sl]
        total = int(c.sum())
        rep = np.repeat(np.arange(hi - lo), c)
        offs = np.repeat(np.cumsum(c) - c, c)
        e = np.repeat(start[sl], c) + (np.arange(total) - offs)
        e1x, e1y, e2x, e2y = obs.ex1[e], obs.ey1[e], obs.ex2[e], obs.ey2[e]
        pax, pay = ax[sl][rep], ay[sl][rep]
        rx, ry = bx[sl][rep] - pax, by[sl][rep] - pay
        sx, sy = e2x - e1x, e2y - e1y
        den = rx * sy - ry * sx
        qx, qy = e1x - pax, e1y - pay
        with np.errstate(divide="ignore", invalid="ignore"):
            tt = (qx * sy - qy * sx) / den
            uu = (qx * ry - qy * rx) / den
            cross = (den != 0) & (tt >= 0) & (tt <= 1) & (uu >= 0) & (uu <= 1)
        m = hi - lo
        n_cross[sl] = np.bincount(rep, weights=cross, minlength=m).astype(np.int64)
        sub = slice(None) if may_start_inside is None else np.flatnonzero(np.asarray(may_start_inside[sl])[rep])
        if may_start_inside is None or sub.size:
            py_, px_ = pay[sub], pax[sub]
            y1, y2, x1 = e1y[sub], e2y[sub], e1x[sub]
            with np.errstate(divide="ignore", invalid="ignore"):
                straddle = (y1 > py_) != (y2 > py_)
                xint = x1 + (py_ - y1) * sx[sub] / sy[sub]
                toggle = straddle & (px_ < xint)
            inside[sl] = np.bincount(rep[sub], weights=toggle, minlength=m).astype(np.int64) % 2 == 1
        if want_t and cross.any():
            tmin = np.full(m, np.inf)
            tmax = np.full(m, -np.inf)
            np.minimum.at(tmin, rep[cross], tt[cross])
            np.maximum.at(tmax, rep[cross], tt[cross])
            t_min[sl] = np.where(np.isfinite(tmin), tmin, np.nan)
            t_max[sl] = np.where(np.isfinite(tmax), tmax, np.nan)
        lo = hi
    return inside, n_cross, t_min, t_max


#: Width of the direction bins rows are grouped in for the candidate search [°]; the
#: exact test always uses each row's own direction, the bin only widens the search.
_DIR_BIN_DEG = 0.5


def _group_candidates(obs: Obstacles, px, py, pz, tan_g, theta, sub):
    """Candidate (row, obstacle) pairs for rows whose sun directions share one bin.

    In a frame rotated so that ``u`` points toward the sun (the bin's mean direction)
    an obstacle can only shade a point inside the rectangle
    ``v ∈ [v_i − r_i − s1 sin δ, v_i + r_i + s1 sin δ]``,
    ``u ∈ [u_i − r_i − s1, u_i + r_i − s0 cos δ]`` (its bounding circle swept back from the
    sun over the distances ``[s0, s1]`` at which the ray is within the obstacle's heights;
    ``δ`` the largest deviation of a row's direction from the bin's). Points are binned in
    strips of ``v`` and sorted by ``u``, so each rectangle finds its points by binary search.
    """
    tc = np.arctan2(np.sin(theta).mean(), np.cos(theta).mean())
    dxc, dyc = np.sin(tc), np.cos(tc)
    delta = float(np.max(np.abs(np.angle(np.exp(1j * (theta - tc))))))
    sin_d, cos_d = np.sin(delta), np.cos(delta)
    # rows: rotated coordinates
    pu = px * dxc + py * dyc
    pv = px * dyc - py * dxc
    # obstacles: only those the STRtree says lie in the swept box of the rows
    zmin, zmax = pz.min(), pz.max()
    tmin, tmax = tan_g.min(), tan_g.max()
    ob = sub
    ob = ob[obs.z_top[ob] > zmin]
    if ob.size == 0:
        return np.empty(0, np.int64), np.empty(0, np.int64)
    s0 = np.maximum((obs.z_bottom[ob] - zmax) / tmax, 0.0)
    s1 = (obs.z_top[ob] - zmin) / tmin
    ou = obs.cx[ob] * dxc + obs.cy[ob] * dyc
    ov = obs.cx[ob] * dyc - obs.cy[ob] * dxc
    r = obs.r[ob]
    v_lo, v_hi = ov - r - s1 * sin_d, ov + r + s1 * sin_d
    u_lo, u_hi = ou - r - s1, ou + r - s0 * cos_d
    umin, umax = pu.min(), pu.max()
    vmin, vmax = pv.min(), pv.max()
    keep = (u_hi >= umin) & (u_lo <= umax) & (v_hi >= vmin) & (v_lo <= vmax)
    ob, u_lo, u_hi, v_lo, v_hi = ob[keep], u_lo[keep], u_hi[keep], v_lo[keep], v_hi[keep]
    if ob.size == 0:
        return np.empty(0, np.int64), np.empty(0, np.int64)
    w = max(1.0, float(np.median(2 * obs.r[ob])))
    n_strip = int((vmax - vmin) // w) + 1
    strip = ((pv - vmin) // w).astype(np.int64)
    span = (umax - umin) + 2.0
    keys = strip * span + (pu - umin)
    order = np.argsort(keys, kind="stable")
    keys = keys[order]
    k0 = np.clip(((v_lo - vmin) // w).astype(np.int64), 0, n_strip - 1)
    k1 = np.clip(((v_hi - vmin) // w).astype(np.int64), 0, n_strip - 1)
    nk = k1 - k0 + 1
    rect = np.repeat(np.arange(ob.size), nk)
    kk = np.repeat(k0, nk) + (np.arange(rect.size) - np.repeat(np.cumsum(nk) - nk, nk))
    lo_u = np.clip(u_lo[rect], umin, umax) - umin
    hi_u = np.clip(u_hi[rect], umin, umax) - umin
    lo = np.searchsorted(keys, kk * span + lo_u, side="left")
    hi = np.searchsorted(keys, kk * span + hi_u, side="right")
    cnt = hi - lo
    sel = cnt > 0
    rect, lo, cnt = rect[sel], lo[sel], cnt[sel]
    pair_rect = np.repeat(rect, cnt)
    pos = np.repeat(lo, cnt) + (np.arange(pair_rect.size) - np.repeat(np.cumsum(cnt) - cnt, cnt))
    return order[pos], ob[pair_rect]


def _beam_kernel(obs: Obstacles, x, y, z, elev, azim, mcol, crown_model: str = "per_crossing") -> np.ndarray:
    m = x.size
    out = np.full(m, np.nan)
    ok = np.isfinite(x) & np.isfinite(y) & np.isfinite(z) & np.isfinite(elev) & np.isfinite(azim)
    out[ok & (elev <= 0)] = 0.0
    day = ok & (elev > 0)
    out[day] = 1.0
    if obs.n == 0 or not day.any():
        return out
    tau_tab = _tau_table(obs)
    rows = np.flatnonzero(day & (z < obs.z_max))
    if rows.size == 0:
        return out
    theta_all = np.radians(np.mod(azim + obs.grid_convergence_deg, 360.0))  # true azimuth -> local grid
    dbin = np.floor(np.degrees(theta_all[rows]) / _DIR_BIN_DEG).astype(np.int64)
    order = np.argsort(dbin, kind="stable")
    rows, dbin = rows[order], dbin[order]
    cuts = np.flatnonzero(np.diff(dbin)) + 1
    groups = np.split(np.arange(rows.size), cuts)
    # no ray needs to reach beyond the box holding both the obstacles and the points
    x_lo, y_lo = min(np.min(obs.cx - obs.r), x[rows].min()), min(np.min(obs.cy - obs.r), y[rows].min())
    x_hi, y_hi = max(np.max(obs.cx + obs.r), x[rows].max()), max(np.max(obs.cy + obs.r), y[rows].max())
    reach_cap = float(np.hypot(x_hi - x_lo, y_hi - y_lo)) + 1.0
    for gi in groups:
        r = rows[gi]
        px, py, pz = x[r], y[r], z[r]
        tan_g = np.tan(np.radians(elev[r]))
        theta = theta_all[r]
        dx, dy = np.sin(theta), np.cos(theta)
        # spatial index: obstacles whose footprint box meets the box swept by the rows'
        # rays up to the height of the tallest obstacle at this sun elevation
        reach = min((obs.z_max - pz.min()) / tan_g.min(), reach_cap)
        ex, ey = px + dx * reach, py + dy * reach
        box = shapely.box(min(px.min(), ex.min()), min(py.min(), ey.min()),
                          max(px.max(), ex.max()), max(py.max(), ey.max()))
        sub = obs.tree.query(box)
        if sub.size == 0:
            continue
        ray, ob = _group_candidates(obs, px, py, pz, tan_g, theta, np.sort(sub))
        if ray.size == 0:
            continue
        # exact test with each row's own direction and heights
        tg = tan_g[ray]
        s0 = np.maximum((obs.z_bottom[ob] - pz[ray]) / tg, 0.0)
        s1 = (obs.z_top[ob] - pz[ray]) / tg
        ccx = obs.cx[ob] - px[ray]
        ccy = obs.cy[ob] - py[ray]
        rdx, rdy = dx[ray], dy[ray]
        t = ccx * rdx + ccy * rdy
        d2 = ccx * ccx + ccy * ccy - t * t
        r2 = obs.r[ob] ** 2
        h = np.sqrt(np.maximum(r2 - d2, 0.0))
        a_s = np.maximum(s0, t - h)
        b_s = np.minimum(s1, t + h)
        keep = (d2 < r2) & (b_s > a_s)
        if obs.is_spheroid is not None and obs.is_spheroid.any():
            sph = obs.is_spheroid[ob]
            if sph.any():
                s_in, s_out = spheroid_interval(obs, ob[sph], px[ray[sph]], py[ray[sph]], pz[ray[sph]],
                                                rdx[sph], rdy[sph], tg[sph])
                a_s[sph] = np.maximum(s_in, 0.0)
                b_s[sph] = s_out
                keep[sph] = np.isfinite(s_in) & (s_out > a_s[sph])
        ray, ob, a_s, b_s, rdx, rdy = ray[keep], ob[keep], a_s[keep], b_s[keep], rdx[keep], rdy[keep]
        starts_in = a_s > (t - h)[keep]  # the segment starts inside the enclosing circle
        path = crown_model == "path_length"
        want_len = path or crown_model == "leaf_area"
        hit = obs.is_circle[ob].copy()
        chord = b_s - a_s  # horizontal length inside the solid (exact for circles)
        poly = ~hit
        if poly.any():
            rp = ray[poly]
            inside, n_cross, t_lo, t_hi = segment_polygon_crossings(
                obs, ob[poly], px[rp] + a_s[poly] * rdx[poly], py[rp] + a_s[poly] * rdy[poly],
                px[rp] + b_s[poly] * rdx[poly], py[rp] + b_s[poly] * rdy[poly], want_t=want_len,
                may_start_inside=None if want_len else starts_in[poly])
            hit[poly] = inside | (n_cross > 0)
            if want_len:  # first entry to last exit (convex along the ray)
                t_in = np.where(inside, 0.0, t_lo)
                t_out = np.where(inside ^ (n_cross % 2 == 1), 1.0, t_hi)
                chord[poly] = np.nan_to_num(t_out - t_in) * chord[poly]
        ray, ob, chord = ray[hit], ob[hit], chord[hit]
        if ray.size == 0:
            continue
        tau = tau_tab[ob, mcol[r][ray]]
        if crown_model == "leaf_area":
            # Campbell & Norman (1998): exp(-G Omega LAD l), LAD = LAI / crown depth, l the 3-D path
            crown = obs.kind[ob] == KIND_CODE["tree"]
            l3d = chord * np.sqrt(1.0 + tan_g[ray] ** 2)
            lad = obs.area_index[ob, mcol[r][ray]] / np.maximum(obs.z_top[ob] - obs.z_bottom[ob], 1e-6)
            tau = np.where(crown, np.exp(-G_SPHERICAL * CLUMPING * lad * l3d), tau)
        if path:
            # Beer–Lambert: tau^(l / l_mean), l the 3-D path in the crown, l_mean its mean chord
            crown = obs.kind[ob] == KIND_CODE["tree"]
            l3d = chord * np.sqrt(1.0 + tan_g[ray] ** 2)
            expo = np.where(crown, l3d / obs.mean_chord_m[ob], 1.0)
            tau = np.where(tau > 0, np.power(np.where(tau > 0, tau, 1.0), expo), 0.0)
        opaque = np.bincount(ray, weights=(tau <= 0), minlength=r.size) > 0
        logsum = np.bincount(ray, weights=np.log(np.where(tau > 0, tau, 1.0)), minlength=r.size)
        out[r] = np.where(opaque, 0.0, np.exp(logsum))
    return out


def _crown_model(name: str) -> str:
    if name not in CROWN_MODELS:
        from walkcomfort.errors import InputError

        raise InputError(f"crown_model {name!r} is not one of {', '.join(CROWN_MODELS)}",
                         where="beam_transmittance", fix="use crown_model='per_crossing' (default), 'path_length' or 'leaf_area'")
    return name


def _obstacles(scene) -> Obstacles | None:
    if scene is None:
        return None
    if isinstance(scene, Obstacles):
        return scene
    if isinstance(scene, Scene):
        return scene.obstacles
    raise TypeError(f"scene must be a Scene, got {type(scene).__name__}")


def beam_transmittance(scene, x_m, y_m, sun_elev_deg, sun_azim_deg, z_m=1.1, month=None,
                       crown_model: str = "per_crossing") -> np.ndarray:
    """Direct-beam transmittance for rows that each have their own point and sun (timelines).

    Parameters
    ----------
    scene : Scene or None
        Obstacles; ``None`` means open ground (1 by day).
    x_m, y_m : array-like
        Point positions in the scene's local frame [m] (``scene.project(lon, lat)``).
    sun_elev_deg, sun_azim_deg : array-like
        Apparent sun elevation and azimuth (0 = north, clockwise) per row [°].
    z_m : float or array-like, default 1.1
        Height above ground of the point that must see the sun [m].
    month : int or array-like, optional
        Month 1…12 per row (or one for all) for trees' ``transmissivity_by_month``;
        ``None`` uses each crown's ``transmissivity``.
    crown_model : {"per_crossing", "path_length"}
        ``"per_crossing"``: a crown passes its transmissivity :math:`\\tau` once per
        crossing. ``"path_length"``: Beer–Lambert along the path,
        :math:`\\tau^{\\ell/\\bar\\ell}` with :math:`\\ell` the 3-D path length in the crown
        and :math:`\\bar\\ell = 4V/S` its mean chord (Cauchy's formula), i.e. an extinction
        coefficient :math:`-\\ln\\tau/\\bar\\ell`, so that a typical chord passes
        :math:`\\tau`; a ray grazing the crown's edge passes more light, one along its
        longest axis less. ``"leaf_area"``: Campbell & Norman (1998),
        :math:`\\exp(-G\\,\\Omega\\,\\mathrm{LAD}\\,\\ell)` with G = 0.5 (spherical leaf angles),
        Ω the clumping index, LAD = LAI / crown depth from the tree's ``lai`` (or its
        ``crown_type`` default; woody area in leaf-off months) — for a ray through a
        horizontal layer this is exp(−G·Ω·LAI/sin β). Canopies always pass their
        transmissivity once.

    Returns
    -------
    ndarray
        Transmittance 0 (full shade) … 1 (full sun) [-] per row; 0 with the sun at or
        below the horizon; NaN where an input is missing.
    """
    x = _arr(x_m)
    n = x.size
    y, z = _arr(y_m, n), _arr(z_m, n)
    e, a = _arr(sun_elev_deg, n), _arr(sun_azim_deg, n)
    obs = _obstacles(scene)
    if obs is None:
        obs = _EMPTY
    return _beam_kernel(obs, x, y, z, e, a, _month_col(month, n), _crown_model(crown_model))


def beam_transmittance_grid(scene, x_m, y_m, sun_elev_deg, sun_azim_deg, z_m=1.1, month=None,
                            crown_model: str = "per_crossing") -> np.ndarray:
    """Direct-beam transmittance for every point at every time (planned routes, maps).

    Parameters
    ----------
    scene : Scene or None
        Obstacles.
    x_m, y_m : array-like, shape (N,)
        Points in the local frame [m].
    sun_elev_deg, sun_azim_deg : array-like, shape (T,)
        Sun position per time [°].
    z_m : float or array-like (N,), default 1.1
        Height of each point [m].
    month : int or array-like (T,), optional
        Month per time (see :func:`beam_transmittance`).
    crown_model : {"per_crossing", "path_length", "leaf_area"}
        See :func:`beam_transmittance`.

    Returns
    -------
    ndarray, shape (N, T)
        Transmittance 0…1 [-].
    """
    x, y = _arr(x_m), None
    n = x.size
    y, z = _arr(y_m, n), _arr(z_m, n)
    e, a = _arr(sun_elev_deg), None
    t = e.size
    a = _arr(sun_azim_deg, t)
    mcol = _month_col(month, t)
    obs = _obstacles(scene) or _EMPTY
    out = np.empty((n, t))
    # night columns need no geometry
    night = ~(e > 0)
    out[:, night] = np.where(np.isfinite(e[night]), 0.0, np.nan)[None, :]
    day = np.flatnonzero(~night)
    if day.size:
        ii = np.repeat(np.arange(n), day.size)
        jj = np.tile(day, n)
        res = _beam_kernel(obs, x[ii], y[ii], z[ii], e[jj], a[jj], mcol[jj], _crown_model(crown_model))
        out[ii, jj] = res
    return out


def beam_transmittance_naive(scene, x_m, y_m, sun_elev_deg, sun_azim_deg, z_m=1.1, month=None,
                             candidates: str = "all") -> np.ndarray:
    """Reference implementation: a plain loop over (row, obstacle) with shapely predicates.

    Slow and simple on purpose; the tests compare :func:`beam_transmittance` with it on
    random scenes and ``benchmarks/bench_shade.py`` times it as the naive baseline. For
    each row it walks the obstacles and asks shapely whether the horizontal segment of
    the ray at that obstacle's heights meets the footprint (buildings, crown and canopy
    polygons) or comes closer than the crown radius to the trunk (point trees).

    Parameters
    ----------
    candidates : {"all", "strtree"}
        Walk every obstacle, or only those the STRtree returns for the ray's segment up
        to the tallest obstacle (a stronger baseline).
    """
    obs = _obstacles(scene) or _EMPTY
    x = _arr(x_m)
    n = x.size
    y, z = _arr(y_m, n), _arr(z_m, n)
    e, a = _arr(sun_elev_deg, n), _arr(sun_azim_deg, n)
    mcol = _month_col(month, n)
    tau_tab = _tau_table(obs)
    out = np.empty(n)
    for i in range(n):
        if not np.isfinite([x[i], y[i], z[i], e[i], a[i]]).all():
            out[i] = np.nan
            continue
        if e[i] <= 0:
            out[i] = 0.0
            continue
        tg = np.tan(np.radians(e[i]))
        ag = np.radians(a[i] + obs.grid_convergence_deg)
        dx, dy = np.sin(ag), np.cos(ag)
        if candidates == "strtree" and obs.n:
            reach = max(obs.z_max - z[i], 0.0) / tg
            line = shapely.LineString([(x[i], y[i]), (x[i] + reach * dx, y[i] + reach * dy)])
            todo = obs.tree.query(line)
        else:
            todo = range(obs.n)
        tau = 1.0
        for k in todo:
            if obs.z_top[k] <= z[i]:
                continue
            s0 = max((obs.z_bottom[k] - z[i]) / tg, 0.0)
            s1 = (obs.z_top[k] - z[i]) / tg
            seg = shapely.LineString([(x[i] + s0 * dx, y[i] + s0 * dy), (x[i] + s1 * dx, y[i] + s1 * dy)])
            if obs.is_spheroid is not None and obs.is_spheroid[k]:
                kk = np.array([k])
                s_in, s_out = spheroid_interval(obs, kk, x[i], y[i], z[i], dx, dy, tg)
                met = bool(np.isfinite(s_in[0]) and s_out[0] > max(s_in[0], 0.0))
            elif obs.is_circle[k]:
                met = shapely.distance(seg, shapely.Point(obs.cx[k], obs.cy[k])) < obs.r[k]
            else:
                met = seg.intersects(obs.footprints[k])
            if met:
                tau *= tau_tab[k, mcol[i]]
        out[i] = tau
    return out


def _empty_obstacles() -> Obstacles:
    from walkcomfort.environment.scene import _prepare

    class _NoScene:
        _features, _geoms = [], []

    return _prepare(_NoScene())


_EMPTY = _empty_obstacles()
