"""Street network input: cutting lines into segments, sampling points, quarantining bad features."""

from __future__ import annotations

import json

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from walkcomfort import columns as C
from walkcomfort.errors import InputError
from walkcomfort.network.segments import load_network, network_from_geojson
from walkcomfort.network.synthetic import grid_network


def _line(fid, coords, name=None):
    props = {"id": fid}
    if name:
        props["name"] = name
    return {"type": "Feature", "properties": props, "geometry": {"type": "LineString", "coordinates": coords}}


def test_grid_is_cut_into_block_segments_of_the_stated_length():
    net = network_from_geojson(grid_network(4, 3, block_m=100.0), segment_length_m=100.0, spacing_m=11.0)
    # 4 north-south streets of 2 blocks and 3 east-west streets of 3 blocks
    # counted by hand from the grid (from the definition of a block segment)
    assert net.n_segments == 4 * 2 + 3 * 3
    # the grid is laid out on a sphere and measured in UTM: lengths agree to well under 1 %
    assert np.allclose(net.segments["length_m"], 100.0, rtol=5e-3)
    assert (net.segments["n_points"] == 10).all()  # ceil(100 / 11)
    assert len(net.points) == 10 * net.n_segments
    assert net.quarantine.empty and net.n_features_read == 7


def test_points_sit_at_midpoints_of_equal_sub_intervals():
    # a 25 m straight line east at the equator (UTM zone 31 at lon 3°): 3 points at 25/6, 25/2, 125/6 m
    lon0 = 3.0
    dlon = 25.0 / 111_319.49  # [°] 1° of longitude at the equator on WGS84 ≈ 111 319.49 m (from the definition a·π/180)
    net = network_from_geojson({"type": "FeatureCollection",
                                "features": [_line("a", [[lon0, 0.0], [lon0 + dlon, 0.0]])]},
                               segment_length_m=50.0, spacing_m=10.0)
    seg = net.segments.iloc[0]
    assert seg["n_points"] == 3
    x = net.points[C.X_M].to_numpy()
    # UTM's scale factor 0.9996 on the central meridian (UTM definition)
    d = (x - x[0]) / 0.9996
    assert np.allclose(d, [0.0, 25 / 3, 50 / 3], atol=0.01)
    assert abs(seg["length_m"] - 25.0 * 0.9996) < 0.01


def test_segment_count_rounds_so_no_stub_is_left():
    # 130 m at a 50 m target: round(2.6) = 3 pieces of 43.3 m each, not 50 + 50 + 30
    dlon = 130.0 / 111_319.49
    net = network_from_geojson({"type": "FeatureCollection",
                                "features": [_line("a", [[3.0, 0.0], [3.0 + dlon, 0.0]])]},
                               segment_length_m=50.0, spacing_m=10.0)
    assert list(net.segments.index) == ["a#000", "a#001", "a#002"]
    assert np.allclose(net.segments["length_m"], 130 * 0.9996 / 3, atol=0.01)


def test_bad_features_are_quarantined_with_a_reason_not_dropped():
    good = _line("ok", [[3.0, 0.0], [3.001, 0.0]], name="High Street")
    feats = [good,
             _line("ok", [[3.0, 0.001], [3.001, 0.001]]),                       # duplicate id
             {"type": "Feature", "properties": {}, "geometry": good["geometry"]},  # no id
             {"type": "Feature", "properties": {"id": "p"}, "geometry": {"type": "Point", "coordinates": [3, 0]}},
             _line("one", [[3.0, 0.0]]),                                         # one vertex
             _line("far", [[300.0, 0.0], [301.0, 0.0]]),                         # not lon/lat
             {"type": "Feature", "properties": {"id": "none"}, "geometry": None}]
    net = network_from_geojson({"type": "FeatureCollection", "features": feats})
    assert list(net.segments[C.STREET_ID].unique()) == ["ok"]
    assert net.segments["street_name"].iloc[0] == "High Street"
    reasons = dict(zip(net.quarantine["row"], net.quarantine["reason"], strict=False))
    assert reasons == {1: "duplicate_id", 2: "missing_id", 3: "not_a_line (Point)", 4: "too_few_vertices",
                       5: "coordinates_not_lonlat", 6: "no_geometry"}
    # nothing silently lost: features read = used + quarantined
    assert net.n_features_read == 1 + len(net.quarantine)


