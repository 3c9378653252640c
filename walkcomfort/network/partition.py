"""A partition of the network batch: what one unit of work is and how its rows are shaped.

Kept apart from :mod:`walkcomfort.network.batch` (which plans the partitions) so the
per-partition physics (:mod:`walkcomfort.network._physics`) can use it without importing
the planner that calls it.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.environment.utci import utci_band

P_COLUMNS = tuple(f"p_{c}" for c in C.COMFORT_CLASSES)

#: Columns of a partition's result (after the index ``time``), in this order.
ROW_COLUMNS = (C.SEGMENT_ID, "scheme", C.TILE_ID, C.SUN_ELEV_DEG, C.SUN_AZIM_DEG, C.SHADE_FRAC, C.SVF,
               C.T_AIR_C, C.RH_PCT, C.WIND_MS, C.TMRT_C, C.UTCI_C, C.UTCI_BAND, "pet_c", "wbgt_c", "wbgt_limit_c", *P_COLUMNS,
               "comfort_class", "predictor", C.QA_LOW_SUN, C.QA_UTCI_RANGE, C.QA_INSIDE_BUILDING, "n_points")


@dataclass(eq=False)
class Partition:
    """One unit of work: a tile's segments x a chunk of times x one scheme.

    Attributes
    ----------
    partition_id : str
        ``"<scheme>/<tile>/c<chunk>"``, stable across runs of the same job.
    scheme, tile_id : str
    chunk : int
        Index of the time chunk.
    times : pandas.DatetimeIndex
        UTC times of this chunk.
    points : pandas.DataFrame
        The tile's sample points: ``segment_id, point_n, x_m, y_m, lon, lat``.
    segment_ids : list of str
        The tile's segments, in network order.
    scene : dict or None
        GeoJSON of the scene (scheme applied) restricted to the obstacles the tile needs.
    weather : pandas.DataFrame or None
        Weather at ``times`` (index ``time``; ``t_air_c, rh_pct, wind_ms`` and
        optionally ``ghi_wm2, dni_wm2, dhi_wm2``).
    context : dict
        Job-wide settings: ``site`` (lat, lon, elev_m), ``z_m``, ``min_sun_elev_deg``,
        ``wind_height_m``, ``model`` (bundle folder or None), ...
    """

    partition_id: str
    scheme: str
    tile_id: str
    chunk: int
    times: pd.DatetimeIndex
    points: pd.DataFrame
    segment_ids: list[str]
    scene: dict | None = None
    weather: pd.DataFrame | None = None
    context: dict = field(default_factory=dict)

    @property
    def expected_rows(self) -> int:
        return len(self.segment_ids) * len(self.times)

    def expected_keys(self) -> pd.MultiIndex:
        """Every ``(segment_id, time)`` this partition must return, in row order."""
        return pd.MultiIndex.from_product([self.segment_ids, self.times], names=[C.SEGMENT_ID, C.TIME])


PartitionFn = Callable[[Partition], pd.DataFrame]


class PartitionResultError(RuntimeError):
    """A partition function returned the wrong rows."""


def aggregate_points(part: Partition, point_values: dict[str, np.ndarray], predictor: str) -> pd.DataFrame:
    """Average ``(N points, T times)`` arrays to one row per segment x time (see module docstring).

    ``point_values`` maps a column name to an ``(N, T)`` array (points in
    ``part.points`` order) or a ``(T,)`` array (same for every point). The
    probabilities must be among them; ``comfort_class`` is derived here.
    """
    seg = part.points[C.SEGMENT_ID].to_numpy()
    codes, uniques = pd.factorize(seg, sort=False)
    order = pd.Index(uniques).get_indexer(part.segment_ids)
    if (order < 0).any():
        raise PartitionResultError(f"partition {part.partition_id}: a segment has no sample point")
    counts = np.bincount(codes, minlength=len(uniques)).astype(float)
    n_t = len(part.times)
    out: dict[str, np.ndarray] = {}
    for name, arr in point_values.items():
        arr = np.asarray(arr)
        if arr.ndim == 1:
            out[name] = np.tile(arr, len(part.segment_ids))
            continue
        if arr.dtype == bool:
            sums = np.zeros((len(uniques), n_t))
            np.add.at(sums, codes, arr.astype(float))
            out[name] = (sums[order] > 0).reshape(-1)
            continue
        sums = np.zeros((len(uniques), n_t))
        np.add.at(sums, codes, arr.astype(float))
        out[name] = (sums / counts[:, None])[order].reshape(-1)
    probs = np.column_stack([out[c] for c in P_COLUMNS])
    out["comfort_class"] = np.asarray(C.COMFORT_CLASSES, dtype=object)[np.argmax(probs, axis=1)]
    idx = pd.DatetimeIndex(np.tile(part.times.to_numpy(), len(part.segment_ids)), tz="UTC", name=C.TIME)
    df = pd.DataFrame(out, index=idx)
    df.insert(0, C.SEGMENT_ID, np.repeat(np.asarray(part.segment_ids, dtype=object), n_t))
    df.insert(1, "scheme", part.scheme)
    df.insert(2, C.TILE_ID, part.tile_id)
    df["predictor"] = predictor
    df["n_points"] = np.repeat(counts[order].astype(np.int32), n_t)
    if C.UTCI_C in df.columns and C.UTCI_BAND not in df.columns:
        df[C.UTCI_BAND] = np.asarray(utci_band(df[C.UTCI_C].to_numpy()), dtype=object)
    return df[[c for c in ROW_COLUMNS if c in df.columns]]

