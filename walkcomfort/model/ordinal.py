"""The cumulative-logit (proportional-odds) model on one variable, fitted by maximum likelihood.

``P(vote ≤ k | x) = F(θ_k − β·x)`` with F the logistic function and θ₀ < θ₁ < …
(McCullagh 1980, "Regression models for ordinal data", J. R. Stat. Soc. B 42(2):109–142;
the same parametrisation as statsmodels' ``OrderedModel``, which the tests use as the
reference). On the scale of ``x`` the learned **cut points** are ``c_k = θ_k / β``: the
value of ``x`` at which a vote above class k becomes as likely as one at or below it.

Used twice: as the UTCI-only baseline (cut points learned inside every training fold,
:class:`walkcomfort.model.baselines.OrdinalUTCIBaseline`) and for the neutral UTCI of the
individual sensation votes (:mod:`walkcomfort.model.calibration`).
"""

from __future__ import annotations

import numpy as np


def _sigmoid(z):
    return 0.5 * (1.0 + np.tanh(0.5 * z))


def _unpack(params: np.ndarray) -> tuple[float, np.ndarray]:
    beta = params[0]
    theta = np.cumsum(np.r_[params[1], np.exp(params[2:])])
    return beta, theta


def _nll_and_grad(params, z, codes, k, w):
    beta, theta = _unpack(params)
    eta = beta * z
    # F(θ_k − η) for the class's upper and lower thresholds (±∞ at the ends)
    ext = np.r_[-np.inf, theta, np.inf]
    up = ext[codes + 1] - eta
    lo = ext[codes] - eta
    fu, fl = _sigmoid(up), _sigmoid(lo)
    p = np.clip(fu - fl, 1e-300, None)
    nll = -np.sum(w * np.log(p))
    du, dl = fu * (1 - fu), fl * (1 - fl)
    # d p / d eta = −(du − dl); d p / d θ_j = du·1[j = code] − dl·1[j = code − 1]
    g_beta = np.sum(w * (du - dl) * z / p)
    g_theta = np.zeros(k - 1)
    np.add.at(g_theta, np.minimum(codes, k - 2), -(w * du / p) * (codes < k - 1))
    np.add.at(g_theta, np.maximum(codes - 1, 0), (w * dl / p) * (codes > 0))
    # chain rule through θ = cumsum([a, exp(b1), exp(b2), ...])
    tail = np.cumsum(g_theta[::-1])[::-1]  # d/dθ_j summed over j ≥ m
    grad = np.r_[g_beta, tail[0], tail[1:] * np.exp(params[2:])]
    return nll, grad


def fit_cumulative_logit(x, codes, n_classes: int, weights=None) -> dict:
    """Maximum-likelihood cumulative logit of ordered ``codes`` (0 … n_classes − 1) on one variable ``x``.

    Returns
    -------
    dict
        ``slope`` (β per unit of x), ``thresholds`` (θ_k, increasing), ``cut_points``
        (θ_k / β, in units of x; NaN when β = 0), ``converged``, ``nll``.
    """
    from scipy.optimize import minimize

    x = np.asarray(x, dtype=float)
    codes = np.asarray(codes, dtype=np.int64)
    w = np.ones(len(x)) if weights is None else np.asarray(weights, dtype=float)
    k = int(n_classes)
    m, s = float(np.mean(x)), float(np.std(x)) or 1.0
    z = (x - m) / s
    # start: thresholds at the logits of the cumulative class shares, no slope
    share = np.clip(np.cumsum(np.bincount(codes, weights=w, minlength=k))[:-1] / w.sum(), 1e-3, 1 - 1e-3)
    theta0 = np.maximum.accumulate(np.log(share / (1 - share)) + np.arange(k - 1) * 1e-3)
    start = np.r_[0.0, theta0[0], np.log(np.maximum(np.diff(theta0), 1e-3))]
    res = minimize(_nll_and_grad, start, args=(z, codes, k, w), jac=True, method="BFGS",
                   options={"gtol": 1e-8, "maxiter": 500})
    beta_z, theta_z = _unpack(res.x)
    beta = beta_z / s
    theta = theta_z + beta_z * m / s
    with np.errstate(divide="ignore", invalid="ignore"):
        cuts = theta / beta if beta != 0 else np.full(k - 1, np.nan)
    return {"slope": float(beta), "thresholds": theta.tolist(), "cut_points": np.asarray(cuts, float).tolist(),
            "converged": bool(res.success or np.max(np.abs(res.jac)) < 1e-4), "nll": float(res.fun)}


def cumulative_logit_proba(x, slope: float, thresholds) -> np.ndarray:
    """Class probabilities (rows, K) of a fitted cumulative logit at ``x``."""
    x = np.asarray(x, dtype=float)
    theta = np.asarray(thresholds, dtype=float)
    cdf = _sigmoid(theta[None, :] - slope * x[:, None])
    ext = np.column_stack([np.zeros(len(x)), cdf, np.ones(len(x))])
    return np.clip(np.diff(ext, axis=1), 0.0, 1.0)
