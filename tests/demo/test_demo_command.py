"""``walkcomfort demo``: runs the stages that exist, says what it skipped, prints the caution."""

from __future__ import annotations

from pathlib import Path

from walkcomfort.cli import main
from walkcomfort.demo import pipeline

DEMO = Path(__file__).resolve().parents[2] / "demo_walks"


def test_demo_ingest_stage_writes_timelines_and_prints_the_caution(tmp_path, capsys):
    out = tmp_path / "out"
    assert main(["demo", "--out", str(out), "--only", "ingest"]) == 0
    text = capsys.readouterr().out
    assert "INVENTED" in text and "not" in text and "design advice" in text
    assert "ingest    ran" in text
    assert len(list((out / "timelines").glob("*/timeline.parquet"))) == len(list((DEMO / "sessions").iterdir()))
    assert (out / "timelines" / "campaign.parquet").is_file()


def test_a_missing_stage_is_skipped_with_its_reason(tmp_path, monkeypatch):
    lines = []
    monkeypatch.setattr(pipeline, "_has_verb", lambda verb: (verb == "ingest", f"{verb} not here"))
    run = pipeline.run_demo(tmp_path / "o", demo_dir=DEMO, echo=lines.append)
    assert run.ok
    assert run.stage("ingest").status == "ran"
    for name in ("frames", "thermal", "fit", "compare", "map", "report"):
        s = run.stage(name)
        assert s.status == "skipped" and s.detail
    assert any("skipped" in line for line in lines)


def test_a_stage_that_breaks_is_reported_and_the_rest_still_runs(tmp_path, monkeypatch):
    real = pipeline._run_verb

    def broken(verb, args, echo):
        if verb == "ingest":
            raise RuntimeError("boom")
        return real(verb, args, echo)

    monkeypatch.setattr(pipeline, "_run_verb", broken)
    run = pipeline.run_demo(tmp_path / "o", demo_dir=DEMO, echo=lambda s: None, stages=("ingest", "fit"))
    assert not run.ok
    assert run.stage("ingest").status == "failed" and "boom" in run.stage("ingest").detail
    assert run.stage("fit").status == "skipped"
