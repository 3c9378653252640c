"""Engine machinery: partitions, retries, rows expected = written, Parquet layout, in-process = Dask.

The partition function here is a deterministic stand-in (a smooth function of
position, time and scheme), used only to exercise the engines; the shipped
computation is ``walkcomfort.network.batch.compute_partition``.
"""

from __future__ import annotations

import os
import threading
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from walkcomfort import _io
from walkcomfort import columns as C
from walkcomfort.errors import InputError
from walkcomfort.network import engines
from walkcomfort.network.batch import P_COLUMNS, aggregate_points, plan_job, time_range
from walkcomfort.network.segments import network_from_geojson
from walkcomfort.network.synthetic import grid_network, grid_scene

_lock = threading.Lock()
_calls: dict[str, int] = {}


def standin(part):
    x = part.points[C.X_M].to_numpy()[:, None]
    y = part.points[C.Y_M].to_numpy()[:, None]
    hour = (part.times.hour + part.times.minute / 60.0).to_numpy()[None, :]
    v = np.sin(x / 37.0) + np.cos(y / 53.0) + hour / 10.0 + (0.0 if part.scheme == "base" else -0.5)
    logits = np.stack([-v, np.zeros_like(v), v])
    p = np.exp(logits) / np.exp(logits).sum(axis=0)
    values = {C.UTCI_C: 20.0 + 5.0 * v, C.SHADE_FRAC: (np.sin(x + hour) > 0), **dict(zip(P_COLUMNS, p, strict=False))}
    return aggregate_points(part, values, predictor="stand-in")


def flaky_once(part):
    with _lock:
        n = _calls[part.partition_id] = _calls.get(part.partition_id, 0) + 1
    if part.chunk == 0 and n == 1:
        raise RuntimeError("worker hiccup")
    return standin(part)


def broken_tile(part):
    if part.partition_id == "base/t000_000/c0001":
        raise ValueError("no weather for this tile")
    return standin(part)


def one_row_short(part):
    return standin(part).iloc[1:]


@pytest.fixture(scope="module")
def cluster():
    """One small in-process cluster (threads, loopback only) shared by the Dask tests of this module."""
    from distributed import LocalCluster

    with LocalCluster(n_workers=1, threads_per_worker=2, processes=False, protocol="tcp", host="127.0.0.1",
                      dashboard_address="127.0.0.1:0") as c:
        yield c


def _dask(engine, cluster):
    return {"scheduler": cluster.scheduler_address, "timeout_s": 20} if engine == "dask" else {}


@pytest.fixture(scope="module")
def small_net():
    return network_from_geojson(grid_network(4, 4, block_m=100.0), segment_length_m=50.0, spacing_m=10.0)


def _job(net, fn=standin, **kw):
    times = time_range("2026-07-14T08:00", "2026-07-14T17:00", "1h", "Europe/Madrid")
    scene = grid_scene(4, 4)
    trees = {"type": "FeatureCollection", "features": scene["features"][:5]}
    return plan_job(net, times, {"base": scene, "fewer": trees}, tile_size_m=200.0, time_chunk=5,
                    partition_fn=fn, **kw)


def test_plan_counts_partitions_and_rows(small_net):
    job = _job(small_net)
    n_tiles = len({p.tile_id for p in job.partitions if p.scheme == "base"})
    assert n_tiles > 1
    # 10 hours in chunks of 5 -> 2 chunks; 2 schemes
    assert len(job.partitions) == n_tiles * 2 * 2
    assert job.expected_rows == small_net.n_segments * 10 * 2
    # every segment is in exactly one tile per scheme
    segs = [s for p in job.partitions if p.scheme == "base" and p.chunk == 0 for s in p.segment_ids]
    assert sorted(segs) == sorted(small_net.segments.index)
    # the digest names the job: the same inputs give the same digest, other inputs another
    assert _job(small_net).digest == job.digest
    assert _job(small_net, min_sun_elev_deg=8.0).digest != job.digest


