"""One HTML page per recorded walk, for the field team to spot problems before modelling.

The page holds, as embedded PNGs (no external file, no script):

- time series in local time of air temperature, mean radiant temperature and UTCI (on
  the UTCI assessment-scale bands), noise, light, walking speed and elevation, with the
  comfort votes drawn on top of every panel and a strip of the QA flags;
- a small map of the track coloured by UTCI with the votes;

and as tables: the QA summary and per-source row counts from ``qa.json`` (rows read =
used + quarantined), quarantine counts by source and reason, the clock corrections, the
ingest warnings and every vote with its note (HTML-escaped, never markup).

:func:`write_session_report` writes it atomically.
"""

from __future__ import annotations

import base64
import html
import io
import json
import math
import os
from collections.abc import Mapping
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort._io import atomic_write_text
from walkcomfort.errors import InputError
from walkcomfort.report import palette as P

TIMELINE_FILE = "timeline.parquet"
QA_FILE = "qa.json"
QUARANTINE_FILE = "quarantine.csv"

FIELD_CAUTION = ("Field walks in heat carry real risk. Plan them under your organisation's heat-stress "
                 "procedure and local occupational-health guidance: water, shade breaks, a buddy, and stop "
                 "at the first sign of heat illness. Nothing in this report says a route or a time is safe.")

# human labels of the qa.json summary keys (unknown keys are shown as they are)
SUMMARY_LABELS = {
    "rows_read": "Rows read (all sources)",
    "rows_used": "Rows used",
    "rows_quarantined": "Rows quarantined",
    "reconciles": "Read = used + quarantined",
    "clock_corrections": "Devices with a clock correction",
    "sync_events": "Sync events",
    "max_clock_residual_s": "Largest clock-fit residual [s]",
    "gaps": "Gaps beyond the allowed length",
    "out_of_range_rows": "Out-of-range rows",
    "duplicate_rows": "Duplicate time stamps",
    "out_of_order_rows": "Rows out of time order",
    "bad_lines": "Unreadable lines",
    "bad_values": "Unusable values",
    "points_without_time": "GPS points without time",
    "gps_jumps": "GPS jumps",
    "outside_walk_window_rows": "Rows outside the walk window",
    "votes_outside_track": "Votes outside the track's time span",
    "frames_outside_track": "Frames outside the track's time span",
    "events_same_step": "Events in the same time step",
    "other_participant_votes": "Votes of another participant",
}


# --------------------------------------------------------------------------------------
# inputs
# --------------------------------------------------------------------------------------
def _read_timeline(path: Path) -> pd.DataFrame:
    try:
        from walkcomfort.session.timeline import read_timeline
    except ImportError:  # pragma: no cover - session stage missing
        read_timeline = None
    if read_timeline is not None:
        return read_timeline(path)
    return pd.read_parquet(path / TIMELINE_FILE if path.is_dir() else path)  # pragma: no cover


def _read_qa(path: Path) -> dict:
    try:
        return json.loads(path.read_text(encoding="utf-8"))
    except OSError as exc:
        raise InputError(f"cannot read the QA file ({exc.strerror})", where=path,
                         fix="run 'walkcomfort ingest' again or pass --qa") from None
    except json.JSONDecodeError as exc:
        raise InputError(f"the QA file is not valid JSON ({exc.msg})", where=f"{path}:{exc.lineno}",
                         fix="re-create it with 'walkcomfort ingest'") from None


def _read_quarantine(path: Path) -> pd.DataFrame:
    try:
        return pd.read_csv(path, dtype=str, keep_default_na=False)
    except pd.errors.EmptyDataError:
        return pd.DataFrame(columns=["source", "file", "row", "reason", "raw"])
    except OSError as exc:
        raise InputError(f"cannot read the quarantine file ({exc.strerror})", where=path,
                         fix="check the walk folder") from None


