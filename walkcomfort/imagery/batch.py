"""Cues for thousands of frames: worker processes, a progress bar, and a cache by file digest.

:func:`compute_frame_cues` takes the frames table of a session (what
``walkcomfort.session.readers.read_frames`` returns: a UTC ``time`` index and a
``frame_path`` column relative to the session folder) and returns one row of cues per
frame. Each frame is analysed at :data:`ANALYSIS_WIDTH` pixels wide (larger frames are
decoded at reduced size — JPEG can do that for free — and resized), so the thresholds
of :mod:`~walkcomfort.imagery.cues`, :mod:`~walkcomfort.imagery.quality` and
:mod:`~walkcomfort.imagery.people` mean the same thing for every camera.

Cache
-----
A result is stored as a small JSON file named by the SHA-256 of the frame's bytes,
under a folder named by a digest of the analysis parameters and :data:`ANALYSIS_VERSION`.
So a renamed or moved frame is not analysed again, a changed parameter or a new
version of the rules never reuses stale numbers, and a re-run over cached frames reads
JSON only. No pickle: a cache entry is readable text, and a damaged one is recomputed.

Bad frames
----------
A file that cannot be decoded is not given invented cues: it goes to the quarantine
table (``source, file, row, reason, raw``) returned in the metadata, and the counts
reconcile (frames read = rows returned + rows quarantined). A frame that decodes but
fails a quality check stays, with ``frame_ok`` False and its flags set.
"""

from __future__ import annotations

import hashlib
import json
import os
from collections.abc import Iterable, Sequence
from concurrent.futures import ProcessPoolExecutor, as_completed
from concurrent.futures.process import BrokenProcessPool
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort._io import file_digest, to_json_text, write_json
from walkcomfort._progress import track
from walkcomfort.errors import InputError
from walkcomfort.imagery.cues import CueParams, frame_cues
from walkcomfort.imagery.people import MIN_SOURCE_WIDTH, PeopleParams, count_people
from walkcomfort.imagery.quality import QualityParams, quality_flags
from walkcomfort.session.readers.frames import ImageTooLarge, open_image

#: Bump when a rule changes in a way that changes results: old cache entries stop matching.
ANALYSIS_VERSION = 5  # 5: greenery needs a green hue (yellow and ochre excluded)
#: Width [px] frames are analysed at.
ANALYSIS_WIDTH = 640
#: Below this many frames to compute, worker processes cost more than they save.
MIN_FRAMES_FOR_POOL = 48

#: Columns of the cue table, in order (index: ``time``).
CUE_COLUMNS = (C.FRAME_PATH, C.SKY_FRAC, C.GREEN_FRAC, C.BRIGHTNESS_FRAC, C.PEOPLE_N, C.FRAME_OK,
               C.QA_FRAME_BLUR, C.QA_FRAME_OVEREXPOSED, C.QA_FRAME_UNDEREXPOSED, C.QA_FRAME_OBSTRUCTED,
               C.FRAME_LAPVAR, "green_px", "total_px", "frame_digest")
QUARANTINE_COLUMNS = ("source", "file", "row", "reason", "raw")


@dataclass(frozen=True)
class AnalysisParams:
    """Everything that shapes a frame's cues; its digest keys the cache."""

    cues: CueParams = field(default_factory=CueParams)
    quality: QualityParams = field(default_factory=QualityParams)
    people: PeopleParams = field(default_factory=PeopleParams)
    detect_people: bool = True
    width: int = ANALYSIS_WIDTH

    def to_dict(self) -> dict:
        return {"version": ANALYSIS_VERSION, "width": self.width, "detect_people": self.detect_people,
                "cues": self.cues.to_dict(), "quality": self.quality.to_dict(),
                "people": self.people.to_dict() if self.detect_people else None}

    def key(self) -> str:
        return hashlib.sha256(to_json_text(self.to_dict()).encode()).hexdigest()[:16]


