"""Route summaries, schemes side by side, best departure, and what each scheme buys.

A summary row stands for one walk: one ``route_id × scheme × departure``. Time
spent in each comfort class is given two ways:

* **expected minutes** — Σ pᵢ·Δtᵢ over the walk's points, from the class
  probabilities (Δt is the ``step_s`` each point stands for); they sum to the walk
  time and carry the model's uncertainty;
* **arg-max minutes** — the time whose most probable class is that class.

Shade share is the time share of the walk with at least half of the direct beam
blocked while the sun is up (``shade_frac`` ≥ 0.5, the state threshold the features
use). Heat dose is the time integral of UTCI above 26 °C (the upper edge of "no
thermal stress", Bröde et al. 2012, doi:10.1007/s00484-011-0454-1) [°C·min].
UTCI statistics are time-weighted.

Every difference to the base carries an interval (``delta_<col>_lo``, ``delta_<col>_hi``):
the same walks are predicted by each fold model of the bundle (each fitted without some
walkers), the difference is recomputed with each, and the delete-a-group jackknife turns
their spread into a 95 % interval (:mod:`walkcomfort.model.uncertainty`).
``within_model_error`` is True when the interval of ``delta_exp_min_comfortable`` includes
0: the scheme's effect on comfortable minutes is then not distinguishable from the model's
error. Differences that do not depend on the model (shade, UTCI, Tmrt, heat dose) get a
zero-width interval; without fold models (the physics rule, or an older bundle) the bounds
are NaN and the flag is missing (<NA>).

These are planning estimates from a model, not a safety assessment: heat-health
decisions follow local public-health and occupational guidance.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.errors import InputError
from walkcomfort.model.uncertainty import includes_zero, jackknife_interval
from walkcomfort.routes.geometry import Route
from walkcomfort.routes.predict import COMFORT_CLASS, PREDICTOR, PROBA, Predictor, predict_route_folds
from walkcomfort.routes.schemes import BASE, Scheme, scheme_inventory
from walkcomfort.routes.simulate import DEPARTURE, ROUTE_ID, SCHEME, STEP_S, simulate_timeline
from walkcomfort.routes.timing import DEFAULT_FLAT_SPEED_MS
from walkcomfort.routes.weather import WeatherSource

# model features that come from the walker (stated with --walker), not from sensors
_WALKER_FEATURES = frozenset({C.CLO, C.ACCLIMATISED, "age_band_lower"})

#: Heat-dose threshold [°C]: the upper bound of the UTCI band "no thermal stress".
DOSE_THRESHOLD_C = 26.0
#: A point is "in shade" when at least this share of the direct beam is blocked [-].
SHADE_STATE_FRAC = 0.5
KEYS = [ROUTE_ID, SCHEME, DEPARTURE]
#: Columns compared against the base scheme (difference = scheme − base).
DELTA_COLUMNS = ("exp_min_comfortable", "exp_min_neutral", "exp_min_uncomfortable", "exp_share_comfortable",
                 "argmax_min_comfortable", "shade_share", "mean_utci_c", "peak_utci_c", "heat_dose_cmin",
                 "mean_tmrt_c")

CAUTION = ("Planning estimates from a model and a simulated walk, not a heat-safety assessment; follow local "
           "public-health heat guidance, occupational-health rules and licensed design practice.")


def summarise(points: pd.DataFrame) -> pd.DataFrame:
    """One summary row per ``route_id × scheme × departure`` of a per-point table.

    Returns
    -------
    DataFrame
        Columns ``route_id, scheme, departure, arrival, walk_min, length_m, predictor,
        exp_min_<class>, exp_share_<class>, argmax_min_<class>, argmax_share_<class>,
        shade_share, mean_utci_c, peak_utci_c, mean_tmrt_c, heat_dose_cmin, points_n``.
        Minutes [min], shares [-], UTCI/Tmrt [°C], heat dose [°C·min].
    """
    need = [*KEYS, STEP_S, C.UTCI_C, C.SHADE_FRAC, *PROBA.values(), COMFORT_CLASS]
    missing = [c for c in need if c not in points.columns]
    if missing:
        raise InputError(f"the per-point table lacks columns {missing}", fix="give a table from predict_route")
    df = points
    dt = df[STEP_S].to_numpy(float)
    # one integer code per walk (route, scheme, departure): grouping on codes is much
    # faster than on tz-aware timestamps held as objects
    codes = [pd.factorize(df[k], sort=True) for k in KEYS]
    sizes = [len(u) for _, u in codes]
    code = np.ravel_multi_index(tuple(c for c, _ in codes), sizes) if len(df) else np.zeros(0, int)
    w = pd.DataFrame({"code": code})
    w["dt"] = dt
    w["t"] = df.index.as_unit("ns").asi8
    for c in C.COMFORT_CLASSES:
        w[f"e_{c}"] = df[PROBA[c]].to_numpy(float) * dt
        w[f"a_{c}"] = (df[COMFORT_CLASS].to_numpy() == c) * dt
    sun_up = df[C.SUN_ELEV_DEG].to_numpy(float) > 0 if C.SUN_ELEV_DEG in df.columns else np.ones(len(df), bool)
    shade = np.nan_to_num(df[C.SHADE_FRAC].to_numpy(float), nan=0.0)
    w["shade"] = ((shade >= SHADE_STATE_FRAC) & sun_up) * dt
    w["sun_up"] = sun_up * dt
    u = df[C.UTCI_C].to_numpy(float)
    w["u_dt"] = u * dt
    w["u"] = u
    w["dose"] = np.clip(u - DOSE_THRESHOLD_C, 0.0, None) * dt / 60.0
    w["tmrt_dt"] = (df[C.TMRT_C].to_numpy(float) * dt) if C.TMRT_C in df.columns else np.nan
    w["dist"] = df[C.DIST_M].to_numpy(float) if C.DIST_M in df.columns else np.nan
    w["pred"] = df[PREDICTOR].to_numpy() if PREDICTOR in df.columns else ""
    g = w.groupby("code", sort=True)
    out = pd.DataFrame({"arrival": pd.DatetimeIndex(g["t"].max().to_numpy().astype("datetime64[ns]")
                                                    ).tz_localize("UTC"),
                        "walk_min": (g["dt"].sum() / 60.0).to_numpy(), "length_m": g["dist"].max().to_numpy(),
                        "predictor": g["pred"].first().to_numpy()}, index=g["dt"].sum().index)
    total = g["dt"].sum()
    for c in C.COMFORT_CLASSES:
        out[f"exp_min_{c}"] = g[f"e_{c}"].sum() / 60.0
    for c in C.COMFORT_CLASSES:
        out[f"exp_share_{c}"] = g[f"e_{c}"].sum() / total
    for c in C.COMFORT_CLASSES:
        out[f"argmax_min_{c}"] = g[f"a_{c}"].sum() / 60.0
    for c in C.COMFORT_CLASSES:
        out[f"argmax_share_{c}"] = g[f"a_{c}"].sum() / total
    sun_t = g["sun_up"].sum()
    out["sun_up_share"] = sun_t / total
    out["shade_share"] = (g["shade"].sum() / sun_t).where(sun_t > 0, 0.0)
    out["mean_utci_c"] = g["u_dt"].sum() / total
    out["peak_utci_c"] = g["u"].max()
    out["mean_tmrt_c"] = g["tmrt_dt"].sum() / total
    out["heat_dose_cmin"] = g["dose"].sum()
    out["points_n"] = g["dt"].size()
    idx = np.unravel_index(out.index.to_numpy(), sizes)
    keys = pd.DataFrame({k: u.take(i) for k, (_, u), i in zip(KEYS, codes, idx, strict=False)})
    return pd.concat([keys, out.reset_index(drop=True)], axis=1)


#: The flag column: the interval of ``delta_exp_min_comfortable`` includes 0.
WITHIN_MODEL_ERROR = "within_model_error"
#: Two-sided coverage of the intervals on differences.
INTERVAL_LEVEL = 0.95


def delta_interval(delta, fold_deltas, level: float = INTERVAL_LEVEL) -> tuple[np.ndarray, np.ndarray]:
    """Interval of a difference from its fold-model replicates (public: the street-network batch uses it).

    Parameters
    ----------
    delta : array-like
        Differences (scheme − base) computed with the bundle's model, any shape ``S``
        (per walk, per segment × hour, …).
    fold_deltas : array-like
        The same differences computed with each fold model, shape ``(K, *S)``: predict the
        same points with :meth:`Predictor.predict_folds`, aggregate each fold's probabilities
        exactly as the model's, subtract the base's.
    level : float
        Two-sided coverage (default 95 %).

    Returns
    -------
    (lo, hi) : ndarray
        Shape ``S`` (delete-a-group jackknife, :func:`walkcomfort.model.uncertainty.jackknife_interval`);
        NaN without at least 2 replicates. ``includes_zero(lo, hi)`` gives the "within model
        error" flag.
    """
    return jackknife_interval(delta, fold_deltas, level)


def within_model_error(lo, hi) -> pd.array:
    """Nullable boolean: True where [lo, hi] includes 0, <NA> where there is no interval."""
    flag = includes_zero(lo, hi)
    return pd.array([pd.NA if np.isnan(f) else bool(f) for f in np.atleast_1d(flag)], dtype="boolean")


def compare_to_base(summary: pd.DataFrame, base: str = BASE, fold_summaries=None,
                    level: float = INTERVAL_LEVEL) -> pd.DataFrame:
    """Each scheme's summary beside the base at the same route and departure, with differences and intervals.

    Parameters
    ----------
    summary : DataFrame
        From :func:`summarise`.
    base : str
        The scheme the others are compared with.
    fold_summaries : list of DataFrame, optional
        :func:`summarise` of the same points with each fold model's probabilities
        (:func:`fold_summaries`); gives the intervals.
    level : float
        Coverage of the intervals.

    Returns
    -------
    DataFrame
        The summary rows of the non-base schemes plus ``base_<col>``, ``delta_<col>``
        (scheme − base), ``delta_<col>_lo`` and ``delta_<col>_hi`` for :data:`DELTA_COLUMNS`,
        and ``within_model_error`` (nullable boolean).
    """
    if base not in set(summary[SCHEME]):
        raise InputError(f"no '{base}' rows to compare against", fix="include the base scene in the comparison")
    others = summary[summary[SCHEME] != base].copy()
    if others.empty:
        return others
    folds = list(fold_summaries or [])
    for col in DELTA_COLUMNS:
        base_vals, delta = _delta(summary, others, col, base)
        others[f"base_{col}"] = base_vals
        others[f"delta_{col}"] = delta
        reps = np.array([_delta(f, others, col, base)[1] for f in folds]) if folds else np.zeros((0, len(others)))
        lo, hi = delta_interval(delta, reps, level)
        others[f"delta_{col}_lo"] = lo
        others[f"delta_{col}_hi"] = hi
    others[WITHIN_MODEL_ERROR] = within_model_error(others["delta_exp_min_comfortable_lo"].to_numpy(float),
                                                    others["delta_exp_min_comfortable_hi"].to_numpy(float))
    return others.reset_index(drop=True)


def _delta(summary: pd.DataFrame, rows: pd.DataFrame, col: str, base: str) -> tuple[np.ndarray, np.ndarray]:
    """(base value, scheme − base) of ``col`` for ``rows``' keys, looked up in ``summary``."""
    idx = summary.set_index([ROUTE_ID, SCHEME, DEPARTURE])[col]
    keys = pd.MultiIndex.from_arrays([rows[ROUTE_ID], rows[SCHEME], rows[DEPARTURE]])
    base_keys = pd.MultiIndex.from_arrays([rows[ROUTE_ID], np.full(len(rows), base, dtype=object), rows[DEPARTURE]])
    base_vals = idx.reindex(base_keys).to_numpy(float)
    return base_vals, idx.reindex(keys).to_numpy(float) - base_vals


