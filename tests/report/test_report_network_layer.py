"""Street-network layers on the route map: colour bins, payload, labels, CLI."""

from __future__ import annotations

import json
import re

import _report_synth as S
import pytest

from walkcomfort import _io
from walkcomfort.cli import main
from walkcomfort.errors import InputError
from walkcomfort.report import palette as P
from walkcomfort.report import routemap as R


def _payloads(html: str) -> list[dict]:
    """The JSON payloads of the page (the data of each layer)."""
    out = []
    for m in re.finditer(r"var walkcomfort_data_\w+ = (\{.*?\});\n", html):
        out.append(json.loads(m.group(1)))
    return out


def test_bins_share_one_scale_and_follow_the_values():
    layers = S.network_layers()
    keys = R.network_keys(layers)
    assert keys["max_hours"] == 10.0 and len(keys["hours"]) == R.NETWORK_BINS
    assert keys["hours"][0]["label"].startswith("0–2 h") and keys["hours"][-1]["label"].startswith("8–10 h")
    # the largest change of the synthetic trees scheme is 2 h: split at 1 h
    assert keys["max_change"] == pytest.approx(2.0)
    assert [k["colour"] for k in keys["change"]] == list(P.NETWORK_CHANGE_STOPS)
    props = {f["properties"]["segment_id"]: f["properties"] for f in layers[1]["features"]}
    assert R._network_bin(props["st0#000"], True, keys) == 4     # +2 h: more than 1 h more
    assert R._network_bin(props["st1#001"], True, keys) == 1     # -1 h: up to 1 h fewer
    assert R._network_bin(props["st2#002"], True, keys) == 2     # no change
    base = {f["properties"]["segment_id"]: f["properties"] for f in layers[0]["features"]}
    assert R._network_bin(base["st0#000"], False, keys) == 0     # 0 h comfortable
    assert R._network_bin(base["st0#003"], False, keys) == 4     # all 10 h (top edge in the top bin)
    assert R._network_bin(base["st0#001"], False, keys) == 1     # 3.3 h in 2–4 h


def test_hours_colouring_everywhere_and_a_floor_on_the_change_scale():
    layers = S.network_layers()
    assert R.network_keys(layers, "hours")["change"] == []
    flat = [S.network_layers()[0], json.loads(json.dumps(S.network_layers()[1]))]
    for f in flat[1]["features"]:
        f["properties"]["d_comfortable_h"] = 0.0
    assert R.network_keys(flat)["max_change"] == R.NETWORK_MIN_CHANGE_SCALE_H
    with pytest.raises(InputError, match="colouring"):
        R.network_keys(layers, "rainbow")


def test_map_has_one_network_layer_per_scheme_with_escaped_names(tmp_path):
    fmap = R.route_map(S.predictions(), network=S.network_layers(), schemes=[S.scheme()], timezone="Europe/Madrid")
    html = R.write_map(fmap, tmp_path / "m.html").read_text()
    assert f"Streets · {R._base_label('base')} · comfortable hours" in html
    assert "Streets · More street trees · change in comfortable hours" in html  # the scheme file's label
    # user text (a street name) never reaches the page as markup
    assert "<img src=x" not in html and "\\u003cimg src=x" in html
    data = [d for d in _payloads(html) if "k" in d and "change" in d]
    assert len(data) == 2
    base, trees = data
    assert not base["change"] and trees["change"]
    assert len(base["id"]) == len(base["c"]) == len(base["k"]) == 12
    assert set(trees["v"]) >= {"d_comfortable_h", "gained_comfortable_h", "lost_comfortable_h"}
    # coordinates as [lat, lon] (Leaflet's order), rounded to the map's decimals
    lat, lon = base["c"][0][0]
    assert abs(lat - S.LAT0) < 0.01 and abs(lon - S.LON0) < 0.01
    assert all(len(str(v).split(".")[-1]) <= 5 for v in (lat, lon))
    # without predictions the first network layer is the one shown
    fmap = R.route_map(network=S.network_layers())
    assert fmap is not None


def test_network_layer_kind_can_be_left_out_and_bad_layers_refused(tmp_path):
    fmap = R.route_map(S.predictions(), network=S.network_layers(), layers=("comfort",))
    html = R.write_map(fmap, tmp_path / "m.html").read_text()
    assert "Streets ·" not in html
    with pytest.raises(InputError, match="not a network map layer"):
        R.route_map(network=[{"type": "FeatureCollection", "features": []}])


def test_map_command_reads_a_network_folder(tmp_path, capsys):
    folder = tmp_path / "net"
    for layer in S.network_layers():
        _io.write_json(folder / f"network_layer_{layer['walkcomfort']['scheme']}.geojson", layer)
    out = tmp_path / "m.html"
    assert main(["map", "--network", str(folder), "-o", str(out)]) == 0
    html = out.read_text()
    assert html.index("Streets · ") < html.index("change in comfortable hours")  # the base first
    assert main(["map", "--network", str(folder), "--network-scheme", "trees", "--network-colour", "hours",
                 "-o", str(out)]) == 0
    html = out.read_text()
    assert "Streets · trees · comfortable hours" in html and "change in comfortable hours" not in html
    assert main(["map", "--network", str(folder), "--network-scheme", "palms", "-o", str(out)]) == 2
    err = capsys.readouterr().err
    assert "palms" in err and len(err.strip().splitlines()) == 1
    assert main(["map", "--network", str(tmp_path), "-o", str(out)]) == 2
