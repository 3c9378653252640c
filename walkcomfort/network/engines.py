"""Engines that run a :class:`~walkcomfort.network.batch.NetworkJob`: in-process or on Dask.

Both engines do the same thing with each partition: call the job's partition
function, check that it returned exactly one row per segment x time
(:func:`~walkcomfort.network.batch.check_partition_result`), retry it when it
raised, and write its rows to one Parquet file, atomically. A partition that
still fails after its retries is reported by id with its error; the job's
report then says ``ok = False`` and the ``network`` command exits non-zero. No
partition is ever silently missing: the report counts rows expected and written.

Layout of the results (hive-style partitioned Parquet, readable by pyarrow,
pandas and dask.dataframe)::

    OUT/segment_hours/scheme=<scheme>/tile_id=<tile>/part-c<chunk>.parquet
    OUT/job.json      the report: job digest, engine, every partition's status

``scheme`` and ``tile_id`` live in the folder names only (storing them in the files
too makes the dataset readers refuse the schema); :func:`read_segment_hours`
puts them back as columns.

The Dask engine starts a ``dask.distributed.LocalCluster`` bound to the loopback
interface, or connects to an existing scheduler by address. Everything a partition
needs travels with the task graph (:mod:`walkcomfort.network.shipping`): the model
bundle's text once per worker, a tile's points and scene once per tile, each task only
its own small description; workers need nothing but ``walkcomfort`` installed.
Partitions go to the cluster in bounded waves (``max_in_flight``), so neither this
process nor the scheduler holds more than a few tasks' worth of data. The worker
that computed a partition writes it to the output folder (storage the workers share)
and returns only its row count and file digest; ``write_on="client"`` brings the rows
back to be written here instead (no shared storage). Either way the bytes are the same.
"""

from __future__ import annotations

import os
import time as _time
import traceback
from dataclasses import asdict, dataclass, field
from pathlib import Path

import pandas as pd

from walkcomfort import _io
from walkcomfort import columns as C
from walkcomfort._progress import track
from walkcomfort.errors import InputError
from walkcomfort.network.batch import NetworkJob, Partition, check_partition_result
from walkcomfort.network.jobdir import REPORT_FILE, RESULTS_DIR, claim_out_dir, manifest_files, partition_relpath
from walkcomfort.network.shipping import (
    dress_partition,
    job_bundle,
    strip_partition,
    tile_keys,
    unpack_bundle,
    with_model,
)

ENGINES = ("in-process", "dask")


@dataclass
class PartitionOutcome:
    """What happened to one partition."""

    partition_id: str
    status: str                 # "written" | "kept" (resumed, already written) | "failed"
    expected_rows: int
    written_rows: int = 0
    attempts: int = 0
    path: str | None = None
    error: str | None = None
    digest: str | None = None   # of the written file: reconciles with what is on disk


@dataclass
class JobReport:
    """Outcome of a run: counts reconcile (expected = written) unless a partition failed."""

    job_digest: str
    engine: str
    outcomes: list[PartitionOutcome] = field(default_factory=list)
    seconds: float = 0.0
    parameters: dict = field(default_factory=dict)
    #: wall-clock split [s]: ``start`` (cluster up / client connected), ``compute`` (partition
    #: functions, summed over partitions in-process), ``write`` (Parquet, summed), and ``cpu``:
    #: CPU seconds of the threads that ran the partitions (compute + write), summed over workers.
    #: Kept in memory for benchmarks, never written (outputs stay byte-stable).
    timings: dict = field(default_factory=lambda: {"start": 0.0, "compute": 0.0, "write": 0.0, "cpu": 0.0})
    #: per segment x scheme summary computed by the engine when asked (``summarise=True``); not in job.json
    summary: pd.DataFrame | None = field(default=None, repr=False)

    @property
    def expected_rows(self) -> int:
        return sum(o.expected_rows for o in self.outcomes)

    @property
    def written_rows(self) -> int:
        return sum(o.written_rows for o in self.outcomes if o.status != "failed")

    @property
    def failed(self) -> list[PartitionOutcome]:
        return [o for o in self.outcomes if o.status == "failed"]

    @property
    def ok(self) -> bool:
        return not self.failed and self.expected_rows == self.written_rows

    def to_dict(self) -> dict:
        # no wall-clock time in the file: re-runs give the same bytes (seconds are printed, not stored)
        return {"job_digest": self.job_digest, "engine": self.engine, "ok": self.ok,
                "rows_expected": self.expected_rows, "rows_written": self.written_rows,
                "partitions": len(self.outcomes), "failed": [o.partition_id for o in self.failed],
                "parameters": self.parameters,
                "outcomes": [asdict(o) for o in sorted(self.outcomes, key=lambda o: o.partition_id)]}


