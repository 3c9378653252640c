"""The real per-partition computation: environment and comfort on a points x times grid.

Everything physical is delegated to the public functions of the stages that own
it; this module only arranges the arrays:

1. sun position for the chunk's times (``environment.sun.solar_position``, NREL SPA);
2. direct-beam transmittance on the N points x T times grid
   (``environment.shade.beam_transmittance_grid``) and the sky view factor of every
   point (``environment.skyview.sky_view_factor``), against the tile's scene;
3. mean radiant temperature from six-direction fluxes
   (``environment.tmrt.tmrt_outdoor``) with the weather's irradiance in the open;
4. UTCI (``environment.utci.utci_from_conditions``) with the wind brought to 10 m;
5. comfort class probabilities: from a saved model bundle when the job names one
   (``walkcomfort.routes`` prediction path), else the documented UTCI-band rule
   (``model.baselines.physics_rule``) as one-hot probabilities.

Times when the sun is above the horizon but lower than the job's
``min_sun_elev_deg`` are flagged ``qa_low_sun`` and their direct beam is treated
as blocked: the tile carries only the obstacles whose shadows reach it at that
elevation or higher (see :mod:`walkcomfort.network.tiling`), so shade at a lower
sun could be missed, and street-level beam at such elevations is small and
nearly always blocked in a built area (common practice).
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.network.batch import P_COLUMNS, Partition, aggregate_points
from walkcomfort.network.tiling import SVF_RADIUS_M


def _scene(part: Partition):
    if not part.scene or not part.scene.get("features"):
        return None
    from walkcomfort.environment.scene import Scene

    return Scene.from_geojson(part.scene)


def point_environment(part: Partition, scene=None) -> dict[str, np.ndarray]:
    """Sun, shade, sky view, Tmrt and UTCI for every point x time of ``part``.

    ``scene`` (a prepared :class:`~walkcomfort.environment.scene.Scene`) replaces the
    partition's own scene GeoJSON when given.

    Returns
    -------
    dict
        Arrays of shape ``(N, T)`` (points x times) or ``(T,)``: ``sun_elev_deg,
        sun_azim_deg, shade_frac, svf, t_air_c, rh_pct, wind_ms, tmrt_c, utci_c,
        qa_low_sun, qa_utci_out_of_range, qa_inside_building``.
    """
    from walkcomfort.environment import sun as _sun
    from walkcomfort.environment import tmrt as _tmrt
    from walkcomfort.environment import utci as _utci

    ctx = part.context
    site = ctx["site"]
    times = part.times
    w = part.weather
    if w is None:
        raise ValueError(f"partition {part.partition_id} has no weather; plan the job with weather at every time")
    t_air = w[C.T_AIR_C].to_numpy(float)
    rh = w[C.RH_PCT].to_numpy(float)
    wind = w[C.WIND_MS].to_numpy(float)
    pressure = w[C.PRESSURE_HPA].to_numpy(float) if C.PRESSURE_HPA in w.columns else None
    sp = _sun.solar_position(times, site["lat"], site["lon"], site.get("elev_m", 0.0),
                             pressure_hpa=pressure, t_air_c=t_air)
    elev = sp[C.SUN_ELEV_DEG].to_numpy(float)
    azim = sp[C.SUN_AZIM_DEG].to_numpy(float)
    if C.DNI_WM2 in w.columns and C.DHI_WM2 in w.columns:
        dni, dhi = w[C.DNI_WM2].to_numpy(float), w[C.DHI_WM2].to_numpy(float)
    else:
        cs = _sun.clearsky_irradiance(times, site["lat"], site["lon"], site.get("elev_m", 0.0))
        dni, dhi = cs[C.DNI_WM2].to_numpy(float), cs[C.DHI_WM2].to_numpy(float)

    x = part.points[C.X_M].to_numpy(float)
    y = part.points[C.Y_M].to_numpy(float)
    n, t = len(x), len(times)
    z = float(ctx.get("z_m", 1.1))
    scene_given = scene
    scene = _scene(part) if scene is None else scene
    low = (elev > 0.0) & (elev < float(ctx["min_sun_elev_deg"]))
    inside = np.zeros(n, dtype=bool)
    if scene is None:
        trans = np.ones((n, t))
        svf = np.ones(n)
    else:
        # a street point inside a footprint: the network or the scene (or a scheme) is wrong there
        inside = np.asarray(scene.inside_buildings(x, y), dtype=bool)
        from walkcomfort.environment import shade as _shade
        from walkcomfort.environment import skyview as _skyview

        trans = np.array(_shade.beam_transmittance_grid(scene, x, y, elev, azim, z_m=z,
                                                        month=np.asarray(times.month)), dtype=float)
        svf = (_tile_svf(part, scene, x, y, z) if scene_given is None
               else _skyview.sky_view_factor(scene, x, y, z_m=z, radius_m=SVF_RADIUS_M)[C.SVF].to_numpy(float))
    trans = trans.copy()
    trans[:, low] = 0.0
    grid = np.ones((n, t))
    tmrt = np.asarray(_tmrt.tmrt_outdoor((grid * elev).ravel(), (grid * dni).ravel(), (grid * dhi).ravel(),
                                         trans.ravel(), (svf[:, None] * grid).ravel(), (grid * t_air).ravel(),
                                         (grid * rh).ravel()), dtype=float).reshape(n, t)
    wind10 = np.asarray(_utci.wind_at_10m(wind, float(ctx.get("wind_height_m", 10.0))), dtype=float)
    u = _utci.utci_from_conditions((grid * t_air).ravel(), tmrt.ravel(), (grid * wind10).ravel(),
                                   (grid * rh).ravel(), warn=False)
    return {C.SUN_ELEV_DEG: elev, C.SUN_AZIM_DEG: azim, C.SHADE_FRAC: 1.0 - trans, C.SVF: svf[:, None] * grid,
            C.T_AIR_C: t_air, C.RH_PCT: rh, C.WIND_MS: wind, C.TMRT_C: tmrt,
            C.UTCI_C: u[C.UTCI_C].to_numpy(float).reshape(n, t),
            C.QA_UTCI_RANGE: u[C.QA_UTCI_RANGE].to_numpy(bool).reshape(n, t),
            C.QA_LOW_SUN: np.broadcast_to(low, (n, t)).copy(),
            C.QA_INSIDE_BUILDING: np.broadcast_to(inside[:, None], (n, t)).copy()}


#: Sky view factors already computed in this process, by tile content (time chunks of one
#: tile share them: the sky view does not change with time).
_SVF_CACHE: dict[str, np.ndarray] = {}
_SVF_CACHE_MAX = 256


def _tile_svf(part: Partition, scene, x, y, z) -> np.ndarray:
    import hashlib
    import json

    from walkcomfort.environment import skyview as _skyview

    h = hashlib.sha256(json.dumps(part.scene, sort_keys=True).encode())
    h.update(np.ascontiguousarray(x).tobytes() + np.ascontiguousarray(y).tobytes() + repr(z).encode())
    key = h.hexdigest()
    hit = _SVF_CACHE.get(key)
    if hit is None:
        hit = _skyview.sky_view_factor(scene, x, y, z_m=z, radius_m=SVF_RADIUS_M)[C.SVF].to_numpy(float)
        if len(_SVF_CACHE) >= _SVF_CACHE_MAX:
            _SVF_CACHE.pop(next(iter(_SVF_CACHE)))
        _SVF_CACHE[key] = hit
    return hit.copy()


def rule_probabilities(utci_c: np.ndarray) -> dict[str, np.ndarray]:
    """One-hot class probabilities from the UTCI-band rule (``model.baselines.physics_rule``)."""
    from walkcomfort.model.baselines import physics_rule

    cls = physics_rule(np.asarray(utci_c).ravel()).reshape(np.shape(utci_c))
    return {p: (cls == c).astype(float) for p, c in zip(P_COLUMNS, C.COMFORT_CLASSES, strict=False)}


def partition_rows(part: Partition) -> pd.DataFrame:
    """The rows of one partition (see :func:`walkcomfort.network.batch.compute_partition`)."""
    env = point_environment(part)
    model = part.context.get("model")
    if model:
        probs, predictor = model_probabilities(part, env, model)
    else:
        probs, predictor = rule_probabilities(env[C.UTCI_C]), "physics-rule"
    return aggregate_points(part, {**env, **probs}, predictor)


@lru_cache(maxsize=4)
def _predictor(folder: str):
    """One loaded model per worker process and bundle folder (bundles are verified on load)."""
    from walkcomfort.routes.predict import Predictor

    return Predictor.from_bundle(folder)


def segment_walks(part: Partition, env: dict[str, np.ndarray]) -> pd.DataFrame:
    """Every segment x time as a short simulated walk along the segment, timeline-like.

    The walker steps onto the segment at the batch time and walks its sample points in
    order (the line's digitised direction) at the routes' walking speed on the
    segment's slope (Tobler's function, ``routes.timing``); ground elevation comes from
    the network's z when given. The history windows of the model see that walk only:
    no exposure before the segment is known at network scale.
    Rows are point-major: row ``i * T + j`` is point ``i`` at time ``j``.
    """
    from walkcomfort.routes.timing import walking_speed_ms

    pts = part.points
    n, t = len(pts), len(part.times)
    seg = pts[C.SEGMENT_ID].to_numpy()
    # sample points stand for equal lengths: neighbours are length / n_points apart
    step_m = pts["step_m"].to_numpy(float)
    dist = (pts["point_n"].to_numpy() + 0.5) * step_m
    # ground elevation from the network's z where given; slope from the segment's first and last points
    site_elev = float(part.context["site"].get("elev_m", 0.0))
    z = pts[C.ELEV_M].to_numpy(float) if C.ELEV_M in pts.columns else np.full(n, np.nan)
    g = pd.DataFrame({"s": seg, "z": z, "n": pts["point_n"].to_numpy()})
    first = g.groupby("s", sort=False)["z"].transform("first").to_numpy()
    last = g.groupby("s", sort=False)["z"].transform("last").to_numpy()
    span = (g.groupby("s", sort=False)["n"].transform("max").to_numpy() * step_m)
    with np.errstate(invalid="ignore", divide="ignore"):
        slope = np.where(span > 0, 100.0 * (last - first) / span, 0.0)
    slope = np.where(np.isfinite(slope), slope, 0.0)
    elev = np.where(np.isfinite(z), z, site_elev)
    # Tobler's function on the segment's slope, scaled to the routes' flat speed (routes.timing)
    speed = np.asarray(walking_speed_ms(slope / 100.0), dtype=float)
    offset_s = pts["point_n"].to_numpy() * step_m / speed
    times = (np.asarray(part.times.as_unit("ns").asi8)[None, :]
             + np.round(offset_s * 1e9).astype(np.int64)[:, None]).ravel()
    idx = pd.DatetimeIndex(times.astype("datetime64[ns]")).tz_localize("UTC").rename(C.TIME)
    walk = (np.repeat(seg.astype(object), t) + "@"
            + np.tile(part.times.strftime("%Y-%m-%dT%H:%M:%SZ").to_numpy(dtype=object), n))

    def grid(a):
        a = np.asarray(a, dtype=float)
        return np.broadcast_to(a if a.ndim == 2 else a[None, :], (n, t)).ravel()

    df = pd.DataFrame({C.WALK_ID: walk, C.PARTICIPANT: "simulated",
                       C.LAT: np.repeat(pts[C.LAT].to_numpy(float), t), C.LON: np.repeat(pts[C.LON].to_numpy(float), t),
                       C.ELEV_M: np.repeat(elev, t), C.DIST_M: np.repeat(dist, t),
                       C.SPEED_MS: np.repeat(speed, t),
                       C.SLOPE_PCT: np.repeat(slope, t)}, index=idx)
    for name in (C.T_AIR_C, C.RH_PCT, C.WIND_MS, C.SUN_ELEV_DEG, C.SHADE_FRAC, C.SVF, C.TMRT_C, C.UTCI_C):
        df[name] = grid(env[name])
    df[C.BEAM_TRANS_FRAC] = 1.0 - df[C.SHADE_FRAC]
    df.attrs["session"] = {"timezone": "UTC", "site": part.tile_id, "simulated": True,
                           "wind_height_m": float(part.context.get("wind_height_m", 10.0)),
                           **(part.context.get("walker") or {})}
    return df


def model_probabilities(part: Partition, env: dict, model: str):
    """Class probabilities ``(N, T)`` from a model bundle, through the routes' prediction path."""
    predictor = _predictor(str(model))
    tl = segment_walks(part, env)
    pred = predictor.predict(tl, explain=False)
    n, t = len(part.points), len(part.times)
    probs = {p: pred[p].to_numpy(float).reshape(n, t) for p in P_COLUMNS}
    return probs, predictor.label
