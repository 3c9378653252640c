"""Objectives and the budgeted selection of sites.

Objectives (the default is ``heat-dose``; all are summed over the weighted walks, in
weighted minutes, and stated as a *gain*, so larger is better):

* ``heat-dose`` — heat dose avoided, ∫ max(UTCI − 26 °C, 0) dt [°C·min] (physics only);
* ``hours-above`` — minutes with UTCI above a threshold avoided (default 32 °C, the
  lower edge of "strong heat stress" on the UTCI assessment scale; Bröde et al. 2012,
  Int. J. Biometeorol. 56:481–494) (physics only);
* ``comfort`` — expected comfortable minutes gained, from the comfort model applied to
  the whole walk, so that exposure history counts.

Selection (it stops when the best marginal gain falls below :data:`MIN_GAIN_SHARE` of the
walks' total): greedy with lazy re-evaluation (Minoux 1978; the "lazy greedy" of Leskovec et
al. 2007, KDD, for budgeted coverage). Each step takes the option with the largest
marginal gain (per unit cost under a cost budget) given everything chosen so far; a
stored gain is only an upper bound and is re-evaluated before it is trusted. Shade
objectives have diminishing returns where shadows overlap (the second crown on a row
removes part of what the first left), which is what makes lazy re-evaluation sound; where
the response is not strictly diminishing (a row crossing the UTCI threshold), the
re-evaluation still gives the exact marginal gain of the option taken. Under a cost
budget the best single affordable option is compared with the greedy set, as usual for
budgeted greedy selection (Khuller, Moss & Naor 1999, Inf. Process. Lett. 70:39–45).
:func:`exhaustive` gives the optimum on small cases to measure the greedy gap.
"""

from __future__ import annotations

import heapq
import itertools
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.errors import InputError
from walkcomfort.routes.placement.shadows import Option

OBJECTIVES = ("heat-dose", "hours-above", "comfort")
DOSE_BASE_C = 26.0   # heat dose above the upper edge of "no thermal stress" (UTCI assessment scale)
DEFAULT_THRESHOLD_C = 32.0


