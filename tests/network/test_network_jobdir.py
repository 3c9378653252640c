"""One output folder, one job: another job's results are refused, replaced only on request, never mixed.

The partition function is a deterministic stand-in (a smooth function of position,
time and scheme) so the property test can try many tile sizes and time steps fast.
"""

from __future__ import annotations

import json
import shutil
import tempfile
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from walkcomfort import _io
from walkcomfort import columns as C
from walkcomfort.errors import InputError
from walkcomfort.network import engines
from walkcomfort.network.batch import P_COLUMNS, aggregate_points, plan_job, time_range
from walkcomfort.network.segments import network_from_geojson
from walkcomfort.network.summaries import segment_summary, summary_from_results
from walkcomfort.network.synthetic import grid_network, grid_scene


def standin(part):
    x = part.points[C.X_M].to_numpy()[:, None]
    y = part.points[C.Y_M].to_numpy()[:, None]
    hour = (part.times.hour + part.times.minute / 60.0).to_numpy()[None, :]
    v = np.sin(x / 37.0) + np.cos(y / 53.0) + hour / 10.0 + (0.0 if part.scheme == "base" else -0.5)
    logits = np.stack([-v, np.zeros_like(v), v])
    p = np.exp(logits) / np.exp(logits).sum(axis=0)
    values = {C.UTCI_C: 20.0 + 5.0 * v, C.SHADE_FRAC: (np.sin(x + hour) > 0),
              **dict(zip(P_COLUMNS, p, strict=True))}
    return aggregate_points(part, values, predictor="stand-in")


NET = network_from_geojson(grid_network(3, 3, block_m=100.0), segment_length_m=50.0, spacing_m=10.0)
SCENE = grid_scene(3, 3)


def _job(tile_size_m: float, step: str, time_chunk: int = 3):
    times = time_range("2026-07-14T08:00", "2026-07-14T12:00", step, "Europe/Madrid")
    fewer = {**SCENE, "features": SCENE["features"][:3]}
    return plan_job(NET, times, {"base": SCENE, "fewer": fewer}, tile_size_m=tile_size_m, time_chunk=time_chunk,
                    partition_fn=standin)


def _files(folder: Path) -> dict[str, str]:
    return {p.relative_to(folder).as_posix(): _io.file_digest(p) for p in sorted(folder.rglob("*")) if p.is_file()}


TILES = st.sampled_from([90.0, 150.0, 260.0, 400.0])
STEPS = st.sampled_from(["30min", "1h", "2h"])


@settings(max_examples=12, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(tile_a=TILES, step_a=STEPS, tile_b=TILES, step_b=STEPS)
def test_another_jobs_folder_never_changes_this_jobs_results(tile_a, step_a, tile_b, step_b):
    a, b = _job(tile_a, step_a), _job(tile_b, step_b)
    with tempfile.TemporaryDirectory() as d:
        out, clean = Path(d) / "out", Path(d) / "clean"
        assert engines.run_job(a, out).ok
        assert engines.run_job(b, clean).ok
        if a.digest == b.digest:
            # the same job: a plain re-run rewrites the same files, --resume keeps them all
            assert {o.status for o in engines.run_job(b, out, resume=True).outcomes} == {"kept"}
            return
        before = _files(out)
        for resume in (False, True):
            with pytest.raises(InputError, match="another job.*new --out folder.*--overwrite"):
                engines.run_job(b, out, resume=resume)
        assert _files(out) == before  # refused before anything was touched
        assert engines.run_job(b, out, overwrite=True).ok
        pd.testing.assert_frame_equal(engines.read_segment_hours(out), engines.read_segment_hours(clean))
        assert len(engines.read_segment_hours(out)) == b.expected_rows
        # a stray partition file (say copied in by hand) is never read, and fences the folder
        stray = out / "segment_hours" / "scheme=base" / "tile_id=t999_999" / "part-c0000.parquet"
        stray.parent.mkdir(parents=True)
        shutil.copy(next(iter(sorted((clean / "segment_hours").rglob("*.parquet")))), stray)
        whole = segment_summary(engines.read_segment_hours(clean))
        pd.testing.assert_frame_equal(summary_from_results(out), whole)
        with pytest.raises(InputError, match="1 partition files this job does not write"):
            engines.run_job(b, out)


def test_a_run_cut_off_still_marks_the_folder_as_its_own(tmp_path):
    a, b = _job(150.0, "1h"), _job(260.0, "1h")
    engines.run_job(a, tmp_path)
    report = json.loads((tmp_path / "job.json").read_text())
    report.pop("outcomes")  # what a run that died after its claim leaves
    report["status"] = "running"
    (tmp_path / "job.json").write_text(json.dumps(report))
    with pytest.raises(InputError, match="a run that did not finish"):
        engines.read_segment_hours(tmp_path)
    with pytest.raises(InputError, match="another job"):
        engines.run_job(b, tmp_path)
    # no job.json at all: the files' own stamps tell
    (tmp_path / "job.json").unlink()
    with pytest.raises(InputError, match="partition files"):
        engines.run_job(b, tmp_path)
    assert engines.run_job(a, tmp_path, resume=True).ok


def test_overwrite_removes_the_batch_outputs_only(tmp_path):
    a, b = _job(150.0, "1h"), _job(150.0, "30min")
    engines.run_job(a, tmp_path)
    (tmp_path / "segment_summary.parquet").write_bytes(b"x")
    (tmp_path / "network_layer_base.geojson").write_text("{}")
    (tmp_path / "notes.txt").write_text("mine")
    assert engines.run_job(b, tmp_path, overwrite=True).ok
    assert (tmp_path / "notes.txt").read_text() == "mine"
    assert not (tmp_path / "segment_summary.parquet").exists()
    assert not (tmp_path / "network_layer_base.geojson").exists()
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".")]  # nothing left aside