def fold_summaries(points: pd.DataFrame, fold_proba) -> list[pd.DataFrame]:
    """:func:`summarise` of ``points`` once per fold model, with that model's probabilities.

    ``fold_proba`` is (folds, rows, 3) in ``points``' row order and class order
    ``comfortable, neutral, uncomfortable``; the class of a row is that model's most probable one.
    """
    if fold_proba is None or len(fold_proba) < 2:
        return []
    need = [*KEYS, STEP_S, C.UTCI_C, C.SHADE_FRAC, *(c for c in (C.SUN_ELEV_DEG, C.TMRT_C, C.DIST_M, PREDICTOR)
                                                     if c in points.columns)]
    base = points[need].copy()
    out = []
    classes = np.array(C.COMFORT_CLASSES, dtype=object)
    for p in fold_proba:
        f = base.copy()
        for j, c in enumerate(C.COMFORT_CLASSES):
            f[PROBA[c]] = p[:, j]
        f[COMFORT_CLASS] = classes[np.argmax(p, axis=1)]
        out.append(summarise(f))
    return out


#: Length of the route sections in :func:`along_route` [m].
SECTION_M = 50.0


def along_route(points: pd.DataFrame, section_m: float = SECTION_M, base: str = BASE) -> pd.DataFrame:
    """Where along the route each scheme helps: sections of ``section_m``, averaged over departures.

    Returns
    -------
    DataFrame
        One row per ``route_id × scheme × section``: ``from_m, to_m`` [m], the
        time-weighted ``mean_utci_c`` [°C], ``shade_share`` [-] (sun up) and
        ``exp_share_comfortable`` [-] over all departures, and ``delta_<col>`` against the
        base (NaN when there is no base).
    """
    if not section_m > 0:
        raise InputError(f"section length {section_m!r} m is not positive", fix="give e.g. 50 m")
    df = points
    dt = df[STEP_S].to_numpy(float)
    sun_up = df[C.SUN_ELEV_DEG].to_numpy(float) > 0 if C.SUN_ELEV_DEG in df.columns else np.ones(len(df), bool)
    shade = (np.nan_to_num(df[C.SHADE_FRAC].to_numpy(float)) >= SHADE_STATE_FRAC) & sun_up
    sec = np.floor(df[C.DIST_M].to_numpy(float) / section_m).astype(int)
    w = pd.DataFrame({ROUTE_ID: df[ROUTE_ID].to_numpy(), SCHEME: df[SCHEME].to_numpy(), "section": sec, "dt": dt,
                      "u": df[C.UTCI_C].to_numpy(float) * dt, "sh": shade * dt, "up": sun_up * dt,
                      "pc": df[PROBA["comfortable"]].to_numpy(float) * dt})
    g = w.groupby([ROUTE_ID, SCHEME, "section"], sort=True)
    total = g["dt"].sum()
    up = g["up"].sum()
    out = pd.DataFrame({"mean_utci_c": g["u"].sum() / total,
                        "shade_share": (g["sh"].sum() / up).where(up > 0, 0.0),
                        "exp_share_comfortable": g["pc"].sum() / total}).reset_index()
    out.insert(3, "from_m", out["section"] * section_m)
    length = df.groupby(ROUTE_ID)[C.DIST_M].max()
    out.insert(4, "to_m", np.minimum((out["section"] + 1) * section_m, length.reindex(out[ROUTE_ID]).to_numpy()))
    b = out[out[SCHEME] == base].set_index([ROUTE_ID, "section"])
    key = pd.MultiIndex.from_frame(out[[ROUTE_ID, "section"]])
    for col in ("mean_utci_c", "shade_share", "exp_share_comfortable"):
        out[f"delta_{col}"] = out[col].to_numpy() - (b[col].reindex(key).to_numpy(float) if len(b) else np.nan)
    return out.drop(columns="section")


