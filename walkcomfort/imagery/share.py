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
    events removed unless ``keep_notes`` (then checked like vote notes); a sync event that names a frame which is not
    shared is re-written with that frame's clock reading, so the clock fit is unchanged;
    ``[session] start``/``end`` removed when the track was trimmed (they would tell the true start and end).
GPS track
    Points within ``radius_m`` of the first or last fix removed
    (:func:`~walkcomfort.imagery.privacy.trim_mask`), and points without a time;
    GPX: author, names, descriptions, links, waypoints and routes removed, the
    ``creator`` replaced, metadata ``time`` and ``bounds`` removed (they tell the untrimmed
    start and extent), point extensions (heart rate is health data) removed unless
    ``keep_extensions``; CSV: comment and preamble lines removed.
Frames
    Frames taken where the walker was within ``radius_m`` of the start or end — or
    where their position cannot be told (outside the track's time span) — are not
    shared; the others have faces blurred (:mod:`walkcomfort.imagery.faces`) and are
    written with only the EXIF time tags the frames reader needs
    (``DateTimeOriginal``, ``SubSecTimeOriginal``, ``OffsetTimeOriginal``): no GPS
    tags, camera serials or maker notes. Files that are not frames are not copied. The
    record names frames left out only by count and time span, rounded outward to
    :data:`walkcomfort.imagery.share_frames.RECORD_SPAN_ROUND` (their file names and exact times would tell the trimmed ends).
Votes
    Participant codes replaced by the same pseudonym as in the manifest; free-text
    notes emptied unless ``keep_notes`` (a note can name people and places); kept notes
    are scanned for e-mail addresses, phone numbers and names
    (:mod:`walkcomfort.imagery.note_scan`) and refused, masked, or kept as reviewed.
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
from walkcomfort.errors import InputError
from walkcomfort.errors import where as _where
from walkcomfort.imagery import faces as _faces
from walkcomfort.imagery.note_scan import NoteGuard
from walkcomfort.imagery.privacy import TRIM_RADIUS_M, pseudonym, to_toml, trim_mask
from walkcomfort.imagery.share_frames import share_frames

RECORD_NAME = "share_record.json"
RECORD_FORMAT = "walkcomfort-share-record/2"
CAUTION = ("Face blurring uses cascade detectors that miss small, turned or shaded faces: review every shared "
           "frame before release. What may be shared is decided by the study's ethics approval and "
           "data-protection terms, not by this tool.")


def share_session(session_dir: str | os.PathLike, out_dir: str | os.PathLike, secret: bytes, *,
                  radius_m: float = TRIM_RADIUS_M, keep_notes: bool = False, keep_extensions: bool = False,
                  note_policy: str = "refuse", blur_faces: bool = True,
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
    note_policy : {"refuse", "mask", "reviewed"}
        With ``keep_notes``: what to do with a note that looks like it holds an e-mail
        address, a phone number or a name (:class:`~walkcomfort.imagery.note_scan.NoteGuard`).
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
    guard = NoteGuard(note_policy) if keep_notes else None
    if keep_notes and note_policy == "refuse":  # sync notes first: a refusal comes before any slow work
        for i, ev in enumerate(data.get("sync", []) or []):
            NoteGuard()(ev.get("note"), f"{spec.manifest_path} [[sync]] {i + 1}")
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
                record["files"][s.path] = _share_votes(s, stage, pid, spec.participant, guard)
                copied.add(s.path)
            elif s.kind in ("weather", "noise", "light"):
                record["files"][s.path] = _share_plain(s, stage)
                copied.add(s.path)
        frames_entry, frames_kept, frames_removed = share_frames(spec, stage, radius_m, blur_faces,
                                                                  plates, face_params, progress, workers, pool)
        record["frames"] = frames_entry
        copied |= frames_kept
        trimmed = any(v.get("points_removed_near_ends") for v in record["files"].values())
        record["manifest"] = _share_manifest(data, stage / MANIFEST_NAME, sid, pid, guard, spec,
                                             frames_removed, trimmed)
        if guard is not None:
            record["notes"] = guard.record()
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
    gpx.time, gpx.bounds = None, None  # the first fix's time and the untrimmed extent
    keep = ~drop
    entry = {"kind": "gps", "points_read": len(pts), "points_removed_near_ends": n_near,
             "points_removed_without_time": n_no_time, "points_kept": int(keep.sum()),
             "waypoints_removed": n_wpt, "routes_removed": n_rte, "point_extensions_removed": n_ext,
             "metadata_removed": ["author", "names", "descriptions", "links", "keywords", "creator", "time",
                                  "bounds"]}
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
    from walkcomfort.session.readers._common import sniff_delimiter, split_fields

    for line in lines[:50]:
        st = line.strip()
        if not st or st.startswith("#"):
            continue
        if [f.strip() for f in split_fields(line, s.delimiter or sniff_delimiter(line))] == header:
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


def _share_votes(s, stage: Path, pid: str, participant: str, guard: NoteGuard | None) -> dict:
    note_col, part_col = s.column("note"), s.column("participant")
    if s.format == "json":
        from walkcomfort.session.readers.votes import json_records

        obj = json.loads(s.abs_path.read_bytes().decode("utf-8-sig"))
        recs = json_records(s.abs_path, s)      # a fresh parse: the list that is edited and written
        n_part = n_note = 0
        for i, r in enumerate(recs):
            if part_col in r and str(r[part_col]).strip():
                r[part_col] = pid if str(r[part_col]).strip() == participant else "P-OTHER"
                n_part += 1
            if guard is not None and note_col in r:
                r[note_col] = guard(r[note_col], _where(s.display, row=i + 1))
            elif note_col in r and str(r[note_col] or "").strip():
                r[note_col] = ""
                n_note += 1
        # other top-level members of a {"votes": [...]} file are not copied (they may name people)
        out = recs if isinstance(obj, list) else {"votes": recs}
        _io.atomic_write_text(stage / s.path, json.dumps(out, ensure_ascii=False, indent=2) + "\n")
        return {"kind": "votes", "rows_kept": len(recs), "participant_replaced": n_part, "notes_emptied": n_note}

    from walkcomfort.session.readers._common import Quarantine, read_delimited, sniff_delimiter

    q = Quarantine(s.name, s.path)
    table = read_delimited(s.abs_path, s, [s.column("time")], [], q)
    lines = s.abs_path.read_bytes().decode("utf-8-sig", errors="replace").splitlines()
    header_line = _header_line(lines, table.header, s)
    delim = s.delimiter or sniff_delimiter(header_line)
    hi = {h: i for i, h in enumerate(table.header)}
    n_part = n_note = 0
    buf = io.StringIO()
    w = csv.writer(buf, delimiter=delim, lineterminator="\n")
    w.writerow(table.header)
    for line_no, row in zip(table.lines, table.rows, strict=True):
        row = list(row)
        if part_col in hi and row[hi[part_col]].strip():
            # a vote of another participant is kept as such (the reader quarantines it): it
            # gets a pseudonym that cannot be traced back, not the real code
            row[hi[part_col]] = pid if row[hi[part_col]].strip() == participant else "P-OTHER"
            n_part += 1
        if guard is not None and note_col in hi:
            row[hi[note_col]] = guard(row[hi[note_col]], _where(s.display, line=line_no))
        elif note_col in hi and row[hi[note_col]].strip():
            row[hi[note_col]] = ""
            n_note += 1
        w.writerow(row)
    _io.atomic_write_text(stage / s.path, buf.getvalue())
    return {"kind": "votes", "rows_kept": len(table.rows), "bad_lines_removed": len(q),
            "participant_replaced": n_part, "notes_emptied": n_note,
            "comment_or_preamble_lines_removed": _extra_lines(lines, table, q)}


# --- manifest ------------------------------------------------------------------------------------


def _share_manifest(data: dict, path: Path, sid: str, pid: str, guard, spec, removed_frames: set,
                    trimmed: bool = False) -> dict:
    out = _deep_copy(data)
    out["session"]["id"] = sid
    out["session"]["participant"] = pid
    window = [k for k in ("start", "end") if trimmed and out["session"].pop(k, None) is not None]
    notes = 0
    rewritten = 0
    frame_clock = None
    for i, ev in enumerate(out.get("sync", []) or []):
        if guard is not None and "note" in ev:
            ev["note"] = guard(ev["note"], f"{spec.manifest_path} [[sync]] {i + 1}")
        elif "note" in ev:
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
    return {"comments_removed": True, "sync_notes_removed": notes, "sync_frames_rewritten_as_times": rewritten,
            "session_window_removed": window}


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
