"""A city's results as one map layer a browser opens comfortably: aggregated, simplified, under a budget.

The full rows stay in Parquet (``OUT/segment_hours``, ``OUT/segment_summary.parquet``)
for GIS work; the map gets one small GeoJSON, ``OUT/network_map_layer.geojson``:

- **aggregated over time**: one value per segment and scheme, the comfortable hours of
  the base and, for every other scheme, the change in comfortable hours against the
  base — the two numbers the map's colour scale uses; nothing else travels (names,
  UTCI, shade and the other summary columns stay in the Parquet summary);
- **rounded**: hours to :data:`HOURS_DECIMALS` decimals, lon/lat to
  :data:`LONLAT_DECIMALS` (≈ 1 m), lines simplified with Douglas–Peucker at
  :data:`TOLERANCE_M`;
- **under a size budget**: at most :data:`BUDGET_BYTES` in all. When the per-segment
  layer would be larger (a city of tens of thousands of segments), consecutive
  segments of one street with the same rounded values are merged into one line, then
  coordinates are rounded further; if it still does not fit, the layer is refused with
  the fix (a coarser ``--segment-length``, fewer schemes, or the Parquet in a GIS).

The file's top-level ``walkcomfort`` member says what was aggregated and how
(``aggregation``, ``fields``, ``segments``, ``features``, ``bytes``, ``budget_bytes``),
so the map can say it in its legend.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pandas as pd

from walkcomfort import _io
from walkcomfort import columns as C
from walkcomfort.errors import InputError
from walkcomfort.network.batch import BASE

#: The largest layer written [bytes]: a few MB parse and draw in well under a second in a browser
#: on a laptop (common practice for GeoJSON layers in Leaflet).
BUDGET_BYTES = 4_000_000
LONLAT_DECIMALS = 5
TOLERANCE_M = 2.0
HOURS_DECIMALS = 1
LAYER_FILE = "network_map_layer.geojson"


def _values(summary: pd.DataFrame, base: str) -> pd.DataFrame:
    """One row per segment: ``base`` = comfortable hours, ``<scheme>`` = change in comfortable hours."""
    schemes = sorted(summary.index.get_level_values("scheme").unique(), key=lambda s: (s != base, s))
    if base not in schemes:
        raise InputError(f"the summary has no base scheme {base!r} (it has {schemes})",
                         fix="summarise a batch that includes the base scene")
    out = {base: summary.xs(base, level="scheme")["comfortable_h"]}
    for s in schemes:
        if s != base:
            out[s] = summary.xs(s, level="scheme")["d_comfortable_h"]
    return pd.DataFrame(out).round(HOURS_DECIMALS)


def _simplify(coords, tolerance_m: float, decimals: int) -> list[list[float]]:
    from shapely.geometry import LineString

    xy = np.asarray(coords, dtype=float)[:, :2]
    lat0 = float(xy[:, 1].mean())
    k = np.array([111_320.0 * math.cos(math.radians(lat0)), 111_320.0])  # [m per degree], spherical Earth
    line = LineString(xy * k).simplify(tolerance_m, preserve_topology=False)
    out = np.round(np.asarray(line.coords) / k, decimals)
    keep = np.r_[True, np.any(np.diff(out, axis=0) != 0, axis=1)]  # rounding can make neighbours equal
    pts = out[keep] if keep.sum() >= 2 else out[[0, -1]]
    return [[float(a), float(b)] for a, b in pts]


def _features(values: pd.DataFrame, network, merge: bool, decimals: int) -> list[dict]:
    seg = network.segments.loc[network.segments.index.intersection(values.index)]
    seg = seg.sort_values([C.STREET_ID, "seg_n"], kind="stable")
    table = {k: {c: (None if pd.isna(v) else float(v)) for c, v in row.items()}
             for k, row in values.to_dict("index").items()}
    feats = []
    run_ids: list[str] = []
    run_coords: list = []
    run_key = None

    def flush():
        if run_ids:
            props = {"id": run_ids[0] if len(run_ids) == 1 else f"{run_ids[0]}..{run_ids[-1].rsplit('#', 1)[-1]}"}
            props.update(table[run_ids[0]])
            feats.append({"type": "Feature", "properties": props,
                          "geometry": {"type": "LineString",
                                       "coordinates": _simplify(run_coords, TOLERANCE_M, decimals)}})

    for seg_id, street, geom in zip(seg.index, seg[C.STREET_ID], seg["geometry_lonlat"], strict=True):
        key = (street, tuple(table[seg_id].values()))
        if merge and key == run_key:
            run_ids.append(seg_id)
            run_coords.extend(geom[1:])
            continue
        flush()
        run_ids, run_coords, run_key = [seg_id], list(geom), key
    flush()
    return feats


def city_map_layer(summary: pd.DataFrame, network, base: str = BASE, budget_bytes: int = BUDGET_BYTES) -> dict:
    """The compact map layer of a batch (see module docstring).

    Parameters
    ----------
    summary : pandas.DataFrame
        :func:`walkcomfort.network.summaries.segment_summary` (index ``segment_id, scheme``).
    network : walkcomfort.network.segments.Network
    base : str
        The scheme the others are compared with.
    budget_bytes : int
        Largest size of the compact JSON text [bytes].

    Returns
    -------
    dict
        A GeoJSON FeatureCollection; properties ``id`` (a segment id, or ``first..last`` of
        merged segments of one street), ``<base>`` [h] and one change [h] per other scheme.
    """
    values = _values(summary, base)
    attempts = ((False, LONLAT_DECIMALS, "one line per segment"),
                (True, LONLAT_DECIMALS, "consecutive segments of a street with equal rounded values merged"),
                (True, LONLAT_DECIMALS - 1, "consecutive segments of a street with equal rounded values merged; "
                                            "coordinates to 4 decimals (about 10 m)"))
    size = 0
    for merge, decimals, how in attempts:
        layer = {"type": "FeatureCollection", "features": _features(values, network, merge, decimals)}
        layer["walkcomfort"] = {
            "network": network.name, "base": base,
            "aggregation": f"every time step summed to hours per segment and scheme; {how}; hours rounded to "
                           f"{HOURS_DECIMALS} decimal; lines simplified at {TOLERANCE_M:g} m. Full results: "
                           "segment_summary.parquet and segment_hours/ (Parquet).",
            "fields": {base: "comfortable hours, base scene [h]",
                       **{s: f"change in comfortable hours, {s} minus {base} [h]" for s in values.columns if s != base}},
            "segments": int(len(values)), "features": len(layer["features"]), "budget_bytes": int(budget_bytes)}
        size = len(compact_json(layer).encode())
        if size <= budget_bytes:
            layer["walkcomfort"]["bytes"] = size
            return layer
    raise InputError(f"the map layer of {len(values)} segments x {values.shape[1]} schemes needs {size:,} bytes, "
                     f"more than its budget of {budget_bytes:,}",
                     fix="use a longer --segment-length or fewer schemes per run; the full results are in the "
                         "Parquet files for a GIS")


def compact_json(obj) -> str:
    return json.dumps(obj, sort_keys=True, separators=(",", ":"), allow_nan=False)


def write_city_map_layer(out_dir, summary: pd.DataFrame, network, base: str = BASE,
                         budget_bytes: int = BUDGET_BYTES):
    """Write :func:`city_map_layer` to ``OUT/network_map_layer.geojson`` (compact, atomically)."""
    from pathlib import Path

    layer = city_map_layer(summary, network, base, budget_bytes)
    return _io.atomic_write_text(Path(out_dir) / LAYER_FILE, compact_json(layer) + "\n")
