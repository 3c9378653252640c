"""A saved comfort model: a folder with the booster as LightGBM text and a JSON manifest.

Layout::

    BUNDLE/
      model.txt        the booster in LightGBM's own text format
      manifest.json    schema, features, classes, parameters, digests, versions, CV metrics

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
from walkcomfort.model.classifier import ComfortClassifier

SCHEMA = "walkcomfort-model/1"
MODEL_FILE = "model.txt"
MANIFEST_FILE = "manifest.json"


class BundleVersionWarning(DataQualityWarning):
    """A bundle was written by another walkcomfort / scikit-learn / numpy version."""


def _versions() -> dict:
    return _io.package_versions(("walkcomfort", "lightgbm", "numpy", "pandas", "scikit-learn"))


def save_bundle(model: ComfortClassifier, folder: str | os.PathLike, training_digest: str | None = None,
                cv_metrics: dict | None = None, extra: dict | None = None) -> Path:
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
    import lightgbm as lgb

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
    booster = lgb.Booster(model_str=model_path.read_text(encoding="utf-8"))
    features = list(manifest["features"])
    if booster.feature_name() != features:
        raise InputError("the booster's feature names differ from the manifest's", where=model_path,
                         fix="re-run 'walkcomfort fit'")
    est = dict(manifest.get("estimator", {}))
    model = ComfortClassifier(**{k: v for k, v in est.items() if k in ComfortClassifier().get_params()})
    model.features = features
    model.booster_ = booster
    model.classes_ = np.array(manifest["classes"], dtype=object)
    model.feature_names_in_ = np.array(features, dtype=object)
    model.n_features_in_ = len(features)
    model.n_train_rows_ = manifest.get("n_train_rows")
    model.n_groups_ = manifest.get("n_train_groups")
    model.params_ = manifest.get("lightgbm_params")
    model.n_rounds_ = manifest.get("n_rounds")
    model.manifest_ = manifest
    model.bundle_digest_ = digest
    return model
