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

import json
import math
import os
from collections.abc import Mapping
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort._html import esc, page
from walkcomfort._io import atomic_write_text
from walkcomfort.environment.indices import with_pet
from walkcomfort.errors import InputError
from walkcomfort.report import session_figures as F

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
# HTML
# --------------------------------------------------------------------------------------
# plain names of the boolean QA flags of a timeline (any other qa_ column: its name in words)
FLAG_LABELS = {
    "qa_settling": "sensors still settling",
    "qa_gps_jump": "GPS jump",
    "qa_utci_out_of_range": "UTCI outside its valid range",
    "qa_wind_clamped": "wind clamped for UTCI",
    "qa_inside_building": "position inside a building",
    "qa_low_sun": "sun below the lowest angle",
}


def flag_label(col: str) -> str:
    """A QA flag column in words: ``qa_gap_weather`` -> ``gap in weather data``."""
    if col in FLAG_LABELS:
        return FLAG_LABELS[col]
    name = col.removeprefix("qa_")
    if name.startswith("gap_"):
        return f"gap in {name[4:]} data"
    if name.startswith("frame_"):
        return f"camera frame {name[6:]}"
    return name.replace("_", " ")


def _e(value: Any) -> str:
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return "–"
    return esc(value)


def _table(headers: list[str], rows: list[list[Any]], cls: str = "") -> str:
    head = "".join(f"<th>{_e(h)}</th>" for h in headers)
    body = "".join("<tr>" + "".join(f"<td>{_e(v)}</td>" for v in r) + "</tr>" for r in rows)
    return f'<div class="wide"><table class="{cls}"><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table></div>'


def _fmt(v: Any) -> Any:
    """Counts as integers, other numbers to three significant figures, flags as yes/NO."""
    if isinstance(v, bool):
        return "yes" if v else "NO"
    if isinstance(v, (int, np.integer)):
        return str(int(v))
    if isinstance(v, (float, np.floating)):
        return str(int(v)) if math.isfinite(v) and float(v).is_integer() else f"{v:.3g}"
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


def _first(data: pd.DataFrame, col: str):
    return str(data[col].dropna().iloc[0]) if col in data.columns and data[col].notna().any() else None


def _facts(data: pd.DataFrame, qa: dict, session: dict, zone, tz_name: str, walk_id: str) -> str:
    t0, t1 = data.index[0].tz_convert(zone), data.index[-1].tz_convert(zone)
    dist = float(data[C.DIST_M].dropna().iloc[-1]) if _first(data, C.DIST_M) is not None else None
    facts = [
        ["Walk", walk_id], ["Participant", session.get("participant") or qa.get("participant")
                            or _first(data, C.PARTICIPANT)], ["Site", session.get("site")],
        ["Date", t0.strftime("%Y-%m-%d")],
        ["Local time", f"{t0:%H:%M:%S} – {t1:%H:%M:%S} ({tz_name})"],
        ["Duration", f"{(t1 - t0).total_seconds() / 60:.1f} min"],
        ["Distance", f"{dist:.0f} m" if dist is not None else None],
        ["Time step", f"{_fmt(session.get('step_s'))} s" if session.get("step_s") else None],
        ["Rows", _fmt(len(data))],
    ]
    for key, label in (("clo", "Clothing [clo]"), ("age_band", "Age band"), ("acclimatised", "Acclimatised"),
                       ("activity", "Activity")):
        if session.get(key) is not None:
            facts.append([label, _fmt(session.get(key))])
    return _table(["", ""], [r for r in facts if r[1] is not None], "facts")


def _qa_summary(qa: dict) -> list[str]:
    summary = qa.get("summary") or {}
    if not summary:
        return ["<p>No qa.json was given: the counts below come from the timeline only.</p>"]
    ok = summary.get("reconciles")
    badge = ('<span class="ok">all rows accounted for</span>' if ok else
             '<span class="bad">rows do not reconcile: read ≠ used + quarantined</span>') if ok is not None else ""
    keys = [k for k in SUMMARY_LABELS if k in summary] + sorted(k for k in summary if k not in SUMMARY_LABELS)
    return [f"<p>{badge}</p>", _table(["check", "value"], [[SUMMARY_LABELS.get(k, k.replace("_", " ")),
                                                            _fmt(summary[k])] for k in keys], "summary")]


