"""A shareable copy of a session folder: pseudonyms, trimmed track ends, blurred faces.

:func:`share_session` never touches the raw session. It writes a new session folder
``OUT/<session pseudonym>/`` that ``walkcomfort check`` and ``ingest`` accept like the
original, and ``share_record.json`` beside the data saying what was removed or changed.

What is done to each part
-------------------------
``session.toml``
    Re-written from its parsed content (so comments, which may hold names, are gone);
    ``[session] id`` and ``participant`` replaced by keyed-hash pseudonyms
    (:func:`walkcomfort.imagery.privacy.pseudonym`); free-text ``note`` of sync
    events removed unless ``keep_notes``; a sync event that names a frame which is not
    shared is re-written with that frame's clock reading, so the clock fit is unchanged.
GPS track
    Points within ``radius_m`` of the first or last fix removed
    (:func:`~walkcomfort.imagery.privacy.trim_mask`), and points without a time;
    GPX: author, names, descriptions, links, waypoints and routes removed, the
    ``creator`` replaced, point extensions (heart rate is health data) removed unless
    ``keep_extensions``; CSV: comment and preamble lines removed.
Frames
    Frames taken where the walker was within ``radius_m`` of the start or end — or
    where their position cannot be told (outside the track's time span) — are not
    shared; the others have faces blurred (:mod:`walkcomfort.imagery.faces`) and are
    written with only the EXIF time tags the frames reader needs
    (``DateTimeOriginal``, ``SubSecTimeOriginal``, ``OffsetTimeOriginal``): no GPS
    tags, camera serials or maker notes. Files that are not frames are not copied.
Votes
    Participant codes replaced by the same pseudonym as in the manifest; free-text
    notes emptied unless ``keep_notes`` (a note can name people and places).
Other sensor files
    Header and data lines kept; comment and preamble lines (serial numbers, owner
    names) removed.
Anything else in the session folder
    Not copied (the record counts it).

Blurring misses faces (see :mod:`walkcomfort.imagery.faces`): review the frames before
they leave the team, and follow the study's ethics approval and data-protection terms
on what may be shared at all.
"""

from __future__ import annotations

import csv
import io
import json
import os
import shutil
import tempfile
import tomllib
from pathlib import Path

import numpy as np
import pandas as pd

from walkcomfort import _io
from walkcomfort import columns as C
from walkcomfort._progress import track
from walkcomfort.errors import InputError
from walkcomfort.imagery import faces as _faces
from walkcomfort.imagery.privacy import TRIM_RADIUS_M, pseudonym, to_toml, trim_mask

RECORD_NAME = "share_record.json"
RECORD_FORMAT = "walkcomfort-share-record/1"
#: A frame's position is interpolated between GPS fixes at most this far apart [s].
MAX_FIX_GAP_S = 30.0
JPEG_QUALITY = 92
CAUTION = ("Face blurring uses cascade detectors that miss small, turned or shaded faces: review every shared "
           "frame before release. What may be shared is decided by the study's ethics approval and "
           "data-protection terms, not by this tool.")


