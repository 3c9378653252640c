"""Street-network layers on the route map: scale, classes, payload, labels, CLI."""

from __future__ import annotations

import _report_synth as S
import pytest

from walkcomfort import _io
from walkcomfort.cli import main
from walkcomfort.errors import InputError
from walkcomfort.report import map as R
from walkcomfort.report import palette as P
from walkcomfort.report.map import streets as ST


def test_scale_is_shared_and_classes_follow_the_values():
    layers = S.network_layers()
    scale = ST.network_scale(layers)
    assert scale["max_hours"] == 10.0
    keys = ST.hours_keys(scale)
    assert len(keys) == ST.NETWORK_BINS and [k["colour"] for k in keys] == list(P.NETWORK_HOURS_STOPS)
    assert keys[0]["label"].startswith("0–2 h expected comfortable") and keys[-1]["label"].startswith("8–10 h")
    base, trees = (ST.network_payload(d, scale, 5) for d in layers)
    assert not base["change"] and trees["change"] and base["dk"] == {}
    ids = {sid: i for i, sid in enumerate(trees["id"])}
    # expected comfortable hours, not arg-max counts: the class follows expected_comfortable_h
    exp = [f["properties"]["expected_comfortable_h"] for f in layers[0]["features"]]
    assert base["k"]["comfort"] == [min(4, int(v / 10.0 * 5)) for v in exp]
    change = trees["dk"]["comfort"]
    assert change[ids["st2#002"]] == 2                       # no change
    assert change[ids["st0#000"]] in (3, 4)                  # gained hours: better
    assert change[ids["st1#001"]] in (0, 1)                  # lost an hour: worse


def test_map_carries_one_street_layer_per_scheme_with_text_as_data(tmp_path):
    fmap = R.route_map(S.predictions(), network=S.network_layers(), schemes=[S.scheme()], timezone="Europe/Madrid",
                       network_times="3 times on 1 day(s)")
    page = R.write_map(fmap, tmp_path / "m.html").read_text()
    # user text (a street name) never reaches the page as markup
    assert "<img src=x" not in page and "\\u003cimg src=x" in page
    data = S.page_data(page)
    assert set(data["streets"]) == {"base", "trees"} and data["street_times"] == "3 times on 1 day(s)"
    base, trees = data["streets"]["base"], data["streets"]["trees"]
    assert len(base["id"]) == len(base["c"]) == len(base["k"]["comfort"]) == 12
    assert set(trees["v"]) >= {"d_expected_comfortable_h", "d_heat_stress_h", "d_mean_utci_c"}
    # coordinates as [lat, lon] (Leaflet's order), rounded to the map's decimals
    lat, lon = base["c"][0][0]
    assert abs(lat - S.LAT0) < 0.01 and abs(lon - S.LON0) < 0.01
    assert all(len(str(v).split(".")[-1]) <= 5 for v in (lat, lon))
    # the street legend keys for the difference view name the unit and the no-change class
    assert data["cfg"]["street_diff"]["comfort"][2]["label"].startswith("no change (under 0.05 h)")
    # without predictions the streets are switched on
    assert R.route_map(network=S.network_layers()).data["overlays"]["streets"]


def test_network_layer_kind_can_be_left_out_and_bad_layers_refused():
    fmap = R.route_map(S.predictions(), network=S.network_layers(), layers=("routes",))
    assert fmap.data["streets"] is None
    with pytest.raises(InputError, match="not a network map layer"):
        R.route_map(network=[{"type": "FeatureCollection", "features": []}])


def test_map_command_reads_a_network_folder(tmp_path, capsys):
    folder = tmp_path / "net"
    for layer in S.network_layers():
        _io.write_json(folder / f"network_layer_{layer['walkcomfort']['scheme']}.geojson", layer)
    out = tmp_path / "m.html"
    assert main(["map", "--network", str(folder), "-o", str(out)]) == 0
    data = S.page_data(out.read_text())
    assert list(data["streets"]) == ["base", "trees"]  # the base first
    assert main(["map", "--network", str(folder), "--network-scheme", "trees", "-o", str(out)]) == 0
    assert list(S.page_data(out.read_text())["streets"]) == ["trees"]
    assert main(["map", "--network", str(folder), "--network-scheme", "palms", "-o", str(out)]) == 2
    err = capsys.readouterr().err
    assert "palms" in err and len(err.strip().splitlines()) == 1
    assert main(["map", "--network", str(tmp_path), "-o", str(out)]) == 2



def test_street_changes_inside_the_model_interval_are_within_model_error():
    layers = S.network_layers()
    for f in layers[1]["features"]:
        d = f["properties"]["d_expected_comfortable_h"]
        # an interval of ±1.5 h: the 2 h gain stands out, the 1 h loss does not
        f["properties"]["d_expected_comfortable_h_lo"] = d - 1.5
        f["properties"]["d_expected_comfortable_h_hi"] = d + 1.5
    scale = ST.network_scale(layers)
    trees = ST.network_payload(layers[1], scale, 5)
    ids = {sid: i for i, sid in enumerate(trees["id"])}
    assert trees["dk"]["comfort"][ids["st0#000"]] in (3, 4)
    assert trees["dk"]["comfort"][ids["st1#001"]] == 2
    fmap = R.route_map(network=layers)
    assert fmap.data["cfg"]["street_diff"]["comfort"][2]["label"].startswith("within model error")