def best_departures(summary: pd.DataFrame) -> pd.DataFrame:
    """The best departure of each route × scheme in a sweep.

    Best = the most expected comfortable share; ties go to the lower heat dose, then
    the earlier departure.
    """
    s = summary.sort_values([ROUTE_ID, SCHEME, "exp_share_comfortable", "heat_dose_cmin", DEPARTURE],
                            ascending=[True, True, False, True, True], kind="stable")
    best = s.groupby([ROUTE_ID, SCHEME], sort=True).head(1)
    cols = [ROUTE_ID, SCHEME, DEPARTURE, "walk_min", "exp_min_comfortable", "exp_share_comfortable",
            "mean_utci_c", "heat_dose_cmin"]
    n = summary.groupby([ROUTE_ID, SCHEME]).size().rename("departures_n")
    return best[cols].merge(n.reset_index(), on=[ROUTE_ID, SCHEME]).reset_index(drop=True)


def cost_effectiveness(comparison: pd.DataFrame, inventories: dict[str, dict]) -> pd.DataFrame:
    """Comfortable minutes gained per tree and per 100 m² of added shade, per scheme.

    Parameters
    ----------
    comparison : DataFrame
        From :func:`compare_to_base`.
    inventories : dict
        ``{scheme: scheme_inventory(...)}``.

    Returns
    -------
    DataFrame
        One row per route × scheme: what the scheme adds (``trees_added``,
        ``crown_m2_added``, ``canopy_m2_added``, ``shade_m2_added``), the mean over
        departures of the expected comfortable minutes gained per walk
        (``gain_comfortable_min``), of the heat dose avoided and of the UTCI change,
        and the gain per tree added and per 100 m² of shade added (NaN where nothing
        of that kind was added).
    """
    rows = []
    if comparison.empty:
        return pd.DataFrame(rows)
    for (rid, sch), g in comparison.groupby([ROUTE_ID, SCHEME], sort=True):
        inv = inventories.get(sch, {})
        gain = float(g["delta_exp_min_comfortable"].mean())
        trees = inv.get("trees_added", 0) - inv.get("trees_removed", 0)
        shade_m2 = float(inv.get("shade_m2_added", 0.0))
        rows.append({ROUTE_ID: rid, SCHEME: sch, "departures_n": len(g),
                     "trees_added": inv.get("trees_added", 0), "trees_removed": inv.get("trees_removed", 0),
                     "crown_m2_added": inv.get("crown_m2_added", 0.0),
                     "canopy_m2_added": inv.get("canopy_m2_added", 0.0), "shade_m2_added": shade_m2,
                     "modified_n": inv.get("modified_n", 0), "removed_n": inv.get("removed_n", 0),
                     "gain_comfortable_min": gain,
                     "heat_dose_avoided_cmin": float(-g["delta_heat_dose_cmin"].mean()),
                     "delta_mean_utci_c": float(g["delta_mean_utci_c"].mean()),
                     "delta_shade_share": float(g["delta_shade_share"].mean()),
                     "gain_min_per_tree": gain / trees if trees > 0 else np.nan,
                     "gain_min_per_100m2_shade": gain / (shade_m2 / 100.0) if shade_m2 > 0 else np.nan})
    return pd.DataFrame(rows)


