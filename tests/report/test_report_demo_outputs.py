"""The report stage on what the other stages really write, from the demo town (not synthetic tables)."""

from __future__ import annotations

import json
from pathlib import Path

import _report_synth as S
import pytest

from walkcomfort.cli import main

pytestmark = pytest.mark.slow

DEMO = Path(__file__).resolve().parents[2] / "demo_walks"


@pytest.fixture(scope="module")
def demo_outputs(tmp_path_factory):
    demo_dir = DEMO
    root = tmp_path_factory.mktemp("demo-out")
    session = sorted((demo_dir / "sessions").iterdir())[0]
    assert main(["ingest", str(session), "-o", str(root / "walks")]) == 0
    assert main(["compare", str(demo_dir / "routes" / "mercat-parc.geojson"),
                 "--scheme", str(demo_dir / "schemes" / "canopy-placa.geojson"),
                 "--scene", str(demo_dir / "scene.geojson"), "--depart", "2026-07-14T15:00",
                 "--timezone", "Europe/Madrid", "--conditions", "t_air_c=33,rh_pct=30,wind_ms=1.5",
                 "--no-reasons", "--spacing", "10", "-o", str(root / "routes")]) == 0
    return root, session.name


def test_map_of_real_route_predictions_and_walks(demo_outputs, demo_dir):
    root, walk_id = demo_outputs
    out = root / "map.html"
    assert main(["map", str(root / "routes"), "--scene", str(demo_dir / "scene.geojson"),
                 "--scheme", str(demo_dir / "schemes" / "canopy-placa.geojson"), "--walk", str(root / "walks"),
                 "-o", str(out)]) == 0
    data = S.page_data(out.read_text())
    label = json.loads((demo_dir / "schemes" / "canopy-placa.geojson").read_text())["walkcomfort"]["label"]
    assert [s["label"] for s in data["schemes"]] == ["base scene (no edits)", label]  # the routes stage's base label
    assert [d["label"] for d in data["routes"]["deps"]] == ["15:00"]  # local time
    assert [w["walk"] for w in data["walks"]] == [walk_id]
    assert any(f["e"] == "add" for f in data["scenes"]["canopy-placa"])  # the scheme's added canopy is marked
    assert data["routes"]["combos"]["base"][0]["summ"][0]  # summary.parquet beside the points reached the popups
    ctx = data["context"]
    assert ctx["date"] == "Tue 14 Jul 2026" and "conditions" in ctx["weather"] and ctx["caveat"]
    assert out.stat().st_size < 1_000_000


def test_session_report_of_a_real_ingest(demo_outputs):
    root, walk_id = demo_outputs
    assert main(["report", str(root / "walks")]) == 0
    page = (root / "walks" / walk_id / "session_report.html").read_text()
    assert f"Session {walk_id}" in page and "all rows accounted for" in page
    assert "<td>gps</td><td>gps</td>" in page  # the per-source table from the real qa.json