def load_session(source, qa=None, quarantine=None) -> tuple[pd.DataFrame, dict, pd.DataFrame | None]:
    """(timeline, qa dict, quarantine table or None) from any of the accepted forms.

    Parameters
    ----------
    source : DataFrame, Timeline, path to ``timeline.parquet`` or a walk folder
        A walk folder is ``OUT/<walk_id>/`` as written by ``walkcomfort ingest``; its
        ``qa.json`` and ``quarantine.csv`` are read too unless given.
    qa : dict or path, optional
    quarantine : DataFrame or path, optional
    """
    folder = None
    if hasattr(source, "data") and hasattr(source, "qa"):
        data = source.data
        qa = source.qa if qa is None else qa
        quarantine = getattr(source, "quarantine", None) if quarantine is None else quarantine
    elif isinstance(source, pd.DataFrame):
        data = source
    else:
        path = Path(source)
        if not path.exists():
            raise InputError("no such timeline file or walk folder", where=path,
                             fix="pass OUT/<walk_id> or its timeline.parquet from 'walkcomfort ingest'")
        folder = path if path.is_dir() else path.parent
        data = _read_timeline(path)
    if isinstance(qa, (str, os.PathLike)):
        qa = _read_qa(Path(qa))
    elif qa is None and folder is not None and (folder / QA_FILE).is_file():
        qa = _read_qa(folder / QA_FILE)
    if isinstance(quarantine, (str, os.PathLike)):
        quarantine = _read_quarantine(Path(quarantine))
    elif quarantine is None and folder is not None and (folder / QUARANTINE_FILE).is_file():
        quarantine = _read_quarantine(folder / QUARANTINE_FILE)
    if not isinstance(data, pd.DataFrame):
        raise InputError(f"the timeline is a {type(data).__name__}, not a DataFrame", where="session report",
                         fix="pass a timeline from walkcomfort.session.timeline")
    if not isinstance(data.index, pd.DatetimeIndex) or data.index.tz is None:
        raise InputError("the timeline's index is not a tz-aware time index", where="session report",
                         fix="pass the timeline as built by 'walkcomfort ingest'")
    if len(data) == 0:
        raise InputError("the timeline has no rows", where="session report", fix="check the session's sources")
    if qa is not None and not isinstance(qa, Mapping):
        raise InputError(f"qa must be a dict or a qa.json path, got {type(qa).__name__}", where="session report",
                         fix="pass the qa.json written by 'walkcomfort ingest'")
    return data, dict(qa or {}), quarantine


# --------------------------------------------------------------------------------------
# figures
# --------------------------------------------------------------------------------------
def _figure(width_in: float, height_in: float):
    from matplotlib.figure import Figure

    # fixed margins (set by each figure) instead of a layout engine: half the drawing time
    return Figure(figsize=(width_in, height_in), dpi=100)


def _png(fig) -> str:
    buf = io.BytesIO()
    # fixed metadata so the same inputs give the same bytes
    fig.savefig(buf, format="png", dpi=100, metadata={"Software": None})
    return base64.b64encode(buf.getvalue()).decode("ascii")


def _vote_rows(df: pd.DataFrame) -> pd.DataFrame:
    mask = np.zeros(len(df), dtype=bool)
    for col in (C.VOTE_COMFORT, C.VOTE_TSV):
        if col in df.columns:
            mask |= df[col].notna().to_numpy()
    return df[mask]


def _local_index(df: pd.DataFrame, zone) -> pd.DatetimeIndex:
    # matplotlib draws tz-aware datetimes in the axis' zone; naive local wall times are simplest
    return df.index.tz_convert(zone).tz_localize(None)


def _utci_band_shading(ax, y_low: float, y_high: float) -> None:
    for low, high, name in C.UTCI_BANDS:
        lo, hi = max(low, y_low), min(high, y_high)
        if lo < hi:
            ax.axhspan(lo, hi, color=P.UTCI_BAND_COLOURS[name], alpha=0.16, lw=0, zorder=0)
            ax.text(1.002, (lo + hi) / 2, name, transform=ax.get_yaxis_transform(), fontsize=6.5,
                    va="center", ha="left", color="#333333", clip_on=False)


