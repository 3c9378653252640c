"""The session manifest ``session.toml``: load, validate, and describe one field session.

A session folder holds the raw files of one walk of one participant and a
``session.toml`` that says what each file is, which device clock wrote it, which
columns hold which quantity and in which unit. This module turns that manifest
into a :class:`SessionSpec` or raises one :class:`~walkcomfort.errors.InputError`
naming the manifest and the key that is wrong. Every key is documented in
``docs/formats/session-manifest.md``.

Nothing here reads the data files; it only checks that they exist and that every
path stays inside the session folder.
"""

from __future__ import annotations

import codecs
import os
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any
from zoneinfo import ZoneInfo

import pandas as pd

from walkcomfort.columns import COMFORT_CLASSES
from walkcomfort.errors import InputError
from walkcomfort.session.limits import default_limits, parse_checks
from walkcomfort.session.readers.timeparse import check_time_format
from walkcomfort.session.tomlcheck import manifest_time as _time
from walkcomfort.session.tomlcheck import no_unknown as _no_unknown
from walkcomfort.session.tomlcheck import number as _number
from walkcomfort.session.tomlcheck import safe_path
from walkcomfort.session.tomlcheck import str_table as _str_table
from walkcomfort.session.tomlcheck import string as _string
from walkcomfort.session.tomlcheck import suggest as _suggest
from walkcomfort.session.tomlcheck import table as _table
from walkcomfort.session.tomlcheck import zone as _zone

SCHEMA = "walkcomfort-session/1"
MANIFEST_NAME = "session.toml"

KINDS = ("gps", "weather", "noise", "light", "frames", "votes")
FORMATS = {
    "gps": ("gpx", "csv"),
    "weather": ("csv",),
    "noise": ("csv",),
    "light": ("csv",),
    "frames": ("folder",),
    "votes": ("csv", "json"),
}
# Kinds that may appear more than once (events merge); continuous sensors appear once.
MULTI_KINDS = ("frames", "votes")

# canonical field names per kind (what [source.columns] maps from)
FIELDS = {
    "gps": ("time", "lat", "lon", "elev"),
    "weather": ("time", "t_air", "rh", "wind", "t_globe", "pressure"),
    "noise": ("time", "laeq"),
    "light": ("time", "illum"),
    "frames": (),
    "votes": ("time", "participant", "comfort", "tsv", "note", "kind"),
}

_TOP_KEYS = ("schema", "session", "participant", "sensors", "devices", "sync", "source", "checks")
_SESSION_KEYS = ("id", "participant", "timezone", "site", "start", "end")
_PARTICIPANT_KEYS = ("age_band", "clo", "acclimatised", "activity")
_DEVICE_KEYS = ("offset_s", "drift_ppm", "reference")
_SYNC_KEYS = ("device", "device_time", "true_time", "frame", "device_a", "time_a",
              "device_b", "time_b", "note")
_SOURCE_KEYS = ("kind", "path", "device", "format", "time_zone", "columns", "units",
                "time_format", "delimiter", "decimal", "na_values", "time_from",
                "filename_pattern", "max_gap_s", "comfort_labels", "name", "encoding")

# [sensors]: key -> (allowed min, allowed max, default). Ranges are plausibility
# limits for field kit (common practice), not physics.
SENSOR_KEYS: dict[str, tuple[float, float, float | None]] = {
    "wind_height_m": (0.1, 20.0, 1.1),
    "globe_height_m": (0.1, 5.0, 1.1),
    "globe_diameter_m": (0.01, 0.30, 0.15),
    "globe_emissivity": (0.5, 1.0, 0.95),
    "tau_air_s": (0.0, 3600.0, None),
    "tau_globe_s": (0.0, 7200.0, None),
    "camera_hfov_deg": (1.0, 360.0, None),
}
# [sensors] keys with a choice of words: key -> (choices, default). globe_type names the
# globe's published calibration (environment.globe); anemometer says whether the wind
# sensor moved with the walker (reads air speed relative to them) or stood still.
SENSOR_CHOICES: dict[str, tuple[tuple[str, ...], str | None]] = {
    "globe_type": (("black_150mm", "grey_38mm"), None),
    "anemometer": (("carried", "fixed"), None),
}


