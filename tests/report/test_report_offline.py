"""Leaflet assets: packaged source, digests, inlining, CDN mapping."""

from __future__ import annotations

import base64
import hashlib
import re

import pytest

from walkcomfort.errors import WalkcomfortError
from walkcomfort.report import offline as O


def test_packaged_leaflet_is_the_release_folium_links_to():
    import folium.folium as ff

    # folium 0.20 links Leaflet 1.9.3 from jsdelivr; the offline copy must be that same release
    linked = dict(ff._default_js)["leaflet"]
    assert linked == O.cdn_url("leaflet.js")
    js = O.leaflet_file("leaflet.js")
    assert js.startswith(b"/* @preserve\n * Leaflet 1.9.3,")
    # digests from the npm tarball leaflet@1.9.3 (see offline.py docstring)
    assert hashlib.sha256(js).hexdigest() == O.LEAFLET_SHA256["leaflet.js"]


def test_altered_copy_is_refused(monkeypatch, tmp_path):
    (tmp_path / "leaflet.js").write_bytes(b"window.L = {};")
    monkeypatch.setattr(O, "leaflet_dir", lambda: tmp_path)
    with pytest.raises(WalkcomfortError, match="SHA-256 differs"):
        O.leaflet_file("leaflet.js")


def test_inline_css_embeds_images_and_js_drops_source_map():
    css = O.inline_css()
    assert "images/" not in css
    assert css.count("data:image/png;base64,") == 3  # layers, layers-2x, marker icon path
    js = O.inline_js()
    assert "sourceMappingURL" not in js
    assert "</script" not in js.lower()


def test_linked_tags_carry_subresource_integrity():
    tags = O.asset_tags(offline=False)
    want = "sha384-" + base64.b64encode(hashlib.sha384(O.leaflet_file("leaflet.js")).digest()).decode()
    assert f'integrity="{want}"' in tags
    assert tags.count('crossorigin="anonymous"') == 2
    offline = O.asset_tags(offline=True)
    assert not re.search(r'<(script|link)[^>]*(src|href)\s*=', offline)
    assert "@import" not in offline


def test_local_asset_answers_only_leaflet_cdn_urls():
    body, kind = O.local_asset(O.cdn_url("leaflet.css"))
    assert kind == "text/css" and body == O.leaflet_file("leaflet.css")
    assert O.local_asset(O.cdn_url("images/layers.png"))[1] == "image/png"
    assert O.local_asset("https://code.jquery.com/jquery-3.7.1.min.js") is None
    assert O.local_asset(O.cdn_url("../../etc/passwd")) is None
    assert O.local_asset(O.cdn_url("nothing-here.js")) is None
