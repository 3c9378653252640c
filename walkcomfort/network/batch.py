"""The network batch job: segments x times x schemes, cut into partitions.

A partition is one tile of segments (with only the obstacles that can shade it,
see :mod:`walkcomfort.network.tiling`) x one chunk of consecutive times x one
scheme. It is plain data (a few small DataFrames and a GeoJSON dict), so an
engine can ship it to a worker, and it states how many rows it must give back:
one per segment x time. :func:`compute_partition` is the per-partition function
that turns it into rows; engines call it (or any function with the same
signature) and check the count.

Output rows (one per segment x time x scheme), index ``time`` (UTC):

``segment_id, scheme, tile_id, sun_elev_deg, sun_azim_deg, shade_frac, svf,
t_air_c, rh_pct, wind_ms, tmrt_c, utci_c, utci_band, p_comfortable, p_neutral,
p_uncomfortable, comfort_class, predictor, qa_low_sun, qa_utci_out_of_range,
qa_inside_building, n_points``

Point values are averaged over the segment's sample points (which stand for equal
lengths of pavement); the class probabilities are the mean of the points'
probabilities and ``comfort_class`` is the most probable class of that mean; a
``qa_`` flag is set when it is set at any point of the segment.
"""

from __future__ import annotations

import hashlib
import json
import re
from dataclasses import dataclass

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.errors import InputError
from walkcomfort.network import _physics
from walkcomfort.network.partition import (
    P_COLUMNS,
    ROW_COLUMNS,
    Partition,
    PartitionFn,
    PartitionResultError,
    aggregate_points,
)
from walkcomfort.network.tiling import DEFAULT_Z_M, Tile, feature_positions, make_tiles, obstacle_table, subset_scene

#: The scheme name of the scene as it is (no edits).
BASE = "base"

#: Re-exported: the partition's own names live in :mod:`walkcomfort.network.partition`.
__all__ = ["BASE", "P_COLUMNS", "ROW_COLUMNS", "NetworkJob", "Partition", "PartitionFn", "PartitionResultError",
           "aggregate_points", "check_partition_result", "compute_partition", "plan_job", "sunlit_times",
           "time_range"]

_SCHEME_NAME = re.compile(r"[A-Za-z0-9_-][A-Za-z0-9_.-]{0,63}")

@dataclass(eq=False)
class NetworkJob:
    """A whole batch: every partition, the function to run on each, and the job's identity."""

    partitions: list[Partition]
    partition_fn: PartitionFn
    parameters: dict
    digest: str
    schemes: list[str]
    #: the model bundle as plain text, shipped to the workers (:func:`walkcomfort.network.shipping.pack_bundle`)
    bundle: dict | None = None

    @property
    def expected_rows(self) -> int:
        return sum(p.expected_rows for p in self.partitions)

    def partition(self, partition_id: str) -> Partition:
        for p in self.partitions:
            if p.partition_id == partition_id:
                return p
        raise KeyError(partition_id)


def time_range(start, end, step: str = "1h", timezone: str = "UTC") -> pd.DatetimeIndex:
    """UTC times from ``start`` to ``end`` inclusive at ``step``.

    Naive ``start``/``end`` are read in ``timezone`` (an IANA name); aware ones keep
    their zone. Returns a tz-aware UTC :class:`pandas.DatetimeIndex` named ``time``.
    """
    try:
        t0, t1 = pd.Timestamp(start), pd.Timestamp(end)
        delta = pd.Timedelta(step)
    except (ValueError, TypeError) as exc:
        raise InputError(f"time range {start!r} … {end!r} at step {step!r} cannot be read ({exc})",
                         where="--start/--end/--step", fix="give ISO times such as 2026-07-14T07:00 and a step such as 1h or 30min") from None
    if delta <= pd.Timedelta(0):
        raise InputError(f"time step {step!r} is not positive", where="--step", fix="give a step such as 1h")
    t0 = t0.tz_localize(timezone) if t0.tzinfo is None else t0
    t1 = t1.tz_localize(timezone) if t1.tzinfo is None else t1
    if t1 < t0:
        raise InputError(f"time range ends ({t1}) before it starts ({t0})", where="--start/--end",
                         fix="swap start and end")
    return pd.date_range(t0.tz_convert("UTC"), t1.tz_convert("UTC"), freq=delta, name=C.TIME)