def table_keys() -> dict[str, tuple[str, ...]]:
    """Every key each manifest table accepts (docs/formats/session-manifest.md is checked against it)."""
    from walkcomfort.session.limits import CHECK_KEYS

    return {"top level": _TOP_KEYS, "[session]": _SESSION_KEYS, "[participant]": _PARTICIPANT_KEYS,
            "[sensors]": (*SENSOR_KEYS, *SENSOR_CHOICES), "[devices.<name>]": _DEVICE_KEYS,
            "[[sync]]": _SYNC_KEYS, "[checks]": tuple(CHECK_KEYS), "[[source]]": _SOURCE_KEYS}


@dataclass(frozen=True)
class DeviceSpec:
    """One device clock: ``device_time = true_time + offset_s + drift_ppm·1e-6·(true_time - t_ref)``."""

    name: str
    offset_s: float = 0.0
    drift_ppm: float = 0.0
    reference: bool = False


@dataclass(frozen=True)
class SyncEvent:
    """The same instant read on two clocks (``device_b`` is the reference in the short form).

    ``time_a`` may be ``None`` when ``frame`` names the camera frame whose own
    timestamp is the reading of ``device_a``.
    """

    index: int
    device_a: str
    time_a: pd.Timestamp | None
    device_b: str
    time_b: pd.Timestamp
    frame: str | None = None
    note: str = ""


@dataclass(frozen=True)
class SourceSpec:
    """One raw source as declared in a ``[[source]]`` table."""

    index: int                      # 1-based position among the [[source]] tables
    name: str                       # unique; "gps", "weather", ... or the declared name
    kind: str
    path: str                       # as written (relative, posix)
    abs_path: Path
    device: str
    format: str
    time_zone: str                  # "local", "UTC" or an IANA name (for naive times)
    columns: dict[str, str] = field(default_factory=dict)
    units: dict[str, str] = field(default_factory=dict)
    time_columns: tuple[str, ...] = ("time",)   # raw columns joined with a space to form the time text
    time_format: str | tuple[str, ...] | None = None  # strftime, "ISO8601" (default), "epoch_s"/"_ms"/"_us",
    #                                                   or one entry per time column ("YEAR", "DOY", "HHMM", ...)
    delimiter: str | None = None    # sniffed from the header line when not given
    decimal: str = "."
    na_values: tuple[str, ...] = ()
    time_from: str = "exif"         # frames: "exif" | "filename"
    filename_pattern: str | None = None
    max_gap_s: float | None = None
    comfort_labels: dict[str, str] = field(default_factory=dict)
    manifest: str = MANIFEST_NAME
    encoding: str | None = None     # declared text encoding; default: strict UTF-8 (Windows-1252 if no byte is UTF-8)

    @property
    def where(self) -> str:
        return f"{self.manifest} [[source]] #{self.index} ({self.kind})"

    @property
    def display(self) -> str:
        """The file as the user would find it (session folder as given + relative path), for messages."""
        return str(self.abs_path)

    def column(self, canonical: str) -> str:
        """Raw column name for a canonical field (the canonical name itself when not mapped)."""
        return self.columns.get(canonical, canonical)


