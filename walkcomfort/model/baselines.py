"""Baselines the comfort model has to beat.

* :class:`OrdinalUTCIBaseline` — the strongest simple yardstick: a cumulative logit on UTCI
  alone whose cut points are learned from the training votes (inside each fold in validation);
* :class:`PhysicsRuleBaseline` — the fixed UTCI-band rule, kept as a labelled reference;
* :class:`LogisticBaseline` — multinomial logistic regression on current conditions;
* :class:`MajorityBaseline` — the most frequent class.

(The current-conditions LightGBM, the same learner as the history model without the history
features, is a :class:`~walkcomfort.model.classifier.ComfortClassifier` with
``features=NOW_FEATURES``; see :func:`walkcomfort.model.evaluate.default_models`.)

All follow the same estimator shape as
:class:`~walkcomfort.model.classifier.ComfortClassifier` (``fit(X, y, groups=None)``
returns self; ``classes_``; ``predict_proba`` in ``classes_`` order; ``predict``).

The physics rule maps the UTCI assessment-scale band (Bröde et al. 2012,
doi:10.1007/s00484-011-0454-1; bands in :data:`walkcomfort.columns.UTCI_BANDS`) to a
comfort class. The mapping is ours, stated here so that it can be argued with:

=========================  ==================  =============
UTCI [°C]                  UTCI band            comfort class
=========================  ==================  =============
> 32                       strong heat stress   uncomfortable
                           or above
26 < UTCI ≤ 32             moderate heat stress neutral
9 < UTCI ≤ 26              no thermal stress    comfortable
0 < UTCI ≤ 9               slight cold stress   neutral
≤ 0                        moderate cold stress uncomfortable
                           or below
=========================  ==================  =============

For the 7-point sensation target the rule gives -3 (≤ -13 °C), -2 (-13…0], -1 (0…9],
0 (9…26], +1 (26…32], +2 (32…38], +3 (> 38 °C), i.e. one step per UTCI band,
with the open-ended extreme bands merged into ±3.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.errors import InputError, NotFittedError
from walkcomfort.model.classifier import check_target, labels_from_votes
from walkcomfort.model.features import CURRENT_FEATURES

# (upper bound inclusive [°C], class); the last row catches everything above.
_COMFORT_RULE = ((0.0, "uncomfortable"), (9.0, "neutral"), (26.0, "comfortable"), (32.0, "neutral"),
                 (np.inf, "uncomfortable"))
_TSV_RULE = ((-13.0, -3), (0.0, -2), (9.0, -1), (26.0, 0), (32.0, 1), (38.0, 2), (np.inf, 3))


def physics_rule(utci_c, target: str = "comfort") -> np.ndarray:
    """Comfort class (or 7-point sensation) from the UTCI band, per the table in the module docstring.

    Parameters
    ----------
    utci_c : array-like
        UTCI [°C].
    target : {"comfort", "tsv"}

    Returns
    -------
    numpy.ndarray (object)
        One label per value; ``None`` where UTCI is NaN.
    """
    check_target(target)
    u = np.asarray(pd.to_numeric(pd.Series(np.asarray(utci_c).ravel()), errors="coerce"), dtype=float)
    rule = _COMFORT_RULE if target == "comfort" else _TSV_RULE
    edges = np.array([b for b, _ in rule[:-1]])
    # side="left": a value equal to an upper bound belongs to that band (bounds are inclusive)
    k = np.searchsorted(edges, u, side="left")
    out = np.array([lab for _, lab in rule], dtype=object)[np.minimum(k, len(rule) - 1)]
    out[np.isnan(u)] = None
    return out


class _Base:
    target = "comfort"

    def _check_fitted(self):
        if not hasattr(self, "classes_"):
            raise NotFittedError(f"this {type(self).__name__} is not fitted yet", fix="call fit(X, y) first")

    def _labels(self, y):
        labels = labels_from_votes(y, self.target, where="fit y")
        allowed = check_target(self.target)
        present = [c for c in allowed if c in set(labels)]
        if not present:
            raise InputError("no votes to fit on", where="fit y", fix="pass at least one labelled row")
        return labels, present

    def predict(self, X) -> np.ndarray:
        p = self.predict_proba(X)
        return self.classes_[np.argmax(p, axis=1)]


class MajorityBaseline(_Base):
    """Always the most frequent training class; probabilities = training class shares."""

    def __init__(self, target: str = "comfort"):
        self.target = target

    def fit(self, X, y, groups=None):
        labels, present = self._labels(y)
        self.classes_ = np.array(present, dtype=object)
        counts = np.array([np.sum(labels == c) for c in present], dtype=float)
        self.prior_ = counts / counts.sum()
        return self

    def predict_proba(self, X) -> np.ndarray:
        self._check_fitted()
        return np.tile(self.prior_, (len(X), 1))


class PhysicsRuleBaseline(_Base):
    """The UTCI-band rule (:func:`physics_rule`).

    ``predict`` is the rule itself. ``predict_proba`` (needed for log-loss, Brier and
    the reliability diagram) is the training share of each vote among training rows
    that got the same rule class, with add-one (Laplace) smoothing; rows without
    UTCI get the overall training shares.
    """

    def __init__(self, target: str = "comfort", utci_column: str = C.UTCI_C):
        self.target = target
        self.utci_column = utci_column

    def _rule(self, X) -> np.ndarray:
        if self.utci_column not in X.columns:
            raise InputError(f"column '{self.utci_column}' is missing", where="physics rule X",
                             fix="add the environment (walkcomfort thermal) before modelling")
        return physics_rule(X[self.utci_column].to_numpy(), self.target)

    def fit(self, X, y, groups=None):
        labels, _ = self._labels(y)
        self.classes_ = np.array(check_target(self.target), dtype=object)
        rule = self._rule(X)
        k = len(self.classes_)
        table = {}
        for r in self.classes_:
            sel = rule == r
            counts = np.array([np.sum(labels[sel] == c) for c in self.classes_], dtype=float) + 1.0
            table[r] = counts / counts.sum()
        overall = np.array([np.sum(labels == c) for c in self.classes_], dtype=float) + 1.0
        self.table_ = table
        self.overall_ = overall / overall.sum()
        self.n_classes_ = k
        return self

    def predict_proba(self, X) -> np.ndarray:
        self._check_fitted()
        rule = self._rule(X)
        return np.array([self.table_.get(r, self.overall_) if r is not None else self.overall_ for r in rule])

    def predict(self, X) -> np.ndarray:
        self._check_fitted()
        rule = self._rule(X)
        fallback = self.classes_[int(np.argmax(self.overall_))]
        return np.array([r if r is not None else fallback for r in rule], dtype=object)


class LogisticBaseline(_Base):
    """Multinomial logistic regression on current conditions only (:data:`CURRENT_FEATURES`).

    Median imputation, standardisation, no class weights (probabilities stay vote shares,
    comparable with the other models').
    """

    def __init__(self, target: str = "comfort", features=CURRENT_FEATURES, C_reg: float = 1.0,
                 random_state: int = 0):
        self.target = target
        self.features = features
        self.C_reg = C_reg
        self.random_state = random_state

    def _matrix(self, X):
        from walkcomfort.model.classifier import feature_matrix

        return feature_matrix(X, list(self.features), where="logistic baseline X")

    def fit(self, X, y, groups=None):
        from sklearn.impute import SimpleImputer
        from sklearn.linear_model import LogisticRegression
        from sklearn.pipeline import make_pipeline
        from sklearn.preprocessing import StandardScaler

        labels, present = self._labels(y)
        arr = self._matrix(X)
        codes = np.array([present.index(v) for v in labels])
        self.pipeline_ = make_pipeline(
            SimpleImputer(strategy="median", keep_empty_features=True), StandardScaler(),
            LogisticRegression(C=self.C_reg, max_iter=2000,
                               random_state=self.random_state))
        if len(present) == 1:
            self.constant_ = True
        else:
            self.constant_ = False
            self.pipeline_.fit(arr, codes)
        self.classes_ = np.array(present, dtype=object)
        return self

    def predict_proba(self, X) -> np.ndarray:
        self._check_fitted()
        arr = self._matrix(X)
        if self.constant_:
            return np.ones((len(arr), 1))
        return self.pipeline_.predict_proba(arr)


class OrdinalUTCIBaseline(_Base):
    """Cumulative logit of the ordered vote on UTCI alone, cut points learned from the training votes.

    ``P(vote ≤ k) = F(θ_k − β·UTCI)`` (:mod:`walkcomfort.model.ordinal`); after fitting,
    ``cut_points_c_`` holds the UTCI [°C] at each class boundary (θ_k / β). Rows without
    UTCI get the training class shares. This is the strongest baseline a band rule can be:
    the same single input as :func:`physics_rule`, with the band edges fitted to the voters.
    """

    def __init__(self, target: str = "comfort", utci_column: str = C.UTCI_C):
        self.target = target
        self.utci_column = utci_column

    def _utci(self, X) -> np.ndarray:
        if self.utci_column not in X.columns:
            raise InputError(f"column '{self.utci_column}' is missing", where="ordinal baseline X",
                             fix="add the environment (walkcomfort thermal) before modelling")
        return pd.to_numeric(X[self.utci_column], errors="coerce").to_numpy(dtype=float, na_value=np.nan)

    def fit(self, X, y, groups=None):
        from walkcomfort.model.ordinal import fit_cumulative_logit

        labels, present = self._labels(y)
        u = self._utci(X)
        codes = np.array([present.index(v) for v in labels], dtype=np.int64)
        self.classes_ = np.array(present, dtype=object)
        counts = np.bincount(codes, minlength=len(present)).astype(float)
        self.prior_ = counts / counts.sum()
        ok = np.isfinite(u)
        self.fit_ = None
        if len(present) >= 2 and ok.sum() >= 2 and len(set(codes[ok])) >= 2:
            self.fit_ = fit_cumulative_logit(u[ok], codes[ok], len(present))
        self.cut_points_c_ = list(self.fit_["cut_points"]) if self.fit_ else []
        return self

    def predict_proba(self, X) -> np.ndarray:
        from walkcomfort.model.ordinal import cumulative_logit_proba

        self._check_fitted()
        u = self._utci(X)
        out = np.tile(self.prior_, (len(u), 1))
        ok = np.isfinite(u)
        if self.fit_ is not None and ok.any():
            out[ok] = cumulative_logit_proba(u[ok], self.fit_["slope"], self.fit_["thresholds"])
        return out
