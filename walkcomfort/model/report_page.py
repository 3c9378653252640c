"""The model report: one self-contained HTML page (plots embedded as PNG) for a fitted comfort model.

Rendered here, in the model stage, because ``walkcomfort fit`` writes it into every bundle
and the model stage may not import the report stage; :mod:`walkcomfort.report.model_report`
re-exports it.

Shows what a reviewer asks for: how the model was validated (walkers it never
saw), how it compares with simple baselines, how calibrated its probabilities are,
how it scores per walker and per group, which features it leans on, and what
the votes say about UTCI locally, with a plain-language summary and the caution
that this is a research tool, not a safety tool.
"""

from __future__ import annotations

import base64
import html
import io
import os
from pathlib import Path

import numpy as np
import pandas as pd

from walkcomfort import _io
from walkcomfort._html import with_policy

CAUTION = (
    "This model describes how the walkers in this campaign voted; it is not a heat-safety tool. "
    "Do not use it to decide whether a walk, a work shift or an event is safe in heat: follow local "
    "heat-health warnings, occupational-health guidance and the judgement of qualified professionals. "
    "Design decisions based on it remain subject to local codes and licensed professional practice."
)


def _png(fig) -> str:
    import matplotlib.pyplot as plt

    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=110, bbox_inches="tight", metadata={"Software": None})
    plt.close(fig)
    return "data:image/png;base64," + base64.b64encode(buf.getvalue()).decode("ascii")


def _img(src: str, alt: str) -> str:
    return f'<img src="{src}" alt="{html.escape(alt)}">'


def _table(df: pd.DataFrame, floatfmt: str = "{:.3f}") -> str:
    head = "".join(f"<th>{html.escape(str(c))}</th>" for c in df.columns)
    rows = []
    for _, r in df.iterrows():
        cells = []
        for v in r:
            if isinstance(v, (float, np.floating)):
                cells.append(f"<td class=num>{'–' if not np.isfinite(v) else floatfmt.format(v)}</td>")
            else:
                cells.append(f"<td>{html.escape(str(v))}</td>")
        rows.append("<tr>" + "".join(cells) + "</tr>")
    return f"<table><thead><tr>{head}</tr></thead><tbody>{''.join(rows)}</tbody></table>"


def confusion_figure(metrics: dict, title: str):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    cm = np.asarray(metrics["confusion"], dtype=float)
    labels = metrics["labels"]
    fig, ax = plt.subplots(figsize=(4.6, 3.8))
    share = cm / np.maximum(cm.sum(axis=1, keepdims=True), 1)
    ax.imshow(share, cmap="Blues", vmin=0, vmax=1)
    for i in range(cm.shape[0]):
        for j in range(cm.shape[1]):
            ax.text(j, i, f"{int(cm[i, j])}\n{100 * share[i, j]:.0f} %", ha="center", va="center",
                    color="white" if share[i, j] > 0.6 else "black", fontsize=8)
    ax.set_xticks(range(len(labels)), labels, rotation=20)
    ax.set_yticks(range(len(labels)), labels)
    ax.set_xlabel("predicted")
    ax.set_ylabel("voted")
    ax.set_title(title, fontsize=9)
    return fig


def reliability_figure(metrics: dict):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots(figsize=(4.6, 4))
    ax.plot([0, 1], [0, 1], color="0.6", ls=":", label="perfectly calibrated")
    for lab, d in metrics["reliability"].items():
        ax.plot(d["mean_predicted"], d["observed"], "o-", ms=3, label=lab)
    ax.set_xlabel("predicted probability")
    ax.set_ylabel("observed share of votes")
    ax.set_xlim(0, 1)
    ax.set_ylim(0, 1)
    ax.legend(fontsize=7)
    ax.set_title("Reliability (out-of-fold, one class vs the rest)", fontsize=9)
    return fig


def scores_figure(per_walker: pd.DataFrame, baseline: float | None):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots(figsize=(6, 0.3 * len(per_walker) + 1.2))
    ax.barh(per_walker["group"], per_walker["macro_f1"], color="tab:blue")
    if baseline is not None:
        ax.axvline(baseline, color="tab:red", ls="--", label="UTCI-only ordinal baseline, all walkers")
        ax.legend(fontsize=7)
    ax.set_xlim(0, 1)
    ax.set_xlabel("macro-F1 (model never saw this walker)")
    ax.invert_yaxis()
    return fig


