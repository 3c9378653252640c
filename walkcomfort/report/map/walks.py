"""Recorded walks on the map: the track, the votes (with the model's class), the model-error cells."""

from __future__ import annotations

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.model.heldout_error import PROBA, class_index, has_prediction, model_error_cells
from walkcomfort.report.map.geometry import local_frame, rdp_keep
from walkcomfort.report.map.inputs import as_text, col, local_times, num, zone_of


def walk_payload(w: pd.DataFrame, i: int, default_tz: str, decimals: int, simplify_m: float) -> dict:
    session = (w.attrs or {}).get("session") or {}
    tz_name = str(session.get("timezone") or default_tz)
    zone = zone_of(tz_name)
    walk_id = as_text(session.get("walk_id")) or (
        as_text(w[C.WALK_ID].dropna().iloc[0]) if C.WALK_ID in w.columns and w[C.WALK_ID].notna().any()
        else f"walk {i + 1}")
    ok = np.isfinite(w[C.LAT].to_numpy(float)) & np.isfinite(w[C.LON].to_numpy(float))
    track = w[ok]
    frame = local_frame(track[C.LON].mean(), track[C.LAT].mean())
    x, y = frame.project(track[C.LON].to_numpy(float), track[C.LAT].to_numpy(float))
    keep = rdp_keep(np.asarray(x, dtype=float), np.asarray(y, dtype=float), max(simplify_m, 0.5))
    tr = track[keep]
    votes = vote_rows(track)
    pred = class_index(votes) if has_prediction(votes) else np.full(len(votes), -1)
    lookup = {c: i for i, c in enumerate(C.COMFORT_CLASSES)}
    vote_cls = votes[C.VOTE_COMFORT].map(lookup).fillna(-1).astype(int).tolist() \
        if C.VOTE_COMFORT in votes.columns else [-1] * len(votes)
    probs = [num(col(votes, p), 2) for p in PROBA]
    return {
        "walk": walk_id,
        "participant": as_text(w[C.PARTICIPANT].dropna().iloc[0]) if C.PARTICIPANT in w.columns
        and w[C.PARTICIPANT].notna().any() else None,
        "tz": tz_name,
        "track": [[a, b] for a, b in zip(num(tr[C.LAT], decimals), num(tr[C.LON], decimals), strict=False)],
        "votes": {
            "lat": num(votes[C.LAT], decimals),
            "lon": num(votes[C.LON], decimals),
            "t": local_times(votes.index, zone, "%Y-%m-%d %H:%M:%S"),
            "vote": vote_cls,
            "tsv": num(col(votes, C.VOTE_TSV), 0),
            "kind": [as_text(v) for v in votes[C.VOTE_KIND]] if C.VOTE_KIND in votes.columns else [None] * len(votes),
            "note": [as_text(v) for v in votes[C.VOTE_NOTE]] if C.VOTE_NOTE in votes.columns else [None] * len(votes),
            "pred": [int(v) for v in pred],
            "p": probs,
            "utci": num(col(votes, C.UTCI_C), 1),
        },
    }


def vote_rows(w: pd.DataFrame) -> pd.DataFrame:
    mask = np.zeros(len(w), dtype=bool)
    for name in (C.VOTE_COMFORT, C.VOTE_TSV):
        if name in w.columns:
            mask |= w[name].notna().to_numpy()
    return w[mask]


def errors_payload(walks: list[pd.DataFrame], cell_m: float, decimals: int) -> dict | None:
    """The model-error grid cells as drawn (None when no vote has a prediction)."""
    cells = model_error_cells(walks, cell_m)
    if not len(cells):
        return None
    return {"cell_m": float(cell_m),
            "cells": [{"c": [[round(a, decimals), round(b, decimals)] for a, b in r.corners],
                       "n": int(r.n_votes), "w": int(r.n_wrong), "rate": round(float(r.error_rate), 3),
                       "top": as_text(r.top_confusion)} for r in cells.itertuples()]}
