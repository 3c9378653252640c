"""Re-run the advised scheme through the full comparison and set its gain beside the advisor's.

The advisor traces only the direct beam of each new item (see :mod:`.shadows`); the
comparison recomputes the whole chain for the edited scene (sky view, diffuse light,
every walker row), so the two differ by what the advisor leaves out. The comparison's
figure is the one to quote.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from walkcomfort.routes.placement.advisor import Advice
from walkcomfort.routes.placement.select import DOSE_BASE_C


def _gain_from_points(points: pd.DataFrame, objective: str, threshold_c: float, weights: dict) -> float:
    w = points["route_id"].map(weights).fillna(1.0).to_numpy(float) * points["step_s"].to_numpy(float) / 60.0
    u = points["utci_c"].to_numpy(float)
    if objective == "heat-dose":
        per = np.clip(u - DOSE_BASE_C, 0.0, None)
    elif objective == "hours-above":
        per = (u > threshold_c).astype(float)
    else:
        per = -points["p_comfortable"].to_numpy(float)  # a loss: fewer comfortable minutes
    loss = pd.Series(per * w).groupby(points["scheme"].to_numpy()).sum()
    return float(loss.get("base", 0.0) - loss.drop("base").sum())


def verify_with_comparison(advice: Advice, routes, scheme, departures, weather, scene, predictor=None,
                           timezone=None, walker=None, flat_speed_ms: float = 1.3,
                           route_weights: dict | None = None) -> dict:
    """Gain of the advised scheme by the full comparison, in the advisor's unit.

    Returns
    -------
    dict
        ``advisor_gain``, ``compare_gain``, ``relative_difference`` and ``text`` (one line
        for people); for the comfort objective with a model bundle that carries fold
        models, the comparison's interval where available (``compare_lo``, ``compare_hi``).
    """
    from walkcomfort.routes.compare import compare_schemes

    weights = route_weights or {}
    gains, comparisons = 0.0, []
    for route in routes:
        cmp = compare_schemes(route, [scheme], departures, weather, scene=scene, predictor=predictor,
                              flat_speed_ms=flat_speed_ms, timezone=timezone, walker=walker, explain=False)
        comparisons.append(cmp.comparison)
        gains += _gain_from_points(cmp.points, advice.objective, advice.threshold_c, weights)
    out = {"advisor_gain": advice.selection.total, "compare_gain": gains}
    table = pd.concat(comparisons, ignore_index=True) if comparisons else pd.DataFrame()
    lo_col, hi_col = "delta_exp_min_comfortable_lo", "delta_exp_min_comfortable_hi"
    if advice.objective == "comfort" and lo_col in table.columns:
        out["compare_lo"], out["compare_hi"] = float(table[lo_col].sum()), float(table[hi_col].sum())
    ref = max(abs(gains), 1e-9)
    out["relative_difference"] = (advice.selection.total - gains) / ref
    text = (f"{gains:.2f} {advice.unit} by the comparison vs {advice.selection.total:.2f} estimated by the advisor "
            f"({100 * out['relative_difference']:+.0f} %)")
    if "compare_lo" in out:
        text += f"; the comparison's interval {out['compare_lo']:.2f} … {out['compare_hi']:.2f}"
    out["text"] = text
    return out