@dataclass(frozen=True)
class SessionSpec:
    """A validated manifest of one session folder."""

    session_dir: Path
    manifest_path: Path
    id: str
    participant: str
    timezone: str
    site: str = ""
    start: pd.Timestamp | None = None
    end: pd.Timestamp | None = None
    attributes: dict[str, Any] = field(default_factory=dict)
    sensors: dict[str, float | None] = field(default_factory=dict)
    devices: dict[str, DeviceSpec] = field(default_factory=dict)
    reference_device: str = "gps"
    sync: tuple[SyncEvent, ...] = ()
    sources: tuple[SourceSpec, ...] = ()
    checks: dict[str, Any] = field(default_factory=default_limits)   # [checks]: see session.limits

    @property
    def tz(self) -> ZoneInfo:
        return ZoneInfo(self.timezone)

    def device(self, name: str) -> DeviceSpec:
        """The declared clock of ``name`` (a zero-offset clock when undeclared)."""
        return self.devices.get(name, DeviceSpec(name, reference=(name == self.reference_device)))

    def sources_of(self, kind: str) -> list[SourceSpec]:
        return [s for s in self.sources if s.kind == kind]

    def zone_for(self, time_zone: str) -> ZoneInfo:
        """The zone in which naive timestamps declared with ``time_zone`` are read."""
        if time_zone == "local":
            return self.tz
        return ZoneInfo(time_zone)


# --------------------------------------------------------------------------------------
def load_manifest(session_dir: str | os.PathLike) -> SessionSpec:
    """Read and validate ``session.toml`` of a session folder.

    Parameters
    ----------
    session_dir : path
        The session folder, or the ``session.toml`` inside it.

    Returns
    -------
    SessionSpec

    Raises
    ------
    InputError
        One line naming the manifest, the key and how to fix it.
    """
    p = Path(session_dir)
    if p.is_file() or p.suffix == ".toml":
        manifest = p
        folder = p.parent
    else:
        folder = p
        manifest = p / MANIFEST_NAME
    if not folder.is_dir():
        raise InputError(f"session folder '{folder}' does not exist", fix="give the folder that holds session.toml")
    if not manifest.is_file():
        raise InputError(f"no {MANIFEST_NAME} in '{folder}'", where=folder,
                         fix=f"write a {MANIFEST_NAME} (see docs/formats/session-manifest.md)")
    raw = manifest.read_bytes()
    try:
        data = tomllib.loads(raw.decode("utf-8-sig"))
    except UnicodeDecodeError as exc:
        raise InputError(f"not UTF-8 text ({exc.reason} at byte {exc.start})", where=manifest,
                         fix="save the manifest as UTF-8") from None
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"not valid TOML ({exc})", where=manifest,
                         fix="correct the TOML syntax at that line (quotes, brackets, '=')") from None
    return parse_manifest(data, folder, manifest_name=str(manifest))


