"""What the report verbs read from the routes and network stages' output folders."""

from __future__ import annotations

import os
from pathlib import Path

import pandas as pd

from walkcomfort import _io
from walkcomfort.errors import InputError

POINTS_FILE = "points.parquet"
SUMMARY_FILE = "summary.parquet"  # route summaries beside the points (walkcomfort.routes.outputs)
COMPARISON_FILE = "comparison.csv"  # schemes against the base, with intervals when the routes stage gives them


def read_points(path: str | os.PathLike):
    """Per-point prediction table from ``points.parquet`` / ``points.csv`` or a routes output folder.

    Returns
    -------
    (DataFrame, dict)
        The table (index ``time`` UTC) and the ``attrs`` the routes stage stored with it.
    """
    p = Path(path)
    if p.is_dir():
        p = p / POINTS_FILE
    if not p.is_file():
        raise InputError("no prediction table here", where=p,
                         fix="pass points.parquet (or the folder) written by 'walkcomfort route' or 'compare'")
    if p.suffix.lower() == ".csv":
        df = pd.read_csv(p, index_col=0)
        try:
            df.index = pd.to_datetime(df.index, utc=True, format="ISO8601")
        except (ValueError, TypeError):
            raise InputError("the first column of the prediction CSV is not a time stamp", where=p,
                             fix="pass points.parquet or points.csv as written by 'walkcomfort route'") from None
        df.index.name = "time"
        if "departure" in df.columns:
            df["departure"] = pd.to_datetime(df["departure"], utc=True, format="ISO8601")
        return df, {}
    try:
        df = pd.read_parquet(p)
    except (OSError, ValueError) as exc:
        raise InputError(f"cannot read the prediction table ({exc})", where=p,
                         fix="pass points.parquet as written by 'walkcomfort route'") from None
    meta = _io.read_parquet_metadata(p)
    return df, dict(meta.get("attrs") or {})


NETWORK_LAYER_GLOB = "network_layer_*.geojson"  # written by walkcomfort.network.commands (LAYER_GEOJSON)


def read_network_layers(folder: str | os.PathLike, schemes=()) -> list[Path]:
    """The network map-layer files of a ``walkcomfort network`` output folder, the base scheme first.

    ``schemes`` keeps only those scheme names (in that order); empty keeps all.
    """
    folder = Path(folder)
    if folder.is_file():
        return [folder]
    files = sorted(folder.glob(NETWORK_LAYER_GLOB)) if folder.is_dir() else []
    if not files:
        raise InputError(f"no {NETWORK_LAYER_GLOB} here", where=folder,
                         fix="pass the output folder of 'walkcomfort network'")
    by_name = {f.name[len("network_layer_"):-len(".geojson")]: f for f in files}
    if schemes:
        missing = [s for s in schemes if s not in by_name]
        if missing:
            raise InputError(f"no network layer for scheme(s) {', '.join(missing)}; there are {', '.join(by_name)}",
                             where=folder, fix="pick from those schemes")
        return [by_name[s] for s in schemes]
    order = sorted(by_name, key=lambda s: (s != "base", s))
    return [by_name[s] for s in order]


def read_route_tables(points) -> dict:
    """Prediction tables and what the routes stage wrote beside them (summary, comparison, provenance)."""
    tables, summaries, comparisons, attrs, provenance = [], [], [], {}, {}
    for p in points:
        df, meta = read_points(p)
        tables.append(df)
        attrs = attrs or meta
        folder = Path(p) if Path(p).is_dir() else Path(p).parent
        if (folder / SUMMARY_FILE).is_file():
            summaries.append(pd.read_parquet(folder / SUMMARY_FILE))
        if (folder / COMPARISON_FILE).is_file():
            comparisons.append(pd.read_csv(folder / COMPARISON_FILE))
        if not provenance and (folder / POINTS_FILE).is_file():
            provenance = _io.read_parquet_metadata(folder / POINTS_FILE).get("provenance") or {}
    return {"predictions": pd.concat(tables) if tables else None,
            "summaries": pd.concat(summaries, ignore_index=True) if summaries else None,
            "comparison": pd.concat(comparisons, ignore_index=True) if comparisons else None,
            "attrs": attrs, "provenance": provenance}


def network_times(folder: Path | None, timezone: str) -> str | None:
    """The hours and days a network batch covers, in words, from one tile of its base scheme."""
    if folder is None or not folder.is_dir():
        return None
    parts = sorted((folder / "segment_hours").glob("scheme=*/tile_id=*/*.parquet"))
    if not parts:
        return None
    tile = parts[0].parent
    times = pd.DatetimeIndex(sorted({t for f in sorted(tile.glob("*.parquet"))
                                     for t in pd.read_parquet(f, columns=[]).index})).tz_convert(timezone)
    if not len(times):
        return None
    days = sorted({t.strftime("%a %d %b %Y") for t in times})
    hours = ", ".join(sorted({t.strftime("%H:%M") for t in times}))
    step = (times[1] - times[0]) if len(times) > 1 else None
    each = f", each standing for {step.total_seconds() / 3600:g} h" if step is not None else ""
    return f"{len(times)} times on {len(days)} day(s) ({'; '.join(days)}: {hours} {timezone}{each})"
