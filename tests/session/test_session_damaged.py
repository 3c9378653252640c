"""A corpus of damaged sessions, each made from the good fixture by damaging one thing.

For every case, ``walkcomfort check`` (called in-process) either passes with counts that
reconcile and no source losing more than the limits allow, or exits 2 with one line that
names a file or manifest key; never an internal error (exit 1), and the raw files are never
modified. Cases marked ``ok`` or ``refuse`` in ``session_damage.py`` must give that answer.
"""

from __future__ import annotations

import shutil

import pytest
from session_damage import CASES, FIXTURE

from walkcomfort.cli import main
from walkcomfort.session.limits import default_limits
from walkcomfort.session.timeline import build_timeline

# about a minute for the whole corpus on a loaded machine: marked slow (it still runs in CI)
pytestmark = pytest.mark.slow

NAMES_A_PLACE = ("session.toml", ".csv", ".gpx", ".json", "camera", "[[source]]", "[session]", "[checks]")


def test_corpus_is_large_enough():
    assert len(CASES) >= 150


@pytest.mark.parametrize("case", sorted(CASES))
def test_damaged_session(case, tmp_path, capsys):
    folder = tmp_path / "s"
    shutil.copytree(FIXTURE, folder)
    damage, expect = CASES[case]
    damage(folder)
    before = {p: p.read_bytes() for p in folder.rglob("*") if p.is_file()}
    rc = main(["check", str(folder)])
    out, err = capsys.readouterr()
    assert rc in (0, 2), (rc, err[-2000:])
    if rc == 2:
        assert err.startswith("error: ") and err.count("\n") == 1, err[:2000]
        assert "Traceback" not in err and "Fix:" in err, err
        assert any(w in err for w in NAMES_A_PLACE), err
        assert expect in ("refuse", "either"), f"refused, expected {expect}: {err}"
    else:
        assert "check passed" in out
        assert expect in ("ok", "either"), f"passed, expected {expect}: {out}"
        tl = build_timeline(folder)
        limit = default_limits()["fail_lost_share"]
        for name, e in tl.qa["sources"].items():
            assert e["rows_read"] == e["rows_used"] + e["rows_quarantined"], name
            trimmed = e["quarantine_reasons"].get("outside_walk_window", 0)
            if e["rows_read"] - trimmed > 0:
                assert (e["rows_quarantined"] - trimmed) / (e["rows_read"] - trimmed) <= limit, (name, e)
        assert len(tl.quarantine) == tl.qa["summary"]["rows_quarantined"]
    # raw files are never modified, and check writes nothing
    assert before == {p: p.read_bytes() for p in folder.rglob("*") if p.is_file()}