def timeseries_figure(df: pd.DataFrame, zone, title: str = ""):
    """The stacked time-series figure (matplotlib Figure) of one walk in local time.

    Panels appear only for columns present: temperatures (air, Tmrt, UTCI on the UTCI
    bands), noise, light, speed with elevation, and a QA-flag strip; votes are drawn on
    every panel and marked with their class in a strip on top.
    """
    import matplotlib.dates as mdates

    t = _local_index(df, zone)
    votes = _vote_rows(df)
    vt = _local_index(votes, zone) if len(votes) else pd.DatetimeIndex([])
    has = lambda *cols: any(c in df.columns and df[c].notna().any() for c in cols)  # noqa: E731
    panels = ["votes"]
    if has(C.T_AIR_C, C.TMRT_C, C.UTCI_C):
        panels.append("temp")
    if has(C.LAEQ_DB):
        panels.append("noise")
    if has(C.ILLUM_LUX):
        panels.append("light")
    if has(C.SPEED_MS, C.ELEV_M):
        panels.append("motion")
    flags = [c for c in df.columns if c.startswith("qa_") and df[c].dtype == bool and df[c].any()]
    if flags:
        panels.append("flags")
    heights = {"votes": 0.55, "temp": 2.6, "noise": 1.3, "light": 1.3, "motion": 1.5,
               "flags": 0.25 + 0.22 * len(flags)}
    height = sum(heights[p] for p in panels) + 1.0
    fig = _figure(10.0, height)
    axes = fig.subplots(len(panels), 1, sharex=True, gridspec_kw={"height_ratios": [heights[p] for p in panels]})
    # room on the left for the QA flag names (about 0.06 in per character at 7 pt) and the "QA" label
    longest = max((len(f.removeprefix("qa_")) for f in flags), default=0)
    left = max(0.09, (0.06 * longest + 0.45) / 10.0)
    fig.subplots_adjust(left=left, right=0.84, top=1 - (0.45 if title else 0.12) / height, bottom=0.55 / height,
                        hspace=0.12 * len(panels) / height * 2)
    axes = np.atleast_1d(axes)
    by = dict(zip(panels, axes, strict=False))
    if title:
        fig.suptitle(title, fontsize=11)

    ax = by["votes"]
    ax.set_yticks([])
    ax.set_ylabel("votes", rotation=0, ha="right", va="center", fontsize=8)
    for ts, row in zip(vt, votes.itertuples(), strict=False):
        cls = getattr(row, C.VOTE_COMFORT, None) if C.VOTE_COMFORT in votes.columns else None
        tsv = getattr(row, C.VOTE_TSV, np.nan) if C.VOTE_TSV in votes.columns else np.nan
        colour = P.comfort_colour(cls if isinstance(cls, str) else None)
        ax.scatter([ts], [0.5], s=90, color=colour, edgecolor=P.HALO_COLOUR, linewidth=1.0, zorder=3)
        if pd.notna(tsv):
            ax.text(ts, 0.05, _tsv_text(tsv), ha="center", va="bottom", fontsize=7)
    ax.set_ylim(0, 1)
    handles = [ax.scatter([], [], s=50, color=P.COMFORT_COLOURS[c], edgecolor=P.HALO_COLOUR, label=P.COMFORT_LABELS[c])
               for c in C.COMFORT_CLASSES]
    ax.legend(handles=handles, loc="upper left", bbox_to_anchor=(1.0, 1.25), fontsize=7, frameon=False,
              title="vote (number: TSV)", title_fontsize=7)

    if "temp" in by:
        ax = by["temp"]
        series = [(C.T_AIR_C, "air temperature", "#1f1f1f", "-"), (C.T_GLOBE_C, "globe temperature", "#8a8a8a", ":"),
                  (C.TMRT_C, "Tmrt", "#b4452f", "--"), (C.UTCI_C, "UTCI", "#1d4e89", "-")]
        values = []
        for col, label, colour, style in series:
            if col in df.columns and df[col].notna().any():
                ax.plot(t, df[col].to_numpy(float), style, color=colour, lw=1.2, label=label)
                values.append(df[col].to_numpy(float))
        allv = np.concatenate(values)
        lo, hi = np.nanmin(allv), np.nanmax(allv)
        pad = max(1.0, 0.08 * (hi - lo))
        ax.set_ylim(lo - pad, hi + pad)
        _utci_band_shading(ax, lo - pad, hi + pad)
        ax.set_ylabel("[°C]")
        ax.legend(loc="upper left", fontsize=7, ncols=3, frameon=True, framealpha=0.8)
    if "noise" in by:
        ax = by["noise"]
        ax.plot(t, df[C.LAEQ_DB].to_numpy(float), color="#5b3c88", lw=1.0)
        ax.set_ylabel("LAeq [dB(A)]")
    if "light" in by:
        ax = by["light"]
        lux = df[C.ILLUM_LUX].to_numpy(float)
        ax.plot(t, np.where(lux > 0, lux, np.nan), color="#9a7b00", lw=1.0)
        ax.set_yscale("log")
        ax.set_ylabel("illuminance [lx]")
    if "motion" in by:
        ax = by["motion"]
        if C.SPEED_MS in df.columns and df[C.SPEED_MS].notna().any():
            ax.plot(t, df[C.SPEED_MS].to_numpy(float), color="#2a6f5b", lw=1.0, label="speed")
            ax.set_ylabel("speed [m s⁻¹]")
        if C.ELEV_M in df.columns and df[C.ELEV_M].notna().any():
            ax2 = ax.twinx()
            ax2.plot(t, df[C.ELEV_M].to_numpy(float), color="#7d7d86", lw=1.0, ls=":", label="elevation")
            ax2.set_ylabel("elevation [m]", fontsize=8)
    if "flags" in by:
        ax = by["flags"]
        for k, col in enumerate(flags):
            on = df[col].to_numpy(bool)
            edges = np.flatnonzero(np.diff(np.r_[0, on.astype(int), 0]))
            step = (t[1] - t[0]) if len(t) > 1 else pd.Timedelta(seconds=1)
            spans = [(mdates.date2num(t[a]), mdates.date2num(t[min(b, len(t) - 1)] + step) - mdates.date2num(t[a]))
                     for a, b in zip(edges[::2], edges[1::2], strict=False)]
            ax.broken_barh(spans, (k + 0.15, 0.7), color="#c0392b", alpha=0.7)
        ax.set_yticks(np.arange(len(flags)) + 0.5, [f.removeprefix("qa_") for f in flags], fontsize=7)
        ax.set_ylim(0, len(flags))
        ax.set_ylabel("QA", rotation=0, ha="right", va="center", fontsize=8)

    for name, ax in by.items():
        if name == "votes":
            continue
        for ts in vt:
            ax.axvline(ts, color="#444444", lw=0.6, alpha=0.5, zorder=1)
        ax.grid(True, axis="y", lw=0.3, alpha=0.5)
        ax.tick_params(labelsize=8)
    last = axes[-1]
    last.xaxis.set_major_formatter(mdates.DateFormatter("%H:%M"))
    last.set_xlabel(f"local time ({zone.key if hasattr(zone, 'key') else zone})", fontsize=8)
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


