"""The route map: data per scheme × departure, differences, escaping, size, tiles, determinism, bad input."""

from __future__ import annotations

import html.parser
import re
import warnings

import _report_synth as S
import numpy as np
import pytest

from walkcomfort import _html as htmlsafe
from walkcomfort import columns as C
from walkcomfort.errors import InputError
from walkcomfort.model.heldout_error import model_error_cells
from walkcomfort.report import map as R
from walkcomfort.report.map import routelayer as RL


def _payloads(fmap):
    """Every scheme × departure payload, scheme by scheme, departures in order."""
    return [d for combos in fmap.data["routes"]["combos"].values() for d in combos if d]


@pytest.fixture(scope="module")
def full_map():
    return R.route_map(S.predictions(), scene=S.scene(), schemes=[S.scheme()],
                       walks=[S.timeline(note=S.XSS_NOTE)], timezone="Europe/Madrid")


class _Tags(html.parser.HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags: list[tuple[str, dict]] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))


def _tags(page: str):
    p = _Tags()
    p.feed(page)
    return p.tags


def test_one_payload_per_scheme_and_departure(full_map):
    r = full_map.data["routes"]
    assert [s["name"] for s in r["schemes"]] == ["baseline", "trees"]
    assert [s["label"] for s in r["schemes"]] == ["baseline", "More street trees"]  # label from the scheme file
    # departures in the requested zone: 07:00Z is 09:00 in Madrid in July (CEST, UTC+2)
    assert [d["label"] for d in r["deps"]] == ["09:00", "12:00"]
    assert all(len(v) == 2 and all(v) for v in r["combos"].values())
    assert set(full_map.data["scenes"]) == {"baseline", "trees"}
    # the extra layers start off over predicted routes; alone, they start on
    assert full_map.data["overlays"] == {"scene": True, "streets": False, "votes": False, "errors": False,
                                         "sites": False}  # no advisor sites given
    walk_only = R.route_map(walks=[S.timeline()])
    assert walk_only.data["routes"] is None and walk_only.data["overlays"]["votes"]
    assert walk_only.data["overlays"]["errors"]


def test_difference_from_the_base_per_point_and_opening_view():
    pred = S.predictions(schemes=("base", "trees"))
    comp = S.comparison(pred, half_width_min=0.0)
    fmap = R.route_map(pred, summaries=S.summaries(pred), comparison=comp, timezone="Europe/Madrid")
    r = fmap.data["routes"]
    base, trees = r["combos"]["base"][0], r["combos"]["trees"][0]
    assert "comfort" not in base["d"] and base["dk"] == {}
    # the trees scheme is 2 °C cooler everywhere, more where its extra shade falls (from the table's definition)
    assert min(trees["d"]["utci"]) == 2.0 and max(trees["d"]["utci"]) == pytest.approx(4.7)
    assert set(trees["dk"]["utci"]) <= {3, 4}
    # a zero interval: the comfort threshold falls back to nothing; classes follow the sign
    assert all(k >= 2 for k in trees["dk"]["comfort"])
    # opening view: the hottest departure (12:00 is 4 °C hotter), the scheme that helps most, difference view
    assert r["open"] == {"scheme": "trees", "dep": 1, "colouring": "difference", "metric": "comfort",
                         "gain_min": r["open"]["gain_min"]}
    assert r["open"]["gain_min"] > 0
    assert "hottest departure (12:00)" in fmap.data["context"]["opened"]