def partition_path(out_dir: str | os.PathLike, part: Partition) -> Path:
    """Where a partition's rows are written (see module docstring)."""
    return Path(out_dir) / partition_relpath(part.scheme, part.tile_id, part.chunk)


def run_partition(fn, part: Partition) -> pd.DataFrame:
    """Run ``fn`` on ``part`` and check its rows (this is what a worker executes)."""
    return check_partition_result(part, fn(part))


def run_shipped(fn, part: Partition, points, scene, bundle: dict | None, out_dir: str | None = None,
                digest: str | None = None):
    """What a worker runs: the partition dressed with its tile's data and the shipped model, checked.

    With ``out_dir`` the rows are written there (storage the workers share) and only
    ``{"rows", "digest", "write_s", "cpu_s"}`` comes back; without, ``(rows, cpu_s)``.
    """
    c0 = _time.thread_time()
    full = dress_partition(part, points, scene, unpack_bundle(bundle) if bundle else None)
    rows = run_partition(fn, full)
    if out_dir is None:
        return rows, _time.thread_time() - c0
    tw = _time.perf_counter()
    path = _write(out_dir, digest, full, rows)
    write_s = _time.perf_counter() - tw
    return {"rows": len(rows), "digest": _io.file_digest(path), "write_s": write_s, "cpu_s": _time.thread_time() - c0}


def _write(out_dir, digest: str, part: Partition, rows: pd.DataFrame) -> Path:
    body = rows.drop(columns=["scheme", C.TILE_ID], errors="ignore")
    meta = {"job_digest": digest, C.PARTITION_ID: part.partition_id, "scheme": part.scheme,
            C.TILE_ID: part.tile_id, "chunk": part.chunk, "rows_expected": part.expected_rows}
    return _io.write_parquet(partition_path(out_dir, part), body, meta)


def _already_written(out_dir, job: NetworkJob, part: Partition) -> int | None:
    """Rows of a partition file left by an earlier run of the *same* job, else None."""
    import pyarrow.parquet as pq

    path = partition_path(out_dir, part)
    if not path.exists():
        return None
    try:
        meta = _io.read_parquet_metadata(path)
        n = pq.ParquetFile(path).metadata.num_rows
    except Exception:  # a foreign or damaged file is recomputed, never trusted
        return None
    if meta.get("job_digest") == job.digest and n == part.expected_rows:
        return n
    return None


def _error_text(exc: BaseException) -> str:
    last = traceback.extract_tb(exc.__traceback__)[-1:] if exc.__traceback__ else []
    at = f" at {last[0].filename.rsplit(os.sep, 1)[-1]}:{last[0].lineno}" if last else ""
    return " ".join(f"{type(exc).__name__}: {exc}{at}".split())


