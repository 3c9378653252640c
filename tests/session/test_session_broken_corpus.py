"""The corpus of deliberately broken sessions: each gives one clear error, or quarantined rows that reconcile."""

from __future__ import annotations

import json
import os
import shutil
from pathlib import Path

import pytest

from walkcomfort.cli import main
from walkcomfort.errors import InputError
from walkcomfort.session.timeline import build_timeline

BROKEN = Path(__file__).resolve().parents[1] / "fixtures" / "sessions" / "broken"
CASES = sorted(p.name for p in BROKEN.iterdir() if (p / "expect.json").is_file())


def test_corpus_is_there():
    assert len(CASES) >= 20


@pytest.mark.parametrize("case", CASES)
def test_broken_case(case, capsys):
    folder = BROKEN / case
    expect = json.loads((folder / "expect.json").read_text())
    before = {p: p.read_bytes() for p in folder.rglob("*") if p.is_file()}
    if "error" in expect:
        with pytest.raises(InputError) as info:
            build_timeline(folder)
        msg = str(info.value)
        assert "\n" not in msg
        assert expect["error"]["where"] in msg, msg
        for word in expect["error"]["words"]:
            assert word in msg, msg
        assert "Fix:" in msg, msg
        # the same through the CLI: one line on stderr, exit code 2
        assert main(["check", str(folder)]) == 2
        err = capsys.readouterr().err
        assert err.startswith("error: ") and err.count("\n") == 1
    else:
        # losses above the limits are accepted here to compare the reasons; check refuses them (below)
        tl = build_timeline(folder, accept_losses=True)
        lost = {f["source"] for f in tl.qa["losses"]}
        if lost:
            assert main(["check", str(folder)]) == 2
            err = capsys.readouterr().err
            assert err.startswith("error: ") and err.count("\n") == 1 and "likely cause" in err, err
        for name, e in tl.qa["sources"].items():
            assert e["rows_read"] == e["rows_used"] + e["rows_quarantined"], name
            want = expect["quarantine"].get(name, {})
            assert e["quarantine_reasons"] == want, (name, e["quarantine_reasons"])
            q = tl.quarantine[tl.quarantine["source"] == name]
            assert len(q) == e["rows_quarantined"]
            assert (q["reason"] != "").all() and (q["raw"].str.len() > 0).all()
        for name, n in expect.get("out_of_order", {}).items():
            assert tl.qa["sources"][name]["out_of_order"] == n
        assert tl.qa["summary"]["reconciles"] is True
    # raw inputs are never modified
    assert before == {p: p.read_bytes() for p in folder.rglob("*") if p.is_file()}


def test_symlink_out_of_the_session_is_refused(tmp_path):
    folder = tmp_path / "s"
    shutil.copytree(BROKEN / "gpx10_ok", folder)
    outside = tmp_path / "outside.csv"
    shutil.copy(folder / "weather.csv", outside)
    (folder / "weather.csv").unlink()
    os.symlink(outside, folder / "weather.csv")
    with pytest.raises(InputError, match="resolves outside the session folder"):
        build_timeline(folder)


def test_symlink_inside_the_session_is_fine(tmp_path):
    folder = tmp_path / "s"
    shutil.copytree(BROKEN / "gpx10_ok", folder)
    (folder / "data").mkdir()
    (folder / "weather.csv").rename(folder / "data" / "w.csv")
    os.symlink(folder / "data" / "w.csv", folder / "weather.csv")
    assert build_timeline(folder).qa["summary"]["reconciles"]
