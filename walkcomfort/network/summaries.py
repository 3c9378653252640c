"""Per-segment summaries of a network batch, and GeoJSON for files and the map.

From the segment x time x scheme rows (:func:`walkcomfort.network.engines.read_segment_hours`):

- :func:`segment_summary` — one row per segment x scheme: comfortable hours, the
  expected comfortable hours (sum of probabilities), heat-stress hours, mean and
  peak UTCI, mean shade, and for every scheme but the base the change against the
  base, hour by hour (hours a scheme turns comfortable, hours it loses).
- :func:`summary_geojson` — the segments as GeoJSON lines with every scheme's
  summary nested under ``properties.schemes`` (the file written by the command).
- :func:`network_layer` — a small GeoJSON for one scheme with flat properties,
  coordinates rounded and lines simplified, for a map layer.

Hours are counted as time steps x the step length; a row counts as "comfortable"
when its most probable class is ``comfortable``, and "heat stress" when UTCI is
above 32 °C (strong heat stress or worse on the UTCI assessment scale, Bröde et
al. 2012, doi:10.1007/s00484-011-0454-1).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.errors import InputError
from walkcomfort.network.batch import BASE

#: UTCI above which an hour counts as heat stress [°C]: lower bound of "strong heat stress".
HEAT_STRESS_UTCI_C = 32.0

SUMMARY_COLUMNS = ("hours_h", "comfortable_h", "expected_comfortable_h", "uncomfortable_h", "heat_stress_h",
                   "mean_utci_c", "max_utci_c", "mean_shade_frac")
CHANGE_COLUMNS = ("d_comfortable_h", "d_expected_comfortable_h", "d_heat_stress_h", "d_mean_utci_c",
                  "gained_comfortable_h", "lost_comfortable_h", "uncomfortable_to_comfortable_h")


def time_step_h(rows: pd.DataFrame) -> float:
    """The batch's time step [h] from the rows' distinct times (1 h for a single time)."""
    t = pd.DatetimeIndex(rows.index.unique()).sort_values()
    if len(t) < 2:
        return 1.0
    return float(pd.Series(t).diff().dropna().min() / pd.Timedelta(hours=1))


def segment_summary(rows: pd.DataFrame, base: str = BASE, step_h: float | None = None) -> pd.DataFrame:
    """Summaries per segment x scheme (see module docstring).

    Parameters
    ----------
    rows : pandas.DataFrame
        Segment x time rows with ``segment_id, scheme, comfort_class, p_comfortable,
        utci_c, shade_frac``; index ``time``.
    base : str
        The scheme the others are compared with.
    step_h : float, optional
        Length of one time step [h]; default inferred from the times.

    Returns
    -------
    pandas.DataFrame
        Index ``(segment_id, scheme)``; :data:`SUMMARY_COLUMNS` and, for schemes other
        than ``base``, :data:`CHANGE_COLUMNS` (NaN on the base rows).
    """
    need = {C.SEGMENT_ID, "scheme", "comfort_class", "p_comfortable", C.UTCI_C, C.SHADE_FRAC}
    missing = sorted(need - set(rows.columns))
    if missing:
        raise InputError(f"batch rows lack the columns {missing}", fix="summarise rows written by the network batch")
    step = time_step_h(rows) if step_h is None else float(step_h)
    df = rows.reset_index()
    comf = (df["comfort_class"] == "comfortable").to_numpy()
    df["_comf"] = comf.astype(float) * step
    df["_pcomf"] = df["p_comfortable"].to_numpy(float) * step
    df["_unc"] = (df["comfort_class"] == "uncomfortable").to_numpy(float) * step
    df["_heat"] = (df[C.UTCI_C].to_numpy(float) > HEAT_STRESS_UTCI_C).astype(float) * step
    df["_one"] = step
    g = df.groupby([C.SEGMENT_ID, "scheme"], sort=True)
    out = pd.DataFrame({"hours_h": g["_one"].sum(), "comfortable_h": g["_comf"].sum(),
                        "expected_comfortable_h": g["_pcomf"].sum(), "uncomfortable_h": g["_unc"].sum(),
                        "heat_stress_h": g["_heat"].sum(), "mean_utci_c": g[C.UTCI_C].mean(),
                        "max_utci_c": g[C.UTCI_C].max(), "mean_shade_frac": g[C.SHADE_FRAC].mean()})
    if "pet_c" in df.columns:  # network --index pet
        out["mean_pet_c"], out["max_pet_c"] = g["pet_c"].mean(), g["pet_c"].max()
    if "wbgt_limit_c" in df.columns:  # network --wbgt-limit: hours with the segment's WBGT above the limit
        df["_wbgt"] = (df["wbgt_c"].to_numpy(float) > df["wbgt_limit_c"].to_numpy(float)).astype(float) * step
        g = df.groupby([C.SEGMENT_ID, "scheme"], sort=True)
        out["wbgt_limit_c"], out["wbgt_h_above_limit"] = g["wbgt_limit_c"].first(), g["_wbgt"].sum()
        out["max_wbgt_c"] = g["wbgt_c"].max()
    for c in CHANGE_COLUMNS:
        out[c] = np.nan
    schemes = sorted(df["scheme"].unique())
    if base not in schemes:
        if len(schemes) > 1:
            raise InputError(f"the base scheme {base!r} is not among the rows' schemes {schemes}",
                             fix="name the base scheme the others are compared with")
        return out
    key = [C.SEGMENT_ID, C.TIME]
    b = df.loc[df["scheme"] == base].set_index(key)
    for s in schemes:
        if s == base:
            continue
        o = df.loc[df["scheme"] == s].set_index(key)
        if not o.index.sort_values().equals(b.index.sort_values()):
            raise InputError(f"scheme {s!r} and base {base!r} do not cover the same segments x times",
                             fix="compare schemes from one batch run")
        bb = b.loc[o.index]
        gained = (o["comfort_class"].to_numpy() == "comfortable") & (bb["comfort_class"].to_numpy() != "comfortable")
        lost = (o["comfort_class"].to_numpy() != "comfortable") & (bb["comfort_class"].to_numpy() == "comfortable")
        u2c = (o["comfort_class"].to_numpy() == "comfortable") & (bb["comfort_class"].to_numpy() == "uncomfortable")
        seg = o.index.get_level_values(C.SEGMENT_ID)
        per = pd.DataFrame({"gained_comfortable_h": gained * step, "lost_comfortable_h": lost * step,
                            "uncomfortable_to_comfortable_h": u2c * step}, index=seg).groupby(level=0).sum()
        idx = pd.MultiIndex.from_arrays([per.index, [s] * len(per)], names=[C.SEGMENT_ID, "scheme"])
        per.index = idx
        out.loc[idx, list(per.columns)] = per.to_numpy()
        bsum = out.xs(base, level="scheme")
        for col, src in (("d_comfortable_h", "comfortable_h"), ("d_expected_comfortable_h", "expected_comfortable_h"),
                         ("d_heat_stress_h", "heat_stress_h"), ("d_mean_utci_c", "mean_utci_c")):
            out.loc[idx, col] = (out.loc[idx, src].to_numpy()
                                 - bsum.loc[idx.get_level_values(0), src].to_numpy())
    return out


def summary_from_results(out_dir, base: str = BASE, step_h: float | None = None, client=None) -> pd.DataFrame:
    """:func:`segment_summary` of a batch's results, one tile at a time.

    Only the partitions listed in the folder's job manifest are read
    (:func:`walkcomfort.network.jobdir.manifest_files`). A segment belongs to one tile,
    so summarising tile by tile (every scheme and time chunk of the tile together)
    gives exactly the whole summary while holding only one tile's rows in memory. With
    a Dask ``client`` the tiles are summarised on the workers (each reads its tile's
    files where they are) and only the per-segment tables come back.
    """
    from walkcomfort.network.jobdir import manifest_files

    files = manifest_files(out_dir)
    if not files:
        raise InputError(f"no batch results under '{out_dir}'", where=out_dir,
                         fix="run the network batch first (walkcomfort network ...)")
    by_tile: dict[str, list[tuple[str, str]]] = {}
    for scheme, tile, path in files:
        by_tile.setdefault(tile, []).append((scheme, str(Path(path).resolve())))  # workers have their own cwd
    if step_h is None:
        step_h = _step_from_files([p for _, p in next(iter(by_tile.values()))])
    groups = [by_tile[t] for t in sorted(by_tile)]
    if client is None:
        parts = [tile_summary(g, base, step_h) for g in groups]
    else:
        parts = client.gather(client.map(tile_summary, groups, base=base, step_h=step_h, pure=False))
    return pd.concat(parts).sort_index()


def _step_from_files(paths: list[str]) -> float:
    import pyarrow.parquet as pq

    t = pd.DatetimeIndex(np.unique(np.concatenate([pq.read_table(p, columns=[C.TIME]).column(C.TIME).to_numpy()
                                                   for p in paths])))
    return time_step_h(pd.DataFrame(index=t))


def tile_summary(files: list[tuple[str, str]], base: str = BASE, step_h: float = 1.0) -> pd.DataFrame:
    """:func:`segment_summary` of one tile from its partition files ``[(scheme, path), ...]``."""
    import pyarrow.parquet as pq

    frames = []
    for scheme, path in files:
        df = pq.read_table(path).to_pandas()
        df.insert(1, "scheme", scheme)
        frames.append(df)
    return segment_summary(pd.concat(frames), base=base, step_h=step_h)


def _props(values: pd.Series, ndigits: int = 2) -> dict:
    out = {}
    for k, v in values.items():
        v = float(v)
        out[k] = None if not np.isfinite(v) else round(v, ndigits)
    return out


def summary_geojson(summary: pd.DataFrame, network, precision: int = 6, base: str = BASE) -> dict:
    """Every segment as a GeoJSON LineString with each scheme's summary under ``properties.schemes``.

    Parameters
    ----------
    summary : pandas.DataFrame
        From :func:`segment_summary`.
    network : walkcomfort.network.segments.Network
    precision : int
        Decimal places kept in lon/lat (6 ≈ 0.1 m).
    """
    feats = []
    by_seg = {seg: grp.droplevel(0) for seg, grp in summary.groupby(level=0, sort=False)}
    for seg_id, seg in network.segments.iterrows():
        if seg_id not in by_seg:
            continue
        schemes = {s: _props(row.dropna()) for s, row in by_seg[seg_id].iterrows()}
        feats.append({"type": "Feature",
                      "properties": {C.SEGMENT_ID: seg_id, C.STREET_ID: seg[C.STREET_ID],
                                     "name": seg["street_name"], "length_m": round(float(seg["length_m"]), 1),
                                     "schemes": schemes},
                      "geometry": {"type": "LineString",
                                   "coordinates": [[round(x, precision), round(y, precision)]
                                                   for x, y in seg["geometry_lonlat"]]}})
    return {"type": "FeatureCollection",
            "walkcomfort": {"network": network.name, "summary": "segments", "base": base},
            "features": feats}


def network_layer(summary_geojson, scheme: str = BASE, precision: int = 5, tolerance_m: float = 1.0) -> dict:
    """A small GeoJSON of one scheme's per-segment summary, for a map layer.

    Parameters
    ----------
    summary_geojson : dict or path-like
        What :func:`summary_geojson` returns, or the ``segment_summary.geojson`` file
        the ``network`` command writes.
    scheme : str
        The scheme to show.
    precision : int
        Decimal places kept in lon/lat (5 ≈ 1 m).
    tolerance_m : float
        Douglas–Peucker simplification tolerance [m] (on a local equirectangular
        projection, good to well under a percent over a town).

    Returns
    -------
    dict
        A FeatureCollection of LineStrings with flat properties ``segment_id, name,
        scheme`` and that scheme's :data:`SUMMARY_COLUMNS` (and :data:`CHANGE_COLUMNS`
        for a scheme other than the base), numbers to 2 decimals.
    """
    import json
    import math
    from pathlib import Path

    from shapely.geometry import LineString

    obj = summary_geojson
    if not isinstance(obj, dict):
        path = Path(obj)
        try:
            obj = json.loads(path.read_text(encoding="utf-8"))
        except (OSError, ValueError) as exc:
            raise InputError(f"cannot read the segment summary ({exc})", where=path,
                             fix="give the segment_summary.geojson written by walkcomfort network") from None
    feats_in = obj.get("features") or []
    schemes = sorted({s for f in feats_in for s in (f["properties"].get("schemes") or {})})
    if scheme not in schemes:
        raise InputError(f"scheme {scheme!r} is not in the summary; it has {schemes}", fix="pick one of those schemes")
    lat0 = float(np.mean([c[1] for f in feats_in for c in f["geometry"]["coordinates"]])) if feats_in else 0.0
    kx = 111_320.0 * math.cos(math.radians(lat0))  # [m per degree] local equirectangular (spherical Earth)
    ky = 111_320.0
    feats = []
    for f in feats_in:
        props = f["properties"]
        values = (props.get("schemes") or {}).get(scheme)
        if values is None:
            continue
        xy = np.asarray(f["geometry"]["coordinates"], dtype=float) * [kx, ky]
        simple = np.asarray(LineString(xy).simplify(tolerance_m, preserve_topology=False).coords) / [kx, ky]
        coords = [[round(float(a), precision), round(float(b), precision)] for a, b in simple]
        flat = {C.SEGMENT_ID: props[C.SEGMENT_ID], "name": props.get("name", ""), "scheme": scheme}
        flat.update({k: values.get(k) for k in SUMMARY_COLUMNS})
        if scheme != obj.get("walkcomfort", {}).get("base", BASE):
            flat.update({k: values.get(k) for k in CHANGE_COLUMNS})
        feats.append({"type": "Feature", "properties": flat, "geometry": {"type": "LineString", "coordinates": coords}})
    return {"type": "FeatureCollection",
            "walkcomfort": {"network": obj.get("walkcomfort", {}).get("network"), "scheme": scheme},
            "features": feats}
