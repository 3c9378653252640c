"""The ledger of rows the timeline stage sets aside, so that counts always reconcile.

Readers quarantine the rows they cannot read; the timeline stage sets aside more
(GPS jumps, rows outside the walk window, events off the track). :class:`QuarantineBook`
keeps each source's rows, their file row numbers and raw text together, so a row moved
to the quarantine keeps its place and its reason.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from walkcomfort.session.readers import quarantine_frame


class QuarantineBook:
    """Keeps each source's rows and the rows the timeline stage sets aside, so counts reconcile."""

    def __init__(self, frames: dict, metas: dict):
        self.frames = frames
        self.metas = metas
        self.extra: dict[str, list[tuple]] = {k: [] for k in frames}
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
        for i in np.flatnonzero(mask):
            self.extra[name].append((name, m["file"], int(rows[i]), str(reasons[i]), raws[i]))
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
        parts = []
        for name in order:
            q = self.metas[name]["quarantine"]
            rows = list(q.itertuples(index=False, name=None)) + self.extra[name]
            rows.sort(key=lambda r: (r[2], r[3]))
            parts.extend(rows)
        return quarantine_frame(parts)


