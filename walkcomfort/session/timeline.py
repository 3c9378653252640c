"""One walk on one timeline: every source read, clock-corrected, and aligned to a regular step.

Steps of :func:`build_timeline`:

1. read the manifest and every source (readers quarantine bad rows);
2. fit the device clocks from the sync events and move every source to true time;
3. drop GPS position jumps (quarantined ``gps_jump``);
4. lay a regular time grid (``step_s``) over the GPS track's span (trimmed by the
   manifest's ``start``/``end``);
5. interpolate position along the track by time, and derive distance, speed,
   heading, smoothed elevation and slope;
6. bring each continuous sensor to the grid: readings faster than the step are
   averaged per step (sound levels on energy, ISO 1996-1), then values are
   interpolated linearly (sound on energy) only between readings at most the
   maximum gap apart; beyond it the value is NaN and ``qa_gap_<source>`` is set;
7. attach votes and frames as events to the nearest step within a tolerance
   (never interpolated);
8. count everything in the QA dict; rows read = rows used + rows quarantined.
"""

from __future__ import annotations

import dataclasses
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
    QA_GPS_JUMP,
    QA_SETTLING,
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
from walkcomfort.session.clocks import WARN_DRIFT_PPM, fit_clocks
from walkcomfort.session.lag import correct_lag, lag_error, moving_average, settling_mask
from walkcomfort.session.manifest import SessionSpec, load_manifest
from walkcomfort.session.readers import read_source
from walkcomfort.session.readers._common import quarantine_frame

#: Column order of a timeline (columns of absent sources are left out).
TIMELINE_COLUMNS = (WALK_ID, PARTICIPANT, LAT, LON, ELEV_M, DIST_M, SPEED_MS, HEADING_DEG, SLOPE_PCT, HR_BPM,
                    T_DEVICE_C, T_AIR_C, RH_PCT, WIND_MS, T_GLOBE_C, PRESSURE_HPA, LAEQ_DB, ILLUM_LUX, FRAME_PATH,
                    VOTE_COMFORT, VOTE_TSV, VOTE_NOTE, VOTE_KIND)