def test_comfort_threshold_comes_from_the_comparison_interval():
    pred = S.predictions(schemes=("base", "trees"))
    comp = S.comparison(pred, half_width_min=3.0)
    thr, from_model = RL.comfort_threshold(comp, None)
    # half-width 3 min over a walk of W min: 300/W percentage points (from the definition)
    assert from_model and thr == pytest.approx(300.0 / comp["walk_min"].min())
    assert RL.comfort_threshold(None, None) == (RL.NO_CHANGE["comfort"], False)
    wide = R.route_map(pred, comparison=S.comparison(pred, half_width_min=1e3))
    trees = wide.data["routes"]["combos"]["trees"][0]
    assert set(trees["dk"]["comfort"]) == {2}  # every point within model error
    labels = [k["label"] for k in wide.data["cfg"]["diff"]["comfort"]]
    assert labels[2].startswith("within model error")
    assert R.route_map(pred).data["cfg"]["diff"]["comfort"][2]["label"].startswith("no change")


def test_change_classes_from_the_definition():
    v = np.array([-10.0, -3.0, -0.5, 0.0, 0.5, 3.0, 10.0, np.nan])
    assert RL.change_classes(v, 1.0, 5.0).tolist() == [0, 1, 2, 2, 2, 3, 4, -1]


def test_payload_keeps_colour_boundaries_and_simplifies_straight_runs():
    pred = S.predictions(schemes=("baseline",), departures=("2026-07-14T07:00Z",), n=200)
    fmap = R.route_map(pred, layers=("routes",), timezone="UTC", simplify_m=0.5)
    (data,) = _payloads(fmap)
    assert data["n_points"] == 200
    kept = len(data["lat"])
    assert kept < 100  # straight legs collapse to their ends and the class changes
    # every class change of the input survives at the same place
    src = pred.sort_values(C.DIST_M)
    src_cls = src["comfort_class"].map({c: i for i, c in enumerate(C.COMFORT_CLASSES)}).to_numpy()
    changes_in = int((np.diff(src_cls) != 0).sum())
    changes_out = int((np.diff(np.array(data["cls"])) != 0).sum())
    assert changes_out == changes_in
    by_dist = dict(zip(src[C.DIST_M].round(0), src_cls, strict=False))
    assert all(by_dist[d] == c for d, c in zip(data["dist"], data["cls"], strict=False))
    # popups show local time and the values of the kept point
    first = src.iloc[0]
    assert data["t"][0] == first.name.strftime("%H:%M")
    assert data["utci"][0] == pytest.approx(first[C.UTCI_C], abs=0.05)
    assert data["reasons"][data["r"][0]] == first["reasons"]
    # and no simplification keeps everything
    (full,) = _payloads(R.route_map(pred, layers=("routes",), simplify_m=0.0))
    assert len(full["lat"]) == 200


def test_coordinates_are_rounded():
    fmap = R.route_map(S.predictions(schemes=("a",), departures=("2026-07-14T07:00Z",)), decimals=4,
                       layers=("routes",))
    (data,) = _payloads(fmap)
    assert all(abs(v * 1e4 - round(v * 1e4)) < 1e-6 for v in data["lat"] + data["lon"])


def test_rdp_from_the_definition():
    # points on a straight line: only the ends are needed
    x = np.linspace(0, 100, 21)
    assert R.rdp_keep(x, np.zeros_like(x), 0.1).tolist() == [True] + [False] * 19 + [True]
    # a 2 m bump in the middle exceeds a 1 m tolerance and is kept; a 0.5 m one is dropped
    tent = 1.0 - np.abs(x - 50.0) / 50.0   # a roof shape: only its peak is needed
    assert np.flatnonzero(R.rdp_keep(x, 2.0 * tent, 1.0)).tolist() == [0, 10, 20]
    y = 0.5 * tent  # peak within the tolerance: dropped
    assert np.flatnonzero(R.rdp_keep(x, y, 1.0)).tolist() == [0, 20]
    forced = np.zeros(21, dtype=bool)
    forced[5] = True
    assert np.flatnonzero(R.rdp_keep(x, np.zeros_like(x), 1.0, forced)).tolist() == [0, 5, 20]


