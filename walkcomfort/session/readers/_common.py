"""Shared machinery of the readers: delimited text, times, quarantine, and the final tidy-up.

Every reader follows the same path so that counts reconcile everywhere:
raw lines → rows (bad field counts quarantined) → times (unparseable, naive/aware
mixes, non-existent local times) → values (not a number, outside the physical
range of :data:`walkcomfort.columns.PHYSICAL_RANGES`) → order (out-of-order rows
counted and sorted; duplicate timestamps: first kept, the rest quarantined).
"""

from __future__ import annotations

import csv
import re
from collections import Counter
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from walkcomfort.columns import PHYSICAL_RANGES, TIME
from walkcomfort.errors import InputError
from walkcomfort.errors import where as _where
from walkcomfort.session.readers import timeparse as _tp

QUARANTINE_COLUMNS = ("source", "file", "row", "reason", "raw")
MISSING = ("", "na", "n/a", "nan", "null", "none", "-", "--", "---")
# a UTC offset after a time of day ("10:00:00Z", "10:00+02:00", "T100000-0500"); a date alone is not one
_TZ_SUFFIX = re.compile(r"(?:\d\d:\d\d(?::\d\d(?:[.,]\d+)?)?|T\d{4,6}(?:[.,]\d+)?)\s*(?:[zZ]|[+-]\d\d(?::?\d\d)?)$")
_CONTROL = re.compile(r"[\x00-\x08\x0b-\x1f\x7f]")  # control bytes (tab allowed): not logger text


class Quarantine:
    """Rows set aside with a reason; becomes the ``quarantine`` DataFrame of a reader."""

    def __init__(self, source: str, file: str):
        self.source = source
        self.file = file
        self._rows: list[tuple] = []

    def add(self, row: int, reason: str, raw: str) -> None:
        self._rows.append((self.source, self.file, int(row), reason, raw))

    def extend(self, rows, reasons, raws) -> None:
        for r, why, raw in zip(rows, reasons, raws, strict=False):
            self.add(r, why, raw)

    def __len__(self) -> int:
        return len(self._rows)

    def frame(self) -> pd.DataFrame:
        return quarantine_frame(self._rows)


def quarantine_frame(rows=()) -> pd.DataFrame:
    """A quarantine table (``source, file, row, reason, raw``) from tuples."""
    df = pd.DataFrame(list(rows), columns=list(QUARANTINE_COLUMNS))
    df["row"] = df["row"].astype("int64")
    for c in ("source", "file", "reason", "raw"):
        df[c] = df[c].astype(object).astype(str) if len(df) else pd.Series([], dtype=str)
    return df


@dataclass
class RawTable:
    """Rows of a delimited text file, as text, with their 1-based line numbers."""

    header: list[str]
    rows: list[list[str]]      # (a list, or a :class:`FieldTable` read column-wise)
    lines: np.ndarray          # int line number of each row
    raws: list[str]            # the raw text of each row
    encoding: str


class FieldTable:
    """The fields of many rows kept column-wise as Arrow strings (compact), read like a list of rows."""

    def __init__(self, columns: list):
        self.columns = columns          # one pyarrow string array per header column

    def __len__(self) -> int:
        return len(self.columns[0]) if self.columns else 0

    def __getitem__(self, i: int) -> list[str]:
        return [c[i].as_py() for c in self.columns]

    def __iter__(self):
        yield from (list(r) for r in zip(*(c.to_pylist() for c in self.columns), strict=True))

    def column(self, j: int) -> pd.Series:
        import pyarrow.compute as pc

        return pd.Series(pc.utf8_trim_whitespace(self.columns[j]).to_numpy(zero_copy_only=False), dtype=object)


#: Longest field of a delimited file [characters]: a free-text vote note of a few MB is fine; a
#: file that is one unterminated quote is not (the csv module's default is 128 kB).
MAX_FIELD_CHARS = 16 * 1024 * 1024
csv.field_size_limit(max(csv.field_size_limit(), MAX_FIELD_CHARS))
# only these end a line: U+2028, NEL, form feed... are text a field may hold (str.splitlines would split there)
_LINE_BREAK = re.compile(r"\r\n|\n|\r")