class InProcessEngine:
    """Run every partition in this process, one after the other (no services needed).

    Parameters
    ----------
    retries : int
        Extra attempts for a partition that raised (0 = no retry).
    """

    name = "in-process"

    def __init__(self, retries: int = 2):
        self.retries = int(retries)

    def run(self, job: NetworkJob, out_dir, resume: bool = False, progress: bool | None = None,
            overwrite: bool = False, summarise: bool = False) -> JobReport:
        report = JobReport(job.digest, self.name, parameters=_engine_params(self))
        t0 = _time.perf_counter()
        todo = _resume(job, out_dir, report, resume, overwrite)
        bundle = job_bundle(job)
        model = unpack_bundle(bundle) if bundle else None  # the same path the workers take
        for part in track(todo, "network partitions", total=len(todo), enabled=progress):
            part = with_model(part, model)
            outcome = PartitionOutcome(part.partition_id, "failed", part.expected_rows)
            for attempt in range(1, self.retries + 2):
                outcome.attempts = attempt
                tc, cc = _time.perf_counter(), _time.thread_time()
                try:
                    rows = run_partition(job.partition_fn, part)
                except Exception as exc:  # reported by partition id, never swallowed
                    outcome.error = _error_text(exc)
                    continue
                finally:
                    report.timings["compute"] += _time.perf_counter() - tc
                    report.timings["cpu"] += _time.thread_time() - cc
                tw, cw = _time.perf_counter(), _time.thread_time()
                try:
                    path = _write(out_dir, job.digest, part, rows)
                except OSError as exc:  # a full disk fails this partition, reported like any other
                    outcome.error = _error_text(exc)
                    continue
                finally:
                    report.timings["write"] += _time.perf_counter() - tw
                    report.timings["cpu"] += _time.thread_time() - cw
                    report.timings["cpu_write"] = report.timings.get("cpu_write", 0.0) + _time.thread_time() - cw
                outcome.status, outcome.written_rows, outcome.error = "written", len(rows), None
                outcome.path, outcome.digest = path.relative_to(out_dir).as_posix(), _io.file_digest(path)
                break
            report.outcomes.append(outcome)
        report.seconds = _time.perf_counter() - t0
        _io.write_json(Path(out_dir) / REPORT_FILE, report.to_dict())
        return _summarise(report, out_dir, summarise)