CONTINUOUS = ("weather", "noise", "light")
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
                   track_smooth_s: float = 5.0) -> Timeline:
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

    Returns
    -------
    Timeline
        ``.data`` indexed by UTC ``time`` at ``step_s``, ``.qa``, ``.quarantine``.
    """
    for name, v, lo in (("step_s", step_s, 0.01), ("max_gap_s", max_gap_s, 0.0), ("settle_n_tau", settle_n_tau, 0.0),
                        ("max_speed_ms", max_speed_ms, 0.1), ("elev_smooth_s", elev_smooth_s, 0.0),
                        ("track_smooth_s", track_smooth_s, 0.0)):
        if not isinstance(v, (int, float)) or not np.isfinite(v) or v < lo:
            raise InputError(f"{name} = {v!r} must be a number ≥ {lo}", fix=f"give a valid {name}")
    spec = session_dir if isinstance(session_dir, SessionSpec) else load_manifest(session_dir)
    vote_tol = max(5.0, step_s) if vote_tolerance_s is None else float(vote_tolerance_s)
    frame_tol = max(2.0, step_s) if frame_tolerance_s is None else float(frame_tolerance_s)
    params = {"step_s": float(step_s), "max_gap_s": float(max_gap_s), "vote_tolerance_s": vote_tol,
              "frame_tolerance_s": frame_tol, "lag_correction": bool(lag_correction),
              "settle_n_tau": float(settle_n_tau), "max_speed_ms": float(max_speed_ms),
              "elev_smooth_s": float(elev_smooth_s), "track_smooth_s": float(track_smooth_s)}
    warnings: list[str] = []

    # 1. read ----------------------------------------------------------------------------
    sources = {s.name: s for s in spec.sources}
    frames: dict[str, pd.DataFrame] = {}
    metas: dict[str, dict] = {}
    for s in spec.sources:
        df, meta = read_source(s, spec)
        frames[s.name], metas[s.name] = df, meta
    book = _Book(frames, metas)

    # 2. clocks --------------------------------------------------------------------------
    frame_times = {}
    for s in spec.sources_of("frames"):
        df = frames[s.name]
        frame_times.update(zip(df[FRAME_PATH].tolist(), df.index, strict=False))
    fits = fit_clocks(spec, [s.device for s in spec.sources], frame_times)
    for s in spec.sources:
        fit = fits[s.device]
        df = frames[s.name]
        if fit.method == "manifest" and fit.drift_ppm and fit.t_ref is None and len(df):
            fit = dataclasses.replace(fit, t_ref=df.index[0])
            fits[s.device] = fit
        if not fit.is_identity:
            df = df.copy()
            df.index = fit.to_true(df.index).rename(TIME)
            frames[s.name] = df
    for dev, fit in fits.items():
        if abs(fit.drift_ppm) > WARN_DRIFT_PPM:
            warnings.append(f"clock '{dev}' drifts {fit.drift_ppm:.0f} ppm, more than a usual quartz clock: "
                            f"check its sync events")

    # 3. GPS jumps and the window ----------------------------------------------------------
    gps = spec.sources_of("gps")[0]
    g = frames[gps.name]
    jumps = _qa.find_gps_jumps(g.index, g[LAT].to_numpy(), g[LON].to_numpy(), max_speed_ms)
    jump_times = g.index[jumps]
    book.drop(gps.name, jumps, "gps_jump")
    g = frames[gps.name]
    if len(g) < 2:
        raise InputError(f"the GPS track has {len(g)} usable fix(es); a timeline needs at least two",
                         where=gps.display, fix="check the file (times, coordinates) and its quarantine reasons")
    t0, t1 = g.index[0], g.index[-1]
    track_t0, track_t1 = t0, t1
    if spec.start is not None:
        t0 = max(t0, spec.start)
    if spec.end is not None:
        t1 = min(t1, spec.end)
    if t1 <= t0:
        raise InputError(f"the walk window [{t0.isoformat()} … {t1.isoformat()}] is empty: the manifest's "
                         "start/end do not overlap the GPS track", where=f"{spec.manifest_path} [session]",
                         fix="correct start/end (local time) or remove them")
    step_ns = int(round(step_s * 1e9))
    a = -(-t0.value // step_ns) * step_ns
    b = (t1.value // step_ns) * step_ns
    if b < a:
        a = b = t0.value
    steps = pd.DatetimeIndex(np.arange(a, b + 1, step_ns, dtype=np.int64).view("datetime64[ns]"),
                             name=TIME).tz_localize("UTC")
    s_ns = steps.asi8
    out = pd.DataFrame(index=steps)
    out[WALK_ID] = spec.id
    out[PARTICIPANT] = spec.participant
    gaps_used: dict[str, float] = {}
    src_extra: dict[str, dict] = {}

    # 4. position ---------------------------------------------------------------------------
    mg = _max_gap(gps, g.index, max_gap_s)
    gaps_used[gps.name] = mg
    book.drop_outside(gps.name, t0, t1, mg)
    g = frames[gps.name]
    cols = [c for c in (LAT, LON, ELEV_M, HR_BPM, T_DEVICE_C) if c in g.columns]
    vals, gapflag = _to_steps(g.index.asi8, g[cols].to_numpy(float), s_ns, step_ns, mg, energy=False)
    for j, c in enumerate(cols):
        out[c] = vals[:, j]
    _track(out, step_s, elev_smooth_s, track_smooth_s)
    gps_gap = gapflag
    src_extra[gps.name] = {"gps_jumps": int(jumps.sum()), **_gap_extra(g.index, mg, steps, gapflag),
                           **{k: metas[gps.name].get(k) for k in ("gpx_version", "extensions", "n_segments",
                                                                    "waypoints_ignored", "routes_ignored")
                              if k in metas[gps.name]}}

    # a new GPX segment means the logger was paused (often indoors or in a vehicle): a change of
    # place after which lagged sensors settle again
    seg = metas[gps.name].get("segment_starts") or []
    restarts = list(fits[gps.device].to_true(pd.DatetimeIndex(seg))) if seg else []

    # 5. continuous sensors -------------------------------------------------------------------
    flags: dict[str, np.ndarray] = {}
    lag_done = False
    for s in spec.sources:
        if s.kind not in CONTINUOUS:
            continue
        df = frames[s.name]
        mg = _max_gap(s, df.index, max_gap_s)
        gaps_used[s.name] = mg
        book.drop_outside(s.name, t0, t1, mg)
        df = frames[s.name]
        if s.kind == "weather":
            if lag_correction:
                df = df.copy()
                for col, key in ((T_AIR_C, "tau_air_s"), (T_GLOBE_C, "tau_globe_s")):
                    tau = spec.sensors.get(key)
                    if col in df.columns and tau:
                        ok = df[col].notna()
                        df.loc[ok, col] = correct_lag(df.loc[ok, col], tau, max_gap_s=mg).to_numpy()
                        lag_done = True
                    elif col in df.columns:
                        warnings.append(f"{s.name}: no {key} in [sensors]; {col} not lag-corrected")
            taus = [spec.sensors.get(k) for k in ("tau_air_s", "tau_globe_s")]
            settle = np.zeros(len(steps), dtype=bool)
            lag_info = {}
            for col, tau in zip((T_AIR_C, T_GLOBE_C), taus, strict=False):
                if col in df.columns and tau:
                    ok = df[col].notna().to_numpy()
                    settle |= settling_mask(df.index[ok], steps, tau, settle_n_tau, mg, restarts=restarts)
                    raw = frames[s.name]          # the readings as logged (before any lag correction)
                    okr = raw[col].notna().to_numpy()
                    err = lag_error(raw.index[okr], raw[col].to_numpy(float)[okr], tau)
                    if err.size:
                        lag_info[col] = {"tau_s": float(tau), "lag_error_p95_k": round(float(np.percentile(err, 95)), 4),
                                         "lag_error_over_1k_frac": round(float(np.mean(err > 1.0)), 4)}
            metas[s.name]["lag"] = lag_info
            if not any(taus):
                warnings.append(f"{s.name}: no tau_air_s / tau_globe_s in [sensors]; settling not assessed")
            flags[QA_SETTLING] = settle
        cols = [c for c in df.columns]
        vals, gapflag = _to_steps(df.index.asi8, df[cols].to_numpy(float), s_ns, step_ns, mg,
                                  energy=(s.kind == "noise"))
        for j, c in enumerate(cols):
            out[c] = vals[:, j]
        flags[f"{QA_GAP}_{s.name}"] = gapflag
        src_extra[s.name] = _gap_extra(df.index, mg, steps, gapflag)
        if "lag" in metas[s.name]:
            src_extra[s.name]["lag"] = metas[s.name]["lag"]

    # 6. events ---------------------------------------------------------------------------------
    for kind, tol, colmap in (("votes", vote_tol, (VOTE_COMFORT, VOTE_TSV, VOTE_NOTE, VOTE_KIND)),
                              ("frames", frame_tol, (FRAME_PATH,))):
        specs = spec.sources_of(kind)
        if not specs:
            continue
        cand = []  # (step index, distance ns, order, source name, position)
        for s in specs:
            df = frames[s.name]
            t = df.index.asi8
            k = np.rint((t - s_ns[0]) / step_ns).astype(np.int64)
            inside = (k >= 0) & (k < len(s_ns))
            kk = np.clip(k, 0, len(s_ns) - 1)
            dist = np.abs(t - s_ns[kk])
            ok = inside & (dist <= tol * 1e9)
            in_window = (t >= t0.value - tol * 1e9) & (t <= t1.value + tol * 1e9)
            trimmed = ~ok & (spec.start is not None or spec.end is not None) & \
                (t >= track_t0.value - tol * 1e9) & (t <= track_t1.value + tol * 1e9) & ~in_window
            book.mark(s.name, trimmed, "outside_walk_window")
            book.mark(s.name, ~ok & ~trimmed, "outside_track_span")
            for i in np.flatnonzero(ok):
                cand.append((int(kk[i]), int(dist[i]), len(cand), s.name, int(i)))
        cand.sort()
        taken: set[int] = set()
        colvals = {c: np.full(len(steps), None, dtype=object) for c in colmap}
        if VOTE_TSV in colvals:
            colvals[VOTE_TSV] = np.full(len(steps), np.nan)
        for k, _, _, name, i in cand:
            if k in taken:
                book.mark_one(name, i, "same_step")
                continue
            taken.add(k)
            row = frames[name].iloc[i]
            for c in colmap:
                v = row[c]
                colvals[c][k] = None if (isinstance(v, str) and v == "") else v
        for s in specs:
            book.apply(s.name)
        for c in colmap:
            if c == VOTE_TSV:
                out[c] = colvals[c].astype(float)
            else:
                out[c] = pd.array(colvals[c], dtype="str")
        for s in specs:
            src_extra[s.name] = {"attached": int(len(frames[s.name]))}

    # 7. flags and column order --------------------------------------------------------------------
    out[f"{QA_GAP}_gps"] = gps_gap
    for c, v in flags.items():
        if c != QA_SETTLING:
            out[c] = v
    if QA_SETTLING in flags:
        out[QA_SETTLING] = flags[QA_SETTLING]
    jump_flag = np.zeros(len(steps), dtype=bool)
    if len(jump_times):
        k = np.rint((jump_times.asi8 - s_ns[0]) / step_ns).astype(np.int64)
        k = k[(k >= 0) & (k < len(steps))]
        jump_flag[k] = True
    out[QA_GPS_JUMP] = jump_flag
    order = [c for c in TIMELINE_COLUMNS if c in out.columns] + \
            [c for c in out.columns if c not in TIMELINE_COLUMNS]
    out = out[order]

    # 8. QA, quarantine, provenance -----------------------------------------------------------------
    quarantine = book.quarantine([s.name for s in spec.sources])
    inputs = [spec.session_dir / "session.toml"]
    for s in spec.sources:
        if s.kind == "frames":
            inputs += [spec.session_dir / p for p in metas[s.name]["files"]]
        else:
            inputs.append(s.abs_path)
    provenance = _io.provenance(inputs, params, base=spec.session_dir)
    qa = {
        "schema": _qa.QA_SCHEMA,
        "walk_id": spec.id,
        "participant": spec.participant,
        "timeline": {"start": steps[0].isoformat(), "end": steps[-1].isoformat(), "rows": int(len(steps)),
                     "step_s": float(step_s), "track_start": track_t0.isoformat(),
                     "track_end": track_t1.isoformat()},
        "parameters": params,
        "max_gap_s": {k: round(v, 6) for k, v in gaps_used.items()},
        "clocks": {dev: fit.as_dict() for dev, fit in sorted(fits.items())},
        "sync_events": [_event_entry(ev, fits, frame_times) for ev in spec.sync],
        "sources": {},
        "warnings": warnings,
        "provenance": provenance,
    }
    for s in spec.sources:
        m = dict(metas[s.name])
        m["rows_used"] = int(len(frames[s.name]))
        extra = dict(src_extra.get(s.name, {}))
        fit = fits[s.device]
        extra["clock"] = {"method": fit.method, "offset_s": round(fit.offset_s, 6), "drift_ppm": round(fit.drift_ppm, 6)}
        if len(frames[s.name]):
            extra["first"] = frames[s.name].index[0].isoformat()
            extra["last"] = frames[s.name].index[-1].isoformat()
        qa["sources"][s.name] = _qa.source_entry(m, quarantine, extra)
    qa["summary"] = _qa.summarize(qa)

    attrs = {
        "walk_id": spec.id, "participant": spec.participant, "timezone": spec.timezone, "site": spec.site,
        **{k: spec.sensors.get(k) for k in ("wind_height_m", "globe_height_m", "globe_diameter_m",
                                           "globe_emissivity", "tau_air_s", "tau_globe_s", "camera_hfov_deg",
                                           "globe_type", "anemometer")},
        **spec.attributes, "step_s": float(step_s), "lag_corrected": bool(lag_done),
        "session_dir": Path(spec.session_dir).resolve().as_posix(),
    }
    out.attrs["session"] = attrs
    return Timeline(data=out, qa=qa, quarantine=quarantine, provenance=provenance)


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
class _Book:
    """Keeps each source's rows and the rows the timeline stage sets aside, so counts reconcile."""

    def __init__(self, frames: dict, metas: dict):
        self.frames = frames
        self.metas = metas
        self.extra: dict[str, list[tuple]] = {k: [] for k in frames}
        self.pending: dict[str, np.ndarray] = {}

    def drop(self, name: str, mask: np.ndarray, reason: str) -> None:
        mask = np.asarray(mask, dtype=bool)
        reasons = np.where(mask, reason, "").astype(object)
        self.drop_reasons(name, reasons)

    def drop_reasons(self, name: str, reasons: np.ndarray) -> None:
        """Move the rows with a non-empty reason to the quarantine."""
        mask = reasons != ""
        if not mask.any():
            return
        m = self.metas[name]
        rows, raws = m["row_numbers"], m["raw_lines"]
        for i in np.flatnonzero(mask):
            self.extra[name].append((name, m["file"], int(rows[i]), str(reasons[i]), raws[i]))
        keep = ~mask
        self.frames[name] = self.frames[name][keep]
        m["row_numbers"] = np.asarray(rows)[keep]
        m["raw_lines"] = [r for r, k in zip(raws, keep, strict=False) if k]

    def drop_outside(self, name: str, t0, t1, margin_s: float) -> None:
        t = self.frames[name].index.asi8
        lo, hi = t0.value - margin_s * 1e9, t1.value + margin_s * 1e9
        self.drop(name, (t < lo) | (t > hi), "outside_walk_window")

    # marks are collected (event sources) and applied at once, keeping positions stable meanwhile
    def mark(self, name: str, mask: np.ndarray, reason: str) -> None:
        cur = self.pending.setdefault(name, np.full(len(self.frames[name]), "", dtype=object))
        sel = np.asarray(mask, dtype=bool) & (cur == "")
        cur[sel] = reason

    def mark_one(self, name: str, i: int, reason: str) -> None:
        cur = self.pending.setdefault(name, np.full(len(self.frames[name]), "", dtype=object))
        if cur[i] == "":
            cur[i] = reason

    def apply(self, name: str) -> None:
        cur = self.pending.pop(name, None)
        if cur is not None:
            self.drop_reasons(name, cur)

    def quarantine(self, order: list[str]) -> pd.DataFrame:
        parts = []
        for name in order:
            q = self.metas[name]["quarantine"]
            rows = list(q.itertuples(index=False, name=None)) + self.extra[name]
            rows.sort(key=lambda r: (r[2], r[3]))
            parts.extend(rows)
        return quarantine_frame(parts)


