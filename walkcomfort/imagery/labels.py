"""Per-frame labels computed elsewhere (a team's own segmentation or hand counts).

A team with a semantic-segmentation model, or with people counted by hand, can bring
its numbers instead of (or on top of) the built-in cues. The file is a CSV, one row per
frame, with a header. Default column names (change them with ``columns=``):

=============  ===================================================================
``frame``      the frame's file name or its path relative to the session folder
``time``       optional: ISO-8601 time *with* UTC offset (or naive, with ``tz=``);
               without it, the time comes from the session's frames table
``sky``        share of the frame that is sky
``vegetation`` share that is vegetation (also accepted: ``green``)
``people``     number of people in the frame (a count, ≥ 0)
``frame_ok``   optional: ``true``/``false`` (``1``/``0``), the team's own quality verdict
=============  ===================================================================

Shares are fractions 0…1 unless ``scale="percent"`` (0…100). Any class column may be
absent; the cues it would give stay with the built-in values (see :func:`combine_cues`)
or NaN. Rows that cannot be used — an unknown frame, a value that is not a number or
is out of range, a duplicate frame, a time without a zone — are quarantined with the
reason and the raw line, never dropped silently.
"""

from __future__ import annotations

import csv
import os
from pathlib import Path, PurePosixPath

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.errors import InputError, where

DEFAULT_COLUMNS = {
    "frame": "frame",
    "time": "time",
    C.SKY_FRAC: "sky",
    C.GREEN_FRAC: "vegetation",
    C.PEOPLE_N: "people",
    C.FRAME_OK: "frame_ok",
}
_ALIASES = {C.GREEN_FRAC: ("green", "greenery", "green_frac"), C.SKY_FRAC: ("sky_frac",),
            C.PEOPLE_N: ("people_n", "persons", "pedestrians")}
_SHARES = (C.SKY_FRAC, C.GREEN_FRAC)
_TRUE = {"true", "1", "yes", "y", "t"}
_FALSE = {"false", "0", "no", "n", "f"}


def _key(path: str) -> str:
    # PurePosixPath drops "./" parts and doubled slashes; backslashes are Windows separators
    return PurePosixPath(str(path).replace("\\", "/")).as_posix()


def read_frame_labels(path: str | os.PathLike, frames: pd.DataFrame | None = None, *,
                      columns: dict | None = None, scale: str = "fraction",
                      tz: str | None = None) -> tuple[pd.DataFrame, dict]:
    """Read a per-frame labels CSV into a cue table.

    Parameters
    ----------
    path : path-like
        The CSV file (not modified).
    frames : pandas.DataFrame, optional
        The session's frames table (UTC ``time`` index, ``frame_path``), used to give
        each label its time and to check that the frame exists. Needed when the CSV
        has no time column.
    columns : dict, optional
        Canonical name -> column in the file, overriding :data:`DEFAULT_COLUMNS`
        (canonical names: ``frame``, ``time``, ``sky_frac``, ``green_frac``,
        ``people_n``, ``frame_ok``).
    scale : {"fraction", "percent"}
        Scale of the share columns.
    tz : str, optional
        IANA zone of naive times in the ``time`` column (naive times are an error
        without it).

    Returns
    -------
    labels : pandas.DataFrame
        UTC ``time`` index; ``frame_path`` and the cue columns the file provides
        (``sky_frac``, ``green_frac`` [-], ``people_n`` [-], ``frame_ok``).
    metadata : dict
        ``quarantine`` (``source, file, row, reason, raw``), ``counts`` (``read``,
        ``used``, ``quarantined``), ``columns`` (the mapping used).
    """
    if scale not in ("fraction", "percent"):
        raise InputError(f"scale={scale!r} is not allowed; use 'fraction' or 'percent'",
                         fix="say how the shares in the labels file are written")
    path = Path(path)
    lines, reader, header = _open_labels(path)
    mapping, present = _mapping(header, columns, path)
    value_cols = [c for c in (C.SKY_FRAC, C.GREEN_FRAC, C.PEOPLE_N) if c in present]
    if not value_cols:
        raise InputError(f"the header {header} has no label column (looked for "
                         f"{[mapping[c] for c in (C.SKY_FRAC, C.GREEN_FRAC, C.PEOPLE_N)]})",
                         where=where(path, line=1), fix="add sky, vegetation or people columns, or map them")
    if "time" not in present and frames is None:
        raise InputError("the labels file has no time column and no frames table was given", where=path,
                         fix="pass the session's frames table (frames=...) or add a time column with UTC offsets")
    index = _FrameIndex(frames)
    rows, quarantine, seen = [], [], set()
    n_read = 0
    for lineno, rec in enumerate(reader, start=2):
        raw = lines[lineno - 1] if lineno - 1 < len(lines) else ""
        if not raw.strip():
            continue
        n_read += 1
        try:
            if len(rec) != len(header):
                raise _Bad(f"has {len(rec)} fields, the header has {len(header)}")
            cell = {canon: rec[i].strip() for canon, i in present.items()}
            row = _label_row(cell, index, tz, seen)
            row.update(_label_values(cell, value_cols, mapping, scale, "frame_ok" in present))
        except _Bad as exc:
            quarantine.append({"source": "frame_labels", "file": path.name, "row": lineno, "reason": str(exc),
                               "raw": raw})
            continue
        seen.add(row.pop("_ident"))
        rows.append(row)

    cols = [C.TIME, C.FRAME_PATH] + value_cols + [C.FRAME_OK]
    out = pd.DataFrame(rows, columns=cols)
    out.index = pd.DatetimeIndex(pd.to_datetime(out.pop(C.TIME), utc=True), name=C.TIME)
    if C.PEOPLE_N in out.columns:
        out[C.PEOPLE_N] = pd.array(out[C.PEOPLE_N].to_numpy(dtype="float64"), dtype="Float64").astype("Int64")
    out[C.FRAME_OK] = out[C.FRAME_OK].astype(bool)
    out = out.sort_index(kind="stable")
    q = pd.DataFrame(quarantine, columns=["source", "file", "row", "reason", "raw"])
    counts = {"read": n_read, "used": len(out), "quarantined": len(q)}
    return out, {"quarantine": q, "counts": counts, "columns": {k: mapping[k] for k in present}}


