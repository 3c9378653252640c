"""One output folder, one job: the fence that keeps results of different runs apart.

A batch's output folder belongs to exactly one job, named by the job digest
(network points, times, scene digests, weather, options, model digest, partition
function; see :func:`walkcomfort.network.batch.plan_job`). Before any partition
runs, :func:`claim_out_dir` looks at what the folder already holds:

- nothing, or only files of the same job: the run goes on (``resume`` keeps the
  partitions already written, otherwise they are written again);
- anything of another job — a ``job.json`` with another digest, partition files the
  job would not write (another tile size or time step leaves other file names), a
  partition file or summary stamped with another digest — and the run stops with
  one line naming the three ways out: ``--resume`` (same job), a new folder, or
  ``--overwrite``, which removes the batch's own outputs (never other files) first.

The claim then writes ``job.json`` saying the job is running, so a run that is cut
off still marks the folder as this job's. Readers of the results
(:func:`manifest_files`) take the partition list from ``job.json`` — never a folder
listing — so a stray file can never enter a summary.
"""

from __future__ import annotations

import json
import os
import shutil
import tempfile
from pathlib import Path

from walkcomfort import _io
from walkcomfort import columns as C
from walkcomfort.errors import InputError

RESULTS_DIR = "segment_hours"
REPORT_FILE = "job.json"

#: Files the batch writes at the top of its output folder (``--overwrite`` removes these only).
OWN_FILES = (REPORT_FILE, "segment_summary.parquet", "segment_summary.geojson", "network_quarantine.csv",
             "network_map_layer.geojson")
OWN_PATTERNS = ("network_layer_*.geojson",)


def partition_relpath(scheme: str, tile_id: str, chunk: int) -> str:
    """Where a partition's rows are written, relative to the output folder."""
    return f"{RESULTS_DIR}/scheme={scheme}/{C.TILE_ID}={tile_id}/part-c{chunk:04d}.parquet"


def _planned(job) -> set[str]:
    return {partition_relpath(p.scheme, p.tile_id, p.chunk) for p in job.partitions}


def _read_report(out: Path) -> dict | None:
    path = out / REPORT_FILE
    if not path.exists():
        return None
    try:
        obj = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return {"job_digest": "unreadable"}
    return obj if isinstance(obj, dict) else {"job_digest": "unreadable"}


def _stamp(path: Path) -> str | None:
    try:
        return _io.read_parquet_metadata(path).get("job_digest")
    except Exception:  # a damaged or foreign file cannot be shown to be this job's
        return "unreadable"


def other_job(job, out_dir) -> str | None:
    """What in ``out_dir`` belongs to another job (a short description), or None."""
    out = Path(out_dir)
    if not out.is_dir():
        return None
    report = _read_report(out)
    if report is not None and report.get("job_digest") != job.digest:
        return f"the results of another job ({str(report.get('job_digest'))[:19]}…)"
    root = out / RESULTS_DIR
    files = {p.relative_to(out).as_posix() for p in root.rglob("*.parquet")} if root.is_dir() else set()
    stale = files - _planned(job)
    if stale:
        return f"{len(stale)} partition files this job does not write (first {sorted(stale)[0]})"
    summary = out / OWN_FILES[1]
    if summary.exists() and _stamp(summary) != job.digest:
        return f"a segment summary of another job ({summary.name})"
    if report is None:
        foreign = sorted(f for f in files if _stamp(out / f) != job.digest)
        if foreign:
            return f"{len(foreign)} partition files of another job (first {foreign[0]})"
    return None


def clear_outputs(out_dir) -> None:
    """Remove the batch's own outputs from ``out_dir`` (results folder, report, summaries, layers).

    The results folder is first renamed aside, so a reader never sees it half removed.
    Files the batch does not write are left alone.
    """
    out = Path(out_dir)
    if not out.is_dir():
        return
    root = out / RESULTS_DIR
    if root.exists():
        aside = Path(tempfile.mkdtemp(prefix=".segment_hours.", suffix=".old", dir=out))
        os.replace(root, aside / RESULTS_DIR)
        shutil.rmtree(aside)
    for name in OWN_FILES:
        (out / name).unlink(missing_ok=True)
    for pattern in OWN_PATTERNS:
        for p in out.glob(pattern):
            p.unlink()


def claim_out_dir(job, out_dir, *, resume: bool = False, overwrite: bool = False) -> Path:
    """Make ``out_dir`` this job's (see module docstring); returns it as a Path.

    Raises
    ------
    InputError
        The folder holds another job's results and ``overwrite`` is not set.
    """
    out = Path(out_dir)
    if overwrite:
        clear_outputs(out)
    else:
        other = other_job(job, out)
        if other:
            how = "--resume continues the same job only" if resume else "--resume is for the same job"
            raise InputError(f"the output folder holds {other}; this job ({job.digest[:19]}…) would mix with it",
                             where=out, fix=f"write to a new --out folder, or add --overwrite to replace those "
                                            f"results ({how})")
    out.mkdir(parents=True, exist_ok=True)
    _io.write_json(out / REPORT_FILE, {"job_digest": job.digest, "ok": False, "status": "running",
                                       "rows_expected": job.expected_rows, "partitions": len(job.partitions)})
    return out


def manifest_files(out_dir, scheme: str | None = None) -> list[tuple[str, str, Path]]:
    """``(scheme, tile_id, path)`` of every partition the folder's job manifest lists as written.

    Sorted by scheme, tile and chunk. Raises :class:`InputError` when the folder has no
    finished job manifest.
    """
    out = Path(out_dir)
    report = _read_report(out)
    if report is None or "outcomes" not in report:
        state = "no job manifest" if report is None else "a job manifest of a run that did not finish"
        raise InputError(f"'{out}' has {state} ({REPORT_FILE})", where=out / REPORT_FILE,
                         fix="run the network batch into this folder (walkcomfort network ... --out FOLDER)")
    found = []
    for o in report["outcomes"]:
        if o.get("status") not in ("written", "kept") or not o.get("path"):
            continue
        s, tile, _ = o["partition_id"].split("/")
        if scheme is None or s == scheme:
            found.append((s, tile, out / o["path"]))
    return sorted(found, key=lambda f: (f[0], f[1], f[2].name))