def share_session(session_dir: str | os.PathLike, out_dir: str | os.PathLike, secret: bytes, *,
                  radius_m: float = TRIM_RADIUS_M, keep_notes: bool = False, keep_extensions: bool = False,
                  blur_faces: bool = True,
                  plates: bool = False, face_params: _faces.FaceParams | None = None,
                  verify: bool = True, progress: bool | None = None, workers: int = 1,
                  pool=None) -> tuple[Path, dict]:
    """Write a shareable copy of one session folder.

    Parameters
    ----------
    session_dir : path-like
        The raw session folder (read only).
    out_dir : path-like
        Where the copy goes: ``out_dir/<session pseudonym>/`` (must not exist yet, and
        must not lie inside the session folder).
    secret : bytes
        Project secret for pseudonyms (:func:`walkcomfort.imagery.privacy.load_secret`).
    radius_m : float
        Trimming radius around the first and last GPS fix [m].
    keep_notes : bool
        Keep free-text notes of votes and sync events (default: emptied).
    keep_extensions : bool
        Keep the GPX point extensions (heart rate, device temperature). Default: removed —
        heart rate is health data, which data-protection law treats with extra care.
    blur_faces : bool
        Blur detected faces in the frames (default True; turn off only when the frames
        will not leave the team).
    plates : bool
        Also blur licence-plate-like regions.
    face_params : FaceParams, optional
    verify : bool
        Read the copy back with the session stage (manifest and every source) and
        refuse to finish if it does not load.
    progress : bool, optional
        Progress bar over frames.
    workers : int
        Worker processes for the face blurring (1: in this process).
    pool : concurrent.futures.ProcessPoolExecutor, optional
        A pool to use instead (:func:`walkcomfort.imagery.batch.make_pool`), e.g. shared by
        many sessions.

    Returns
    -------
    folder : pathlib.Path
        The shared session folder.
    record : dict
        What was removed or changed (also written to ``share_record.json``).
    """
    from walkcomfort.session.manifest import MANIFEST_NAME, load_manifest

    src = Path(session_dir)
    spec = load_manifest(src)
    folder = spec.session_dir
    sid = pseudonym(spec.id, secret, "session")
    pid = pseudonym(spec.participant, secret, "participant")
    out_root = Path(out_dir)
    dest = out_root / sid
    if _inside(dest, folder):
        raise InputError(f"the output folder '{dest}' lies inside the session folder", where=folder,
                         fix="write the shared copy somewhere outside the raw session (-o elsewhere)")
    if dest.exists() and any(dest.iterdir()):
        raise InputError(f"'{dest}' already exists and is not empty", where=dest,
                         fix="remove it, or share into another output folder")
    data = tomllib.loads(spec.manifest_path.read_bytes().decode("utf-8-sig"))
    record: dict = {
        "format": RECORD_FORMAT,
        "session": {"id": sid, "participant": pid},
        "pseudonyms": {"method": "HMAC-SHA256 with the project secret; 'P-'/'S-' + first 10 hex digits",
                       "replaced": ["session.id", "session.participant", "votes participant"]},
        "parameters": {"trim_radius_m": float(radius_m), "keep_notes": bool(keep_notes),
                       "keep_extensions": bool(keep_extensions),
                       "blur_faces": bool(blur_faces), "plates": bool(plates)},
        "files": {},
        "caution": CAUTION,
    }

    out_root.mkdir(parents=True, exist_ok=True)
    stage = Path(tempfile.mkdtemp(prefix=f".{sid}.", suffix=".partial", dir=out_root))
    try:
        copied: set[str] = {MANIFEST_NAME}
        for s in spec.sources:
            if s.kind == "gps":
                record["files"][s.path] = _share_gps(s, spec, stage, radius_m, keep_extensions)
                copied.add(s.path)
        for s in spec.sources:
            if s.kind == "votes":
                record["files"][s.path] = _share_votes(s, stage, pid, spec.participant, keep_notes)
                copied.add(s.path)
            elif s.kind in ("weather", "noise", "light"):
                record["files"][s.path] = _share_plain(s, stage)
                copied.add(s.path)
        frames_entry, frames_kept, frames_removed = _share_frames(spec, stage, radius_m, blur_faces,
                                                                  plates, face_params, progress, workers, pool)
        record["frames"] = frames_entry
        copied |= frames_kept
        record["manifest"] = _share_manifest(data, stage / MANIFEST_NAME, sid, pid, keep_notes, spec,
                                             frames_removed)
        record["not_copied"] = {"files": _count_unreferenced(folder, copied)}
        record["outputs"] = {p.relative_to(stage).as_posix(): _io.file_digest(p)
                             for p in sorted(stage.rglob("*")) if p.is_file()}
        _io.write_json(stage / RECORD_NAME, record)
        if verify:
            _verify(stage)
        if dest.exists():
            dest.rmdir()
        os.replace(stage, dest)
    except BaseException:
        shutil.rmtree(stage, ignore_errors=True)
        raise
    return dest, record


def _inside(child: Path, parent: Path) -> bool:
    try:
        child.resolve().relative_to(parent.resolve())
        return True
    except ValueError:
        return False


def _count_unreferenced(folder: Path, copied: set[str]) -> int:
    """Files of the session folder that are not in the copy (names are not listed: they may be telling)."""
    return sum(1 for p in folder.rglob("*") if p.is_file() and p.relative_to(folder).as_posix() not in copied)


def _verify(stage: Path) -> None:
    from walkcomfort.session.manifest import load_manifest
    from walkcomfort.session.readers import read_source

    spec = load_manifest(stage)
    for s in spec.sources:
        read_source(s, spec)