def importance_figure(imp: pd.DataFrame, top: int = 15):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    d = imp.head(top)
    fig, ax = plt.subplots(figsize=(6.5, 0.32 * len(d) + 1))
    ax.barh([f"{m} ({f})" for f, m in zip(d["feature"], d["meaning"], strict=False)], 100 * d["share"], color="tab:orange")
    ax.invert_yaxis()
    ax.set_xlabel("share of total gain [%]")
    ax.tick_params(axis="y", labelsize=7)
    return fig


def gain_sentence(gain: dict | None, what: str = "history gain") -> str:
    """One sentence on a macro-F1 difference whose wording follows its interval."""
    if not gain:
        return f"No interval could be computed for the {what}."
    d, lo, hi = gain["delta"], gain["lo"], gain["hi"]
    # a bound that would print as ±0.00 gets a third decimal, so its side of 0 stays visible
    digits = 3 if min(abs(lo), abs(hi)) < 0.005 else 2
    interval = (f"{d:+.{digits}f} macro-F1 ({100 * gain['level']:.0f} % interval over {gain['n_walkers']} walkers "
                f"{lo:+.{digits}f} … {hi:+.{digits}f})")
    if lo > 0:
        return f"The {what} is {interval}: larger than the model error."
    if hi < 0:
        return f"The {what} is {interval}: a loss larger than the model error."
    return f"The {what} is {interval}: within model error (the interval includes 0)."


def validation_summary(cv, n_votes: int, n_walkers: int, n_walks: int, cut_points=None) -> str:
    """The plain-words paragraph on validation; every claim of a gain follows its interval."""
    m = cv.metrics
    hist = m["history"]["macro_f1"]
    text = [f"The model was trained on {n_votes} votes from {n_walkers} walkers ({n_walks} walks) and tested "
            f"{cv.scheme.replace('-', ' ')}: every vote was predicted by a model that had never seen that walker. "
            f"On those unseen walkers the history-aware model reached a macro-F1 of {hist:.2f}."]
    if "ordinal_utci" in m:
        cuts = (f" (class boundaries learned on all votes at UTCI "
                f"{' and '.join(f'{c:.1f}' for c in cut_points)} °C)") if cut_points else ""
        text.append(f"The strongest simple yardstick, a UTCI-only ordinal model whose cut points are learned inside "
                    f"each training fold{cuts}, reached {m['ordinal_utci']['macro_f1']:.2f}.")
        text.append(gain_sentence(cv.gains.get("history-ordinal_utci"), "difference to that yardstick"))
    gain = cv.gains.get("history-current")
    if "current" in m:
        text.append(f"The same learner on the current conditions only (no history features) reached "
                    f"{m['current']['macro_f1']:.2f}.")
        text.append(gain_sentence(gain, "history gain"))
        if gain and gain["lo"] > 0:
            text.append("Knowing what the walker had just walked through therefore helped beyond the conditions "
                        "at the point itself.")
        else:
            text.append("These votes do not show that the recent exposure helps beyond the conditions at the point "
                        "itself.")
    if "history_free" in m:
        text.append(f"Keeping the predictions coherent in the heat (an ordinal model that can never call more heat "
                    f"more comfortable) against an unconstrained multiclass model ({m['history_free']['macro_f1']:.2f}): "
                    + gain_sentence(cv.gains.get("history-history_free"), "difference").replace("The difference",
                                                                                               "the difference"))
    if "physics" in m:
        text.append(f"For reference, the fixed UTCI-band rule (not fitted to these voters) scores "
                    f"{m['physics']['macro_f1']:.2f}.")
    if "majority" in m:
        text.append("Macro-F1 weighs the three classes equally (1 is perfect; always guessing the most common class "
                    f"scores {m['majority']['macro_f1']:.2f} here, chance about 0.33).")
    return " ".join(text)


def gains_table(gains: dict) -> pd.DataFrame:
    from walkcomfort.model.evaluate import MODEL_NAMES

    rows = []
    for g in gains.values():
        rows.append({"model": MODEL_NAMES.get(g["model"], g["model"]),
                     "against": MODEL_NAMES.get(g["yardstick"], g["yardstick"]),
                     "macro-F1 difference": g["delta"], "interval low": g["lo"], "interval high": g["hi"],
                     "reading": "within model error" if not g["excludes_0"] else
                     ("larger than the model error" if g["delta"] > 0 else "a loss beyond the model error")})
    return pd.DataFrame(rows, columns=["model", "against", "macro-F1 difference", "interval low", "interval high",
                                       "reading"])


