"""A saved comfort model: a folder with the booster as LightGBM text and a JSON manifest.

Layout::

    BUNDLE/
      model.txt        the booster in LightGBM's own text format
      manifest.json    schema, features, classes, parameters, digests, versions, CV metrics
      folds/fold_<k>.txt  the model of each validation fold (fitted without the walkers that
                       fold held out), for the intervals on scheme differences (optional)

No pickle: both files are plain text a person can read. Loading checks that
``model.txt`` is the file the manifest describes (its digest), that its feature
list matches, and that the LightGBM version that wrote it is the one installed
(the text format and its predictions are only promised within a version).
"""

from __future__ import annotations

import json
import os
import warnings
from pathlib import Path

import numpy as np

from walkcomfort import _io
from walkcomfort.errors import DataQualityWarning, InputError
from walkcomfort.model.classifier import THRESHOLD_FEATURE, ComfortClassifier

SCHEMA = "walkcomfort-model/1"
MODEL_FILE = "model.txt"
MANIFEST_FILE = "manifest.json"
FOLDS_DIR = "folds"


class BundleVersionWarning(DataQualityWarning):
    """A bundle was written by another walkcomfort / scikit-learn / numpy version."""


def _versions() -> dict:
    return _io.package_versions(("walkcomfort", "lightgbm", "numpy", "pandas", "scikit-learn"))


def save_bundle(model: ComfortClassifier, folder: str | os.PathLike, training_digest: str | None = None,
                cv_metrics: dict | None = None, extra: dict | None = None, fold_models=(),
                fold_held_out=()) -> Path:
    """Write ``model`` to ``folder`` (created; existing bundle files are replaced atomically).

    Parameters
    ----------
    model : ComfortClassifier
        A fitted model.
    folder : path
    training_digest : str, optional
        Digest of the training table (:attr:`TrainingTable.digest`).
    cv_metrics : dict, optional
        Grouped cross-validation results (:meth:`CVResult.to_json`).
    extra : dict, optional
        Anything else JSON-able to keep (e.g. calibration summary, input list).
    fold_models : sequence of ComfortClassifier, optional
        The model of each validation fold (written to ``folds/fold_<k>.txt``).
    fold_held_out : sequence of list of str, optional
        The walkers each fold held out (same order).

    Returns
    -------
    pathlib.Path
        The manifest path.
    """
    model._check_fitted()
    folder = Path(folder)
    text = model.booster_.model_to_string()
    model_path = _io.atomic_write_text(folder / MODEL_FILE, text)
    classes = [c if isinstance(c, str) else int(c) for c in model.classes_]
    manifest = {
        "schema": SCHEMA,
        "target": model.target,
        "classes": classes,
        "features": [str(f) for f in model.feature_names_in_],
        "estimator": {k: v for k, v in model.get_params().items() if k != "features"},
        "lightgbm_params": model.params_,
        "n_rounds": model.n_rounds_,
        "n_train_rows": model.n_train_rows_,
        "n_train_groups": model.n_groups_,
        "model_digest": _io.file_digest(model_path),
        "training_digest": training_digest,
        "versions": _versions(),
        "cv": cv_metrics,
        "extra": extra or {},
    }
    folds = []
    held = list(fold_held_out) or [[] for _ in fold_models]
    for k, (fm, out) in enumerate(zip(fold_models, held, strict=True)):
        path = _io.atomic_write_text(folder / FOLDS_DIR / f"fold_{k}.txt", fm.booster_.model_to_string())
        folds.append({"file": f"{FOLDS_DIR}/fold_{k}.txt", "digest": _io.file_digest(path),
                      "classes": [c if isinstance(c, str) else int(c) for c in fm.classes_],
                      "held_out": [str(g) for g in out]})
    if folds:
        manifest["fold_models"] = folds
    return _io.write_json(folder / MANIFEST_FILE, manifest)


