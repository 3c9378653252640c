"""Where a comfort model's predictions disagree with the votes, on a square grid.

The map's "model errors" layer draws these cells. When the predictions are the fit's
walker-grouped out-of-fold predictions (``oof_predictions.parquet`` of a bundle), each
vote was predicted by a model that never saw its walker, so the cells show what to
expect on new walkers; predictions by a model that saw the walker are in-sample and look
better than they are.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.environment.geo import LocalFrame
from walkcomfort.errors import InputError

COMFORT_CLASS = "comfort_class"
PROBA = tuple(f"p_{c}" for c in C.COMFORT_CLASSES)
CELL_COLUMNS = ("ix", "iy", "n_votes", "n_wrong", "error_rate", "corners", "top_confusion")


def has_prediction(df: pd.DataFrame) -> bool:
    """True when the table carries a comfort prediction (a class column or every ``p_*``)."""
    return COMFORT_CLASS in df.columns or all(p in df.columns for p in PROBA)


def class_index(df: pd.DataFrame) -> np.ndarray:
    """Index into :data:`walkcomfort.columns.COMFORT_CLASSES` per row (-1 = none).

    The stated ``comfort_class`` wins; rows without one take the most probable class of
    their ``p_*`` columns when all three are finite.
    """
    out = np.full(len(df), -1, dtype=int)
    if COMFORT_CLASS in df.columns:
        lookup = {c: i for i, c in enumerate(C.COMFORT_CLASSES)}
        out = np.array(df[COMFORT_CLASS].map(lookup).fillna(-1).astype(int), dtype=int)
    if all(p in df.columns for p in PROBA):
        probs = df[list(PROBA)].to_numpy(float)
        ok = np.isfinite(probs).all(axis=1) & (out < 0)
        out[ok] = np.argmax(probs[ok], axis=1)
    return out


def _voted_points(walks: Sequence[pd.DataFrame]) -> pd.DataFrame:
    rows = []
    for w in walks:
        if C.VOTE_COMFORT not in w.columns or not has_prediction(w):
            continue
        v = w[w[C.VOTE_COMFORT].isin(C.COMFORT_CLASSES)]
        v = v[np.isfinite(v[C.LAT].to_numpy(float)) & np.isfinite(v[C.LON].to_numpy(float))]
        pred = class_index(v)
        v, pred = v[pred >= 0], pred[pred >= 0]
        if len(v):
            rows.append(pd.DataFrame({"lat": v[C.LAT].to_numpy(float), "lon": v[C.LON].to_numpy(float),
                                      "vote": v[C.VOTE_COMFORT].to_numpy(object),
                                      "pred": np.asarray(C.COMFORT_CLASSES, dtype=object)[pred]}))
    return pd.concat(rows, ignore_index=True) if rows else pd.DataFrame(columns=["lat", "lon", "vote", "pred"])


def model_error_cells(walks: Sequence[pd.DataFrame], cell_m: float = 50.0) -> pd.DataFrame:
    """Where the model's predicted class disagrees with the votes, on a square grid.

    Parameters
    ----------
    walks : sequence of DataFrame
        Timelines with ``lat``, ``lon``, ``vote_comfort`` and a prediction
        (``comfort_class`` or ``p_comfortable``/``p_neutral``/``p_uncomfortable``).
    cell_m : float
        Side of a grid cell in the UTM zone of the votes' centroid [m].

    Returns
    -------
    DataFrame
        One row per cell with at least one voted and predicted row: ``ix, iy`` (cell
        indices), ``n_votes``, ``n_wrong``, ``error_rate`` [-], ``corners`` (list of
        four (lat, lon) pairs) and ``top_confusion`` (``"vote → predicted"`` most often seen
        among the wrong ones, or None).
    """
    if not cell_m > 0:
        raise InputError(f"error cell size {cell_m} m must be positive", where="--error-cell-m",
                         fix="give a size such as 50")
    pts = _voted_points(walks)
    if pts.empty:
        return pd.DataFrame(columns=list(CELL_COLUMNS))
    frame = LocalFrame(float(pts["lon"].mean()), float(pts["lat"].mean()))
    x, y = frame.project(pts["lon"].to_numpy(float), pts["lat"].to_numpy(float))
    pts["ix"] = np.floor(np.asarray(x) / cell_m).astype(int)
    pts["iy"] = np.floor(np.asarray(y) / cell_m).astype(int)
    pts["wrong"] = pts["vote"] != pts["pred"]
    out = []
    for (ix, iy), cell in pts.groupby(["ix", "iy"], sort=True):
        xs = np.array([ix, ix + 1, ix + 1, ix], dtype=float) * cell_m
        ys = np.array([iy, iy, iy + 1, iy + 1], dtype=float) * cell_m
        lon, lat = frame.unproject(xs, ys)
        wrong = cell[cell["wrong"]]
        top = str((wrong["vote"] + " → " + wrong["pred"]).value_counts().index[0]) if len(wrong) else None
        out.append({"ix": int(ix), "iy": int(iy), "n_votes": int(len(cell)), "n_wrong": int(len(wrong)),
                    "error_rate": float(len(wrong) / len(cell)),
                    "corners": [[float(a), float(b)] for a, b in zip(lat, lon, strict=True)],
                    "top_confusion": top})
    return pd.DataFrame(out, columns=list(CELL_COLUMNS))