def test_user_text_never_becomes_markup(tmp_path):
    fmap = R.route_map(S.predictions(), schemes=[S.scheme(label=S.XSS_LABEL)],
                       walks=[S.timeline(note=S.XSS_NOTE)], scene=S.scene(), title=S.XSS_LABEL,
                       context={"site": S.XSS_NOTE, "walker": S.XSS_LABEL})
    page = R.write_map(fmap, tmp_path / "m.html", online=True).read_text()
    # the payload's markup never appears raw
    for raw in ("<img src=x", "</script><script>window", "<svg onload", "<script>window.__pwned"):
        assert raw not in page
    tags = _tags(page)
    assert not [t for t, a in tags if t in ("img", "svg", "iframe", "object")]
    assert not [(t, a) for t, a in tags if any(k.startswith("on") for k in a)]
    scripts = [a for t, a in tags if t == "script"]
    assert len(scripts) == 3  # Leaflet (linked), the data block, the map's script
    # the text survives as data (escaped for the script context) to be shown as text
    assert "\\u003c/script\\u003e\\u003cscript\\u003ewindow.__pwned=1" in page
    data = S.page_data(page)
    assert data["context"]["site"] == S.XSS_NOTE and data["schemes"][1]["label"] == S.XSS_LABEL


def test_js_json_cannot_leave_the_script_element():
    text = htmlsafe.js_json({"a": "</script><!-- \u2028 & '"})
    assert "<" not in text and ">" not in text and "&" not in text and "\u2028" not in text
    import json

    assert json.loads(text) == {"a": "</script><!-- \u2028 & '"}
    with pytest.raises(ValueError):
        htmlsafe.js_json({"x": float("nan")})


def test_content_security_policy_hashes_every_inline_script(tmp_path, full_map):
    import base64
    import hashlib
    import html

    page = R.write_map(full_map, tmp_path / "m.html").read_text()
    policy = html.unescape(re.search(r'http-equiv="Content-Security-Policy" content="([^"]+)"', page).group(1))
    inline = re.findall(r"<script>(.*?)</script>", page, re.S)
    assert len(inline) == 2  # Leaflet inlined, the map's script (the data block is not run)
    for body in inline:
        digest = base64.b64encode(hashlib.sha256(body.encode()).digest()).decode()
        assert f"'sha256-{digest}'" in policy
    assert "'unsafe-inline'" not in policy.split("script-src", 1)[1].split(";", 1)[0]
    assert "connect-src 'none'" in policy and "https:" not in policy


def test_default_page_references_nothing_outside(tmp_path, full_map):
    page = R.write_map(full_map, tmp_path / "m.html").read_text()
    for t, a in _tags(page):
        for k in ("src", "href"):
            assert not (a.get(k) or "").startswith(("http:", "https:", "//")), (t, a)
    assert "cdn.jsdelivr" not in page and "jquery" not in page.lower() and "bootstrap" not in page.lower()
    # the script and style are the package's static files, read once each
    assert R.page.static_text("map.js") in page and R.page.static_text("map.css") in page
    assert page.count("<style>") == 2  # Leaflet's and ours


def test_online_page_links_only_leaflet_and_says_so_when_it_cannot(tmp_path, full_map):
    page = R.write_map(full_map, tmp_path / "m.html", online=True).read_text()
    urls = [a.get("src") or a.get("href") for t, a in _tags(page) if t in ("script", "link") and
            (a.get("src") or a.get("href"))]
    assert urls == ["https://cdn.jsdelivr.net/npm/leaflet@1.9.3/dist/leaflet.css",
                    "https://cdn.jsdelivr.net/npm/leaflet@1.9.3/dist/leaflet.js"]
    assert 'id="wc-nolib"' in page and "did not load" in page


def test_rendering_is_deterministic(tmp_path):
    a = R.write_map(R.route_map(S.predictions(), scene=S.scene()), tmp_path / "a.html").read_bytes()
    b = R.write_map(R.route_map(S.predictions(), scene=S.scene()), tmp_path / "b.html").read_bytes()
    assert a == b


