"""The route map in a real headless Chromium (Debian's package, driven by Playwright).

Every page is served from a loopback server; Leaflet's CDN URLs are answered from the
packaged files and any other request is aborted and must not happen at all.
"""

from __future__ import annotations

import shutil

import _report_synth as S
import pytest

from walkcomfort.report import routemap as R

pytestmark = pytest.mark.browser

READY = "html[data-walkcomfort-ready]"


def _open(browser, served, name, width=1280, height=860):
    browser.allowed_origin = served.origin
    page = browser.new_page(width, height)
    page.goto(served.url(name))
    page.wait_for_selector(READY, timeout=15_000)
    return page


def _expand_layers(page):
    page.hover(".leaflet-control-layers")
    page.wait_for_selector(".leaflet-control-layers-expanded", timeout=5_000)


def _toggle(page, label_text):
    label = page.locator(".leaflet-control-layers-overlays label", has_text=label_text).first
    label.locator("input").click()


def _wait_drawn(page, selector):
    # horizontal SVG lines have a zero-height box, so wait on the DOM, not on "visible"
    page.wait_for_function(f"() => document.querySelectorAll({selector!r}).length > 0", timeout=10_000)


def _click_path(page, locator):
    """Click the middle of an SVG path as a person would (on the stroke, not the box centre)."""
    x, y = locator.evaluate("""p => { const l = p.getTotalLength(); const pt = p.getPointAtLength(l / 2);
        const m = p.getScreenCTM(); return [pt.x * m.a + pt.y * m.c + m.e, pt.x * m.b + pt.y * m.d + m.f]; }""")
    page.mouse.click(x, y)


def _clean(browser):
    assert browser.console_errors == [], browser.console_errors
    assert browser.console_warnings == [], browser.console_warnings
    assert browser.page_errors == [], browser.page_errors
    assert browser.dialogs == [], browser.dialogs
    assert browser.blocked == [], browser.blocked


@pytest.fixture
def map_page(tmp_path):
    pred = S.predictions()
    fmap = R.route_map(pred, scene=S.scene(), schemes=[S.scheme()], walks=[S.timeline(note=S.XSS_NOTE)],
                       summaries=S.summaries(pred), timezone="Europe/Madrid")
    R.write_map(fmap, tmp_path / "map.html")
    return "map.html"


