"""Planned routes on the map: one compact payload per scheme × departure, with the difference from the base.

The page shows exactly one scheme × departure at a time, coloured one way at a time:
by predicted comfort class, UTCI band, shade, or the difference from the base scene at
the same departure (the simulated walk is the same for every scheme, so a point of a
scheme and the base point at the same route and time are the same place and moment).

Difference classes
------------------
Per point, for three measures, each signed so that positive means better for the walker:

- ``comfort``: the change in the probability of *comfortable* [percentage points] — the
  point's share of the change in expected comfortable minutes;
- ``heat``: the change in the heat-dose rate max(UTCI − 26 °C, 0) [°C] (heat dose per
  minute walked at that point);
- ``utci``: the change in UTCI [°C].

A point whose change is smaller than the measure's threshold is "within model error" (or
"no change" when no model interval is known). For ``comfort`` the threshold comes from the
comparison's interval on the whole walk: a walk of W minutes whose change in expected
comfortable minutes has an interval of half-width h cannot tell apart a per-point change
in probability below h / W, even if it held over the whole walk. Without an interval the
threshold is :data:`NO_CHANGE` (a stated rounding threshold, not a model error).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.errors import InputError
from walkcomfort.model.heldout_error import PROBA, class_index
from walkcomfort.report.map import geometry as G
from walkcomfort.report.map.inputs import (
    DEPARTURE,
    PREDICTOR,
    REASONS,
    ROUTE_ID,
    SCHEME,
    bands,
    col,
    local_times,
    num,
    shade_bins,
)

BASE = "base"
METRICS = ("comfort", "heat", "utci")
#: Change below which a point counts as unchanged when no model interval is known.
NO_CHANGE = {"comfort": 2.0, "heat": 0.5, "utci": 0.5}
#: Whole-walk interval columns of the comparison table (scheme − base), one per measure.
INTERVAL_OF = {"comfort": "delta_exp_min_comfortable", "heat": "delta_heat_dose_cmin", "utci": "delta_peak_utci_c"}
HEAT_DOSE_FROM_C = 26.0  # UTCI above which heat dose accrues [°C] (routes.compare's definition)
SUMMARY_FIELDS = ("walk_min", "length_m", "exp_min_comfortable", "exp_share_comfortable", "exp_share_neutral",
                  "exp_share_uncomfortable", "shade_share", "mean_utci_c", "peak_utci_c", "heat_dose_cmin")


@dataclass
class Walk:
    """One scheme × departure, sorted along its route(s), before simplification."""

    scheme: str
    dep_ns: int
    frame: pd.DataFrame
    diff: dict = field(default_factory=dict)      # metric -> per-point change (better > 0)
    diff_cls: dict = field(default_factory=dict)  # metric -> per-point class 0..4


def sort_walk(group: pd.DataFrame) -> pd.DataFrame:
    """Rows in route order: by route, distance along it, then time."""
    group = group.copy()
    group.index = group.index.rename(C.TIME)
    codes = (pd.factorize(group[ROUTE_ID].astype(object))[0] if ROUTE_ID in group.columns
             else np.zeros(len(group), dtype=int))
    group["_route"] = codes
    order = ["_route"] + ([C.DIST_M] if C.DIST_M in group.columns else [])
    return group.reset_index().sort_values(order + [C.TIME], kind="stable").set_index(C.TIME)


def _heat_rate(frame: pd.DataFrame) -> np.ndarray:
    return np.maximum(col(frame, C.UTCI_C) - HEAT_DOSE_FROM_C, 0.0)


def point_changes(walk: pd.DataFrame, base: pd.DataFrame) -> dict[str, np.ndarray]:
    """Per-point change against the base walk at the same route and time (better > 0; NaN unmatched)."""
    key = [ROUTE_ID] if ROUTE_ID in walk.columns else []
    b = base.reset_index().drop_duplicates(key + [C.TIME]).set_index(key + [C.TIME])
    at = pd.MultiIndex.from_arrays([walk[k] for k in key] + [walk.index]) if key else walk.index
    b = b.reindex(at)
    return {
        "comfort": 100.0 * (col(walk, PROBA[0]) - col(b, PROBA[0])),
        "heat": -(_heat_rate(walk) - _heat_rate(b)),
        "utci": -(col(walk, C.UTCI_C) - col(b, C.UTCI_C)),
    }


def change_classes(values: np.ndarray, none_below: float, strong_above: float) -> np.ndarray:
    """Five classes of a signed change (better > 0): 0 much worse … 2 none/within error … 4 much better; -1 NaN."""
    v = np.asarray(values, dtype=float)
    out = np.full(len(v), -1, dtype=int)
    ok = np.isfinite(v)
    a = np.abs(v)
    out[ok] = 2
    out[ok & (v > 0) & (a >= none_below)] = 3
    out[ok & (v > 0) & (a >= strong_above)] = 4
    out[ok & (v < 0) & (a >= none_below)] = 1
    out[ok & (v < 0) & (a >= strong_above)] = 0
    return out


def comfort_threshold(comparison: pd.DataFrame | None, summaries: pd.DataFrame | None) -> tuple[float, bool]:
    """Per-point threshold of the comfort change [percentage points] and whether it is a model interval.

    The largest h / W over the comparison's walks (h: half-width of the interval of the
    change in expected comfortable minutes; W: walk minutes), so no point is called a
    change that a walk's interval could not resolve.
    """
    lo, hi = f"{INTERVAL_OF['comfort']}_lo", f"{INTERVAL_OF['comfort']}_hi"
    if comparison is None or not {lo, hi, "walk_min"} <= set(comparison.columns):
        return NO_CHANGE["comfort"], False
    half = (comparison[hi].to_numpy(float) - comparison[lo].to_numpy(float)) / 2.0
    per_min = half / comparison["walk_min"].to_numpy(float)
    per_min = per_min[np.isfinite(per_min)]
    if not len(per_min):
        return NO_CHANGE["comfort"], False
    return float(100.0 * per_min.max()), True


def classify_changes(walks: list[Walk], comfort_thr: float) -> dict[str, dict]:
    """Fill each walk's ``diff_cls``; returns the scale of each measure (shared by all walks)."""
    scales = {}
    for m in METRICS:
        none_below = comfort_thr if m == "comfort" else NO_CHANGE[m]
        every = np.concatenate([w.diff[m] for w in walks if m in w.diff] or [np.zeros(0)])
        every = np.abs(every[np.isfinite(every)])
        biggest = float(every.max()) if len(every) else 0.0
        changed = every[every >= none_below]
        # half of the changed points fall in the "by far" classes: a scale set by the bulk, not one outlier
        strong = max(2.0 * none_below, float(np.median(changed)) if len(changed) else 0.0)
        scales[m] = {"none": round(none_below, 2), "strong": round(strong, 2), "max": round(biggest, 2)}
        for w in walks:
            if m in w.diff:
                w.diff_cls[m] = change_classes(w.diff[m], none_below, strong)
    return scales