class _Bad(Exception):
    """A labels row that cannot be used; the message is its quarantine reason."""


def _open_labels(path: Path):
    try:
        text = path.read_text(encoding="utf-8-sig")
    except FileNotFoundError:
        raise InputError("labels file not found", where=path, fix="check the path") from None
    except UnicodeDecodeError as exc:
        raise InputError(f"labels file is not UTF-8 text ({exc.reason} at byte {exc.start})", where=path,
                         fix="save the file as UTF-8 CSV") from None
    lines = text.splitlines()
    reader = csv.reader(lines)
    try:
        header = [h.strip() for h in next(reader)]
    except StopIteration:
        raise InputError("labels file is empty", where=path, fix="write a header line and one row per frame") from None
    return lines, reader, header


def _mapping(header: list[str], columns: dict | None, path: Path) -> tuple[dict, dict]:
    """Canonical name -> file column, and canonical name -> position of the columns present."""
    mapping = dict(DEFAULT_COLUMNS)
    explicit = dict(columns or {})
    unknown = sorted(set(explicit) - set(DEFAULT_COLUMNS))
    if unknown:
        raise InputError(f"unknown canonical label names {unknown}; allowed: {sorted(DEFAULT_COLUMNS)}",
                         fix="map only these names to columns of the file")
    mapping.update(explicit)
    for canon, aliases in _ALIASES.items():
        if canon not in explicit and mapping[canon] not in header:
            mapping[canon] = next((a for a in aliases if a in header), mapping[canon])
    for canon, col in explicit.items():
        if col not in header:
            raise InputError(f"column {col!r} (for {canon}) is not in the header {header}", where=where(path, line=1),
                             fix="fix the column mapping or the header")
    present = {canon: header.index(col) for canon, col in mapping.items() if col in header}
    if "frame" not in present and "time" not in present:
        raise InputError(f"the header {header} has neither a frame column ({mapping['frame']!r}) "
                         f"nor a time column ({mapping['time']!r})", where=where(path, line=1),
                         fix="add a 'frame' column with the file names, or map it with columns={'frame': ...}")
    return mapping, present


class _FrameIndex:
    """The session's frames by relative path and by file name."""

    def __init__(self, frames: pd.DataFrame | None):
        self.given = frames is not None
        self.by_key, self.by_name = {}, {}
        if frames is None:
            return
        if C.FRAME_PATH not in frames.columns or not isinstance(frames.index, pd.DatetimeIndex):
            raise InputError("the frames table needs a UTC time index and a frame_path column",
                             fix="pass the table returned by walkcomfort.session.readers.read_frames")
        for t, fp in zip(frames.index, frames[C.FRAME_PATH], strict=False):
            self.by_key.setdefault(_key(fp), (t, _key(fp)))
            self.by_name.setdefault(PurePosixPath(_key(fp)).name, []).append((t, _key(fp)))

    def match(self, frame: str):
        key = _key(frame)
        matched = self.by_key.get(key)
        if matched is None:
            cands = self.by_name.get(PurePosixPath(key).name, [])
            if len(cands) > 1:
                raise _Bad(f"frame {frame!r} matches {len(cands)} frames of the session; give its relative path")
            matched = cands[0] if cands else None
        if matched is None:
            raise _Bad(f"frame {frame!r} is not in the session's frames table")
        return matched


def _label_time(text: str, tz: str | None) -> pd.Timestamp:
    try:
        t = pd.Timestamp(text)
    except (ValueError, TypeError):
        raise _Bad(f"time {text!r} is not an ISO-8601 time") from None
    if t.tzinfo is None:
        if tz is None:
            raise _Bad(f"time {text!r} has no UTC offset and no zone was declared")
        try:
            t = t.tz_localize(tz, ambiguous="raise", nonexistent="raise")
        except Exception as exc:  # pytz/zoneinfo raise several types
            raise _Bad(f"time {text!r} cannot be placed in zone {tz} ({type(exc).__name__})") from None
    return t.tz_convert("UTC")