def test_layers_exist_toggle_and_legend_follows(browser, served, map_page, artifacts_dir):
    page = _open(browser, served, map_page)
    served_assets = set(browser.served_assets)
    assert {R._offline.cdn_url("leaflet.css"), R._offline.cdn_url("leaflet.js")} <= served_assets
    assert served_assets <= {R._offline.cdn_url(n) for n in ("leaflet.css", "leaflet.js", "images/layers.png",
                                                             "images/layers-2x.png")}
    _expand_layers(page)
    labels = page.locator(".leaflet-control-layers-overlays label").all_inner_texts()
    labels = [t.strip() for t in labels]
    # 2 schemes x 2 departures + 2 colouring switches + 2 scenes + votes + errors
    assert len(labels) == 10, labels
    assert "baseline · departing 09:00" in labels
    assert "Model errors (50 m cells)" in labels
    # the first scheme x departure is drawn, coloured by comfort class
    n_comfort = page.locator("path.wc-seg-comfort").count()
    assert n_comfort >= 3
    colours = set(page.locator("path.wc-seg-comfort").evaluate_all("els => els.map(e => e.getAttribute('stroke'))"))
    assert colours <= {"#3e9fd8", "#efc35b", "#6b1d4a"} and len(colours) >= 2
    assert page.locator(".wc-legend").is_visible()
    assert page.locator('.wc-sec[data-kind="comfort"]').is_visible()
    assert not page.locator('.wc-sec[data-kind="utci"]').is_visible()
    # switch the UTCI-band colouring on: the shown route is recoloured and the legend follows
    _toggle(page, R.MODE_LABELS["utci"])
    _wait_drawn(page, "path.wc-seg-utci")
    n_utci = page.locator("path.wc-seg-utci").count()
    assert n_utci >= 2
    assert page.locator('.wc-sec[data-kind="utci"]').is_visible()
    assert not page.locator('.wc-sec[data-kind="comfort"]').is_visible()
    # the legend lists only the UTCI bands that occur on the map
    n_bands = S.predictions()["utci_band"].nunique()
    assert page.locator('.wc-sec[data-kind="utci"] .wc-key').count() == n_bands
    # a second scheme x departure switched on while the colouring is on is recoloured too
    _toggle(page, "More street trees · departing 12:00")
    page.wait_for_function(f"() => document.querySelectorAll('path.wc-seg-utci').length > {n_utci}")
    # ... and drawn on top of it: what a person sees at a segment's middle is the UTCI colouring
    on_top = page.locator("path.wc-seg-utci").evaluate_all("""els => els.map(p => {
        const pt = p.getPointAtLength(p.getTotalLength() / 2), m = p.getScreenCTM();
        const hit = document.elementFromPoint(pt.x * m.a + pt.y * m.c + m.e, pt.x * m.b + pt.y * m.d + m.f);
        return hit && hit.classList.contains('wc-seg-utci'); })""")
    assert sum(on_top) >= 0.8 * len(on_top), on_top
    _expand_layers(page)
    page.screenshot(path=str(artifacts_dir / "routemap_utci_on.png"))
    _toggle(page, "More street trees · departing 12:00")
    # ... and off again
    _toggle(page, R.MODE_LABELS["utci"])
    page.wait_for_function("() => document.querySelectorAll('path.wc-seg-utci').length === 0")
    assert not page.locator('.wc-sec[data-kind="utci"]').is_visible()
    assert page.locator('.wc-sec[data-kind="comfort"]').is_visible()
    _toggle(page, R.MODE_LABELS["shade"])
    _wait_drawn(page, "path.wc-seg-shade")
    assert page.locator('.wc-sec[data-kind="shade"]').is_visible()
    _toggle(page, R.MODE_LABELS["shade"])
    # switching the comfort layer off removes its segments
    _toggle(page, "baseline · departing 09:00")
    page.wait_for_function("() => document.querySelectorAll('path.wc-seg-comfort').length === 0")
    _toggle(page, "More street trees · departing 12:00")
    _wait_drawn(page, "path.wc-seg-comfort")
    _toggle(page, "Model errors (50 m cells)")
    _wait_drawn(page, "path.wc-error-cell")
    assert page.locator('.wc-sec[data-kind="errors"]').is_visible()
    page.mouse.move(640, 840)
    page.screenshot(path=str(artifacts_dir / "routemap_scheme_errors.png"))
    _clean(browser)


def test_route_popup_shows_the_point(browser, served, map_page, artifacts_dir):
    page = _open(browser, served, map_page)
    _click_path(page, page.locator("path.wc-seg-comfort").nth(1))
    popup = page.locator(".leaflet-popup-content .wc-popup")
    popup.wait_for(timeout=5_000)
    text = popup.inner_text()
    for word in ("Local time", "(Europe/Madrid)", "Predicted", "p(comfortable)", "UTCI", "Tmrt", "Shade",
                 "Top reasons", "Whole walk", "Heat dose", "42\u00a0°C·min"):
        assert word in text, (word, text)
    page.wait_for_function("() => getComputedStyle(document.querySelector('.leaflet-popup')).opacity === '1'")
    page.screenshot(path=str(artifacts_dir / "routemap_popup.png"))
    _clean(browser)


def test_vote_note_with_script_payload_runs_nothing(browser, served, map_page, artifacts_dir):
    page = _open(browser, served, map_page)
    votes = page.locator("path.wc-vote")
    assert votes.count() == 5
    found = False
    for i in range(votes.count()):
        page.evaluate("walkcomfortMap.closePopup()")
        page.wait_for_function("() => !document.querySelector('.leaflet-popup')")
        _click_path(page, votes.nth(i))
        popup = page.locator(".leaflet-popup-content .wc-popup")
        popup.wait_for(timeout=5_000)
        if "Note:" in popup.inner_text() and "__pwned" in popup.inner_text():
            found = True
            break
    assert found
    # the payload is shown as text, exactly as typed
    assert page.locator(".wc-note", has_text="window.__pwned=1").inner_text() == S.XSS_NOTE
    assert page.locator(".leaflet-popup-content img, .leaflet-popup-content svg, "
                        ".leaflet-popup-content script").count() == 0
    page.wait_for_timeout(300)  # give an injected onerror/onload the chance to fire
    assert page.evaluate("typeof window.__pwned") == "undefined"
    page.screenshot(path=str(artifacts_dir / "routemap_vote_note_payload.png"))
    _clean(browser)


