"""Comfort along a route, one panel per scheme (matplotlib, no display needed)."""

from __future__ import annotations

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.routes.predict import PROBA
from walkcomfort.routes.simulate import DEPARTURE, SCHEME


def plot_comfort_along_route(points: pd.DataFrame, departure=None, timezone: str | None = None):
    """Stacked class probabilities and UTCI along the route, one row of panels per scheme.

    Parameters
    ----------
    points : DataFrame
        Per-point prediction table (one or many schemes).
    departure : Timestamp, optional
        Which departure to draw; default the first.
    timezone : str, optional
        Zone for the departure shown in the title (default UTC).

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib

    matplotlib.use("Agg", force=False)
    from matplotlib.figure import Figure

    deps = pd.DatetimeIndex(points[DEPARTURE].unique()).sort_values()
    dep = deps[0] if departure is None else pd.Timestamp(departure).tz_convert("UTC")
    sel = points[points[DEPARTURE] == dep]
    schemes = list(dict.fromkeys(sel[SCHEME]))
    fig = Figure(figsize=(9, 1.9 * len(schemes) + 1.2), layout="constrained")
    axes = fig.subplots(len(schemes), 1, sharex=True, squeeze=False)[:, 0]
    umin = float(np.nanmin(sel[C.UTCI_C])) if len(sel) else 0.0
    umax = float(np.nanmax(sel[C.UTCI_C])) if len(sel) else 1.0
    for ax, name in zip(axes, schemes, strict=False):
        g = sel[sel[SCHEME] == name].sort_index()
        d = g[C.DIST_M].to_numpy(float)
        ys = [g[PROBA[c]].to_numpy(float) for c in C.COMFORT_CLASSES]
        ax.stackplot(d, *ys, colors=[C.COMFORT_COLOURS[c] for c in C.COMFORT_CLASSES],
                     labels=[C.COMFORT_LABELS[c] for c in C.COMFORT_CLASSES], step=None, alpha=0.9)
        ax.set_ylim(0, 1)
        ax.set_ylabel("probability")
        ax.set_title(f"{name} — predictor: {g['predictor'].iloc[0] if 'predictor' in g else ''}", fontsize=9,
                     loc="left")
        tw = ax.twinx()
        tw.plot(d, g[C.UTCI_C].to_numpy(float), color="#1f1f1f", lw=1.2, label="UTCI")
        tw.set_ylim(np.floor(umin - 1), np.ceil(umax + 1))
        tw.set_ylabel("UTCI [°C]")
    axes[0].legend(loc="upper left", bbox_to_anchor=(0, 1.45), ncol=3, fontsize=8, frameon=False)
    axes[-1].set_xlabel("distance along the route [m]")
    local = dep.tz_convert(timezone) if timezone else dep
    rid = sel["route_id"].iloc[0] if len(sel) and "route_id" in sel else ""
    fig.suptitle(f"Comfort along route {rid}, departure {local.strftime('%Y-%m-%d %H:%M %Z')}", fontsize=10)
    return fig


def save_figure(fig, path) -> None:
    """Write a figure as PNG through the atomic writer."""
    import io

    from walkcomfort._io import atomic_write_bytes

    buf = io.BytesIO()
    # a fixed metadata block keeps re-runs byte-identical (no software/date stamps)
    fig.savefig(buf, format="png", dpi=110, metadata={"Software": None})
    atomic_write_bytes(path, buf.getvalue())