def parse_manifest(data: dict, session_dir: str | os.PathLike, manifest_name: str = MANIFEST_NAME) -> SessionSpec:
    """Validate a manifest already parsed from TOML (see :func:`load_manifest`)."""
    folder = Path(session_dir)
    m = manifest_name
    _no_unknown(data, _TOP_KEYS, m, "")
    schema = data.get("schema", SCHEMA)
    if schema != SCHEMA:
        raise InputError(f"schema is '{schema}', this version reads '{SCHEMA}'", where=f"{m} schema",
                         fix=f'write schema = "{SCHEMA}"')

    sess = _table(data, "session", m, required=True)
    _no_unknown(sess, _SESSION_KEYS, m, "[session]")
    sid = _string(sess, "id", m, "[session]", required=True)
    if not sid.replace("-", "").replace("_", "").replace(".", "").isalnum():
        raise InputError(f"id '{sid}' may hold only letters, digits, '-', '_' and '.'", where=f"{m} [session] id",
                         fix="choose an id usable as a folder name, e.g. 'p01-am'")
    participant = _string(sess, "participant", m, "[session]", required=True)
    tzname = _string(sess, "timezone", m, "[session]", required=True)
    _zone(tzname, f"{m} [session] timezone")
    site = _string(sess, "site", m, "[session]") or ""
    tz = ZoneInfo(tzname)
    start = _time(sess.get("start"), tz, f"{m} [session] start")
    end = _time(sess.get("end"), tz, f"{m} [session] end")
    if start is not None and end is not None and end <= start:
        raise InputError(f"end {sess['end']} is not after start {sess['start']}", where=f"{m} [session] end",
                         fix="swap them or correct the times")

    part = _table(data, "participant", m)
    _no_unknown(part, _PARTICIPANT_KEYS, m, "[participant]")
    attributes: dict[str, Any] = {k: None for k in _PARTICIPANT_KEYS}
    if "age_band" in part:
        attributes["age_band"] = _string(part, "age_band", m, "[participant]")
    if "activity" in part:
        attributes["activity"] = _string(part, "activity", m, "[participant]")
    if "clo" in part:
        attributes["clo"] = _number(part, "clo", m, "[participant]", lo=0.0, hi=4.0)
    if "acclimatised" in part:
        v = part["acclimatised"]
        if not isinstance(v, bool):
            raise InputError(f"acclimatised is {v!r}, expected true or false", where=f"{m} [participant] acclimatised",
                             fix="write acclimatised = true (or false)")
        attributes["acclimatised"] = v

    sens = _table(data, "sensors", m)
    _no_unknown(sens, tuple(SENSOR_KEYS) + tuple(SENSOR_CHOICES), m, "[sensors]")
    sensors: dict = {}
    for key, (lo, hi, default) in SENSOR_KEYS.items():
        sensors[key] = _number(sens, key, m, "[sensors]", lo=lo, hi=hi) if key in sens else default
    for key, (choices, default) in SENSOR_CHOICES.items():
        val = sens.get(key, default)
        if val is not None and val not in choices:
            raise InputError(f"{key} = {val!r} is not known", where=f"{m} [sensors] {key}",
                             fix=f"write one of {', '.join(repr(c) for c in choices)}")
        sensors[key] = val

    sources = _sources(data, folder, m, tz)
    source_devices = {s.device for s in sources}
    checks = parse_checks(_table(data, "checks", m), m)

    devices, reference = _devices(data, m, sources)
    known = source_devices | set(devices) | {reference}

    sync = _sync_events(data, m, tz, known, reference, folder)
    return SessionSpec(session_dir=folder, manifest_path=folder / MANIFEST_NAME if manifest_name == MANIFEST_NAME
                       else Path(manifest_name), id=sid, participant=participant, timezone=tzname, site=site,
                       start=start, end=end, attributes=attributes, sensors=sensors, devices=devices,
                       reference_device=reference, sync=tuple(sync), sources=tuple(sources), checks=checks)


# --------------------------------------------------------------------------------------
def _sources(data: dict, folder: Path, m: str, tz) -> list[SourceSpec]:
    raw = data.get("source")
    if raw is None:
        raise InputError("no [[source]] table", where=m, fix="declare each data file in a [[source]] table")
    if not isinstance(raw, list) or not all(isinstance(x, dict) for x in raw):
        raise InputError("source must be an array of tables", where=f"{m} source",
                         fix="write each source as [[source]] (double brackets)")
    out: list[SourceSpec] = []
    for i, s in enumerate(raw, start=1):
        out.append(_source(s, i, folder, m, out))
    if not any(s.kind == "gps" for s in out):
        raise InputError("no gps source; the timeline is laid along the GPS track", where=f"{m} [[source]]",
                         fix='add a [[source]] with kind = "gps"')
    return out


