"""The route map in a real headless Chromium (Debian's package, driven by Playwright).

Every page is served from a loopback server (or opened as a file with networking off);
Leaflet's CDN URLs are answered from the packaged files and any other request is aborted
and must not happen at all.
"""

from __future__ import annotations

import io
import shutil

import _report_synth as S
import pytest

from walkcomfort.report import map as R
from walkcomfort.report import offline as O
from walkcomfort.report import palette as P

pytestmark = pytest.mark.browser

READY = "html[data-walkcomfort-ready]"


def _open(browser, served, name, width=1280, height=860):
    browser.allowed_origin = served.origin
    page = browser.new_page(width, height)
    page.goto(served.url(name))
    page.wait_for_selector(READY, timeout=15_000)
    return page


def _click_path(page, locator):
    """Click the middle of an SVG path as a person would (on the stroke, not the box centre)."""
    x, y = locator.evaluate("""p => { const l = p.getTotalLength(); const pt = p.getPointAtLength(l / 2);
        const m = p.getScreenCTM(); return [pt.x * m.a + pt.y * m.c + m.e, pt.x * m.b + pt.y * m.d + m.f]; }""")
    page.mouse.click(x, y)


def _strokes(page, selector):
    return page.locator(selector).evaluate_all("els => els.map(e => e.getAttribute('stroke'))")


def _clean(browser):
    assert browser.console_errors == [], browser.console_errors
    assert browser.console_warnings == [], browser.console_warnings
    assert browser.page_errors == [], browser.page_errors
    assert browser.dialogs == [], browser.dialogs
    assert browser.blocked == [], browser.blocked


def _map(**kw):
    pred = S.predictions(schemes=("base", "trees"))
    args = {"scene": S.scene(), "schemes": [S.scheme()], "walks": [S.timeline(note=S.XSS_NOTE)],
            "summaries": S.summaries(pred), "comparison": S.comparison(pred, half_width_min=0.2),
            "network": S.network_layers(), "network_times": "2 times on 1 day(s)", "timezone": "Europe/Madrid",
            "context": {"site": "Invented square", "weather": "stated conditions", "walker": "age 25-34"}}
    args.update(kw)
    return R.route_map(pred, **args)


@pytest.fixture
def map_page(tmp_path):
    R.write_map(_map(), tmp_path / "map.html")
    return "map.html"