def read_manifest(folder: str | os.PathLike) -> dict:
    folder = Path(folder)
    path = folder / MANIFEST_FILE
    if not path.is_file():
        raise InputError(f"no {MANIFEST_FILE} in {folder}", where=folder,
                         fix="point to a folder written by 'walkcomfort fit'")
    try:
        manifest = json.loads(path.read_text(encoding="utf-8"))
    except json.JSONDecodeError as exc:
        raise InputError(f"manifest is not valid JSON ({exc.msg})", where=_where(path, exc.lineno),
                         fix="re-run 'walkcomfort fit'") from None
    if manifest.get("schema") != SCHEMA:
        raise InputError(f"manifest schema {manifest.get('schema')!r} is not {SCHEMA!r}", where=path,
                         fix="re-fit the model with this walkcomfort version")
    return manifest


def _where(path, line):
    from walkcomfort.errors import where

    return where(path, line=line)


def load_bundle(folder: str | os.PathLike, check_versions: bool = True) -> ComfortClassifier:
    """Load a bundle written by :func:`save_bundle`, verifying digest, features and versions.

    Raises
    ------
    InputError
        Missing files, a model file that is not the one the manifest describes, a
        feature list that differs, or a different LightGBM version (unless
        ``check_versions=False``).
    """
    folder = Path(folder)
    manifest = read_manifest(folder)
    model_path = folder / MODEL_FILE
    if not model_path.is_file():
        raise InputError(f"no {MODEL_FILE} in {folder}", where=folder, fix="copy the whole bundle folder")
    digest = _io.file_digest(model_path)
    if digest != manifest.get("model_digest"):
        raise InputError(f"{MODEL_FILE} digest {digest} differs from the manifest's {manifest.get('model_digest')}",
                         where=model_path, fix="the model file was changed or mixed up; re-run 'walkcomfort fit'")
    saved = manifest.get("versions", {})
    now = _versions()
    if check_versions and saved.get("lightgbm") != now.get("lightgbm"):
        raise InputError(f"bundle was written by LightGBM {saved.get('lightgbm')}, installed is {now.get('lightgbm')}",
                         where=folder / MANIFEST_FILE,
                         fix=f"pip install lightgbm=={saved.get('lightgbm')}, or re-fit the model")
    others = [f"{k} {saved.get(k)} → {now.get(k)}" for k in ("walkcomfort", "numpy", "scikit-learn")
              if saved.get(k) != now.get(k)]
    if check_versions and others:
        warnings.warn(f"{folder}: bundle written with other versions ({', '.join(others)})",
                      BundleVersionWarning, stacklevel=2)
    features = list(manifest["features"])
    est = dict(manifest.get("estimator", {}))
    # a bundle written before the cumulative formulation existed is a multiclass booster
    est.setdefault("formulation", "multiclass")
    model = _restore(model_path.read_text(encoding="utf-8"), est, manifest["classes"], features, model_path)
    model.n_train_rows_ = manifest.get("n_train_rows")
    model.n_groups_ = manifest.get("n_train_groups")
    model.params_ = manifest.get("lightgbm_params")
    model.n_rounds_ = manifest.get("n_rounds")
    model.manifest_ = manifest
    model.bundle_digest_ = digest
    model.fold_models_ = []
    for info in manifest.get("fold_models") or []:
        path = folder / info["file"]
        if not path.is_file():
            raise InputError(f"the fold model {info['file']} named in the manifest is missing", where=folder,
                             fix="copy the whole bundle folder, or re-run 'walkcomfort fit'")
        if _io.file_digest(path) != info.get("digest"):
            raise InputError(f"{info['file']} digest differs from the manifest's", where=path,
                             fix="the fold model was changed or mixed up; re-run 'walkcomfort fit'")
        model.fold_models_.append(_restore(path.read_text(encoding="utf-8"), est, info["classes"], features, path))
    return model


def _restore(text: str, est: dict, classes, features: list, path) -> ComfortClassifier:
    import lightgbm as lgb

    booster = lgb.Booster(model_str=text)
    model = ComfortClassifier(**{k: v for k, v in est.items() if k in ComfortClassifier().get_params()})
    expected = [*features, THRESHOLD_FEATURE] if model.is_cumulative else features
    if booster.feature_name() != expected:
        raise InputError("the booster's feature names differ from the manifest's", where=path,
                         fix="re-run 'walkcomfort fit'")
    model.features = features
    model.booster_ = booster
    model.classes_ = np.array(classes, dtype=object)
    model.feature_names_in_ = np.array(features, dtype=object)
    model.n_features_in_ = len(features)
    return model