# --- GPS ---------------------------------------------------------------------------------------


def _share_gps(s, spec, stage: Path, radius_m: float, keep_extensions: bool = False) -> dict:
    if s.format == "gpx":
        text, entry = _trim_gpx(s.abs_path.read_bytes().decode("utf-8-sig"), radius_m, s.display, keep_extensions)
    else:
        text, entry = _trim_gps_csv(s, spec, radius_m)
    _io.atomic_write_text(stage / s.path, text)
    return entry


def _trim_gpx(text: str, radius_m: float, where: str, keep_extensions: bool = False):
    import gpxpy
    import gpxpy.gpx

    try:
        gpx = gpxpy.parse(text)
    except gpxpy.gpx.GPXException as exc:
        raise InputError(f"not a readable GPX file ({' '.join(str(exc).split())})", where=where,
                         fix="run walkcomfort check on the session first") from None
    pts = [(ti, si, pi, p) for ti, trk in enumerate(gpx.tracks) for si, seg in enumerate(trk.segments)
           for pi, p in enumerate(seg.points)]
    lat = np.array([p.latitude for *_, p in pts], dtype=float)
    lon = np.array([p.longitude for *_, p in pts], dtype=float)
    timed = np.array([p.time is not None for *_, p in pts], dtype=bool)
    # only the order matters here (the reader refuses files that mix zoned and unzoned times)
    t_ns = np.array([_ns(p.time) for *_, p in pts], dtype=np.int64)
    drop = trim_mask(np.where(timed, lat, np.nan), np.where(timed, lon, np.nan), radius_m, order=t_ns)
    n_no_time = int((~timed).sum())
    n_near = int((drop & timed).sum())
    if len(pts) and drop.all():
        raise InputError(f"every point of the track lies within {radius_m:g} m of its start or end", where=where,
                         fix="use a smaller --trim-radius, or do not share this session")
    keep_ids = {id(p) for (_, _, _, p), d in zip(pts, drop, strict=False) if not d}
    n_ext = 0
    for trk in gpx.tracks:
        for seg in trk.segments:
            seg.points = [p for p in seg.points if id(p) in keep_ids]
            for p in seg.points:
                for attr in ("name", "comment", "description", "source", "link", "link_text", "link_type", "symbol"):
                    if hasattr(p, attr):
                        setattr(p, attr, None)
                if not keep_extensions and p.extensions:
                    n_ext += 1
                    p.extensions = []
        trk.segments = [seg for seg in trk.segments if seg.points]
        for attr in ("name", "comment", "description", "source", "link", "link_text", "link_type"):
            setattr(trk, attr, None)
    gpx.tracks = [trk for trk in gpx.tracks if trk.segments]
    n_wpt, n_rte = len(gpx.waypoints), len(gpx.routes)
    gpx.waypoints, gpx.routes = [], []
    for attr in ("name", "description", "author_name", "author_email", "author_link", "author_link_text",
                 "author_link_type", "copyright_author", "copyright_year", "copyright_license", "link",
                 "link_text", "link_type", "keywords"):
        setattr(gpx, attr, None)
    gpx.creator = "walkcomfort share"
    keep = ~drop
    entry = {"kind": "gps", "points_read": len(pts), "points_removed_near_ends": n_near,
             "points_removed_without_time": n_no_time, "points_kept": int(keep.sum()),
             "waypoints_removed": n_wpt, "routes_removed": n_rte, "point_extensions_removed": n_ext,
             "metadata_removed": ["author", "names", "descriptions", "links", "keywords", "creator"]}
    return gpx.to_xml(version=gpx.version or "1.1"), entry


def _ns(t) -> int:
    if t is None:
        return 0
    ts = pd.Timestamp(t)
    return int((ts.tz_convert("UTC") if ts.tzinfo is not None else ts).value)