def load_frame(path: str | os.PathLike, max_width: int | None = None) -> np.ndarray:
    """Read an image file as an RGB ``uint8`` array, upright (EXIF orientation applied).

    Parameters
    ----------
    path : path-like
        JPEG or PNG (anything Pillow reads).
    max_width : int, optional
        If the image is wider, it is decoded at reduced size where the format allows
        and resized to this width [px] (aspect kept).

    Raises
    ------
    InputError
        The file is missing or is not a readable image.
    """
    from PIL import ImageOps, UnidentifiedImageError

    p = Path(path)
    try:
        with open_image(p) as im:
            if max_width and im.width > max_width and im.format == "JPEG":
                # JPEG decodes at 1/2, 1/4, 1/8 scale almost for free; keep at least max_width
                im.draft("RGB", (max_width, int(im.height * max_width / im.width)))
            im = ImageOps.exif_transpose(im)
            rgb = np.asarray(im.convert("RGB"))
    except FileNotFoundError:
        raise InputError("frame file not found", where=p, fix="check the frames folder named in session.toml") from None
    except ImageTooLarge as exc:
        raise InputError(f"frame is too large to decode ({exc})", where=p,
                         fix="remove the file or give a downscaled copy; it is listed in the quarantine") from None
    except (UnidentifiedImageError, OSError, SyntaxError, ValueError) as exc:
        raise InputError(f"frame is not a readable image ({' '.join(str(exc).split())})", where=p,
                         fix="remove or replace the damaged file; it is listed in the quarantine") from None
    if max_width and rgb.shape[1] > max_width:
        import cv2

        h = int(round(rgb.shape[0] * max_width / rgb.shape[1]))
        rgb = cv2.resize(rgb, (max_width, max(1, h)), interpolation=cv2.INTER_AREA)
    return np.ascontiguousarray(rgb)


def analyse_image(rgb: np.ndarray, params: AnalysisParams | None = None) -> dict:
    """All cues and quality flags of one decoded frame (see the module notes).

    ``people_n`` is None (NaN in the table) when people are not detected, when the frame
    failed a quality check (the HOG detector is not run on it), or when it is narrower
    than :data:`walkcomfort.imagery.people.MIN_SOURCE_WIDTH`.
    """
    p = params or AnalysisParams()
    out, masks = frame_cues(rgb, p.cues, return_masks=True)
    out.update(quality_flags(rgb, p.quality, sky=masks["sky"], sky_frac=out[C.SKY_FRAC], gray=masks["gray"]))
    # the detector is the slow part, and a bad frame's cues never reach the timeline: skip it there
    searchable = p.detect_people and out[C.FRAME_OK] and rgb.shape[1] >= MIN_SOURCE_WIDTH
    out[C.PEOPLE_N] = count_people(rgb, p.people) if searchable else None
    return out


def analyse_frame(path: str | os.PathLike, params: AnalysisParams | None = None) -> dict:
    """Load one frame file and return :func:`analyse_image` of it."""
    p = params or AnalysisParams()
    return analyse_image(load_frame(path, max_width=p.width), p)


# --- cache ---------------------------------------------------------------------------


class CueCache:
    """JSON-per-frame cache of analysis results, keyed by file digest and parameters."""

    def __init__(self, folder: str | os.PathLike, params: AnalysisParams):
        self.folder = Path(folder) / f"v{ANALYSIS_VERSION}-{params.key()}"
        self.params = params

    def _entry(self, digest: str) -> Path:
        hexd = digest.split(":", 1)[-1]
        return self.folder / hexd[:2] / f"{hexd}.json"

    def get(self, digest: str) -> dict | None:
        path = self._entry(digest)
        try:
            data = json.loads(path.read_text(encoding="utf-8"))
        except (FileNotFoundError, json.JSONDecodeError, UnicodeDecodeError):
            return None
        if data.get("frame_digest") != digest:
            return None
        return data.get("cues")

    def put(self, digest: str, cues: dict) -> None:
        path = self._entry(digest)
        if not (self.folder / "parameters.json").exists():
            write_json(self.folder / "parameters.json", self.params.to_dict())
        write_json(path, {"frame_digest": digest, "cues": cues})


# --- workers ---------------------------------------------------------------------------


def _worker_init():
    import cv2

    # one thread per process: the pool provides the parallelism, and cores are shared
    cv2.setNumThreads(1)
    os.environ.setdefault("WALKCOMFORT_NO_PROGRESS", "1")


def _analyse_chunk(paths: Sequence[str], params: AnalysisParams) -> list[tuple[str, dict | None, str | None]]:
    out = []
    for path in paths:
        try:
            out.append((path, analyse_frame(path, params), None))
        except InputError as exc:
            out.append((path, None, exc.what))
    return out


def make_pool(workers: int) -> ProcessPoolExecutor:
    """A pool of worker processes for :func:`compute_frame_cues` (reuse it across sessions:
    starting workers costs a second or two each)."""
    import multiprocessing as mp

    # spawn, not fork: the parent may hold threads (progress bar, OpenCV) that fork would copy mid-state
    return ProcessPoolExecutor(max_workers=workers, mp_context=mp.get_context("spawn"), initializer=_worker_init)


