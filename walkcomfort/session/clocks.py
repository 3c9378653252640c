"""Device clocks: offset and linear drift against the reference clock, fitted from sync events.

Clock model, for each device::

    device_time = true_time + offset_s + drift·(true_time − t_ref),   drift = drift_ppm·1e-6

``t_ref`` is the mean true time of the device's sync events, so offset and drift
are fitted almost independently (least squares on centred times). With one event
only the offset is fitted (drift from the manifest, default 0); with two or more
both are fitted. The residual misalignment (fitted minus observed device time at
each event) is reported as RMS and maximum; with no more events than fitted
parameters it is exactly zero and says nothing (``dof = 0``).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from walkcomfort.errors import InputError

#: Drifts beyond this are refused: quartz clocks drift by tens of ppm (common practice),
#: so a fit this large means a mistyped sync time (wrong date, hour or zone).
MAX_DRIFT_PPM = 10_000.0
#: Drifts beyond this are reported in QA as unusual but kept.
WARN_DRIFT_PPM = 200.0


@dataclass(frozen=True)
class ClockFit:
    """How one device clock maps to true (reference) time.

    Attributes
    ----------
    device : str
    offset_s : float
        Device minus true time at ``t_ref`` [s].
    drift_ppm : float
        Rate error [10⁻⁶ s s⁻¹]; positive: the device clock runs fast.
    t_ref : pandas.Timestamp or None
        Reference instant of the offset (UTC); ``None`` for a zero-drift clock.
    n_events : int
        Sync events used.
    residual_rms_s, residual_max_s : float
        Misalignment left by the fit at the events [s].
    dof : int
        Events minus fitted parameters (0: the residual cannot reveal anything).
    method : str
        ``reference``, ``manifest`` (declared offset/drift, no events),
        ``sync-offset`` or ``sync-offset-drift``.
    """

    device: str
    offset_s: float = 0.0
    drift_ppm: float = 0.0
    t_ref: pd.Timestamp | None = None
    n_events: int = 0
    residual_rms_s: float = 0.0
    residual_max_s: float = 0.0
    dof: int = 0
    method: str = "manifest"

    @property
    def is_identity(self) -> bool:
        return self.offset_s == 0.0 and self.drift_ppm == 0.0

    def to_true(self, device_times: pd.DatetimeIndex) -> pd.DatetimeIndex:
        """Device readings → true UTC times (the inverse of the clock model)."""
        idx = pd.DatetimeIndex(device_times)
        if self.is_identity or len(idx) == 0:
            return idx
        d = idx.as_unit("ns").asi8
        r = self._ref_ns(d)
        k = self.drift_ppm * 1e-6
        rel = (d - r).astype(np.float64) - self.offset_s * 1e9
        t = r + np.round(rel / (1.0 + k)).astype(np.int64)
        return _utc_index_like(t, idx)

    def to_device(self, true_times: pd.DatetimeIndex) -> pd.DatetimeIndex:
        """True UTC times → what the device clock shows."""
        idx = pd.DatetimeIndex(true_times)
        if self.is_identity or len(idx) == 0:
            return idx
        t = idx.as_unit("ns").asi8
        r = self._ref_ns(t)
        k = self.drift_ppm * 1e-6
        d = t + np.round(self.offset_s * 1e9 + k * (t - r).astype(np.float64)).astype(np.int64)
        return _utc_index_like(d, idx)

    def _ref_ns(self, values: np.ndarray) -> int:
        if self.t_ref is not None:
            return int(pd.Timestamp(self.t_ref).as_unit("ns").value)
        return int(values[0]) if len(values) else 0

    def as_dict(self) -> dict:
        return {
            "offset_s": round(float(self.offset_s), 6),
            "drift_ppm": round(float(self.drift_ppm), 6),
            "t_ref": None if self.t_ref is None else self.t_ref.isoformat(),
            "n_events": int(self.n_events),
            "residual_rms_s": round(float(self.residual_rms_s), 6),
            "residual_max_s": round(float(self.residual_max_s), 6),
            "dof": int(self.dof),
            "method": self.method,
        }


def fit_clock(device_times, true_times, device: str = "", fit_drift: bool | None = None,
              drift_ppm: float = 0.0, where: str = "") -> ClockFit:
    """Fit offset (and drift) of one clock from paired readings.

    Parameters
    ----------
    device_times, true_times : sequence of pandas.Timestamp (UTC)
        The same instants read on the device and on the reference clock.
    device : str
        Name for messages and the result.
    fit_drift : bool, optional
        Fit the drift too; default: when there are two or more events at distinct times.
    drift_ppm : float
        Drift used when it is not fitted [ppm].

    Returns
    -------
    ClockFit
    """
    d = pd.DatetimeIndex(device_times).as_unit("ns").asi8
    t = pd.DatetimeIndex(true_times).as_unit("ns").asi8
    if len(d) == 0:
        return ClockFit(device=device, method="manifest")
    r = int(np.round(t.astype(np.float64).mean())) if len(t) > 1 else int(t[0])
    x = (t - r).astype(np.float64) / 1e9          # true time from t_ref [s]
    y = (d - t).astype(np.float64) / 1e9          # device minus true [s]
    distinct = np.ptp(x) > 1.0 if len(x) > 1 else False
    if fit_drift is None:
        fit_drift = len(x) >= 2 and distinct
    if fit_drift:
        if not distinct:
            raise InputError(f"cannot fit the drift of '{device}': its sync events are at the same time",
                             where=where, fix="mark a second sync event at the end of the walk")
        A = np.column_stack([np.ones_like(x), x])
        (offset, k), *_ = np.linalg.lstsq(A, y, rcond=None)
        n_par = 2
    else:
        k = drift_ppm * 1e-6
        offset = float(np.mean(y - k * x))
        n_par = 1
    drift = float(k) * 1e6
    if abs(drift) > MAX_DRIFT_PPM:
        raise InputError(f"the sync events of '{device}' imply a clock drift of {drift:.0f} ppm "
                         f"({drift * 0.0864:.0f} s per day), far beyond a real clock",
                         where=where, fix="check the dates, hours and time zones of its [[sync]] events")
    res = offset + k * x - y
    return ClockFit(device=device, offset_s=float(offset), drift_ppm=drift, t_ref=pd.Timestamp(r, unit="ns", tz="UTC"),
                    n_events=len(x), residual_rms_s=float(np.sqrt(np.mean(res ** 2))),
                    residual_max_s=float(np.max(np.abs(res))), dof=len(x) - n_par,
                    method="sync-offset-drift" if fit_drift else "sync-offset")


def fit_clocks(session, devices, frame_times: dict[str, pd.Timestamp] | None = None) -> dict[str, ClockFit]:
    """Fit every device clock of a session.

    Parameters
    ----------
    session : SessionSpec
    devices : iterable of str
        Devices whose data are read (sources' ``device``).
    frame_times : dict, optional
        Camera-clock time of each frame by session-relative path, for sync events
        written with ``frame = "camera/IMG_0012.jpg"``.

    Returns
    -------
    dict of str -> ClockFit
        One entry per device (the reference maps to the identity).
    """
    frame_times = frame_times or {}
    where = str(session.manifest_path)
    events = []
    for ev in session.sync:
        ta = ev.time_a
        if ev.frame is not None:
            key = ev.frame.replace("\\", "/")
            if key not in frame_times:
                raise InputError(f"sync frame '{ev.frame}' is not among the frames read (or has no time)",
                                 where=f"{where} [[sync]] #{ev.index} frame",
                                 fix="give the frame's path relative to the session folder, e.g. 'camera/IMG_0012.jpg'")
            ta = frame_times[key]
        events.append((ev.index, ev.device_a, ta, ev.device_b, ev.time_b))

    ref = session.reference_device
    fits: dict[str, ClockFit] = {ref: ClockFit(device=ref, method="reference")}
    pending = set(devices) | {e[1] for e in events} | {e[3] for e in events}
    pending.discard(ref)
    progress = True
    while progress:
        progress = False
        for dev in sorted(pending):
            pairs = []
            for idx, a, ta, b, tb in events:
                if a == dev and b in fits:
                    pairs.append((ta, fits[b].to_true(pd.DatetimeIndex([tb]))[0], idx))
                elif b == dev and a in fits:
                    pairs.append((tb, fits[a].to_true(pd.DatetimeIndex([ta]))[0], idx))
            if not pairs:
                continue
            decl = session.device(dev)
            w = f"{where} [[sync]] #" + ", #".join(str(p[2]) for p in pairs)
            fits[dev] = fit_clock([p[0] for p in pairs], [p[1] for p in pairs], device=dev,
                                  drift_ppm=decl.drift_ppm, where=w)
            pending.discard(dev)
            progress = True
    linked = {e[1] for e in events} | {e[3] for e in events}
    orphans = sorted(d for d in pending if d in linked)
    if orphans:
        raise InputError(f"the sync events of '{orphans[0]}' never reach the reference clock '{ref}'",
                         where=f"{where} [[sync]]",
                         fix=f"add an event linking '{orphans[0]}' to '{ref}' (or to a device that is linked)")
    for dev in sorted(pending):
        decl = session.device(dev)
        fits[dev] = ClockFit(device=dev, offset_s=decl.offset_s, drift_ppm=decl.drift_ppm,
                             t_ref=session.start, method="manifest")
    return fits


def _utc_index_like(ns: np.ndarray, like: pd.DatetimeIndex) -> pd.DatetimeIndex:
    """UTC index from int64 nanoseconds, keeping ``like``'s missing times (NaT) and name."""
    out = pd.DatetimeIndex(ns.view("datetime64[ns]")).tz_localize("UTC")
    nat = np.asarray(like.isna())
    if nat.any():
        out = out.where(~nat)
    return out.rename(like.name)