def read_text(path: Path, encoding: str | None = None, where=None) -> tuple[str, str]:
    """The text of a file: strict UTF-8 first, a declared ``encoding``, or Windows-1252 when *no* byte is UTF-8.

    A file that is UTF-8 in places and something else elsewhere (one line pasted from
    another program) is refused, naming the line and byte, rather than decoded wrongly as
    a whole: decoding it as Windows-1252 would turn every correct "ñ" into "Ã±".
    """
    data = path.read_bytes()
    if encoding:
        try:
            return data.decode(encoding), encoding
        except (UnicodeDecodeError, LookupError) as exc:
            raise InputError(f"cannot decode as declared encoding {encoding!r} ({exc})", where=where or path,
                             fix="declare the encoding the file was written in, or save it as UTF-8") from None
    try:
        return data.decode("utf-8-sig"), "utf-8"
    except UnicodeDecodeError as exc:
        bad = exc
    if _has_utf8_sequences(data):
        line = data.count(b"\n", 0, bad.start) + 1
        col = bad.start - (data.rfind(b"\n", 0, bad.start) + 1) + 1
        raise InputError(f"the file mixes encodings: UTF-8 text elsewhere, but byte 0x{data[bad.start]:02x} at line "
                         f"{line}, byte {col} is not UTF-8", where=_where(where or path, line=line),
                         fix="save the file as UTF-8 (retype that line), or declare encoding = \"cp1252\" in its "
                             "[[source]] if the whole file is Windows-1252")
    # field loggers on older systems write Windows-1252 (e.g. a '°' in the header)
    return data.decode("cp1252", errors="replace"), "cp1252"


_UTF8_MULTI = re.compile(rb"[\xc2-\xdf][\x80-\xbf]|[\xe0-\xef][\x80-\xbf]{2}|[\xf0-\xf4][\x80-\xbf]{3}")


def _has_utf8_sequences(data: bytes) -> bool:
    """Whether the bytes hold any well-formed multi-byte UTF-8 sequence (then non-UTF-8 bytes are a mix)."""
    return _UTF8_MULTI.search(data) is not None


def logical_lines(text: str) -> tuple[list[str], list[int] | np.ndarray]:
    """Records of a delimited text and their first line numbers (1-based).

    A record ends at a line break outside a quoted field, so a quoted field may hold any
    line break; U+2028, NEL and form feed never end a record. A quote opens a quoted field
    only at the start of a field (after a delimiter or the line start); a quote inside an
    unquoted field is text. A quoted field left open at the end of the file does not swallow
    the lines after it: they are read again one by one.
    """
    physical = _LINE_BREAK.split(text)
    if physical and physical[-1] == "":
        physical.pop()
    if '"' not in text:   # no quoted field: every line is a record
        return physical, np.arange(1, len(physical) + 1, dtype=np.int64)
    records: list[str] = []
    starts: list[int] = []
    i = 0
    while i < len(physical):
        j, state = i, False
        while True:
            state = _quote_state(physical[j], state)
            if not state or j + 1 >= len(physical):
                break
            j += 1
        if state:   # never closed: the first line alone is the (bad) record
            j = i
        records.append("\n".join(physical[i:j + 1]))
        starts.append(i + 1)
        i = j + 1
    return records, starts


def _quote_state(line: str, in_quotes: bool) -> bool:
    """Whether a quoted field is still open at the end of ``line`` (given the state at its start)."""
    if '"' not in line:
        return in_quotes
    field_start = not in_quotes
    k, n = 0, len(line)
    while k < n:
        c = line[k]
        if in_quotes:
            if c == '"':
                if k + 1 < n and line[k + 1] == '"':
                    k += 1
                else:
                    in_quotes = False
        elif c == '"' and field_start:
            in_quotes = True
        field_start = c in _FIELD_SEPARATORS or (field_start and c == " ")
        k += 1
    return in_quotes


