"""Why the model said what it said: per-prediction feature contributions and reasons in words.

LightGBM's ``pred_contrib=True`` returns, for a multiclass booster, the SHAP-style
contributions of every feature to every class's raw score (TreeSHAP, Lundberg et
al. 2020, doi:10.1038/s42256-019-0138-9), laid out as one block of
``features + 1`` columns per class (the last column of each block is the expected
value). :func:`contributions` reshapes that to ``(rows, classes, features + 1)``
and checks that each block sums to the class's raw score, so a layout change in
LightGBM cannot go unnoticed.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from walkcomfort.model.features import DOSE_THRESHOLD_C, FEATURE_INFO


def contributions(model, X: pd.DataFrame, check: bool = True) -> np.ndarray:
    """Feature contributions to each class's raw score, shape (rows, classes, features + 1).

    ``[..., :-1]`` are the features in ``model.feature_names_in_`` order, ``[..., -1]``
    the expected value. With ``check`` the sums are compared with the raw scores
    (``RuntimeError`` if they differ by more than 1e-6).
    """
    arr = model._matrix(X)
    k, f = len(model.classes_), len(model.feature_names_in_)
    if len(arr) == 0:
        return np.zeros((0, k, f + 1))
    raw_contrib = np.asarray(model.booster_.predict(arr, pred_contrib=True), dtype=float)
    contrib = raw_contrib.reshape(len(arr), k, f + 1)
    if check:
        raw = np.asarray(model.booster_.predict(arr, raw_score=True), dtype=float).reshape(len(arr), k)
        err = np.max(np.abs(contrib.sum(axis=2) - raw))
        if not err <= 1e-6:
            raise RuntimeError(f"feature contributions do not sum to the raw scores (max error {err:.3g})")
    return contrib


def _describe(name: str, value: float) -> str:
    text, unit = FEATURE_INFO.get(name, (name.replace("_", " "), ""))
    if np.isnan(value):
        return f"{text}: not measured"
    if name == "in_sun":
        return "in direct sun here" if value >= 0.5 else "in shade here"
    if name == "acclimatised":
        return "walker acclimatised to heat" if value >= 0.5 else "walker not acclimatised to heat"
    if name.startswith("sun_min_"):
        w = name.removeprefix("sun_min_").removesuffix("min")
        return f"{value:.1f} of the last {w} min in full sun"
    if name == "sun_streak_min":
        return f"{value:.1f} min in full sun before this point" if value > 0 else "in shade here"
    if name.startswith("heat_dose_"):
        w = name.removeprefix("heat_dose_").removesuffix("min")
        return f"heat dose {value:.0f} °C·min above UTCI {DOSE_THRESHOLD_C:g} °C in the last {w} min"
    if name == "since_sun_shade_change_s":
        return f"{value / 60:.1f} min since stepping between sun and shade"
    if name.startswith("utci_contrast_"):
        w = name.removeprefix("utci_contrast_").removesuffix("min")
        if value >= 0:
            return f"the last {w} min were {value:.1f} °C hotter (UTCI) than here"
        return f"here is {-value:.1f} °C hotter (UTCI) than the last {w} min"
    if name == "age_band_lower":
        return f"age band from {value:.0f} years"
    if unit == "-" and "_frac" in name:
        return f"{text} {100 * value:.0f} %"
    if unit == "log10 lx":
        lux = 10.0 ** value - 1.0
        return f"{text.replace(' (log10 lux)', '')} {lux:,.0f} lx"
    digits = 0 if unit in ("°C·min", "dB(A)", "%") else 1
    unit_text = "" if unit in ("-", "") else f" {unit}"
    return f"{text} {value:.{digits}f}{unit_text}"


def top_reasons(model, X: pd.DataFrame, n: int = 3, classes=None, contrib: np.ndarray | None = None) -> list[list[str]]:
    """The ``n`` features that pushed each row most towards its class, in words.

    Parameters
    ----------
    model : ComfortClassifier
    X : pandas.DataFrame
        Feature rows.
    n : int
        Reasons per row.
    classes : array-like, optional
        The class to explain per row (default: the predicted class).
    contrib : ndarray, optional
        Precomputed :func:`contributions` (saves a second pass).

    Returns
    -------
    list of list of str
        e.g. ``["4.8 of the last 5 min in full sun", "UTCI here 34.2 °C", ...]``.
    """
    if contrib is None:
        contrib = contributions(model, X)
    if classes is None:
        cls_idx = np.argmax(contrib.sum(axis=2), axis=1)
    else:
        pos = {c: i for i, c in enumerate(model.classes_)}
        cls_idx = np.array([pos[c] for c in classes])
    names = list(model.feature_names_in_)
    values = model._matrix(X)
    out = []
    for i in range(len(contrib)):
        row = contrib[i, cls_idx[i], :-1]
        order = np.argsort(-row, kind="stable")
        # a missing sensor value can push a prediction too (LightGBM's missing branch), but
        # "not measured" explains little: measured reasons first, missing ones only to fill up
        measured = [j for j in order if row[j] > 0 and np.isfinite(values[i, j])]
        missing = [j for j in order if row[j] > 0 and not np.isfinite(values[i, j])]
        reasons = [_describe(names[j], values[i, j]) for j in (measured + missing)[:n]]
        out.append(reasons)
    return out


def importance_table(model) -> pd.DataFrame:
    """Gain importance per feature (share of the total), largest first."""
    gain = model.feature_importances_
    total = gain.sum() or 1.0
    df = pd.DataFrame({"feature": list(model.feature_names_in_), "gain": gain, "share": gain / total})
    df["meaning"] = [FEATURE_INFO.get(f, (f, ""))[0] for f in df["feature"]]
    return df.sort_values("gain", ascending=False, kind="stable").reset_index(drop=True)