def _label_row(cell: dict, index: _FrameIndex, tz: str | None, seen: set) -> dict:
    """Time and frame of one labels row (from the row, or from the session's frames table)."""
    frame_key = _key(cell["frame"]) if cell.get("frame") else None
    t = _label_time(cell["time"], tz) if cell.get("time") else None
    matched = index.match(cell["frame"]) if frame_key is not None and index.given else None
    if t is None:
        if matched is None:
            raise _Bad("row has neither a time nor a frame known to the session")
        t = matched[0]
    fp = matched[1] if matched is not None else frame_key
    ident = fp if fp is not None else t.isoformat()
    if ident in seen:
        raise _Bad(f"frame {ident!r} is labelled twice (first row kept)")
    return {C.TIME: t, C.FRAME_PATH: fp, "_ident": ident}


def _label_values(cell: dict, value_cols, mapping: dict, scale: str, has_ok: bool) -> dict:
    row = {}
    factor = 100.0 if scale == "percent" else 1.0
    for c in value_cols:
        s = cell.get(c, "")
        if s == "":
            row[c] = np.nan
            continue
        try:
            v = float(s)
        except ValueError:
            raise _Bad(f"{mapping[c]}={s!r} is not a number") from None
        if not np.isfinite(v):
            raise _Bad(f"{mapping[c]}={s!r} is not a finite number")
        if c in _SHARES:
            v = v / factor
            if not (0.0 <= v <= 1.0):
                raise _Bad(f"{mapping[c]}={s} is outside 0…{100 if scale == 'percent' else 1} ({scale})")
        elif v < 0 or v != np.floor(v):
            raise _Bad(f"{mapping[c]}={s} is not a count (a whole number >= 0)")
        row[c] = v
    row[C.FRAME_OK] = True
    if has_ok:
        s = cell["frame_ok"].lower()
        if s in _FALSE:
            row[C.FRAME_OK] = False
        elif s not in _TRUE and s != "":
            raise _Bad(f"{mapping['frame_ok']}={cell['frame_ok']!r} is not true/false")
    return row


def combine_cues(computed: pd.DataFrame, imported: pd.DataFrame, prefer: str = "imported") -> pd.DataFrame:
    """Merge built-in cues with imported labels, frame by frame.

    Parameters
    ----------
    computed : pandas.DataFrame
        Cue table from :func:`walkcomfort.imagery.batch.compute_frame_cues`.
    imported : pandas.DataFrame
        Cue table from :func:`read_frame_labels` (matched on ``frame_path``).
    prefer : {"imported", "computed"}
        Which value wins where both have one (NaN never wins).

    Returns
    -------
    pandas.DataFrame
        The computed table with the imported values filled in or put first, plus a
        ``cue_source`` column (``"computed"``, ``"labels"`` or ``"both"``); imported
        frames that the computed table lacks are appended. ``frame_ok`` is the logical
        AND of both verdicts where both exist.
    """
    if prefer not in ("imported", "computed"):
        raise InputError(f"prefer={prefer!r} is not allowed; use 'imported' or 'computed'",
                         fix="choose which source wins where both give a value")
    a = computed.copy()
    b = imported.copy()
    a["_k"] = a[C.FRAME_PATH].map(lambda s: _key(s) if isinstance(s, str) else s)
    b["_k"] = b[C.FRAME_PATH].map(lambda s: _key(s) if isinstance(s, str) else s)
    a["cue_source"] = "computed"
    pos = {k: i for i, k in enumerate(a["_k"])}
    extra = []
    for t, rec in zip(b.index, b.to_dict("records"), strict=False):
        i = pos.get(rec["_k"])
        if i is None:
            rec = dict(rec)
            rec["cue_source"] = "labels"
            rec[C.TIME] = t
            extra.append(rec)
            continue
        for c in (C.SKY_FRAC, C.GREEN_FRAC, C.PEOPLE_N):
            if c not in rec or pd.isna(rec[c]):
                continue
            cur = a.iloc[i][c] if c in a.columns else np.nan
            if prefer == "imported" or pd.isna(cur):
                a.iloc[i, a.columns.get_loc(c)] = rec[c]
        if C.FRAME_OK in rec:
            a.iloc[i, a.columns.get_loc(C.FRAME_OK)] = bool(a.iloc[i][C.FRAME_OK]) and bool(rec[C.FRAME_OK])
        a.iloc[i, a.columns.get_loc("cue_source")] = "both"
    if extra:
        e = pd.DataFrame(extra)
        e.index = pd.DatetimeIndex(e.pop(C.TIME), name=C.TIME)
        a = pd.concat([a, e[[c for c in e.columns if c in a.columns or c == "cue_source"]]])
        a = a.sort_index(kind="stable")
    a[C.FRAME_OK] = a[C.FRAME_OK].fillna(False).astype(bool) if a[C.FRAME_OK].isna().any() else a[C.FRAME_OK].astype(bool)
    return a.drop(columns=["_k"])