@dataclass
class Comparison:
    """Everything a scheme comparison produces (all DataFrames).

    Attributes
    ----------
    points : per-point prediction table, all schemes stacked
    summary : one row per route × scheme × departure
    comparison : non-base schemes against the base, with differences
    best : best departure per route × scheme
    cost : cost-effectiveness per route × scheme
    along : sections of the route, each scheme against the base
    inventories : what each scheme adds (dict per scheme)
    notices : things to tell the user
    """

    points: pd.DataFrame
    summary: pd.DataFrame
    comparison: pd.DataFrame
    best: pd.DataFrame
    cost: pd.DataFrame
    along: pd.DataFrame = field(default_factory=pd.DataFrame)
    inventories: dict = field(default_factory=dict)
    notices: list = field(default_factory=list)


def compare_schemes(route: Route, schemes, departures, weather: WeatherSource, scene=None,
                    predictor: Predictor | None = None, include_base: bool = True,
                    flat_speed_ms: float = DEFAULT_FLAT_SPEED_MS, timezone: str | None = None,
                    walker: dict | None = None, explain: bool = True, intervals: bool = True,
                    **env_kw) -> Comparison:
    """Predict one route under several schemes and compare them with the base scene.

    The walk (positions, times, weather) is simulated once and reused for every
    scheme, so differences come from the scene alone.

    Parameters
    ----------
    route, departures, weather, scene, predictor, flat_speed_ms, timezone, walker, explain
        As :func:`~walkcomfort.routes.predict.predict_route`.
    schemes : iterable of Scheme
        The schemes; their names must be unique.
    include_base : bool, default True
        Add the base scene (needed for differences).
    intervals : bool, default True
        Predict with the bundle's fold models too, for the intervals on differences.

    Returns
    -------
    Comparison
    """
    schemes = list(schemes)
    names = [s.name for s in schemes]
    dup = sorted({n for n in names if names.count(n) > 1})
    if dup:
        raise InputError(f"scheme names {dup} appear twice", fix="give each scheme its own name")
    if (include_base and BASE not in names) or not schemes:
        schemes = [Scheme.base(), *schemes]
    predictor = predictor or Predictor(None)
    timeline = simulate_timeline(route, departures, weather, flat_speed_ms=flat_speed_ms, timezone=timezone,
                                 walker=walker)
    tables = []
    fold_parts = []
    inventories = {}
    for s in schemes:
        table, fold_proba = predict_route_folds(route, None, weather, scene=scene, scheme=s, predictor=predictor,
                                                explain=explain, timeline=timeline, folds=intervals, **env_kw)
        tables.append(table)
        fold_parts.append(fold_proba)
        inventories[s.name] = scheme_inventory(scene, s) if scene is not None else scheme_inventory_empty()
    notices = _scene_coverage_notices(route, scene)
    if predictor.is_model:
        gone = predictor.unavailable_features(tables[0])
        # participant attributes can be stated (--walker); sensor features cannot exist on a simulated walk
        walker = [g for g in gone if g in _WALKER_FEATURES]
        sensors = [g for g in gone if g not in _WALKER_FEATURES]
        if walker:
            notices.append(f"the model uses walker attributes that were not given ({', '.join(walker)}); they are "
                           "missing on every point, so the model relies on its missing-value branches there — "
                           "state them with --walker, e.g. 'clo=0.5,acclimatised=1,age_band=25-34'")
        if sensors:
            notices.append(f"the model uses {len(sensors)} features a planned walk cannot supply (no sound meter, light "
                           f"meter or camera on a simulated walk: {', '.join(sensors[:6])}"
                           f"{' …' if len(sensors) > 6 else ''}); they are missing on every point, so the model relies "
                           "on its missing-value branches there — prefer a model fitted with `walkcomfort fit "
                           "--feature-set planned`")
    points = pd.concat(tables)
    points.attrs = dict(tables[0].attrs)
    points.attrs["scheme"] = [s.name for s in schemes]
    summary = summarise(points)
    folds = []
    if fold_parts and all(f is not None for f in fold_parts):
        folds = fold_summaries(points, np.concatenate(fold_parts, axis=1))
    elif intervals and predictor.is_model:
        notices.append("the model bundle carries no fold models, so scheme differences have no interval; re-fit it "
                       "with this walkcomfort version (`walkcomfort fit`) to get them")
    comparison = compare_to_base(summary, fold_summaries=folds) if BASE in set(summary[SCHEME]) \
        else summary.iloc[0:0]
    best = best_departures(summary)
    cost = cost_effectiveness(comparison, inventories)
    points.attrs["notices"] = list(points.attrs.get("notices", [])) + notices
    return Comparison(points, summary, comparison, best, cost, along_route(points), inventories,
                      list(points.attrs["notices"]))


def _scene_coverage_notices(route: Route, scene, margin_m: float = 50.0) -> list[str]:
    """A notice when (part of) the route lies outside the scene's extent: no obstacles there."""
    if scene is None or len(scene) == 0:
        return ["no scene (or an empty one): the route is walked over open ground, no shade and sky view 1"]
    from walkcomfort.environment.coverage import check_scene_coverage

    note = check_scene_coverage(scene, route.points[C.LON], route.points[C.LAT], "the route", margin_m=margin_m)
    return [note] if note else []


def scheme_inventory_empty() -> dict:
    return {"trees_added": 0, "trees_removed": 0, "crown_m2_added": 0.0, "canopy_m2_added": 0.0,
            "buildings_changed": 0, "edits_n": 0, "added_n": 0, "modified_n": 0, "removed_n": 0,
            "shade_m2_added": 0.0}