@pytest.mark.parametrize("csp", [True, False], ids=["with-csp", "escaping-alone"])
def test_scheme_label_payload_runs_nothing(browser, served, tmp_path, csp):
    fmap = R.route_map(S.predictions(schemes=("trees",)), scene=S.scene(), schemes=[S.scheme(label=S.XSS_LABEL)],
                       walks=[S.timeline(note=S.XSS_NOTE)])
    R.write_map(fmap, tmp_path / "label.html", csp=csp)
    page = _open(browser, served, "label.html")
    _expand_layers(page)
    labels = [t.strip() for t in page.locator(".leaflet-control-layers-overlays label").all_inner_texts()]
    assert f"{S.XSS_LABEL} · departing 07:00" in labels  # shown literally (UTC)
    assert page.locator(".leaflet-control-layers img, .leaflet-control-layers svg").count() == 0
    page.locator("path.wc-seg-comfort").first.hover(force=True)
    _click_path(page, page.locator("path.wc-vote").nth(2))
    page.wait_for_timeout(300)
    assert page.evaluate("typeof window.__pwned") == "undefined"
    _clean(browser)


def test_offline_map_renders_with_networking_disabled(browser, tmp_path, artifacts_dir):
    tiles = tmp_path / "tiles"
    fmap = R.route_map(S.predictions(), scene=S.scene(), schemes=[S.scheme()], walks=[S.timeline()],
                       timezone="Europe/Madrid")
    out = R.write_map(fmap, tmp_path / "offline" / "map.html", offline=True)
    browser.context.set_offline(True)
    page = browser.new_page()
    page.goto(out.as_uri())
    page.wait_for_selector(READY, timeout=15_000)
    assert page.evaluate("typeof L") == "object" and page.evaluate("L.version") == "1.9.3"
    assert page.locator("path.wc-seg-comfort").count() >= 3
    assert page.locator(".wc-legend").is_visible()
    # the layer-control icon comes from an inlined image, not a request
    bg = page.locator(".leaflet-control-layers-toggle").evaluate("e => getComputedStyle(e).backgroundImage")
    assert bg.startswith('url("data:image/png;base64,')
    assert all(u.startswith(("file:", "data:")) for u in browser.requests), browser.requests
    page.screenshot(path=str(artifacts_dir / "routemap_offline.png"))
    _clean(browser)
    assert not tiles.exists()


def test_offline_map_with_local_tile_folder(browser, tmp_path, artifacts_dir):
    # a tiny local tile pyramid: every tile the view needs is one grey PNG with a grid line
    from PIL import Image, ImageDraw

    img = Image.new("RGB", (256, 256), (236, 233, 225))
    ImageDraw.Draw(img).rectangle([0, 0, 255, 255], outline=(190, 186, 175))
    tiles = tmp_path / "tiles"
    import math

    lat, lon = S.LAT0, S.LON0
    for z in (16, 17, 18):
        n = 2 ** z
        x0 = int((lon + 180) / 360 * n)
        y0 = int((1 - math.asinh(math.tan(math.radians(lat))) / math.pi) / 2 * n)
        for dx in range(-3, 5):
            for dy in range(-4, 4):
                p = tiles / str(z) / str(x0 + dx) / f"{y0 + dy}.png"
                p.parent.mkdir(parents=True, exist_ok=True)
                img.save(p)
    fmap = R.route_map(S.predictions(), tiles=tiles, attribution="Invented survey tiles", max_zoom=18)
    out = R.write_map(fmap, tmp_path / "site" / "map.html", offline=True)
    browser.context.set_offline(True)
    page = browser.new_page()
    page.goto(out.as_uri())
    page.wait_for_selector(READY, timeout=15_000)
    page.wait_for_function("() => Array.from(document.querySelectorAll('img.leaflet-tile')).some(i => i.complete && i.naturalWidth > 0)",
                           timeout=10_000)
    assert "Invented survey tiles" in page.locator(".leaflet-control-attribution").inner_text()
    loaded = page.evaluate("Array.from(document.querySelectorAll('img.leaflet-tile-loaded')).length")
    assert loaded >= 1
    page.screenshot(path=str(artifacts_dir / "routemap_local_tiles.png"))
    # tiles outside the little pyramid 404 as file loads; they are not console errors of ours
    browser.console_errors = [e for e in browser.console_errors if "ERR_FILE_NOT_FOUND" not in e]
    _clean(browser)
    shutil.rmtree(tiles)


