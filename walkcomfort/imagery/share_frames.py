"""The frames of a shareable session copy: which are left out, and the copies of the others.

A frame is left out when the walker was within the trimming radius of the track's
start or end when it was taken, or when its position cannot be told (outside the
track's time span or across a long gap between fixes). The others are copied with
faces blurred (:mod:`walkcomfort.imagery.faces`) and only the EXIF time tags the
frames reader needs. Frames left out are named in the share record only by count
and a time span rounded outward to :data:`RECORD_SPAN_ROUND`: their file names and
exact times would tell where and when the trimmed ends were.
"""

from __future__ import annotations

import io
from pathlib import Path

import numpy as np
import pandas as pd

from walkcomfort import _io
from walkcomfort import columns as C
from walkcomfort._progress import track
from walkcomfort.imagery import faces as _faces

#: A frame's position is interpolated between GPS fixes at most this far apart [s].
MAX_FIX_GAP_S = 30.0
JPEG_QUALITY = 92
#: Time spans of frames left out are rounded outward to this: no finer than a walk's own span.
RECORD_SPAN_ROUND = "1h"


def _frame_positions(times: pd.DatetimeIndex, pts: pd.DataFrame | None):
    """Interpolated lat/lon of each frame time (NaN outside the track or across long fix gaps)."""
    n = len(times)
    lat = np.full(n, np.nan)
    lon = np.full(n, np.nan)
    if pts is None or len(pts) == 0 or n == 0:
        return lat, lon
    t = pts["t"].to_numpy(dtype=np.int64)
    ft = times.as_unit("ns").asi8
    j = np.searchsorted(t, ft, side="right")
    inside = (j > 0) & (j < len(t)) | (ft == t[-1])
    jj = np.clip(j, 1, len(t) - 1) if len(t) > 1 else np.zeros_like(j)
    if len(t) > 1:
        gap = (t[jj] - t[jj - 1]) / 1e9
        inside &= gap <= MAX_FIX_GAP_S
    lat[inside] = np.interp(ft[inside], t, pts[C.LAT].to_numpy())
    lon[inside] = np.interp(ft[inside], t, pts[C.LON].to_numpy())
    return lat, lon


def _gps_on_reference_clock(spec, fits) -> pd.DataFrame | None:
    from walkcomfort.session.readers import read_source

    gps = spec.sources_of("gps")
    if not gps:
        return None
    df, _ = read_source(gps[0], spec)
    fit = fits.get(gps[0].device)
    t = fit.to_true(df.index) if fit is not None else df.index
    return pd.DataFrame({"t": pd.DatetimeIndex(t).as_unit("ns").asi8, C.LAT: df[C.LAT].to_numpy(float),
                         C.LON: df[C.LON].to_numpy(float)}).sort_values("t", kind="stable")


def share_frames(spec, stage: Path, radius_m, blur, plates, face_params, progress, workers=1, pool=None):
    from walkcomfort.imagery.sessions import session_frames

    frames, quarantine, _, fits = session_frames(spec, return_fits=True)
    gps_points = _gps_on_reference_clock(spec, fits)
    entry = {"frames_read": int(len(frames) + len(quarantine)), "not_copied_untimed_or_unreadable": int(len(quarantine)),
             "removed_near_track_ends": _span([]), "removed_position_unknown": _span([]), "copied": 0,
             "faces_blurred": 0, "frames_with_faces": {}, "exif_kept": ["DateTimeOriginal", "SubSecTimeOriginal",
                                                                      "OffsetTimeOriginal"]}
    kept: set[str] = set()
    removed: set[str] = set(quarantine["file"]) if len(quarantine) else set()
    if not len(frames):
        return entry, kept, removed
    lat, lon = _frame_positions(frames.index, gps_points)
    ends = None
    if gps_points is not None and len(gps_points):
        g = gps_points.sort_values("t")
        ends = (g[C.LAT].iloc[0], g[C.LON].iloc[0], g[C.LAT].iloc[-1], g[C.LON].iloc[-1])
    params = face_params or _faces.FaceParams(plates=plates)
    if plates and not params.plates:
        params = _faces.FaceParams(params.min_face_px, params.scale_factor, params.min_neighbors, params.width, True)
    from walkcomfort.imagery.privacy import great_circle_m

    todo, unknown, near = [], [], []
    for i, rel in enumerate(frames[C.FRAME_PATH]):
        if not np.isfinite(lat[i]) or ends is None:
            unknown.append(frames.index[i])
            removed.add(rel)
            continue
        d = min(great_circle_m(ends[0], ends[1], lat[i], lon[i]), great_circle_m(ends[2], ends[3], lat[i], lon[i]))
        if d <= radius_m:
            near.append(frames.index[i])
            removed.add(rel)
            continue
        todo.append((rel, str(spec.session_dir / rel), str(stage / rel)))
    entry["removed_near_track_ends"], entry["removed_position_unknown"] = _span(near), _span(unknown)
    results: dict[str, int] = {}
    for rel, n_faces in track(_copy_frames(todo, blur, params, workers, pool), "share frames", total=len(todo),
                              enabled=progress):
        results[rel] = n_faces
    for rel, _, _ in todo:      # the record in frame order, whatever order the workers finished in
        n_faces = results[rel]
        if n_faces:
            entry["frames_with_faces"][rel] = n_faces
            entry["faces_blurred"] += n_faces
        entry["copied"] += 1
        kept.add(rel)
    return entry, kept, removed