def test_unreadable_file_gives_one_line_error_with_line(tmp_path):
    p = tmp_path / "streets.geojson"
    p.write_text('{"type": "FeatureCollection",\n "features": [,]}')
    with pytest.raises(InputError) as err:
        load_network(p)
    assert f"{p}:2" in str(err.value) and "\n" not in str(err.value)


def test_network_without_usable_lines_is_an_error():
    with pytest.raises(InputError, match="no usable line"):
        network_from_geojson({"type": "FeatureCollection", "features": [
            {"type": "Feature", "properties": {"id": "p"}, "geometry": {"type": "Point", "coordinates": [3, 0]}}]})
    with pytest.raises(InputError, match="positive length"):
        network_from_geojson(grid_network(2, 2), segment_length_m=0)


def test_load_network_reads_file_and_keeps_raw_untouched(tmp_path):
    p = tmp_path / "streets.geojson"
    text = json.dumps(grid_network(3, 3))
    p.write_text(text)
    net = load_network(p, segment_length_m=50.0)
    assert net.name == "synthetic-grid"
    assert net.n_segments == 2 * (3 * 2 * 2)  # 6 streets x 2 blocks x 2 halves
    assert p.read_text() == text


def test_third_coordinate_is_ground_elevation_interpolated_to_the_points():
    dlon = 100.0 / 111_319.49
    net = network_from_geojson({"type": "FeatureCollection", "features": [
        _line("up", [[3.0, 0.0, 100.0], [3.0 + dlon, 0.0, 110.0]]),
        _line("flat", [[3.0, 0.001], [3.0 + dlon, 0.001]])]},
        segment_length_m=100.0, spacing_m=25.0)
    up = net.points.loc[net.points[C.SEGMENT_ID] == "up#000", C.ELEV_M].to_numpy()
    # from the definition: linear in distance, points at 1/8, 3/8, 5/8, 7/8 of the line
    assert np.allclose(up, [101.25, 103.75, 106.25, 108.75])
    seg = net.segments.loc["up#000"]
    assert (seg["elev_start_m"], seg["elev_end_m"]) == (100.0, 110.0)
    assert net.points.loc[net.points[C.SEGMENT_ID] == "flat#000", C.ELEV_M].isna().all()


@settings(max_examples=40, deadline=None)
@given(st.lists(st.tuples(st.floats(-300, 300), st.floats(-300, 300)), min_size=2, max_size=8),
       st.floats(10.0, 120.0), st.floats(2.0, 30.0))
def test_cutting_keeps_the_length_and_the_stated_bounds(vertices, seg_len, spacing):
    lonlat = [[3.0 + x / 111_319.49, y / 110_574.0] for x, y in vertices]
    feats = [_line("s", lonlat)]
    try:
        net = network_from_geojson({"type": "FeatureCollection", "features": feats}, segment_length_m=seg_len,
                                   spacing_m=spacing)
    except InputError:  # every vertex the same point: a zero-length street, refused with a message
        return
    seg = net.segments
    total = float(seg["length_m"].sum())
    # from the definition: cutting neither adds nor loses length (the line measured on its own in UTM)
    from pyproj import Transformer

    x, y = Transformer.from_crs("EPSG:4326", net.crs, always_xy=True).transform(*np.array(lonlat).T)
    whole = float(np.hypot(np.diff(x), np.diff(y)).sum())
    assert total == pytest.approx(whole, rel=1e-9, abs=1e-6)
    if len(seg) > 1:
        assert seg["length_m"].between(0.75 * seg_len - 1e-6, 1.25 * seg_len + 1e-6).all()
    else:
        assert total < 1.5 * seg_len + 1e-6
    # every point stands for length / n_points of its segment, and lies on it
    assert (net.points.groupby(C.SEGMENT_ID).size() == seg["n_points"]).all()
    assert (seg["length_m"] / seg["n_points"] <= spacing + 1e-9).all()
    assert all(len(g) >= 2 for g in seg["geometry_xy"])