def track_figure(df: pd.DataFrame, zone, scene: dict | None = None):
    """Small map of the track (local metres) coloured by UTCI, votes on top, the scene underneath if given."""
    ok = df[C.LAT].notna() & df[C.LON].notna()
    tr = df[ok]
    lat0 = float(tr[C.LAT].mean())
    kx = math.cos(math.radians(lat0)) * 111_320.0  # metres per degree of longitude (spherical, display only)
    ky = 111_320.0
    x = (tr[C.LON].to_numpy(float) - tr[C.LON].mean()) * kx
    y = (tr[C.LAT].to_numpy(float) - lat0) * ky
    fig = _figure(5.2, 4.4)
    ax = fig.add_subplot(1, 1, 1)
    fig.subplots_adjust(left=0.16, right=0.98, top=0.97, bottom=0.12)
    ax.plot(x, y, color="#555555", lw=1.0, zorder=1)
    if C.UTCI_C in tr.columns and tr[C.UTCI_C].notna().any():
        from matplotlib.colors import BoundaryNorm, ListedColormap

        bands = list(reversed(C.UTCI_BANDS))  # cold to hot
        bounds = [-60.0] + [b[1] for b in bands[:-1]] + [60.0]
        cmap = ListedColormap([P.UTCI_BAND_COLOURS[b[2]] for b in bands])
        sc = ax.scatter(x, y, c=tr[C.UTCI_C].to_numpy(float), cmap=cmap, norm=BoundaryNorm(bounds, cmap.N),
                        s=6, zorder=2, linewidths=0)
        cb = fig.colorbar(sc, ax=ax, shrink=0.8)
        cb.set_label("UTCI [°C] (assessment-scale bands)", fontsize=7)
        cb.ax.tick_params(labelsize=6)
    votes = _vote_rows(tr)
    for row_x, row_y, cls in zip((votes[C.LON].to_numpy(float) - tr[C.LON].mean()) * kx,
                                 (votes[C.LAT].to_numpy(float) - lat0) * ky,
                                 votes[C.VOTE_COMFORT] if C.VOTE_COMFORT in votes.columns else [None] * len(votes), strict=False):
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


