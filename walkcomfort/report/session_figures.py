"""The session report's figures: the walk's time series in local time, and the track map.

Axes are fitted to the data: the temperature panel spans the walk's own values (with
the UTCI bands of that span shaded), the track's colour scale only the UTCI bands the walk
reaches, and the time axis labels seconds when the walk is short, so a two-minute walk
does not repeat one minute label.
"""

from __future__ import annotations

import base64
import io
import math

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.environment.pet import PET_C, PET_CLASS_COLOURS, PET_CLASSES
from walkcomfort.report import palette as P

SHORT_WALK = pd.Timedelta(minutes=15)  # below this, the time axis shows seconds
PANEL_HEIGHTS = {"votes": 0.55, "temp": 2.6, "noise": 1.3, "light": 1.3, "motion": 1.5}
TEMPERATURES = ((C.T_AIR_C, "air temperature", "#1f1f1f", "-"), (C.T_GLOBE_C, "globe temperature", "#8a8a8a", ":"),
                (C.TMRT_C, "Tmrt", "#b4452f", "--"), (C.UTCI_C, "UTCI", "#1d4e89", "-"))


def index_scale(index: str = "utci") -> dict:
    """The thermal index a session report shows (``report --index``): column, name, bands and colours."""
    if index == "pet":
        return {"col": PET_C, "name": "PET", "bands": tuple((lo, hi, name) for lo, hi, name, _ in PET_CLASSES),
                "colours": PET_CLASS_COLOURS, "scale": "PET classes (Matzarakis & Mayer 1996) reached"}
    return {"col": C.UTCI_C, "name": "UTCI", "bands": C.UTCI_BANDS, "colours": P.UTCI_BAND_COLOURS,
            "scale": "assessment-scale bands reached"}


def figure(width_in: float, height_in: float):
    from matplotlib.figure import Figure

    # fixed margins (set by each figure) instead of a layout engine: half the drawing time
    return Figure(figsize=(width_in, height_in), dpi=100)


def png_base64(fig) -> str:
    buf = io.BytesIO()
    # fixed metadata so the same inputs give the same bytes
    fig.savefig(buf, format="png", dpi=100, metadata={"Software": None})
    return base64.b64encode(buf.getvalue()).decode("ascii")


def vote_rows(df: pd.DataFrame) -> pd.DataFrame:
    mask = np.zeros(len(df), dtype=bool)
    for col in (C.VOTE_COMFORT, C.VOTE_TSV):
        if col in df.columns:
            mask |= df[col].notna().to_numpy()
    return df[mask]


def local_index(df: pd.DataFrame, zone) -> pd.DatetimeIndex:
    # matplotlib draws tz-aware datetimes in the axis' zone; naive local wall times are simplest
    return df.index.tz_convert(zone).tz_localize(None)


def tsv_text(tsv) -> str:
    """A thermal-sensation vote with its sign (``+2``, ``0``, ``-1``)."""
    return "0" if int(tsv) == 0 else f"{int(tsv):+d}"


def _has(df: pd.DataFrame, *cols) -> bool:
    return any(c in df.columns and df[c].notna().any() for c in cols)


def qa_flags(df: pd.DataFrame) -> list[str]:
    """The boolean QA columns set on at least one step."""
    return [c for c in df.columns if c.startswith("qa_") and df[c].dtype == bool and df[c].any()]


def _panels(df: pd.DataFrame) -> list[str]:
    panels = ["votes"]
    for name, cols in (("temp", (C.T_AIR_C, C.TMRT_C, C.UTCI_C, PET_C)), ("noise", (C.LAEQ_DB,)),
                       ("light", (C.ILLUM_LUX,)), ("motion", (C.SPEED_MS, C.ELEV_M))):
        if _has(df, *cols):
            panels.append(name)
    if qa_flags(df):
        panels.append("flags")
    return panels