def _max_gap(spec, times: pd.DatetimeIndex, default: float) -> float:
    if spec.max_gap_s is not None:
        return float(spec.max_gap_s)
    t = times.asi8
    if len(t) < 2:
        return float(default)
    med = float(np.median(np.diff(t))) / 1e9
    return max(float(default), 2.0 * med)


def _gap_extra(times, max_gap, steps, gapflag) -> dict:
    st = _qa.gap_stats(times, max_gap, steps[0], steps[-1])
    st["coverage_frac"] = round(float(1.0 - gapflag.mean()) if len(gapflag) else 0.0, 6)
    return st


def _to_steps(t_ns: np.ndarray, values: np.ndarray, steps_ns: np.ndarray, step_ns: int, max_gap_s: float,
              energy: bool = False) -> tuple[np.ndarray, np.ndarray]:
    """Values (n, k) at times ``t_ns`` → values at the steps, and the gap flag per step.

    Readings faster than the step are first averaged per step (arithmetic, or on
    energy for sound levels); then values are interpolated linearly between the two
    readings around each step when they are at most ``max_gap_s`` apart.
    """
    v = np.asarray(values, dtype=float)
    if v.ndim == 1:
        v = v[:, None]
    n_steps, k = len(steps_ns), v.shape[1]
    res = np.full((n_steps, k), np.nan)
    if len(t_ns) == 0:
        return res, np.ones(n_steps, dtype=bool)
    if energy:
        with np.errstate(over="ignore"):
            v = 10.0 ** (v / 10.0)
    t = np.asarray(t_ns, dtype=np.int64)
    if len(t) > 1 and np.median(np.diff(t)) < step_ns:
        # bin readings on the step they are nearest to, then treat bins as readings
        b = np.floor((t - steps_ns[0] + step_ns / 2) / step_ns).astype(np.int64)
        ub, inv = np.unique(b, return_inverse=True)
        ok = np.isfinite(v)
        sums = np.zeros((len(ub), k))
        cnts = np.zeros((len(ub), k))
        for j in range(k):
            sums[:, j] = np.bincount(inv, weights=np.where(ok[:, j], v[:, j], 0.0), minlength=len(ub))
            cnts[:, j] = np.bincount(inv, weights=ok[:, j].astype(float), minlength=len(ub))
        with np.errstate(invalid="ignore", divide="ignore"):
            v = sums / cnts
        t = steps_ns[0] + ub * step_ns
    max_gap_ns = max_gap_s * 1e9
    # the gap flag depends on when readings exist, whatever the column
    j = np.searchsorted(t, steps_ns, side="right") - 1
    jc = np.clip(j, 0, len(t) - 1)
    jn = np.clip(j + 1, 0, len(t) - 1)
    exact = (j >= 0) & (t[jc] == steps_ns)
    bridged = (j >= 0) & (j + 1 < len(t)) & ((t[jn] - t[jc]) <= max_gap_ns)
    gap = ~(exact | bridged)
    for col in range(k):
        ok = np.isfinite(v[:, col])
        tt, vv = t[ok], v[ok, col]
        if len(tt) == 0:
            continue
        jj = np.searchsorted(tt, steps_ns, side="right") - 1
        a = np.clip(jj, 0, len(tt) - 1)
        c = np.clip(jj + 1, 0, len(tt) - 1)
        span = (tt[c] - tt[a]).astype(float)
        ex = (jj >= 0) & (tt[a] == steps_ns)
        use = (jj >= 0) & (jj + 1 < len(tt)) & (span <= max_gap_ns) & (span > 0)
        with np.errstate(invalid="ignore", divide="ignore"):
            w = (steps_ns - tt[a]) / np.where(span > 0, span, 1.0)
        r = np.full(n_steps, np.nan)
        r[use] = vv[a][use] + w[use] * (vv[c][use] - vv[a][use])
        r[ex] = vv[a][ex]
        res[:, col] = r
    if energy:
        with np.errstate(divide="ignore", invalid="ignore"):
            res = 10.0 * np.log10(res)
    return res, gap


