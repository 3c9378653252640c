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


def test_new_session_for_the_instruments_carried_checks_once_filled(tmp_path, make_template_session, capsys):
    from walkcomfort.session.timeline import build_timeline

    folder = tmp_path / "p07-am"
    assert main(["new-session", str(folder), "--no-sound", "--no-camera", "--participant", "P01"]) == 0
    text = (folder / "session.toml").read_text(encoding="utf-8")
    assert 'kind = "noise"' not in text and 'kind = "frames"' not in text and 'frame = "camera/' not in text
    assert 'id = "p07-am"' in text and "optional: delete this [[source]] table" in text
    # a fresh folder says what is missing, with the fix
    assert main(["check", str(folder)]) == 2
    assert "gps/track.gpx' not found" in capsys.readouterr().err
    # the devices' exports copied over the empty files: the session checks cleanly
    filled = make_template_session(tmp_path / "filled")
    for rel in ("gps/track.gpx", "logger/weather.csv", "lux/light.csv", "votes/votes.csv"):
        (folder / rel).write_bytes((filled / rel).read_bytes())
    assert main(["check", str(folder)]) == 0
    tl = build_timeline(folder)
    assert len(tl.quarantine) == 0 and tl.qa["warnings"] == [] and tl.qa["losses"] == []
    assert main(["new-session", str(folder)]) == 2   # never over an existing session