def _qa_sources(qa: dict) -> list[str]:
    sources = qa.get("sources") or {}
    if not sources:
        return []
    rows = []
    for name, s in sorted(sources.items()):
        reasons = s.get("quarantine_reasons") or {}
        top = ", ".join(f"{k} ({v})" for k, v in sorted(reasons.items(), key=lambda kv: -kv[1])[:3])
        rows.append([name, s.get("kind"), s.get("file"), _fmt(s.get("rows_read")), _fmt(s.get("rows_used")),
                     _fmt(s.get("rows_quarantined")), _fmt(s.get("reconciles")), top or "–"])
    return ["<h3>Sources</h3>", _table(["source", "kind", "file", "rows read", "rows used", "rows quarantined",
                                        "read = used + quarantined", "main reasons"], rows, "sources")]


def _qa_section(data: pd.DataFrame, qa: dict, quarantine: pd.DataFrame | None) -> list[str]:
    parts = ["<h2>Quality checks</h2>", *_qa_summary(qa), *_qa_sources(qa)]
    qc = quarantine_counts(qa, quarantine)
    parts.append("<h3>Quarantine</h3>")
    if len(qc):
        parts.append(f"<p>{int(qc['rows'].sum())} row(s) set aside with a reason (see quarantine.csv).</p>")
        parts.append(_table(["source", "reason", "rows"], [[a, b, _fmt(c)] for a, b, c in qc.values.tolist()],
                            "quarantine"))
    else:
        parts.append("<p>No row was quarantined.</p>")
    clocks = qa.get("clocks") or {}
    if clocks:
        rows = [[dev, c.get("method"), _fmt(c.get("offset_s")), _fmt(c.get("drift_ppm")), _fmt(c.get("residual_max_s"))]
                for dev, c in sorted(clocks.items())]
        parts += ["<h3>Clocks</h3>", _table(["device", "method", "offset [s]", "drift [ppm]", "largest residual [s]"],
                                            rows, "clocks")]
    warns = qa.get("warnings") or []
    if warns:
        parts.append("<h3>Warnings from ingest</h3><ul>" + "".join(f"<li>{_e(w)}</li>" for w in warns) + "</ul>")
    flags = {c: int(data[c].sum()) for c in data.columns if c.startswith("qa_") and data[c].dtype == bool}
    if flags:
        step = (data.index[1] - data.index[0]).total_seconds() if len(data) > 1 else 0.0
        parts += ["<h3>Flagged time steps</h3>",
                  _table(["flag", "time steps", "time [min]"],
                         [[flag_label(k), str(v), f"{v * step / 60:.1f}"] for k, v in flags.items()], "flags")]
    return parts


def _along_section(data: pd.DataFrame, zone, scene, index: str = "utci") -> list[str]:
    parts = ["<h2>Along the walk</h2>"]
    if not any(c in data.columns for c in (C.TMRT_C, C.UTCI_C)):
        parts.append("<p>This timeline has no Tmrt or UTCI yet: run <code>walkcomfort thermal</code> on it to add "
                     "the thermal environment.</p>")
    name = F.index_scale(index)["name"]
    ts = F.timeseries_figure(data, zone, flag_labels={c: flag_label(c) for c in F.qa_flags(data)}, index=index)
    parts.append(f'<img class="plot" alt="Time series of air temperature, Tmrt, {name}, noise, light, speed and '
                 f'elevation with votes" src="data:image/png;base64,{F.png_base64(ts)}">')
    if C.LAT in data.columns and C.LON in data.columns and data[[C.LAT, C.LON]].notna().all(axis=1).sum() >= 2:
        tf = F.track_figure(data, zone, _scene_geojson(scene), index=index)
        parts.append(f'<img class="map" alt="Map of the track coloured by {name} with the votes" '
                     f'src="data:image/png;base64,{F.png_base64(tf)}">')
    return parts


def _votes_section(data: pd.DataFrame, zone) -> list[str]:
    votes = F.vote_rows(data)
    parts = [f"<h2>Votes ({len(votes)})</h2>"]
    if not len(votes):
        return parts + ["<p>No votes in this walk.</p>"]
    rows = []
    col = lambda r, c: (getattr(r, c, None) if c in votes.columns else None)  # noqa: E731
    for ts_, r in zip(votes.index.tz_convert(zone), votes.itertuples(), strict=True):
        tsv = col(r, C.VOTE_TSV)
        tsv_text = None if tsv is None or pd.isna(tsv) else f"{F.tsv_text(tsv)} ({C.TSV_SCALE.get(int(tsv), '?')})"
        rows.append([f"{ts_:%H:%M:%S}", col(r, C.VOTE_COMFORT), tsv_text, col(r, C.VOTE_KIND), _none(col(r, C.VOTE_NOTE))])
    return parts + [_table(["local time", "comfort", "thermal sensation", "kind", "note"], rows, "votes")]


