"""The placement advisor: from routes, departures, a scene and a budget to a chosen set of sites."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.errors import InputError
from walkcomfort.routes.placement.catalogue import Intervention
from walkcomfort.routes.placement.select import (
    OBJECTIVES,
    ComfortObjective,
    PhysicsObjective,
    Selection,
    exhaustive,
    greedy,
)
from walkcomfort.routes.placement.shadows import Option, add_scene_xy, trace_options, walk_table
from walkcomfort.routes.placement.sites import screen_sites

UNITS = {"heat-dose": "°C·min of heat dose avoided", "hours-above": "min above the threshold avoided",
         "comfort": "expected comfortable min gained"}


@dataclass
class Advice:
    """What the advisor found (see :func:`advise`)."""

    objective: str
    unit: str
    selection: Selection
    options: list[Option]
    sites: pd.DataFrame
    excluded: pd.DataFrame
    base_total: float
    departures: pd.DatetimeIndex
    routes: list[str]
    max_count: int | None
    max_cost: float | None
    threshold_c: float
    notes: list[str] = field(default_factory=list)
    optimum: dict | None = None

    def ranked(self) -> pd.DataFrame:
        """One row per chosen item in the order taken."""
        sel = self.selection
        rows = []
        cum_gain = cum_cost = 0.0
        for rank, (o, g) in enumerate(zip(sel.chosen, sel.gains, strict=True), start=1):
            cum_gain += g
            cum_cost += o.cost
            rows.append({"rank": rank, "site_id": o.site_id, "intervention": o.intervention.name,
                         "lon": o.lon, "lat": o.lat, "marginal_gain": g, "cumulative_gain": cum_gain,
                         "cost": o.cost, "cumulative_cost": cum_cost, "gain_per_cost": g / o.cost,
                         "shaded_rows_n": int(o.rows.size)})
        out = pd.DataFrame(rows, columns=["rank", "site_id", "intervention", "lon", "lat", "marginal_gain",
                                          "cumulative_gain", "cost", "cumulative_cost", "gain_per_cost",
                                          "shaded_rows_n"])
        lo, hi, clo, chi = self.intervals()
        out["marginal_gain_lo"], out["marginal_gain_hi"] = lo, hi
        out["cumulative_gain_lo"], out["cumulative_gain_hi"] = clo, chi
        return out

    def intervals(self, level: float = 0.95):
        """95 % intervals of marginal and cumulative gains from the model's fold replicates.

        Delete-a-group jackknife over the bundle's fold models (the same intervals as the
        scheme comparison, :func:`walkcomfort.routes.compare.delta_interval`); NaN for the
        physics objectives, which have no model error to carry.
        """
        from walkcomfort.routes.compare import delta_interval

        sel = self.selection
        n = len(sel.chosen)
        nan = np.full(n, np.nan)
        folds = sel.fold_gains
        if not n or any(f is None for f in folds):
            return nan, nan.copy(), nan.copy(), nan.copy()
        reps = np.stack(folds, axis=1)                   # (K, n)
        gains = np.asarray(sel.gains, float)
        lo, hi = delta_interval(gains, reps, level)
        clo, chi = delta_interval(np.cumsum(gains), np.cumsum(reps, axis=1), level)
        return lo, hi, clo, chi

    def runners_up(self, n: int = 10) -> pd.DataFrame:
        """The best options not taken, by their last evaluated marginal gain."""
        taken = {o.site_id for o in self.selection.chosen}
        rest = [o for o in self.options if o.site_id not in taken and self.selection.last_gain.get(o.index, 0) > 0]
        rest.sort(key=lambda o: -self.selection.last_gain[o.index])
        seen, rows = set(), []
        for o in rest:
            if o.site_id in seen:
                continue
            seen.add(o.site_id)
            rows.append({"site_id": o.site_id, "intervention": o.intervention.name, "lon": o.lon, "lat": o.lat,
                         "last_marginal_gain": self.selection.last_gain[o.index], "cost": o.cost})
            if len(rows) == n:
                break
        return pd.DataFrame(rows, columns=["site_id", "intervention", "lon", "lat", "last_marginal_gain", "cost"])


def advise(walks: list[pd.DataFrame], scene, sites: pd.DataFrame, catalogue: dict[str, Intervention], *,
           objective: str = "heat-dose", max_count: int | None = None, max_cost: float | None = None,
           threshold_c: float = 32.0, predictor=None, walk_weights: list[float] | None = None,
           departure_weights: dict | None = None, min_facade_m: float = 2.0, min_tree_m: float = 4.0,
           z_m: float = 1.1, check_optimum: bool = False) -> Advice:
    """Choose sites and interventions for a budget.

    Parameters
    ----------
    walks : list of DataFrame
        Simulated walks with the base scene's environment (``routes.simulate.simulate_walk``),
        one frame per route (all its departures).
    scene : Scene
        The base scene.
    sites : DataFrame
        Candidate sites (:mod:`.sites`), screened here.
    catalogue : dict
        Interventions to choose from (:mod:`.catalogue`).
    objective : {"heat-dose", "hours-above", "comfort"}
        See :mod:`.select`; ``comfort`` needs ``predictor`` (a model bundle).
    max_count, max_cost : optional
        The budget: number of items and/or total cost.
    threshold_c : float
        UTCI threshold of ``hours-above`` [°C].
    walk_weights, departure_weights : optional
        Importance of each route (e.g. pedestrian counts) and of each departure (UTC
        Timestamp -> weight); default equal.
    min_facade_m, min_tree_m : float
        Screening distances (:func:`.sites.screen_sites`).
    check_optimum : bool
        Also search exhaustively (small cases) and report the greedy/optimum ratio.
    """
    if objective not in OBJECTIVES:
        raise InputError(f"objective {objective!r} is not known; allowed: {', '.join(OBJECTIVES)}",
                         where="--objective", fix="choose one of the listed objectives")
    if objective == "comfort" and (predictor is None or not predictor.is_model):
        raise InputError("the comfort objective needs a comfort model", where="--model",
                         fix="give --model BUNDLE, or use --objective heat-dose (physics only)")
    kept, excluded = screen_sites(sites, scene, min_facade_m=min_facade_m, min_tree_m=min_tree_m)
    if kept.empty:
        raise InputError(f"no candidate site is left after screening ({len(excluded)} excluded)",
                         where="candidate sites", fix="give sites away from buildings and existing trees")
    table = add_scene_xy(walk_table(walks, walk_weights), scene)
    if departure_weights:
        dep = pd.DatetimeIndex(table["departure"]).tz_convert("UTC")
        mult = np.array([float(departure_weights.get(d, 1.0)) for d in dep])
        table["weight"] = table["weight"].to_numpy(float) * mult
    table.attrs["timezone"] = (walks[0].attrs.get("session") or {}).get("timezone", "UTC")
    options = trace_options(table, scene, kept, catalogue, z_m=z_m)
    if objective == "comfort":
        per_walk = _walks_by_key(walks, table)
        obj = ComfortObjective(table, per_walk, predictor)
    else:
        obj = PhysicsObjective(table, objective, threshold_c)
    sel = greedy(options, obj, max_count=max_count, max_cost=max_cost)
    advice = Advice(objective, UNITS[objective], sel, options, kept, excluded, obj.base_total,
                    pd.DatetimeIndex(sorted(set(pd.DatetimeIndex(table["departure"])))),
                    sorted(set(table["route_id"])), max_count, max_cost, threshold_c)
    if sel.note:
        advice.notes.append(sel.note)
    never = sum(1 for o in options if o.rows.size == 0)
    if never:
        advice.notes.append(f"{never} of {len(options)} site × intervention options shade no walk point at the "
                            "chosen departures and were never candidates")
    if objective == "comfort":
        advice.notes += _physics_disagreement(table, options, sel, max_count, max_cost, threshold_c)
    if check_optimum:
        advice.optimum = _optimum(options, obj, sel, max_count) if max_count is not None else None
        if advice.optimum is None:
            advice.notes.append("the exhaustive check runs only for a count budget of 2–4 items with at least "
                                "two useful candidates; it was skipped")
    return advice


def _walks_by_key(walks: list[pd.DataFrame], table: pd.DataFrame) -> dict:
    out = {}
    for k, w in enumerate(walks):
        ids = pd.factorize(w[C.WALK_ID])[1]
        for j, wid in enumerate(ids):
            part = w[w[C.WALK_ID] == wid]
            part.attrs = dict(w.attrs)
            out[k * 10_000 + j] = part
    return out


def _physics_disagreement(table, options, sel: Selection, max_count, max_cost, threshold_c) -> list[str]:
    first = [o.site_id for o in sel.chosen[:3]]
    phys = greedy(options, PhysicsObjective(table, "heat-dose", threshold_c),
                  max_count=min(3, max_count) if max_count else 3, max_cost=max_cost)
    other = [o.site_id for o in phys.chosen[:3]]
    if first and other and set(first) != set(other):
        return [f"the comfort model and the physics-only heat-dose objective disagree on the first choices "
                f"(model: {', '.join(first)}; physics: {', '.join(other)}): the model weighs exposure history "
                "and the hours people walk, the physics counts heat only — read both before deciding"]
    return []


def _optimum(options: list[Option], obj, sel: Selection, max_count: int) -> dict | None:
    useful = sorted((o for o in options if sel.last_gain.get(o.index, 0) > 0),
                    key=lambda o: -sel.last_gain[o.index])[:12]
    if len(useful) < 2 or max_count > 4:
        return None
    best, best_gain = exhaustive(useful, obj, max_count)
    greedy_gain = obj.set_gain(sel.chosen)
    return {"candidates_searched": len(useful), "budget": max_count, "optimum_gain": best_gain,
            "greedy_gain": greedy_gain, "ratio": greedy_gain / best_gain if best_gain > 0 else 1.0,
            "optimum_sites": [o.site_id for o in best]}
