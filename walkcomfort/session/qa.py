"""Quality checks of one session, and the ``qa.json`` they produce.

Per source: rows read / used / quarantined (they reconcile), the reasons of the
quarantined rows, duplicates, out-of-order rows, values outside
:data:`walkcomfort.columns.PHYSICAL_RANGES`, gaps longer than the maximum gap,
coverage over the walk, GPS jumps, votes/frames outside the track's span, and the
clock-fit residuals. ``summary`` gathers the counts a reader looks at first;
the keys are documented in ``docs/formats/session-manifest.md``.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd

QA_SCHEMA = "walkcomfort-qa/1"

#: Walking is 1–2 m s⁻¹; running 3–6 m s⁻¹. An implied speed above this between two
#: fixes is a position jump, not movement (common practice for pedestrian GPS cleaning).
MAX_WALK_SPEED_MS = 8.0

_EARTH_R = 6_371_008.8  # mean Earth radius [m] (IUGG)


def haversine_m(lat1, lon1, lat2, lon2):
    """Great-circle distance [m] between points in degrees (spherical Earth, R = 6371.0088 km)."""
    p1, p2 = np.radians(lat1), np.radians(lat2)
    dphi = p2 - p1
    dl = np.radians(np.asarray(lon2) - np.asarray(lon1))
    h = np.sin(dphi / 2) ** 2 + np.cos(p1) * np.cos(p2) * np.sin(dl / 2) ** 2
    return 2 * _EARTH_R * np.arcsin(np.sqrt(np.clip(h, 0.0, 1.0)))


def find_gps_jumps(times: pd.DatetimeIndex, lat, lon, max_speed_ms: float = MAX_WALK_SPEED_MS,
                   max_run: int = 10) -> np.ndarray:
    """Fixes that imply a speed above ``max_speed_ms`` from the last accepted fix.

    A fix is a jump when reaching it from the last good fix would need more than
    ``max_speed_ms``; it is then skipped and the next fix is compared with the same
    good fix. After ``max_run`` consecutive jumps the track is taken to have really
    moved and the run is accepted from its start; the fixes accepted before it are
    then the outliers when there were fewer of them than ``max_run`` (a wrong first fix).

    Returns
    -------
    ndarray of bool
    """
    n = len(times)
    jump = np.zeros(n, dtype=bool)
    if n < 2:
        return jump
    t = pd.DatetimeIndex(times).as_unit("ns").asi8 / 1e9
    la = np.asarray(lat, float)
    lo = np.asarray(lon, float)
    # fast path: when no two consecutive fixes are too far apart there is no jump at all
    dt = np.diff(t)
    with np.errstate(divide="ignore", invalid="ignore"):
        v = haversine_m(la[:-1], lo[:-1], la[1:], lo[1:]) / dt
    if not np.any((dt > 0) & (v > max_speed_ms)):
        return jump
    good = 0
    segment = [0]            # fixes accepted since the start or the last re-anchoring
    run: list[int] = []
    i = 1
    while i < n:
        dt = t[i] - t[good]
        d = _hav(la[good], lo[good], la[i], lo[i])
        if dt > 0 and d / dt > max_speed_ms:
            jump[i] = True
            run.append(i)
            if len(run) >= max_run:
                # the track really is elsewhere: accept the run; if what came before it was
                # shorter than the run (e.g. a wrong first fix) it was the outlier
                for j in run:
                    jump[j] = False
                if len(segment) < max_run:
                    jump[segment] = True
                good = run[0]
                segment = [good]
                i = run[0] + 1
                run = []
                continue
        else:
            good = i
            segment.append(i)
            run = []
        i += 1
    return jump


def _hav(lat1: float, lon1: float, lat2: float, lon2: float) -> float:
    """Scalar great-circle distance [m] (math, for the sequential jump scan)."""
    p1, p2 = math.radians(lat1), math.radians(lat2)
    h = math.sin((p2 - p1) / 2) ** 2 + math.cos(p1) * math.cos(p2) * math.sin(math.radians(lon2 - lon1) / 2) ** 2
    return 2 * _EARTH_R * math.asin(math.sqrt(min(1.0, max(0.0, h))))


def gap_stats(times: pd.DatetimeIndex, max_gap_s: float, t0: pd.Timestamp, t1: pd.Timestamp) -> dict:
    """Gaps (intervals longer than ``max_gap_s``) between readings inside ``[t0, t1]``."""
    t = pd.DatetimeIndex(times).as_unit("ns").asi8
    a, b = pd.Timestamp(t0).as_unit("ns").value, pd.Timestamp(t1).as_unit("ns").value
    inside = t[(t >= a) & (t <= b)]
    out = {"gaps": 0, "gap_s_total": 0.0, "largest_gap_s": 0.0, "gap_starts": [],
           "leading_missing_s": None, "trailing_missing_s": None, "median_interval_s": None}
    if len(t) > 1:
        out["median_interval_s"] = round(float(np.median(np.diff(t))) / 1e9, 6)
    if len(inside) == 0:
        out["leading_missing_s"] = round((b - a) / 1e9, 3)
        out["trailing_missing_s"] = 0.0
        return out
    # readings just outside the window still bridge into it
    before = t[t < a]
    after = t[t > b]
    seq = np.concatenate([before[-1:], inside, after[:1]])
    d = np.diff(seq) / 1e9
    big = d > max_gap_s
    out["gaps"] = int(big.sum())
    out["gap_s_total"] = round(float(d[big].sum()), 3)
    out["largest_gap_s"] = round(float(d.max()) if d.size else 0.0, 3)
    out["gap_starts"] = [pd.Timestamp(int(x), unit="ns", tz="UTC").isoformat() for x in seq[:-1][big]]
    out["leading_missing_s"] = round(max(0.0, (inside[0] - a) / 1e9) if not len(before) else 0.0, 3)
    out["trailing_missing_s"] = round(max(0.0, (b - inside[-1]) / 1e9) if not len(after) else 0.0, 3)
    return out


def reason_counts(quarantine: pd.DataFrame, source: str) -> dict:
    sub = quarantine.loc[quarantine["source"] == source, "reason"]
    return {str(k): int(v) for k, v in sorted(sub.value_counts().items())}


def _count(reasons: dict, *prefixes: str) -> int:
    return int(sum(v for k, v in reasons.items() if any(k == p or k.startswith(p + ":") for p in prefixes)))


def summarize(qa: dict) -> dict:
    """The headline counts of a session's QA (what ``qa.json['summary']`` holds)."""
    src = qa["sources"]
    rs = {name: s["quarantine_reasons"] for name, s in src.items()}
    tot = lambda *p: int(sum(_count(r, *p) for r in rs.values()))  # noqa: E731
    clocks = qa.get("clocks", {})
    return {
        "rows_read": int(sum(s["rows_read"] for s in src.values())),
        "rows_used": int(sum(s["rows_used"] for s in src.values())),
        "rows_quarantined": int(sum(s["rows_quarantined"] for s in src.values())),
        "reconciles": bool(all(s["reconciles"] for s in src.values())),
        "clock_corrections": int(sum(1 for c in clocks.values() if c["method"] != "reference"
                                     and (c["offset_s"] != 0 or c["drift_ppm"] != 0))),
        "sync_events": int(len(qa.get("sync_events", []))),
        "max_clock_residual_s": float(max([c["residual_max_s"] for c in clocks.values()] or [0.0])),
        "gaps": int(sum(s.get("gaps", 0) for s in src.values())),
        "out_of_range_rows": tot("out_of_range"),
        "duplicate_rows": tot("duplicate_time"),
        "out_of_order_rows": int(sum(s.get("out_of_order", 0) for s in src.values())),
        "bad_lines": tot("bad_line"),
        "bad_values": tot("not_a_number", "bad_time", "bad_comfort", "bad_tsv", "bad_kind", "empty_vote",
                          "nonexistent_local_time", "ambiguous_local_time", "unreadable_image",
                          "no_exif_time", "name_does_not_match"),
        "points_without_time": tot("no_time"),
        "gps_jumps": tot("gps_jump"),
        "null_positions": tot("null_position"),
        "outside_walk_window_rows": tot("outside_walk_window"),
        "votes_outside_track": int(sum(_count(r, "outside_track_span") for n, r in rs.items()
                                       if src[n]["kind"] == "votes")),
        "frames_outside_track": int(sum(_count(r, "outside_track_span") for n, r in rs.items()
                                        if src[n]["kind"] == "frames")),
        "events_same_step": tot("same_step"),
        "other_participant_votes": tot("other_participant"),
    }


def source_entry(meta: dict, quarantine: pd.DataFrame, extra: dict | None = None) -> dict:
    """The ``qa.json['sources'][name]`` entry from a reader's metadata and the final quarantine."""
    name = meta["source"]
    reasons = reason_counts(quarantine, name)
    n_q = int(sum(reasons.values()))
    entry = {
        "kind": meta["kind"],
        "file": meta["file"],
        "device": meta["device"],
        "rows_read": int(meta["rows_read"]),
        "rows_used": int(meta["rows_used"]),
        "rows_quarantined": n_q,
        "reconciles": int(meta["rows_read"]) == int(meta["rows_used"]) + n_q,
        "quarantine_reasons": reasons,
        "duplicates": int(reasons.get("duplicate_time", 0)),
        "out_of_order": int(meta.get("out_of_order", 0)),
        "out_of_range": _count(reasons, "out_of_range"),
    }
    if extra:
        entry.update(extra)
    return entry
