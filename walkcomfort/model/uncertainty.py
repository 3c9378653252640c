"""How far a model-based difference could move if other walkers had voted: intervals from the fold models.

Every validation fold fits the model without one walker (leave-one-walker-out) or without
a group of walkers (grouped K-fold). Those fold models are *delete-a-group jackknife*
replicates of the shipped model: any quantity computed with the shipped model (a
scheme's change in expected comfortable minutes, a segment's change in comfortable hours)
can be recomputed with each fold model, and the spread of the K replicates gives its
standard error

``se = sqrt((K − 1)/K · Σ_k (θ_k − θ̄)²)``

(Quenouille–Tukey jackknife; for groups of units, Kott 2001, "The delete-a-group
jackknife", Journal of Official Statistics 17(4):521–526 — from memory). The interval is
``θ ± t_{K−1} · se`` (Student t with K − 1 degrees of freedom). It carries the model's
uncertainty about *who* voted; the simulated walk, the weather and the scene are taken as
given, so a quantity that does not depend on the model (shade share, UTCI, heat dose)
gets a zero-width interval. The jackknife can understate the spread of a step-wise
learner such as boosted trees; read a narrow interval with that in mind.
"""

from __future__ import annotations

import numpy as np


def jackknife_interval(estimate, replicates, level: float = 0.95) -> tuple[np.ndarray, np.ndarray]:
    """Delete-a-group jackknife interval around ``estimate`` from ``replicates`` (K, ...).

    Parameters
    ----------
    estimate : array-like
        The quantity computed with the full model, shape ``S``.
    replicates : array-like
        The same quantity computed with each of the K fold models, shape ``(K, *S)``.
    level : float
        Two-sided coverage (0.95 for a 95 % interval).

    Returns
    -------
    (lo, hi) : ndarray
        Shape ``S``; NaN where fewer than 2 replicates or any replicate is NaN.
    """
    from scipy.stats import t as student_t

    est = np.asarray(estimate, dtype=float)
    rep = np.asarray(replicates, dtype=float)
    k = rep.shape[0] if rep.ndim else 0
    if k < 2:
        nan = np.full(est.shape, np.nan)
        return nan, nan.copy()
    mean = rep.mean(axis=0)
    se = np.sqrt((k - 1) / k * np.sum((rep - mean) ** 2, axis=0))
    q = float(student_t.ppf(1 - (1 - level) / 2, k - 1))
    return est - q * se, est + q * se


def includes_zero(lo, hi):
    """True where the interval [lo, hi] includes 0 (NaN bounds give NaN)."""
    lo = np.asarray(lo, dtype=float)
    hi = np.asarray(hi, dtype=float)
    out = ((lo <= 0) & (hi >= 0)).astype(float)
    return np.where(np.isnan(lo) | np.isnan(hi), np.nan, out)


def fold_probabilities(model, X, classes) -> np.ndarray | None:
    """Class probabilities of every fold model of ``model`` on feature rows ``X``.

    Returns
    -------
    ndarray or None
        Shape (K, rows, len(classes)), columns in ``classes`` order (a class a fold model
        never saw gets 0); None when the model carries no fold models (``fold_models_``).
    """
    folds = list(getattr(model, "fold_models_", None) or [])
    if len(folds) < 2:
        return None
    arr = model._matrix(X)
    out = np.zeros((len(folds), len(arr), len(classes)))
    pos = {str(c): i for i, c in enumerate(classes)}
    for k, fm in enumerate(folds):
        p = fm.proba_from_matrix(arr)
        for j, c in enumerate(fm.classes_):
            if str(c) in pos:
                out[k, :, pos[str(c)]] = p[:, j]
    return out