def _trim_gps_csv(s, spec, radius_m: float):
    from walkcomfort.session.readers._common import Quarantine, parse_times, read_delimited, to_number

    q = Quarantine(s.name, s.path)
    table = read_delimited(s.abs_path, s, [s.column("time"), s.column("lat"), s.column("lon")], [], q)
    lat, bad_lat = to_number(pd.Series([r[table.header.index(s.column("lat"))].strip() for r in table.rows],
                                       dtype=object), s.decimal, s.na_values)
    lon, bad_lon = to_number(pd.Series([r[table.header.index(s.column("lon"))].strip() for r in table.rows],
                                       dtype=object), s.decimal, s.na_values)
    times, why = parse_times(pd.Series([r[table.header.index(s.column("time"))].strip() for r in table.rows],
                                       dtype=object), s, spec, where=s.display, lines=table.lines)
    t_ns = np.where(pd.isna(times), 0, pd.DatetimeIndex(times).as_unit("ns").asi8)
    timed = (~pd.isna(times)) & (np.asarray(why) == "")
    usable = timed & np.isfinite(lat) & np.isfinite(lon)
    drop = trim_mask(np.where(usable, lat, np.nan), np.where(usable, lon, np.nan), radius_m, order=t_ns)
    if len(drop) and drop.all():
        raise InputError(f"every point of the track lies within {radius_m:g} m of its start or end",
                         where=s.display, fix="use a smaller --trim-radius, or do not share this session")
    lines = s.abs_path.read_bytes().decode("utf-8-sig", errors="replace").splitlines()
    header_line = _header_line(lines, table.header, s)
    kept = [raw for raw, d in zip(table.raws, drop, strict=False) if not d]
    entry = {"kind": "gps", "points_read": len(table.rows) + len(q),
             "points_removed_near_ends": int((drop & usable).sum()),
             "points_removed_without_time_or_position": int((drop & ~usable).sum()) + len(q),
             "points_kept": len(kept), "comment_or_preamble_lines_removed": _extra_lines(lines, table, q)}
    return "\n".join([header_line] + kept) + "\n", entry


def _header_line(lines: list[str], header: list[str], s) -> str:
    from walkcomfort.session.readers._common import _sniff, _split

    for line in lines[:50]:
        st = line.strip()
        if not st or st.startswith("#"):
            continue
        if [f.strip() for f in _split(line, s.delimiter or _sniff(line))] == header:
            return line
    raise InputError("header line not found again", where=s.display, fix="please report this")  # pragma: no cover


def _extra_lines(lines, table, q) -> int:
    data_lines = len(table.rows) + len(q)
    nonblank = sum(1 for ln in lines if ln.strip())
    return max(0, nonblank - data_lines - 1)


# --- plain sensor files and votes --------------------------------------------------------------


def _share_plain(s, stage: Path) -> dict:
    from walkcomfort.session.readers._common import Quarantine, read_delimited

    q = Quarantine(s.name, s.path)
    table = read_delimited(s.abs_path, s, [s.column("time")], [], q)
    lines = s.abs_path.read_bytes().decode("utf-8-sig", errors="replace").splitlines()
    header_line = _header_line(lines, table.header, s)
    # bad lines stay: the reader quarantines them again, so the counts still reconcile
    body = [ln for ln in lines[lines.index(header_line) + 1:] if ln.strip() and not ln.strip().startswith("#")]
    _io.atomic_write_text(stage / s.path, "\n".join([header_line] + body) + "\n")
    removed = sum(1 for ln in lines if ln.strip()) - 1 - len(body)
    return {"kind": s.kind, "rows_kept": len(body), "comment_or_preamble_lines_removed": removed}


