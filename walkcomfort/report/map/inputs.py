"""What the map reads: checked inputs and the small conversions every layer shares."""

from __future__ import annotations

import json
import math
import os
from collections.abc import Mapping
from pathlib import Path

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.errors import InputError
from walkcomfort.model.heldout_error import PROBA

# Names of the per-point prediction table (DEVELOPERS.md contract, owner walkcomfort.routes).
ROUTE_ID = "route_id"
SCHEME = "scheme"
DEPARTURE = "departure"
COMFORT_CLASS = "comfort_class"
PREDICTOR = "predictor"
REASONS = "reasons"
SHADE_BINS = 5


def num(values, digits: int) -> list:
    """Rounded floats with NaN as None (JSON null)."""
    arr = np.asarray(values, dtype=float)
    out = np.round(arr, digits).tolist()
    return [None if (v is None or not math.isfinite(v)) else (int(v) if digits == 0 else v) for v in out]


def as_text(value) -> str | None:
    if value is None:
        return None
    try:
        if pd.isna(value):
            return None
    except (TypeError, ValueError):
        pass
    return str(value)



def zone_of(timezone: str):
    from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

    try:
        return ZoneInfo(str(timezone))
    except (ZoneInfoNotFoundError, ValueError):
        raise InputError(f"time zone {timezone!r} is not an IANA zone name", where="--timezone",
                         fix="use a name such as 'Europe/Madrid' or 'UTC'") from None


def load_geojson(obj, what: str) -> tuple[dict, str]:
    """(GeoJSON dict, where-label) from a path, a dict or an object with ``to_geojson()``."""
    if hasattr(obj, "to_geojson"):
        return obj.to_geojson(), what
    if isinstance(obj, Mapping):
        return dict(obj), what
    path = Path(obj)
    try:
        text = path.read_text(encoding="utf-8")
    except OSError as exc:
        raise InputError(f"cannot read the {what} file ({exc.strerror})", where=path,
                         fix="check the path") from None
    try:
        data = json.loads(text)
    except json.JSONDecodeError as exc:
        raise InputError(f"the {what} file is not valid JSON ({exc.msg})", where=f"{path}:{exc.lineno}",
                         fix="fix the JSON syntax") from None
    if not isinstance(data, dict) or data.get("type") != "FeatureCollection":
        raise InputError(f"the {what} file is not a GeoJSON FeatureCollection", where=path,
                         fix="write a FeatureCollection in WGS84 lon/lat")
    return data, os.fspath(path)


def check_predictions(df: pd.DataFrame) -> pd.DataFrame:
    where = "prediction table"
    if not isinstance(df, pd.DataFrame):
        raise InputError(f"predictions must be a DataFrame, got {type(df).__name__}", where=where,
                         fix="pass the table returned by walkcomfort.routes.predict_route")
    need = [C.LAT, C.LON, SCHEME, DEPARTURE]
    missing = [c for c in need if c not in df.columns]
    if COMFORT_CLASS not in df.columns and not all(p in df.columns for p in PROBA):
        missing.append(f"{COMFORT_CLASS} (or {', '.join(PROBA)})")
    if missing:
        raise InputError(f"the prediction table lacks column(s) {', '.join(missing)}", where=where,
                         fix="pass the per-point table described in DEVELOPERS.md")
    if not isinstance(df.index, pd.DatetimeIndex) or df.index.tz is None:
        raise InputError("the prediction table's index is not a tz-aware time index", where=where,
                         fix="index the table by UTC time as predict_route does")
    bad = ~(np.isfinite(df[C.LAT].to_numpy(float)) & np.isfinite(df[C.LON].to_numpy(float)))
    if bad.any():
        row = int(np.flatnonzero(bad)[0])
        raise InputError(f"{int(bad.sum())} prediction row(s) have no lat/lon", where=f"{where} row {row}",
                         fix="drop or repair rows without a position before mapping")
    if COMFORT_CLASS in df.columns:
        bad_cls = df[COMFORT_CLASS].notna() & ~df[COMFORT_CLASS].isin(C.COMFORT_CLASSES)
        if bad_cls.any():
            row = int(np.flatnonzero(bad_cls.to_numpy())[0])
            raise InputError(f"comfort_class {df[COMFORT_CLASS].iloc[row]!r} is not one of "
                             f"{', '.join(C.COMFORT_CLASSES)}", where=f"{where} row {row}",
                             fix="use the glossary's comfort classes")
    return df


