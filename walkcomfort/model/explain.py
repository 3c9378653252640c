"""Why the model said what it said: per-prediction feature contributions and reasons in words.

For the cumulative (ordinal) booster the contributions are those to the log-odds of
P(vote > k), one block per threshold k; the threshold input's own share is folded into the
expected value (it is the same for every row). For a multiclass booster,
LightGBM's ``pred_contrib=True`` returns the SHAP-style
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

from walkcomfort.model.features import DOSE_THRESHOLD_C, FAMILIES, FAMILY_OF, FEATURE_INFO


def contributions(model, X: pd.DataFrame, check: bool = True) -> np.ndarray:
    """Feature contributions to the raw scores.

    Shape (rows, classes, features + 1) for a multiclass model (each class's raw score), or
    (rows, classes − 1, features + 1) for the cumulative model (the log-odds of
    P(vote > k) per threshold k). ``[..., :-1]`` are the features in
    ``model.feature_names_in_`` order, ``[..., -1]`` the expected value. With ``check`` the
    sums are compared with the raw scores (``RuntimeError`` if they differ by more than 1e-6).
    """
    arr = model._matrix(X)
    k, f = len(model.classes_), len(model.feature_names_in_)
    cumulative = getattr(model, "is_cumulative", False)
    blocks = k - 1 if cumulative else k
    if len(arr) == 0:
        return np.zeros((0, blocks, f + 1))
    if cumulative:
        from walkcomfort.model.classifier import stack_thresholds

        stacked, _ = stack_thresholds(arr, k)
        raw_contrib = np.asarray(model.booster_.predict(stacked, pred_contrib=True), dtype=float)
        # (threshold, row, features + threshold + expected) -> fold the threshold input into the expected value
        c = raw_contrib.reshape(blocks, len(arr), f + 2)
        contrib = np.concatenate([c[..., :f], c[..., f:].sum(axis=2, keepdims=True)], axis=2).transpose(1, 0, 2)
        raw = np.asarray(model.booster_.predict(stacked, raw_score=True), dtype=float).reshape(blocks, len(arr)).T
    else:
        raw_contrib = np.asarray(model.booster_.predict(arr, pred_contrib=True), dtype=float)
        contrib = raw_contrib.reshape(len(arr), k, f + 1)
        raw = np.asarray(model.booster_.predict(arr, raw_score=True), dtype=float).reshape(len(arr), k) if check \
            else None
    if check:
        err = np.max(np.abs(contrib.sum(axis=2) - raw))
        if not err <= 1e-6:
            raise RuntimeError(f"feature contributions do not sum to the raw scores (max error {err:.3g})")
    return contrib


def toward_class(model, contrib: np.ndarray, cls_idx: np.ndarray) -> np.ndarray:
    """Per row, each feature's push towards the row's class ``cls_idx`` (rows, features).

    Multiclass: the contribution to that class's raw score. Cumulative: for the first class,
    minus the contribution to the log-odds of P(vote > first); for class j > 0, the
    contribution to the log-odds of P(vote > j − 1) (what lifted the vote to at least j).
    """
    rows = np.arange(len(contrib))
    if not getattr(model, "is_cumulative", False):
        return contrib[rows, cls_idx, :-1]
    first = cls_idx == 0
    block = np.where(first, 0, cls_idx - 1)
    return np.where(first[:, None], -1.0, 1.0) * contrib[rows, block, :-1]


def discomfort_push(model, contrib: np.ndarray) -> np.ndarray:
    """Per row and feature, the push towards a less comfortable class (rows, features).

    Cumulative: the contribution to the log-odds of P(vote above the first class);
    multiclass: last class's raw contribution minus the first's.
    """
    if getattr(model, "is_cumulative", False):
        return contrib[:, 0, :-1]
    return contrib[:, -1, :-1] - contrib[:, 0, :-1]


def family_contributions(model, X: pd.DataFrame, contrib: np.ndarray | None = None) -> pd.DataFrame:
    """Contributions summed by feature family (:data:`walkcomfort.model.features.FAMILIES`).

    Returns one column per family (the push towards a less comfortable class, in log-odds
    units for the cumulative model), index of ``X``. Individual features stay available
    through :func:`contributions`.
    """
    if contrib is None:
        contrib = contributions(model, X)
    push = discomfort_push(model, contrib)
    names = list(model.feature_names_in_)
    out = {}
    for fam in FAMILIES:
        cols = [j for j, n in enumerate(names) if FAMILY_OF.get(n) == fam]
        out[fam] = push[:, cols].sum(axis=1) if cols else np.zeros(len(push))
    return pd.DataFrame(out, index=X.index)


def main_factors(model, X: pd.DataFrame, classes=None, contrib: np.ndarray | None = None,
                 share: float = 0.3) -> list[str]:
    """The one or two feature families that pushed each row most towards its class, in words.

    A second family is named when its push is at least ``share`` of the first's. Each
    family is followed by its strongest measured feature, e.g.
    ``"current heat (UTCI here 34.2 °C), then heat history (heat dose 40 °C·min …)"``.
    """
    if contrib is None:
        contrib = contributions(model, X)
    cls_idx = _class_index(model, contrib, classes)
    push = toward_class(model, contrib, cls_idx)
    names = list(model.feature_names_in_)
    values = model._matrix(X)
    fam_idx = {fam: [j for j, n in enumerate(names) if FAMILY_OF.get(n) == fam] for fam in FAMILIES}
    fams = [f for f in FAMILIES if fam_idx[f]]
    sums = np.column_stack([push[:, fam_idx[f]].sum(axis=1) for f in fams]) if fams else np.zeros((len(push), 0))
    out = []
    for i in range(len(push)):
        order = np.argsort(-sums[i], kind="stable")
        picked = [o for o in order[:2] if sums[i, o] > 0]
        if len(picked) == 2 and sums[i, picked[1]] < share * sums[i, picked[0]]:
            picked = picked[:1]
        words = []
        for o in picked:
            cols = fam_idx[fams[o]]
            best = max(cols, key=lambda j: (np.isfinite(values[i, j]), push[i, j]))
            detail = _describe(names[best], values[i, best]) if np.isfinite(values[i, best]) else ""
            words.append(f"{fams[o]} ({detail})" if detail else fams[o])
        out.append(", then ".join(words) if words else "no single factor stands out")
    return out


def _class_index(model, contrib: np.ndarray, classes) -> np.ndarray:
    if classes is not None:
        pos = {c: i for i, c in enumerate(model.classes_)}
        return np.array([pos[c] for c in classes], dtype=np.int64)
    if getattr(model, "is_cumulative", False):
        from walkcomfort.model.classifier import cumulative_to_proba

        up = 1.0 / (1.0 + np.exp(-contrib.sum(axis=2)))
        return np.argmax(cumulative_to_proba(np.minimum.accumulate(up, axis=1)), axis=1)
    return np.argmax(contrib.sum(axis=2), axis=1)


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
    cls_idx = _class_index(model, contrib, classes)
    push = toward_class(model, contrib, cls_idx)
    names = list(model.feature_names_in_)
    values = model._matrix(X)
    out = []
    for i in range(len(contrib)):
        row = push[i]
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
