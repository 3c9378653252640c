"""The ledger of rows the timeline stage sets aside, so that counts always reconcile.

Readers quarantine the rows they cannot read; the timeline stage sets aside more
(GPS jumps, rows outside the walk window, events off the track). :class:`QuarantineBook`
keeps each source's rows, their file row numbers and raw text together, so a row moved
to the quarantine keeps its place and its reason.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from walkcomfort.session.readers import QUARANTINE_COLUMNS, quarantine_frame


class QuarantineBook:
    """Keeps each source's rows and the rows the timeline stage sets aside, so counts reconcile."""

    def __init__(self, frames: dict, metas: dict):
        self.frames = frames
        self.metas = metas
        self.extra: dict[str, list[pd.DataFrame]] = {k: [] for k in frames}   # column-wise chunks
        self.pending: dict[str, np.ndarray] = {}

    def drop(self, name: str, mask: np.ndarray, reason: str) -> None:
        mask = np.asarray(mask, dtype=bool)
        reasons = np.where(mask, reason, "").astype(object)
        self.drop_reasons(name, reasons)

    def drop_reasons(self, name: str, reasons: np.ndarray) -> None:
        """Move the rows with a non-empty reason to the quarantine."""
        mask = reasons != ""
        if not mask.any():
            return
        m = self.metas[name]
        rows, raws = m["row_numbers"], m["raw_lines"]
        idx = np.flatnonzero(mask)
        # column-wise, not a tuple per row: a logger left running for weeks sets aside a million rows
        self.extra[name].append(pd.DataFrame({"source": name, "file": m["file"],
                                              "row": np.asarray(rows, dtype=np.int64)[idx],
                                              "reason": np.asarray(reasons, dtype=object)[idx].astype(str),
                                              "raw": [raws[i] for i in idx]}))
        keep = ~mask
        self.frames[name] = self.frames[name][keep]
        m["row_numbers"] = np.asarray(rows)[keep]
        m["raw_lines"] = [r for r, k in zip(raws, keep, strict=False) if k]

    def drop_outside(self, name: str, t0, t1, margin_s: float) -> None:
        t = self.frames[name].index.asi8
        lo, hi = t0.value - margin_s * 1e9, t1.value + margin_s * 1e9
        self.drop(name, (t < lo) | (t > hi), "outside_walk_window")

    # marks are collected (event sources) and applied at once, keeping positions stable meanwhile
    def mark(self, name: str, mask: np.ndarray, reason: str) -> None:
        cur = self.pending.setdefault(name, np.full(len(self.frames[name]), "", dtype=object))
        sel = np.asarray(mask, dtype=bool) & (cur == "")
        cur[sel] = reason

    def mark_one(self, name: str, i: int, reason: str) -> None:
        cur = self.pending.setdefault(name, np.full(len(self.frames[name]), "", dtype=object))
        if cur[i] == "":
            cur[i] = reason

    def apply(self, name: str) -> None:
        cur = self.pending.pop(name, None)
        if cur is not None:
            self.drop_reasons(name, cur)

    def quarantine(self, order: list[str]) -> pd.DataFrame:
        """Every row set aside, source by source in ``order``, each source sorted by row then reason."""
        parts = []
        for name in order:
            chunks = [self.metas[name]["quarantine"], *self.extra[name]]
            chunks = [c for c in chunks if len(c)]
            if not chunks:
                continue
            q = pd.concat(chunks, ignore_index=True) if len(chunks) > 1 else chunks[0].reset_index(drop=True)
            parts.append(q.sort_values(["row", "reason"], kind="stable").reset_index(drop=True))
        if not parts:
            return quarantine_frame([])
        out = pd.concat(parts, ignore_index=True)[list(QUARANTINE_COLUMNS)]
        out["row"] = out["row"].astype("int64")
        for c in ("source", "file", "reason", "raw"):
            out[c] = out[c].astype(object).astype(str)
        return out