_FIELD_SEPARATORS = ",;\t|"


def read_delimited(path: Path, spec, required: list[str], optional: list[str], q: Quarantine) -> RawTable:
    """Split a delimited file into rows of text.

    The header is the first line (among the first 50, skipping comment lines that
    start with ``#``) that holds every ``required`` raw column name. Blank and
    comment lines are not rows. A line with the wrong number of fields, or with
    control bytes outside quotes, is quarantined with reason ``bad_line``.
    """
    text, encoding = read_text(path, getattr(spec, "encoding", None), where=spec.display)
    quoted = '"' in text
    lines, starts = logical_lines(text)
    del text   # a large file: the lines are all that is needed from here
    header_at, delim, header = _find_header(lines, spec, required)
    _refuse_duplicate_columns(header, required + optional, _where(spec.display, line=starts[header_at]))
    n = len(header)
    if not quoted and len(lines) - header_at > _COLUMNWISE_ROWS:
        return _read_columnwise(lines, starts, header_at, header, delim, q, encoding)
    rows: list[list[str]] = []
    nums: list[int] = []
    raws: list[str] = []
    for i in range(header_at + 1, len(lines)):
        line = lines[i]
        s = line.strip()
        if not s or s.startswith("#"):
            continue
        fields = _fields(line, delim, n)
        if fields is None:
            q.add(starts[i], "bad_line", line)
            continue
        rows.append(fields)
        nums.append(starts[i])
        raws.append(line)
    return RawTable(header, rows, np.asarray(nums, dtype=np.int64), raws, encoding)


#: Files with more rows than this and no quotes are split column-wise (Arrow strings: a logger
#: left running for weeks stays far below 1 GB of memory)
_COLUMNWISE_ROWS = 50_000


def _read_columnwise(lines, starts, header_at, header, delim, q, encoding) -> RawTable:
    """Split a large quote-free file with Arrow string kernels; the same rules as the row loop."""
    import pyarrow as pa
    import pyarrow.compute as pc

    n = len(header)
    arr = pa.array(lines[header_at + 1:], type=pa.large_string())
    stripped = pc.utf8_trim_whitespace(arr)
    skip = pc.or_(pc.equal(stripped, ""), pc.starts_with(stripped, "#")).to_numpy(zero_copy_only=False)
    control = pc.match_substring_regex(arr, _CONTROL.pattern).to_numpy(zero_copy_only=False)
    count = pc.count_substring(arr, delim).to_numpy(zero_copy_only=False) + 1
    ok = ~skip & ~control & (count == n)
    for i in np.flatnonzero(~skip & ~control & (count > n)):
        # more fields than the header, the extra ones empty (a trailing delimiter): kept as in the row loop
        ok[i] = _fields(lines[header_at + 1 + i], delim, n) is not None
    first = np.asarray(starts[header_at + 1:], dtype=np.int64)
    for i in np.flatnonzero(~skip & ~ok):
        q.add(int(first[i]), "bad_line", lines[header_at + 1 + i])
    kept = pc.split_pattern(arr.filter(pa.array(ok)), delim, max_splits=n)
    columns = [pc.list_element(kept, j) if len(kept) else pa.array([], type=pa.large_string()) for j in range(n)]
    idx = np.flatnonzero(ok)
    raws = [lines[header_at + 1 + i] for i in idx]
    return RawTable(header, FieldTable(columns), first[idx], raws, encoding)