def sunlit_times(times: pd.DatetimeIndex, site: dict, min_sun_elev_deg: float = 0.0) -> pd.DatetimeIndex:
    """The times at which the sun at ``site`` stands above ``min_sun_elev_deg`` [°] (daytime only).

    Uses ``environment.sun.solar_position`` (NREL SPA, apparent elevation) at the site's
    ``lat, lon, elev_m``.
    """
    from walkcomfort.environment.sun import solar_position

    sp = solar_position(times, site["lat"], site["lon"], site.get("elev_m", 0.0))
    return times[sp[C.SUN_ELEV_DEG].to_numpy(float) > float(min_sun_elev_deg)]


def plan_job(network, times: pd.DatetimeIndex, scenes: dict[str, dict | None],
             weather: pd.DataFrame | None = None, *, tile_size_m: float = 250.0, time_chunk: int = 24,
             min_sun_elev_deg: float = 5.0, z_m: float = DEFAULT_Z_M, site: dict | None = None,
             partition_fn: PartitionFn | None = None, context: dict | None = None) -> NetworkJob:
    """Cut a batch into partitions (tile x time chunk x scheme).

    Parameters
    ----------
    network : walkcomfort.network.segments.Network
    times : pandas.DatetimeIndex
        tz-aware UTC times to compute (see :func:`time_range`).
    scenes : dict
        Scheme name -> scene GeoJSON with that scheme already applied (``"base"``
        for the scene as it is; ``None`` for no obstacles at all).
    weather : pandas.DataFrame, optional
        Weather at exactly ``times`` (index ``time``).
    tile_size_m : float
        Side of a spatial tile [m].
    time_chunk : int
        Number of consecutive times per partition.
    min_sun_elev_deg : float
        Lowest sun elevation used for shade [°]; sets the tiles' obstacle buffer.
    z_m : float
        Height of the walker's sample points [m].
    site : dict, optional
        ``lat, lon, elev_m`` of the site for the sun; default the network's centre.
    partition_fn : callable, optional
        The per-partition function (default :func:`compute_partition`).
    context : dict, optional
        Extra job-wide settings passed to every partition (for example ``model``).

    Returns
    -------
    NetworkJob
    """
    times, weather = _checked_plan_inputs(times, scenes, weather, time_chunk)
    base_site = ((scenes.get(BASE) or {}).get("walkcomfort") or {}).get("site")
    if site is None and base_site:
        site = {"lat": float(base_site["lat"]), "lon": float(base_site["lon"]),
                "elev_m": float(base_site.get("elev_m", 0.0))}
    if site is None:
        site = {"lat": float(network.points[C.LAT].mean()), "lon": float(network.points[C.LON].mean()),
                "elev_m": 0.0}
    ctx = {"site": dict(site), "z_m": float(z_m), "min_sun_elev_deg": float(min_sun_elev_deg)}
    ctx.update(context or {})
    _require_wind_height(weather, ctx)
    fn = partition_fn or compute_partition

    # a chunk never spans two months, so each partition has one leaf-on state of the trees
    seg = network.segments
    all_points = network.points.copy()
    all_points["step_m"] = all_points[C.SEGMENT_ID].map(seg["length_m"] / seg["n_points"]).to_numpy(float)
    scenes = {name: _with_site(scene, site, network.crs) for name, scene in scenes.items()}

    chunks = []
    for _, month_times in pd.Series(times, index=times).groupby([times.year, times.month], sort=True):
        mt = pd.DatetimeIndex(month_times.index, name=C.TIME)
        chunks.extend(mt[i:i + time_chunk] for i in range(0, len(mt), time_chunk))
    parts: list[Partition] = []
    tile_points: dict[tuple, pd.DataFrame] = {}
    scheme_digests = {}
    for scheme in sorted(scenes, key=lambda s: (s != BASE, s)):
        scene = scenes[scheme]
        scheme_digests[scheme] = _json_digest(scene)
        tiles: list[Tile] = make_tiles(network, obstacle_table(scene, network.crs), tile_size_m,
                                       min_sun_elev_deg, z_m)
        positions = feature_positions(scene)
        by_segment = all_points.groupby(C.SEGMENT_ID, sort=False).indices
        for tile in tiles:
            key = tuple(tile.segment_ids)  # one points table per tile, shared by the schemes
            if key not in tile_points:
                rows = np.concatenate([by_segment[s] for s in tile.segment_ids])
                tile_points[key] = all_points.iloc[np.sort(rows)].reset_index(drop=True)
            pts = tile_points[key]
            tscene = subset_scene(scene, tile.obstacle_ids, positions)
            for k, chunk in enumerate(chunks):
                w = None if weather is None else weather.loc[chunk]
                parts.append(Partition(f"{scheme}/{tile.tile_id}/c{k:04d}", scheme, tile.tile_id, k, chunk,
                                       pts, list(tile.segment_ids), tscene, w, ctx))

    params = {"network": network.name, "segments": network.n_segments,
              "segment_length_m": network.parameters.get("segment_length_m"),
              "spacing_m": network.parameters.get("spacing_m"),
              "times": {"start": times[0].isoformat(), "end": times[-1].isoformat(), "n": len(times)},
              "schemes": sorted(scenes), "tile_size_m": float(tile_size_m), "time_chunk": time_chunk,
              "partition_fn": f"{fn.__module__}.{fn.__qualname__}",
              "context": {k: v for k, v in ctx.items()}}
    h = hashlib.sha256()
    h.update(json.dumps(params, sort_keys=True, default=str).encode())
    h.update(pd.util.hash_pandas_object(network.points, index=False).values.tobytes())
    h.update(json.dumps(scheme_digests, sort_keys=True).encode())
    if weather is not None:
        h.update(pd.util.hash_pandas_object(weather, index=True).values.tobytes())
    params["scheme_digests"] = scheme_digests
    return NetworkJob(parts, fn, params, "sha256:" + h.hexdigest(), sorted(scenes))