def _simplified(frame: pd.DataFrame, keys: list[np.ndarray], simplify_m: float) -> np.ndarray:
    """Which rows to keep: every colour change of any colouring, plus the RDP-simplified line."""
    route = frame["_route"].to_numpy()
    if C.X_M in frame.columns and C.Y_M in frame.columns and frame[[C.X_M, C.Y_M]].notna().all().all():
        x, y = frame[C.X_M].to_numpy(float), frame[C.Y_M].to_numpy(float)
    else:
        lf = G.local_frame(frame[C.LON].mean(), frame[C.LAT].mean())
        x, y = (np.asarray(v, dtype=float) for v in lf.project(frame[C.LON].to_numpy(float),
                                                               frame[C.LAT].to_numpy(float)))
    n = len(frame)
    keep = np.zeros(n, dtype=bool)
    starts = np.r_[0, np.flatnonzero(route[1:] != route[:-1]) + 1, n]
    for a, b in zip(starts[:-1], starts[1:], strict=True):
        forced = np.zeros(b - a, dtype=bool)
        for key in keys:
            change = np.flatnonzero(key[a:b][1:] != key[a:b][:-1])
            forced[change] = True       # last point of a run
            forced[change + 1] = True   # first point of the next
        keep[a:b] = G.rdp_keep(x[a:b], y[a:b], simplify_m, forced)
    return keep