def _find_header(lines: list[str], spec, required: list[str]) -> tuple[int, str, list[str]]:
    delim = spec.delimiter
    for i, line in enumerate(lines[:50]):
        s = line.strip()
        if not s or s.startswith("#"):
            continue
        d = delim or _sniff(line)
        fields = [f.strip() for f in _split(line, d)]
        if all(r in fields for r in required):
            return i, d, fields
    first = next((ln for ln in lines if ln.strip() and not ln.strip().startswith("#")), "")
    raise InputError(f"no header line with the columns {', '.join(repr(r) for r in required)} "
                     f"(first line: {first[:80]!r})", where=_where(spec.display, line=1),
                     fix="map the raw column names in [source.columns] (names are case-sensitive)")


def _refuse_duplicate_columns(header: list[str], wanted: list[str], where: str) -> None:
    counts = Counter(header)   # linear: a header of 100,000 columns must not take minutes
    dupe = sorted(h for h in set(wanted) if counts.get(h, 0) > 1)
    if dupe:
        raise InputError(f"column '{dupe[0]}' appears twice in the header", where=where,
                         fix="rename one of the columns in the file's header")


def _fields(line: str, delim: str, n: int) -> list[str] | None:
    """The fields of one record, or None when it is a bad line (field count, control bytes, a broken quote)."""
    if _CONTROL.search(_QUOTED.sub("", line)) or "\x00" in line:
        return None
    try:
        fields = _split(line, delim)
    except csv.Error:
        return None
    if len(fields) > n and not any(f.strip() for f in fields[n:]):
        fields = fields[:n]
    return fields if len(fields) == n else None


_QUOTED = re.compile(r'"(?:[^"]|"")*"', re.S)


def _sniff(line: str) -> str:
    counts = {d: line.count(d) for d in (",", ";", "\t", "|")}
    best = max(counts, key=counts.get)
    return best if counts[best] else ","


def _split(line: str, delim: str) -> list[str]:
    if '"' not in line:
        return line.split(delim)
    return next(csv.reader([line], delimiter=delim, strict=True))


sniff_delimiter = _sniff   # public names for other modules (the underscored ones stay for old callers)
split_fields = _split


def column(table: RawTable, name: str) -> pd.Series:
    """The text of one raw column (stripped), as an object Series aligned with the rows."""
    j = table.header.index(name)
    if isinstance(table.rows, FieldTable):
        return table.rows.column(j)
    return pd.Series([r[j].strip() for r in table.rows], dtype=object)


def time_text(table: RawTable, spec) -> pd.Series:
    """The time text of each row: the time column, or the declared columns joined by a space."""
    parts = time_parts(table, spec)
    return parts[0] if len(parts) == 1 else _join_parts(parts)


def time_parts(table: RawTable, spec) -> list[pd.Series]:
    """The text of each declared time column (``columns.time`` may list several)."""
    return [column(table, c) for c in spec.time_columns]


def _join_parts(parts: list[pd.Series]) -> pd.Series:
    out = parts[0].astype(str)
    for p in parts[1:]:
        out = out + " " + p.astype(str)
    return out.str.strip()


def missing_mask(s: pd.Series, na_values=()) -> np.ndarray:
    markers = list(set(MISSING) | {v.lower() for v in na_values})
    return s.astype(str).str.lower().isin(markers).to_numpy(dtype=bool)


def to_number(s: pd.Series, decimal: str = ".", na_values=()) -> tuple[np.ndarray, np.ndarray]:
    """Numbers from text. Returns ``(values, bad)`` where missing markers are NaN (not bad)."""
    miss = missing_mask(s, na_values)
    t = s.str.replace(",", ".", regex=False) if decimal == "," else s
    vals = np.array(pd.to_numeric(t.where(~miss, None), errors="coerce"), dtype=float)
    bad = np.isnan(vals) & ~miss
    # inf from "inf"/"1e999" is not a reading either
    inf = np.isinf(vals)
    vals[inf] = np.nan
    return vals, bad | inf