def _draw_votes(ax, votes: pd.DataFrame, vt) -> None:
    ax.set_yticks([])
    ax.set_ylabel("votes", rotation=0, ha="right", va="center", fontsize=8)
    for ts, row in zip(vt, votes.itertuples(), strict=False):
        cls = getattr(row, C.VOTE_COMFORT, None) if C.VOTE_COMFORT in votes.columns else None
        tsv = getattr(row, C.VOTE_TSV, np.nan) if C.VOTE_TSV in votes.columns else np.nan
        colour = P.comfort_colour(cls if isinstance(cls, str) else None)
        ax.scatter([ts], [0.5], s=90, color=colour, edgecolor=P.HALO_COLOUR, linewidth=1.0, zorder=3)
        if pd.notna(tsv):
            ax.text(ts, 0.05, tsv_text(tsv), ha="center", va="bottom", fontsize=7)
    ax.set_ylim(0, 1)
    handles = [ax.scatter([], [], s=50, color=P.COMFORT_COLOURS[c], edgecolor=P.HALO_COLOUR, label=P.COMFORT_LABELS[c])
               for c in C.COMFORT_CLASSES]
    ax.legend(handles=handles, loc="upper left", bbox_to_anchor=(1.0, 1.25), fontsize=7, frameon=False,
              title="vote (number: TSV)", title_fontsize=7)


def _utci_band_shading(ax, y_low: float, y_high: float, scale: dict | None = None) -> None:
    scale = scale or index_scale()
    for low, high, name in scale["bands"]:
        lo, hi = max(low, y_low), min(high, y_high)
        if lo < hi:
            ax.axhspan(lo, hi, color=scale["colours"][name], alpha=0.3, lw=0, zorder=0)
            ax.text(1.002, (lo + hi) / 2, name, transform=ax.get_yaxis_transform(), fontsize=6.5,
                    va="center", ha="left", color="#333333", clip_on=False)


def _draw_temperatures(ax, df: pd.DataFrame, t, scale: dict | None = None) -> None:
    scale = scale or index_scale()
    values = []
    for col, label, colour, style in (*TEMPERATURES[:3], (scale["col"], scale["name"], "#1d4e89", "-")):
        if col in df.columns and df[col].notna().any():
            ax.plot(t, df[col].to_numpy(float), style, color=colour, lw=1.2, label=label)
            values.append(df[col].to_numpy(float))
    allv = np.concatenate(values)
    lo, hi = float(np.nanmin(allv)), float(np.nanmax(allv))
    pad = max(1.0, 0.08 * (hi - lo))
    ax.set_ylim(lo - pad, hi + pad)
    _utci_band_shading(ax, lo - pad, hi + pad, scale)
    ax.set_ylabel("[°C]")
    ax.legend(loc="upper left", fontsize=7, ncols=3, frameon=True, framealpha=0.8)


def _draw_noise_light(by: dict, df: pd.DataFrame, t) -> None:
    if "noise" in by:
        by["noise"].plot(t, df[C.LAEQ_DB].to_numpy(float), color="#5b3c88", lw=1.0)
        by["noise"].set_ylabel("LAeq [dB(A)]")
    if "light" in by:
        lux = df[C.ILLUM_LUX].to_numpy(float)
        by["light"].plot(t, np.where(lux > 0, lux, np.nan), color="#9a7b00", lw=1.0)
        by["light"].set_yscale("log")
        by["light"].set_ylabel("illuminance [lx]")


def _draw_motion(ax, df: pd.DataFrame, t) -> None:
    if _has(df, C.SPEED_MS):
        ax.plot(t, df[C.SPEED_MS].to_numpy(float), color="#2a6f5b", lw=1.0, label="speed")
        ax.set_ylabel("speed [m s⁻¹]")
    if _has(df, C.ELEV_M):
        ax2 = ax.twinx()
        ax2.plot(t, df[C.ELEV_M].to_numpy(float), color="#7d7d86", lw=1.0, ls=":", label="elevation")
        ax2.set_ylabel("elevation [m]", fontsize=8)


def _draw_flags(ax, df: pd.DataFrame, t, flags: list[str], labels: dict) -> None:
    import matplotlib.dates as mdates

    step = (t[1] - t[0]) if len(t) > 1 else pd.Timedelta(seconds=1)
    for k, col in enumerate(flags):
        on = df[col].to_numpy(bool)
        edges = np.flatnonzero(np.diff(np.r_[0, on.astype(int), 0]))
        spans = [(mdates.date2num(t[a]), mdates.date2num(t[min(b, len(t) - 1)] + step) - mdates.date2num(t[a]))
                 for a, b in zip(edges[::2], edges[1::2], strict=False)]
        ax.broken_barh(spans, (k + 0.15, 0.7), color="#8e462d", alpha=0.8)
    ax.set_yticks(np.arange(len(flags)) + 0.5, [labels.get(f, f) for f in flags], fontsize=7)
    ax.set_ylim(0, len(flags))