class DaskEngine:
    """Run partitions on Dask: a LocalCluster on this machine or an existing scheduler.

    Parameters
    ----------
    scheduler : str, optional
        Address of a running scheduler (``tcp://host:8786``). Without it a
        ``LocalCluster`` is started on 127.0.0.1 for the run and closed after.
    workers : int
        Workers of the LocalCluster.
    threads_per_worker : int
        Threads per LocalCluster worker (1: the physics is numpy-heavy and holds the GIL often).
    processes : bool
        LocalCluster workers as processes (True) or threads in this process (False).
    retries : int
        Extra attempts Dask makes for a partition that raised.
    timeout_s : float
        How long to wait for the cluster to start or the scheduler to answer [s].
    write_on : {"workers", "client"}, optional
        Who writes a partition's Parquet file: the worker that computed it (the default;
        the output folder must be on storage the workers share) or this process (rows
        travel back: for workers that cannot reach the output folder).
    max_in_flight : int, optional
        Partitions on the cluster at a time (default: 4 per worker thread, at least 8).
    """

    name = "dask"

    def __init__(self, scheduler: str | None = None, workers: int = 2, threads_per_worker: int = 1,
                 processes: bool = True, retries: int = 2, timeout_s: float = 60.0, write_on: str | None = None,
                 max_in_flight: int | None = None):
        if write_on not in (None, "workers", "client"):
            raise InputError(f"write_on = {write_on!r}; allowed: workers, client",
                             fix="give --write-on workers (shared storage) or --write-on client")
        self.write_on = write_on or "workers"
        self.max_in_flight = int(max_in_flight) if max_in_flight else None
        self.scheduler = scheduler
        self.workers = int(workers)
        self.threads_per_worker = int(threads_per_worker)
        self.processes = bool(processes)
        self.retries = int(retries)
        self.timeout_s = float(timeout_s)
        if self.workers < 1 or self.threads_per_worker < 1:
            raise InputError(f"workers = {workers!r}, threads per worker = {threads_per_worker!r}: both must be "
                             "at least 1", fix="give --workers 2 for example")

    def _client(self):
        try:
            from distributed import Client, LocalCluster
        except ImportError:
            raise InputError("the Dask engine needs the 'distributed' package, which is not installed",
                             fix="pip install -e '.[dask]' (or use --engine in-process)") from None
        if self.scheduler:
            try:
                return Client(self.scheduler, timeout=self.timeout_s), None
            except (OSError, TimeoutError) as exc:
                raise InputError(f"no Dask scheduler answered at {self.scheduler!r} ({exc})",
                                 fix="start one (dask scheduler) or leave the address out to use a local "
                                     "cluster") from None
        kw = dict(n_workers=self.workers, threads_per_worker=self.threads_per_worker,
                  processes=self.processes, dashboard_address="127.0.0.1:0")
        # threads-in-process workers talk over tcp on loopback too, so nothing listens beyond 127.0.0.1
        kw.update(host="127.0.0.1", protocol="tcp")
        cluster = LocalCluster(**kw)
        try:
            return Client(cluster, timeout=self.timeout_s), cluster
        except BaseException:
            cluster.close()
            raise

    def run(self, job: NetworkJob, out_dir, resume: bool = False, progress: bool | None = None,
            overwrite: bool = False, summarise: bool = False) -> JobReport:
        report = JobReport(job.digest, self.name, parameters=_engine_params(self))
        t0 = _time.perf_counter()
        todo = _resume(job, out_dir, report, resume, overwrite)
        if not todo:
            report.seconds = _time.perf_counter() - t0
            _io.write_json(Path(out_dir) / REPORT_FILE, report.to_dict())
            return _summarise(report, out_dir, summarise)
        ts = _time.perf_counter()
        client, cluster = self._client()
        try:
            # import the heavy modules on every worker before the clock for partitions starts
            client.run(_warm_up, getattr(job.partition_fn, "__module__", None))
        except BaseException as exc:
            _close(client, cluster)
            if isinstance(exc, ImportError):
                raise InputError(f"the Dask workers cannot import what the batch needs ({exc})",
                                 fix="install walkcomfort with its dependencies where the workers run "
                                     "(pip install 'walkcomfort[dask]')") from None
            raise
        report.timings["start"] = _time.perf_counter() - ts
        try:
            _Waves(self, client, job, out_dir, report).run(todo, progress)
            report.seconds = _time.perf_counter() - t0
            _io.write_json(Path(out_dir) / REPORT_FILE, report.to_dict())
            # on the workers, one tile each, reading the files they wrote: only per-segment tables come back
            return _summarise(report, out_dir, summarise, client)
        finally:
            _close(client, cluster)


def _summarise(report: JobReport, out_dir, summarise: bool, client=None) -> JobReport:
    if summarise and report.ok:
        from walkcomfort.network.summaries import summary_from_results

        tc = _time.perf_counter()
        report.summary = summary_from_results(out_dir, client=client)
        report.timings["summary"] = _time.perf_counter() - tc
    return report


def _same(obj):
    """A task that hands its argument on (tile data kept on the cluster under one key)."""
    return obj


def _close(client, cluster) -> None:
    client.close()
    if cluster is not None:
        cluster.close()