def test_in_process_writes_every_row_once(small_net, tmp_path):
    job = _job(small_net)
    report = engines.run_job(job, tmp_path, "in-process")
    assert report.ok and report.expected_rows == report.written_rows == job.expected_rows
    rows = engines.read_segment_hours(tmp_path)
    assert len(rows) == job.expected_rows
    assert not rows.set_index([C.SEGMENT_ID, "scheme"], append=True).index.has_duplicates
    assert np.allclose(rows[list(P_COLUMNS)].sum(axis=1), 1.0)
    # hive layout readable by the standard readers too
    files = sorted((tmp_path / "segment_hours").rglob("*.parquet"))
    assert len(files) == len(job.partitions)
    assert files[0].relative_to(tmp_path).as_posix() == "segment_hours/scheme=base/tile_id=t000_000/part-c0000.parquet"
    assert len(pd.read_parquet(tmp_path / "segment_hours")) == job.expected_rows
    meta = _io.read_parquet_metadata(files[0])
    assert meta["job_digest"] == job.digest and meta["partition_id"] == "base/t000_000/c0000"
    saved = _io.json.loads((tmp_path / "job.json").read_text())
    assert saved["ok"] and saved["rows_expected"] == saved["rows_written"] == job.expected_rows


def _digests(folder):
    return {p.relative_to(folder).as_posix(): _io.file_digest(p)
            for p in sorted((folder / "segment_hours").rglob("*.parquet"))}


def test_dask_local_cluster_gives_identical_files(small_net, tmp_path):
    job = _job(small_net)
    a, b = tmp_path / "inproc", tmp_path / "dask"
    engines.run_job(job, a, "in-process")
    report = engines.run_job(job, b, "dask", workers=2, processes=False, timeout_s=20)
    assert report.ok and report.written_rows == job.expected_rows
    assert _digests(a) == _digests(b)
    pd.testing.assert_frame_equal(engines.read_segment_hours(a), engines.read_segment_hours(b))


@pytest.mark.parametrize("engine", ["in-process", "dask"])
def test_partition_that_raises_once_is_retried(small_net, tmp_path, engine, cluster):
    _calls.clear()
    job = _job(small_net, fn=flaky_once)
    report = engines.run_job(job, tmp_path, engine, retries=1, **_dask(engine, cluster))
    assert report.ok and report.written_rows == job.expected_rows
    assert max(_calls.values()) == 2  # each chunk-0 partition ran twice
    if engine == "in-process":
        assert {o.attempts for o in report.outcomes if o.partition_id.endswith("c0000")} == {2}


@pytest.mark.parametrize("engine", ["in-process", "dask"])
def test_partition_that_keeps_failing_is_reported_by_id(small_net, tmp_path, engine, cluster):
    job = _job(small_net, fn=broken_tile)
    report = engines.run_job(job, tmp_path, engine, retries=1, **_dask(engine, cluster))
    assert not report.ok
    assert [o.partition_id for o in report.failed] == ["base/t000_000/c0001"]
    assert "ValueError: no weather for this tile" in report.failed[0].error
    assert report.failed[0].attempts == 2
    bad = job.partition("base/t000_000/c0001")
    assert report.written_rows == job.expected_rows - bad.expected_rows
    assert not engines.partition_path(tmp_path, bad).exists()
    saved = _io.json.loads((tmp_path / "job.json").read_text())
    assert saved["failed"] == ["base/t000_000/c0001"] and not saved["ok"]


def test_wrong_row_count_is_a_failure_not_a_silent_gap(small_net, tmp_path):
    job = _job(small_net, fn=one_row_short)
    report = engines.run_job(job, tmp_path, "in-process", retries=0)
    assert len(report.failed) == len(job.partitions) and report.written_rows == 0
    part = job.partitions[0]
    assert (f"expected {part.expected_rows} rows, got {part.expected_rows - 1} (1 missing, 0 extra"
            in report.failed[0].error)


def test_resume_keeps_partitions_of_the_same_job_only(small_net, tmp_path):
    job = _job(small_net, fn=broken_tile)
    engines.run_job(job, tmp_path, "in-process", retries=0)
    fixed = _job(small_net)  # same inputs but another partition function: another job
    assert fixed.digest != job.digest
    # another job's folder is refused, even with --resume; --overwrite replaces its results
    with pytest.raises(InputError, match="holds the results of another job.*--overwrite"):
        engines.run_job(fixed, tmp_path, "in-process", resume=True)
    report = engines.run_job(fixed, tmp_path, "in-process", resume=True, overwrite=True)
    assert report.ok and {o.status for o in report.outcomes} == {"written"}
    partial = engines.run_job(job, tmp_path / "again", "in-process", retries=0)
    assert not partial.ok
    resumed = engines.run_job(_job(small_net, fn=broken_tile), tmp_path / "again", "in-process", resume=True)
    assert {o.status for o in resumed.outcomes} == {"kept", "failed"}  # same job: kept, the broken one retried
    again = engines.run_job(fixed, tmp_path, "in-process", resume=True)
    assert again.ok and {o.status for o in again.outcomes} == {"kept"}
    assert again.written_rows == fixed.expected_rows


