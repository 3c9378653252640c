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


@pytest.mark.browser
def test_difference_view_of_the_demo_canopy_on_the_streets(tmp_path, demo_dir, browser, served, artifacts_dir):
    """The canopy scheme's street segments under the canopy show as better; far ones as no change."""
    from shapely.geometry import shape

    from walkcomfort.environment.geo import LocalFrame
    from walkcomfort.report import palette as P

    scheme = demo_dir / "schemes" / "canopy-placa.geojson"
    assert main(["network", str(demo_dir / "streets.geojson"),
                 "--scene", str(demo_dir / "scene.geojson"), "--scheme", str(scheme),
        "--weather", str(demo_dir / "weather" / "design-day.csv"), "--logger-wind-height", "1.1",
        "--start", "2026-07-15T13:00", "--end", "2026-07-15T15:00", "--step", "2h",
        "--timezone", "Europe/Madrid", "--out", str(tmp_path / "net")]) == 0
    assert main(["map", "--network", str(tmp_path / "net"), "--scheme", str(scheme), "--timezone", "Europe/Madrid",
                 "-o", str(tmp_path / "demo.html")]) == 0
    data = S.page_data((tmp_path / "demo.html").read_text())
    streets = data["streets"]["canopy-placa"]
    canopy = shape(json.loads(scheme.read_text())["features"][0]["geometry"])
    frame = LocalFrame(canopy.centroid.x, canopy.centroid.y)

    def metres(line):  # distance of a segment's vertices from the canopy's edge
        from shapely.geometry import LineString, Polygon

        lon, lat = zip(*canopy.exterior.coords, strict=True)
        poly = Polygon(list(zip(*frame.project(lon, lat), strict=True)))
        xs, ys = frame.project([p[1] for p in line], [p[0] for p in line])
        return LineString(list(zip(xs, ys, strict=True))).distance(poly)

    dist = [metres(line) for line in streets["c"]]
    near = [i for i, d in enumerate(dist) if d < 2.0]
    far = [i for i, d in enumerate(dist) if d > 150.0]
    assert near and far
    browser.allowed_origin = served.origin  # the server serves this test's folder
    page = browser.new_page(1280, 860)
    page.goto(served.url("demo.html"))
    page.wait_for_selector("html[data-walkcomfort-ready]", timeout=15_000)
    page.locator("select.wc-scheme").select_option("canopy-placa")
    page.locator("input[name=wc-colouring][value=difference]").check()
    page.locator("select.wc-metric").select_option("utci")
    page.wait_for_function("() => walkcomfortState.metric === 'utci' && document.querySelectorAll('path.wc-street').length > 0")
    strokes = page.locator("path.wc-street").evaluate_all("els => els.map(e => e.getAttribute('stroke'))")
    assert len(strokes) == len(streets["c"])
    better = {P.DIFF_STOPS[3], P.DIFF_STOPS[4]}
    assert all(strokes[i] in better for i in near), [strokes[i] for i in near]
    assert all(strokes[i] == P.DIFF_STOPS[P.DIFF_NONE] for i in far), [strokes[i] for i in far]
    page.screenshot(path=str(artifacts_dir / "demo_canopy_difference_streets.png"))
