"""The compact city map layer: legend fields only, rounded, merged when too big, under its budget, drawn by Chromium."""

from __future__ import annotations

import json
import os
import shutil
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from walkcomfort.errors import InputError
from walkcomfort.network.maplayer import BUDGET_BYTES, city_map_layer, compact_json, write_city_map_layer
from walkcomfort.network.segments import network_from_geojson
from walkcomfort.network.synthetic import grid_network


def _summary(net, schemes=("base", "trees"), seed=1, constant=False):
    rng = np.random.default_rng(seed)
    frames = []
    for s in schemes:
        comf = np.full(net.n_segments, 3.0) if constant else rng.integers(0, 29, net.n_segments) / 2.0
        d = np.nan if s == "base" else (np.full(net.n_segments, 1.0) if constant
                                        else rng.integers(-4, 9, net.n_segments) / 2.0)
        df = pd.DataFrame({"comfortable_h": comf, "d_comfortable_h": d, "mean_utci_c": 30.0},
                          index=net.segments.index.rename("segment_id"))
        df["scheme"] = s
        frames.append(df.set_index("scheme", append=True))
    return pd.concat(frames).sort_index()


@pytest.fixture(scope="module")
def city():
    """About 8,000 segments of 50 m (a 46 x 46 street grid of 100 m blocks)."""
    net = network_from_geojson(grid_network(46, 46, 100.0), segment_length_m=50.0, spacing_m=10.0)
    return net, _summary(net, ("base", "trees", "canopy", "awnings", "pergola"))


def test_legend_fields_only_rounded_and_said_what_was_aggregated():
    net = network_from_geojson(grid_network(3, 3, 100.0), segment_length_m=50.0)
    summary = _summary(net)
    layer = city_map_layer(summary, net)
    feats = layer["features"]
    assert len(feats) == net.n_segments == layer["walkcomfort"]["segments"]
    f = next(f for f in feats if f["properties"]["id"] == net.segments.index[0])
    assert set(f["properties"]) == {"id", "base", "trees"}  # no UTCI, names, or other summary columns
    seg = net.segments.index[0]
    assert f["properties"]["base"] == summary.loc[(seg, "base"), "comfortable_h"]
    assert f["properties"]["trees"] == summary.loc[(seg, "trees"), "d_comfortable_h"]
    assert all(round(c, 5) == c for xy in f["geometry"]["coordinates"] for c in xy)
    assert len(f["geometry"]["coordinates"]) == 2  # a straight segment simplifies to its ends
    meta = layer["walkcomfort"]
    assert "one line per segment" in meta["aggregation"] and "Parquet" in meta["aggregation"]
    assert meta["fields"]["trees"].startswith("change in comfortable hours")
    assert meta["bytes"] == pytest.approx(len(compact_json(layer)), abs=40)


def test_over_budget_merges_equal_runs_of_a_street_then_refuses():
    net = network_from_geojson(grid_network(3, 3, 100.0), segment_length_m=25.0)
    summary = _summary(net, constant=True)
    full = city_map_layer(summary, net)
    merged = city_map_layer(summary, net, budget_bytes=len(compact_json(full)) - 100)
    # equal values everywhere: each street becomes one line; every street keeps its ends
    assert len(merged["features"]) == net.segments["street_id"].nunique() < len(full["features"])
    assert "merged" in merged["walkcomfort"]["aggregation"]
    first = merged["features"][0]
    assert ".." in first["properties"]["id"] and len(first["geometry"]["coordinates"]) == 2
    with pytest.raises(InputError, match="needs .* bytes, more than its budget of 100"):
        city_map_layer(summary, net, budget_bytes=100)


def test_eight_thousand_segments_fit_the_budget(city, tmp_path):
    net, summary = city
    assert net.n_segments >= 8000
    path = write_city_map_layer(tmp_path, summary, net)
    size = path.stat().st_size
    assert size <= BUDGET_BYTES
    layer = json.loads(path.read_text())
    assert layer["walkcomfort"]["features"] == net.n_segments  # fits without merging
    assert size / net.n_segments < 260  # bytes per segment, five schemes


def _chromium() -> str:
    path = os.environ.get("WALKCOMFORT_CHROMIUM", "/usr/bin/chromium")
    if not Path(path).exists() and shutil.which(path) is None:
        pytest.fail(f"Chromium not found at {path!r}: apt-get install chromium (or set WALKCOMFORT_CHROMIUM)",
                    pytrace=False)
    return path


@pytest.mark.browser
def test_chromium_draws_the_eight_thousand_segment_layer(city, tmp_path):
    from playwright.sync_api import sync_playwright
    from xstatic.pkg import leaflet

    net, summary = city
    path = write_city_map_layer(tmp_path, summary, net)
    data = Path(leaflet.BASE_DIR)
    html = ("<!doctype html><html><head><meta charset='utf-8'><style>" + (data / "leaflet.css").read_text()
            + "html,body,#m{height:100%;margin:0}</style></head><body><div id='m'></div><script>"
            + (data / "leaflet.js").read_text() + "</script><script>const layer = " + path.read_text()
            + ";\nconst t0 = performance.now();\nconst m = L.map('m', {preferCanvas: true});\n"
            "const colour = v => v >= 8 ? '#1a9850' : v >= 4 ? '#91cf60' : v >= 2 ? '#fee08b' : '#d73027';\n"
            "const g = L.geoJSON(layer, {style: f => ({color: colour(f.properties.base), weight: 2})}).addTo(m);\n"
            "m.fitBounds(g.getBounds());\nwindow.drawn = {n: g.getLayers().length, ms: performance.now() - t0};\n"
            "</script></body></html>")
    page_file = tmp_path / "layer.html"
    page_file.write_text(html, encoding="utf-8")
    errors = []
    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=_chromium(), headless=True,
                                     args=["--no-sandbox", "--disable-gpu", "--disable-background-networking"])
        try:
            page = browser.new_page(viewport={"width": 900, "height": 700})
            page.on("pageerror", lambda e: errors.append(str(e)))
            page.route("**/*", lambda r: r.continue_() if r.request.url.startswith("file:") else r.abort())
            page.goto(page_file.as_uri())
            page.wait_for_function("window.drawn !== undefined", timeout=60_000)
            drawn = page.evaluate("window.drawn")
            page.screenshot(path=str(tmp_path / "layer.png"))
        finally:
            browser.close()
    assert errors == []
    assert drawn["n"] == net.n_segments
    # pixels: the canvas has the legend colours on it (not a blank map)
    from PIL import Image

    img = np.asarray(Image.open(tmp_path / "layer.png").convert("RGB")).reshape(-1, 3)
    greens = np.all(img == [26, 152, 80], axis=1).sum() + np.all(img == [145, 207, 96], axis=1).sum()
    reds = np.all(img == [215, 48, 39], axis=1).sum()
    assert greens > 500 and reds > 500
    if os.environ.get("WALKCOMFORT_KEEP_SCREENSHOTS"):
        shutil.copy(tmp_path / "layer.png", os.environ["WALKCOMFORT_KEEP_SCREENSHOTS"])