def test_bad_job_inputs_are_one_line_errors(small_net):
    times = time_range("2026-07-14T08:00", "2026-07-14T10:00", "1h", "UTC")
    with pytest.raises(InputError, match="scheme name"):
        plan_job(small_net, times, {"../up": None}, partition_fn=standin)
    weather = pd.DataFrame({C.T_AIR_C: [30.0]}, index=times[:1])
    with pytest.raises(InputError, match="weather has no row at 2 of the batch times"):
        plan_job(small_net, times, {"base": None}, weather, partition_fn=standin)
    with pytest.raises(InputError, match="engine 'spark' is not known"):
        engines.make_engine("spark")
    with pytest.raises(InputError, match="ends"):
        time_range("2026-07-14T10:00", "2026-07-14T08:00")


def test_dask_engine_uses_an_existing_scheduler_by_address(small_net, tmp_path, cluster):
    job = _job(small_net)
    engines.run_job(job, tmp_path / "a", "in-process")
    for write_on in ("client", "workers"):
        report = engines.run_job(job, tmp_path / write_on, "dask", scheduler=cluster.scheduler_address,
                                 timeout_s=20, write_on=write_on)
        assert report.ok and report.parameters["scheduler"] == cluster.scheduler_address
        assert report.parameters["write_on"] == write_on
        assert _digests(tmp_path / "a") == _digests(tmp_path / write_on)
    assert len(cluster.scheduler.workers) == 1  # the engine closed its client, not the cluster


def test_unreachable_scheduler_is_a_one_line_error(small_net, tmp_path):
    job = _job(small_net)
    with pytest.raises(InputError, match="no Dask scheduler answered at 'tcp://127.0.0.1:9'"):
        engines.run_job(job, tmp_path, "dask", scheduler="tcp://127.0.0.1:9", timeout_s=1)


def test_a_write_that_fails_fails_its_partition_only(small_net, tmp_path):
    job = _job(small_net)
    (tmp_path / "segment_hours").mkdir()
    (tmp_path / "segment_hours" / "scheme=fewer").write_text("not a folder")  # writes under it must fail
    report = engines.run_job(job, tmp_path, "in-process", retries=0)
    failed = {o.partition_id.split("/")[0] for o in report.failed}
    assert failed == {"fewer"} and not report.ok
    assert report.written_rows == sum(p.expected_rows for p in job.partitions if p.scheme == "base")
    assert all(o.error.startswith(("FileExistsError", "NotADirectoryError")) for o in report.failed)


@pytest.mark.slow
def test_a_lost_worker_fails_its_partition_not_the_job(small_net, tmp_path):
    import dask
    from distributed import LocalCluster

    from walkcomfort.routes.weather import StatedConditions

    here = str(Path(__file__).resolve().parent)
    import sys

    sys.path.insert(0, here)
    try:
        import _crashing
    finally:
        sys.path.remove(here)
    times = time_range("2026-07-14T10:00", "2026-07-14T11:00", "1h", "Europe/Madrid")
    site = {"lat": 40.42, "lon": -3.70, "elev_m": 650.0}
    weather = StatedConditions(t_air_c=30.0, rh_pct=40.0, wind_ms=2.0).conditions(times, site["lat"], site["lon"])
    weather.attrs = {}
    job = plan_job(small_net, times, {"base": None}, weather, tile_size_m=200.0, site=site,
                   context={"wind_height_m": 10.0}, partition_fn=_crashing.kill_worker_on_first_tile)
    env = {"PYTHONPATH": os.pathsep.join([here, os.environ.get("PYTHONPATH", "")])}
    with dask.config.set({"distributed.scheduler.allowed-failures": 0}), \
            LocalCluster(n_workers=1, threads_per_worker=1, processes=True, host="127.0.0.1",
                         dashboard_address="127.0.0.1:0", env=env) as cluster:
        report = engines.run_job(job, tmp_path, "dask", scheduler=cluster.scheduler_address, retries=0,
                                 timeout_s=60)
    # the partition that killed its worker fails; tasks queued on that worker when it died may be
    # counted as suspects too (allowed-failures 0) — all of them are reported, none is silently missing
    failed = {o.partition_id for o in report.failed}
    assert "base/t000_000/c0000" in failed and not report.ok
    assert all("KilledWorker" in o.error for o in report.failed)
    written = {o.partition_id for o in report.outcomes if o.status == "written"}
    assert written | failed == {p.partition_id for p in job.partitions} and written
    assert report.written_rows == sum(job.partition(p).expected_rows for p in written)