def test_same_map_written_twice_is_the_same_page(tmp_path):
    fmap = R.route_map(S.predictions(), scene=S.scene(), walks=[S.timeline()])
    a = R.write_map(fmap, tmp_path / "a.html").read_text()
    R.write_map(fmap, tmp_path / "on.html", online=True)
    b = R.write_map(fmap, tmp_path / "b.html").read_text()
    assert a == b


def test_size_budget_warns(tmp_path, full_map):
    with pytest.warns(R.MapSizeWarning, match="budget"):
        R.write_map(full_map, tmp_path / "m.html", size_budget_bytes=10_000)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        R.write_map(full_map, tmp_path / "m.html")  # the default budget holds for this map


@pytest.mark.slow
def test_city_scale_map_stays_small(tmp_path):
    # 40 routes x 3 schemes x 4 departures at 5 m spacing (~192 000 points)
    pred = S.predictions(schemes=("a", "b", "c"), departures=[f"2026-07-14T{h:02d}:00Z" for h in (6, 9, 12, 15)],
                         n=400, routes=[f"r{i}" for i in range(40)])
    assert len(pred) == 192_000
    page = R.write_map(R.route_map(pred, layers=("routes",)), tmp_path / "city.html")
    size = page.stat().st_size
    assert size < R.DEFAULT_SIZE_BUDGET_BYTES, size


def test_tile_sources(tmp_path):
    assert R.tile_source(None) is None and R.tile_source("none") is None
    osm = R.tile_source("osm")
    assert "openstreetmap" in osm.url and "OpenStreetMap" in osm.attribution
    with pytest.raises(InputError, match="attribution"):
        R.tile_source("https://tiles.example/{z}/{x}/{y}.png")
    with pytest.raises(InputError, match="neither"):
        R.tile_source(str(tmp_path / "no-such-folder"))
    folder = tmp_path / "tiles"
    (folder / "16" / "32222").mkdir(parents=True)
    (folder / "16" / "32222" / "24000.png").write_bytes(b"\x89PNG")
    src = R.tile_source(folder, attribution="Invented <b>survey</b>")
    out = tmp_path / "site" / "map.html"
    fmap = R.route_map(S.predictions(), tiles=src)
    page = R.write_map(fmap, out).read_text()
    assert '"../tiles/{z}/{x}/{y}.png"' in page
    assert "Invented &lt;b&gt;survey&lt;/b&gt;" in page.replace("\\u0026", "&").replace("\\u003c", "<")
    assert "img-src data: 'self' file:" in html.unescape(page)


def test_bad_prediction_tables_are_refused():
    pred = S.predictions(schemes=("a",), departures=("2026-07-14T07:00Z",))
    with pytest.raises(InputError, match="lacks column.*scheme"):
        R.route_map(pred.drop(columns=["scheme"]))
    naive = pred.copy()
    naive.index = naive.index.tz_localize(None)
    with pytest.raises(InputError, match="tz-aware"):
        R.route_map(naive)
    bad = pred.copy()
    bad.iloc[3, bad.columns.get_loc("comfort_class")] = "roasting"
    with pytest.raises(InputError, match="row 3"):
        R.route_map(bad)
    nopos = pred.copy()
    nopos.iloc[5, nopos.columns.get_loc(C.LAT)] = np.nan
    with pytest.raises(InputError, match="no lat/lon"):
        R.route_map(nopos)
    with pytest.raises(InputError, match="unknown layer"):
        R.route_map(pred, layers=("routes", "heat"))
    with pytest.raises(InputError, match="IANA"):
        R.route_map(pred, timezone="Mars/Olympus")
    with pytest.raises(InputError, match="nothing to map"):
        R.route_map(None)