class _Waves:
    """Partitions submitted in bounded waves; tile data and the model sent once, released when done.

    At most ``max_in_flight`` partitions are on the cluster at a time (a new one is
    submitted as one finishes), so the scheduler holds a bounded number of small tasks
    whatever the job's size; a tile's points and scene go to the cluster as one keyed
    task when its first partition is submitted and are released after its last one.
    """

    def __init__(self, engine: DaskEngine, client, job: NetworkJob, out_dir, report: JobReport):
        self.engine, self.client, self.job, self.report = engine, client, job, report
        self.out_dir = Path(out_dir)
        self.out_abs = str(self.out_dir.resolve())
        self.tag = job.digest.split(":")[-1][:12]
        bundle = job_bundle(job)
        # one key for the whole job: each worker fetches it once (and a new worker can get it again)
        self.bundle = (client.submit(_same, bundle, key=f"walkcomfort-model-{self.tag}", pure=False)
                       if bundle else None)
        self.tiles: dict[str, object] = {}
        self.left: dict[str, int] = {}
        self.by_key: dict[str, Partition] = {}
        self.peak_in_flight = 0

    def max_in_flight(self) -> int:
        if self.engine.max_in_flight:
            return self.engine.max_in_flight
        threads = sum((self.client.nthreads() or {}).values()) or 1
        return max(8, 4 * threads)

    def _tile(self, part: Partition):
        keys = tile_keys(part)
        if keys[0] not in self.tiles:
            # a task that returns the tile's data, not a scatter: the scheduler keeps its recipe (once per
            # tile, while the tile has partitions in flight), so a worker lost with the data can be replaced
            tag = f"walkcomfort-tile-{self.tag}-{part.scheme}/{part.tile_id}"
            self.tiles[keys[0]] = self.client.submit(_same, part.points, key=f"{tag}-points", pure=False)
            self.tiles[keys[1]] = self.client.submit(_same, part.scene, key=f"{tag}-scene", pure=False)
        for k in keys:
            self.left[k] = self.left.get(k, 0) + 1
        return [self.tiles[k] for k in keys]

    def _release(self, part: Partition) -> None:
        for k in tile_keys(part):
            self.left[k] -= 1
            if self.left[k] == 0:
                self.tiles.pop(k).release()

    def submit(self, part: Partition):
        points, scene = self._tile(part)
        write = self.engine.write_on == "workers"
        fut = self.client.submit(run_shipped, self.job.partition_fn, strip_partition(part), points, scene,
                                 self.bundle, self.out_abs if write else None, self.job.digest,
                                 key=f"walkcomfort-network-{self.tag}-{part.partition_id}",
                                 retries=self.engine.retries, pure=False)
        self.by_key[fut.key] = part
        return fut

    def run(self, todo: list[Partition], progress) -> None:
        from itertools import islice

        from distributed import as_completed

        queue = iter(todo)
        limit = self.max_in_flight()
        done = as_completed()
        for p in islice(queue, limit):
            self._submit_or_fail(p, done)
        self.peak_in_flight = len(self.by_key)
        for fut in track(done, "network partitions", total=len(todo), enabled=progress):
            part = self.by_key.pop(fut.key)
            self.report.outcomes.append(self.outcome(fut, part))
            fut.release()
            self._release(part)
            for nxt in islice(queue, 1):
                self._submit_or_fail(nxt, done)
        for nxt in queue:  # the cluster went away before these could be submitted: failed, never missing
            self._submit_or_fail(nxt, None)
        self.report.timings["peak_in_flight"] = self.peak_in_flight

    def _submit_or_fail(self, part: Partition, done) -> None:
        try:
            if done is None:
                raise OSError("the cluster stopped answering before this partition was submitted")
            done.add(self.submit(part))
        except (OSError, TimeoutError) as exc:  # a comm failure: this partition fails, the job goes on
            outcome = PartitionOutcome(part.partition_id, "failed", part.expected_rows)
            outcome.error = _error_text(exc)
            self.report.outcomes.append(outcome)

    def outcome(self, fut, part: Partition) -> PartitionOutcome:
        outcome = PartitionOutcome(part.partition_id, "failed", part.expected_rows)
        if fut.status == "error":
            exc = fut.exception()
            exc.__traceback__ = fut.traceback()
            outcome.error = _error_text(exc)
            outcome.attempts = self.engine.retries + 1
            return outcome
        if fut.status != "finished":  # cancelled: the scheduler or its workers went away
            outcome.error = f"the task was {fut.status} by the Dask scheduler (workers lost?)"
            return outcome
        res = fut.result()
        if isinstance(res, dict):
            self.report.timings["write"] += res["write_s"]  # summed over workers (not wall time here)
            self.report.timings["cpu"] += res["cpu_s"]
            n_rows, outcome.digest = res["rows"], res["digest"]
        else:
            rows, cpu_s = res
            self.report.timings["cpu"] += cpu_s
            tw = _time.perf_counter()
            path = _write(self.out_dir, self.job.digest, part, rows)
            self.report.timings["write"] += _time.perf_counter() - tw
            n_rows, outcome.digest = len(rows), _io.file_digest(path)
        outcome.status, outcome.written_rows = "written", int(n_rows)
        outcome.path = partition_path(self.out_dir, part).relative_to(self.out_dir).as_posix()
        outcome.attempts = 1  # Dask does not tell how many tries a success took; at least one
        return outcome