def _time_axis(ax, t, zone) -> None:
    """Local clock labels that differ from tick to tick: seconds for short walks."""
    import matplotlib.dates as mdates

    span = (t[-1] - t[0]) if len(t) > 1 else pd.Timedelta(0)
    ax.xaxis.set_major_locator(mdates.AutoDateLocator(minticks=4, maxticks=9))
    ax.xaxis.set_major_formatter(mdates.DateFormatter("%H:%M:%S" if span < SHORT_WALK else "%H:%M"))
    if len(t) > 1:
        ax.set_xlim(t[0], t[-1])
    ax.set_xlabel(f"local time ({zone.key if hasattr(zone, 'key') else zone})", fontsize=8)


def timeseries_figure(df: pd.DataFrame, zone, title: str = "", flag_labels: dict | None = None,
                      index: str = "utci"):
    """The stacked time-series figure (matplotlib Figure) of one walk in local time.

    Panels appear only for columns present: temperatures (air, Tmrt, UTCI on the UTCI
    bands), noise, light, speed with elevation, and a QA-flag strip; votes are drawn on
    every panel and marked with their class in a strip on top.
    """
    t = local_index(df, zone)
    votes = vote_rows(df)
    vt = local_index(votes, zone) if len(votes) else pd.DatetimeIndex([])
    panels, flags, labels = _panels(df), qa_flags(df), flag_labels or {}
    heights = dict(PANEL_HEIGHTS, flags=0.25 + 0.22 * len(flags))
    height = sum(heights[p] for p in panels) + 1.0
    fig = figure(10.0, height)
    axes = np.atleast_1d(fig.subplots(len(panels), 1, sharex=True,
                                      gridspec_kw={"height_ratios": [heights[p] for p in panels]}))
    # room on the left for the QA flag labels (about 0.06 in per character at 7 pt)
    longest = max((len(labels.get(f, f)) for f in flags), default=0)
    fig.subplots_adjust(left=max(0.09, (0.06 * longest + 0.2) / 10.0), right=0.84,
                        top=1 - (0.45 if title else 0.12) / height, bottom=0.55 / height,
                        hspace=0.12 * len(panels) / height * 2)
    by = dict(zip(panels, axes, strict=True))
    if title:
        fig.suptitle(title, fontsize=11)
    _draw_votes(by["votes"], votes, vt)
    if "temp" in by:
        _draw_temperatures(by["temp"], df, t, index_scale(index))
    _draw_noise_light(by, df, t)
    if "motion" in by:
        _draw_motion(by["motion"], df, t)
    if "flags" in by:
        _draw_flags(by["flags"], df, t, flags, labels)
    for name, ax in by.items():
        if name != "votes":
            for ts in vt:
                ax.axvline(ts, color="#444444", lw=0.6, alpha=0.5, zorder=1)
            ax.grid(True, axis="y", lw=0.3, alpha=0.5)
            ax.tick_params(labelsize=8)
    _time_axis(axes[-1], t, zone)
    return fig


def _draw_scene(ax, scene_gj: dict, lon0: float, lat0: float, kx: float, ky: float, extent) -> None:
    """Buildings, canopies and tree crowns of a scene GeoJSON under the track (display only)."""
    from matplotlib.patches import Circle, Polygon

    (x0, x1), (y0, y1) = extent
    for feat in scene_gj.get("features", []):
        props = feat.get("properties") or {}
        geom = feat.get("geometry") or {}
        kind = props.get("kind", "building")
        colour = P.SCENE_COLOURS.get(kind, P.MISSING_COLOUR)
        if geom.get("type") == "Point":
            lon, lat = geom["coordinates"][:2]
            cx, cy = (lon - lon0) * kx, (lat - lat0) * ky
            if x0 <= cx <= x1 and y0 <= cy <= y1:
                r = float(props.get("crown_radius_m") or 2.0)
                ax.add_patch(Circle((cx, cy), r, facecolor=colour, edgecolor="none", alpha=0.45, zorder=0))
        elif geom.get("type") in ("Polygon", "MultiPolygon"):
            polys = [geom["coordinates"]] if geom["type"] == "Polygon" else geom["coordinates"]
            for poly in polys:
                ring = np.asarray(poly[0], dtype=float)[:, :2]
                xy = np.c_[(ring[:, 0] - lon0) * kx, (ring[:, 1] - lat0) * ky]
                if xy[:, 0].max() < x0 or xy[:, 0].min() > x1 or xy[:, 1].max() < y0 or xy[:, 1].min() > y1:
                    continue
                ax.add_patch(Polygon(xy, closed=True, facecolor=colour, edgecolor="#555555", lw=0.3,
                                     alpha=0.5, zorder=0))