# --------------------------------------------------------------------------------------
# HTML
# --------------------------------------------------------------------------------------
def _e(value: Any) -> str:
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return "–"
    return html.escape(str(value), quote=True)


def _table(headers: list[str], rows: list[list[Any]], cls: str = "") -> str:
    head = "".join(f"<th>{_e(h)}</th>" for h in headers)
    body = "".join("<tr>" + "".join(f"<td>{_e(v)}</td>" for v in r) + "</tr>" for r in rows)
    return f'<table class="{cls}"><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>'


def _fmt(v: Any) -> Any:
    if isinstance(v, bool):
        return "yes" if v else "NO"
    if isinstance(v, float):
        return f"{v:.3g}"
    return v


def quarantine_counts(qa: dict, quarantine: pd.DataFrame | None) -> pd.DataFrame:
    """Quarantined rows per source and reason: from the quarantine table, else from qa.json."""
    if quarantine is not None and len(quarantine) and {"source", "reason"} <= set(quarantine.columns):
        out = quarantine.groupby(["source", "reason"], sort=True).size().rename("rows").reset_index()
        return out
    rows = []
    for name, src in sorted((qa.get("sources") or {}).items()):
        for reason, n in sorted((src.get("quarantine_reasons") or {}).items()):
            rows.append({"source": name, "reason": reason, "rows": int(n)})
    return pd.DataFrame(rows, columns=["source", "reason", "rows"])