def route_payload(walk: Walk, zone, decimals: int, simplify_m: float, index: str = "utci") -> dict:
    """Columnar data of one scheme × departure (JSON-able; NaN as null).

    ``index="pet"``: the band colouring and the index value are PET's (``pet_c``).
    """
    from walkcomfort.report.map.inputs import pet_classes

    g0 = walk.frame
    cls, band = class_index(g0), (pet_classes(g0) if index == "pet" else bands(g0))
    shade = col(g0, C.SHADE_FRAC)
    sbin = shade_bins(shade)
    keep = _simplified(g0, [cls, band, sbin, *walk.diff_cls.values()], simplify_m)
    g = g0[keep]
    kept_routes, route_ids = pd.factorize(g["_route"].to_numpy())
    names = pd.factorize(g0[ROUTE_ID].astype(object))[1] if ROUTE_ID in g0.columns else np.array([""], dtype=object)
    if REASONS in g.columns:
        reason_codes, reason_list = pd.factorize(g[REASONS].astype(object), use_na_sentinel=True)
        reason_list, reason_codes = [str(v) for v in reason_list], reason_codes.tolist()
    else:
        reason_codes, reason_list = [-1] * len(g), []
    return {
        "routes": [("" if pd.isna(names[c]) else str(names[c])) for c in route_ids],
        "predictors": sorted({str(v) for v in g[PREDICTOR].dropna()}) if PREDICTOR in g.columns else [],
        "n_points": len(g0),
        "lat": num(g[C.LAT], decimals), "lon": num(g[C.LON], decimals),
        "route": kept_routes.tolist(),
        "t": local_times(g.index, zone, "%H:%M"),
        "dist": num(col(g, C.DIST_M), 0),
        "cls": cls[keep].tolist(), "band": band[keep].tolist(), "sbin": sbin[keep].tolist(),
        "p": [num(col(g, p), 2) for p in PROBA],
        "utci": num(col(g, C.UTCI_C), 1), "tmrt": num(col(g, C.TMRT_C), 1), "tair": num(col(g, C.T_AIR_C), 1),
        **({"pet": num(col(g, "pet_c"), 1)} if index == "pet" else {}),
        "shade": num(shade[keep], 2),
        "reasons": reason_list, "r": reason_codes,
        "d": {m: num(v[keep], 2) for m, v in walk.diff.items()},
        "dk": {m: v[keep].tolist() for m, v in walk.diff_cls.items()},
    }


def summary_lookup(summaries: pd.DataFrame | None, comparison: pd.DataFrame | None):
    """(route_id, scheme, departure ns) -> whole-walk figures (and the change against the base with its interval)."""
    table: dict = {}
    for frame, fields, what in ((summaries, SUMMARY_FIELDS, "route summaries"), (comparison, None, "comparison")):
        if frame is None or not len(frame):
            continue
        missing = [c for c in (ROUTE_ID, SCHEME, DEPARTURE) if c not in frame.columns]
        if missing:
            raise InputError(f"the {what} lack column(s) {', '.join(missing)}", where=what,
                             fix="pass the tables of walkcomfort.routes (summary.parquet, comparison.csv)")
        deps = pd.to_datetime(frame[DEPARTURE], utc=True).dt.tz_convert(None).to_numpy("datetime64[ns]").astype("int64")
        names = list(fields) if fields else [c for c in frame.columns if c.startswith("delta_")]
        flags = "within_model_error" in frame.columns
        for i, key in enumerate(zip(frame[ROUTE_ID].astype(str), frame[SCHEME].astype(str), deps.tolist(), strict=True)):
            row = frame.iloc[i]
            entry = table.setdefault(key, {})
            entry.update({k: num([row[k]], 3)[0] for k in names if k in frame.columns})
            if flags and not fields:
                entry["within_model_error"] = bool(row["within_model_error"]) if pd.notna(row["within_model_error"]) else None
    return lambda route, scheme, dep: table.get((str(route), str(scheme), int(dep)))


def opening_view(walks: list[Walk]) -> dict:
    """The most informative view to open on: the hottest departure, the scheme that helps most there.

    Hottest: the largest mean UTCI of the base (or of every scheme without a base).
    Helps most: the largest sum over the walk of the change in comfortable probability ×
    the seconds each point stands for (expected comfortable minutes gained).
    """
    base = [w for w in walks if w.scheme == BASE] or walks
    heat = {}
    for w in base:
        u = col(w.frame, C.UTCI_C)
        heat[w.dep_ns] = float(np.nanmean(u)) if np.isfinite(u).any() else -math.inf
    hottest = max(heat, key=lambda k: (heat[k], -k)) if heat else None
    gains = {}
    for w in walks:
        if w.dep_ns == hottest and "comfort" in w.diff:
            step = col(w.frame, "step_s", default=1.0)
            gains[w.scheme] = float(np.nansum(w.diff["comfort"] / 100.0 * step) / 60.0)
    if gains:
        best = max(gains, key=lambda s: (gains[s], s))
        return {"scheme": best, "dep": hottest, "colouring": "difference", "metric": "comfort",
                "gain_min": round(gains[best], 2)}
    first = base[0].scheme if base else None
    return {"scheme": first, "dep": hottest, "colouring": "comfort", "metric": "comfort", "gain_min": None}