def _source(s: dict, i: int, folder: Path, m: str, before: list[SourceSpec]) -> SourceSpec:
    """One ``[[source]]`` table."""
    w = f"[[source]] #{i}"
    _no_unknown(s, _SOURCE_KEYS, m, w)
    kind = _string(s, "kind", m, w, required=True)
    if kind not in KINDS:
        raise InputError(f"kind '{kind}' is not known; allowed: {', '.join(KINDS)}", where=f"{m} {w} kind",
                         fix=_suggest(kind, KINDS) or "use one of the listed kinds")
    w = f"[[source]] #{i} ({kind})"
    if kind not in MULTI_KINDS and any(o.kind == kind for o in before):
        raise InputError(f"a second '{kind}' source; one walk has one {kind} record", where=f"{m} {w}",
                         fix="keep one file per continuous sensor (join split files first)")
    rel, abs_path, fmt = _source_file(s, kind, folder, m, w)
    names = {o.name for o in before}
    name = _string(s, "name", m, w) or (kind if kind not in names else f"{kind}_{i}")
    if name in names:
        raise InputError(f"source name '{name}' is used twice", where=f"{m} {w} name", fix="give each source its own name")
    time_zone = _string(s, "time_zone", m, w) or ("UTC" if fmt == "gpx" else "local")
    if time_zone not in ("local", "UTC"):
        _zone(time_zone, f"{m} {w} time_zone")
    columns, time_columns = _source_columns(s, kind, m, w)
    return SourceSpec(index=i, name=name, kind=kind, path=rel, abs_path=abs_path,
                      device=_string(s, "device", m, w) or name, format=fmt, time_zone=time_zone, columns=columns,
                      units=_source_units(s, kind, m, w), time_columns=time_columns,
                      time_format=check_time_format(s.get("time_format"), len(time_columns), f"{m} {w} time_format"),
                      manifest=m, **_source_options(s, kind, m, w))


def _source_file(s: dict, kind: str, folder: Path, m: str, w: str) -> tuple[str, Path, str]:
    rel = _string(s, "path", m, w, required=True)
    abs_path = safe_path(folder, rel, f"{m} {w} path")
    fmt_default = {"gps": "gpx" if rel.lower().endswith(".gpx") else "csv", "frames": "folder",
                   "votes": "json" if rel.lower().endswith(".json") else "csv"}.get(kind, "csv")
    fmt = _string(s, "format", m, w) or fmt_default
    if fmt not in FORMATS[kind]:
        raise InputError(f"format '{fmt}' is not readable for kind '{kind}'; allowed: {', '.join(FORMATS[kind])}",
                         where=f"{m} {w} format", fix=f"write format = \"{FORMATS[kind][0]}\" or convert the file")
    optional = "" if kind == "gps" else (f" (a {kind} source is optional: delete this [[source]] table if the "
                                         f"instrument was not carried)")
    if fmt == "folder" and not abs_path.is_dir():
        raise InputError(f"folder '{rel}' not found", where=f"{m} {w} path",
                         fix="give the folder of frames relative to the session folder" + optional)
    if fmt != "folder" and not abs_path.is_file():
        raise InputError(f"file '{rel}' not found", where=f"{m} {w} path",
                         fix="give the file's path relative to the session folder (copy the device's export there)" + optional)
    return rel, abs_path, fmt


def _source_columns(s: dict, kind: str, m: str, w: str) -> tuple[dict[str, str], tuple[str, ...]]:
    raw_cols = s.get("columns", {})
    tcols = None
    if isinstance(raw_cols, dict) and isinstance(raw_cols.get("time"), list):
        # a logger writing date and time of day in separate columns: time = ["Date", "Time"]
        tcols = raw_cols["time"]
        if not (1 <= len(tcols) <= 4) or not all(isinstance(x, str) and x for x in tcols):
            raise InputError(f"columns.time = {tcols!r} must be a column name or a list of 1-4 names",
                             where=f"{m} {w} columns.time", fix='write time = "DateTime" or time = ["Date", "Time"]')
        raw_cols = {k: v for k, v in raw_cols.items() if k != "time"}
    columns = _str_table({"columns": raw_cols}, "columns", m, w)
    bad = [k for k in columns if k not in FIELDS[kind]]
    if bad:
        raise InputError(f"columns.{bad[0]} is not a field of a {kind} source; fields: {', '.join(FIELDS[kind])}",
                         where=f"{m} {w} columns.{bad[0]}", fix=_suggest(bad[0], FIELDS[kind]) or "map only listed fields")
    return columns, tuple(tcols) if tcols else (columns.get("time", "time"),)