def _iter_results(paths: list[str], params: AnalysisParams, workers: int,
                  pool: ProcessPoolExecutor | None = None) -> Iterable[tuple[str, dict | None, str | None]]:
    if (workers <= 1 and pool is None) or len(paths) < MIN_FRAMES_FOR_POOL:
        for path in paths:
            yield from _analyse_chunk([path], params)
        return
    n_workers = getattr(pool, "_max_workers", workers)
    chunk = max(4, min(32, len(paths) // (n_workers * 8) or 4))
    chunks = [paths[i:i + chunk] for i in range(0, len(paths), chunk)]
    own = pool is None
    pool = make_pool(workers) if own else pool
    done: set[str] = set()
    try:
        futures = [pool.submit(_analyse_chunk, c, params) for c in chunks]
        for fut in as_completed(futures):
            for item in fut.result():
                done.add(item[0])
                yield item
    except BrokenProcessPool as exc:
        # workers could not start (e.g. a script read from stdin cannot be re-imported by
        # "spawn") or died: finish here rather than lose the run, and say so
        import warnings

        warnings.warn(f"frame-cue worker processes failed ({exc}); analysing the remaining frames in this "
                      f"process", RuntimeWarning, stacklevel=3)
        for path in paths:
            if path not in done:
                yield from _analyse_chunk([path], params)
    finally:
        if own:
            pool.shutdown()


def default_workers() -> int:
    """Worker processes to use: the usable cores (``os.sched_getaffinity``), at least 1."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - not Linux
        return max(1, os.cpu_count() or 1)


def _frames_input(frames, base_dir) -> tuple[pd.DatetimeIndex | None, list[str], list[Path]]:
    if isinstance(frames, pd.DataFrame):
        df = frames
        if C.FRAME_PATH not in df.columns and "path" in df.columns:
            df = df.rename(columns={"path": C.FRAME_PATH})
        if C.FRAME_PATH not in df.columns:
            raise InputError(f"frames table has columns {list(df.columns)}; a '{C.FRAME_PATH}' column is needed",
                             fix="pass the table returned by walkcomfort.session.readers.read_frames")
        if isinstance(df.index, pd.DatetimeIndex):
            times = df.index
        elif C.TIME in df.columns:
            times = pd.DatetimeIndex(df[C.TIME])
        else:
            raise InputError("frames table has no time index nor 'time' column",
                             fix="pass the table returned by walkcomfort.session.readers.read_frames")
        if times.tz is None:
            raise InputError("frame times are naive; tz-aware UTC times are needed",
                             fix="localise the times (the frames reader returns UTC)")
        rel = [str(p) for p in df[C.FRAME_PATH]]
    else:
        times = None
        rel = [os.fspath(p) for p in frames]
    base = Path(base_dir) if base_dir is not None else None
    absolute = [(base / r) if base is not None and not Path(r).is_absolute() else Path(r) for r in rel]
    return times, rel, absolute


def compute_frame_cues(frames, base_dir: str | os.PathLike | None = None, *,
                       params: AnalysisParams | None = None, detect_people: bool | None = None,
                       workers: int | None = None, cache_dir: str | os.PathLike | None = None,
                       progress: bool | None = None, pool: ProcessPoolExecutor | None = None
                       ) -> tuple[pd.DataFrame, dict]:
    """Cues and quality flags for many frames.

    Parameters
    ----------
    frames : pandas.DataFrame or sequence of path-like
        The frames table (UTC ``time`` index or column, ``frame_path`` column) or a list
        of image paths (then the result has no time index: a RangeIndex).
    base_dir : path-like, optional
        Folder the ``frame_path`` values are relative to (the session folder).
    params : AnalysisParams, optional
        Analysis parameters (defaults: the module defaults).
    detect_people : bool, optional
        Override ``params.detect_people`` (the HOG detector is the slowest part).
    workers : int, optional
        Worker processes; default :func:`default_workers`. 1 runs in this process.
    cache_dir : path-like, optional
        Cache folder (see the module notes); no cache when omitted.
    progress : bool, optional
        Show the progress bar (default: when stderr is a terminal).
    pool : concurrent.futures.ProcessPoolExecutor, optional
        Worker pool to use (from :func:`make_pool`), e.g. shared by many sessions;
        default: one started for this call when there is enough work.

    Returns
    -------
    cues : pandas.DataFrame
        One row per readable frame, columns :data:`CUE_COLUMNS`; index ``time`` (UTC),
        sorted, when the input was a frames table.
    metadata : dict
        ``quarantine`` (DataFrame of unreadable frames), ``counts`` (``read``, ``used``,
        ``quarantined``, ``frame_ok``, ``cache_hits``, ``computed``), ``parameters``.
    """
    p = params or AnalysisParams()
    if detect_people is not None and detect_people != p.detect_people:
        p = AnalysisParams(p.cues, p.quality, p.people, bool(detect_people), p.width)
    times, rel, paths = _frames_input(frames, base_dir)
    n = len(paths)
    workers = default_workers() if workers is None else max(1, int(workers))
    cache = CueCache(cache_dir, p) if cache_dir is not None else None

    results: dict[int, dict] = {}
    errors: dict[int, str] = {}
    digests: list[str | None] = [None] * n
    todo: list[int] = []
    hits = 0
    for i, path in enumerate(paths):
        try:
            digests[i] = file_digest(path)
        except FileNotFoundError:
            errors[i] = "frame file not found"
            continue
        except OSError as exc:
            errors[i] = f"frame file cannot be read ({exc.strerror or exc})"
            continue
        cached = cache.get(digests[i]) if cache is not None else None
        if cached is not None:
            results[i] = cached
            hits += 1
        else:
            todo.append(i)

    # identical files (same digest) are analysed once
    by_digest: dict[str, list[int]] = {}
    for i in todo:
        by_digest.setdefault(digests[i], []).append(i)
    first_path = {os.fspath(paths[idx[0]]): d for d, idx in by_digest.items()}
    unique = list(first_path)
    stream = _iter_results(unique, p, workers, pool)
    for path, res, err in track(stream, "frame cues", total=len(unique), enabled=progress):
        for i in by_digest[first_path[path]]:
            if err is not None:
                errors[i] = err
            else:
                results[i] = res
                if cache is not None:
                    cache.put(digests[i], res)

    rows, index = [], []
    for i in range(n):
        if i not in results:
            continue
        r = results[i]
        row = {c: r.get(c) for c in CUE_COLUMNS if c not in (C.FRAME_PATH, "frame_digest")}
        row[C.FRAME_PATH] = rel[i]
        row["frame_digest"] = digests[i]
        rows.append(row)
        index.append(i)
    cues = pd.DataFrame(rows, columns=list(CUE_COLUMNS))
    cues = _typed(cues)
    if times is not None:
        cues.index = pd.DatetimeIndex(times[index]).tz_convert("UTC")
        cues.index.name = C.TIME
        cues = cues.sort_index(kind="stable")
    quarantine = pd.DataFrame(
        [{"source": "frames", "file": rel[i], "row": i + 1, "reason": errors[i], "raw": rel[i]} for i in sorted(errors)],
        columns=list(QUARANTINE_COLUMNS))
    counts = {"read": n, "used": len(cues), "quarantined": len(quarantine),
              "frame_ok": int(cues[C.FRAME_OK].sum()) if len(cues) else 0,
              "cache_hits": hits, "computed": len(unique)}
    assert counts["used"] + counts["quarantined"] == counts["read"]
    return cues, {"quarantine": quarantine, "counts": counts, "parameters": p.to_dict()}


def _typed(df: pd.DataFrame) -> pd.DataFrame:
    out = df.copy()
    for c in (C.SKY_FRAC, C.GREEN_FRAC, C.BRIGHTNESS_FRAC, C.FRAME_LAPVAR):
        out[c] = pd.to_numeric(out[c], errors="coerce").astype("float64")
    out[C.PEOPLE_N] = pd.array(pd.to_numeric(out[C.PEOPLE_N], errors="coerce"), dtype="Int64")
    for c in ("green_px", "total_px"):
        out[c] = pd.array(pd.to_numeric(out[c], errors="coerce"), dtype="Int64")
    for c in (C.FRAME_OK, C.QA_FRAME_BLUR, C.QA_FRAME_OVEREXPOSED, C.QA_FRAME_UNDEREXPOSED, C.QA_FRAME_OBSTRUCTED):
        out[c] = out[c].astype(bool)
    out[C.FRAME_PATH] = out[C.FRAME_PATH].astype(object)
    out["frame_digest"] = out["frame_digest"].astype(object)
    return out