def parse_times(s, spec, session, where: str, lines=None) -> tuple[pd.DatetimeIndex, np.ndarray]:
    """Parse time text to UTC.

    ``s`` is one Series of time text, or a list of Series (one per column of
    ``columns.time``). Text with a UTC offset (or ``Z``) is taken as written; naive
    text is read in the zone named by ``spec.time_zone`` (``"local"`` = the session
    zone). A file mixing naive and offset times is an error, and so is text that the
    format would read by dropping a digit (see :mod:`~walkcomfort.session.readers.timeparse`).
    Returns the UTC index (NaT where a row cannot be used) and a reason per row (``""``
    when fine): ``bad_time``, ``nonexistent_local_time`` (skipped by a daylight-saving
    change) or ``ambiguous_local_time`` (repeated hour whose order cannot tell which).
    """
    parts = list(s) if isinstance(s, (list, tuple)) else [s]
    fmt = spec.time_format
    names = list(getattr(spec, "time_columns", ("time",)))
    if len(names) != len(parts):
        names = [f"time {i + 1}" for i in range(len(parts))]
    if isinstance(fmt, tuple):
        naive, reason = _tp.parse_parts(parts, fmt, names, where, lines)
        return _naive_to_utc(naive, reason, spec, session)
    text = parts[0] if len(parts) == 1 else _join_parts(parts)
    if fmt in _tp.EPOCH_UNITS:
        ns, reason = _tp.parse_epoch(text, fmt, where, lines)
        return pd.DatetimeIndex(ns).tz_localize("UTC"), reason
    _tp.refuse_digit_runs(parts, names, fmt, where, lines)
    return _parse_text(text.astype(str), spec, session, where, lines)


def _parse_text(text: pd.Series, spec, session, where, lines):
    n = len(text)
    fmt = spec.time_format
    reason = np.full(n, "", dtype=object)
    aware = text.str.contains(_TZ_SUFFIX, regex=True).to_numpy(dtype=bool) & (fmt in (None, "ISO8601"))
    result = np.full(n, np.datetime64("NaT", "ns"), dtype="datetime64[ns]")
    n_aware = n_naive = 0
    if aware.any():
        t = pd.to_datetime(text[aware], format="ISO8601", utc=True, errors="coerce")
        n_aware = int((~t.isna()).sum())
        result[np.flatnonzero(aware)] = t.dt.tz_localize(None).to_numpy(dtype="datetime64[ns]")
    naive = ~aware
    if naive.any():
        t = pd.to_datetime(text[naive], format=fmt or "ISO8601", errors="coerce")
        if getattr(t.dt, "tz", None) is not None:  # a strftime pattern with %z
            t = t.dt.tz_convert("UTC").dt.tz_localize(None)
            result[np.flatnonzero(naive)] = t.to_numpy(dtype="datetime64[ns]")
            n_aware += int((~t.isna()).sum())
            naive[:] = False
        else:
            n_naive = int((~t.isna()).sum())
            result[np.flatnonzero(naive)] = t.to_numpy(dtype="datetime64[ns]")
    if n_aware and n_naive:
        minority = aware if n_aware < n_naive else naive
        at = int(np.flatnonzero(minority)[0])
        raise InputError(f"the time column mixes {n_aware} times with a UTC offset and {n_naive} without "
                         f"(first odd one: {text.iloc[at]!r})",
                         where=_where(where, line=int(lines[at])) if lines is not None else where,
                         fix="write every time in one form (all with an offset, or all local "
                             "and declare time_zone in the manifest)")
    if n_naive:
        utc, why = _naive_to_utc(result[naive], reason[naive], spec, session)
        result[naive] = utc.tz_localize(None).to_numpy("datetime64[ns]")
        reason[naive] = why
    idx = pd.DatetimeIndex(result).tz_localize("UTC")
    bad = np.asarray(idx.isna()) & (reason == "")
    reason[bad] = "bad_time"
    return idx, reason