def _checked_plan_inputs(times, scenes, weather, time_chunk):
    """:func:`plan_job`'s inputs checked: UTC times and the weather at exactly those times."""
    if not isinstance(times, pd.DatetimeIndex) or times.tz is None or len(times) == 0:
        raise InputError("the batch needs a non-empty tz-aware list of times",
                         fix="build them with walkcomfort.network.batch.time_range(start, end, step)")
    times = times.tz_convert("UTC").rename(C.TIME)
    if times.has_duplicates or not times.is_monotonic_increasing:
        raise InputError("the batch times repeat or are not in increasing order",
                         fix="give a strictly increasing time range")
    if not isinstance(time_chunk, int) or time_chunk < 1:
        raise InputError(f"time chunk = {time_chunk!r} is not a positive whole number of time steps",
                         fix="give for example 24")
    if not scenes:
        raise InputError("the batch has no scheme to compute", fix="give at least the base scene")
    for name in scenes:
        if not isinstance(name, str) or not _SCHEME_NAME.fullmatch(name):
            raise InputError(f"scheme name {name!r} cannot name a results folder; allowed: letters, digits, "
                             "'_', '-', '.' (1-64 characters, not starting with '.')",
                             fix="rename the scheme (its top-level walkcomfort.scheme member)")
    if weather is not None:
        missing = times.difference(weather.index)
        if len(missing):
            raise InputError(f"weather has no row at {len(missing)} of the batch times (first {missing[0]})",
                             fix="give weather at every batch time (resample the weather source to the step)")
        weather = weather.loc[times]
    return times, weather