def test_one_scheme_and_departure_at_a_time_and_the_legend_follows(browser, served, map_page, artifacts_dir):
    page = _open(browser, served, map_page)
    assert browser.served_assets == []  # Leaflet is inlined by default
    state = "() => [walkcomfortState.scheme, walkcomfortState.dep, walkcomfortState.colouring]"
    # opens on the stated view: the hottest departure, difference of the scheme that helps most
    assert page.evaluate(state) == ["trees", 1, "difference"]
    assert "hottest departure (12:00)" in page.locator(".wc-title-box").inner_text()
    assert page.locator(".wc-status").inner_text().startswith("Showing: More street trees · departing 12:00")
    # one route drawn (one scheme x departure): its points are those of one payload
    n_diff = page.locator("path.wc-seg-diff").count()
    assert n_diff >= 1 and page.locator("path.wc-seg-comfort").count() == 0
    assert set(_strokes(page, "path.wc-seg-diff")) <= set(P.DIFF_STOPS)
    assert set(_strokes(page, "path.wc-seg-diff")) & {P.DIFF_STOPS[3], P.DIFF_STOPS[4]}  # the trees help
    assert page.locator('.wc-sec[data-kind="routes-diff"]').is_visible()
    page.screenshot(path=str(artifacts_dir / "map_difference_desktop.png"))
    # exactly one colouring at a time: radio buttons
    radios = page.locator("input[name=wc-colouring]")
    assert radios.count() == 4
    page.locator("input[name=wc-colouring][value=comfort]").check()
    page.wait_for_function("() => document.querySelectorAll('path.wc-seg-comfort').length > 0")
    assert page.locator("path.wc-seg-diff").count() == 0
    assert set(_strokes(page, "path.wc-seg-comfort")) <= set(P.COMFORT_COLOURS.values())
    assert page.locator('.wc-sec[data-kind="routes-comfort"]').is_visible()
    assert page.locator('.wc-sec[data-kind="routes-diff"]').count() == 0
    page.locator("input[name=wc-colouring][value=utci]").check()
    page.wait_for_function("() => document.querySelectorAll('path.wc-seg-utci').length > 0")
    assert page.locator("path.wc-seg-comfort").count() == 0
    # the legend lists only the UTCI bands on the map now
    bands_now = page.evaluate("() => new Set(walkcomfortState && document.querySelectorAll('path.wc-seg-utci') ? "
                              "Array.from(document.querySelectorAll('path.wc-seg-utci')).map(e => e.getAttribute('stroke')) : []).size")
    assert page.locator('.wc-sec[data-kind="routes-utci"] .wc-key').count() >= bands_now
    # switching the departure redraws one departure: the colours change with the hotter hour
    before = _strokes(page, "path.wc-seg-utci")
    page.locator(".wc-step").first.click()  # earlier
    page.wait_for_function("() => walkcomfortState.dep === 0")
    assert page.locator(".wc-dep-label").inner_text() == "09:00"
    assert _strokes(page, "path.wc-seg-utci") != before
    # switching the scheme: the base cannot show a difference, and says so
    page.locator("select.wc-scheme").select_option("base")
    page.locator("input[name=wc-colouring][value=difference]").check()
    page.wait_for_function("() => walkcomfortState.scheme === 'base' && walkcomfortState.colouring === 'difference'")
    assert "Pick a scheme other than the base" in page.locator(".wc-legend").inner_text()
    page.locator("select.wc-scheme").select_option("trees")
    page.wait_for_function("() => document.querySelectorAll('path.wc-seg-diff').length > 0")
    # the measure of the difference is one choice
    page.locator("select.wc-metric").select_option("utci")
    page.wait_for_function("() => walkcomfortState.metric === 'utci'")
    assert "UTCI" in page.locator('.wc-sec[data-kind="routes-diff"] h4').inner_text()
    _clean(browser)


def test_difference_view_on_streets_marks_gains_and_no_change(browser, served, map_page, artifacts_dir):
    page = _open(browser, served, map_page)
    page.locator("input.wc-check[value=streets], .wc-check input[value=streets]").first.check()
    page.wait_for_function("() => document.querySelectorAll('path.wc-street').length === 12")
    strokes = _strokes(page, "path.wc-street")
    # the street that gains 2 h is an improvement, the unchanged one is "no change" (grey, dashed)
    assert strokes.count(P.DIFF_STOPS[P.DIFF_NONE]) >= 4
    assert set(strokes) & {P.DIFF_STOPS[3], P.DIFF_STOPS[4]}
    assert set(strokes) & {P.DIFF_STOPS[0], P.DIFF_STOPS[1]}
    dashed = page.locator("path.wc-street.wc-none").evaluate_all("els => els.map(e => e.getAttribute('stroke-dasharray'))")
    assert dashed and all(d for d in dashed)
    legend = page.locator('.wc-sec[data-kind="streets"]').inner_text()
    assert "2 times on 1 day(s)" in legend and "no change" in legend
    # a street popup: names the street as text (markup-like name), the hours covered, the change
    page.mouse.move(640, 840)
    _click_path(page, page.locator("path.wc-street-k4, path.wc-street-k3").first)
    popup = page.locator(".leaflet-popup-content .wc-popup")
    popup.wait_for(timeout=5_000)
    text = popup.inner_text()
    assert "<img" in text and "Against the base" in text and "2 times on 1 day(s)" in text
    assert "Expected comfortable" in text
    assert page.evaluate("typeof window.__pwned") == "undefined"
    page.screenshot(path=str(artifacts_dir / "map_streets_difference.png"))
    _clean(browser)


