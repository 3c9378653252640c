"""The placement advisor's sites on the route map, in a real headless Chromium."""

from __future__ import annotations

import _report_synth as S
import pytest

from walkcomfort.report import map as R

pytestmark = pytest.mark.browser

READY = "html[data-walkcomfort-ready]"


def _sites() -> dict:
    """Three chosen sites and two runner-ups near the synthetic routes (as advise writes them)."""
    pts = S.predictions()
    lat, lon = float(pts["lat"].median()), float(pts["lon"].median())
    feats = []
    for k in range(5):
        chosen = k < 3
        props = {"status": "chosen" if chosen else "runner-up", "site_id": f"r{k:04d}", "intervention": "tree-medium",
                 "marginal_gain": 2.0 - 0.3 * k}
        if chosen:
            props["rank"] = k + 1
        feats.append({"type": "Feature", "properties": props,
                      "geometry": {"type": "Point", "coordinates": [lon + 0.0002 * k, lat + 0.0001]}})
    return {"type": "FeatureCollection", "walkcomfort": {"placement": "heat-dose", "unit": "°C·min avoided"},
            "features": feats}


def test_chosen_sites_are_numbered_in_order_and_runner_ups_drawn_faded(browser, served, tmp_path, artifacts_dir):
    pts = S.predictions()
    fmap = R.route_map(pts, scene=S.scene(), schemes=[S.scheme()], sites=_sites())
    R.write_map(fmap, tmp_path / "map.html")
    browser.allowed_origin = served.origin
    page = browser.new_page(1280, 860)
    page.goto(served.url("map.html"))
    page.wait_for_selector(READY, timeout=15_000)
    ranks = page.locator(".wc-site-rank")
    assert ranks.count() == 3
    assert sorted(ranks.all_inner_texts()) == ["1", "2", "3"]
    assert page.locator(".wc-site-runner").count() == 2
    assert "Placement sites" in page.locator(".wc-sec[data-kind=sites]").inner_text()
    page.screenshot(path=str(artifacts_dir / "map_placement_sites.png"))
    # the layer can be switched off like every overlay
    page.locator(".wc-overlays input[value=sites]").uncheck()
    assert page.locator(".wc-site-rank").count() == 0


def test_a_file_that_is_not_a_sites_layer_is_one_line(tmp_path):
    from walkcomfort.errors import InputError

    bad = {"type": "FeatureCollection", "features": [{"type": "Feature", "properties": {},
                                                      "geometry": {"type": "Point", "coordinates": [0, 0]}}]}
    with pytest.raises(InputError, match="not a placement site"):
        R.route_map(S.predictions(), sites=bad)
