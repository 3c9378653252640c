"""Network batch with a saved comfort model: the routes' prediction path, averaged over a segment's points."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from walkcomfort import columns as C
from walkcomfort.cli import main
from walkcomfort.network.batch import P_COLUMNS
from walkcomfort.network.engines import read_segment_hours
from walkcomfort.network.synthetic import grid_network


@pytest.fixture(scope="module")
def bundle(tmp_path_factory):
    from walkcomfort.model._synthetic import synthetic_campaign
    from walkcomfort.model.bundle import save_bundle
    from walkcomfort.model.classifier import ComfortClassifier
    from walkcomfort.model.evaluate import training_table

    table = training_table(synthetic_campaign(n_participants=4, walks_per_participant=1, duration_s=900,
                                              vote_every_s=60, seed=5))
    folder = tmp_path_factory.mktemp("bundle") / "model"
    save_bundle(ComfortClassifier(n_estimators=20).fit(table.X, table.y), folder)
    return folder


def test_model_probabilities_are_the_mean_of_the_points(bundle, tmp_path):
    from walkcomfort.network import _physics
    from walkcomfort.network.commands import plan_from_files
    from walkcomfort.network.engines import run_job
    from walkcomfort.routes.predict import Predictor

    streets = tmp_path / "streets.geojson"
    streets.write_text(json.dumps(grid_network(2, 2, block_m=60.0)))
    net, job = plan_from_files(streets, None, [], "2026-07-14T12:00", "2026-07-14T13:00", "1h", "Europe/Madrid",
                               conditions="t_air_c=31,rh_pct=40,wind_ms=2", model=bundle, segment_length_m=60.0)
    assert job.parameters["context"]["predictor"].startswith("model:sha256:")
    report = run_job(job, tmp_path / "out")
    assert report.ok
    rows = read_segment_hours(tmp_path / "out")
    assert (rows["predictor"] == job.parameters["context"]["predictor"]).all()
    np.testing.assert_allclose(rows[list(P_COLUMNS)].sum(axis=1), 1.0)
    # from the definition: a segment's probabilities are the mean over its points of the per-point
    # probabilities the routes' predictor gives for the walk along the segment
    part = job.partitions[0]
    env = _physics.point_environment(part)
    walks = _physics.segment_walks(part, env)
    per_point = Predictor.from_bundle(bundle).predict(walks, explain=False)
    seg0, t0 = part.segment_ids[0], part.times[0]
    walk = (walks[C.WALK_ID] == f"{seg0}@{t0.strftime('%Y-%m-%dT%H:%M:%SZ')}").to_numpy()
    assert walk.sum() == net.segments.loc[seg0, "n_points"]
    got = rows.loc[(rows[C.SEGMENT_ID] == seg0) & (rows.index == t0)]
    for p in P_COLUMNS:
        assert got[p].iloc[0] == pytest.approx(per_point[p].to_numpy()[walk].mean(), rel=1e-12)
    assert not set(np.unique(rows["p_comfortable"])) <= {0.0, 1.0}  # real probabilities, not a one-hot rule


def test_a_bad_bundle_is_one_error_before_any_partition_runs(tmp_path, capsys):
    streets = tmp_path / "streets.geojson"
    streets.write_text(json.dumps(grid_network(2, 2)))
    (tmp_path / "nomodel").mkdir()
    rc = main(["network", str(streets), "--conditions", "t_air_c=31,rh_pct=40,wind_ms=2", "--start",
               "2026-07-14T12:00", "--end", "2026-07-14T13:00", "--timezone", "UTC", "--model",
               str(tmp_path / "nomodel"), "--out", str(tmp_path / "out")])
    assert rc == 2
    assert not (tmp_path / "out" / "job.json").exists()
    assert "error:" in capsys.readouterr().err


def _own_working_dir():
    """Runs on each Dask worker: move it into a fresh temporary folder of its own."""
    import os
    import tempfile

    os.chdir(tempfile.mkdtemp(prefix="walkcomfort-worker-"))
    return os.getcwd()


def test_workers_in_their_own_folders_get_the_model_through_the_cluster(bundle, tmp_path, monkeypatch):
    import shutil

    from distributed import LocalCluster

    from walkcomfort import _io
    from walkcomfort.network.commands import plan_from_files
    from walkcomfort.network.engines import run_job

    # the driver names the model by a path relative to its own folder, which the workers do not share
    shutil.copytree(bundle, tmp_path / "models" / "comfort")
    streets = tmp_path / "streets.geojson"
    streets.write_text(json.dumps(grid_network(3, 2, block_m=60.0)))
    monkeypatch.chdir(tmp_path)
    net, job = plan_from_files("streets.geojson", None, [], "2026-07-14T12:00", "2026-07-14T14:00", "1h",
                               "Europe/Madrid", conditions="t_air_c=31,rh_pct=40,wind_ms=2",
                               model="models/comfort", segment_length_m=60.0, tile_size_m=60.0, time_chunk=2)
    assert job.bundle is not None and job.parameters["context"]["model"] == job.bundle["digest"]
    assert "models/comfort" not in json.dumps(job.parameters)
    inproc = run_job(job, tmp_path / "inproc", summarise=True)
    assert inproc.ok
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                      dashboard_address="127.0.0.1:0") as cluster:
        from distributed import Client

        with Client(cluster) as client:
            dirs = client.run(_own_working_dir)
        assert len(set(dirs.values())) == 2 and str(tmp_path) not in " ".join(dirs.values())
        report = run_job(job, tmp_path / "dask", "dask", scheduler=cluster.scheduler_address, timeout_s=60,
                         max_in_flight=3, summarise=True)
    assert report.ok and report.timings["peak_in_flight"] <= 3
    assert not (rows := read_segment_hours(tmp_path / "dask"))["predictor"].eq("physics-rule").any()
    a = sorted((tmp_path / "inproc" / "segment_hours").rglob("*.parquet"))
    assert len(a) == len(job.partitions) > 3
    for f in a:
        assert _io.file_digest(f) == _io.file_digest(tmp_path / "dask" / f.relative_to(tmp_path / "inproc"))
    # the workers wrote the files and sent back only counts and digests, which job.json keeps
    saved = json.loads((tmp_path / "dask" / "job.json").read_text())
    assert all(o["digest"] == _io.file_digest(tmp_path / "dask" / o["path"]) for o in saved["outcomes"])
    assert len(rows) == job.expected_rows
    # the summary computed on the workers (one tile each) is the in-process one
    pd.testing.assert_frame_equal(report.summary, inproc.summary)
    assert len(report.summary) == net.n_segments
