"""The real per-partition computation: environment and comfort on a points x times grid.

The environment of every point x time comes from the one chain every caller uses,
:func:`walkcomfort.environment.chain.environment_columns` (``grid=True``): sun position,
irradiance in the open, direct-beam transmittance, sky view factor, Tmrt from fluxes,
wind at 10 m and UTCI, with the decisions documented there. This module only arranges
the partition's arrays for it and back:

1. the chain, on the tile's points x the chunk's times, against the tile's scene (the sky
   view is cached per tile here, since time chunks of one tile share it);
2. comfort class probabilities: from a saved model bundle when the job names one
   (``walkcomfort.routes`` prediction path), else the documented UTCI-band rule
   (``model.baselines.physics_rule``) as one-hot probabilities.

Times when the sun is above the horizon but lower than the job's ``min_sun_elev_deg``
are flagged ``qa_low_sun``: the tile carries only the obstacles whose shadows reach it at
that elevation or higher (see :mod:`walkcomfort.network.tiling`), so a shadow from
farther away can be missed there. The physics itself has no elevation cut (the chain's
low-sun decision); lower ``--lowest-sun`` to widen the tiles' reach.
"""

from __future__ import annotations

import hashlib
import json
from functools import lru_cache

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.environment import chain
from walkcomfort.environment.pet import PET_C
from walkcomfort.environment.scene import Scene
from walkcomfort.environment.wbgt import WBGT_C
from walkcomfort.network.partition import P_COLUMNS, Partition, aggregate_points
from walkcomfort.network.tiling import SVF_RADIUS_M


def _scene(part: Partition):
    if not part.scene or not part.scene.get("features"):
        return None
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
    ctx = part.context
    w = part.weather
    if w is None:
        raise ValueError(f"partition {part.partition_id} has no weather; plan the job with weather at every time")
    pts = part.points
    n, t = len(pts), len(part.times)
    z = float(ctx.get("z_m", chain.BODY_HEIGHT_M))
    own = scene is None
    scene = _scene(part) if own else scene
    svf = _tile_svf(part, scene, z) if own and scene is not None else None
    env = chain.environment_columns(part.times, pts, w, scene=scene, wind_height_m=ctx.get("wind_height_m"),
                                    grid=True, site=ctx["site"], z_m=z, sky_view=svf,
                                    svf_radius_m=SVF_RADIUS_M, warn=False, indices=ctx.get("indices", ()))

    def nt(name):
        return env[name].to_numpy().reshape(n, t)

    elev = nt(C.SUN_ELEV_DEG)[0]
    low = (elev > 0.0) & (elev < float(ctx["min_sun_elev_deg"]))
    return {C.SUN_ELEV_DEG: elev, C.SUN_AZIM_DEG: nt(C.SUN_AZIM_DEG)[0], C.SHADE_FRAC: nt(C.SHADE_FRAC),
            C.SVF: nt(C.SVF), C.T_AIR_C: w[C.T_AIR_C].to_numpy(float), C.RH_PCT: w[C.RH_PCT].to_numpy(float),
            C.WIND_MS: w[C.WIND_MS].to_numpy(float), C.TMRT_C: nt(C.TMRT_C), C.UTCI_C: nt(C.UTCI_C),
            C.QA_UTCI_RANGE: nt(C.QA_UTCI_RANGE).astype(bool),
            C.QA_LOW_SUN: np.broadcast_to(low, (n, t)).copy(),
            C.QA_INSIDE_BUILDING: nt(C.QA_INSIDE_BUILDING).astype(bool),
            **({PET_C: nt(PET_C)} if PET_C in env.columns else {}),  # network --index pet
            **({WBGT_C: nt(WBGT_C), "wbgt_limit_c": np.full(t, float(ctx["wbgt_limit_c"]))}  # --wbgt-limit
               if WBGT_C in env.columns else {})}


#: Sky view factors already computed in this process, by tile content (time chunks of one
#: tile share them: the sky view does not change with time).
_SVF_CACHE: dict[str, tuple[np.ndarray, np.ndarray]] = {}
_SVF_CACHE_MAX = 256


def _tile_svf(part: Partition, scene: Scene, z: float):
    """The chain's sky view of the tile's points, once per tile content in this process."""
    pts = part.points
    x, y = scene.project(pts[C.LON].to_numpy(float), pts[C.LAT].to_numpy(float))
    h = hashlib.sha256(json.dumps(part.scene, sort_keys=True).encode())
    h.update(np.ascontiguousarray(x).tobytes() + np.ascontiguousarray(y).tobytes() + repr(z).encode())
    key = h.hexdigest()
    hit = _SVF_CACHE.get(key)
    if hit is None:
        hit = chain.sky_view(scene, x, y, z_m=z, radius_m=SVF_RADIUS_M)
        if len(_SVF_CACHE) >= _SVF_CACHE_MAX:
            _SVF_CACHE.pop(next(iter(_SVF_CACHE)))
        _SVF_CACHE[key] = hit
    return tuple(v.copy() for v in hit)


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
    from walkcomfort.routes.timing import DEFAULT_FLAT_SPEED_MS, walking_speed_ms

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
    # Tobler's function on the segment's slope, scaled to the flat speed (network --speed, as route)
    flat = float(part.context.get("flat_speed_ms", DEFAULT_FLAT_SPEED_MS))
    speed = np.asarray(walking_speed_ms(slope / 100.0, flat_speed_ms=flat), dtype=float)
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
    for name in (C.T_AIR_C, C.RH_PCT, C.WIND_MS, C.SUN_ELEV_DEG, C.SHADE_FRAC, C.SVF, C.TMRT_C, C.UTCI_C,
                 *((PET_C,) if PET_C in env else ())):  # a model fitted on PET reads the chain's PET
        df[name] = grid(env[name])
    df[C.BEAM_TRANS_FRAC] = 1.0 - df[C.SHADE_FRAC]
    df.attrs["session"] = {"timezone": "UTC", "site": part.tile_id, "simulated": True,
                           "wind_height_m": part.context.get("wind_height_m"),
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
