"""Camera frames: a table of frame times and paths (no pixels are read).

Time comes from EXIF ``DateTimeOriginal`` (tag 0x9003) with ``SubSecTimeOriginal``
(0x9291) and ``OffsetTimeOriginal`` (0x9011) when present (EXIF 2.32, CIPA
DC-008); without an offset tag the time is read in the source's ``time_zone``
(default: the session zone). Or, with ``time_from = "filename"``, from the file
name by a strftime ``filename_pattern`` matched at the start of the name.
A frame whose time cannot be read is quarantined, never given an invented time.
"""

from __future__ import annotations

import contextlib
import re
import warnings
from datetime import datetime
from pathlib import Path

import numpy as np
import pandas as pd

from walkcomfort.columns import FRAME_PATH
from walkcomfort.session.readers._common import Quarantine, assemble_metadata, finish, localize

IMAGE_SUFFIXES = (".jpg", ".jpeg", ".png")
_EXIF_IFD = 0x8769
_DATETIME_ORIGINAL = 0x9003
_SUBSEC_ORIGINAL = 0x9291
_OFFSET_ORIGINAL = 0x9011
_CODES = {"%Y": r"\d{4}", "%m": r"\d{2}", "%d": r"\d{2}", "%H": r"\d{2}", "%M": r"\d{2}", "%S": r"\d{2}",
          "%f": r"\d{1,6}", "%y": r"\d{2}", "%j": r"\d{3}", "%z": r"[+-]\d{4}", "%%": "%"}


def pattern_regex(pattern: str, where: str | None = None) -> re.Pattern:
    """A regex matching the text a strftime ``pattern`` produces (the codes listed in ``_CODES``)."""
    out = []
    i = 0
    while i < len(pattern):
        code = pattern[i:i + 2]
        if code in _CODES:
            out.append(_CODES[code])
            i += 2
        elif pattern[i] == "%":
            from walkcomfort.errors import InputError

            raise InputError(f"filename_pattern code '{code}' is not supported; use %Y %m %d %H %M %S %f %y %j %z",
                             where=where, fix="rewrite the pattern with the supported codes")
        else:
            out.append(re.escape(pattern[i]))
            i += 1
    return re.compile("".join(out))


#: Largest frame accepted [pixels]: 100 MP is past any chest or phone camera; a header claiming
#: more is damaged or hostile (a "decompression bomb" would need gigabytes to decode).
MAX_FRAME_PIXELS = 100_000_000


class ImageTooLarge(ValueError):
    """An image header claims more pixels than :data:`MAX_FRAME_PIXELS`."""


@contextlib.contextmanager
def open_image(path):
    """Open an image for its header only, refusing sizes past :data:`MAX_FRAME_PIXELS` before any decoding."""
    from PIL import Image

    with warnings.catch_warnings():
        # Pillow's own bomb warning/error: our limit below is the one that applies
        warnings.simplefilter("ignore", Image.DecompressionBombWarning)
        try:
            im = Image.open(path)
        except Image.DecompressionBombError as exc:
            raise ImageTooLarge(str(exc)) from None
    with im:
        if im.width * im.height > MAX_FRAME_PIXELS:
            raise ImageTooLarge(f"the header claims {im.width} x {im.height} pixels, more than "
                                f"{MAX_FRAME_PIXELS:,}")
        yield im


def exif_time(path: Path) -> tuple[str | None, str | None]:
    """``("YYYY:MM:DD HH:MM:SS[.ffffff]", offset or None)`` from a file's EXIF, or ``(None, None)``."""
    with open_image(path) as im:
        exif = im.getexif()
        ifd = exif.get_ifd(_EXIF_IFD)
        dto = ifd.get(_DATETIME_ORIGINAL) or exif.get(_DATETIME_ORIGINAL)
        if not dto:
            return None, None
        dto = str(dto).strip().strip("\x00")
        sub = str(ifd.get(_SUBSEC_ORIGINAL) or "").strip().strip("\x00")
        off = str(ifd.get(_OFFSET_ORIGINAL) or "").strip().strip("\x00") or None
        if sub.isdigit():
            dto = f"{dto}.{sub}"
        return dto, off


