"""The comfort classifier: LightGBM behind a scikit-learn-style estimator.

Two formulations (parameter ``formulation``):

* ``"cumulative"`` (default): the votes are ordered (comfortable < neutral <
  uncomfortable; −3 < … < +3 for the sensation vote) and the model learns the
  cumulative probabilities P(vote > k) for every threshold k, as binary problems
  (Frank & Hall 2001, "A simple approach to ordinal classification", ECML, LNCS 2167,
  doi:10.1007/3-540-44795-4_13). The K − 1 binary problems are fitted as *one* booster
  on the rows repeated once per threshold with the threshold index as an extra input
  (the "extended binary classification" of Li & Lin 2007, NIPS 19). The threshold
  input carries a decreasing monotone constraint, so P(vote > k) can never rise with k:
  the cumulative curves cannot cross, by construction. The heat-exposure features
  carry monotone constraints too (:data:`MONOTONE_INCREASING`, :data:`MONOTONE_DECREASING`):
  with everything else equal, more heat never makes a higher (less comfortable) class
  less likely. LightGBM enforces monotone constraints exactly (LightGBM docs,
  "monotone_constraints").
* ``"multiclass"``: LightGBM's softmax multiclass, unconstrained (the reference the
  coherence cost is measured against).

Monotone constraints hold everywhere; they describe a warm-season campaign (UTCI above the
walkers' neutral), where more heat is never more comfortable. For a cold-season campaign
pass ``monotone=False``.

Class weights: none by default, so the probabilities estimate vote shares and log-loss,
Brier and the reliability diagram compare like with like; balanced accuracy and macro-F1
(which weigh the classes equally) are reported beside them.

``__init__`` only stores parameters; :meth:`ComfortClassifier.fit` validates and
returns ``self``; learned attributes end in an underscore (``classes_``,
``feature_names_in_``, ``booster_``); :meth:`~ComfortClassifier.predict_proba`
columns follow ``classes_`` and prediction refuses to run before fitting.

Training is deterministic: LightGBM's ``deterministic=True`` with row-wise
histograms, one fixed seed and a fixed thread count, so two fits on the same data
give bit-identical boosters (LightGBM docs, "deterministic" parameter).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.errors import InputError, NotFittedError

#: Training presets. Field campaigns usually give a few hundred votes ("small"):
#: shallow trees, strong leaf minimums and L2 shrinkage keep the model from
#: memorising single walkers; "medium" and "large" loosen that as votes grow.
PRESETS: dict[str, dict] = {
    "small": dict(n_estimators=300, learning_rate=0.05, num_leaves=4, max_depth=2, min_data_in_leaf=5,
                  feature_fraction=0.8, lambda_l2=2.0, max_bin=63, min_data_in_bin=3),
    "medium": dict(n_estimators=300, learning_rate=0.05, num_leaves=15, max_depth=5, min_data_in_leaf=20,
                   feature_fraction=0.8, bagging_fraction=0.8, bagging_freq=1, lambda_l2=1.0, max_bin=127),
    "large": dict(n_estimators=500, learning_rate=0.05, num_leaves=31, max_depth=-1, min_data_in_leaf=40,
                  feature_fraction=0.8, bagging_fraction=0.8, bagging_freq=1, lambda_l2=1.0, max_bin=255),
}

#: Features for which more means hotter: with everything else equal, a higher value never makes
#: a less comfortable class less likely (monotone constraint +1 on P(vote > k)).
MONOTONE_INCREASING: tuple[str, ...] = (
    C.UTCI_C, C.TMRT_C, C.T_AIR_C, "in_sun", "sun_streak_min", "t_air_mean_5min",
    *(f"{kind}_{w}min" for w in (1, 3, 5, 10)
      for kind in ("utci_mean", "utci_ewm", "utci_max", "tmrt_mean", "tmrt_ewm", "sun_min", "heat_dose")),
)
#: Features for which more means cooler in the sun: more shade never makes a less comfortable class more likely.
MONOTONE_DECREASING: tuple[str, ...] = (C.SHADE_FRAC,)
#: Name of the threshold input of the cumulative booster.
THRESHOLD_FEATURE = "ordinal_threshold"
FORMULATIONS = ("cumulative", "multiclass")

#: Targets: the 3-class comfort vote or the ASHRAE 55 seven-point thermal sensation vote.
TARGETS = {"comfort": tuple(C.COMFORT_CLASSES), "tsv": tuple(sorted(C.TSV_SCALE))}


def check_target(target: str) -> tuple:
    if target not in TARGETS:
        raise InputError(f"target {target!r} is not known; allowed: {', '.join(TARGETS)}",
                         fix="use target='comfort' (3-class vote) or target='tsv' (7-point sensation)")
    return TARGETS[target]


def labels_from_votes(values, target: str = "comfort", where: str = "labels") -> np.ndarray:
    """Validate vote labels; returns an object array of class labels (str or int).

    Raises :class:`InputError` naming the first bad row.
    """
    allowed = check_target(target)
    s = pd.Series(values).reset_index(drop=True)
    if target == "comfort":
        text = s.astype("string").str.strip().str.lower()
        bad = text.isna() | ~text.isin(allowed)
        if bad.any():
            row = int(np.flatnonzero(bad.to_numpy())[0])
            raise InputError(f"comfort vote {s.iloc[row]!r} is not one of {', '.join(allowed)}",
                             where=f"{where} row {row}", fix="correct the vote or quarantine the row")
        return text.to_numpy(dtype=object)
    num = pd.to_numeric(s, errors="coerce").to_numpy(dtype=float, na_value=np.nan)
    bad = np.isnan(num) | (np.round(num) != num) | (num < -3) | (num > 3)
    if bad.any():
        row = int(np.flatnonzero(bad)[0])
        raise InputError(f"thermal sensation vote {s.iloc[row]!r} is not an integer -3 … +3",
                         where=f"{where} row {row}", fix="use the ASHRAE 55 seven-point scale")
    return np.array([int(v) for v in num], dtype=object)


def feature_matrix(X, names, where: str = "features") -> np.ndarray:
    """``X[names]`` as float64; a clear error for missing or non-numeric columns."""
    if not isinstance(X, pd.DataFrame):
        raise InputError(f"X must be a DataFrame with named feature columns, got {type(X).__name__}",
                         where=where, fix="pass walkcomfort.model.features.build_features(...) output")
    missing = [c for c in names if c not in X.columns]
    if missing:
        raise InputError(f"feature columns missing: {', '.join(missing[:8])}{' …' if len(missing) > 8 else ''}",
                         where=where, fix="build the features with walkcomfort.model.features.build_features")
    sub = X[list(names)]
    for c in names:
        if not (pd.api.types.is_numeric_dtype(sub[c]) or pd.api.types.is_bool_dtype(sub[c])):
            raise InputError(f"feature column '{c}' is not numeric (dtype {sub[c].dtype})", where=where,
                             fix="convert it to numbers; missing values may be NaN")
    return sub.to_numpy(dtype="float64", na_value=np.nan)


def balanced_weights(codes: np.ndarray, n_classes: int) -> np.ndarray:
    """Sample weights n / (K · n_c), the usual 'balanced' class weighting (as in scikit-learn)."""
    counts = np.bincount(codes, minlength=n_classes).astype(float)
    present = counts > 0
    w = np.zeros(n_classes)
    w[present] = len(codes) / (present.sum() * counts[present])
    return w[codes]


def monotone_signs(names, enabled: bool = True) -> list[int]:
    """Monotone constraint per feature name (+1 hotter, −1 shade, 0 free) for P(vote > k)."""
    if not enabled:
        return [0] * len(list(names))
    return [1 if n in MONOTONE_INCREASING else -1 if n in MONOTONE_DECREASING else 0 for n in names]


def stack_thresholds(arr: np.ndarray, n_classes: int, codes: np.ndarray | None = None):
    """Rows repeated once per threshold k = 0 … K − 2, with k as the last column; labels 1[code > k].

    Block k of the result holds every row with threshold k (block-major order).
    """
    n = len(arr)
    reps = n_classes - 1
    out = np.empty((n * reps, arr.shape[1] + 1))
    out[:, :-1] = np.tile(arr, (reps, 1))
    out[:, -1] = np.repeat(np.arange(reps, dtype=float), n)
    if codes is None:
        return out, None
    labels = (np.tile(codes, reps) > np.repeat(np.arange(reps), n)).astype(float)
    return out, labels


def cumulative_to_proba(up: np.ndarray) -> np.ndarray:
    """Class probabilities from P(vote > k) (rows, K − 1): p₀ = 1 − P(>0), p_k = P(>k−1) − P(>k), p_K−1 = P(>K−2)."""
    n = len(up)
    ext = np.column_stack([np.ones(n), up, np.zeros(n)])
    return np.clip(ext[:, :-1] - ext[:, 1:], 0.0, 1.0)


class ComfortClassifier:
    """History-aware comfort classifier (LightGBM multiclass).

    Parameters
    ----------
    preset : {"small", "medium", "large"}
        Hyper-parameter preset (see :data:`PRESETS`); "small" suits a few hundred votes.
    target : {"comfort", "tsv"}
        3-class comfort vote or the 7-point thermal sensation vote (-3 … +3).
    n_estimators : int, optional
        Boosting rounds; overrides the preset.
    params : dict, optional
        Extra LightGBM parameters; override the preset (not the determinism settings).
    class_weight : {None, "balanced"}
        None (default) keeps the probabilities as vote shares; "balanced" weights each class
        inversely to its frequency.
    formulation : {"cumulative", "multiclass"}
        Ordered cumulative binary formulation with monotone constraints (default), or the
        unconstrained multiclass softmax.
    monotone : bool
        Monotone constraints on the heat-exposure features (cumulative formulation only).
    features : sequence of str, optional
        Feature columns to use; default: every column of ``X`` at fit time.
    random_state : int
        Seed for every random choice LightGBM makes.
    n_jobs : int
        LightGBM threads (fixed, part of what makes a fit reproducible).
    """

    def __init__(self, preset: str = "small", target: str = "comfort", n_estimators: int | None = None,
                 params: dict | None = None, class_weight: str | None = None, features=None,
                 random_state: int = 0, n_jobs: int = 1, formulation: str = "cumulative", monotone: bool = True):
        self.preset = preset
        self.target = target
        self.n_estimators = n_estimators
        self.params = params
        self.class_weight = class_weight
        self.features = features
        self.random_state = random_state
        self.n_jobs = n_jobs
        self.formulation = formulation
        self.monotone = monotone

    # --- scikit-learn conventions ---------------------------------------------------
    def get_params(self, deep: bool = True) -> dict:
        return {k: getattr(self, k) for k in ("preset", "target", "n_estimators", "params", "class_weight",
                                              "features", "random_state", "n_jobs", "formulation", "monotone")}

    def set_params(self, **kw):
        for k, v in kw.items():
            if k not in self.get_params():
                raise InputError(f"unknown parameter {k!r}", fix=f"use one of {', '.join(self.get_params())}")
            setattr(self, k, v)
        return self

    def __repr__(self) -> str:
        return (f"ComfortClassifier(preset={self.preset!r}, target={self.target!r}, "
                f"formulation={self.formulation!r})")

    # --- parameters -------------------------------------------------------------------
    def lgb_params(self, n_classes: int, names=None) -> tuple[dict, int]:
        """The full LightGBM parameter dict and the number of rounds.

        For the cumulative formulation ``names`` (the feature names) sets the monotone
        constraints; the threshold input is appended last.
        """
        if self.preset not in PRESETS:
            raise InputError(f"preset {self.preset!r} is not known; allowed: {', '.join(PRESETS)}",
                             fix="use 'small' for a few hundred votes")
        p = dict(PRESETS[self.preset])
        rounds = int(p.pop("n_estimators"))
        p.update(self.params or {})
        if self.n_estimators is not None:
            rounds = int(self.n_estimators)
        if rounds < 1:
            raise InputError(f"n_estimators must be at least 1, got {rounds}", fix="use e.g. 150")
        if self.formulation not in FORMULATIONS:
            raise InputError(f"formulation {self.formulation!r} is not known; allowed: {', '.join(FORMULATIONS)}",
                             fix="use 'cumulative' (ordered, monotone) or 'multiclass'")
        if self.formulation == "multiclass":
            p.update(objective="multiclass", num_class=int(n_classes))
        else:
            p.update(objective="binary")
            if names is not None:
                p["monotone_constraints"] = [*monotone_signs(names, self.monotone), -1]
        p.update(verbosity=-1, deterministic=True, force_row_wise=True, seed=int(self.random_state),
                 num_threads=int(self.n_jobs))
        return p, rounds

    # --- fit / predict -----------------------------------------------------------------
    def fit(self, X: pd.DataFrame, y, groups=None, sample_weight=None):
        """Fit on feature rows ``X`` and votes ``y``; ``groups`` (walker ids) are recorded only.

        Returns
        -------
        self
        """
        import lightgbm as lgb

        allowed = check_target(self.target)
        if self.features is not None:
            names = [str(c) for c in self.features]
        else:
            names = [str(c) for c in X.columns] if isinstance(X, pd.DataFrame) else []
        arr = feature_matrix(X, names, where="fit X")
        labels = labels_from_votes(y, self.target, where="fit y")
        if len(labels) != len(arr):
            raise InputError(f"X has {len(arr)} rows but y has {len(labels)}", where="fit",
                             fix="pass one vote per feature row")
        present = [c for c in allowed if c in set(labels)]
        if len(present) < 2:
            raise InputError(f"the votes hold only {len(present)} class ({', '.join(map(str, present))}); "
                             "a classifier needs at least two", where="fit y",
                             fix="add walks with other votes")
        code_of = {c: i for i, c in enumerate(present)}
        codes = np.array([code_of[v] for v in labels], dtype=np.int64)
        w = np.ones(len(codes))
        if self.class_weight == "balanced":
            w = balanced_weights(codes, len(present))
        elif self.class_weight is not None:
            raise InputError(f"class_weight {self.class_weight!r} is not known", fix="use 'balanced' or None")
        if sample_weight is not None:
            w = w * np.asarray(sample_weight, dtype=float)
        params, rounds = self.lgb_params(len(present), names)
        if self.formulation == "cumulative":
            arr_s, label_s = stack_thresholds(arr, len(present), codes)
            ds = lgb.Dataset(arr_s, label=label_s, weight=np.tile(w, len(present) - 1),
                             feature_name=[*names, THRESHOLD_FEATURE], params=params, free_raw_data=True)
        else:
            ds = lgb.Dataset(arr, label=codes, weight=w, feature_name=names, params=params, free_raw_data=True)
        self.booster_ = lgb.train(params, ds, num_boost_round=rounds)
        self.classes_ = np.array(present, dtype=object)
        self.feature_names_in_ = np.array(names, dtype=object)
        self.n_features_in_ = len(names)
        self.n_train_rows_ = len(codes)
        self.n_groups_ = None if groups is None else int(pd.Series(groups).nunique())
        self.params_ = params
        self.n_rounds_ = rounds
        return self

    def _check_fitted(self):
        if not hasattr(self, "booster_"):
            raise NotFittedError("this ComfortClassifier is not fitted yet",
                                 fix="call fit(X, y) first or load a bundle with walkcomfort.model.bundle.load_bundle")

    def _matrix(self, X) -> np.ndarray:
        self._check_fitted()
        return feature_matrix(X, list(self.feature_names_in_), where="predict X")

    @property
    def is_cumulative(self) -> bool:
        return getattr(self, "formulation", "multiclass") == "cumulative"

    def predict_proba(self, X: pd.DataFrame) -> np.ndarray:
        """Class probabilities, shape (rows, classes), columns in ``classes_`` order."""
        arr = self._matrix(X)
        return self.proba_from_matrix(arr)

    def proba_from_matrix(self, arr: np.ndarray) -> np.ndarray:
        """:meth:`predict_proba` on a float matrix already in ``feature_names_in_`` order."""
        k = len(self.classes_)
        if len(arr) == 0:
            return np.zeros((0, k))
        if not self.is_cumulative:
            return np.asarray(self.booster_.predict(arr), dtype=float).reshape(len(arr), k)
        return cumulative_to_proba(self.cumulative_from_matrix(arr))

    def cumulative_from_matrix(self, arr: np.ndarray) -> np.ndarray:
        """P(vote > k) for each threshold k, shape (rows, classes − 1), non-increasing along k."""
        k = len(self.classes_)
        stacked, _ = stack_thresholds(arr, k)
        up = np.asarray(self.booster_.predict(stacked), dtype=float).reshape(k - 1, len(arr)).T
        # the monotone constraint on the threshold input already guarantees this; the running
        # minimum only removes round-off
        return np.minimum.accumulate(up, axis=1)

    def predict_raw(self, X: pd.DataFrame) -> np.ndarray:
        """Raw scores: multiclass scores before softmax (rows, classes), or the cumulative
        log-odds of P(vote > k) (rows, classes − 1)."""
        arr = self._matrix(X)
        k = len(self.classes_)
        if self.is_cumulative:
            stacked, _ = stack_thresholds(arr, k)
            return np.asarray(self.booster_.predict(stacked, raw_score=True), dtype=float).reshape(k - 1, len(arr)).T
        return np.asarray(self.booster_.predict(arr, raw_score=True), dtype=float).reshape(len(arr), k)

    def predict(self, X: pd.DataFrame) -> np.ndarray:
        """Most probable class per row (object array of labels)."""
        p = self.predict_proba(X)
        return self.classes_[np.argmax(p, axis=1)] if len(p) else np.array([], dtype=object)

    @property
    def feature_importances_(self) -> np.ndarray:
        """Total gain per feature, in ``feature_names_in_`` order."""
        self._check_fitted()
        gain = np.asarray(self.booster_.feature_importance(importance_type="gain"), dtype=float)
        return gain[:len(self.feature_names_in_)]  # the cumulative booster's threshold input is not a feature