def _naive_to_utc(naive: np.ndarray, reason: np.ndarray, spec, session) -> tuple[pd.DatetimeIndex, np.ndarray]:
    """Naive wall-clock times of the source's zone → UTC; rows already with a reason keep it."""
    reason = np.asarray(reason, dtype=object).copy()
    loc = pd.DatetimeIndex(np.asarray(naive, dtype="datetime64[ns]"))
    if (~np.isnat(np.asarray(naive, dtype="datetime64[ns]"))).any():
        utc, why = localize(loc, session.zone_for(spec.time_zone))
    else:
        utc, why = loc.tz_localize("UTC"), np.full(len(loc), "", dtype=object)
    sel = (why != "") & (reason == "")
    reason[sel] = why[sel]
    bad = np.asarray(utc.isna()) & (reason == "")
    reason[bad] = "bad_time"
    return utc, reason


def localize(loc: pd.DatetimeIndex, zone) -> tuple[pd.DatetimeIndex, np.ndarray]:
    """Naive local times → UTC, marking times a daylight-saving change makes unusable.

    A repeated hour is resolved by the order of the rows (a logger writing the
    clock as it goes back); if the order cannot tell, those rows are marked
    ``ambiguous_local_time`` rather than guessed.
    """
    why = np.full(len(loc), "", dtype=object)
    was_nat = np.asarray(loc.isna())
    try:
        out = loc.tz_localize(zone, ambiguous="infer", nonexistent="NaT")
    except Exception:  # order does not resolve the repeated hour
        out = loc.tz_localize(zone, ambiguous="NaT", nonexistent="NaT")
        amb = loc.tz_localize(zone, ambiguous="NaT", nonexistent="shift_forward")
        why[np.asarray(amb.isna()) & ~was_nat] = "ambiguous_local_time"
    nat = np.asarray(out.isna()) & ~was_nat & (why == "")
    why[nat] = "nonexistent_local_time"
    return out.tz_convert("UTC"), why


def range_reasons(values: dict[str, np.ndarray], reason: np.ndarray) -> None:
    """Mark rows whose value lies outside :data:`PHYSICAL_RANGES` (``out_of_range:<column>``).

    A position of exactly 0° N 0° E is what many GPS loggers write before a fix: ``null_position``.
    """
    if "lat" in values and "lon" in values:
        lat, lon = np.asarray(values["lat"], float), np.asarray(values["lon"], float)
        # a fix without a position (lat="NaN", an empty field) is not a point of the track
        nopos = ~(np.isfinite(lat) & np.isfinite(lon)) & (reason == "")
        reason[nopos] = "no_position"
        null = (lat == 0.0) & (lon == 0.0) & (reason == "")
        reason[null] = "null_position"
    for col, arr in values.items():
        if col not in PHYSICAL_RANGES:
            continue
        lo, hi = PHYSICAL_RANGES[col]
        with np.errstate(invalid="ignore"):
            out = (arr < lo) | (arr > hi)
        sel = out & (reason == "")
        reason[sel] = f"out_of_range:{col}"


def finish(times: pd.DatetimeIndex, values: dict[str, np.ndarray], reason: np.ndarray, table: RawTable | None,
           rows: np.ndarray, raws: list[str], q: Quarantine, extra: dict | None = None) -> tuple[pd.DataFrame, dict]:
    """Quarantine the rows with a reason, sort the rest by time, set duplicate timestamps aside.

    Returns the tidy DataFrame (UTC index named ``time``) and the counting part of
    the metadata: ``rows_read, rows_used, rows_quarantined, out_of_order, duplicates``.
    """
    n = len(times)
    pre = len(q)  # rows the reader set aside before they could get a time (bad lines, no time)
    good = reason == ""
    for i in np.flatnonzero(~good):
        q.add(rows[i], reason[i], raws[i])
    t_good = times[good]
    ns = t_good.asi8
    # a row is out of order when its time is earlier than a row before it in the file
    out_of_order, newest_first = 0, False
    if len(ns) > 1:
        runmax = np.maximum.accumulate(ns)
        out_of_order = int(np.sum(ns[1:] < runmax[:-1]))
        # a file written newest first (some loggers export that way) is in order, read backwards
        newest_first = bool(np.all(np.diff(ns) <= 0)) and ns[0] > ns[-1]
        if newest_first:
            out_of_order = 0
    order = np.argsort(ns, kind="stable")
    gi = np.flatnonzero(good)[order]
    ts = t_good[order]
    dup = np.asarray(ts.duplicated(keep="first"))
    for i in gi[dup]:
        q.add(rows[i], "duplicate_time", raws[i])
    keep = gi[~dup]
    data = {k: v[keep] for k, v in values.items()}
    df = pd.DataFrame(data, index=pd.DatetimeIndex(ts[~dup], name=TIME))
    df.index = df.index.as_unit("ns")
    meta = {
        # aligned with the rows of the DataFrame, so later stages can quarantine with the raw text
        "row_numbers": np.asarray(rows)[keep],
        "raw_lines": [raws[i] for i in keep],
        "rows_read": int(n + pre),
        "rows_used": int(len(df)),
        "out_of_order": out_of_order,
        "newest_first": newest_first,
        "duplicates": int(dup.sum()),
    }
    if extra:
        meta.update(extra)
    return df, meta