def _warm_up(module: str | None) -> None:
    """Runs on each Dask worker once: import the partition function's module (and the physics)."""
    import importlib

    if module:
        importlib.import_module(module)
    if module == "walkcomfort.network.batch":
        importlib.import_module("walkcomfort.network._physics")
        for name in ("sun", "shade", "skyview", "tmrt", "utci", "scene"):
            importlib.import_module(f"walkcomfort.environment.{name}")


def _engine_params(engine) -> dict:
    if isinstance(engine, DaskEngine):
        return {"engine": "dask", "scheduler": engine.scheduler, "workers": engine.workers,
                "threads_per_worker": engine.threads_per_worker, "processes": engine.processes,
                "retries": engine.retries, "write_on": engine.write_on}
    return {"engine": "in-process", "retries": engine.retries}


def _resume(job: NetworkJob, out_dir, report: JobReport, resume: bool, overwrite: bool = False) -> list[Partition]:
    claim_out_dir(job, out_dir, resume=resume, overwrite=overwrite)
    todo = []
    for part in job.partitions:
        n = _already_written(out_dir, job, part) if resume else None
        if n is None:
            todo.append(part)
        else:
            report.outcomes.append(PartitionOutcome(part.partition_id, "kept", part.expected_rows, n, 0,
                                                    partition_path(out_dir, part).relative_to(out_dir).as_posix()))
    return todo


def make_engine(engine: str = "in-process", **options):
    """``"in-process"`` -> :class:`InProcessEngine`, ``"dask"`` -> :class:`DaskEngine` (options passed on)."""
    if engine == "in-process":
        return InProcessEngine(retries=options.get("retries", 2))
    if engine == "dask":
        return DaskEngine(**options)
    raise InputError(f"engine {engine!r} is not known; allowed: {', '.join(ENGINES)}",
                     fix="give --engine in-process or --engine dask")


def run_job(job: NetworkJob, out_dir, engine: str = "in-process", resume: bool = False,
            progress: bool | None = None, overwrite: bool = False, summarise: bool = False,
            **options) -> JobReport:
    """Run ``job`` on the named engine and write its results and report under ``out_dir``.

    The folder must be empty or hold this job's results (``resume`` keeps them);
    ``overwrite`` first removes another job's (see :mod:`walkcomfort.network.jobdir`).
    ``summarise`` has the engine compute the per-segment summary (``report.summary``).
    """
    return make_engine(engine, **options).run(job, out_dir, resume=resume, progress=progress, overwrite=overwrite,
                                              summarise=summarise)


def read_segment_hours(out_dir, scheme: str | None = None) -> pd.DataFrame:
    """The rows of the folder's job (index ``time``), with ``scheme`` and ``tile_id`` restored.

    Only the partitions listed in the folder's job manifest are read (a stray file
    never enters). Rows come in a fixed order (scheme, tile, chunk, then each file's
    order), so two runs of the same job compare equal whatever engine wrote them.
    """
    import pyarrow.parquet as pq

    files = manifest_files(out_dir, scheme)
    if not files:
        root = Path(out_dir) / RESULTS_DIR
        raise InputError(f"no batch results under '{root}'", where=root,
                         fix="run the network batch first (walkcomfort network ...)")
    frames = []
    for s, tile, f in files:
        df = pq.read_table(f).to_pandas()
        df.insert(1, "scheme", s)
        df.insert(2, C.TILE_ID, tile)
        frames.append(df)
    return pd.concat(frames)