def test_route_popup_states_date_time_and_reasons(browser, served, map_page, artifacts_dir):
    page = _open(browser, served, map_page)
    page.locator("input[name=wc-colouring][value=comfort]").check()
    page.wait_for_function("() => document.querySelectorAll('path.wc-seg-comfort').length > 0")
    _click_path(page, page.locator("path.wc-seg-comfort").nth(0))
    popup = page.locator(".leaflet-popup-content .wc-popup")
    popup.wait_for(timeout=5_000)
    text = popup.inner_text()
    for word in ("Tue 14 Jul 2026, 12:", "(Europe/Madrid)", "Most likely", "chance comfortable", "UTCI",
                 "Why, in the model's terms", "Whole walk", "Heat dose", "42\u00a0°C·min", "Against the base",
                 "interval"):
        assert word in text, (word, text)
    page.wait_for_function("() => getComputedStyle(document.querySelector('.leaflet-popup')).opacity === '1'")
    page.screenshot(path=str(artifacts_dir / "map_popup.png"))
    _clean(browser)


@pytest.mark.parametrize("csp", [True, False], ids=["with-csp", "escaping-alone"])
def test_hostile_text_everywhere_runs_nothing(browser, served, tmp_path, csp):
    hostile = S.XSS_LABEL + " " + S.XSS_NOTE + " <a href=\"javascript:window.__pwned=8\">x</a>"
    fmap = _map(schemes=[S.scheme(label=hostile)], walks=[S.timeline(note=hostile)], title=hostile,
                context={k: hostile for k in ("site", "date", "weather", "design_day", "walker", "model", "caveat")})
    R.write_map(fmap, tmp_path / "label.html", csp=csp)
    page = _open(browser, served, "label.html")
    assert hostile in page.locator(".wc-title-box").inner_text()
    assert page.locator("select.wc-scheme option").nth(1).inner_text() == hostile
    page.locator(".wc-check input[value=votes]").check()
    page.wait_for_function("() => document.querySelectorAll('path.wc-vote').length > 0")
    for i in range(page.locator("path.wc-vote").count()):
        page.evaluate("walkcomfortMap.closePopup()")
        page.wait_for_function("() => !document.querySelector('.leaflet-popup')")
        _click_path(page, page.locator("path.wc-vote").nth(i))
        page.locator(".leaflet-popup-content .wc-popup").first.wait_for(timeout=5_000)
    assert page.locator("a[href^='javascript:'], img, svg image, iframe").count() == 0
    page.wait_for_timeout(300)  # give an injected onerror/onload the chance to fire
    assert page.evaluate("typeof window.__pwned") == "undefined"
    _clean(browser)


def test_default_map_draws_with_networking_disabled(browser, tmp_path, artifacts_dir):
    out = R.write_map(_map(), tmp_path / "offline" / "map.html")
    browser.context.set_offline(True)
    page = browser.new_page()
    page.goto(out.as_uri())
    page.wait_for_selector(READY, timeout=15_000)
    assert page.evaluate("L.version") == "1.9.3"
    assert page.locator("path.wc-seg").count() >= 1
    assert all(u.startswith(("file:", "data:")) for u in browser.requests), browser.requests
    _clean(browser)


def test_online_map_without_network_says_so(browser, tmp_path, artifacts_dir):
    out = R.write_map(_map(), tmp_path / "online" / "map.html", online=True)
    browser.context.set_offline(True)
    browser.context.route(O.CDN_BASE + "**", lambda route: route.abort("internetdisconnected"))
    page = browser.new_page()
    page.goto(out.as_uri())
    page.wait_for_selector(READY, timeout=15_000)
    assert page.locator("#wc-nolib").is_visible()
    assert "did not load" in page.locator("#wc-nolib").inner_text()
    page.screenshot(path=str(artifacts_dir / "map_online_no_network.png"))
    # the failed CDN loads are the expected console errors here, nothing else
    assert all("leaflet" in e.lower() or "ERR_INTERNET_DISCONNECTED" in e or "Failed to load" in e
               for e in browser.console_errors), browser.console_errors
    assert browser.page_errors == []


def _box(page, selector):
    return page.locator(selector).bounding_box()