def _geod():
    from pyproj import Geod

    return Geod(ellps="WGS84")


def _track(out: pd.DataFrame, step_s: float, elev_smooth_s: float, track_smooth_s: float) -> None:
    """Distance, speed, heading, smoothed elevation and slope from the stepped positions."""
    lat = out[LAT].to_numpy(float)
    lon = out[LON].to_numpy(float)
    w = max(1, int(round(track_smooth_s / step_s)))
    la = moving_average(lat, w)
    lo = moving_average(lon, w)
    ok = np.isfinite(la) & np.isfinite(lo)
    n = len(out)
    dist = np.full(n, np.nan)
    idx = np.flatnonzero(ok)
    # distances and azimuths on the WGS84 ellipsoid (Karney's geodesic via pyproj)
    geod = _geod()
    if len(idx):
        d = np.zeros(len(idx))
        if len(idx) > 1:
            _, _, d[1:] = geod.inv(lo[idx[:-1]], la[idx[:-1]], lo[idx[1:]], la[idx[1:]])
        dist[idx] = np.cumsum(d)
    h = max(1, int(round(track_smooth_s / 2 / step_s)))
    i0 = np.clip(np.arange(n) - h, 0, n - 1)
    i1 = np.clip(np.arange(n) + h, 0, n - 1)
    dt = (i1 - i0) * step_s
    with np.errstate(invalid="ignore", divide="ignore"):
        speed = (dist[i1] - dist[i0]) / np.where(dt > 0, dt, np.nan)
    heading = np.full(n, np.nan)
    both = ok[i0] & ok[i1]
    if both.any():
        az, _, disp = geod.inv(lo[i0][both], la[i0][both], lo[i1][both], la[i1][both])
        # standing still: no direction of walking
        heading[both] = np.where(disp >= 0.5, np.mod(az, 360.0), np.nan)
    if ELEV_M in out.columns:
        we = max(1, int(round(elev_smooth_s / step_s)))
        elev = moving_average(out[ELEV_M].to_numpy(float), we)
        elev[~ok] = np.nan
        h2 = max(1, int(round(elev_smooth_s / 2 / step_s)))
        j0 = np.clip(np.arange(n) - h2, 0, n - 1)
        j1 = np.clip(np.arange(n) + h2, 0, n - 1)
        run = dist[j1] - dist[j0]
        with np.errstate(invalid="ignore", divide="ignore"):
            slope = np.where(run >= 3.0, (elev[j1] - elev[j0]) / run * 100.0, np.nan)
        out[ELEV_M] = elev
    else:
        out[ELEV_M] = np.nan
        slope = np.full(n, np.nan)
    out[DIST_M] = dist
    out[SPEED_MS] = speed
    out[HEADING_DEG] = heading
    out[SLOPE_PCT] = slope


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