def write_model_report(result, out_html: str | os.PathLike) -> Path:
    """Write the HTML model report for a :class:`walkcomfort.model.workflow.FitResult`."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from walkcomfort.model.calibration import plot_calibration
    from walkcomfort.model.evaluate import MODEL_NAMES
    from walkcomfort.model.explain import importance_table
    from walkcomfort.model.workflow import METRICS_HEADER, metrics_rows

    cv = result.cv
    m = cv.metrics
    table = result.table
    counts = pd.Series(table.y).value_counts()
    n_walkers = len(set(map(str, table.groups)))
    n_walks = len(set(map(str, table.walk_id)))
    summary = validation_summary(cv, len(table.y), n_walkers, n_walks, result.settings.get("ordinal_cut_points_c"))
    cal = result.calibration
    neu = cal.get("neutral", {})
    rng_ = cal.get("range", {})
    ci = cal.get("ci", {})

    def _ci(key):
        v = ci.get(key)
        return f" (95 % interval over walkers {v[0]:.1f} … {v[1]:.1f} °C)" if v and np.all(np.isfinite(v)) else ""

    cal_text = []
    if np.isfinite(neu.get("neutral_utci_c", np.nan)):
        ext = " (beyond the observed UTCI: an extrapolation)" if neu.get("extrapolated") else ""
        ref = cal.get("neutral_bins", {}).get("neutral_utci_c", np.nan)
        ref_text = (f" The straight line through the 2 K bin means, the older method, puts it at {ref:.1f} °C."
                    if np.isfinite(ref) else "")
        cal_text.append(f"Neutral UTCI of these walkers, from an ordinal regression of the "
                        f"{neu.get('n_votes', '')} individual sensation votes on UTCI (where the expected vote is 0): "
                        f"{neu['neutral_utci_c']:.1f} °C{_ci('neutral_utci_c')}{ext}; near it the expected sensation "
                        f"rises by {neu['slope_per_c']:.2f} scale points per °C UTCI.{ref_text}")
    else:
        cal_text.append(f"No neutral UTCI could be estimated ({neu.get('note', 'no sensation votes')}).")
    if np.isfinite(rng_.get("lower_c", np.nan)):
        lo, hi = rng_["lower_c"], rng_["upper_c"]
        share = (f"The acceptable range (fitted on the individual comfort votes): at least {100 * cal['level']:.0f} % "
                 "are predicted to vote comfortable or neutral")
        if rng_.get("lower_open") and rng_.get("upper_open"):
            text = f"{share} at every UTCI observed ({lo:.1f} … {hi:.1f} °C)."
        elif rng_.get("lower_open"):
            text = (f"{share} at every UTCI up to {hi:.1f} °C{_ci('upper_c')}; the lower end lies below the "
                    f"coolest UTCI observed ({lo:.1f} °C).")
        elif rng_.get("upper_open"):
            text = (f"{share} from {lo:.1f} °C{_ci('lower_c')} up to the warmest UTCI observed ({hi:.1f} °C) "
                    "and possibly beyond.")
        else:
            text = f"{share} between {lo:.1f} °C{_ci('lower_c')} and {hi:.1f} °C{_ci('upper_c')} UTCI."
        cal_text.append(text)
    else:
        cal_text.append(f"No {cal.get('level', 0.8):.0%} acceptable range: {rng_.get('note', 'no comfort votes')}.")
    cal_text.append("For comparison, the UTCI assessment scale calls 9 … 26 °C 'no thermal stress' "
                    "(Bröde et al. 2012, doi:10.1007/s00484-011-0454-1).")
    ref_hi = cal["reference_band_c"][1]
    if np.isfinite(rng_.get("upper_c", np.nan)) and not rng_.get("upper_open"):
        diff = rng_["upper_c"] - ref_hi
        cal_text.append(f"The upper end found here lies {abs(diff):.1f} °C {'above' if diff >= 0 else 'below'} "
                        f"that band's {ref_hi:g} °C edge; a local range describes these walkers on these days, "
                        "not a safe limit.")

    metric_df = pd.DataFrame(metrics_rows(m), columns=list(METRICS_HEADER))
    insample_df = pd.DataFrame(metrics_rows({"history": result.in_sample},
                                            {"history": "history-aware LightGBM, final model on its own training votes"}),
                               columns=list(METRICS_HEADER))
    recall_df = pd.DataFrame([{"model": MODEL_NAMES[k], **{f"recall {c}": v for c, v in m[k]["recall"].items()}}
                              for k in m])
    imp = importance_table(result.model)

    fig, ax = plt.subplots(figsize=(7, 4))
    plot_calibration(cal, ax)
    cal_png = _png(fig)

    parts = [
        "<!doctype html><html lang=en><head><meta charset=utf-8>",
        "<title>walkcomfort model report</title><style>",
        "body{font-family:system-ui,sans-serif;max-width:980px;margin:2em auto;padding:0 1em;color:#222}",
        "table{border-collapse:collapse;margin:.6em 0;font-size:.9em}td,th{border:1px solid #ccc;padding:3px 7px}",
        "td.num{text-align:right;font-variant-numeric:tabular-nums}th{background:#f2f2f2}",
        ".caution{border-left:5px solid #c0392b;background:#fdf2f0;padding:.6em 1em}",
        "img{max-width:100%}.grid{display:flex;flex-wrap:wrap;gap:1em}</style></head><body>",
        "<h1>Comfort model report</h1>",
        f"<p class=caution><strong>Caution.</strong> {html.escape(CAUTION)}</p>",
        "<h2>In plain words</h2>", f"<p>{html.escape(summary)}</p>",
        "<p>" + html.escape(" ".join(cal_text)) + "</p>",
        "<h2>Validation on walkers the model never saw</h2>",
        f"<p>Scheme: {html.escape(cv.scheme)}, {len(cv.folds)} folds; no walker appears in both the training "
        "and the test part of any fold. Votes per class: "
        + html.escape(", ".join(f"{k} {v}" for k, v in counts.items())) + ".</p>",
        _table(metric_df.astype(str)),
        _table(recall_df),
        "<p>Lower log-loss and Brier are better (Brier here is the multiclass form, 0 … 2). No model is trained "
        "with class weights, so every model's probabilities estimate vote shares and log-loss, Brier and the "
        "reliability diagram compare like with like; macro-F1 and balanced accuracy weigh the three classes "
        "equally and are the scores for the class decisions. The fixed UTCI-band rule is not fitted to these "
        "voters: it is a reference, not a yardstick; its probabilities are the training share of votes for each "
        "rule class.</p>",
        "<h3>Differences, with intervals over walkers</h3>",
        _table(gains_table(cv.gains)),
        "<p>Each difference is the macro-F1 of the first model minus the second, on the same held-out votes; "
        "the interval comes from resampling walkers with replacement (both models scored on each resample). "
        "An interval that includes 0 means the difference is within model error.</p>",
        "<div class=grid>",
        _img(_png(confusion_figure(m["history"], "History-aware model (out-of-fold)")), "confusion matrix"),
        _img(_png(confusion_figure(m["ordinal_utci"], "UTCI-only ordinal baseline")) if "ordinal_utci" in m
             else _png(confusion_figure(m["physics"], "Fixed UTCI-band rule")), "confusion matrix, baseline"),
        _img(_png(reliability_figure(m["history"])), "reliability diagram"),
        "</div>",
        "<h2>Per walker and per group</h2>",
        "<p>Cross-validated scores of the history-aware model. A group that scores clearly lower than the "
        "others is a warning that the model serves it less well.</p>",
        _img(_png(scores_figure(result.per_walker, m.get("ordinal_utci", m["physics"])["macro_f1"])),
             "per-walker scores"),
        _table(result.per_walker),
    ]
    for attr, df in result.per_group.items():
        parts += [f"<h3>By {html.escape(attr)}</h3>", _table(df)]
    parts += [
        "<h2>What the model leans on</h2>",
        _img(_png(importance_figure(imp)), "feature importance"),
        "<h2>Local calibration of UTCI</h2>", _img(cal_png, "calibration plot"),
        _table(pd.DataFrame(cal["bins"])),
        "<h2>The final model</h2>",
        "<p>The bundle holds one model fitted on all votes. Scored on those same votes (in-sample, therefore "
        "optimistic; the cross-validated table above is the honest one):</p>",
        _table(insample_df.astype(str)),
        "<p>Settings: " + html.escape(", ".join(f"{k}={v}" for k, v in result.settings.items())) + ". "
        f"Training data digest: <code>{html.escape(table.digest)}</code>.</p>",
    ]
    if len(table.quarantine):
        parts += ["<h3>Votes set aside</h3>", _table(table.quarantine)]
    if result.inputs:
        parts += ["<h3>Inputs</h3><ul>"] + [f"<li><code>{html.escape(str(p))}</code></li>" for p in result.inputs] \
            + ["</ul>"]
    parts.append("</body></html>\n")
    # the shared Content-Security-Policy of every walkcomfort page (no script may run)
    return _io.atomic_write_text(out_html, with_policy("\n".join(parts)))