def _provenance_section(data: pd.DataFrame, qa: dict) -> list[str]:
    prov = (data.attrs or {}).get("provenance") or qa.get("provenance") or {}
    if not prov:
        return []
    inputs = prov.get("inputs") or {}
    parts = ["<h2>Provenance</h2>", f"<p>{_e(prov.get('tool', 'walkcomfort'))} {_e(prov.get('version', ''))}; "
                                    f"{len(inputs)} input file(s).</p>"]
    if inputs:
        parts.append(_table(["input", "digest"], [[k, v] for k, v in sorted(inputs.items())], "prov"))
    return parts


def session_report_html(data: pd.DataFrame, qa: dict, quarantine: pd.DataFrame | None = None,
                        title: str | None = None, timezone: str | None = None, scene=None,
                        index: str = "utci") -> str:
    """The session report page as a string (see :func:`write_session_report`)."""
    from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

    session = dict((data.attrs or {}).get("session") or {})
    tz_name = timezone or session.get("timezone") or "UTC"
    try:
        zone = ZoneInfo(str(tz_name))
    except (ZoneInfoNotFoundError, ValueError):
        raise InputError(f"time zone {tz_name!r} is not an IANA zone name", where="session report",
                         fix="fix [session].timezone in session.toml or pass --timezone") from None
    walk_id = session.get("walk_id") or qa.get("walk_id") or _first(data, C.WALK_ID) or "walk"
    title = title or f"Session {walk_id}"
    parts = [f"<h1>{_e(title)}</h1>", f'<p class="caution">{_e(FIELD_CAUTION)}</p>',
             _facts(data, qa, session, zone, tz_name, walk_id),
             *_qa_section(data, qa, quarantine),
             *_along_section(with_pet(data) if index == "pet" else data, zone, scene, index),
             *_votes_section(data, zone), *_provenance_section(data, qa)]
    return page(title, "\n".join(parts), style=_CSS)


def _none(v):
    return None if v is None or (isinstance(v, float) and math.isnan(v)) or v is pd.NA else v


_CSS = """
body{font:14px/1.45 system-ui,-apple-system,"Segoe UI",Roboto,"DejaVu Sans",sans-serif;color:#1b1b1b;
 max-width:1060px;margin:1.2rem auto;padding:0 1rem}
h1{font-size:1.5rem;margin:.2rem 0 .6rem}h2{font-size:1.2rem;margin:1.4rem 0 .4rem;border-bottom:1px solid #ccc}
h3{font-size:1rem;margin:1rem 0 .3rem}
.wide{overflow-x:auto}
table{border-collapse:collapse;margin:.3rem 0 .8rem;font-size:.85rem}
td,th{border:1px solid #c8c8c8;padding:.2rem .5rem;text-align:left;vertical-align:top}
th{background:#f0f0f0}table.facts th{display:none}table.facts td:first-child{color:#555}
table.votes td:last-child{white-space:pre-wrap;word-break:break-word;max-width:28rem}
.caution{background:#fff4d6;border-left:4px solid #c98a00;padding:.5rem .7rem}
.ok{color:#1f6b36;font-weight:600}.bad{color:#a1131f;font-weight:700}
img.plot{width:100%;height:auto}img.map{max-width:560px;width:100%;height:auto}
@media print{.wide{overflow:visible}}
"""


def _scene_geojson(scene) -> dict | None:
    if scene is None:
        return None
    from walkcomfort.report.map.inputs import load_geojson

    return load_geojson(scene, "scene")[0]


def write_session_report(timeline, qa=None, out_html: str | os.PathLike = "session_report.html", *,
                         quarantine=None, title: str | None = None, timezone: str | None = None,
                         scene=None, index: str = "utci") -> Path:
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
    index : {"utci", "pet"}
        The thermal index drawn with its bands or classes (PET computed from the environment
        columns when the timeline lacks ``pet_c``).

    Returns
    -------
    Path
        The written file.
    """
    data, qa_d, quar = load_session(timeline, qa, quarantine)
    text = session_report_html(data, qa_d, quar, title=title, timezone=timezone, scene=scene, index=index)
    return atomic_write_text(out_html, text)