def _share_votes(s, stage: Path, pid: str, participant: str, keep_notes: bool) -> dict:
    note_col, part_col = s.column("note"), s.column("participant")
    if s.format == "json":
        from walkcomfort.session.readers.votes import _json_records

        obj = json.loads(s.abs_path.read_bytes().decode("utf-8-sig"))
        recs = _json_records(s.abs_path, s)      # a fresh parse: the list that is edited and written
        n_part = n_note = 0
        for r in recs:
            if part_col in r and str(r[part_col]).strip():
                r[part_col] = pid if str(r[part_col]).strip() == participant else "P-OTHER"
                n_part += 1
            if not keep_notes and note_col in r and str(r[note_col] or "").strip():
                r[note_col] = ""
                n_note += 1
        # other top-level members of a {"votes": [...]} file are not copied (they may name people)
        out = recs if isinstance(obj, list) else {"votes": recs}
        _io.atomic_write_text(stage / s.path, json.dumps(out, ensure_ascii=False, indent=2) + "\n")
        return {"kind": "votes", "rows_kept": len(recs), "participant_replaced": n_part, "notes_emptied": n_note}

    from walkcomfort.session.readers._common import Quarantine, _sniff, read_delimited

    q = Quarantine(s.name, s.path)
    table = read_delimited(s.abs_path, s, [s.column("time")], [], q)
    lines = s.abs_path.read_bytes().decode("utf-8-sig", errors="replace").splitlines()
    header_line = _header_line(lines, table.header, s)
    delim = s.delimiter or _sniff(header_line)
    hi = {h: i for i, h in enumerate(table.header)}
    n_part = n_note = 0
    buf = io.StringIO()
    w = csv.writer(buf, delimiter=delim, lineterminator="\n")
    w.writerow(table.header)
    for row in table.rows:
        row = list(row)
        if part_col in hi and row[hi[part_col]].strip():
            # a vote of another participant is kept as such (the reader quarantines it): it
            # gets a pseudonym that cannot be traced back, not the real code
            row[hi[part_col]] = pid if row[hi[part_col]].strip() == participant else "P-OTHER"
            n_part += 1
        if not keep_notes and note_col in hi and row[hi[note_col]].strip():
            row[hi[note_col]] = ""
            n_note += 1
        w.writerow(row)
    _io.atomic_write_text(stage / s.path, buf.getvalue())
    return {"kind": "votes", "rows_kept": len(table.rows), "bad_lines_removed": len(q),
            "participant_replaced": n_part, "notes_emptied": n_note,
            "comment_or_preamble_lines_removed": _extra_lines(lines, table, q)}


# --- frames --------------------------------------------------------------------------------------


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


def _share_frames(spec, stage: Path, radius_m, blur, plates, face_params, progress, workers=1, pool=None):
    from walkcomfort.imagery.sessions import session_frames

    frames, quarantine, _, fits = session_frames(spec, return_fits=True)
    gps_points = _gps_on_reference_clock(spec, fits)
    entry = {"frames_read": int(len(frames) + len(quarantine)), "not_copied_untimed_or_unreadable": int(len(quarantine)),
             "removed_near_track_ends": [], "removed_position_unknown": [], "copied": 0,
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

    todo = []
    for i, rel in enumerate(frames[C.FRAME_PATH]):
        if not np.isfinite(lat[i]) or ends is None:
            entry["removed_position_unknown"].append(rel)
            removed.add(rel)
            continue
        d = min(great_circle_m(ends[0], ends[1], lat[i], lon[i]), great_circle_m(ends[2], ends[3], lat[i], lon[i]))
        if d <= radius_m:
            entry["removed_near_track_ends"].append(rel)
            removed.add(rel)
            continue
        todo.append((rel, str(spec.session_dir / rel), str(stage / rel)))
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


# --- manifest ------------------------------------------------------------------------------------


def _share_manifest(data: dict, path: Path, sid: str, pid: str, keep_notes: bool, spec, removed_frames: set) -> dict:
    out = _deep_copy(data)
    out["session"]["id"] = sid
    out["session"]["participant"] = pid
    notes = 0
    rewritten = 0
    frame_clock = None
    for ev in out.get("sync", []) or []:
        if not keep_notes and "note" in ev:
            del ev["note"]
            notes += 1
        fr = ev.get("frame")
        if fr is not None and str(fr).replace("\\", "/") in removed_frames:
            if frame_clock is None:
                frame_clock = _camera_clock_times(spec)
            key = str(fr).replace("\\", "/")
            if key not in frame_clock:  # pragma: no cover - a sync frame without time fails check already
                raise InputError(f"sync frame '{fr}' has no time", where=spec.manifest_path,
                                 fix="run walkcomfort check on the session first")
            del ev["frame"]
            ev["device_time"] = frame_clock[key].isoformat()
            rewritten += 1
    _io.atomic_write_text(path, to_toml(out))
    return {"comments_removed": True, "sync_notes_removed": notes, "sync_frames_rewritten_as_times": rewritten}


def _camera_clock_times(spec) -> dict:
    from walkcomfort.session.readers import read_frames

    out = {}
    for s in spec.sources_of("frames"):
        df, _ = read_frames(s.abs_path, s, spec)
        out.update(zip(df[C.FRAME_PATH].tolist(), df.index, strict=False))
    return out


def _deep_copy(obj):
    if isinstance(obj, dict):
        return {k: _deep_copy(v) for k, v in obj.items()}
    if isinstance(obj, list):
        return [_deep_copy(v) for v in obj]
    return obj
