"""The steps of :func:`walkcomfort.session.timeline.build_timeline`, one method each.

1. read the manifest's sources (readers quarantine bad rows);
2. fit the device clocks from the sync events and move every source to true time;
3. screen the track: vehicle legs flagged, GPS jumps and fixes far in time from the rest
   quarantined; a track that is not one walk of bounded length is refused with its candidate
   walks (:mod:`walkcomfort.session.walks`);
4. lay a regular time grid (``step_s``) over the track's span (trimmed by ``start``/``end``);
5. interpolate position along the track (still periods filled, :mod:`walkcomfort.session.track`),
   and derive distance, speed, heading, smoothed elevation and slope;
6. bring each continuous sensor to the grid (:mod:`walkcomfort.session.stepping`);
7. attach votes and frames as events to the nearest step within a tolerance;
8. count everything; rows read = rows used + rows quarantined; check the losses
   (:mod:`walkcomfort.session.losses`).
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd

from walkcomfort.columns import (
    ELEV_M,
    FRAME_PATH,
    HR_BPM,
    LAT,
    LON,
    PARTICIPANT,
    QA_GAP,
    QA_GPS_JUMP,
    QA_SETTLING,
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
from walkcomfort.session import losses as _losses
from walkcomfort.session import stepping as _st
from walkcomfort.session import track as _track
from walkcomfort.session import walks as _walks
from walkcomfort.session.book import QuarantineBook
from walkcomfort.session.clocks import WARN_DRIFT_PPM, fit_clocks
from walkcomfort.session.lag import correct_lag, lag_error, settling_mask
from walkcomfort.session.readers import read_source

CONTINUOUS = ("weather", "noise", "light")
#: flags of the track (the glossary's qa_* family): filled at the last position; inside a vehicle leg
QA_TRACK_FILL, QA_VEHICLE = "qa_track_fill", "qa_vehicle"
#: share of readings with a lag error above 1 K beyond which the summary warns that a sensor never settled
UNSETTLED_WARN_FRAC = 0.5


class TimelineBuilder:
    """Holds one session's sources while they are read, corrected and aligned."""

    def __init__(self, spec, params: dict):
        self.spec = spec
        self.p = params
        self.limits = spec.checks
        self.warnings: list[str] = []
        self.frames: dict[str, pd.DataFrame] = {}
        self.metas: dict[str, dict] = {}
        self.book: QuarantineBook | None = None
        self.extra: dict[str, dict] = {}
        self.gaps_used: dict[str, float] = {}
        self.flags: dict[str, np.ndarray] = {}
        self.spans: dict[str, tuple] = {}
        self.lag_done = False

    # 1 ------------------------------------------------------------------------------------
    def read(self) -> None:
        for s in self.spec.sources:
            self.frames[s.name], self.metas[s.name] = read_source(s, self.spec)
        self.book = QuarantineBook(self.frames, self.metas)

    def quarantine(self) -> pd.DataFrame:
        return self.book.quarantine([s.name for s in self.spec.sources])

    # 2 ------------------------------------------------------------------------------------
    def correct_clocks(self) -> None:
        spec = self.spec
        self.frame_times = {}
        for s in spec.sources_of("frames"):
            df = self.frames[s.name]
            self.frame_times.update(zip(df[FRAME_PATH].tolist(), df.index, strict=False))
        fits = fit_clocks(spec, [s.device for s in spec.sources], self.frame_times)
        for s in spec.sources:
            fit = fits[s.device]
            df = self.frames[s.name]
            if fit.method == "manifest" and fit.drift_ppm and fit.t_ref is None and len(df):
                fit = dataclasses.replace(fit, t_ref=df.index[0])
                fits[s.device] = fit
            if not fit.is_identity:
                df = df.copy()
                df.index = fit.to_true(df.index).rename(TIME)
                self.frames[s.name] = df
        for dev, fit in fits.items():
            if abs(fit.drift_ppm) > WARN_DRIFT_PPM:
                self.warnings.append(f"clock '{dev}' drifts {fit.drift_ppm:.0f} ppm, more than a usual quartz "
                                     f"clock: check its sync events")
        self.fits = fits

    # 3 ------------------------------------------------------------------------------------
    def screen_track(self) -> None:
        spec, gps = self.spec, self.spec.sources_of("gps")[0]
        self.gps = gps
        self._trim_to_window(gps.name)
        g = self.frames[gps.name]
        self.book.drop(gps.name, _walks.time_outliers(g.index.asi8, self.limits), "time_outlier")
        g = self.frames[gps.name]
        vehicle = _track.vehicle_legs(g.index.asi8, g[LAT].to_numpy(), g[LON].to_numpy(), self.limits)
        jumps = _track.find_jumps(g.index, g[LAT].to_numpy(), g[LON].to_numpy(), self.p["max_speed_ms"], vehicle)
        self.jump_times = g.index[jumps]
        self.n_jumps = int(jumps.sum())
        self.vehicle_times = g.index[vehicle & ~jumps]
        self.book.drop(gps.name, jumps, "gps_jump")
        g = self.frames[gps.name]
        if len(g) < 2:
            q = self.quarantine()
            counts = q.loc[q["source"] == gps.name, "reason"].value_counts()
            why = ", ".join(f"{k} {v}" for k, v in counts.head(3).items()) or "none set aside"
            raise InputError(f"the GPS track has {len(g)} usable fix(es) of {self.metas[gps.name]['rows_read']} "
                             f"({why}); a timeline needs at least two", where=gps.display,
                             fix="check the file's times and coordinates (the quarantine table lists every point "
                                 "set aside)")
        _walks.refuse_long_track(g.index, self.limits, spec.tz, gps.display, str(spec.manifest_path))
        for s in spec.sources:
            df = self.frames[s.name]
            if len(df) and s.kind != "gps":
                self.spans[s.name] = (df.index[0], df.index[-1])
        self.spans["__track__"] = (g.index[0], g.index[-1])

    def _trim_to_window(self, name: str) -> None:
        """With ``start``/``end`` declared, fixes far outside them do not take part in the span checks."""
        spec = self.spec
        if spec.start is None and spec.end is None:
            return
        t = self.frames[name].index
        margin = pd.Timedelta(hours=self.limits["split_gap_h"])
        lo = spec.start - margin if spec.start is not None else t.min()
        hi = spec.end + margin if spec.end is not None else t.max()
        self.book.drop(name, np.asarray((t < lo) | (t > hi)), "outside_walk_window")

    # 4 ------------------------------------------------------------------------------------
    def lay_grid(self) -> None:
        spec = self.spec
        g = self.frames[self.gps.name]
        t0, t1 = g.index[0], g.index[-1]
        self.track_t0, self.track_t1 = t0, t1
        if spec.start is not None:
            t0 = max(t0, spec.start)
        if spec.end is not None:
            t1 = min(t1, spec.end)
        if t1 <= t0:
            raise InputError(f"the walk window [{t0.isoformat()} … {t1.isoformat()}] is empty: the manifest's "
                             "start/end do not overlap the GPS track", where=f"{spec.manifest_path} [session]",
                             fix="correct start/end (local time) or remove them")
        self.t0, self.t1 = t0, t1
        step_ns = int(round(self.p["step_s"] * 1e9))
        a = -(-t0.value // step_ns) * step_ns
        b = (t1.value // step_ns) * step_ns
        if b < a:
            a = b = t0.value
        self.steps = pd.DatetimeIndex(np.arange(a, b + 1, step_ns, dtype=np.int64).view("datetime64[ns]"),
                                      name=TIME).tz_localize("UTC")
        self.s_ns, self.step_ns = self.steps.asi8, step_ns
        out = pd.DataFrame(index=self.steps)
        out[WALK_ID] = spec.id
        out[PARTICIPANT] = spec.participant
        self.out = out

    # 5 ------------------------------------------------------------------------------------
    def position(self) -> None:
        gps, p = self.gps, self.p
        mg = _st.max_gap_for(gps, self.frames[gps.name].index, p["max_gap_s"])
        self.gaps_used[gps.name] = mg
        self.book.drop_outside(gps.name, self.t0, self.t1, mg)
        g = self.frames[gps.name]
        cols = [c for c in (LAT, LON, ELEV_M, HR_BPM, T_DEVICE_C) if c in g.columns]
        fixes = g[cols].to_numpy(float)
        vals, gap = _st.to_steps(g.index.asi8, fixes, self.s_ns, self.step_ns, mg, energy=False)
        vals, gap, still, sparse = _track.fill_track_gaps(self.s_ns, g.index.asi8, fixes, vals, gap, self.limits)
        for j, c in enumerate(cols):
            self.out[c] = vals[:, j]
        _st.add_track(self.out, p["step_s"], p["elev_smooth_s"], p["track_smooth_s"])
        self.gps_gap, self.track_fill = gap, still | sparse
        if len(self.vehicle_times):
            self.warnings.append(f"{gps.name}: {len(self.vehicle_times)} fixes in vehicle legs (sustained speed above "
                                 f"{self.limits['vehicle_speed_ms']:g} m/s), flagged qa_vehicle: cut them with "
                                 "[session] start/end if they are not part of the walk")
        meta = self.metas[gps.name]
        self.extra[gps.name] = {"gps_jumps": self.n_jumps, **_st.gap_extra(g.index, mg, self.steps, gap),
                                "still_filled_steps": int(still.sum()), "sparse_filled_steps": int(sparse.sum()),
                                "vehicle_fixes": int(len(self.vehicle_times)),
                                **{k: meta.get(k) for k in ("gpx_version", "extensions", "n_segments",
                                                            "waypoints_ignored", "routes_ignored") if k in meta}}
        # a new GPX segment means the logger was paused (often indoors or in a vehicle): a change of
        # place after which lagged sensors settle again
        seg = meta.get("segment_starts") or []
        self.restarts = list(self.fits[gps.device].to_true(pd.DatetimeIndex(seg))) if seg else []

    # 6 ------------------------------------------------------------------------------------
    def sensors(self) -> None:
        for s in self.spec.sources:
            if s.kind in CONTINUOUS:
                self._sensor(s)

    def _sensor(self, s) -> None:
        mg = _st.max_gap_for(s, self.frames[s.name].index, self.p["max_gap_s"])
        self.gaps_used[s.name] = mg
        self.book.drop_outside(s.name, self.t0, self.t1, mg)
        df = self.frames[s.name]
        if s.kind == "weather":
            df = self._weather(s, df, mg)
        cols = list(df.columns)
        vals, gap = _st.to_steps(df.index.asi8, df[cols].to_numpy(float), self.s_ns, self.step_ns, mg,
                                 energy=(s.kind == "noise"))
        for j, c in enumerate(cols):
            self.out[c] = vals[:, j]
        self.flags[f"{QA_GAP}_{s.name}"] = gap
        self.extra[s.name] = _st.gap_extra(df.index, mg, self.steps, gap)
        if "lag" in self.metas[s.name]:
            self.extra[s.name]["lag"] = self.metas[s.name]["lag"]

    def _weather(self, s, df: pd.DataFrame, mg: float) -> pd.DataFrame:
        """Lag correction (when asked), the settling flag and the lag statistics of a weather logger."""
        spec = self.spec
        lag_noise: dict = {}
        if self.p["lag_correction"]:
            df = df.copy()
            for col, key in ((T_AIR_C, "tau_air_s"), (T_GLOBE_C, "tau_globe_s")):
                tau = spec.sensors.get(key)
                if col in df.columns and tau:
                    ok = df[col].notna()
                    # a globe's time constant follows the air speed at it (session.lag)
                    speed = df.loc[ok, WIND_MS].to_numpy(float) if col == T_GLOBE_C and WIND_MS in df.columns else None
                    fixed = correct_lag(df.loc[ok, col], tau, max_gap_s=mg, air_speed_ms=speed,
                                        diameter_m=spec.sensors.get("globe_diameter_m") if speed is not None else None)
                    df.loc[ok, col] = fixed.to_numpy()
                    lag_noise[col] = fixed.attrs.get("lag", {})
                    self.lag_done = True
                elif col in df.columns:
                    self.warnings.append(f"{s.name}: no {key} in [sensors]; {col} not lag-corrected")
        taus = [spec.sensors.get(k) for k in ("tau_air_s", "tau_globe_s")]
        settle = np.zeros(len(self.steps), dtype=bool)
        lag_info = {}
        raw = self.frames[s.name]          # the readings as logged (before any lag correction)
        for col, tau in zip((T_AIR_C, T_GLOBE_C), taus, strict=True):
            if col not in df.columns or not tau:
                continue
            ok = df[col].notna().to_numpy()
            settle |= settling_mask(df.index[ok], self.steps, tau, self.p["settle_n_tau"], mg, restarts=self.restarts)
            okr = raw[col].notna().to_numpy()
            err = lag_error(raw.index[okr], raw[col].to_numpy(float)[okr], tau)
            if err.size:
                over = float(np.mean(err > 1.0))
                lag_info[col] = {"tau_s": float(tau), "lag_error_p95_k": round(float(np.percentile(err, 95)), 4),
                                 "lag_error_over_1k_frac": round(over, 4),
                                 **{f"correction_{k}": v for k, v in lag_noise.get(col, {}).items()}}
                if over > UNSETTLED_WARN_FRAC:
                    self.warnings.append(f"{s.name}: {col} is still settling for {over:.0%} of readings (lag error "
                                         f"above 1 K with tau {tau:g} s): let the sensor settle before the walk, or "
                                         f"ingest with --lag-correction")
        self.metas[s.name]["lag"] = lag_info
        if not any(taus):
            self.warnings.append(f"{s.name}: no tau_air_s / tau_globe_s in [sensors]; settling not assessed")
        self.flags[QA_SETTLING] = settle
        cross = _losses.unit_cross_check(df, s.name)
        if cross:
            self.unit_failure = (s, cross)
        return df

    # 7 ------------------------------------------------------------------------------------
    def events(self) -> None:
        p = self.p
        for kind, tol, colmap in (("votes", p["vote_tolerance_s"], (VOTE_COMFORT, VOTE_TSV, VOTE_NOTE, VOTE_KIND)),
                                  ("frames", p["frame_tolerance_s"], (FRAME_PATH,))):
            specs = self.spec.sources_of(kind)
            if specs:
                self._events(specs, tol, colmap)

    def _events(self, specs, tol: float, colmap) -> None:
        cand = []  # (step index, distance ns, order, source name, position)
        for s in specs:
            for k, dist, i in self._place_events(s, tol):
                cand.append((k, dist, len(cand), s.name, i))
        cand.sort()
        taken: set[int] = set()
        colvals = {c: np.full(len(self.steps), None, dtype=object) for c in colmap}
        if VOTE_TSV in colvals:
            colvals[VOTE_TSV] = np.full(len(self.steps), np.nan)
        for k, _, _, name, i in cand:
            if k in taken:
                self.book.mark_one(name, i, "same_step")
                continue
            taken.add(k)
            row = self.frames[name].iloc[i]
            for c in colmap:
                v = row[c]
                colvals[c][k] = None if (isinstance(v, str) and v == "") else v
        for s in specs:
            self.book.apply(s.name)
        for c in colmap:
            self.out[c] = colvals[c].astype(float) if c == VOTE_TSV else pd.array(colvals[c], dtype="str")
        for s in specs:
            self.extra[s.name] = {"attached": int(len(self.frames[s.name]))}

    def _place_events(self, s, tol: float):
        """(step, distance, position) of each event near a step; marks the others for the quarantine."""
        spec, s_ns, step_ns = self.spec, self.s_ns, self.step_ns
        t = self.frames[s.name].index.asi8
        k = np.rint((t - s_ns[0]) / step_ns).astype(np.int64)
        inside = (k >= 0) & (k < len(s_ns))
        kk = np.clip(k, 0, len(s_ns) - 1)
        dist = np.abs(t - s_ns[kk])
        ok = inside & (dist <= tol * 1e9)
        in_window = (t >= self.t0.value - tol * 1e9) & (t <= self.t1.value + tol * 1e9)
        trimmed = ~ok & (spec.start is not None or spec.end is not None) & \
            (t >= self.track_t0.value - tol * 1e9) & (t <= self.track_t1.value + tol * 1e9) & ~in_window
        self.book.mark(s.name, trimmed, "outside_walk_window")
        self.book.mark(s.name, ~ok & ~trimmed, "outside_track_span")
        return [(int(kk[i]), int(dist[i]), int(i)) for i in np.flatnonzero(ok)]

    # 8 ------------------------------------------------------------------------------------
    def finish_flags(self, column_order) -> pd.DataFrame:
        out = self.out
        out[f"{QA_GAP}_gps"] = self.gps_gap
        for c, v in self.flags.items():
            if c != QA_SETTLING:
                out[c] = v
        if QA_SETTLING in self.flags:
            out[QA_SETTLING] = self.flags[QA_SETTLING]
        out[QA_GPS_JUMP] = self._step_flag(self.jump_times)
        out[QA_TRACK_FILL] = self.track_fill
        out[QA_VEHICLE] = self._span_flag(self.vehicle_times)
        order = [c for c in column_order if c in out.columns] + [c for c in out.columns if c not in column_order]
        self.out = out[order]
        return self.out

    def _step_flag(self, times: pd.DatetimeIndex) -> np.ndarray:
        flag = np.zeros(len(self.steps), dtype=bool)
        if len(times):
            k = np.rint((times.asi8 - self.s_ns[0]) / self.step_ns).astype(np.int64)
            flag[k[(k >= 0) & (k < len(self.steps))]] = True
        return flag

    def _span_flag(self, times: pd.DatetimeIndex) -> np.ndarray:
        """Steps between consecutive flagged fixes (one vehicle leg is one segment of steps)."""
        flag = self._step_flag(times)
        t = times.asi8
        if len(t) < 2:
            return flag
        g = self.frames[self.gps.name].index.asi8
        # consecutive flagged fixes that are also consecutive fixes of the track bound a leg
        pos = np.searchsorted(g, t)
        for a, b, pa, pb in zip(t[:-1], t[1:], pos[:-1], pos[1:], strict=True):
            if pb - pa == 1:
                flag[(self.s_ns >= a) & (self.s_ns <= b)] = True
        return flag

    def check_losses(self, qa: dict, quarantine: pd.DataFrame, accept: bool) -> None:
        """Warnings and failures of the loss limits; refuses the session unless losses are accepted."""
        failures, warnings = _losses.assess(qa, quarantine, self.spec, self.spans)
        unit = getattr(self, "unit_failure", None)
        if unit:
            s, line = unit
            failures.append({"source": s.name, "file": s.path, "check": "units", "share": None, "what": line,
                             "cause": "values look like °F", "fix": 'declare units.t_globe / units.t_air = "degF"',
                             "row": None, "where": f"{s.where} units", "reasons": {}})
        qa["warnings"].extend(warnings)
        qa["losses"] = [{k: v for k, v in f.items() if k != "where"} for f in failures]
        qa["losses_accepted"] = bool(failures and accept)
        if failures and accept:
            qa["warnings"].extend(_losses.accepted_lines(failures))
        elif failures:
            raise _losses.refusal(failures, quarantine, qa, self.spec.id)
