"""GPS track: GPX 1.0 / 1.1 (via gpxpy) or a CSV of ``time, lat, lon[, elev]``.

GPX times are UTC by the GPX schema (``xsd:dateTime``, "Coordinated Universal
Time"); a file whose times carry no zone is read in ``time_zone`` (default UTC),
and a file that mixes zoned and unzoned times is refused. A point without a time
is quarantined (``no_time``), never given an invented one. Extensions are read
by local tag name whatever their namespace prefix, so Garmin ``gpxtpx:hr`` and a
bare ``<hr>`` are the same thing.
"""

from __future__ import annotations

import re

import numpy as np
import pandas as pd

from walkcomfort.columns import ELEV_M, HR_BPM, LAT, LON, T_DEVICE_C
from walkcomfort.errors import InputError
from walkcomfort.session.readers._common import (
    Quarantine,
    assemble_metadata,
    finish,
    localize,
    range_reasons,
    read_sensor_csv,
)

# extension local name -> output column
EXTENSION_NAMES = {
    "hr": HR_BPM, "heartrate": HR_BPM, "heart_rate": HR_BPM,
    "atemp": T_DEVICE_C, "temp": T_DEVICE_C, "temperature": T_DEVICE_C,
}


def read_gps(path, source_spec, session_spec):
    """Read a GPS track.

    Parameters
    ----------
    path : path
        A ``.gpx`` file (``format = "gpx"``) or CSV (``format = "csv"``).
    source_spec : SourceSpec
    session_spec : SessionSpec

    Returns
    -------
    data : DataFrame
        UTC index ``time``; ``lat, lon`` [°] WGS84, ``elev_m`` [m] (NaN where the
        file has none), and ``hr_bpm`` [min⁻¹], ``t_device_c`` [°C] when the GPX
        extensions carry them.
    metadata : dict
        Counts, ``quarantine``, ``gpx_version``, ``creator``, ``extensions``
        (local names seen), ``n_tracks``, ``n_segments``, ``segment_starts``
        (UTC times at which a new segment begins).
    """
    if source_spec.format == "csv":
        return read_sensor_csv(source_spec, session_spec,
                               [("lat", LAT, True), ("lon", LON, True), ("elev", ELEV_M, False)], "gps", path)
    return read_gpx(path, source_spec, session_spec)


_TRKPT = re.compile(r"<(?:[\w.-]+:)?trkpt\b[^>]*?/>|<(?:[\w.-]+:)?trkpt\b.*?</(?:[\w.-]+:)?trkpt\s*>", re.S)
_TIME_TEXT = re.compile(r"<(?:[\w.-]+:)?time\b[^>]*>(.*?)</", re.S)


def _local(tag: str) -> str:
    return str(tag).rsplit("}", 1)[-1].rsplit(":", 1)[-1].lower()


def read_gpx(path, source_spec, session_spec):
    """Read a GPX file (see :func:`read_gps`)."""
    from pathlib import Path

    import gpxpy
    import gpxpy.gpx

    path = Path(path)
    try:
        text = path.read_bytes().decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise InputError(f"not UTF-8 text ({exc.reason} at byte {exc.start})", where=source_spec.display,
                         fix="export the GPX again as UTF-8") from None
    try:
        gpx = gpxpy.parse(text)
    except gpxpy.gpx.GPXException as exc:
        msg = " ".join(str(exc).split())
        raise InputError(f"not a readable GPX file ({msg})", where=source_spec.display,
                         fix="the file may be truncated or not GPX: export the track again from the device") from None
    except (RecursionError, ValueError) as exc:
        raise InputError(f"not a readable GPX file ({type(exc).__name__})", where=source_spec.display,
                         fix="export the track again from the device") from None
    q = Quarantine(source_spec.name, source_spec.path)
    # the raw XML of every track point, in document order, so a quarantined point keeps its text
    blocks = [" ".join(b.split()) for b in _TRKPT.findall(text)]
    n_points = sum(len(seg.points) for trk in gpx.tracks for seg in trk.segments)
    pts = _Points()
    for ti, trk in enumerate(gpx.tracks, start=1):
        for si, seg in enumerate(trk.segments, start=1):
            pts.segment(ti, si, seg.points, blocks if len(blocks) == n_points else None, q)
    if pts.n_aware and pts.n_naive:
        raise InputError(f"the GPX mixes {pts.n_aware} times with a zone and {pts.n_naive} without",
                         where=source_spec.display, fix="export the track again with every time in UTC ('Z')")
    if not pts.t and pts.k == 0:
        raise InputError("the GPX holds no track points", where=source_spec.display,
                         fix="export the recorded track (not only waypoints or a route)")
    times, reason = _gpx_times(pts, source_spec, session_spec)
    values = {LAT: np.asarray(pts.lat, float), LON: np.asarray(pts.lon, float), ELEV_M: np.asarray(pts.ele, float)}
    for col, v in pts.ext.items():
        values[col] = np.asarray(v, float)
    range_reasons(values, reason)
    df, meta = finish(times, values, reason, None, np.asarray(pts.rows, dtype=np.int64), pts.raws, q)
    n = len(pts.t)
    seg_starts = sorted({times[i].isoformat() for i in pts.seg_first[1:] if i < n and not pd.isna(times[i])})
    return df, assemble_metadata("gps", source_spec, meta, q, gpx_version=gpx.version, creator=gpx.creator,
                                 extensions=sorted(pts.ext_seen), n_tracks=len(gpx.tracks), n_segments=pts.n_seg,
                                 segment_starts=seg_starts, waypoints_ignored=len(gpx.waypoints),
                                 routes_ignored=len(gpx.routes))