def environment_with_beam(table: pd.DataFrame, rows: np.ndarray, beam: np.ndarray,
                          items: list | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Tmrt and UTCI [°C] of walk rows when their direct-beam transmittance becomes ``beam``.

    The rows go through the one environment chain
    (:func:`walkcomfort.environment.chain.environment_columns`) with the walker's beam
    given. Without ``items`` the scene is the base scene and the sky view the base's: a
    quick first ranking that sees the new shade on the walker only. With ``items`` (options
    to build) the scene is the base plus those items, and the chain traces everything else
    itself — the new crowns' shade on the ground and walls around, and the sky they hide.
    """
    from walkcomfort.environment.chain import environment_columns

    t = table.iloc[rows]
    weather_cols = [c for c in (C.T_AIR_C, C.RH_PCT, C.WIND_MS, C.PRESSURE_HPA, C.GHI_WM2, C.DNI_WM2, C.DHI_WM2)
                    if c in t.columns]
    base = table.attrs["scene"].scene if "scene" in table.attrs else None
    if items:
        scene, sky_view = scene_with(base, items), None
    else:
        scene = base
        sky_view = (t[C.SVF].to_numpy(float), t[C.SKY_VIEW_CROWN_FRAC].to_numpy(float),
                    t.get(C.SKY_DIFFUSE_FRAC, t[C.SVF]).to_numpy(float))
    env = environment_columns(pd.DatetimeIndex(t[C.TIME]), t[[C.LON, C.LAT]], t[weather_cols], scene=scene,
                              wind_height_m=table.attrs.get("wind_height_m"), sky_view=sky_view,
                              beam_trans=np.asarray(beam, float), warn=False)
    return env[C.TMRT_C].to_numpy(float), env[C.UTCI_C].to_numpy(float)


def scene_with(base, items: list):
    """The base scene with the options' items added (ids ``advised-<option index>``)."""
    from walkcomfort.environment.scene import Scene
    from walkcomfort.routes.placement.shadows import option_geojson

    feats = base.features + [option_geojson(o, base, f"advised-{o.index}") for o in items]
    return Scene(feats, site=dict(base.site), source=base.source, ground_material=base.ground_material)


def default_response(table: pd.DataFrame, rows: np.ndarray, beam: np.ndarray, items: list | None = None) -> np.ndarray:
    """UTCI [°C] of walk rows under a new direct-beam transmittance (see :func:`environment_with_beam`)."""
    return environment_with_beam(table, rows, beam, items)[1]


class PhysicsObjective:
    """Row-separable objective from UTCI alone (heat dose, or minutes above a threshold).

    Parameters
    ----------
    table : DataFrame
        Walk table (:func:`~.shadows.walk_table`) with the base environment and ``weight``.
    kind : {"heat-dose", "hours-above"}
    threshold_c : float
        For ``hours-above`` [°C].
    response : callable
        ``response(table, rows, beam) -> utci``; default :func:`default_response`.
    """

    def __init__(self, table: pd.DataFrame, kind: str = "heat-dose", threshold_c: float = DEFAULT_THRESHOLD_C,
                 response: Callable = default_response):
        if kind not in ("heat-dose", "hours-above"):
            raise InputError(f"objective {kind!r} is not a physics objective", where="--objective",
                             fix="use heat-dose or hours-above")
        self.table, self.kind, self.threshold_c, self.response = table, kind, float(threshold_c), response
        self.weight = table["weight"].to_numpy(float)
        self.base_beam = np.nan_to_num(table[C.BEAM_TRANS_FRAC].to_numpy(float), nan=1.0)
        self.reset()

    def _loss(self, utci: np.ndarray, rows) -> np.ndarray:
        if self.kind == "heat-dose":
            per = np.clip(utci - DOSE_BASE_C, 0.0, None)
        else:
            per = (utci > self.threshold_c).astype(float)
        return per * self.weight[rows]

    def reset(self) -> None:
        self.items: list[Option] = []
        self.beam = self.base_beam.copy()
        all_rows = np.arange(len(self.table))
        self.loss = self._loss(self.response(self.table, all_rows, self.beam), all_rows)
        self.base_total = float(self.loss.sum())

    def _trial(self, opt: Option, items: list) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Rows ``opt`` can change, their new beam and their new loss with ``items`` built."""
        rows = opt.wide_rows
        beam = self.beam[rows].copy()
        beam[np.searchsorted(rows, opt.rows)] *= opt.tau
        return rows, beam, self._loss(self.response(self.table, rows, beam, items), rows)

    def gain(self, opt: Option) -> float:
        """Exact marginal gain of ``opt`` given the items chosen so far (the whole chain)."""
        if opt.wide_rows.size == 0:
            return 0.0
        rows, _, new_loss = self._trial(opt, self.items + [opt])
        return float(self.loss[rows].sum() - new_loss.sum())

    def gains(self, options: list[Option]) -> np.ndarray:
        """A quick first ranking of many options: the new beam on the walker only, one chain call.

        It leaves out the new crown's shade on the surfaces around and the sky it hides,
        so it under-states the gain; :func:`greedy` re-evaluates the leading options with
        :meth:`gain` before it trusts any of them.
        """
        useful = [o for o in options if o.rows.size]
        out = np.zeros(len(options))
        if not useful:
            return out
        rows = np.concatenate([o.rows for o in useful])
        beam = np.concatenate([self.beam[o.rows] * o.tau for o in useful])
        new_loss = self._loss(self.response(self.table, rows, beam), rows)
        delta = self.loss[rows] - new_loss
        sums = np.add.reduceat(delta, np.cumsum([0] + [o.rows.size for o in useful[:-1]]))
        pos = {id(o): k for k, o in enumerate(useful)}
        for i, o in enumerate(options):
            if id(o) in pos:
                out[i] = float(sums[pos[id(o)]])
        return out

    def commit(self, opt: Option) -> None:
        if opt.wide_rows.size == 0:
            return
        rows, beam, new_loss = self._trial(opt, self.items + [opt])
        self.beam[rows] = beam
        self.loss[rows] = new_loss
        self.items.append(opt)

    def set_gain(self, chosen: list[Option]) -> float:
        """Exact gain of a whole set, from the base (for the exhaustive check)."""
        touched = np.unique(np.concatenate([o.wide_rows for o in chosen])) if chosen else np.zeros(0, int)
        if touched.size == 0:
            return 0.0
        beam = self.base_beam.copy()
        for o in chosen:
            beam[o.rows] *= o.tau
        base = self._loss(self.response(self.table, touched, self.base_beam[touched]), touched)
        new = self._loss(self.response(self.table, touched, beam[touched], list(chosen)), touched)
        return float(base.sum() - new.sum())


def conflicts(a: Option, b: Option) -> bool:
    """Two options cannot both be built: same site, or crowns/panels that would overlap."""
    if a.site_id == b.site_id:
        return True
    d = float(np.hypot(a.x_m - b.x_m, a.y_m - b.y_m))
    return d < (a.intervention.reach_m + b.intervention.reach_m) * 0.9


@dataclass
class Selection:
    """The greedy path: options in the order taken, with their marginal gains."""

    chosen: list[Option] = field(default_factory=list)
    gains: list[float] = field(default_factory=list)
    fold_gains: list = field(default_factory=list)  # per chosen item: gains by each fold model, or None
    evaluations: int = 0
    last_gain: dict[int, float] = field(default_factory=dict)
    note: str = ""

    @property
    def total(self) -> float:
        return float(sum(self.gains))

    @property
    def cost(self) -> float:
        return float(sum(o.cost for o in self.chosen))


#: A marginal gain below this share of the walks' total (heat dose, minutes, comfortable
#: minutes as they are) is too small to build for: the selection stops there. An item far
#: from every walk still changes the sky view a little (the chain looks 200 m out).
MIN_GAIN_SHARE = 0.001


def refine_n(n_options: int, max_count: int | None) -> int:
    """How many leaders of the quick first ranking are evaluated in full before selecting."""
    return min(n_options, max(20, 3 * (max_count or 10)))


def greedy(options: list[Option], objective, max_count: int | None = None,
           max_cost: float | None = None) -> Selection:
    """Lazy greedy selection within a count and/or cost budget (see the module docstring)."""
    if max_count is None and max_cost is None:
        raise InputError("no budget given", where="--count/--cost", fix="give a number of items or a cost")
    by_cost = max_cost is not None
    sel = Selection()
    heap = []
    quick = hasattr(objective, "gains")
    first = objective.gains(options) if quick else [objective.gain(o) for o in options]
    # a quick first ranking is only an estimate: its leaders are evaluated in full before the
    # selection starts, and every quick value is stale (stamp -1) until evaluated in full
    stamp0 = -1 if quick else 0
    if quick:
        lead = np.argsort(-np.asarray(first, float), kind="stable")[:refine_n(len(options), max_count)]
        first = np.asarray(first, float).copy()
        for pos in lead:
            first[pos] = objective.gain(options[pos])
            sel.evaluations += 1
    for pos, (o, g) in enumerate(zip(options, first, strict=True)):
        g = float(g)
        sel.evaluations += 1
        sel.last_gain[o.index] = g
        heap.append((-(g / o.cost if by_cost else g), pos, 0 if quick and pos in set(lead) else stamp0))
    heapq.heapify(heap)
    spent = 0.0
    while heap and (max_count is None or len(sel.chosen) < max_count):
        _key, pos, stamp = heapq.heappop(heap)
        o = options[pos]
        if any(conflicts(o, c) for c in sel.chosen) or (by_cost and spent + o.cost > max_cost + 1e-9):
            continue
        if stamp != len(sel.chosen):  # stale upper bound: re-evaluate under what is chosen now
            g = objective.gain(o)
            sel.evaluations += 1
            sel.last_gain[o.index] = g
            heapq.heappush(heap, (-(g / o.cost if by_cost else g), pos, len(sel.chosen)))
            continue
        g = sel.last_gain[o.index]
        if g <= max(MIN_GAIN_SHARE * abs(getattr(objective, "base_total", 0.0)), 0.0):
            break
        objective.commit(o)
        sel.chosen.append(o)
        sel.gains.append(g)
        sel.fold_gains.append(getattr(objective, "last_commit_folds", None))
        spent += o.cost
    if by_cost:
        _compare_best_single(options, objective, sel, max_cost)
    return sel


def _compare_best_single(options, objective, sel: Selection, max_cost: float) -> None:
    affordable = [o for o in options if o.cost <= max_cost]
    if not affordable:
        return
    objective.reset()
    if hasattr(objective, "gains"):  # the quick ranking's leaders, evaluated in full
        quick = np.asarray(objective.gains(affordable), float)
        affordable = [affordable[i] for i in np.argsort(-quick, kind="stable")[:5]]
    single = [objective.gain(o) for o in affordable]
    k = int(np.argmax(single))
    best, g = affordable[k], float(single[k])
    if g > sel.total:
        sel.chosen, sel.gains, sel.fold_gains = [best], [g], [None]
        sel.note = "a single item beat the greedy set under this cost budget and was kept instead"
    objective.reset()
    for o in sel.chosen:
        objective.commit(o)


def exhaustive(options: list[Option], objective, max_count: int) -> tuple[list[Option], float]:
    """The best feasible set of at most ``max_count`` options, by enumeration (small cases only)."""
    if len(options) > 16 or max_count > 4:
        raise InputError(f"exhaustive search over {len(options)} options × {max_count} is too large",
                         where="exhaustive", fix="use at most 16 options and a budget of 4")
    best, best_gain = [], 0.0
    for k in range(1, max_count + 1):
        for combo in itertools.combinations(options, k):
            if any(conflicts(a, b) for a, b in itertools.combinations(combo, 2)):
                continue
            g = objective.set_gain(list(combo))
            if g > best_gain + 1e-12:
                best, best_gain = list(combo), g
    return best, best_gain


class ComfortObjective:
    """Expected comfortable minutes from the comfort model, walk by walk (history counts).

    A walk's value is Σ p(comfortable) × weight over its rows; an option's gain is the
    change in that sum over the walks its shade reaches, each walk re-predicted whole so
    that the model's history features see the new shade.

    Parameters
    ----------
    table : DataFrame
        Walk table with ``walk_key``.
    walks : dict
        ``walk_key -> DataFrame``: each walk as simulated (time index, ``attrs``), rows in
        the table's order.
    predictor : routes.predict.Predictor
        A model bundle's predictor.
    """

    def __init__(self, table: pd.DataFrame, walks: dict, predictor):
        self.table, self.walks, self.predictor = table, walks, predictor
        self.weight = table["weight"].to_numpy(float)
        self.base_beam = np.nan_to_num(table[C.BEAM_TRANS_FRAC].to_numpy(float), nan=1.0)
        keys = table["walk_key"].to_numpy()
        self.rows_of = {k: np.flatnonzero(keys == k) for k in walks}
        self.key_of_row = keys
        self.reset()

    def walk_value(self, key, beam_rows: np.ndarray, items: list | None = None) -> float:
        from walkcomfort.environment.utci import utci_band

        rows = self.rows_of[key]
        w = self.walks[key].copy()
        tmrt, utci = environment_with_beam(self.table, rows, beam_rows, items)
        w[C.BEAM_TRANS_FRAC] = beam_rows
        w[C.SHADE_FRAC] = 1.0 - beam_rows
        w[C.TMRT_C], w[C.UTCI_C] = tmrt, utci
        w[C.UTCI_BAND] = np.asarray(utci_band(utci), dtype=object)
        out, folds = self.predictor.predict_folds(w, explain=False)
        wt = self.weight[rows]
        value = float((out["p_comfortable"].to_numpy(float) * wt).sum())
        if folds is not None:
            self.trial_folds[key] = (folds[:, :, 0] * wt[None, :]).sum(axis=1)
        return value

    def reset(self) -> None:
        self.items: list[Option] = []
        self.beam = self.base_beam.copy()
        self.trial_folds: dict = {}
        self.value = {k: self.walk_value(k, self.beam[r]) for k, r in self.rows_of.items()}
        self.fold_value = dict(self.trial_folds)
        self.base_total = float(sum(self.value.values()))
        self.last_commit_folds = None

    def _trial(self, opt: Option) -> dict:
        out = {}
        items = self.items + [opt]
        for k in np.unique(self.key_of_row[opt.wide_rows]):
            rows = self.rows_of[k]
            beam = self.beam[rows].copy()
            mine = self.key_of_row[opt.rows] == k
            beam[np.searchsorted(rows, opt.rows[mine])] *= opt.tau[mine]
            out[k] = (beam, self.walk_value(k, beam, items))
        return out

    def gain(self, opt: Option) -> float:
        if opt.wide_rows.size == 0:
            return 0.0
        return float(sum(v - self.value[k] for k, (_, v) in self._trial(opt).items()))

    def commit(self, opt: Option) -> None:
        self.trial_folds = {}
        fold_gain = None
        for k, (beam, v) in self._trial(opt).items():
            self.beam[self.rows_of[k]] = beam
            self.value[k] = v
            if k in self.trial_folds and k in self.fold_value:
                d = self.trial_folds[k] - self.fold_value[k]
                fold_gain = d if fold_gain is None else fold_gain + d
                self.fold_value[k] = self.trial_folds[k]
        self.items.append(opt)
        self.last_commit_folds = fold_gain

    def set_gain(self, chosen: list[Option]) -> float:
        saved = (self.beam.copy(), dict(self.value), dict(self.fold_value), list(self.items))
        self.reset()
        for o in chosen:
            self.commit(o)
        g = float(sum(self.value.values()) - self.base_total)
        self.beam, self.value, self.fold_value, self.items = saved
        return g
