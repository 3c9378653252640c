"""A new session folder from the field-protocol templates, for the instruments actually carried.

``walkcomfort new-session DIR`` writes ``DIR/session.toml`` from
``field_protocol/templates/session.toml`` with the ``[[source]]`` tables of instruments that
were not carried left out (and the sync events of their clocks), every optional source
marked as such, and the folders and empty files the manifest names: a header-only logger
file with the template's column names, the vote sheet, ``gps/`` and ``camera/`` folders with
a note of what goes there. Copy the devices' exports over them and run ``walkcomfort check``.
"""

from __future__ import annotations

import re
import shutil
from pathlib import Path

from walkcomfort import _io
from walkcomfort.errors import InputError
from walkcomfort.session.tomlcheck import zone

#: instrument -> source kind; the GPS is always carried (the timeline is laid along its track)
INSTRUMENTS = {"weather": "weather", "sound": "noise", "light": "light", "camera": "frames", "votes": "votes"}
#: the device clock each instrument's sync event reads in the template
_SYNC_DEVICE = {"weather": "logger1", "camera": "cam1"}
_OPTIONAL = "# optional: delete this [[source]] table (and its file) if the {what} was not carried\n"
_EMPTY_FILES = {
    "gps/README.txt": "Put the GPS logger's export here as track.gpx (GPX 1.0 or 1.1, with times).\n",
    "camera/README.txt": "Put the chest camera's frames here (JPEG/PNG with their EXIF time).\n",
}


def template_dir() -> Path:
    """The repository's ``field_protocol/templates`` (next to the package)."""
    return Path(__file__).resolve().parents[2] / "field_protocol" / "templates"


def new_session(folder, carried: dict[str, bool], session_id: str | None = None, participant: str | None = None,
                timezone: str | None = None, templates: Path | None = None) -> list[Path]:
    """Write a session folder for the ``carried`` instruments; returns the files written."""
    folder = Path(folder)
    if folder.exists() and any(folder.iterdir()):
        raise InputError(f"folder '{folder}' exists and is not empty", where=folder,
                         fix="give a new folder name (new-session never writes over files)")
    tdir = Path(templates) if templates else template_dir()
    if not (tdir / "session.toml").is_file():
        raise InputError(f"no session.toml template in '{tdir}'", where="--templates",
                         fix="give the field_protocol/templates folder of the walkcomfort repository")
    if timezone:
        zone(timezone, "--timezone")
    sid = session_id or re.sub(r"[^A-Za-z0-9._-]+", "-", folder.name).strip("-") or "session"
    text = manifest_text((tdir / "session.toml").read_text(encoding="utf-8"), carried, sid, participant, timezone)
    written = [_io.atomic_write_text(folder / "session.toml", text)]
    written += _data_files(folder, text, carried, tdir)
    return written


def manifest_text(template: str, carried: dict[str, bool], sid: str, participant: str | None,
                  timezone: str | None) -> str:
    """The template's text for these instruments (tables left out, optional ones marked, values set)."""
    head, blocks = _blocks(template)
    kinds = {v: k for k, v in INSTRUMENTS.items()}
    out = [head]
    for block in blocks:
        kind = _value(block, "kind")
        device = _value(block, "device")
        if block.startswith("[[source]]") and kind in kinds:
            if not carried.get(kinds[kind], True):
                continue
            block = _OPTIONAL.format(what=kinds[kind].replace("sound", "sound level meter")) + block
        if block.startswith("[[sync]]") and any(device == d and not carried.get(i, True)
                                                for i, d in _SYNC_DEVICE.items()):
            continue
        out.append(block)
    text = "".join(out)
    text = re.sub(r'(?m)^id = "[^"]*"', f'id = "{sid}"', text, count=1)
    if participant:
        text = re.sub(r'(?m)^participant = "[^"]*"', f'participant = "{participant}"', text, count=1)
    if timezone:
        text = re.sub(r'(?m)^timezone = "[^"]*"', f'timezone = "{timezone}"', text, count=1)
    return text


def _blocks(text: str) -> tuple[str, list[str]]:
    """The text before the first array table, and each ``[[source]]`` / ``[[sync]]`` table up to the next."""
    parts = re.split(r"(?m)^(?=\[\[(?:source|sync)\]\])", text)
    return parts[0], parts[1:]


def _value(block: str, key: str) -> str | None:
    m = re.search(rf'(?m)^{key} = "([^"]*)"', block)
    return m.group(1) if m else None


def _data_files(folder: Path, text: str, carried: dict[str, bool], tdir: Path) -> list[Path]:
    import tomllib

    m = tomllib.loads(text)
    written = []
    for name, body in _EMPTY_FILES.items():
        if name.startswith("camera/") and not carried.get("camera", True):
            continue
        written.append(_io.atomic_write_text(folder / name, body))
    for src in m.get("source", []):
        kind, path = src["kind"], src["path"]
        if kind in ("gps", "frames"):
            continue
        if kind == "votes":
            written.append(_io.atomic_write_text(folder / path, (tdir / "votes.csv").read_text(encoding="utf-8")))
            continue
        cols = src.get("columns", {})
        fields = {"weather": ("time", "t_air", "rh", "wind", "t_globe"), "noise": ("time", "laeq"),
                  "light": ("time", "illum")}[kind]
        header = ",".join(cols.get(f, f) for f in fields if f in cols or f == "time")
        written.append(_io.atomic_write_text(folder / path, header + "\n"))
    if (tdir / "checklist.md").is_file():
        shutil.copy(tdir / "checklist.md", folder / "checklist.md")
        written.append(folder / "checklist.md")
    return written
