"""The fixture session end to end: timeline shape, planted imperfections found exactly, byte-stable outputs."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from walkcomfort import columns as C
from walkcomfort.session.timeline import build_timeline, combine_campaign, read_timeline

WALK_OK = Path(__file__).resolve().parents[1] / "fixtures" / "sessions" / "walk_ok"


@pytest.fixture(scope="module")
def tl():
    return build_timeline(WALK_OK)


def test_timeline_grid_and_columns(tl):
    d = tl.data
    assert d.index.name == C.TIME and str(d.index.tz) == "UTC"
    # a 1 s grid: build_timeline's default step_s = 1.0 (contract in DEVELOPERS.md); times from the fixture generator
    assert (np.diff(d.index.asi8) == 1_000_000_000).all()
    # the track runs 08:00:00 ... 08:09:59 UTC (10:00 local, CEST)
    assert d.index[0] == pd.Timestamp("2026-07-14T08:00:00Z")
    assert d.index[-1] == pd.Timestamp("2026-07-14T08:09:59Z")
    for c in (C.WALK_ID, C.PARTICIPANT, C.LAT, C.LON, C.ELEV_M, C.DIST_M, C.SPEED_MS, C.HEADING_DEG, C.SLOPE_PCT,
              C.T_AIR_C, C.RH_PCT, C.WIND_MS, C.T_GLOBE_C, C.LAEQ_DB, C.ILLUM_LUX, C.FRAME_PATH, C.VOTE_COMFORT,
              C.VOTE_TSV, C.VOTE_NOTE, C.VOTE_KIND, "qa_gap_gps", "qa_gap_weather", "qa_gap_noise", "qa_gap_light",
              C.QA_SETTLING, C.QA_GPS_JUMP):
        assert c in d.columns, c
    assert (d[C.WALK_ID] == "fixture-p01-am").all()


def test_planted_imperfections_found_exactly(tl):
    # make_fixtures.py plants: logger clock +7 s with one sync event, one 45 s noise gap,
    # 2 out-of-range RH rows, 2 duplicated light timestamps, one GPX point without time
    s = tl.qa["summary"]
    assert s["reconciles"] is True
    assert s["clock_corrections"] == 1
    assert s["gaps"] == 1 and tl.qa["sources"]["noise"]["gaps"] == 1
    assert tl.qa["sources"]["noise"]["gap_s_total"] == pytest.approx(46.0)
    assert s["out_of_range_rows"] == 2
    assert tl.qa["sources"]["weather"]["quarantine_reasons"]["out_of_range:rh_pct"] == 2
    assert s["duplicate_rows"] == 2 and tl.qa["sources"]["light"]["duplicates"] == 2
    assert s["points_without_time"] == 1
    assert s["gps_jumps"] == 0 and s["out_of_order_rows"] == 0 and s["bad_lines"] == 0
    assert tl.qa["clocks"]["logger1"]["offset_s"] == pytest.approx(7.0)


def test_counts_reconcile_per_source(tl):
    for name, e in tl.qa["sources"].items():
        assert e["rows_read"] == e["rows_used"] + e["rows_quarantined"], name
        assert e["rows_quarantined"] == int((tl.quarantine["source"] == name).sum())


def test_clock_offset_applied(tl):
    # the logger wrote T_air = 30 + 2·s/600 °C at walk second s, on a clock 7 s ahead:
    # after correction the first step (s = 0) reads 30 °C (from the fixture's definition)
    assert tl.data[C.T_AIR_C].iloc[0] == pytest.approx(30.0, abs=1e-6)
    assert tl.data[C.T_AIR_C].iloc[300] == pytest.approx(31.0, abs=1e-6)
    # °F → °C and km/h → m/s happened: wind 5 km/h = 1.3889 m/s at the first step
    assert tl.data[C.WIND_MS].iloc[0] == pytest.approx(5 / 3.6)


def test_gap_is_nan_and_flagged(tl):
    d = tl.data
    gap = d.loc["2026-07-14T08:05:00Z":"2026-07-14T08:05:44Z"]
    assert gap["qa_gap_noise"].all() and gap[C.LAEQ_DB].isna().all()
    assert not d.loc["2026-07-14T08:04:00Z", "qa_gap_noise"]


def test_events_attached_never_interpolated(tl):
    d = tl.data
    votes = d.dropna(subset=[C.VOTE_COMFORT])
    assert list(votes[C.VOTE_COMFORT]) == ["comfortable", "uncomfortable", "neutral"]
    assert list(votes[C.VOTE_TSV]) == [0.0, 2.0, 1.0]
    assert votes.index[1] == pd.Timestamp("2026-07-14T08:05:10Z")
    assert votes[C.VOTE_NOTE].iloc[1] == "hot, no shade"
    assert d[C.FRAME_PATH].notna().sum() == 10
    assert d.loc["2026-07-14T08:00:30Z", C.FRAME_PATH] == "camera/IMG_0001.jpg"


def test_track_derived_quantities(tl):
    d = tl.data
    # the fixture walks at 1.3 m/s east then north (GPS noise 0.8 m)
    assert d[C.SPEED_MS].median() == pytest.approx(1.3, abs=0.15)
    assert d[C.DIST_M].iloc[-1] == pytest.approx(1.3 * 599, rel=0.08)
    def circ_mean(h):
        r = np.radians(h.dropna())
        return np.degrees(np.arctan2(np.sin(r).mean(), np.cos(r).mean())) % 360

    assert circ_mean(d[C.HEADING_DEG].iloc[100:250]) == pytest.approx(90, abs=5)
    assert min(circ_mean(d[C.HEADING_DEG].iloc[350:550]), 360 - circ_mean(d[C.HEADING_DEG].iloc[350:550])) < 5
    assert d[C.HR_BPM].notna().all()


def test_ingest_outputs_byte_identical_and_read_back(tl, tmp_path):
    p1 = tl.write(tmp_path / "a")
    p2 = build_timeline(WALK_OK).write(tmp_path / "a")
    for k in ("timeline", "qa", "quarantine"):
        assert p1[k].read_bytes() == p2[k].read_bytes(), k
    back = read_timeline(p1["timeline"].parent)
    assert back.attrs["session"]["timezone"] == "Europe/Madrid"
    assert back.attrs["session"]["clo"] == 0.5 and back.attrs["session"]["wind_height_m"] == 1.1
    assert "session.toml" in back.attrs["provenance"]["inputs"]
    assert back.attrs["provenance"]["inputs"]["logger/weather.csv"].startswith("sha256:")
    pd.testing.assert_frame_equal(back, tl.data, check_like=False, check_freq=False)
    qa = json.loads(p1["qa"].read_text())
    assert qa["summary"]["reconciles"] is True


def test_combine_campaign(tl):
    d2 = tl.data.copy()
    d2.attrs = {"session": dict(tl.data.attrs["session"], walk_id="other", clo=0.7)}
    d2[C.WALK_ID] = "other"
    d2 = d2.drop(columns=[C.LAEQ_DB, "qa_gap_noise"])          # a walk without a sound level meter
    camp = combine_campaign([tl, d2])
    other = camp[C.WALK_ID] == "other"
    assert camp.loc[other, "qa_gap_noise"].all() and camp.loc[other, C.LAEQ_DB].isna().all()
    assert camp["qa_gap_noise"].dtype == bool and not camp.loc[~other, C.QA_GPS_JUMP].any()
    assert len(camp) == 2 * len(tl.data)
    assert set(camp[C.WALK_ID]) == {"fixture-p01-am", "other"}
    assert camp.loc[camp[C.WALK_ID] == "other", C.CLO].eq(0.7).all()
    assert set(camp.attrs["sessions"]) == {"fixture-p01-am", "other"}