def _span(times) -> dict:
    """Count and time span (UTC, rounded outward to :data:`RECORD_SPAN_ROUND`) of frames left out."""
    if not len(times):
        return {"count": 0, "span_utc": None}
    t = pd.DatetimeIndex(times).tz_convert("UTC")
    return {"count": len(t), "span_utc": [t.min().floor(RECORD_SPAN_ROUND).isoformat(),
                                          t.max().ceil(RECORD_SPAN_ROUND).isoformat()]}


def _copy_chunk(items, blur, params) -> list[tuple[str, int]]:
    from walkcomfort.session.readers.frames import exif_time

    return [(rel, _copy_frame(Path(src), Path(dst), blur, params, exif_time)) for rel, src, dst in items]


def _copy_frames(todo, blur, params, workers, pool):
    """Copy (and blur) frames, in worker processes when there are several and enough frames."""
    from concurrent.futures import as_completed

    if (pool is None and workers <= 1) or len(todo) < 8:
        for item in todo:
            yield from _copy_chunk([item], blur, params)
        return
    from concurrent.futures.process import BrokenProcessPool

    from walkcomfort.imagery.batch import make_pool

    own = pool is None
    pool = make_pool(workers) if own else pool
    done: set[str] = set()
    try:
        futures = [pool.submit(_copy_chunk, todo[i:i + 4], blur, params) for i in range(0, len(todo), 4)]
        for fut in as_completed(futures):
            for item in fut.result():
                done.add(item[0])
                yield item
    except BrokenProcessPool as exc:
        import warnings

        warnings.warn(f"share worker processes failed ({exc}); blurring the remaining frames in this process",
                      RuntimeWarning, stacklevel=3)
        for item in todo:
            if item[0] not in done:
                yield from _copy_chunk([item], blur, params)
    finally:
        if own:
            pool.shutdown()


def _copy_frame(src: Path, dst: Path, blur: bool, params, exif_time) -> int:
    from PIL import Image, ImageOps

    dto, off = exif_time(src)
    with Image.open(src) as im:
        fmt = im.format
        rgb = np.asarray(ImageOps.exif_transpose(im).convert("RGB"))
    n = 0
    if blur:
        rgb, boxes = _faces.blur_faces(rgb, params)
        n = int(len(boxes))
    exif = Image.Exif()
    if dto:
        ifd = exif.get_ifd(0x8769)
        main, _, sub = dto.partition(".")
        ifd[0x9003] = main
        if sub:
            ifd[0x9291] = sub
        if off:
            ifd[0x9011] = off
    buf = io.BytesIO()
    out = Image.fromarray(rgb)
    if fmt == "PNG":
        out.save(buf, format="PNG", exif=exif.tobytes())
    else:
        out.save(buf, format="JPEG", quality=JPEG_QUALITY, exif=exif.tobytes())
    _io.atomic_write_bytes(dst, buf.getvalue())
    return n
