"""The field-protocol templates: a session made from them passes `walkcomfort check` cleanly."""

from __future__ import annotations

import pytest

from walkcomfort.cli import main


def test_templates_exist(templates):
    for name in ("session.toml", "votes.csv", "checklist.md"):
        assert (templates / name).is_file(), name
    header = [ln for ln in (templates / "votes.csv").read_text(encoding="utf-8").splitlines()
              if ln and not ln.startswith("#")]
    assert header == ["time,participant,comfort,tsv,note,kind"]


def test_session_from_templates_passes_check(tmp_path, make_template_session, capsys):
    folder = make_template_session(tmp_path / "walk")
    assert main(["check", str(folder)]) == 0
    out = capsys.readouterr().out
    assert "check passed" in out and "DOES NOT RECONCILE" not in out


def test_session_from_templates_has_nothing_to_complain_about(tmp_path, make_template_session):
    from walkcomfort.session.timeline import build_timeline

    tl = build_timeline(make_template_session(tmp_path / "walk"))
    assert len(tl.quarantine) == 0, tl.quarantine[["source", "reason"]].value_counts().to_dict()
    assert tl.qa["warnings"] == []
    assert tl.qa["summary"]["reconciles"]
    # the two sync events moved the camera and the logger onto the GPS clock exactly
    assert tl.qa["clocks"]["cam1"]["offset_s"] == pytest.approx(2.0)
    assert tl.qa["clocks"]["logger1"]["offset_s"] == pytest.approx(5.0)
    assert tl.data["vote_comfort"].notna().sum() == 2
    assert tl.data["frame_path"].notna().sum() == 23   # a frame every 30 s over 12 minutes
