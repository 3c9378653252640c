"""The fit workflow behind ``walkcomfort fit`` / ``evaluate``: timelines in, validated bundle out.

Kept apart from the click commands so it can be called from Python (the demo
pipeline does) and tested without a shell.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from walkcomfort import _io
from walkcomfort import columns as C
from walkcomfort.environment.indices import with_pet
from walkcomfort.errors import InputError
from walkcomfort.model.evaluate import (
    MODEL_NAMES,
    CVResult,
    TrainingTable,
    classification_metrics,
    cross_validate,
    group_scores,
    training_table,
)

TIMELINE_FILE = "timeline.parquet"
REPORT_FILE = "report.html"
METRICS_FILE = "metrics.json"
OOF_FILE = "oof_predictions.parquet"


def load_campaign(paths, index: str = "utci") -> tuple[pd.DataFrame, list[Path]]:
    """Read and stack timelines (``session.timeline.read_timeline`` + ``combine_campaign``).

    ``index="pet"``: every timeline gets ``pet_c`` (kept when ``thermal --extra-index pet`` wrote it,
    else computed from its environment columns, :func:`walkcomfort.environment.indices.with_pet`).
    """
    from walkcomfort.session.timeline import combine_campaign, find_timelines, read_timeline

    files = find_timelines(paths)
    if not files:
        raise InputError("no timelines given", fix="pass timeline folders written by `walkcomfort thermal`")
    frames = []
    for f in files:
        df = read_timeline(f)
        if C.UTCI_C not in df.columns:
            raise InputError("the timeline has no UTCI column (utci_c)", where=f,
                             fix="add the thermal environment first: `walkcomfort thermal`")
        frames.append(with_pet(df) if index == "pet" else df)
    return combine_campaign(frames), files


@dataclass
class FitResult:
    """Everything ``walkcomfort fit`` learns and reports."""

    model: object
    table: TrainingTable
    cv: CVResult
    in_sample: dict
    per_walker: pd.DataFrame
    per_group: dict              # attribute -> DataFrame of group scores (cross-validated)
    calibration: dict
    settings: dict
    inputs: list

    def manifest_extra(self) -> dict:
        return {"settings": self.settings, "in_sample": _strip(self.in_sample),
                "calibration": {k: self.calibration[k] for k in ("neutral", "range", "ci", "reference_band_c")
                                if k in self.calibration},
                "inputs": self.inputs}


def _strip(m: dict) -> dict:
    return {k: v for k, v in m.items() if k != "reliability"}


def fit_table(table: TrainingTable, preset: str = "small", n_splits: int | None = None,
              n_estimators: int | None = None, seed: int = 0, n_jobs: int = 1, n_boot: int = 200,
              progress: bool | None = None, inputs=(), feature_set: str = "all") -> FitResult:
    """Grouped CV of the history model and baselines, final fit on all votes, calibration analysis.

    ``feature_set`` names one of :data:`walkcomfort.model.features.FEATURE_SETS`.
    """
    from walkcomfort.model.calibration import local_calibration
    from walkcomfort.model.classifier import ComfortClassifier

    if len(table.y) == 0:
        raise InputError("the timelines hold no usable votes", fix="ingest sessions with a votes source")
    features = feature_list(feature_set)
    settings = {"preset": preset, "n_splits": n_splits, "n_estimators": n_estimators, "seed": seed,
                "n_jobs": n_jobs, "target": table.target, "n_boot": n_boot, "feature_set": feature_set,
                "index": "pet" if feature_set.endswith("-pet") else "utci"}
    cv = cross_validate(table, n_splits=n_splits, progress=progress, preset=preset, n_estimators=n_estimators,
                        random_state=seed, n_jobs=n_jobs, features=features, seed=seed)
    model = ComfortClassifier(preset=preset, target=table.target, n_estimators=n_estimators,
                              features=features, random_state=seed, n_jobs=n_jobs)
    model.fit(table.X, table.y, groups=table.groups)
    from walkcomfort.model.baselines import OrdinalUTCIBaseline

    settings["ordinal_cut_points_c"] = OrdinalUTCIBaseline(target=table.target).fit(table.X, table.y).cut_points_c_
    in_sample = score_model(model, table, cv.labels)
    per_walker = group_scores(cv.y, cv.pred["history"], cv.groups)
    per_group = {}
    for attr in (C.AGE_BAND, C.ACCLIMATISED, C.CLO):
        if attr in table.attributes.columns and table.attributes[attr].notna().any():
            values = table.attributes[attr]
            if attr == C.ACCLIMATISED:
                values = values.map({1.0: "yes", 0.0: "no"})
            per_group[attr] = group_scores(cv.y, cv.pred["history"], values.to_numpy(dtype=object))
    utci = table.X[C.UTCI_C].to_numpy()
    tsv = table.tsv
    comfort = table.y if table.target == "comfort" else None
    if table.target == "tsv":
        tsv = table.y.astype(float)
    calibration = local_calibration(utci, tsv=tsv, comfort=comfort, groups=table.groups, n_boot=n_boot, seed=seed,
                                    progress=progress)
    return FitResult(model=model, table=table, cv=cv, in_sample=in_sample, per_walker=per_walker,
                     per_group=per_group, calibration=calibration, settings=settings, inputs=list(inputs))


def feature_list(feature_set: str) -> list[str]:
    from walkcomfort.model.features import FEATURE_SETS

    if feature_set not in FEATURE_SETS:
        raise InputError(f"feature set {feature_set!r} is not known; allowed: {', '.join(FEATURE_SETS)}",
                         fix="use 'all' for recorded walks or 'planned' for predictions along planned routes")
    return list(FEATURE_SETS[feature_set])


def score_model(model, table: TrainingTable, labels=None) -> dict:
    """Metrics of a fitted model on labelled rows (no refitting)."""
    from walkcomfort.model.evaluate import aligned_proba

    labels = labels or [c for c in model.classes_]
    proba = aligned_proba(model, table.X, labels)
    pred = np.array(labels, dtype=object)[np.argmax(proba, axis=1)]
    return classification_metrics(table.y, pred, proba, labels)


def read_oof_predictions(folder: str | os.PathLike) -> pd.DataFrame | None:
    """The bundle's out-of-fold predictions, or None when the bundle has none (fitted before they were kept).

    Raises
    ------
    InputError
        The file is there but is not the one the manifest describes (digest differs).
    """
    from walkcomfort.model.bundle import read_manifest

    folder = Path(folder)
    info = (read_manifest(folder).get("extra") or {}).get("oof_predictions")
    path = folder / OOF_FILE
    if not info or not path.is_file():
        return None
    digest = _io.file_digest(path)
    if digest != info.get("digest"):
        raise InputError(f"{OOF_FILE} digest {digest} differs from the manifest's {info.get('digest')}",
                         where=path, fix="re-run 'walkcomfort fit' to write the bundle again")
    return pd.read_parquet(path)


def campaign_table(paths, target: str = "comfort", index: str = "utci") -> tuple[TrainingTable, list[Path], pd.DataFrame]:
    campaign, files = load_campaign(paths, index=index)
    table = training_table(campaign, target=target)
    return table, files, campaign


def oof_predictions(result: FitResult, model: str = "history") -> pd.DataFrame:
    """Out-of-fold predictions of every usable vote: each from the fold that held out its walker.

    Parameters
    ----------
    result : FitResult
        What :func:`fit_table` returns.
    model : str
        Which compared model's predictions (key of ``result.cv.pred``; the history model by default).

    Returns
    -------
    DataFrame
        One row per usable vote, in training-table order (index ``time`` UTC):
        ``walk_id, participant`` (the walker the folds group by), ``lat, lon`` [°] (NaN when
        the timelines had no position), ``vote, predicted``, ``p_<class>`` for each class of
        the validation, and ``fold`` (0-based index into the manifest's ``cv.folds``, whose
        ``test_groups`` name the walkers that fold held out).
    """
    cv, table = result.cv, result.table
    fold_of = {}
    for k, f in enumerate(cv.folds):
        for g in f["test_groups"]:
            fold_of[g] = k
    groups = np.asarray([str(g) for g in cv.groups], dtype=object)
    n = len(groups)
    index = table.X.index
    pos = table.position
    lat = pos[C.LAT].to_numpy(float) if pos is not None else np.full(n, np.nan)
    lon = pos[C.LON].to_numpy(float) if pos is not None else np.full(n, np.nan)
    labels = [str(v) for v in cv.labels]
    out = pd.DataFrame({C.WALK_ID: pd.array([str(w) for w in table.walk_id], dtype="string"),
                        C.PARTICIPANT: pd.array(groups, dtype="string"), C.LAT: lat, C.LON: lon,
                        "vote": pd.array([str(v) for v in cv.y], dtype="string"),
                        "predicted": pd.array([str(v) for v in cv.pred[model]], dtype="string")},
                       index=pd.DatetimeIndex(index, name="time"))
    proba = cv.proba[model]
    for j, lab in enumerate(labels):
        out[f"p_{lab}"] = proba[:, j]
    out["fold"] = np.array([fold_of[g] for g in groups], dtype="int64")
    return out


def write_fit_outputs(result: FitResult, folder: str | os.PathLike) -> dict:
    """Bundle (model.txt, manifest.json), ``oof_predictions.parquet``, metrics.json and report.html in ``folder``.

    The manifest records the out-of-fold file's digest and row count under
    ``extra.oof_predictions``, so a reader can tell it belongs to this bundle.
    """
    from walkcomfort.model.bundle import save_bundle
    from walkcomfort.model.classifier import ComfortClassifier
    from walkcomfort.model.report_page import write_model_report

    folder = Path(folder)
    cv_json = result.cv.to_json()
    oof = oof_predictions(result)
    oof_path = _io.write_parquet(folder / OOF_FILE, oof, metadata={
        "what": "out-of-fold predictions (walker-grouped cross-validation)", "scheme": result.cv.scheme,
        "model": "history", "training_digest": result.table.digest})
    extra = result.manifest_extra()
    extra["oof_predictions"] = {"file": OOF_FILE, "digest": _io.file_digest(oof_path), "rows": int(len(oof)),
                                "scheme": result.cv.scheme, "model": "history"}
    # the fold models are the delete-a-group replicates behind the intervals on scheme differences;
    # a fold that fell back to the majority class (one class in training) leaves no usable replicate
    usable = all(isinstance(m, ComfortClassifier) for m in result.cv.fold_models)
    manifest = save_bundle(result.model, folder, training_digest=result.table.digest, cv_metrics=cv_json,
                           extra=extra, fold_models=result.cv.fold_models if usable else (),
                           fold_held_out=[f["test_groups"] for f in result.cv.folds] if usable else ())
    metrics = _io.write_json(folder / METRICS_FILE, {
        "cv": cv_json, "in_sample": result.in_sample,
        "per_walker": result.per_walker.to_dict(orient="records"),
        "per_group": {k: v.to_dict(orient="records") for k, v in result.per_group.items()},
        "calibration": result.calibration,
    })
    report = write_model_report(result, folder / REPORT_FILE)
    return {"manifest": manifest, "metrics": metrics, "report": report, "oof": oof_path}


def metrics_rows(metrics: dict, names: dict | None = None) -> list[tuple[str, str, str, str, str, str]]:
    """Rows of the metrics table printed by the CLI and shown in the report (3 decimals, same text)."""
    names = names or MODEL_NAMES
    rows = []
    for key, m in metrics.items():
        rows.append((names.get(key, key), f"{m['macro_f1']:.3f}", f"{m['balanced_accuracy']:.3f}",
                     f"{m['accuracy']:.3f}", f"{m['log_loss']:.3f}", f"{m['brier']:.3f}"))
    return rows


METRICS_HEADER = ("model", "macro-F1", "balanced accuracy", "accuracy", "log-loss", "Brier")


def format_metrics(metrics: dict, names: dict | None = None) -> str:
    rows = [METRICS_HEADER] + metrics_rows(metrics, names)
    widths = [max(len(r[i]) for r in rows) for i in range(len(METRICS_HEADER))]
    lines = ["  ".join(c.ljust(w) if i == 0 else c.rjust(w) for i, (c, w) in enumerate(zip(r, widths, strict=False)))
             for r in rows]
    return "\n".join(lines)