def _require_wind_height(weather: pd.DataFrame | None, ctx: dict) -> None:
    """A wind speed is only usable with its height: refused at planning, not guessed per partition."""
    if weather is None or C.WIND_MS not in weather.columns or not weather[C.WIND_MS].notna().any():
        return
    if ctx.get("wind_height_m") is None:
        raise InputError("the weather's wind sensor height is not known", where="plan_job",
                         fix="pass context={'wind_height_m': ...} with the weather source's stated height "
                             "(10 m for a weather file or a synoptic station)")


def _with_site(scene: dict | None, site: dict, crs) -> dict | None:
    """The scene GeoJSON with its site stated, checked to share the network's metric CRS.

    Every tile's scene is rebuilt on a worker from a subset of the features; stating
    the site keeps its local frame the same as the whole scene's.
    """
    if scene is None:
        return None
    from walkcomfort.environment.geo import utm_crs

    meta = dict(scene.get("walkcomfort") or {})
    s = dict(meta.get("site") or site)
    if utm_crs(s["lon"], s["lat"]) != crs:
        raise InputError(f"the scene's site ({s['lat']:.5f}, {s['lon']:.5f}) lies in another UTM zone than the "
                         "street network's coordinates", fix="load the network with crs=scene.crs")
    meta["site"] = s
    return {**scene, "walkcomfort": meta}


def _json_digest(obj) -> str:
    return "sha256:" + hashlib.sha256(json.dumps(obj, sort_keys=True).encode()).hexdigest()


def check_partition_result(part: Partition, rows: pd.DataFrame) -> pd.DataFrame:
    """Check a partition function's result: one row per segment x time, nothing more or less.

    Returns the rows in canonical order (network order of segments, then time);
    raises :class:`PartitionResultError` when rows are missing, extra or repeated.
    """
    if not isinstance(rows, pd.DataFrame) or C.SEGMENT_ID not in rows.columns or rows.index.name != C.TIME:
        raise PartitionResultError(f"partition {part.partition_id}: the partition function must return a "
                                   f"DataFrame indexed by '{C.TIME}' with a '{C.SEGMENT_ID}' column")
    keys = pd.MultiIndex.from_arrays([rows[C.SEGMENT_ID].to_numpy(), rows.index], names=[C.SEGMENT_ID, C.TIME])
    want = part.expected_keys()
    if len(rows) != part.expected_rows or keys.has_duplicates or not keys.sort_values().equals(
            want.sort_values()):
        n_missing = len(want.difference(keys))
        n_extra = len(keys.difference(want)) + int(keys.duplicated().sum())
        raise PartitionResultError(f"partition {part.partition_id}: expected {part.expected_rows} rows, got "
                                   f"{len(rows)} ({n_missing} missing, {n_extra} extra or repeated)")
    order = want.get_indexer(keys)
    return rows.iloc[np.argsort(order, kind="stable")]


# --------------------------------------------------------------------------------------------
# the real per-partition computation


def compute_partition(part: Partition) -> pd.DataFrame:
    """Sun, shade, sky view, Tmrt, UTCI and comfort for every point x time of a partition.

    Calls the public functions of :mod:`walkcomfort.environment` (sun position,
    irradiance, beam transmittance on the points x times grid, sky view factor,
    Tmrt from fluxes, UTCI) and of :mod:`walkcomfort.model` / :mod:`walkcomfort.routes`
    for the comfort prediction, then averages points to segments.

    Parameters
    ----------
    part : Partition

    Returns
    -------
    pandas.DataFrame
        :data:`ROW_COLUMNS`, index ``time``, one row per segment x time.
    """
    return _physics.partition_rows(part)
