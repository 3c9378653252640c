"""Bounded work: a track is one walk, or it is refused with the walks it holds.

A GPS logger left running, a track exported with the day before, or one fix dated
1970 (a receiver before its first fix) would stretch a timeline over days or
decades. Before any grid is laid, the fixes are split into groups wherever
consecutive fixes are more than ``split_gap_h`` apart:

- a small group apart from the rest (at most ``outlier_max_share`` of the fixes and at
  most ``outlier_max_fixes``) is quarantined as ``time_outlier``;
- if more than one group remains, or the one left lasts longer than ``max_walk_h``,
  the session is refused with the candidate walks (date, local start and end, duration,
  fixes) and the manifest keys that choose one (``[session] start`` / ``end``).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from walkcomfort.errors import InputError

#: candidate walks listed in a refusal (the largest first)
MAX_LISTED = 5


def time_groups(t_ns: np.ndarray, gap_s: float) -> list[tuple[int, int]]:
    """``[(first, last + 1), ...]`` of sorted times split where consecutive times are over ``gap_s`` apart."""
    t = np.asarray(t_ns, dtype=np.int64)
    if len(t) == 0:
        return []
    cuts = np.flatnonzero(np.diff(t) > gap_s * 1e9) + 1
    edges = np.concatenate([[0], cuts, [len(t)]])
    return [(int(a), int(b)) for a, b in zip(edges[:-1], edges[1:], strict=True)]


def time_outliers(t_ns: np.ndarray, limits: dict) -> np.ndarray:
    """Fixes in small groups far in time from the main body of the track (bool per fix)."""
    t = np.asarray(t_ns, dtype=np.int64)
    out = np.zeros(len(t), dtype=bool)
    groups = time_groups(t, limits["split_gap_h"] * 3600.0)
    if len(groups) < 2:
        return out
    cap = min(limits["outlier_max_fixes"], limits["outlier_max_share"] * len(t))
    biggest = max(b - a for a, b in groups)
    for a, b in groups:
        if b - a <= cap and b - a < biggest:
            out[a:b] = True
    return out


def candidate_walks(times: pd.DatetimeIndex, limits: dict, zone) -> list[dict]:
    """The walks a track holds: split at long gaps, and a group longer than ``max_walk_h`` by local date."""
    t = times.asi8
    out = []
    for a, b in time_groups(t, limits["split_gap_h"] * 3600.0):
        if (t[b - 1] - t[a]) / 3.6e12 <= limits["max_walk_h"]:
            out.append((a, b))
            continue
        days = times[a:b].tz_convert(zone).normalize().asi8
        cuts = np.flatnonzero(np.diff(days)) + 1
        edges = np.concatenate([[0], cuts, [b - a]]) + a
        out.extend((int(x), int(y)) for x, y in zip(edges[:-1], edges[1:], strict=True))
    return [_describe(times, a, b, zone) for a, b in out]


def _describe(times: pd.DatetimeIndex, a: int, b: int, zone) -> dict:
    t0, t1 = times[a].tz_convert(zone), times[b - 1].tz_convert(zone)
    return {"start": t0.isoformat(), "end": t1.isoformat(), "duration_h": round((t1 - t0).total_seconds() / 3600, 3),
            "fixes": int(b - a), "label": f"{t0:%Y-%m-%d %H:%M}–{t1:%H:%M}" + ("" if t0.date() == t1.date()
                                                                             else f" (+{(t1.date() - t0.date()).days} d)")
            + f" ({_dur(t1 - t0)}, {b - a} fixes)"}


def _dur(td: pd.Timedelta) -> str:
    s = td.total_seconds()
    if s >= 86400:
        return f"{s / 86400:.1f} d"
    if s >= 3600:
        return f"{s / 3600:.1f} h"
    return f"{s / 60:.0f} min"


def refuse_long_track(times: pd.DatetimeIndex, limits: dict, zone, where: str, manifest: str) -> None:
    """Raise with the candidate walks when the fixes are not one walk of at most ``max_walk_h``."""
    if len(times) < 2:
        return
    t = times.asi8
    groups = time_groups(t, limits["split_gap_h"] * 3600.0)
    span_h = (t[-1] - t[0]) / 3.6e12
    if len(groups) < 2 and span_h <= limits["max_walk_h"]:
        return
    walks = candidate_walks(times, limits, zone)
    walks_sorted = sorted(walks, key=lambda w: -w["fixes"])
    listed = "; ".join(w["label"] for w in walks_sorted[:MAX_LISTED])
    more = f"; and {len(walks) - MAX_LISTED} more" if len(walks) > MAX_LISTED else ""
    best = walks_sorted[0]
    why = (f"the track spans {_dur(times[-1] - times[0])}, more than one walk of at most {limits['max_walk_h']:g} h"
           if span_h > limits["max_walk_h"] else "the track holds fixes hours apart")
    raise InputError(f"{why}: {len(walks)} candidate walk(s): {listed}{more}", where=where,
                     fix=f'choose one walk with [session] start/end in {manifest}, e.g. start = '
                         f'"{best["start"][:19]}", end = "{best["end"][:19]}" (or raise [checks] max_walk_h / '
                         "split_gap_h if it really is one walk)")