def test_named_tile_provider_passes_the_page_policy(browser, served, tmp_path, artifacts_dir):
    # tiles from a provider are allowed by the page's CSP and credited; here the provider is
    # stood in for by a local answer (no request leaves the machine)
    import io

    from PIL import Image

    buf = io.BytesIO()
    Image.new("RGB", (256, 256), (222, 226, 214)).save(buf, format="PNG")
    tiles_seen = []

    def tile(route):
        tiles_seen.append(route.request.url)
        route.fulfill(status=200, body=buf.getvalue(), content_type="image/png",
                      headers={"Access-Control-Allow-Origin": "*"})

    browser.context.route("https://tile.openstreetmap.org/**", tile)
    R.write_map(R.route_map(S.predictions(), tiles="osm"), tmp_path / "osm.html")
    page = _open(browser, served, "osm.html")
    page.wait_for_function("() => document.querySelectorAll('img.leaflet-tile-loaded').length > 0", timeout=10_000)
    assert tiles_seen and all(u.startswith("https://tile.openstreetmap.org/") for u in tiles_seen)
    assert "OpenStreetMap contributors" in page.locator(".leaflet-control-attribution").inner_text()
    page.screenshot(path=str(artifacts_dir / "routemap_tile_provider.png"))
    _clean(browser)


@pytest.fixture
def network_page(tmp_path):
    fmap = R.route_map(S.predictions(), schemes=[S.scheme()], network=S.network_layers(), timezone="Europe/Madrid")
    R.write_map(fmap, tmp_path / "network.html")
    return "network.html"


def test_network_layers_exist_toggle_and_explain_themselves(browser, served, network_page, artifacts_dir):
    page = _open(browser, served, network_page)
    _expand_layers(page)
    labels = [t.strip() for t in page.locator(".leaflet-control-layers-overlays label").all_inner_texts()]
    base_label = f"Streets · {R._base_label('base')} · comfortable hours"
    change_label = "Streets · More street trees · change in comfortable hours"
    assert base_label in labels and change_label in labels
    # over predicted routes the streets start switched off
    assert page.locator("path.wc-street").count() == 0
    assert not page.locator('.wc-sec[data-kind="network"]').is_visible()
    _toggle(page, base_label)
    _wait_drawn(page, "path.wc-street")
    assert page.locator("path.wc-street").count() == 12
    colours = set(page.locator("path.wc-street").evaluate_all("els => els.map(e => e.getAttribute('stroke'))"))
    hours_colours = {R.P.ramp(R.P.NETWORK_HOURS_STOPS, i / (R.NETWORK_BINS - 1)) for i in range(R.NETWORK_BINS)}
    assert colours <= hours_colours and len(colours) >= 3
    assert page.locator('.wc-sec[data-kind="network"]').is_visible()
    assert page.locator('.wc-sec[data-kind="network"] .wc-key').count() == R.NETWORK_BINS
    # the change layer: gained, lost and unchanged streets in their own colours, its own legend
    _toggle(page, base_label)
    page.wait_for_function("() => document.querySelectorAll('path.wc-street').length === 0")
    assert not page.locator('.wc-sec[data-kind="network"]').is_visible()
    _toggle(page, change_label)
    _wait_drawn(page, "path.wc-street")
    colours = set(page.locator("path.wc-street").evaluate_all("els => els.map(e => e.getAttribute('stroke'))"))
    assert {R.P.NETWORK_CHANGE_STOPS[4], R.P.NETWORK_CHANGE_STOPS[2]} <= colours
    assert colours & {R.P.NETWORK_CHANGE_STOPS[0], R.P.NETWORK_CHANGE_STOPS[1]}
    assert page.locator('.wc-sec[data-kind="network-change"]').is_visible()
    # a popup names the street as text (the first street's name is markup-like) and the change
    page.mouse.move(640, 840)
    _click_path(page, page.locator("path.wc-street-k4").first)
    popup = page.locator(".leaflet-popup-content .wc-popup")
    popup.wait_for(timeout=5_000)
    text = popup.inner_text()
    assert S.XSS_LABEL.split(" ")[0] in text and "<img" in text  # shown, not run
    assert "Against the base" in text and "+2.0" in text
    assert page.evaluate("typeof window.__pwned") == "undefined"
    page.screenshot(path=str(artifacts_dir / "routemap_network_change.png"))
    _clean(browser)
