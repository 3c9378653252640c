"""Per-segment summaries and the GeoJSON outputs, on hand-made rows whose answers are counted by hand."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from walkcomfort import columns as C
from walkcomfort.network.segments import network_from_geojson
from walkcomfort.network.summaries import network_layer, segment_summary, summary_geojson
from walkcomfort.network.synthetic import grid_network


def _rows():
    times = pd.date_range("2026-07-14T10:00", periods=4, freq="30min", tz="UTC", name=C.TIME)
    base = ["uncomfortable", "uncomfortable", "neutral", "comfortable"]
    trees = ["comfortable", "uncomfortable", "comfortable", "neutral"]
    frames = []
    for scheme, classes, utci in (("base", base, [35.0, 34.0, 30.0, 24.0]), ("trees", trees, [25.0, 33.0, 26.0, 27.0])):
        frames.append(pd.DataFrame({C.SEGMENT_ID: "ns000#000", "scheme": scheme, "comfort_class": classes,
                                    "p_comfortable": [0.5] * 4, C.UTCI_C: utci, C.SHADE_FRAC: [0.0, 0.5, 1.0, 0.5]},
                                   index=times))
    return pd.concat(frames)


def test_counts_and_changes_by_hand():
    s = segment_summary(_rows())
    b, t = s.loc[("ns000#000", "base")], s.loc[("ns000#000", "trees")]
    # hand counts over the rows built in _rows() (from the definition of each summary column);
    # heat stress is UTCI > 32 °C, the strong-heat-stress limit (Bröde et al. 2012)
    # 4 steps of 30 min
    assert b["hours_h"] == 2.0 and b["comfortable_h"] == 0.5 and b["uncomfortable_h"] == 1.0
    assert b["expected_comfortable_h"] == 1.0
    assert b["heat_stress_h"] == 1.0          # 35 and 34 > 32 °C
    assert t["heat_stress_h"] == 0.5          # 33 only
    assert b["mean_utci_c"] == pytest.approx(30.75) and b["max_utci_c"] == 35.0
    assert np.isnan(b["d_comfortable_h"])
    assert t["comfortable_h"] == 1.0 and t["d_comfortable_h"] == 0.5
    assert t["gained_comfortable_h"] == 1.0   # steps 1 and 3
    assert t["lost_comfortable_h"] == 0.5     # step 4
    assert t["uncomfortable_to_comfortable_h"] == 0.5  # step 1 only
    assert t["d_heat_stress_h"] == -0.5
    assert t["d_mean_utci_c"] == pytest.approx(27.75 - 30.75)


def test_geojson_summary_and_small_map_layer():
    net = network_from_geojson(grid_network(2, 2, block_m=100.0), segment_length_m=100.0)
    s = segment_summary(_rows())
    full = summary_geojson(s, net)
    assert len(full["features"]) == 1
    f = full["features"][0]
    assert f["properties"]["segment_id"] == "ns000#000"
    assert set(f["properties"]["schemes"]) == {"base", "trees"}
    assert f["properties"]["schemes"]["trees"]["gained_comfortable_h"] == 1.0
    json.dumps(full, allow_nan=False)  # valid JSON: no NaN
    layer = network_layer(full, "trees", precision=5)
    p = layer["features"][0]["properties"]
    assert p["scheme"] == "trees" and p["d_comfortable_h"] == 0.5 and "schemes" not in p
    coords = layer["features"][0]["geometry"]["coordinates"]
    assert len(coords) == 2  # a straight segment simplifies to its two ends
    assert all(round(c, 5) == c for xy in coords for c in xy)
    base_layer = network_layer(full, "base")
    assert "d_comfortable_h" not in base_layer["features"][0]["properties"]
    with pytest.raises(Exception, match="not in the summary"):
        network_layer(full, "canopy")


def test_tile_by_tile_summary_equals_the_whole_summary(tmp_path):
    from walkcomfort.network.batch import plan_job, time_range
    from walkcomfort.network.engines import read_segment_hours, run_job
    from walkcomfort.network.summaries import summary_from_results
    from walkcomfort.network.synthetic import grid_scene
    from walkcomfort.routes.weather import StatedConditions

    net = network_from_geojson(grid_network(3, 3, block_m=100.0), segment_length_m=50.0)
    times = time_range("2026-07-14T15:00", "2026-07-14T18:00", "1h", "Europe/Madrid")
    scene = grid_scene(3, 3)
    fewer = {**scene, "features": scene["features"][:2]}
    site = scene["walkcomfort"]["site"]
    weather = StatedConditions(t_air_c=30.0, rh_pct=40.0, wind_ms=2.0).conditions(times, site["lat"], site["lon"])
    weather.attrs = {}
    job = plan_job(net, times, {"base": scene, "fewer": fewer}, weather, tile_size_m=120.0, time_chunk=2, site=site,
                   context={"wind_height_m": 10.0})
    assert len({p.tile_id for p in job.partitions}) > 2
    assert run_job(job, tmp_path).ok
    whole = segment_summary(read_segment_hours(tmp_path))
    pd.testing.assert_frame_equal(summary_from_results(tmp_path), whole)
    assert whole.xs("fewer", level="scheme")["d_mean_utci_c"].max() > 0  # fewer buildings: less shade, hotter
