"""``network --index pet``: PET per segment x time beside UTCI, its summary, and a UTCI job left as it was."""

from __future__ import annotations

import json

import numpy as np
import pytest

from walkcomfort import columns as C
from walkcomfort.environment import pet as P
from walkcomfort.network.engines import read_segment_hours
from walkcomfort.network.synthetic import grid_network


def _plan(tmp_path, **kw):
    from walkcomfort.network.commands import plan_from_files

    streets = tmp_path / "streets.geojson"
    streets.write_text(json.dumps(grid_network(2, 2, block_m=60.0)))
    return plan_from_files(streets, None, [], "2026-07-14T11:00", "2026-07-14T12:00", "1h", "Europe/Madrid",
                           conditions="t_air_c=31,rh_pct=40,wind_ms=2", segment_length_m=60.0, **kw)


def test_pet_rows_are_the_mean_of_the_points_and_summarised(tmp_path):
    from walkcomfort.network import _physics
    from walkcomfort.network.engines import run_job
    from walkcomfort.network.summaries import summary_from_results

    _, job = _plan(tmp_path, index="pet")
    assert run_job(job, tmp_path / "out").ok
    rows = read_segment_hours(tmp_path / "out")
    assert rows[P.PET_C].notna().all() and rows[P.PET_C].between(25.0, 60.0).all()  # open ground, 31 °C, noon
    # from the definition: a segment's PET is the mean over its points, as for UTCI
    part = job.partitions[0]
    env = _physics.point_environment(part)
    seg = part.points[C.SEGMENT_ID].to_numpy() == part.segment_ids[0]
    got = rows.loc[(rows[C.SEGMENT_ID] == part.segment_ids[0]) & (rows.index == part.times[0]), P.PET_C]
    assert got.iloc[0] == pytest.approx(env[P.PET_C][seg, 0].mean(), rel=1e-12)
    summary = summary_from_results(tmp_path / "out")
    assert {"mean_pet_c", "max_pet_c"} <= set(summary.columns)
    means = rows.groupby([C.SEGMENT_ID, "scheme"])[P.PET_C].mean()
    np.testing.assert_allclose(summary["mean_pet_c"].to_numpy(), means.reindex(summary.index).to_numpy())


def test_a_utci_job_is_unchanged_by_the_option(tmp_path):
    _, plain = _plan(tmp_path)
    _, utci = _plan(tmp_path, index="utci")
    _, pet = _plan(tmp_path, index="pet")
    assert plain.digest == utci.digest != pet.digest  # a PET job never resumes into a UTCI one
    assert "indices" not in plain.parameters["context"]


def test_wbgt_hours_above_a_chosen_limit_per_segment(tmp_path):
    from walkcomfort.network.engines import run_job
    from walkcomfort.network.summaries import summary_from_results

    _, job = _plan(tmp_path, wbgt_limit=24.0)
    assert job.parameters["context"]["indices"] == ["wbgt"]
    assert run_job(job, tmp_path / "out").ok
    rows = read_segment_hours(tmp_path / "out")
    assert rows["wbgt_c"].between(20.0, 35.0).all() and (rows["wbgt_limit_c"] == 24.0).all()
    summary = summary_from_results(tmp_path / "out")
    # from the definition: hours = number of segment-hours above the limit x the 1 h step
    above = (rows["wbgt_c"] > 24.0).groupby([rows[C.SEGMENT_ID], rows["scheme"]]).sum().astype(float)
    np.testing.assert_allclose(summary["wbgt_h_above_limit"].to_numpy(), above.reindex(summary.index).to_numpy())
    assert (summary["wbgt_limit_c"] == 24.0).all()


def test_a_model_fitted_on_pet_gets_pet_from_the_chain(tmp_path):
    from walkcomfort.environment.indices import with_pet
    from walkcomfort.environment.utci import wind_at_10m
    from walkcomfort.model._synthetic import synthetic_campaign
    from walkcomfort.model.bundle import save_bundle
    from walkcomfort.model.classifier import ComfortClassifier
    from walkcomfort.model.evaluate import training_table
    from walkcomfort.model.features import FEATURE_SETS
    from walkcomfort.network import _physics
    from walkcomfort.network.engines import run_job

    camp = synthetic_campaign(n_participants=3, walks_per_participant=1, duration_s=600, vote_every_s=60, seed=2)
    camp["wind10_ms"] = wind_at_10m(camp["wind_ms"], 1.1)
    table = training_table(with_pet(camp))
    folder = tmp_path / "model"
    save_bundle(ComfortClassifier(n_estimators=10, features=list(FEATURE_SETS["planned-pet"])).fit(table.X, table.y),
                folder)
    _, job = _plan(tmp_path, model=folder)
    assert job.parameters["context"]["indices"] == ["pet"]
    part = job.partitions[0]
    walks = _physics.segment_walks(part, _physics.point_environment(part))
    assert walks[P.PET_C].notna().all()  # the model's PET features are real, not missing
    assert run_job(job, tmp_path / "out").ok
