"""``walkcomfort demo``: runs every stage, reports a missing or broken one as failed, prints the caution."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from walkcomfort.cli import main
from walkcomfort.demo import pipeline

DEMO = Path(__file__).resolve().parents[2] / "demo_walks"


@pytest.fixture
def small_demo(tmp_path):
    """A copy of the scenario with two sessions (the chain is the same, the test is quicker)."""
    dst = tmp_path / "demo"
    dst.mkdir()
    for name in ("planted.json", "provenance.json", "scene.geojson", "streets.geojson"):
        shutil.copy2(DEMO / name, dst / name)
    for sub in ("routes", "schemes", "weather"):
        shutil.copytree(DEMO / sub, dst / sub)
    for sid in ("sv-p01-1", "sv-p03-2"):
        shutil.copytree(DEMO / "sessions" / sid, dst / "sessions" / sid)
    return dst


def test_demo_ingest_stage_writes_timelines_and_prints_the_caution(tmp_path, small_demo, capsys):
    out = tmp_path / "out"
    assert main(["demo", "--out", str(out), "--demo-dir", str(small_demo), "--only", "ingest"]) == 0
    text = capsys.readouterr().out
    assert "INVENTED" in text and "design advice" in text
    assert "ingest    ran" in text
    assert sorted(p.parent.name for p in (out / "timelines").glob("*/timeline.parquet")) == ["sv-p01-1", "sv-p03-2"]
    assert (out / "timelines" / "campaign.parquet").is_file()


def test_a_missing_stage_fails_with_its_reason_and_the_rest_still_runs(tmp_path, small_demo, monkeypatch):
    lines = []
    monkeypatch.setattr(pipeline, "_has_verb", lambda verb: (verb != "frames", f"{verb} not here"))
    run = pipeline.run_demo(tmp_path / "o", demo_dir=small_demo, echo=lines.append,
                            stages=("ingest", "frames", "thermal"))
    assert not run.ok
    assert run.stage("ingest").status == "ran"
    assert run.stage("frames").status == "failed" and run.stage("frames").detail == "frames not here"
    assert run.stage("thermal").status == "ran"
    assert any("[frames] failed: frames not here" in line for line in lines)


def test_a_stage_that_breaks_is_reported_and_the_rest_still_runs(tmp_path, small_demo, monkeypatch):
    real = pipeline._run_verb

    def broken(verb, args, echo):
        if verb == "ingest":
            raise RuntimeError("boom")
        return real(verb, args, echo)

    monkeypatch.setattr(pipeline, "_run_verb", broken)
    run = pipeline.run_demo(tmp_path / "o", demo_dir=small_demo, echo=lambda s: None, stages=("ingest", "fit"))
    assert not run.ok
    assert run.stage("ingest").status == "failed" and "boom" in run.stage("ingest").detail
    assert run.stage("fit").status == "skipped"