def assemble_metadata(kind: str, spec, meta: dict, q: Quarantine, **more) -> dict:
    """The reader metadata: counts, the quarantine table, what the file said about itself."""
    qf = q.frame()
    meta = dict(meta)
    meta["rows_quarantined"] = int(len(qf))
    meta["quarantine"] = qf
    meta.update(source=spec.name, kind=kind, file=spec.path, device=spec.device)
    meta.update(more)
    return meta


def read_sensor_csv(spec, session, fields: list[tuple[str, str, bool]], kind: str,
                    path: Path | None = None) -> tuple[pd.DataFrame, dict]:
    """Read a delimited sensor file into SI columns.

    Parameters
    ----------
    spec : SourceSpec
    session : SessionSpec
    fields : list of (canonical field, output column, required)
        The numeric fields to read; a required field must be in the header, an
        optional one is read when mapped in ``[source.columns]`` or present under
        its canonical name.
    kind : str
    """
    from walkcomfort.session.readers._units import to_si

    path = Path(path) if path is not None else spec.abs_path
    q = Quarantine(spec.name, spec.path)
    required = list(spec.time_columns) + [spec.column(f) for f, _, req in fields if req]
    optional = [spec.column(f) for f, _, req in fields if not req]
    for f in spec.units:
        if f not in [x[0] for x in fields]:
            raise InputError(f"units.{f} is declared but {f} is not read from a {kind} file",
                             where=f"{spec.where} units.{f}", fix="remove it")
    table = read_delimited(path, spec, required, optional, q)
    present = []
    for f, out, _req in fields:
        raw = spec.column(f)
        if raw in table.header:
            present.append((f, out, raw))
        elif f in spec.columns:
            raise InputError(f"column '{raw}' (mapped from {f}) is not in the header {table.header}",
                             where=f"{spec.where} columns.{f}", fix="correct the column name (case-sensitive)")
    # units first: an undeclared or unknown unit stops the whole file, before any row is read
    factors = {}
    for f, _out, _raw in present:
        factors[f] = spec.units.get(f)
        to_si(np.zeros(1), f, factors[f], spec.where)
    times, reason = parse_times(time_parts(table, spec), spec, session, where=spec.display, lines=table.lines)
    values: dict[str, np.ndarray] = {}
    for f, out, raw in present:
        v, bad = to_number(column(table, raw), spec.decimal, spec.na_values)
        sel = bad & (reason == "")
        reason[sel] = f"not_a_number:{out}"
        values[out] = to_si(v, f, factors[f], spec.where)
    range_reasons(values, reason)
    df, meta = finish(times, values, reason, table, table.lines, table.raws, q)
    return df, assemble_metadata(kind, spec, meta, q, encoding=table.encoding,
                                 columns={out: raw for f, out, raw in present},
                                 units={f: (spec.units.get(f) or "default") for f, _, _ in present})