def test_class_from_probabilities_when_no_class_column():
    pred = S.predictions(schemes=("a",), departures=("2026-07-14T07:00Z",)).drop(columns=["comfort_class"])
    (data,) = _payloads(R.route_map(pred, layers=("routes",), simplify_m=0))
    probs = pred.sort_values(C.DIST_M)[["p_comfortable", "p_neutral", "p_uncomfortable"]].to_numpy()
    assert data["cls"] == probs.argmax(axis=1).tolist()


def test_scene_layer_marks_scheme_edits():
    fmap = R.route_map(S.predictions(schemes=("trees",), departures=("2026-07-14T07:00Z",)),
                       scene=S.scene(), schemes=[S.scheme()], layers=("routes", "scene"))
    scene = fmap.data["scenes"]["trees"]
    edits = {f["id"]: f["e"] for f in scene}
    assert edits == {"b1": "existing", "t1": "modify", "c1": "remove", "t-new-1": "add", "t-new-2": "add"}
    t1 = [f for f in scene if f["id"] == "t1"][0]
    assert t1["tr"] == 0.1 and t1["g"] == "c" and t1["rad"] == 4.0
    bad = S.scheme()
    bad["features"][2]["properties"]["target"] = "nope"
    with pytest.raises(InputError, match="'nope'.*not in the scene"):
        R.route_map(S.predictions(schemes=("trees",)), scene=S.scene(), schemes=[bad])


def test_model_error_cells_count_disagreements():
    w = S.timeline()
    cells = model_error_cells([w], cell_m=1000.0)
    votes = w[w[C.VOTE_COMFORT].notna()]
    assert int(cells["n_votes"].sum()) == len(votes)
    assert int(cells["n_wrong"].sum()) == int((votes[C.VOTE_COMFORT] != votes["comfort_class"]).sum())
    fine = model_error_cells([w], cell_m=10.0)
    assert len(fine) == len(votes)  # votes ~140 m apart: one per 10 m cell
    assert model_error_cells([S.timeline(with_prediction=False)]).empty
    with pytest.raises(InputError):
        model_error_cells([w], cell_m=0)


def test_walk_only_map_shows_votes_and_errors():
    fmap = R.route_map(walks=[S.timeline(note="shade was nice")], timezone="UTC")
    assert fmap.data["overlays"]["votes"] and fmap.data["overlays"]["errors"]
    votes = fmap.data["walks"][0]
    assert votes["tz"] == "Europe/Madrid"  # the walk's own zone wins
    assert votes["votes"]["t"][0] == "2026-07-14 09:59:00"  # 07:58Z + 60 s, shown at UTC+2 (CEST)
    assert "shade was nice" in votes["votes"]["note"]


def test_not_a_walkcomfort_map(tmp_path):
    with pytest.raises(InputError, match="route_map"):
        R.write_map({"not": "a map"}, tmp_path / "x.html")


def test_route_summaries_reach_the_popups():
    pred = S.predictions()
    summ = S.summaries(pred)
    fmap = R.route_map(pred, summaries=summ, layers=("routes",))
    data = _payloads(fmap)
    assert len(data) == 4
    for d in data:
        (s,) = d["summ"]
        assert s["heat_dose_cmin"] == 42.0 and 0 < s["exp_share_comfortable"] < 1
    first = summ.iloc[0]
    assert data[0]["summ"][0]["peak_utci_c"] == pytest.approx(first["peak_utci_c"], abs=1e-3)
    with pytest.raises(InputError, match="summaries lack"):
        R.route_map(pred, summaries=summ.drop(columns=["scheme"]))
    # no summary for a walk: the popup simply has none
    (d0,) = _payloads(R.route_map(pred, summaries=summ.iloc[1:2], layers=("routes",)))[:1]
    assert d0["summ"] == [None]