def bands(df: pd.DataFrame) -> np.ndarray:
    """Index into UTCI_BANDS per row (-1 = none): the stated band, else the band of utci_c."""
    names = [b[2] for b in C.UTCI_BANDS]
    out = np.full(len(df), -1, dtype=int)
    if C.UTCI_BAND in df.columns:
        out = np.array(df[C.UTCI_BAND].map({n: i for i, n in enumerate(names)}).fillna(-1).astype(int), dtype=int)
    if C.UTCI_C in df.columns:
        utci = df[C.UTCI_C].to_numpy(float)
        for i, (low, high, _) in enumerate(C.UTCI_BANDS):
            out[(out < 0) & (utci > low) & (utci <= high)] = i
    return out


def pet_classes(df: pd.DataFrame) -> np.ndarray:
    """Index into the PET classes (environment.pet.PET_CLASSES) per row of ``pet_c`` (-1 = none)."""
    from walkcomfort.environment.pet import PET_C, PET_CLASSES

    out = np.full(len(df), -1, dtype=int)
    if PET_C in df.columns:
        pet = df[PET_C].to_numpy(float)
        for i, (low, high, _, _) in enumerate(PET_CLASSES):
            out[(out < 0) & (pet > low) & (pet <= high)] = i
    return out


def shade_bins(shade: np.ndarray) -> np.ndarray:
    out = np.full(len(shade), -1, dtype=int)
    ok = np.isfinite(shade)
    out[ok] = np.clip(np.floor(np.clip(shade[ok], 0, 1) * SHADE_BINS), 0, SHADE_BINS - 1).astype(int)
    return out


def col(df, name, default=np.nan) -> np.ndarray:
    return df[name].to_numpy(float) if name in df.columns else np.full(len(df), default, dtype=float)


def local_times(index: pd.DatetimeIndex, zone, fmt: str) -> list[str]:
    return list(index.tz_convert(zone).strftime(fmt))



def walk_frames(walks) -> list[pd.DataFrame]:
    out = []
    for i, w in enumerate(walks or ()):
        if isinstance(w, (str, os.PathLike)):
            path = Path(w)
            try:
                from walkcomfort.session.timeline import read_timeline  # the owner's reader
            except ImportError:  # pragma: no cover - the session stage is not installed yet
                read_timeline = None
            try:
                w = read_timeline(path) if read_timeline is not None else pd.read_parquet(path)
            except (OSError, ValueError) as exc:
                raise InputError(f"cannot read the timeline ({exc})", where=path,
                                 fix="pass a timeline.parquet written by 'walkcomfort ingest'") from None
            if hasattr(w, "data"):
                w = w.data
        elif hasattr(w, "data") and isinstance(w.data, pd.DataFrame):
            w = w.data
        if not isinstance(w, pd.DataFrame):
            raise InputError(f"walk {i} is a {type(w).__name__}, not a timeline", where=f"walk {i}",
                             fix="pass timeline DataFrames or timeline.parquet paths")
        for need in (C.LAT, C.LON):
            if need not in w.columns:
                raise InputError(f"walk {i} has no {need!r} column", where=f"walk {i}",
                                 fix="pass a timeline with GPS positions")
        if not isinstance(w.index, pd.DatetimeIndex) or w.index.tz is None:
            raise InputError(f"walk {i}'s index is not a tz-aware time index", where=f"walk {i}",
                             fix="pass the timeline as written by 'walkcomfort ingest'")
        out.append(w)
    return out
