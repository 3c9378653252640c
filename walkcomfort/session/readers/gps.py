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
    q = Quarantine(source_spec.name, source_spec.path)
    # the raw XML of every track point, in document order, so a quarantined point keeps its text
    blocks = [" ".join(b.split()) for b in _TRKPT.findall(text)]
    n_points = sum(len(seg.points) for trk in gpx.tracks for seg in trk.segments)
    if len(blocks) != n_points:
        blocks = None
    lat, lon, ele, t, rows, raws = [], [], [], [], [], []
    ext: dict[str, list] = {}
    ext_seen: set[str] = set()
    seg_first: list[int] = []
    n_aware = n_naive = 0
    k = 0
    n_seg = 0
    for ti, trk in enumerate(gpx.tracks, start=1):
        for si, seg in enumerate(trk.segments, start=1):
            n_seg += 1
            first_in_seg = True
            for pi, p in enumerate(seg.points, start=1):
                k += 1
                raw = f"trk {ti} seg {si} pt {pi}: " + (blocks[k - 1] if blocks else
                                                         f"lat={p.latitude} lon={p.longitude} ele={p.elevation}")
                if p.time is None:
                    # gpxpy gives None both for a missing and an unreadable <time>
                    m = _TIME_TEXT.search(blocks[k - 1]) if blocks else None
                    q.add(k, "bad_time" if (m and m.group(1).strip()) else "no_time", raw)
                    continue
                if p.time.tzinfo is None or p.time.utcoffset() is None:
                    n_naive += 1
                else:
                    n_aware += 1
                if first_in_seg:
                    seg_first.append(len(t))
                    first_in_seg = False
                lat.append(p.latitude)
                lon.append(p.longitude)
                ele.append(np.nan if p.elevation is None else p.elevation)
                t.append(p.time)
                rows.append(k)
                raws.append(raw)
                vals = {}
                for el in getattr(p, "extensions", None) or []:
                    for sub in el.iter():
                        name = _local(sub.tag)
                        ext_seen.add(name)
                        col = EXTENSION_NAMES.get(name)
                        if col and sub.text is not None:
                            try:
                                vals[col] = float(sub.text)
                            except ValueError:
                                vals[col] = np.nan
                for col, v in vals.items():
                    ext.setdefault(col, [np.nan] * (len(t) - 1))
                for col in ext:
                    ext[col].append(vals.get(col, np.nan))
    if n_aware and n_naive:
        raise InputError(f"the GPX mixes {n_aware} times with a zone and {n_naive} without",
                         where=source_spec.display, fix="export the track again with every time in UTC ('Z')")
    if not t:
        if k == 0:
            raise InputError("the GPX holds no track points", where=source_spec.display,
                             fix="export the recorded track (not only waypoints or a route)")
    n = len(t)
    reason = np.full(n, "", dtype=object)
    if n_naive:
        loc = pd.DatetimeIndex([pd.Timestamp(x) for x in t]).as_unit("ns")
        times, why = localize(loc, session_spec.zone_for(source_spec.time_zone))
        reason[why != ""] = why[why != ""]
    else:
        times = pd.DatetimeIndex([pd.Timestamp(x).tz_convert("UTC") for x in t], tz="UTC").as_unit("ns") if n \
            else pd.DatetimeIndex([], tz="UTC").as_unit("ns")
    values = {LAT: np.asarray(lat, float), LON: np.asarray(lon, float), ELEV_M: np.asarray(ele, float)}
    for col, v in ext.items():
        values[col] = np.asarray(v, float)
    range_reasons(values, reason)
    df, meta = finish(times, values, reason, None, np.asarray(rows, dtype=np.int64), raws, q)
    seg_starts = sorted({times[i].isoformat() for i in seg_first[1:] if i < n and not pd.isna(times[i])})
    return df, assemble_metadata("gps", source_spec, meta, q, gpx_version=gpx.version, creator=gpx.creator,
                                 extensions=sorted(ext_seen), n_tracks=len(gpx.tracks), n_segments=n_seg,
                                 segment_starts=seg_starts, waypoints_ignored=len(gpx.waypoints),
                                 routes_ignored=len(gpx.routes))
