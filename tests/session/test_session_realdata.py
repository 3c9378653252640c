"""GPX files nobody here wrote (gpxpy's test files, under ../shared/realdata/gpx/): each loads or is refused clearly.

Each file becomes a session folder (in a temporary folder; the files are never copied into the
repository) with the GPX as its only source, and ``walkcomfort check`` runs on it in-process.
"""

from __future__ import annotations

import os
import shutil
from pathlib import Path

import pytest

from walkcomfort.cli import main
from walkcomfort.session.timeline import build_timeline


def realdata_dir() -> Path:
    """``../shared/realdata`` beside the project (or ``$WALKCOMFORT_REALDATA``)."""
    env = os.environ.get("WALKCOMFORT_REALDATA")
    return Path(env) if env else Path(__file__).resolve().parents[2].parent / "shared" / "realdata"


GPX = realdata_dir() / "gpx"
pytestmark = pytest.mark.skipif(not GPX.is_dir(), reason=f"real third-party GPX files not present at {GPX} "
                                                          "(a fresh clone without ../shared/realdata)")
FILES = sorted(p.name for p in GPX.glob("*.gpx")) if GPX.is_dir() else []
MANIFEST = ('schema = "walkcomfort-session/1"\n[session]\nid = "real"\nparticipant = "P01"\n'
            'timezone = "Europe/Ljubljana"\n[[source]]\nkind = "gps"\npath = "track.gpx"\n')
# what each kind of file must give (the rest: either answer, always clearly)
LOADS = {"around-visnjan-with-car.gpx", "cerknicko-jezero.gpx", "korita-zbevnica.gpx", "track-with-empty-segment.gpx"}
REFUSED_WITH = {"route.gpx": "no track points", "cerknicko-without-times.gpx": "points have no time",
                "Mojstrovka.gpx": "duplicate_time", "unicode_with_bom.gpx": "no track points"}


def _session(tmp_path: Path, name: str) -> Path:
    d = tmp_path / "s"
    d.mkdir()
    shutil.copy(GPX / name, d / "track.gpx")
    (d / "session.toml").write_text(MANIFEST)
    return d


@pytest.mark.parametrize("name", FILES)
def test_real_gpx_loads_or_is_refused_clearly(name, tmp_path, capsys):
    d = _session(tmp_path, name)
    raw = (d / "track.gpx").read_bytes()
    rc = main(["check", str(d)])
    out, err = capsys.readouterr()
    assert rc in (0, 2), err
    if rc == 2:
        assert err.startswith("error: ") and err.count("\n") == 1 and "track.gpx" in err and "Fix:" in err, err
        assert name not in LOADS, err
        if name in REFUSED_WITH:
            assert REFUSED_WITH[name] in err, err
    else:
        assert name not in REFUSED_WITH, out
        tl = build_timeline(d)
        e = tl.qa["sources"]["gps"]
        assert e["rows_read"] == e["rows_used"] + e["rows_quarantined"]
        assert tl.data["lat"].notna().any()
    assert (d / "track.gpx").read_bytes() == raw


def test_a_car_leg_is_one_flagged_segment_not_a_cascade_of_jumps(tmp_path):
    tl = build_timeline(_session(tmp_path, "around-visnjan-with-car.gpx"))
    assert tl.qa["sources"]["gps"]["gps_jumps"] == 0
    assert tl.qa["sources"]["gps"]["vehicle_fixes"] > 20
    assert tl.data["qa_vehicle"].sum() > 60   # the steps of the leg, contiguous stretches
    assert any("vehicle" in w for w in tl.qa["warnings"])