def _source_units(s: dict, kind: str, m: str, w: str) -> dict[str, str]:
    units = _str_table(s, "units", m, w)
    badu = [k for k in units if k not in FIELDS[kind] or k == "time"]
    if badu:
        raise InputError(f"units.{badu[0]} is not a measured field of a {kind} source",
                         where=f"{m} {w} units.{badu[0]}", fix=_suggest(badu[0], FIELDS[kind]) or "remove it")
    return units


def _source_options(s: dict, kind: str, m: str, w: str) -> dict:
    """The reading options of a source (frames' time source, delimiter, decimal, missing markers, ...)."""
    time_from = _string(s, "time_from", m, w) or "exif"
    if time_from not in ("exif", "filename"):
        raise InputError(f"time_from '{time_from}' is not known; allowed: exif, filename",
                         where=f"{m} {w} time_from", fix="write time_from = \"exif\" or \"filename\"")
    pattern = _string(s, "filename_pattern", m, w)
    if kind == "frames" and time_from == "filename" and (not pattern or "%" not in pattern):
        raise InputError("time_from = \"filename\" needs a filename_pattern with strftime codes",
                         where=f"{m} {w} filename_pattern", fix='write e.g. filename_pattern = "IMG_%Y%m%d_%H%M%S"')
    delim = _string(s, "delimiter", m, w)
    if delim is not None:
        delim = {"\\t": "\t", "tab": "\t"}.get(delim, delim)
        if len(delim) != 1:
            raise InputError(f"delimiter {delim!r} must be one character", where=f"{m} {w} delimiter",
                             fix='write delimiter = "," (or ";", "\\t")')
    decimal = _string(s, "decimal", m, w) or "."
    if decimal not in (".", ","):
        raise InputError(f"decimal {decimal!r} must be '.' or ','", where=f"{m} {w} decimal", fix='write decimal = ","')
    na = s.get("na_values", [])
    if not isinstance(na, list) or not all(isinstance(x, str) for x in na):
        raise InputError("na_values must be a list of strings", where=f"{m} {w} na_values",
                         fix='write na_values = ["-9999", "---"]')
    labels = _str_table(s, "comfort_labels", m, w)
    badl = [v for v in labels.values() if v not in COMFORT_CLASSES]
    if badl:
        raise InputError(f"comfort_labels maps to '{badl[0]}'; allowed: {', '.join(COMFORT_CLASSES)}",
                         where=f"{m} {w} comfort_labels", fix="map each raw label to one of the three classes")
    encoding = _string(s, "encoding", m, w)
    if encoding is not None:
        try:
            codecs.lookup(encoding)
        except LookupError:
            raise InputError(f"encoding {encoding!r} is not known", where=f"{m} {w} encoding",
                             fix='write e.g. encoding = "utf-8", "cp1252" or "latin-1"') from None
    return {"delimiter": delim, "decimal": decimal, "na_values": tuple(na), "time_from": time_from,
            "filename_pattern": pattern, "comfort_labels": labels, "encoding": encoding,
            "max_gap_s": _number(s, "max_gap_s", m, w, lo=0.0, hi=86400.0) if "max_gap_s" in s else None}