def session_report_html(data: pd.DataFrame, qa: dict, quarantine: pd.DataFrame | None = None,
                        title: str | None = None, timezone: str | None = None, scene=None) -> str:
    """The session report page as a string (see :func:`write_session_report`)."""
    from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

    session = dict((data.attrs or {}).get("session") or {})
    tz_name = timezone or session.get("timezone") or "UTC"
    try:
        zone = ZoneInfo(str(tz_name))
    except (ZoneInfoNotFoundError, ValueError):
        raise InputError(f"time zone {tz_name!r} is not an IANA zone name", where="session report",
                         fix="fix [session].timezone in session.toml or pass --timezone") from None
    walk_id = session.get("walk_id") or qa.get("walk_id") or (
        str(data[C.WALK_ID].dropna().iloc[0]) if C.WALK_ID in data.columns and data[C.WALK_ID].notna().any()
        else "walk")
    participant = session.get("participant") or qa.get("participant") or (
        str(data[C.PARTICIPANT].dropna().iloc[0]) if C.PARTICIPANT in data.columns
        and data[C.PARTICIPANT].notna().any() else None)
    title = title or f"Session {walk_id}"
    t0, t1 = data.index[0].tz_convert(zone), data.index[-1].tz_convert(zone)
    dist = float(data[C.DIST_M].dropna().iloc[-1]) if C.DIST_M in data.columns and data[C.DIST_M].notna().any() \
        else None
    facts = [
        ["Walk", walk_id], ["Participant", participant], ["Site", session.get("site")],
        ["Date", t0.strftime("%Y-%m-%d")],
        ["Local time", f"{t0:%H:%M:%S} – {t1:%H:%M:%S} ({tz_name})"],
        ["Duration", f"{(t1 - t0).total_seconds() / 60:.1f} min"],
        ["Distance", f"{dist:.0f} m" if dist is not None else None],
        ["Time step", f"{session.get('step_s')} s" if session.get("step_s") else None],
        ["Rows", f"{len(data)}"],
    ]
    for key, label in (("clo", "Clothing [clo]"), ("age_band", "Age band"), ("acclimatised", "Acclimatised"),
                       ("activity", "Activity")):
        if session.get(key) is not None:
            facts.append([label, session.get(key)])
    parts = [f"<h1>{_e(title)}</h1>", f'<p class="caution">{_e(FIELD_CAUTION)}</p>',
             _table(["", ""], [r for r in facts if r[1] is not None], "facts")]

    summary = qa.get("summary") or {}
    parts.append("<h2>Quality checks</h2>")
    if summary:
        ok = summary.get("reconciles")
        badge = ('<span class="ok">all rows accounted for</span>' if ok else
                 '<span class="bad">rows do not reconcile: read ≠ used + quarantined</span>') if ok is not None else ""
        parts.append(f"<p>{badge}</p>")
        keys = [k for k in SUMMARY_LABELS if k in summary] + sorted(k for k in summary if k not in SUMMARY_LABELS)
        parts.append(_table(["check", "value"], [[SUMMARY_LABELS.get(k, k), _fmt(summary[k])] for k in keys],
                            "summary"))
    else:
        parts.append("<p>No qa.json was given: the counts below come from the timeline only.</p>")
    sources = qa.get("sources") or {}
    if sources:
        rows = []
        for name, s in sorted(sources.items()):
            reasons = s.get("quarantine_reasons") or {}
            top = ", ".join(f"{k} ({v})" for k, v in sorted(reasons.items(), key=lambda kv: -kv[1])[:3])
            rows.append([name, s.get("kind"), s.get("file"), s.get("rows_read"), s.get("rows_used"),
                         s.get("rows_quarantined"), _fmt(s.get("reconciles")), top or "–"])
        parts.append("<h3>Sources</h3>")
        parts.append(_table(["source", "kind", "file", "read", "used", "quarantined", "reconciles",
                             "main reasons"], rows, "sources"))
    qc = quarantine_counts(qa, quarantine)
    parts.append("<h3>Quarantine</h3>")
    if len(qc):
        parts.append(f"<p>{int(qc['rows'].sum())} row(s) set aside with a reason (see quarantine.csv).</p>")
        parts.append(_table(["source", "reason", "rows"], qc.values.tolist(), "quarantine"))
    else:
        parts.append("<p>No row was quarantined.</p>")
    clocks = qa.get("clocks") or {}
    if clocks:
        rows = [[dev, c.get("method"), c.get("offset_s"), c.get("drift_ppm"), c.get("residual_max_s")]
                for dev, c in sorted(clocks.items())]
        parts.append("<h3>Clocks</h3>")
        parts.append(_table(["device", "method", "offset [s]", "drift [ppm]", "max residual [s]"], rows, "clocks"))
    warns = qa.get("warnings") or []
    if warns:
        parts.append("<h3>Warnings from ingest</h3><ul>" + "".join(f"<li>{_e(w)}</li>" for w in warns) + "</ul>")
    flags = {c: int(data[c].sum()) for c in data.columns if c.startswith("qa_") and data[c].dtype == bool}
    if flags:
        parts.append("<h3>Flagged time steps</h3>")
        parts.append(_table(["flag", "steps"], [[k, v] for k, v in flags.items()], "flags"))

    parts.append("<h2>Along the walk</h2>")
    if not any(c in data.columns for c in (C.TMRT_C, C.UTCI_C)):
        parts.append("<p>This timeline has no Tmrt or UTCI yet: run <code>walkcomfort thermal</code> on it to add "
                     "the thermal environment.</p>")
    ts = timeseries_figure(data, zone)
    parts.append(f'<img class="plot" alt="Time series of air temperature, Tmrt, UTCI, noise, light, speed and '
                 f'elevation with votes" src="data:image/png;base64,{_png(ts)}">')
    if C.LAT in data.columns and C.LON in data.columns and data[[C.LAT, C.LON]].notna().all(axis=1).sum() >= 2:
        tf = track_figure(data, zone, _scene_geojson(scene))
        parts.append(f'<img class="map" alt="Map of the track coloured by UTCI with the votes" '
                     f'src="data:image/png;base64,{_png(tf)}">')

    votes = _vote_rows(data)
    parts.append(f"<h2>Votes ({len(votes)})</h2>")
    if len(votes):
        rows = []
        for ts_, r in zip(votes.index.tz_convert(zone), votes.itertuples(), strict=False):
            tsv = getattr(r, C.VOTE_TSV, None) if C.VOTE_TSV in votes.columns else None
            tsv_text = None if tsv is None or pd.isna(tsv) else f"{_tsv_text(tsv)} ({C.TSV_SCALE.get(int(tsv), '?')})"
            rows.append([f"{ts_:%H:%M:%S}", getattr(r, C.VOTE_COMFORT, None) if C.VOTE_COMFORT in votes.columns
                         else None, tsv_text, getattr(r, C.VOTE_KIND, None) if C.VOTE_KIND in votes.columns else None,
                         _none(getattr(r, C.VOTE_NOTE, None)) if C.VOTE_NOTE in votes.columns else None])
        parts.append(_table(["local time", "comfort", "thermal sensation", "kind", "note"], rows, "votes"))
    else:
        parts.append("<p>No votes in this walk.</p>")
    prov = (data.attrs or {}).get("provenance") or qa.get("provenance") or {}
    if prov:
        inputs = prov.get("inputs") or {}
        parts.append("<h2>Provenance</h2>")
        parts.append(f"<p>{_e(prov.get('tool', 'walkcomfort'))} {_e(prov.get('version', ''))}; "
                     f"{len(inputs)} input file(s).</p>")
        if inputs:
            parts.append(_table(["input", "digest"], [[k, v] for k, v in sorted(inputs.items())], "prov"))
    body = "\n".join(parts)
    return ("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
            '<meta http-equiv="Content-Security-Policy" content="default-src \'none\'; img-src data:; '
            "style-src 'unsafe-inline'\">\n"
            '<meta name="viewport" content="width=device-width, initial-scale=1">\n'
            f"<title>{_e(title)}</title>\n<style>{_CSS}</style>\n</head>\n<body>\n{body}\n</body>\n</html>\n")


