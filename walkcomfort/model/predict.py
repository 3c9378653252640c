"""Comfort predictions for any timeline (recorded or simulated): the model stage's public entry point.

:func:`predict_timeline` builds the features, applies a fitted model (or a bundle
folder) and returns the per-row prediction columns of the route prediction table
(DEVELOPERS.md, "Model" and "Routes" contracts).
"""

from __future__ import annotations

import os

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.environment.indices import with_pet
from walkcomfort.errors import InputError
from walkcomfort.model.features import build_features, uses_pet

PROBA_COLUMNS = {c: f"p_{c}" for c in C.COMFORT_CLASSES}
COMFORT_CLASS = "comfort_class"
PREDICTOR = "predictor"
REASONS = "reasons"
#: The one or two feature families that pushed the point most towards its class, in words.
MAIN_FACTORS = "main_factors"


def predictor_label(model) -> str:
    """``"model:sha256:<first 16 hex>"`` of the booster (the bundle's model digest when loaded)."""
    digest = getattr(model, "bundle_digest_", None)
    if not digest:
        import hashlib

        digest = "sha256:" + hashlib.sha256(model.booster_.model_to_string().encode()).hexdigest()
    algo, _, hexd = str(digest).partition(":")
    return f"model:{algo}:{hexd[:16]}"


def predict_timeline(model, timeline: pd.DataFrame, reasons: bool = True, n_reasons: int = 3,
                     participants: dict | None = None) -> pd.DataFrame:
    """Per-row comfort probabilities, class and reasons for a timeline (see :func:`predict_timeline_folds`)."""
    return predict_timeline_folds(model, timeline, reasons, n_reasons, participants, folds=False)[0]


def predict_timeline_folds(model, timeline: pd.DataFrame, reasons: bool = True, n_reasons: int = 3,
                           participants: dict | None = None, folds: bool = True):
    """Per-row comfort probabilities, class and reasons for a timeline.

    Parameters
    ----------
    model : ComfortClassifier or path
        A fitted 3-class comfort model, or a bundle folder written by ``walkcomfort fit``.
    timeline : pandas.DataFrame
        One walk or several (``walk_id``) with the environment columns.
    reasons : bool
        Fill ``reasons`` from the feature contributions (costs one more pass).
    n_reasons : int
        Reasons per row, joined by ``"; "``.
    participants : dict, optional
        Walker attributes when not in the timeline (see :func:`build_features`).
    folds : bool
        Also give the probabilities of the bundle's fold models (the features are built once).

    Returns
    -------
    (pandas.DataFrame, ndarray or None)
        The table: index of ``timeline``; ``p_comfortable, p_neutral, p_uncomfortable`` (sum to 1),
        ``comfort_class``, ``predictor`` (``"model:<digest>"``), ``reasons``, and
        ``main_factors`` (the one or two feature families behind the class, in words; empty
        without ``reasons``). Then the fold models' probabilities, shape (folds, rows, 3) in
        ``comfortable, neutral, uncomfortable`` order
        (:func:`walkcomfort.model.uncertainty.fold_probabilities`), or None without fold models
        or with ``folds=False``.
    """
    if isinstance(model, (str, os.PathLike)):
        from walkcomfort.model.bundle import load_bundle

        model = load_bundle(model)
    model._check_fitted()
    if getattr(model, "target", "comfort") != "comfort":
        raise InputError(f"the model predicts the {model.target!r} target, not the 3-class comfort vote",
                         fix="use a bundle fitted with --target comfort")
    if uses_pet(model):  # a model fitted on PET: the timeline's PET, computed from its environment if absent
        timeline = with_pet(timeline)
    X = build_features(timeline, participants)
    proba = model.predict_proba(X)
    classes = [str(c) for c in model.classes_]
    out = pd.DataFrame(index=timeline.index)
    for c, name in PROBA_COLUMNS.items():
        out[name] = proba[:, classes.index(c)] if c in classes else 0.0
    p = out[list(PROBA_COLUMNS.values())].to_numpy()
    out[COMFORT_CLASS] = np.array(C.COMFORT_CLASSES, dtype=object)[np.argmax(p, axis=1)] if len(p) else []
    out[PREDICTOR] = predictor_label(model)
    if reasons and len(X):
        from walkcomfort.model.explain import contributions, main_factors, top_reasons

        contrib = contributions(model, X)
        cls = [c for c in out[COMFORT_CLASS]]
        words = top_reasons(model, X, n=n_reasons, classes=cls, contrib=contrib)
        out[REASONS] = ["; ".join(r) for r in words]
        out[MAIN_FACTORS] = main_factors(model, X, classes=cls, contrib=contrib)
    else:
        out[REASONS] = ""
        out[MAIN_FACTORS] = ""
    fold_proba = None
    if folds:
        from walkcomfort.model.uncertainty import fold_probabilities

        fold_proba = fold_probabilities(model, X, C.COMFORT_CLASSES)
    return out, fold_proba
