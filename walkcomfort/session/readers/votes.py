"""Comfort votes (CSV or JSON): events, never interpolated.

Each vote has a time and a 3-class comfort label (``comfortable``, ``neutral``,
``uncomfortable``) and/or the ASHRAE Standard 55 seven-point thermal sensation
vote (−3 cold … +3 hot, integers), an optional free-text note and kind
(``prompted`` at a planned stop or ``spontaneous``). Raw labels other than the
three classes can be mapped with ``[source.comfort_labels]``.
"""

from __future__ import annotations

import json
import re
from pathlib import Path

import numpy as np
import pandas as pd

from walkcomfort.columns import COMFORT_CLASSES, PARTICIPANT, VOTE_COMFORT, VOTE_KIND, VOTE_NOTE, VOTE_TSV
from walkcomfort.errors import InputError
from walkcomfort.session.readers._common import (
    Quarantine,
    assemble_metadata,
    column,
    finish,
    missing_mask,
    parse_times,
    read_delimited,
    read_text,
    time_parts,
    to_number,
)

VOTE_KINDS = ("prompted", "spontaneous")
#: Deepest nesting of a votes JSON ({"votes": [{"time": ...}]} is 3; a note may hold a small object).
MAX_JSON_DEPTH = 32
_BRACKETS = re.compile(r'"(?:[^"\\]|\\.)*"|[\[\]{}]')


def _nesting_depth(text: str) -> int:
    """Deepest bracket nesting of a JSON text, strings skipped (linear, no recursion)."""
    depth = deepest = 0
    for m in _BRACKETS.finditer(text):
        c = m.group(0)
        if c in "[{":
            depth += 1
            deepest = max(deepest, depth)
        elif c in "]}":
            depth -= 1
    return deepest


def read_votes(path, source_spec, session_spec):
    """Read comfort votes.

    Returns
    -------
    data : DataFrame
        UTC index ``time`` (device clock); ``participant``, ``vote_comfort``
        (one of the three classes or missing), ``vote_tsv`` (−3…+3 or NaN),
        ``vote_note`` (text, may be empty), ``vote_kind`` (``prompted``,
        ``spontaneous`` or empty).
    metadata : dict
        Counts and ``quarantine`` (``bad_comfort``, ``bad_tsv``,
        ``out_of_range:vote_tsv``, ``empty_vote``, ``bad_kind``,
        ``other_participant``, time problems, ``duplicate_time``).
    """
    path = Path(path)
    spec = source_spec
    q = Quarantine(spec.name, spec.path)
    if spec.format == "json":
        cols, present, rows, raws, encoding = _json_columns(path, spec)
    else:
        cols, present, rows, raws, encoding = _csv_columns(path, spec, q)
    n = len(rows)
    for f in spec.columns:
        if f not in present and n:
            raise InputError(f"column '{spec.column(f)}' (mapped from {f}) is not in the file",
                             where=f"{spec.where} columns.{f}", fix="correct the column name (case-sensitive)")
    if n and not ({"comfort", "tsv"} & present):
        raise InputError("the votes file has neither a comfort nor a tsv column", where=spec.display,
                         fix="add a comfort and/or tsv column, or map them in [source.columns]")
    times, reason = parse_times(cols["time"], spec, session_spec, where=spec.display,
                                lines=rows if spec.format != "json" else None)
    values = _vote_values(cols, spec, session_spec, reason)
    df, meta = finish(times, values, reason, None, rows, raws, q)
    return df, assemble_metadata("votes", spec, meta, q, encoding=encoding, fields=sorted(present))


_FIELDS = ("time", "participant", "comfort", "tsv", "note", "kind")


def _json_columns(path: Path, spec):
    recs = _json_records(path, spec)
    n = len(recs)
    cols = {f: pd.Series([_text(r.get(spec.column(f))) for r in recs], dtype=object) for f in _FIELDS}
    cols["time"] = [pd.Series([_text(r.get(c)).strip() for r in recs], dtype=object) for c in spec.time_columns]
    present = {f for f in _FIELDS if any(spec.column(f) in r for r in recs)}
    if any(all(c in r for c in spec.time_columns) for r in recs):
        present.add("time")
    if n and "time" not in present:
        raise InputError(f"no vote has the field(s) {', '.join(spec.time_columns)}", where=spec.display,
                         fix="give each vote a time, or map the field in [source.columns]")
    raws = [json.dumps(r, ensure_ascii=False, sort_keys=True) for r in recs]
    return cols, present, np.arange(1, n + 1, dtype=np.int64), raws, "utf-8"