def _tsv_text(tsv) -> str:
    return "0" if int(tsv) == 0 else f"{int(tsv):+d}"


def _none(v):
    return None if v is None or (isinstance(v, float) and math.isnan(v)) or v is pd.NA else v


_CSS = """
body{font:14px/1.45 system-ui,-apple-system,"Segoe UI",Roboto,"DejaVu Sans",sans-serif;color:#1b1b1b;
 max-width:1060px;margin:1.2rem auto;padding:0 1rem}
h1{font-size:1.5rem;margin:.2rem 0 .6rem}h2{font-size:1.2rem;margin:1.4rem 0 .4rem;border-bottom:1px solid #ccc}
h3{font-size:1rem;margin:1rem 0 .3rem}
table{border-collapse:collapse;margin:.3rem 0 .8rem;font-size:.85rem}
td,th{border:1px solid #c8c8c8;padding:.2rem .5rem;text-align:left;vertical-align:top}
th{background:#f0f0f0}table.facts th{display:none}table.facts td:first-child{color:#555}
table.votes td:last-child{white-space:pre-wrap;word-break:break-word;max-width:28rem}
.caution{background:#fff4d6;border-left:4px solid #c98a00;padding:.5rem .7rem}
.ok{color:#1f6b36;font-weight:600}.bad{color:#a1131f;font-weight:700}
img.plot{width:100%;height:auto}img.map{max-width:560px;width:100%;height:auto}
"""


def _scene_geojson(scene) -> dict | None:
    if scene is None:
        return None
    from walkcomfort.report.map.inputs import load_geojson

    return load_geojson(scene, "scene")[0]


def write_session_report(timeline, qa=None, out_html: str | os.PathLike = "session_report.html", *,
                         quarantine=None, title: str | None = None, timezone: str | None = None,
                         scene=None) -> Path:
    """Write the HTML session report of one walk (atomically).

    Parameters
    ----------
    timeline : DataFrame, Timeline, or path to ``timeline.parquet`` / a walk folder
        One walk as built by :func:`walkcomfort.session.timeline.build_timeline`
        (environment columns such as ``tmrt_c`` and ``utci_c`` are drawn when present).
    qa : dict or path, optional
        The walk's ``qa.json`` (read from the walk folder when omitted).
    out_html : path
        Output file.
    quarantine : DataFrame or path, optional
        The walk's quarantine table (``source, file, row, reason, raw``).
    title : str, optional
        Page title (default "Session <walk_id>").
    timezone : str, optional
        IANA zone for local times (default the session's zone).
    scene : path, dict or Scene, optional
        Scene GeoJSON drawn under the track in the small map.

    Returns
    -------
    Path
        The written file.
    """
    data, qa_d, quar = load_session(timeline, qa, quarantine)
    page = session_report_html(data, qa_d, quar, title=title, timezone=timezone, scene=scene)
    return atomic_write_text(out_html, page)