def read_frames(path, source_spec, session_spec):
    """List the frames of a camera folder with their times.

    Returns
    -------
    data : DataFrame
        UTC index ``time`` (camera clock, not yet corrected); column ``frame_path``
        (posix path relative to the session folder).
    metadata : dict
        Counts, ``quarantine`` (``no_exif_time``, ``unreadable_image``,
        ``bad_time``, ``name_does_not_match``, ``image_too_large``, ``duplicate_time``), and
        ``ignored_files`` (files that are not JPEG/PNG).
    """
    from PIL import UnidentifiedImageError

    folder = Path(path)
    q = Quarantine(source_spec.name, source_spec.path)
    files = sorted(p for p in folder.rglob("*") if p.is_file())
    images = [p for p in files if p.suffix.lower() in IMAGE_SUFFIXES]
    ignored = [p.relative_to(folder).as_posix() for p in files if p.suffix.lower() not in IMAGE_SUFFIXES]
    rel = [(Path(source_spec.path) / p.relative_to(folder)).as_posix() for p in images]
    n = len(images)
    reason = np.full(n, "", dtype=object)
    naive = np.full(n, np.datetime64("NaT", "ns"), dtype="datetime64[ns]")
    aware = np.full(n, np.datetime64("NaT", "ns"), dtype="datetime64[ns]")
    if source_spec.time_from == "filename":
        rx = pattern_regex(source_spec.filename_pattern, where=f"{source_spec.where} filename_pattern")
        for i, p in enumerate(images):
            m = rx.match(p.stem)
            if not m:
                reason[i] = "name_does_not_match"
                continue
            try:
                dt = datetime.strptime(m.group(0), source_spec.filename_pattern)
            except ValueError:
                reason[i] = "bad_time"
                continue
            if dt.tzinfo is not None:
                aware[i] = np.datetime64(pd.Timestamp(dt).tz_convert("UTC").tz_localize(None), "ns")
            else:
                naive[i] = np.datetime64(dt, "ns")
    else:
        for i, p in enumerate(images):
            try:
                dto, off = exif_time(p)
            except ImageTooLarge:
                reason[i] = "image_too_large"
                continue
            except (UnidentifiedImageError, OSError, SyntaxError, ValueError):
                reason[i] = "unreadable_image"
                continue
            if dto is None:
                reason[i] = "no_exif_time"
                continue
            try:
                ts = pd.Timestamp(datetime.strptime(dto, "%Y:%m:%d %H:%M:%S.%f" if "." in dto
                                                    else "%Y:%m:%d %H:%M:%S"))
            except (ValueError, TypeError):
                reason[i] = "bad_time"
                continue
            if off:
                try:
                    ts = pd.Timestamp(f"{ts.isoformat()}{off}").tz_convert("UTC").tz_localize(None)
                except (ValueError, TypeError):
                    reason[i] = "bad_time"
                    continue
                aware[i] = np.datetime64(ts, "ns")
            else:
                naive[i] = np.datetime64(ts, "ns")
    loc = pd.DatetimeIndex(naive)
    utc, why = localize(loc, session_spec.zone_for(source_spec.time_zone))
    times = pd.DatetimeIndex(np.where(pd.isna(naive), aware, utc.tz_localize(None).to_numpy("datetime64[ns]")))
    times = times.tz_localize("UTC")
    reason[(why != "") & (reason == "")] = why[(why != "") & (reason == "")]
    values = {FRAME_PATH: np.asarray(rel, dtype=object)}
    df, meta = finish(times, values, reason, None, np.arange(1, n + 1, dtype=np.int64), rel, q)
    return df, assemble_metadata("frames", source_spec, meta, q, ignored_files=ignored, files=rel,
                                 time_from=source_spec.time_from)