def _csv_columns(path: Path, spec, q):
    table = read_delimited(path, spec, list(spec.time_columns), [spec.column(f) for f in _FIELDS[1:]], q)
    present = {f for f in _FIELDS[1:] if spec.column(f) in table.header} | {"time"}
    cols = {f: (column(table, spec.column(f)) if f in present else pd.Series([""] * len(table.rows), dtype=object))
            for f in _FIELDS[1:]}
    cols["time"] = time_parts(table, spec)
    return cols, present, table.lines, table.raws, table.encoding


def _comfort_classes(values: pd.Series, spec, reason: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    labels = {k.strip().lower(): v for k, v in spec.comfort_labels.items()}
    comfort = np.full(len(values), None, dtype=object)
    miss = missing_mask(values, spec.na_values)
    for i, v in enumerate(values):
        if miss[i]:
            continue
        key = v.strip().lower()
        lab = labels.get(key, key)
        if lab in COMFORT_CLASSES:
            comfort[i] = lab
        elif reason[i] == "":
            reason[i] = "bad_comfort"
    return comfort, miss


def _vote_values(cols: dict, spec, session_spec, reason: np.ndarray) -> dict:
    """The vote columns; sets the rows' reasons (bad labels, scale, empty votes, other participants)."""
    comfort, miss_c = _comfort_classes(cols["comfort"], spec, reason)
    tsv, bad = to_number(cols["tsv"], spec.decimal, spec.na_values)
    with np.errstate(invalid="ignore"):
        nonint = np.isfinite(tsv) & (np.round(tsv) != tsv)
        outr = np.isfinite(tsv) & ((tsv < -3) | (tsv > 3))
    reason[(bad | nonint) & (reason == "")] = "bad_tsv"
    reason[outr & (reason == "")] = "out_of_range:vote_tsv"
    empty = np.array([c is None for c in comfort], dtype=bool) & ~np.isfinite(tsv) & ~bad
    reason[empty & (reason == "") & miss_c] = "empty_vote"
    part = np.array([v.strip() if v.strip() else session_spec.participant for v in cols["participant"]], dtype=object)
    reason[(part != session_spec.participant) & (reason == "")] = "other_participant"
    kind = np.array([v.strip().lower() for v in cols["kind"]], dtype=object)
    badk = np.array([k not in VOTE_KINDS and k != "" for k in kind], dtype=bool)
    reason[badk & (reason == "")] = "bad_kind"
    note = np.array(list(cols["note"]), dtype=object)
    return {PARTICIPANT: part, VOTE_COMFORT: comfort, VOTE_TSV: tsv, VOTE_NOTE: note, VOTE_KIND: kind}


def _text(v) -> str:
    if v is None:
        return ""
    if isinstance(v, float) and not np.isfinite(v):
        return ""
    if isinstance(v, bool):
        return str(v).lower()
    return str(v)


def _json_records(path: Path, spec) -> list[dict]:
    text, _ = read_text(path, getattr(spec, "encoding", None), where=spec.display)
    depth = _nesting_depth(text)
    if depth > MAX_JSON_DEPTH:
        raise InputError(f"the JSON is nested {depth} levels deep; a votes file needs {MAX_JSON_DEPTH} at most",
                         where=spec.display, fix="write the votes as a flat array of objects")
    try:
        obj = json.loads(text)
    except json.JSONDecodeError as exc:
        raise InputError(f"not valid JSON ({exc.msg})", where=f"{spec.display}:{exc.lineno}",
                         fix="correct the JSON at that line (commas, quotes, brackets)") from None
    except RecursionError:  # pragma: no cover - the depth check above comes first
        raise InputError("the JSON is nested too deeply to read", where=spec.display,
                         fix="write the votes as a flat array of objects") from None
    if isinstance(obj, dict) and isinstance(obj.get("votes"), list):
        obj = obj["votes"]
    if not isinstance(obj, list):
        raise InputError("expected a list of votes (or {\"votes\": [...]})", where=spec.display,
                         fix="write the votes as a JSON array of objects")
    bad = [i for i, r in enumerate(obj, start=1) if not isinstance(r, dict)]
    if bad:
        raise InputError(f"vote #{bad[0]} is not an object", where=spec.display,
                         fix='write each vote as {"time": ..., "comfort": ...}')
    return obj


#: Public name for other modules (the shareable copy re-reads a votes JSON as the reader does).
json_records = _json_records