def test_missing_values_become_nulls_not_nan(tmp_path):
    pred = S.predictions(schemes=("a",), departures=("2026-07-14T07:00Z",))
    for col in (C.UTCI_C, C.TMRT_C, C.SHADE_FRAC, "p_neutral", "reasons", C.UTCI_BAND):
        pred.iloc[10:20, pred.columns.get_loc(col)] = None
    (data,) = _payloads(R.route_map(pred, layers=("routes",), simplify_m=0))
    assert data["utci"][12] is None and data["shade"][12] is None and data["p"][1][12] is None
    assert data["r"][12] == -1 and data["sbin"][12] == -1 and data["band"][12] == -1
    page = R.write_map(R.route_map(pred), tmp_path / "m.html").read_text()
    block = page.split('id="wc-data">', 1)[1].split("</script>", 1)[0]
    assert "NaN" not in block


def test_title_is_text(tmp_path):
    fmap = R.route_map(S.predictions(schemes=("a",)), title="<script>window.__pwned=9</script> & co")
    page = R.write_map(fmap, tmp_path / "m.html").read_text()
    assert "<title>&lt;script&gt;window.__pwned=9&lt;/script&gt; &amp; co</title>" in page
    assert "<script>window.__pwned=9" not in page


_HOSTILE = ["<", ">", "&", "'", '"', "`", "\\", "${", "</script", "<!--", "-->", "\u2028", "\u2029", "<img src=x onerror=",
            "javascript:", "\x00", "]]>", "</style>", "\ufeff"]


@pytest.mark.slow
def test_any_note_or_label_stays_data():
    # fuzz: whatever a participant types or a scheme is called, the page's markup does not change
    from hypothesis import given, settings
    from hypothesis import strategies as st

    text = st.lists(st.one_of(st.sampled_from(_HOSTILE), st.text(max_size=6)), max_size=8).map("".join)

    base_tags = None

    @settings(max_examples=15, deadline=None, derandomize=True)
    @given(note=text, label=text)
    def check(note, label):
        nonlocal base_tags
        fmap = R.route_map(S.predictions(schemes=("trees",), departures=("2026-07-14T07:00Z",), n=20),
                           schemes=[S.scheme(label=label or "x")], walks=[S.timeline(n=320, note=note)],
                           layers=("routes", "votes"))
        page = R.render_map_html(fmap)
        tags = [t for t, _ in _tags(page)]
        if base_tags is None:
            base_tags = tags
        assert tags == base_tags  # same elements, in the same order, whatever the text
        # the data block still parses and carries the text exactly
        data = S.page_data(page)
        assert (note or None) in data["walks"][0]["votes"]["note"]
        assert data["schemes"][0]["label"] == (label or "x")

    check()


def test_title_block_context_from_the_routes_table(tmp_path):
    from walkcomfort import _io
    from walkcomfort.report.map.context import context_from_table

    bundle = tmp_path / "model-planned"
    _io.write_json(bundle / "manifest.json", {"schema": "walkcomfort-model/1", "model_digest": "sha256:" + "ab" * 32,
                                              "n_train_rows": 440, "n_train_groups": 8})
    attrs = {"route_id": "r1", "predictor": "model:sha256:abababababababab",
             "session": {"site": "r1", "timezone": "Europe/Madrid", "clo": 0.5}}
    prov = {"inputs": {str(bundle / "manifest.json"): "sha256:00"},
            "parameters": {"walker": {"age_band": "25-34", "clo": 0.5, "acclimatised": True}, "design_day": None,
                           "weather": {"label": "logger /x/design-day.csv"}}}
    ctx = context_from_table(attrs, prov)
    assert ctx["site"].startswith("route r1 (no site name given")  # a route id is not a site name
    assert ctx["walker"] == "age 25-34, clothing 0.5 clo, acclimatised to heat"
    assert ctx["weather"] == "logger file design-day.csv"
    assert ctx["model"] == "model-planned (training date not recorded, 440 votes from 8 walkers, digest abababab)"
    assert "no design-day rule" in ctx["design_day"]
    attrs["session"]["site"] = "Invented square"
    assert context_from_table(attrs, prov)["site"] == "Invented square"