def _devices(data: dict, m: str, sources: list[SourceSpec]) -> tuple[dict[str, DeviceSpec], str]:
    """The ``[devices]`` clocks and the name of the reference clock."""
    devs = _table(data, "devices", m)
    devices: dict[str, DeviceSpec] = {}
    for name, spec in devs.items():
        w = f"[devices.{name}]"
        if not isinstance(spec, dict):
            raise InputError(f"devices.{name} is not a table", where=f"{m} {w}",
                             fix=f"write [devices.{name}] with offset_s / drift_ppm / reference")
        _no_unknown(spec, _DEVICE_KEYS, m, w)
        ref = spec.get("reference", False)
        if not isinstance(ref, bool):
            raise InputError(f"reference is {ref!r}, expected true or false", where=f"{m} {w} reference",
                             fix="write reference = true for the one clock taken as true time")
        devices[name] = DeviceSpec(
            name=name,
            offset_s=_number(spec, "offset_s", m, w, lo=-86400 * 366, hi=86400 * 366) if "offset_s" in spec else 0.0,
            drift_ppm=_number(spec, "drift_ppm", m, w, lo=-1e5, hi=1e5) if "drift_ppm" in spec else 0.0,
            reference=ref,
        )
    refs = [d.name for d in devices.values() if d.reference]
    if len(refs) > 1:
        raise InputError(f"{len(refs)} devices are marked reference = true ({', '.join(refs)})",
                         where=f"{m} [devices]", fix="mark exactly one device as the reference clock")
    if refs:
        reference = refs[0]
    else:
        gps = [s for s in sources if s.kind == "gps"]
        reference = gps[0].device if gps else "reference"
    if reference in devices and (devices[reference].offset_s or devices[reference].drift_ppm):
        raise InputError(f"the reference clock '{reference}' has a non-zero offset_s/drift_ppm",
                         where=f"{m} [devices.{reference}]",
                         fix="the reference defines true time: remove its offset or choose another reference")
    return devices, reference


def _sync_events(data, m, tz, known, reference, folder) -> list[SyncEvent]:
    raw = data.get("sync", [])
    if not isinstance(raw, list) or not all(isinstance(x, dict) for x in raw):
        raise InputError("sync must be an array of tables", where=f"{m} sync", fix="write each event as [[sync]]")
    out = []
    for i, s in enumerate(raw, start=1):
        w = f"[[sync]] #{i}"
        _no_unknown(s, _SYNC_KEYS, m, w)
        note = _string(s, "note", m, w) or ""
        if "device_a" in s or "device_b" in s:
            da = _string(s, "device_a", m, w, required=True)
            db = _string(s, "device_b", m, w, required=True)
            ta = _time(s.get("time_a"), tz, f"{m} {w} time_a", required=True)
            tb = _time(s.get("time_b"), tz, f"{m} {w} time_b", required=True)
            frame = None
        else:
            da = _string(s, "device", m, w, required=True)
            db = reference
            frame = _string(s, "frame", m, w)
            if frame is not None:
                safe_path(folder, frame, f"{m} {w} frame")
                if "device_time" in s:
                    raise InputError("give either frame or device_time, not both", where=f"{m} {w}",
                                     fix="keep frame (its timestamp is the device reading)")
                ta = None
            else:
                ta = _time(s.get("device_time"), tz, f"{m} {w} device_time", required=True)
            tb = _time(s.get("true_time"), tz, f"{m} {w} true_time", required=True)
        for key, dev in (("device_a" if "device_a" in s else "device", da), ("device_b", db)):
            if dev not in known and frame is not None and key == "device":
                raise InputError(f"this sync event reads the clock of camera '{dev}' from a frame, but no frames "
                                 "source uses that device", where=f"{m} {w} {key}",
                                 fix="delete this [[sync]] table if no camera was carried, or add the camera's "
                                     "[[source]] (kind = \"frames\") with device = " + f'"{dev}"')
            if dev not in known:
                raise InputError(f"device '{dev}' is not used by any source nor declared", where=f"{m} {w} {key}",
                                 fix=_suggest(dev, sorted(known)) or "declare it under [devices] or correct the name")
        if da == db:
            raise InputError(f"both sides of the event are device '{da}'", where=f"{m} {w}",
                             fix="a sync event relates two different clocks")
        out.append(SyncEvent(index=i, device_a=da, time_a=ta, device_b=db, time_b=tb, frame=frame, note=note))
    return out


