"""Local calibration of UTCI: what this population calls neutral and comfortable.

The analysis outdoor-comfort field studies publish next to their models:

* the **neutral UTCI** from the individual thermal sensation votes (ASHRAE 55 seven-point
  scale): a cumulative-logit (ordinal) regression of the vote on UTCI
  (:mod:`walkcomfort.model.ordinal`; McCullagh 1980), and the UTCI at which the expected
  vote under that model is 0 (:func:`neutral_utci_ordinal`);
* for reference, the usual bin analysis: votes binned by UTCI (default 2 °C bins), the mean
  sensation vote (MTSV) per bin, and a straight line MTSV = a + b·UTCI by weighted least
  squares (weights = votes per bin, bins with fewer than ``min_votes`` left out), crossing
  0 at −a / b (``neutral_bins``).
* the share of votes "comfortable" or "neutral" per bin, and a logistic curve in
  UTCI and UTCI² fitted to the individual votes. The **acceptable range** is where
  that curve is at least 80 % (the level is a parameter). An end that lies beyond
  the observed UTCI is reported as open (the data cannot place it).
* confidence intervals by resampling *walkers* (not votes) with replacement, since
  votes of one walker are not independent.

The result is compared with the UTCI assessment-scale band "no thermal stress",
9 … 26 °C (Bröde et al. 2012, doi:10.1007/s00484-011-0454-1).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from walkcomfort import columns as C

NO_STRESS_BAND_C = next((lo, hi) for lo, hi, name in C.UTCI_BANDS if name == "no thermal stress")


def bin_votes(utci_c, tsv=None, comfort=None, bin_width: float = 2.0,
              acceptable=("comfortable", "neutral")) -> pd.DataFrame:
    """Votes per UTCI bin: ``utci_lo, utci_hi, utci_mid`` [°C], ``n``, ``mean_tsv``, ``sd_tsv``, ``share_acceptable``."""
    u = np.asarray(utci_c, dtype=float)
    ok = np.isfinite(u)
    edges_lo = np.floor(u[ok] / bin_width) * bin_width
    df = pd.DataFrame({"utci_lo": edges_lo})
    if tsv is not None:
        df["tsv"] = np.asarray(tsv, dtype=float)[ok]
    if comfort is not None:
        df["acc"] = pd.Series(np.asarray(comfort, dtype=object)[ok]).isin(acceptable).astype(float).to_numpy()
    g = df.groupby("utci_lo", sort=True)
    out = pd.DataFrame({"n": g.size()})
    out["mean_tsv"] = g["tsv"].mean() if "tsv" in df else np.nan
    out["sd_tsv"] = g["tsv"].std(ddof=1) if "tsv" in df else np.nan
    out["share_acceptable"] = g["acc"].mean() if "acc" in df else np.nan
    out = out.reset_index()
    out.insert(1, "utci_hi", out["utci_lo"] + bin_width)
    out.insert(2, "utci_mid", out["utci_lo"] + bin_width / 2)
    return out


def neutral_utci(bins: pd.DataFrame, min_votes: int = 5) -> dict:
    """Weighted linear fit of mean TSV on bin mid-UTCI; neutral UTCI = −intercept / slope [°C]."""
    b = bins[(bins["n"] >= min_votes) & bins["mean_tsv"].notna()]
    res = {"intercept": np.nan, "slope_per_c": np.nan, "neutral_utci_c": np.nan, "r2": np.nan,
           "n_bins": int(len(b))}
    if len(b) < 3:
        res["note"] = f"only {len(b)} bins with at least {min_votes} sensation votes; need 3"
        return res
    x, y, w = b["utci_mid"].to_numpy(), b["mean_tsv"].to_numpy(), b["n"].to_numpy(float)
    xm, ym = np.average(x, weights=w), np.average(y, weights=w)
    sxx = np.sum(w * (x - xm) ** 2)
    slope = np.sum(w * (x - xm) * (y - ym)) / sxx
    intercept = ym - slope * xm
    resid = y - (intercept + slope * x)
    r2 = 1 - np.sum(w * resid ** 2) / np.sum(w * (y - ym) ** 2) if np.sum(w * (y - ym) ** 2) > 0 else np.nan
    res.update(intercept=float(intercept), slope_per_c=float(slope), r2=float(r2))
    if slope > 0:
        res["neutral_utci_c"] = float(-intercept / slope)
    else:
        res["note"] = "sensation does not rise with UTCI in these votes; no neutral UTCI"
    return res


def neutral_utci_ordinal(utci_c, tsv) -> dict:
    """Neutral UTCI from individual sensation votes: E[vote | UTCI] = 0 under a cumulative logit.

    The ordinal model is fitted on the individual votes (each vote one observation, no
    binning); the expected vote is Σ_k v_k·P(vote = v_k | UTCI). Returns ``neutral_utci_c``
    [°C] (NaN when the expected vote does not cross 0 within 15 K of the observed UTCI),
    ``slope_per_c`` (d E[vote] / d UTCI at the neutral point), ``intercept`` (of that
    tangent line, for plots), ``cut_points_c``, ``extrapolated`` (the crossing lies outside the
    observed UTCI), ``method``, ``n_votes``.
    """
    from walkcomfort.model.ordinal import cumulative_logit_proba, fit_cumulative_logit

    u = np.asarray(utci_c, dtype=float)
    v = np.asarray(tsv, dtype=float)
    ok = np.isfinite(u) & np.isfinite(v)
    u, v = u[ok], v[ok]
    res = {"neutral_utci_c": np.nan, "slope_per_c": np.nan, "intercept": np.nan, "cut_points_c": [],
           "extrapolated": False, "method": "cumulative logit on individual votes", "n_votes": int(len(u))}
    levels = np.unique(v)
    if len(u) < 10 or len(levels) < 2:
        res["note"] = f"{len(u)} sensation votes on {len(levels)} levels; need 10 votes on 2 levels"
        return res
    codes = np.searchsorted(levels, v)
    fit = fit_cumulative_logit(u, codes, len(levels))
    res["cut_points_c"] = fit["cut_points"]
    if not fit["slope"] > 0:
        res["note"] = "sensation does not rise with UTCI in these votes; no neutral UTCI"
        return res
    grid = np.arange(u.min() - 15.0, u.max() + 15.0, 0.01)
    expected = cumulative_logit_proba(grid, fit["slope"], fit["thresholds"]) @ levels
    cross = np.flatnonzero((expected[:-1] < 0) & (expected[1:] >= 0))
    if not len(cross):
        res["note"] = "the expected vote does not cross 0 within 15 K of the observed UTCI"
        return res
    i = cross[0]
    x = grid[i] + (0 - expected[i]) * (grid[i + 1] - grid[i]) / (expected[i + 1] - expected[i])
    slope = (expected[min(i + 50, len(grid) - 1)] - expected[max(i - 50, 0)]) / (grid[min(i + 50, len(grid) - 1)]
                                                                                - grid[max(i - 50, 0)])
    res.update(neutral_utci_c=float(x), slope_per_c=float(slope), intercept=float(-slope * x),
               extrapolated=bool(x < u.min() or x > u.max()))
    return res


def _logistic_newton(X: np.ndarray, y: np.ndarray, ridge: float = 1e-6, max_iter: int = 100) -> np.ndarray:
    """Maximum-likelihood logistic regression by Newton–Raphson (IRLS); returns [intercept, coefs...].

    A tiny ridge keeps the Hessian invertible when the classes are nearly separable.
    """
    A = np.column_stack([np.ones(len(X)), X])
    beta = np.zeros(A.shape[1])
    for _ in range(max_iter):
        eta = np.clip(A @ beta, -35, 35)
        p = 1.0 / (1.0 + np.exp(-eta))
        grad = A.T @ (y - p) - ridge * beta
        hess = (A * (p * (1 - p))[:, None]).T @ A + ridge * np.eye(A.shape[1])
        step = np.linalg.solve(hess, grad)
        beta = beta + step
        if np.max(np.abs(step)) < 1e-10:
            break
    return beta


def acceptable_range(utci_c, comfort, level: float = 0.8, acceptable=("comfortable", "neutral")) -> dict:
    """UTCI range [°C] where the fitted share of acceptable votes is at least ``level``.

    Logistic regression of "acceptable" on UTCI and UTCI² (individual votes; a
    linear term only if the quadratic is not concave). Ends beyond the observed
    UTCI are clipped to it and marked ``lower_open`` / ``upper_open``.
    """
    u = np.asarray(utci_c, dtype=float)
    acc = pd.Series(np.asarray(comfort, dtype=object)).isin(acceptable).to_numpy()
    ok = np.isfinite(u)
    u, acc = u[ok], acc[ok]
    res = {"lower_c": np.nan, "upper_c": np.nan, "lower_open": False, "upper_open": False, "level": level,
           "observed_min_c": float(u.min()) if len(u) else np.nan,
           "observed_max_c": float(u.max()) if len(u) else np.nan}
    if len(u) < 10 or acc.all() or not acc.any():
        res["note"] = "too few votes, or all votes on one side" if len(u) < 10 else (
            "every vote acceptable" if acc.all() else "no vote acceptable")
        if len(u) and acc.all():
            res.update(lower_c=res["observed_min_c"], upper_c=res["observed_max_c"], lower_open=True, upper_open=True)
        return res
    mu, sd = u.mean(), u.std() or 1.0
    z = (u - mu) / sd
    target = np.log(level / (1 - level))

    def fit(cols):
        beta = _logistic_newton(np.column_stack(cols), acc.astype(float))
        return beta[0], beta[1:]

    b0, (b1, b2) = fit([z, z ** 2])
    zs = np.linspace(z.min(), z.max(), 2001)
    if b2 < 0:
        disc = b1 ** 2 - 4 * b2 * (b0 - target)
        if disc < 0:
            res["note"] = f"the fitted share never reaches {level:.0%}"
            return res
        r = np.sort([(-b1 + s * np.sqrt(disc)) / (2 * b2) for s in (1, -1)])
        lo, hi = r
    else:
        b0, (b1,) = fit([z])
        if abs(b1) < 1e-12:
            res["note"] = "acceptability does not change with UTCI"
            return res
        root = (target - b0) / b1
        lo, hi = (-np.inf, root) if b1 < 0 else (root, np.inf)
    if hi < zs[0] or lo > zs[-1]:
        res["note"] = f"the {level:.0%} range lies outside the observed UTCI"
        return res
    res["lower_open"] = bool(lo < zs[0])
    res["upper_open"] = bool(hi > zs[-1])
    res["lower_c"] = float(max(lo, zs[0]) * sd + mu)
    res["upper_c"] = float(min(hi, zs[-1]) * sd + mu)
    return res


def local_calibration(utci_c, tsv=None, comfort=None, groups=None, bin_width: float = 2.0, min_votes: int = 5,
                      level: float = 0.8, n_boot: int = 200, seed: int = 0,
                      progress: bool | None = None) -> dict:
    """Neutral UTCI and acceptable UTCI range of the voters, with walker-bootstrap 95 % intervals.

    Parameters
    ----------
    utci_c : array-like
        UTCI at each vote [°C].
    tsv : array-like, optional
        Thermal sensation votes (-3 … +3).
    comfort : array-like, optional
        Comfort votes (``comfortable`` / ``neutral`` / ``uncomfortable``).
    groups : array-like, optional
        Walker per vote (the bootstrap resamples walkers); default: one vote per group.
    bin_width : float
        UTCI bin width [°C].
    min_votes : int
        Bins with fewer votes are shown but not fitted.
    level : float
        Share of acceptable votes that defines the range (0.8 = 80 %).
    n_boot : int
        Bootstrap resamples (0: no intervals).
    seed : int
    progress : bool, optional
        Progress bar for the bootstrap (default: on a terminal).

    Returns
    -------
    dict
        ``bins`` (records), ``neutral`` (ordinal fit on the individual votes),
        ``neutral_bins`` (the line through bin means, for reference), ``range``, ``ci`` (2.5 / 97.5 % per
        quantity), ``reference_band_c`` (9, 26), ``n_votes``, ``n_walkers``.
    """
    u = np.asarray(utci_c, dtype=float)
    n = len(u)
    tsv_a = None if tsv is None else np.asarray(pd.to_numeric(pd.Series(tsv), errors="coerce"), dtype=float)
    com_a = None if comfort is None else np.asarray(comfort, dtype=object)
    g = np.arange(n) if groups is None else pd.Series(np.asarray(groups, dtype=object)).astype("string").to_numpy()

    def once(sel):
        b = bin_votes(u[sel], None if tsv_a is None else tsv_a[sel], None if com_a is None else com_a[sel],
                      bin_width)
        neu = neutral_utci_ordinal(u[sel], tsv_a[sel]) if tsv_a is not None else {"neutral_utci_c": np.nan}
        rng_ = acceptable_range(u[sel], com_a[sel], level) if com_a is not None else {"lower_c": np.nan,
                                                                                       "upper_c": np.nan}
        return b, neu, rng_

    everything = np.arange(n)
    bins, neu, rng_ = once(everything)
    out = {"bins": bins.to_dict(orient="records"), "neutral": neu, "range": rng_,
           "neutral_bins": neutral_utci(bins, min_votes) if tsv_a is not None else {"neutral_utci_c": np.nan},
           "reference_band_c": list(NO_STRESS_BAND_C), "n_votes": int(n), "n_walkers": int(len(set(g))),
           "bin_width_c": bin_width, "level": level, "ci": {}}
    if n_boot and n:
        rs = np.random.default_rng(seed)
        uniq = pd.unique(g)
        rows_of = {k: np.flatnonzero(g == k) for k in uniq}
        draws = {"neutral_utci_c": [], "lower_c": [], "upper_c": [], "slope_per_c": []}
        from walkcomfort._progress import track

        for _ in track(range(n_boot), "calibration bootstrap over walkers", total=n_boot, enabled=progress):
            pick = rs.choice(len(uniq), size=len(uniq), replace=True)
            sel = np.concatenate([rows_of[uniq[i]] for i in pick])
            _, nb, rb = once(sel)
            draws["neutral_utci_c"].append(nb.get("neutral_utci_c", np.nan))
            draws["slope_per_c"].append(nb.get("slope_per_c", np.nan))
            draws["lower_c"].append(rb.get("lower_c", np.nan))
            draws["upper_c"].append(rb.get("upper_c", np.nan))
        for k, v in draws.items():
            v = np.asarray(v, dtype=float)
            v = v[np.isfinite(v)]
            out["ci"][k] = [float(np.percentile(v, 2.5)), float(np.percentile(v, 97.5))] if len(v) >= 10 \
                else [np.nan, np.nan]
        out["n_boot"] = int(n_boot)
    return out


def plot_calibration(result: dict, ax=None):
    """Mean TSV per UTCI bin with its fit, the acceptable range and the 9–26 °C band, on ``ax``."""
    import matplotlib.pyplot as plt

    if ax is None:
        _, ax = plt.subplots(figsize=(7, 4))
    bins = pd.DataFrame(result["bins"])
    lo_ref, hi_ref = result["reference_band_c"]
    ax.axvspan(lo_ref, hi_ref, color="0.85", label="UTCI 'no thermal stress' 9–26 °C", zorder=0)
    rng_ = result["range"]
    if np.isfinite(rng_.get("lower_c", np.nan)) and np.isfinite(rng_.get("upper_c", np.nan)):
        ax.axvspan(rng_["lower_c"], rng_["upper_c"], color="tab:green", alpha=0.2,
                   label=f"≥ {result['level']:.0%} comfortable or neutral (fit)", zorder=1)
    if len(bins) and bins["mean_tsv"].notna().any():
        err = bins["sd_tsv"] / np.sqrt(bins["n"])
        ax.errorbar(bins["utci_mid"], bins["mean_tsv"], yerr=err, fmt="o", color="tab:blue",
                    label="mean sensation vote per bin (± s.e.)", zorder=3)
        neu = result["neutral"]
        if np.isfinite(neu.get("slope_per_c", np.nan)):
            xs = np.linspace(bins["utci_lo"].min(), bins["utci_hi"].max(), 50)
            ax.plot(xs, neu["intercept"] + neu["slope_per_c"] * xs, color="tab:blue", lw=1)
        if np.isfinite(neu.get("neutral_utci_c", np.nan)):
            ax.axvline(neu["neutral_utci_c"], color="tab:red", ls="--",
                       label=f"neutral UTCI {neu['neutral_utci_c']:.1f} °C")
        ax.set_ylabel("thermal sensation vote (−3 … +3)")
    if len(bins) and bins["share_acceptable"].notna().any():
        ax2 = ax.twinx()
        ax2.plot(bins["utci_mid"], 100 * bins["share_acceptable"], "s-", color="tab:green", ms=4, lw=1)
        ax2.set_ylabel("comfortable or neutral [%]", color="tab:green")
        ax2.set_ylim(0, 105)
    ax.set_xlabel("UTCI [°C]")
    ax.legend(loc="upper left", fontsize=7)
    return ax