def _utci_colours(fig, ax, x, y, utci: np.ndarray, scale: dict | None = None) -> None:
    """Track points coloured by UTCI band (or PET class), on a scale of only the bands the walk reaches."""
    from matplotlib.colors import BoundaryNorm, ListedColormap

    scale = scale or index_scale()
    lo, hi = float(np.nanmin(utci)), float(np.nanmax(utci))
    bands = sorted((b for b in scale["bands"] if b[1] >= lo and b[0] < hi), key=lambda b: b[0])  # cold to hot
    inner = [b[1] for b in bands[:-1]]
    bounds = [min(lo, inner[0] - 1.0) if inner else lo - 1.0, *inner, max(hi, inner[-1] + 1.0) if inner else hi + 1.0]
    cmap = ListedColormap([scale["colours"][b[2]] for b in bands])
    sc = ax.scatter(x, y, c=utci, cmap=cmap, norm=BoundaryNorm(bounds, cmap.N), s=9, zorder=2, linewidths=0)
    cb = fig.colorbar(sc, ax=ax, shrink=0.8, ticks=bounds)
    cb.set_label(f"{scale['name']} [°C] ({scale['scale']})", fontsize=7)
    cb.ax.set_yticklabels([f"{v:.0f}" for v in bounds])
    cb.ax.tick_params(labelsize=6)


def track_figure(df: pd.DataFrame, zone, scene: dict | None = None, index: str = "utci"):
    """Small map of the track (local metres) coloured by UTCI, votes on top, the scene underneath if given."""
    ok = df[C.LAT].notna() & df[C.LON].notna()
    tr = df[ok]
    lat0 = float(tr[C.LAT].mean())
    kx = math.cos(math.radians(lat0)) * 111_320.0  # metres per degree of longitude (spherical, display only)
    ky = 111_320.0
    x = (tr[C.LON].to_numpy(float) - tr[C.LON].mean()) * kx
    y = (tr[C.LAT].to_numpy(float) - lat0) * ky
    fig = figure(5.2, 4.4)
    ax = fig.add_subplot(1, 1, 1)
    fig.subplots_adjust(left=0.16, right=0.98, top=0.97, bottom=0.12)
    ax.plot(x, y, color="#555555", lw=1.0, zorder=1)
    scale = index_scale(index)
    if _has(tr, scale["col"]):
        _utci_colours(fig, ax, x, y, tr[scale["col"]].to_numpy(float), scale)
    votes = vote_rows(tr)
    classes = votes[C.VOTE_COMFORT] if C.VOTE_COMFORT in votes.columns else [None] * len(votes)
    for row_x, row_y, cls in zip((votes[C.LON].to_numpy(float) - tr[C.LON].mean()) * kx,
                                 (votes[C.LAT].to_numpy(float) - lat0) * ky, classes, strict=True):
        ax.scatter([row_x], [row_y], s=70, color=P.comfort_colour(cls if isinstance(cls, str) else None),
                   edgecolor=P.HALO_COLOUR, linewidth=1.0, zorder=4)
    ax.scatter([x[0]], [y[0]], marker="^", s=60, color="#ffffff", edgecolor="#000000", zorder=5, label="start")
    ax.scatter([x[-1]], [y[-1]], marker="s", s=50, color="#000000", zorder=5, label="end")
    if scene is not None:
        pad = 30.0
        extent = ((x.min() - pad, x.max() + pad), (y.min() - pad, y.max() + pad))
        _draw_scene(ax, scene, float(tr[C.LON].mean()), lat0, kx, ky, extent)
    ax.set_aspect("equal", adjustable="datalim")
    ax.set_xlabel("east [m]", fontsize=8)
    ax.set_ylabel("north [m]", fontsize=8)
    ax.tick_params(labelsize=7)
    ax.legend(fontsize=7, loc="best")
    ax.grid(True, lw=0.3, alpha=0.5)
    return fig
