"""The comfort classifier: LightGBM multiclass behind a scikit-learn-style estimator.

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
    class_weight : {"balanced", None}
        "balanced" weights each class inversely to its frequency.
    features : sequence of str, optional
        Feature columns to use; default: every column of ``X`` at fit time.
    random_state : int
        Seed for every random choice LightGBM makes.
    n_jobs : int
        LightGBM threads (fixed, part of what makes a fit reproducible).
    """

    def __init__(self, preset: str = "small", target: str = "comfort", n_estimators: int | None = None,
                 params: dict | None = None, class_weight: str | None = "balanced", features=None,
                 random_state: int = 0, n_jobs: int = 1):
        self.preset = preset
        self.target = target
        self.n_estimators = n_estimators
        self.params = params
        self.class_weight = class_weight
        self.features = features
        self.random_state = random_state
        self.n_jobs = n_jobs

    # --- scikit-learn conventions ---------------------------------------------------
    def get_params(self, deep: bool = True) -> dict:
        return {k: getattr(self, k) for k in ("preset", "target", "n_estimators", "params", "class_weight",
                                              "features", "random_state", "n_jobs")}

    def set_params(self, **kw):
        for k, v in kw.items():
            if k not in self.get_params():
                raise InputError(f"unknown parameter {k!r}", fix=f"use one of {', '.join(self.get_params())}")
            setattr(self, k, v)
        return self

    def __repr__(self) -> str:
        return f"ComfortClassifier(preset={self.preset!r}, target={self.target!r})"

    # --- parameters -------------------------------------------------------------------
    def lgb_params(self, n_classes: int) -> tuple[dict, int]:
        """The full LightGBM parameter dict and the number of rounds."""
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
        p.update(objective="multiclass", num_class=int(n_classes), verbosity=-1, deterministic=True,
                 force_row_wise=True, seed=int(self.random_state), num_threads=int(self.n_jobs))
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
        params, rounds = self.lgb_params(len(present))
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

    def predict_proba(self, X: pd.DataFrame) -> np.ndarray:
        """Class probabilities, shape (rows, classes), columns in ``classes_`` order."""
        arr = self._matrix(X)
        if len(arr) == 0:
            return np.zeros((0, len(self.classes_)))
        return np.asarray(self.booster_.predict(arr), dtype=float).reshape(len(arr), len(self.classes_))

    def predict_raw(self, X: pd.DataFrame) -> np.ndarray:
        """Raw multiclass scores (before softmax), shape (rows, classes)."""
        arr = self._matrix(X)
        return np.asarray(self.booster_.predict(arr, raw_score=True), dtype=float).reshape(len(arr),
                                                                                          len(self.classes_))

    def predict(self, X: pd.DataFrame) -> np.ndarray:
        """Most probable class per row (object array of labels)."""
        p = self.predict_proba(X)
        return self.classes_[np.argmax(p, axis=1)] if len(p) else np.array([], dtype=object)

    @property
    def feature_importances_(self) -> np.ndarray:
        """Total gain per feature, in ``feature_names_in_`` order."""
        self._check_fitted()
        return np.asarray(self.booster_.feature_importance(importance_type="gain"), dtype=float)