def _gpx_times(pts, source_spec, session_spec) -> tuple[pd.DatetimeIndex, np.ndarray]:
    n = len(pts.t)
    reason = np.full(n, "", dtype=object)
    if not n:
        return pd.DatetimeIndex([], tz="UTC").as_unit("ns"), reason
    # a time outside what a nanosecond clock holds (year 1 or 9999) is a bad time, not a crash
    ok = np.array([1678 < x.year < 2262 for x in pts.t], dtype=bool)
    reason[~ok] = "bad_time"
    if pts.n_naive:
        loc = pd.DatetimeIndex([pd.Timestamp(x) if good else pd.NaT for x, good in zip(pts.t, ok, strict=True)])
        times, why = localize(loc.as_unit("ns"), session_spec.zone_for(source_spec.time_zone))
        sel = (why != "") & (reason == "")
        reason[sel] = why[sel]
        return times, reason
    vals = [pd.Timestamp(x).tz_convert("UTC").tz_localize(None) if good else pd.NaT
            for x, good in zip(pts.t, ok, strict=True)]
    return pd.DatetimeIndex(vals).as_unit("ns").tz_localize("UTC"), reason


class _Points:
    """The columns of the track points as they are read, with the raw text of each."""

    def __init__(self):
        self.lat, self.lon, self.ele, self.t, self.rows, self.raws = [], [], [], [], [], []
        self.ext: dict[str, list] = {}
        self.ext_seen: set[str] = set()
        self.seg_first: list[int] = []
        self.n_aware = self.n_naive = self.k = self.n_seg = 0

    def segment(self, ti: int, si: int, points, blocks, q: Quarantine) -> None:
        self.n_seg += 1
        first = True
        for pi, p in enumerate(points, start=1):
            self.k += 1
            k = self.k
            raw = f"trk {ti} seg {si} pt {pi}: " + (blocks[k - 1] if blocks else
                                                     f"lat={p.latitude} lon={p.longitude} ele={p.elevation}")
            if p.time is None:
                # gpxpy gives None both for a missing and an unreadable <time>
                m = _TIME_TEXT.search(blocks[k - 1]) if blocks else None
                q.add(k, "bad_time" if (m and m.group(1).strip()) else "no_time", raw)
                continue
            if p.time.tzinfo is None or p.time.utcoffset() is None:
                self.n_naive += 1
            else:
                self.n_aware += 1
            if first:
                self.seg_first.append(len(self.t))
                first = False
            self.add(p, k, raw)

    def add(self, p, k: int, raw: str) -> None:
        self.lat.append(p.latitude)
        self.lon.append(p.longitude)
        self.ele.append(np.nan if p.elevation is None else p.elevation)
        self.t.append(p.time)
        self.rows.append(k)
        self.raws.append(raw)
        vals = _extension_values(getattr(p, "extensions", None) or [], self.ext_seen)
        for col in vals:
            self.ext.setdefault(col, [np.nan] * (len(self.t) - 1))
        for col in self.ext:
            self.ext[col].append(vals.get(col, np.nan))


def _extension_values(elements, seen: set) -> dict:
    vals = {}
    for el in elements:
        for sub in el.iter():
            name = _local(sub.tag)
            seen.add(name)
            col = EXTENSION_NAMES.get(name)
            if col and sub.text is not None:
                try:
                    vals[col] = float(sub.text)
                except ValueError:
                    vals[col] = np.nan
    return vals