def test_phone_panels_fold_and_leave_the_map_visible(browser, served, map_page, artifacts_dir):
    page = _open(browser, served, map_page, width=390, height=844)
    page.screenshot(path=str(artifacts_dir / "map_phone_folded.png"))
    area = 390 * 844
    covered = sum(b["width"] * b["height"] for b in (_box(page, s) for s in (".wc-legend", ".wc-controls", ".wc-title-box")))
    assert covered <= 0.30 * area, covered / area
    # unfold the controls: they fit the screen and work
    page.locator(".wc-controls .wc-fold").click()
    assert page.locator("select.wc-scheme").is_visible()
    box = _box(page, ".wc-controls")
    assert box["x"] >= 0 and box["x"] + box["width"] <= 390
    page.screenshot(path=str(artifacts_dir / "map_phone_controls.png"))
    _clean(browser)


def test_printed_map_has_the_title_block_and_no_zoom_buttons(browser, served, map_page, tmp_path):
    from pypdf import PdfReader

    page = _open(browser, served, map_page)
    page.emulate_media(media="print")
    assert not page.locator(".leaflet-control-zoom").is_visible()
    assert not page.locator(".wc-controls").is_visible()
    assert page.locator(".wc-title-box .wc-context").is_visible() and page.locator(".wc-legend .wc-sec").first.is_visible()
    pdf = page.pdf(format="A4", landscape=True, print_background=True)
    text = "\n".join(p.extract_text() for p in PdfReader(io.BytesIO(pdf)).pages)
    assert "Invented square" in text and "Legend" in text
    assert "Scheme, time and colour" not in text and "+" not in text.split("Legend")[0][:5]
    _clean(browser)


def test_local_tile_folder_and_named_provider(browser, served, tmp_path, artifacts_dir):
    import math

    from PIL import Image, ImageDraw

    img = Image.new("RGB", (256, 256), (236, 233, 225))
    ImageDraw.Draw(img).rectangle([0, 0, 255, 255], outline=(190, 186, 175))
    tiles = tmp_path / "tiles"
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
    out = R.write_map(R.route_map(S.predictions(), tiles=tiles, attribution="Invented survey tiles", max_zoom=18),
                      tmp_path / "site" / "map.html")
    browser.context.set_offline(True)
    page = browser.new_page()
    page.goto(out.as_uri())
    page.wait_for_selector(READY, timeout=15_000)
    page.wait_for_function("() => Array.from(document.querySelectorAll('img.leaflet-tile')).some(i => i.complete && i.naturalWidth > 0)",
                           timeout=10_000)
    assert "Invented survey tiles" in page.locator(".leaflet-control-attribution").inner_text()
    browser.console_errors = [e for e in browser.console_errors if "ERR_FILE_NOT_FOUND" not in e]
    _clean(browser)
    shutil.rmtree(tiles)


def test_named_tile_provider_passes_the_page_policy(browser, served, tmp_path, artifacts_dir):
    from PIL import Image

    buf = io.BytesIO()
    Image.new("RGB", (256, 256), (222, 226, 214)).save(buf, format="PNG")
    tiles_seen = []

    def tile(route):
        tiles_seen.append(route.request.url)
        route.fulfill(status=200, body=buf.getvalue(), content_type="image/png",
                      headers={"Access-Control-Allow-Origin": "*"})

    browser.context.route("https://tile.openstreetmap.org/**", tile)
    R.write_map(R.route_map(S.predictions(), tiles="osm"), tmp_path / "osm.html", online=True)
    page = _open(browser, served, "osm.html")
    page.wait_for_function("() => document.querySelectorAll('img.leaflet-tile-loaded').length > 0", timeout=10_000)
    assert tiles_seen and all(u.startswith("https://tile.openstreetmap.org/") for u in tiles_seen)
    assert {O.cdn_url("leaflet.css"), O.cdn_url("leaflet.js")} <= set(browser.served_assets)
    assert "OpenStreetMap contributors" in page.locator(".leaflet-control-attribution").inner_text()
    _clean(browser)
