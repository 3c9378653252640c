"""One walk on one timeline: every source read, clock-corrected, and aligned to a regular step.

The steps of :func:`build_timeline` are the methods of
:class:`walkcomfort.session.builder.TimelineBuilder` (read, clocks, screen the track, grid,
position, sensors, events, QA and the loss check); readings go to the grid by
:mod:`walkcomfort.session.stepping`. Rows read = rows used + rows quarantined, always.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from walkcomfort import _io
from walkcomfort.columns import (
    DIST_M,
    ELEV_M,
    FRAME_PATH,
    HEADING_DEG,
    HR_BPM,
    ILLUM_LUX,
    LAEQ_DB,
    LAT,
    LON,
    PARTICIPANT,
    PRESSURE_HPA,
    QA_GAP,
    RH_PCT,
    SLOPE_PCT,
    SPEED_MS,
    T_AIR_C,
    T_DEVICE_C,
    T_GLOBE_C,
    TIME,
    VOTE_COMFORT,
    VOTE_KIND,
    VOTE_NOTE,
    VOTE_TSV,
    WALK_ID,
    WIND_MS,
)
from walkcomfort.errors import InputError
from walkcomfort.session import qa as _qa
from walkcomfort.session.builder import TimelineBuilder
from walkcomfort.session.losses import refused_from
from walkcomfort.session.manifest import SessionSpec, load_manifest

#: Column order of a timeline (columns of absent sources are left out).
TIMELINE_COLUMNS = (WALK_ID, PARTICIPANT, LAT, LON, ELEV_M, DIST_M, SPEED_MS, HEADING_DEG, SLOPE_PCT, HR_BPM,
                    T_DEVICE_C, T_AIR_C, RH_PCT, WIND_MS, T_GLOBE_C, PRESSURE_HPA, LAEQ_DB, ILLUM_LUX, FRAME_PATH,
                    VOTE_COMFORT, VOTE_TSV, VOTE_NOTE, VOTE_KIND)
#: Attributes in ``.data.attrs["session"]`` (and the Parquet metadata).
SESSION_ATTRS = ("walk_id", "participant", "timezone", "site", "wind_height_m", "globe_height_m",
                 "globe_diameter_m", "globe_emissivity", "tau_air_s", "tau_globe_s", "camera_hfov_deg",
                 "globe_type", "anemometer",
                 "age_band", "clo", "acclimatised", "activity", "step_s", "lag_corrected", "session_dir")
TIMELINE_FILE, QA_FILE, QUARANTINE_FILE = "timeline.parquet", "qa.json", "quarantine.csv"


@dataclass
class Timeline:
    """An aligned walk: ``data`` (one row per step), ``qa`` (dict), ``quarantine`` (rows set aside)."""

    data: pd.DataFrame
    qa: dict
    quarantine: pd.DataFrame
    provenance: dict = field(default_factory=dict)

    @property
    def walk_id(self) -> str:
        return str(self.data.attrs["session"]["walk_id"])

    def write(self, out_dir: str | os.PathLike, csv: bool = False) -> dict[str, Path]:
        """Write ``OUT/<walk_id>/timeline.parquet``, ``qa.json``, ``quarantine.csv`` (and ``timeline.csv``).

        Every file is written atomically, and re-running on the same inputs gives the same bytes.
        """
        folder = Path(out_dir) / self.walk_id
        meta = {"session": self.data.attrs["session"], "provenance": self.provenance,
                "qa_summary": self.qa["summary"]}
        data = self.data.copy()
        data.attrs = {}
        paths = {
            "timeline": _io.write_parquet(folder / TIMELINE_FILE, data, meta),
            "qa": _io.write_json(folder / QA_FILE, self.qa),
            "quarantine": _io.write_csv(folder / QUARANTINE_FILE, self.quarantine, index=False),
        }
        if csv:
            paths["timeline_csv"] = _io.write_csv(folder / "timeline.csv", data)
        elif (folder / "timeline.csv").is_file():
            (folder / "timeline.csv").unlink()  # a CSV of an earlier run would no longer match
        return paths


def build_timeline(session_dir, step_s: float = 1.0, max_gap_s: float = 10.0, *,
                   vote_tolerance_s: float | None = None, frame_tolerance_s: float | None = None,
                   lag_correction: bool = False, settle_n_tau: float = 3.0,
                   max_speed_ms: float = _qa.MAX_WALK_SPEED_MS, elev_smooth_s: float = 15.0,
                   track_smooth_s: float = 5.0, accept_losses: bool | None = None) -> Timeline:
    """Read a session folder and align every source on one regular timeline.

    Parameters
    ----------
    session_dir : path or SessionSpec
        The session folder (with ``session.toml``) or an already loaded manifest.
    step_s : float
        Time step of the timeline [s].
    max_gap_s : float
        Longest spacing of readings across which a sensor is interpolated [s]. A
        source sampled more slowly uses twice its median interval instead, and a
        source's ``max_gap_s`` in the manifest overrides both.
    vote_tolerance_s, frame_tolerance_s : float, optional
        A vote (frame) is attached to the nearest step when at most this far from it
        [s]; default ``max(5, step_s)`` for votes, ``max(2, step_s)`` for frames.
    lag_correction : bool
        Apply the first-order inverse filter to ``t_air_c`` / ``t_globe_c`` with the
        manifest's ``tau_air_s`` / ``tau_globe_s`` (see :mod:`walkcomfort.session.lag`).
    settle_n_tau : float
        ``qa_settling`` is set within this many time constants after a lagged
        sensor starts or resumes after a gap.
    max_speed_ms : float
        A GPS fix implying a faster move than this is a jump [m s⁻¹].
    elev_smooth_s, track_smooth_s : float
        Smoothing spans for elevation/slope and for speed/heading [s].
    accept_losses : bool, optional
        Proceed although a source fails the loss limits (:mod:`walkcomfort.session.limits`);
        default: the manifest's ``[checks] accept_losses``. The failures are then recorded in
        ``qa["losses"]`` and ``qa["warnings"]``.

    Returns
    -------
    Timeline
        ``.data`` indexed by UTC ``time`` at ``step_s``, ``.qa``, ``.quarantine``.

    Raises
    ------
    InputError
        A manifest or file that cannot be used (one line: what, where, fix).
    SessionRefused
        (an ``InputError``) a source lost more than the limits allow, the track is not one
        bounded walk, or too few fixes are left; ``.quarantine`` holds the rows set aside so far.
    """
    params = _parameters(step_s, max_gap_s, vote_tolerance_s, frame_tolerance_s, lag_correction, settle_n_tau,
                         max_speed_ms, elev_smooth_s, track_smooth_s)
    spec = session_dir if isinstance(session_dir, SessionSpec) else load_manifest(session_dir)
    accept = spec.checks.get("accept_losses", False) if accept_losses is None else bool(accept_losses)
    b = TimelineBuilder(spec, params)
    b.read()
    try:
        b.correct_clocks()
        b.screen_track()
        b.lay_grid()
        b.position()
        b.sensors()
        b.events()
    except InputError as exc:
        raise refused_from(exc, b.quarantine(), spec.id) from None
    out = b.finish_flags(TIMELINE_COLUMNS)
    quarantine = b.quarantine()
    provenance = _io.provenance(_inputs(spec, b.metas), params, base=spec.session_dir)
    qa = _qa_record(spec, b, params, provenance, quarantine)
    b.check_losses(qa, quarantine, accept)
    qa["summary"] = _qa.summarize(qa)
    qa["summary"]["warnings"] = len(qa["warnings"])
    qa["summary"]["losses"] = len(qa["losses"])
    out.attrs["session"] = {
        "walk_id": spec.id, "participant": spec.participant, "timezone": spec.timezone, "site": spec.site,
        **{k: spec.sensors.get(k) for k in ("wind_height_m", "globe_height_m", "globe_diameter_m",
                                           "globe_emissivity", "tau_air_s", "tau_globe_s", "camera_hfov_deg",
                                           "globe_type", "anemometer")},
        **spec.attributes, "step_s": float(step_s), "lag_corrected": bool(b.lag_done),
        "session_dir": Path(spec.session_dir).resolve().as_posix(),
    }
    return Timeline(data=out, qa=qa, quarantine=quarantine, provenance=provenance)


def _parameters(step_s, max_gap_s, vote_tolerance_s, frame_tolerance_s, lag_correction, settle_n_tau,
                max_speed_ms, elev_smooth_s, track_smooth_s) -> dict:
    for name, v, lo in (("step_s", step_s, 0.01), ("max_gap_s", max_gap_s, 0.0), ("settle_n_tau", settle_n_tau, 0.0),
                        ("max_speed_ms", max_speed_ms, 0.1), ("elev_smooth_s", elev_smooth_s, 0.0),
                        ("track_smooth_s", track_smooth_s, 0.0)):
        if not isinstance(v, (int, float)) or not np.isfinite(v) or v < lo:
            raise InputError(f"{name} = {v!r} must be a number ≥ {lo}", fix=f"give a valid {name}")
    return {"step_s": float(step_s), "max_gap_s": float(max_gap_s),
            "vote_tolerance_s": max(5.0, step_s) if vote_tolerance_s is None else float(vote_tolerance_s),
            "frame_tolerance_s": max(2.0, step_s) if frame_tolerance_s is None else float(frame_tolerance_s),
            "lag_correction": bool(lag_correction), "settle_n_tau": float(settle_n_tau),
            "max_speed_ms": float(max_speed_ms), "elev_smooth_s": float(elev_smooth_s),
            "track_smooth_s": float(track_smooth_s)}


def _inputs(spec, metas) -> list[Path]:
    inputs = [spec.session_dir / "session.toml"]
    for s in spec.sources:
        if s.kind == "frames":
            inputs += [spec.session_dir / p for p in metas[s.name]["files"]]
        else:
            inputs.append(s.abs_path)
    return inputs


def _qa_record(spec, b: TimelineBuilder, params: dict, provenance: dict, quarantine: pd.DataFrame) -> dict:
    steps = b.steps
    qa = {
        "schema": _qa.QA_SCHEMA,
        "walk_id": spec.id,
        "participant": spec.participant,
        "timeline": {"start": steps[0].isoformat(), "end": steps[-1].isoformat(), "rows": int(len(steps)),
                     "step_s": float(params["step_s"]), "track_start": b.track_t0.isoformat(),
                     "track_end": b.track_t1.isoformat()},
        "parameters": params,
        "checks": dict(spec.checks),
        "max_gap_s": {k: round(v, 6) for k, v in b.gaps_used.items()},
        "clocks": {dev: fit.as_dict() for dev, fit in sorted(b.fits.items())},
        "sync_events": [_event_entry(ev, b.fits, b.frame_times) for ev in spec.sync],
        "sources": {},
        "warnings": list(b.warnings),
        "provenance": provenance,
    }
    for s in spec.sources:
        m = dict(b.metas[s.name])
        df = b.frames[s.name]
        m["rows_used"] = int(len(df))
        extra = dict(b.extra.get(s.name, {}))
        fit = b.fits[s.device]
        extra["clock"] = {"method": fit.method, "offset_s": round(fit.offset_s, 6), "drift_ppm": round(fit.drift_ppm, 6)}
        if len(df):
            extra["first"] = df.index[0].isoformat()
            extra["last"] = df.index[-1].isoformat()
        qa["sources"][s.name] = _qa.source_entry(m, quarantine, extra)
    return qa


def _event_entry(ev, fits, frame_times) -> dict:
    """A sync event and its misalignment after correction: true(a) − true(b) [s]."""
    ta = frame_times.get(ev.frame.replace("\\", "/")) if ev.frame else ev.time_a
    entry = {"index": ev.index, "device_a": ev.device_a, "device_b": ev.device_b, "frame": ev.frame,
             "note": ev.note, "residual_s": None}
    if ta is not None and ev.device_a in fits and ev.device_b in fits:
        a = fits[ev.device_a].to_true(pd.DatetimeIndex([ta]))[0]
        b = fits[ev.device_b].to_true(pd.DatetimeIndex([ev.time_b]))[0]
        entry["residual_s"] = round((a - b).total_seconds(), 6)
    return entry


# --------------------------------------------------------------------------------------------------
def read_timeline(path: str | os.PathLike) -> pd.DataFrame:
    """Read a ``timeline.parquet`` (or the walk folder holding it) with its attrs restored.

    ``.attrs["session"]`` gets the session attributes and ``.attrs["provenance"]``
    the provenance record written by ``walkcomfort ingest``.
    """
    p = Path(path)
    if p.is_dir():
        p = p / TIMELINE_FILE
    if not p.is_file():
        raise InputError(f"no timeline at '{p}'", fix="run `walkcomfort ingest SESSION_DIR -o OUT_DIR` first")
    try:
        df = pd.read_parquet(p)
        meta = _io.read_parquet_metadata(p)
    except (OSError, ValueError) as exc:  # pyarrow's ArrowInvalid is a ValueError: a cut or foreign file
        reason = " ".join(str(exc).split()).split(". ")[0].rstrip(".")   # the first sentence is the cause
        raise InputError(f"cannot read it as Parquet ({reason})", where=p,
                         fix="give a timeline.parquet written by `walkcomfort ingest` (re-run it if the file "
                             "was cut short)") from None
    if "session" not in meta:
        raise InputError("not a walkcomfort timeline (no session metadata)", where=p,
                         fix="give a timeline.parquet written by `walkcomfort ingest`")
    df.attrs = {"session": meta["session"], "provenance": meta.get("provenance", {})}
    if df.index.name != TIME or getattr(df.index, "tz", None) is None:
        raise InputError("the timeline's index is not a UTC time index", where=p,
                         fix="re-create it with `walkcomfort ingest`")
    return df


def combine_campaign(timelines) -> pd.DataFrame:
    """Stack timelines of many walks into one campaign table for modelling.

    Parameters
    ----------
    timelines : iterable of Timeline, DataFrame (with ``attrs["session"]``) or path

    Returns
    -------
    DataFrame
        Index ``time`` (UTC, repeated across walks); the timeline columns (union,
        NaN where a walk lacks a source, whose ``qa_gap_<source>`` is then True) plus the participant attributes
        ``age_band, clo, acclimatised, activity``; sorted by ``walk_id`` then time.
        ``.attrs["sessions"]`` maps each walk id to its session attributes.
    """
    from walkcomfort.columns import PARTICIPANT_ATTRS

    parts, sessions = [], {}
    for t in timelines:
        if isinstance(t, Timeline):
            df = t.data
        elif isinstance(t, pd.DataFrame):
            df = t
        else:
            df = read_timeline(t)
        att = df.attrs.get("session")
        if not att:
            raise InputError("a timeline without attrs['session'] cannot join a campaign",
                             fix="pass Timeline objects, read_timeline() results or paths")
        wid = att["walk_id"]
        if wid in sessions:
            raise InputError(f"walk id '{wid}' appears twice in the campaign", fix="give each session its own [session] id")
        sessions[wid] = att
        df = df.copy()
        df.attrs = {}
        for a in PARTICIPANT_ATTRS:
            if a not in df.columns:   # a column already there (added by a later stage) is kept
                df[a] = att.get(a)
        parts.append(df)
    if not parts:
        raise InputError("no timelines to combine", fix="give at least one timeline")
    out = pd.concat(parts, axis=0, sort=False)
    for c in [c for c in out.columns if c.startswith("qa_")]:
        # a walk without that source has no data there: its gap flag is set, other flags are not
        fill = c.startswith(QA_GAP + "_")
        out[c] = out[c].astype(object).where(out[c].notna(), fill).astype(bool)
    out = out.sort_values([WALK_ID], kind="stable")
    out.attrs["sessions"] = sessions
    return out


def find_timelines(paths) -> list[Path]:
    """The ``timeline.parquet`` files the user means, the one finder every verb uses.

    Each path may be a timeline file, a walk folder holding one, or a folder of walk
    folders (the output of ``walkcomfort ingest`` or ``thermal``: ``OUT/<walk_id>/timeline.parquet``,
    one level down, never deeper, so copies elsewhere under the folder are not mixed in).

    Parameters
    ----------
    paths : iterable of str or path-like

    Returns
    -------
    list of Path
        In the order given (walk folders sorted by name), each file once; empty for no paths.
    """
    found: list[Path] = []
    for p in map(Path, paths):
        if p.is_file():
            found.append(p)
        elif (p / TIMELINE_FILE).is_file():
            found.append(p / TIMELINE_FILE)
        elif p.is_dir():
            subs = sorted(p.glob(f"*/{TIMELINE_FILE}"))
            if not subs:
                raise InputError(f"no {TIMELINE_FILE} in this folder or its walk folders", where=p,
                                 fix="give the output folder of `walkcomfort ingest` (or `thermal`), "
                                     "one of its walk folders, or a timeline.parquet")
            found.extend(subs)
        else:
            raise InputError("does not exist (no such file or folder)", where=p, fix="check the path")
    return list({f.resolve(): f for f in found}.values())
