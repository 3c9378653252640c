"""Validation on walkers the model never saw: grouped folds, baselines, metrics.

Rows of one walker are strongly correlated (same person, same walk, seconds apart),
so a random row split would let the model recognise the walker instead of the
conditions. Every split here is grouped: leave-one-walker-out, or grouped K-fold
when there are many walkers, and :func:`grouped_splits` checks that no group sits on
both sides of any fold.

Metrics are computed from their definitions (confusion matrix → recall, F1, …);
``tests/model`` checks each against scikit-learn's reference implementation.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort._progress import track
from walkcomfort.errors import InputError
from walkcomfort.model.classifier import check_target, labels_from_votes
from walkcomfort.model.features import FEATURE_SETS, NOW_FEATURES, build_features, participant_attributes

#: Display names of the models compared in every validation, in report order.
MODEL_NAMES = {
    "history": "history-aware LightGBM (ordinal, monotone in heat)",
    "history_free": "history-aware LightGBM, unconstrained multiclass",
    "current": "current-conditions LightGBM (same learner, no history)",
    "ordinal_utci": "UTCI-only ordinal logit, cut points learned per fold",
    "logistic": "logistic regression (current conditions)",
    "physics": "fixed UTCI-band rule (reference, not fitted)",
    "majority": "majority class",
}

#: The paired comparisons every validation reports: (model, yardstick, what the difference means).
GAINS = (
    ("history", "ordinal_utci", "history model against the UTCI-only ordinal baseline"),
    ("history", "current", "history gain: the same learner with and without the history features"),
    ("history", "history_free", "cost of coherence: monotone ordinal against unconstrained multiclass"),
    ("history", "physics", "history model against the fixed UTCI-band rule (reference)"),
)


# --- labelled rows --------------------------------------------------------------------------

@dataclass
class TrainingTable:
    """Labelled rows of one or more timelines, ready for fitting and validation."""

    X: pd.DataFrame          # features (FEATURES), one row per vote
    y: np.ndarray            # labels (object array)
    groups: np.ndarray       # walker id per row (participant, else walk_id)
    walk_id: np.ndarray
    attributes: pd.DataFrame  # clo, acclimatised, age_band per row
    target: str = "comfort"
    quarantine: pd.DataFrame = field(default_factory=pd.DataFrame)
    tsv: np.ndarray | None = None  # sensation votes at the same rows (NaN where not given), if any
    position: pd.DataFrame | None = None  # lat, lon [°] at the vote rows (index = time), when the timeline has them

    @property
    def digest(self) -> str:
        """Digest of the features and labels (what the bundle manifest records)."""
        from walkcomfort._io import frame_digest

        frame = self.X.reset_index(drop=True).copy()
        frame["__y"] = pd.Series(self.y, dtype="string").to_numpy()
        frame["__group"] = pd.Series(self.groups, dtype="string").to_numpy()
        return frame_digest(frame)


def vote_column(target: str) -> str:
    """The timeline column holding the votes of ``target``."""
    check_target(target)
    return C.VOTE_COMFORT if target == "comfort" else C.VOTE_TSV


def training_table(timeline: pd.DataFrame, target: str = "comfort", features: pd.DataFrame | None = None,
                   participants: dict | None = None, where: str = "timeline") -> TrainingTable:
    """Features at the vote rows of a timeline (one walk or a stacked campaign).

    Votes that cannot be used (a comfort label outside the classes, a sensation vote
    off the scale) are not dropped silently: they are returned in ``quarantine``
    with the row and reason, and the count is kept.
    """
    col = vote_column(target)
    if col not in timeline.columns:
        raise InputError(f"no '{col}' column: the timeline holds no votes", where=where,
                         fix="ingest a session with a votes source")
    feats = build_features(timeline, participants) if features is None else features
    raw = timeline[col]
    voted = raw.notna().to_numpy().copy()
    if target == "comfort":
        voted &= (raw.astype("string").str.strip().fillna("") != "").to_numpy()
    allowed = check_target(target)
    if target == "comfort":
        ok = raw.astype("string").str.strip().str.lower().isin(allowed).fillna(False).to_numpy()
    else:
        num = pd.to_numeric(raw, errors="coerce").to_numpy(dtype=float, na_value=np.nan)
        ok = ~np.isnan(num) & (np.round(num) == num) & (np.abs(num) <= 3)
    good = np.flatnonzero(voted & ok)
    walks_all = (timeline[C.WALK_ID].astype("string").fillna("").to_numpy(dtype=object)
                 if C.WALK_ID in timeline.columns else np.full(len(timeline), "walk", dtype=object))
    # the row number alone means little in a stacked campaign: keep the walk and time with it
    bad = [(int(r), walks_all[r], timeline.index[r].isoformat(), str(raw.iloc[r]),
            f"vote not one of {', '.join(map(str, allowed))}") for r in np.flatnonzero(voted & ~ok)]
    y = labels_from_votes(raw.iloc[good].to_numpy(), target) if len(good) else np.array([], dtype=object)
    walk = walks_all[good]
    if C.PARTICIPANT in timeline.columns:
        grp = timeline[C.PARTICIPANT].astype("string").to_numpy(dtype=object, na_value=None)[good]
        grp = np.where(pd.isna(grp), walk, grp)
    else:
        grp = walk
    attrs = participant_attributes(timeline, participants).iloc[good]
    quarantine = pd.DataFrame(bad, columns=["row", C.WALK_ID, "time", "raw", "reason"])
    quarantine.insert(0, "source", where)
    tsv = None
    if C.VOTE_TSV in timeline.columns:
        tsv = pd.to_numeric(timeline[C.VOTE_TSV].iloc[good], errors="coerce").to_numpy(dtype=float,
                                                                                         na_value=np.nan)
    position = None
    if C.LAT in timeline.columns and C.LON in timeline.columns:
        position = timeline[[C.LAT, C.LON]].iloc[good].astype(float)
    return TrainingTable(X=feats.iloc[good], y=y, groups=np.asarray(grp, dtype=object),
                         walk_id=np.asarray(walk, dtype=object), attributes=attrs, target=target,
                         quarantine=quarantine, tsv=tsv, position=position)


def concat_tables(tables: list[TrainingTable]) -> TrainingTable:
    if not tables:
        raise InputError("no timelines given", fix="pass at least one timeline")
    return TrainingTable(
        X=pd.concat([t.X for t in tables]), y=np.concatenate([t.y for t in tables]),
        groups=np.concatenate([t.groups for t in tables]), walk_id=np.concatenate([t.walk_id for t in tables]),
        attributes=pd.concat([t.attributes for t in tables]), target=tables[0].target,
        quarantine=pd.concat([t.quarantine for t in tables], ignore_index=True),
        tsv=None if any(t.tsv is None for t in tables) else np.concatenate([t.tsv for t in tables]),
        position=None if any(t.position is None for t in tables) else pd.concat([t.position for t in tables]))


# --- grouped folds -------------------------------------------------------------------------------

def grouped_splits(groups, n_splits: int | None = None) -> list[tuple[np.ndarray, np.ndarray]]:
    """Train/test index pairs that never put one group on both sides.

    Parameters
    ----------
    groups : array-like
        Walker id per row.
    n_splits : int, optional
        ``None`` (or ≥ number of walkers): leave-one-walker-out; otherwise grouped
        K-fold (scikit-learn ``GroupKFold``, deterministic).

    Returns
    -------
    list of (train_idx, test_idx)
    """
    g = pd.Series(np.asarray(groups, dtype=object)).astype("string").fillna("<none>").to_numpy()
    uniq = pd.unique(g)
    if len(uniq) < 2:
        raise InputError(f"grouped validation needs at least 2 walkers, got {len(uniq)}",
                         where="groups", fix="add walks by other participants")
    if n_splits is not None and n_splits < 2:
        raise InputError(f"n_splits must be at least 2, got {n_splits}", fix="use e.g. 5, or None for one walker per fold")
    if n_splits is None or n_splits >= len(uniq):
        folds = [(np.flatnonzero(g != u), np.flatnonzero(g == u)) for u in uniq]
    else:
        from sklearn.model_selection import GroupKFold

        folds = [(tr, te) for tr, te in GroupKFold(n_splits=n_splits).split(np.zeros(len(g)), groups=g)]
    for tr, te in folds:
        if set(g[tr]) & set(g[te]):
            raise RuntimeError("a walker sits in both train and test; grouped split is broken")
    return folds


# --- metrics ---------------------------------------------------------------------------------------

def confusion(y_true, y_pred, labels) -> np.ndarray:
    """Counts, rows = true class, columns = predicted class, both in ``labels`` order."""
    pos = {lab: i for i, lab in enumerate(labels)}
    k = len(labels)
    t = np.array([pos.get(v, -1) for v in y_true])
    p = np.array([pos.get(v, -1) for v in y_pred])
    ok = (t >= 0) & (p >= 0)
    return np.bincount(t[ok] * k + p[ok], minlength=k * k).reshape(k, k)


def scores_from_confusion(cm: np.ndarray) -> dict:
    """Recall, precision, F1 per class, macro-F1, balanced accuracy and accuracy (from the definitions).

    F1 of a class with no true and no predicted rows is 0 (scikit-learn's
    ``zero_division=0``); balanced accuracy averages recall over classes that occur.
    """
    cm = np.asarray(cm, dtype=float)
    tp = np.diag(cm)
    support = cm.sum(axis=1)
    predicted = cm.sum(axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        recall = np.where(support > 0, tp / support, 0.0)
        precision = np.where(predicted > 0, tp / predicted, 0.0)
        denom = 2 * tp + (predicted - tp) + (support - tp)
        f1 = np.where(denom > 0, 2 * tp / denom, 0.0)
    total = cm.sum()
    return {
        "recall": recall, "precision": precision, "f1": f1, "support": support,
        "macro_f1": float(f1.mean()) if len(f1) else float("nan"),
        "balanced_accuracy": float(recall[support > 0].mean()) if (support > 0).any() else float("nan"),
        "accuracy": float(tp.sum() / total) if total else float("nan"),
    }


def log_loss(y_true, proba: np.ndarray, labels) -> float:
    """Mean negative log-likelihood of the true class [nats]; p clipped at machine epsilon."""
    pos = {lab: i for i, lab in enumerate(labels)}
    idx = np.array([pos[v] for v in y_true])
    p = np.asarray(proba, dtype=float)
    p = p / p.sum(axis=1, keepdims=True)
    eps = np.finfo(float).eps
    pt = np.clip(p[np.arange(len(idx)), idx], eps, 1 - eps)
    return float(-np.mean(np.log(pt)))


def brier(y_true, proba: np.ndarray, labels) -> float:
    """Multiclass Brier score: mean over rows of Σ_c (p_c − 1[y = c])² (range 0 … 2; Brier 1950)."""
    pos = {lab: i for i, lab in enumerate(labels)}
    onehot = np.zeros_like(np.asarray(proba, dtype=float))
    onehot[np.arange(len(y_true)), [pos[v] for v in y_true]] = 1.0
    return float(np.mean(np.sum((np.asarray(proba, dtype=float) - onehot) ** 2, axis=1)))


def reliability(y_true, proba: np.ndarray, labels, n_bins: int = 10) -> dict:
    """Reliability-diagram data per class (one-vs-rest): equal-width bins of predicted probability.

    Returns ``{label: {"mean_predicted": [...], "observed": [...], "count": [...]}}``
    for the non-empty bins (the same bins as scikit-learn's ``calibration_curve``
    with ``strategy="uniform"``).
    """
    out = {}
    edges = np.linspace(0.0, 1.0, n_bins + 1)
    y_true = np.asarray(y_true, dtype=object)
    for j, lab in enumerate(labels):
        p = np.asarray(proba, dtype=float)[:, j]
        hit = (y_true == lab).astype(float)
        b = np.searchsorted(edges[1:-1], p, side="right")
        cnt = np.bincount(b, minlength=n_bins)
        sp = np.bincount(b, weights=p, minlength=n_bins)
        sh = np.bincount(b, weights=hit, minlength=n_bins)
        keep = cnt > 0
        out[str(lab)] = {"mean_predicted": (sp[keep] / cnt[keep]).tolist(),
                         "observed": (sh[keep] / cnt[keep]).tolist(), "count": cnt[keep].astype(int).tolist(),
                         "bin_lower": edges[:-1][keep].tolist()}
    return out


def classification_metrics(y_true, y_pred, proba: np.ndarray, labels) -> dict:
    """Every metric the reports show, as a JSON-able dict (labels in ``labels`` order)."""
    labels = list(labels)
    cm = confusion(y_true, y_pred, labels)
    s = scores_from_confusion(cm)
    return {
        "n": int(len(y_true)),
        "labels": [str(v) for v in labels],
        "macro_f1": s["macro_f1"], "balanced_accuracy": s["balanced_accuracy"], "accuracy": s["accuracy"],
        "recall": {str(lab): float(r) for lab, r in zip(labels, s["recall"], strict=False)},
        "precision": {str(lab): float(r) for lab, r in zip(labels, s["precision"], strict=False)},
        "f1": {str(lab): float(r) for lab, r in zip(labels, s["f1"], strict=False)},
        "confusion": cm.astype(int).tolist(),
        "log_loss": log_loss(y_true, proba, labels),
        "brier": brier(y_true, proba, labels),
        "reliability": reliability(y_true, proba, labels),
    }


def aligned_proba(model, X, labels) -> np.ndarray:
    """``model.predict_proba(X)`` with columns re-ordered to ``labels`` (absent classes get 0)."""
    p = np.asarray(model.predict_proba(X), dtype=float)
    out = np.zeros((len(p), len(labels)))
    pos = {lab: i for i, lab in enumerate(labels)}
    for j, c in enumerate(model.classes_):
        if c in pos:
            out[:, pos[c]] = p[:, j]
    s = out.sum(axis=1, keepdims=True)
    return np.divide(out, s, out=np.full_like(out, 1.0 / len(labels)), where=s > 0)


# --- cross-validation -----------------------------------------------------------------------------

def default_models(target: str = "comfort", preset: str = "small", n_estimators: int | None = None,
                   random_state: int = 0, n_jobs: int = 1, features=FEATURE_SETS["all"]) -> dict:
    """Factories for the compared models (keys of :data:`MODEL_NAMES`).

    ``history`` is the shipped model (cumulative, monotone); ``history_free`` the same features
    unconstrained (multiclass); ``current`` the shipped learner on :data:`NOW_FEATURES` only.
    """
    from walkcomfort.model.baselines import (
        LogisticBaseline,
        MajorityBaseline,
        OrdinalUTCIBaseline,
        PhysicsRuleBaseline,
    )
    from walkcomfort.model.classifier import ComfortClassifier

    now = [f for f in features if f in NOW_FEATURES]
    kw = dict(preset=preset, target=target, n_estimators=n_estimators, random_state=random_state, n_jobs=n_jobs)
    return {
        "history": lambda: ComfortClassifier(features=list(features), **kw),
        "history_free": lambda: ComfortClassifier(features=list(features), formulation="multiclass", **kw),
        "current": lambda: ComfortClassifier(features=now, **kw),
        "ordinal_utci": lambda: OrdinalUTCIBaseline(target=target),
        "logistic": lambda: LogisticBaseline(target=target, random_state=random_state),
        "physics": lambda: PhysicsRuleBaseline(target=target),
        "majority": lambda: MajorityBaseline(target=target),
    }


@dataclass
class CVResult:
    """Out-of-fold predictions and metrics of every compared model."""

    labels: list
    folds: list                      # [{"test_groups": [...], "n_train": .., "n_test": ..}]
    y: np.ndarray
    groups: np.ndarray
    proba: dict                      # model key -> (rows, labels) out-of-fold probabilities
    pred: dict                       # model key -> out-of-fold labels
    metrics: dict                    # model key -> classification_metrics(...)
    scheme: str = ""
    fold_models: list = field(default_factory=list)  # the "history" model of each fold (same order as folds)
    gains: dict = field(default_factory=dict)         # "a-b" -> paired_gain(...)

    def summary(self) -> pd.DataFrame:
        rows = []
        for k, m in self.metrics.items():
            rows.append({"model": MODEL_NAMES.get(k, k), "macro_f1": m["macro_f1"],
                         "balanced_accuracy": m["balanced_accuracy"], "accuracy": m["accuracy"],
                         "log_loss": m["log_loss"], "brier": m["brier"]})
        return pd.DataFrame(rows).set_index("model")

    def to_json(self) -> dict:
        return {"scheme": self.scheme, "labels": [str(v) for v in self.labels], "folds": self.folds,
                "metrics": self.metrics, "gains": self.gains}


def cross_validate(table: TrainingTable, models: dict | None = None, n_splits: int | None = None,
                   progress: bool | None = None, n_boot: int = 2000, seed: int = 0, **model_kw) -> CVResult:
    """Grouped cross-validation of every model in ``models`` (default: :func:`default_models`).

    Each row is predicted exactly once, by models that never saw its walker. The fitted
    ``history`` model of every fold is kept (``fold_models``: the delete-a-group replicates
    the scheme intervals use), and every pair in :data:`GAINS` present in ``models`` gets a
    walker-paired bootstrap interval for its macro-F1 difference (``gains``; ``n_boot``
    resamples, 0 for none).
    """
    models = models or default_models(table.target, **model_kw)
    allowed = check_target(table.target)
    labels = [c for c in allowed if c in set(table.y)]
    folds = grouped_splits(table.groups, n_splits)
    n = len(table.y)
    proba = {k: np.full((n, len(labels)), np.nan) for k in models}
    pred = {k: np.empty(n, dtype=object) for k in models}
    info = []
    fold_models = []
    for tr, te in track(folds, "cross-validation folds", total=len(folds), enabled=progress):
        Xtr, Xte = table.X.iloc[tr], table.X.iloc[te]
        ytr = table.y[tr]
        for key, make in models.items():
            if len(set(ytr)) < 2 and key == "history":
                # a fold whose training votes are all one class: the classifier cannot fit;
                # fall back to that class so the fold is still scored (and visibly poor)
                from walkcomfort.model.baselines import MajorityBaseline

                m = MajorityBaseline(table.target).fit(Xtr, ytr)
            else:
                m = make().fit(Xtr, ytr, groups=table.groups[tr])
            proba[key][te] = aligned_proba(m, Xte, labels)
            pred[key][te] = m.predict(Xte)
            if key == "history":
                fold_models.append(m)
        info.append({"test_groups": sorted(map(str, set(table.groups[te]))), "n_train": int(len(tr)),
                     "n_test": int(len(te))})
    metrics = {k: classification_metrics(table.y, pred[k], proba[k], labels) for k in models}
    scheme = "leave-one-walker-out" if (n_splits is None or n_splits >= len(set(table.groups))) \
        else f"grouped {n_splits}-fold by walker"
    gains = {}
    if n_boot:
        for a, b, meaning in GAINS:
            if a in models and b in models:
                gains[f"{a}-{b}"] = {**paired_gain(table.y, pred[a], pred[b], table.groups, labels, n_boot, seed),
                                     "model": a, "yardstick": b, "meaning": meaning}
    return CVResult(labels=labels, folds=info, y=table.y, groups=table.groups, proba=proba, pred=pred,
                    metrics=metrics, scheme=scheme, fold_models=fold_models, gains=gains)


def _macro_f1_counts(cm: np.ndarray) -> np.ndarray:
    """Macro-F1 of stacked confusion matrices (..., K, K), zero_division = 0 (as scores_from_confusion)."""
    tp = np.diagonal(cm, axis1=-2, axis2=-1)
    denom = cm.sum(axis=-1) + cm.sum(axis=-2)
    f1 = np.divide(2 * tp, denom, out=np.zeros_like(tp, dtype=float), where=denom > 0)
    return f1.mean(axis=-1)


def paired_gain(y_true, pred_a, pred_b, groups, labels, n_boot: int = 2000, seed: int = 0,
                level: float = 0.95) -> dict:
    """Macro-F1 of model a minus model b on the same votes, with a walker-paired bootstrap interval.

    Walkers are resampled with replacement (votes of one walker are not independent), and
    both models are scored on the same resample, so the interval is for the *difference*
    (percentile interval; Efron & Tibshirani 1993, "An Introduction to the Bootstrap",
    Chapman & Hall, ch. 13 — from memory).

    Returns
    -------
    dict
        ``delta``, ``lo``, ``hi`` (the ``level`` interval), ``level``, ``n_boot``, ``n_walkers``,
        ``share_le_0`` (share of resamples where a did not beat b), ``excludes_0``.
    """
    y = np.asarray(y_true, dtype=object)
    g = pd.Series(np.asarray(groups, dtype=object)).astype("string").fillna("<none>").to_numpy()
    walkers, gi = np.unique(g, return_inverse=True)
    k = len(labels)
    pos = {lab: i for i, lab in enumerate(labels)}

    def per_walker(pred):
        t = np.array([pos.get(v, -1) for v in y])
        p = np.array([pos.get(v, -1) for v in np.asarray(pred, dtype=object)])
        ok = (t >= 0) & (p >= 0)
        flat = np.zeros((len(walkers), k * k))
        np.add.at(flat, (gi[ok], t[ok] * k + p[ok]), 1.0)
        return flat

    ca, cb = per_walker(pred_a), per_walker(pred_b)
    delta = float(_macro_f1_counts(ca.sum(0).reshape(k, k)) - _macro_f1_counts(cb.sum(0).reshape(k, k)))
    rng = np.random.default_rng(seed)
    picks = rng.integers(0, len(walkers), size=(n_boot, len(walkers)))
    weights = np.zeros((n_boot, len(walkers)))
    np.add.at(weights, (np.repeat(np.arange(n_boot), len(walkers)), picks.ravel()), 1.0)
    da = _macro_f1_counts((weights @ ca).reshape(n_boot, k, k))
    db = _macro_f1_counts((weights @ cb).reshape(n_boot, k, k))
    diff = da - db
    alpha = (1 - level) / 2
    lo, hi = (float(v) for v in np.quantile(diff, [alpha, 1 - alpha]))
    return {"delta": delta, "lo": lo, "hi": hi, "level": level, "n_boot": int(n_boot),
            "n_walkers": int(len(walkers)), "share_le_0": float(np.mean(diff <= 0)), "excludes_0": bool(lo > 0 or hi < 0)}


def group_scores(y_true, y_pred, group_values, labels=None) -> pd.DataFrame:
    """Scores per group (walker, age band, acclimatisation…): n, accuracy, macro-F1, balanced accuracy.

    Within a group, macro-F1 averages over the classes that occur in its true or
    predicted labels (as scikit-learn does when no labels are given).
    """
    y_true = np.asarray(y_true, dtype=object)
    y_pred = np.asarray(y_pred, dtype=object)
    g = pd.Series(np.asarray(group_values, dtype=object)).astype("string").fillna("(unknown)").to_numpy()
    rows = []
    for key in sorted(pd.unique(g)):
        sel = g == key
        present = [c for c in (labels or sorted(set(y_true) | set(y_pred), key=str))
                   if c in set(y_true[sel]) | set(y_pred[sel])]
        s = scores_from_confusion(confusion(y_true[sel], y_pred[sel], present))
        rows.append({"group": str(key), "n": int(sel.sum()), "accuracy": s["accuracy"],
                     "macro_f1": s["macro_f1"], "balanced_accuracy": s["balanced_accuracy"]})
    return pd.DataFrame(rows)
