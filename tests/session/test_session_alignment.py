"""Alignment rules: energy averaging on coarser steps, max gap, window trimming, events and their tolerance."""

from __future__ import annotations

import shutil
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from walkcomfort import columns as C
from walkcomfort.session.lag import first_order_response
from walkcomfort.session.readers import energy_average
from walkcomfort.session.stepping import to_steps as _to_steps
from walkcomfort.session.timeline import build_timeline

SESSIONS = Path(__file__).resolve().parents[1] / "fixtures" / "sessions"
WALK_OK = SESSIONS / "walk_ok"


def test_coarse_step_averages_levels_on_energy():
    tl = build_timeline(WALK_OK, step_s=60.0)
    d = tl.data
    assert (np.diff(d.index.asi8) == 60_000_000_000).all()
    # the fixture writes LAeq,1s = 55 + 10·(s // 100 % 2) + s % 3 at walk second s;
    # a 60 s step holds the readings within ±30 s of it, averaged on energy (ISO 1996-1)
    s = np.arange(90, 150)
    levels = 55 + 10 * (s // 100 % 2) + s % 3
    assert d[C.LAEQ_DB].iloc[2] == pytest.approx(energy_average(levels), abs=1e-9)
    assert d[C.LAEQ_DB].iloc[2] > np.mean(levels) + 1.0     # not the arithmetic mean


def test_to_steps_interpolates_within_the_max_gap_only():
    s = np.array([0, 1, 2, 3, 4, 5, 6, 7, 8, 9], dtype=np.int64) * 10**9
    t = np.array([0, 2, 8], dtype=np.int64) * 10**9
    v = np.array([[10.0], [12.0], [18.0]])
    out, gap = _to_steps(t, v, s, 10**9, max_gap_s=3.0)
    # linear interpolation between 10 at 0 s and 12 at 2 s gives 11 at 1 s; the 6 s gap to the
    # next sample exceeds max_gap_s, so it stays NaN and flagged (from the definition of the resampling)
    np.testing.assert_allclose(out[:3, 0], [10, 11, 12])
    assert np.isnan(out[3:8, 0]).all() and out[8, 0] == 18 and np.isnan(out[9, 0])
    assert list(gap) == [False, False, False, True, True, True, True, True, False, True]
    out, gap = _to_steps(t, v, s, 10**9, max_gap_s=6.0)
    # a 6 s gap within max_gap_s: linear from 12 to 18, 1 per second (from the definition)
    np.testing.assert_allclose(out[2:9, 0], [12, 13, 14, 15, 16, 17, 18])


def test_to_steps_energy_interpolation():
    s = np.array([0, 1, 2], dtype=np.int64) * 10**9
    t = np.array([0, 2], dtype=np.int64) * 10**9
    out, _ = _to_steps(t, np.array([[60.0], [70.0]]), s, 10**9, max_gap_s=5.0, energy=True)
    # half-way between 60 and 70 dB on energy is their energy average, 67.40 dB (ISO 1996-1)
    assert out[1, 0] == pytest.approx(67.40, abs=0.005)


def test_manifest_window_trims_and_quarantines(tmp_path):
    d = tmp_path / "w"
    shutil.copytree(WALK_OK, d)
    p = d / "session.toml"
    p.write_text(p.read_text().replace('site = "Fixture Town (invented)"',
                                       'site = "Fixture Town (invented)"\nstart = "2026-07-14T10:02:00"\n'
                                       'end = "2026-07-14T10:06:00"'))
    tl = build_timeline(d)
    assert tl.data.index[0] == pd.Timestamp("2026-07-14T08:02:00Z")
    assert tl.data.index[-1] == pd.Timestamp("2026-07-14T08:06:00Z")
    s = tl.qa["summary"]
    assert s["reconciles"] and s["outside_walk_window_rows"] > 0
    # votes at 08:01:00 and 08:09:10 fall outside the window, the one at 08:05:10 stays
    assert tl.qa["sources"]["votes"]["quarantine_reasons"] == {"outside_walk_window": 2}
    assert tl.data[C.VOTE_COMFORT].notna().sum() == 1


def test_votes_on_the_same_step_keep_the_nearest(tmp_path):
    d = tmp_path / "w"
    shutil.copytree(WALK_OK, d)
    (d / "votes.csv").write_text("time,comfort\n2026-07-14 10:01:00,comfortable\n"
                                 "2026-07-14 10:01:20,neutral\n2026-07-14 10:01:31,uncomfortable\n")
    tl = build_timeline(d, step_s=60.0)
    # 10:01:20 is 20 s from the 10:01 step and 10:01:31 is 29 s from 10:02 (tolerance 60 s)
    assert tl.data.loc["2026-07-14T08:01:00Z", C.VOTE_COMFORT] == "comfortable"
    assert tl.data.loc["2026-07-14T08:02:00Z", C.VOTE_COMFORT] == "uncomfortable"
    assert tl.qa["sources"]["votes"]["quarantine_reasons"] == {"same_step": 1}


def test_lag_correction_in_the_timeline(tmp_path):
    # a logger whose air sensor (τ = 20 s) saw a 25 -> 35 °C step at walk second 200
    d = tmp_path / "w"
    shutil.copytree(WALK_OK, d)
    secs = np.arange(-20, 620, 2)
    true = np.where(secs < 200, 25.0, 35.0)
    read = first_order_response(true, 2.0, 20.0)
    rows = ["DateTime,Temp_F,RH,Wind_kmh,Globe_F"]
    for s, v in zip(secs, read, strict=False):
        x = 10 * 3600 + s + 7
        rows.append(f"2026-07-14 {x // 3600:02d}:{x % 3600 // 60:02d}:{x % 60:02d},{v * 9 / 5 + 32:.6f},40,5,100")
    (d / "logger" / "weather.csv").write_text("\n".join(rows) + "\n")
    plain = build_timeline(d)
    fixed = build_timeline(d, lag_correction=True)
    at = pd.Timestamp("2026-07-14T08:03:40Z")          # 20 s after the step
    # the reading at s = 220 has seen 11 samples of 2 s at 35 °C: 25 + 10·(1 − e^(−22/20)) (first-order lag)
    assert plain.data.loc[at, C.T_AIR_C] == pytest.approx(25 + 10 * (1 - np.exp(-22 / 20)), abs=0.01)
    assert fixed.data.loc[at, C.T_AIR_C] == pytest.approx(35.0, abs=0.1)
    assert fixed.data.attrs["session"]["lag_corrected"] is True
    assert plain.data.attrs["session"]["lag_corrected"] is False
    # settling: the first 3τ = 60 s of the air sensor and 3·60 s of the globe are flagged
    assert plain.data[C.QA_SETTLING].iloc[:160].all() and not plain.data[C.QA_SETTLING].iloc[170:].any()


def test_gps_jump_flagged_on_the_timeline():
    tl = build_timeline(SESSIONS / "broken" / "gps_jump")
    assert tl.qa["summary"]["gps_jumps"] == 1
    assert tl.data[C.QA_GPS_JUMP].sum() == 1
    assert tl.data.loc["2026-07-14T08:00:25Z", C.QA_GPS_JUMP]
    # the jump did not reach the track: speed stays at walking pace
    assert tl.data[C.SPEED_MS].max() < 3.0


def test_new_gpx_segment_restarts_settling(tmp_path):
    d = tmp_path / "w"
    shutil.copytree(WALK_OK, d)
    p = d / "gps" / "track.gpx"
    text = p.read_text()
    # split the track into two segments at 08:06:00
    cut = text.index('<trkpt', text.index("<time>2026-07-14T08:05:59Z</time>"))
    p.write_text(text[:cut] + "</trkseg><trkseg>\n" + text[cut:])
    tl = build_timeline(d)
    s = tl.data[C.QA_SETTLING]
    # τ_globe = 60 s: 3τ = 180 s flagged from the logger's first reading kept (10 s before the
    # walk, the max gap) and from the new segment
    assert s.iloc[:170].all() and not s.iloc[170:360].any()
    assert s.loc["2026-07-14T08:06:00Z":"2026-07-14T08:08:59Z"].all() and not s.loc["2026-07-14T08:09:00Z":].any()


def test_distance_and_heading_against_the_wgs84_geodesic():
    # reference: pyproj.Geod (Karney's geodesic on WGS84). A sphere of R = 6371.0088 km errs by at most
    # ~0.6 %: WGS84's radii of curvature range from 6335 km (meridional, equator) to 6400 km (at the poles)
    from pyproj import Geod

    from walkcomfort.session.qa import haversine_m

    g = Geod(ellps="WGS84")
    rng = np.random.default_rng(5)
    lat0 = rng.uniform(-60, 60, 20)
    lon0 = rng.uniform(-180, 180, 20)
    az = rng.uniform(0, 360, 20)
    dist = rng.uniform(1, 2000, 20)
    lon1, lat1, _ = g.fwd(lon0, lat0, az, dist)
    np.testing.assert_allclose(haversine_m(lat0, lon0, lat1, lon1), dist, rtol=6e-3)
    # the timeline's distance and heading (computed on the ellipsoid) agree with the geodesic
    # over the fixture's northward leg
    tl = build_timeline(WALK_OK)
    d = tl.data
    fwd, _, _ = g.inv(d[C.LON].iloc[350], d[C.LAT].iloc[350], d[C.LON].iloc[550], d[C.LAT].iloc[550])
    _, _, steps_m = g.inv(d[C.LON].iloc[:-1].to_numpy(), d[C.LAT].iloc[:-1].to_numpy(),
                          d[C.LON].iloc[1:].to_numpy(), d[C.LAT].iloc[1:].to_numpy())
    # dist_m runs on 5 s smoothed positions, so it is shorter than the raw zig-zag of GPS noise
    assert d[C.DIST_M].iloc[-1] < steps_m.sum() and d[C.DIST_M].iloc[-1] == pytest.approx(1.3 * 599, rel=0.05)
    h = np.radians(d[C.HEADING_DEG].iloc[350:550].dropna())
    mean_h = np.degrees(np.arctan2(np.sin(h).mean(), np.cos(h).mean()))
    assert abs((mean_h - fwd + 180) % 360 - 180) < 3.0


def test_gps_jump_detection_cases():
    from walkcomfort.session.qa import find_gps_jumps

    t = pd.date_range("2026-07-14 08:00", periods=40, freq="1s", tz="UTC")
    lat = 40.0 + np.arange(40) * 1.3 / 111_195.0      # walking north at 1.3 m/s
    lon = np.full(40, -3.0)
    assert not find_gps_jumps(t, lat, lon).any()
    spike = lat.copy()
    spike[[10, 11]] += 80 / 111_195.0                  # two fixes 80 m off
    assert list(np.flatnonzero(find_gps_jumps(t, spike, lon))) == [10, 11]
    first = lat.copy()
    first[0] -= 200 / 111_195.0                        # a wrong first fix (cold start)
    assert list(np.flatnonzero(find_gps_jumps(t, first, lon))) == [0]
    moved = lat.copy()
    moved[20:] += 500 / 111_195.0                      # a real relocation (e.g. a ride) is not a jump run
    j = find_gps_jumps(t, moved, lon)
    assert not j[20:].any()


def test_frames_outside_the_track_are_quarantined(tmp_path):
    from PIL import Image

    d = tmp_path / "w"
    shutil.copytree(WALK_OK, d)
    im = Image.new("RGB", (8, 8))
    ex = Image.Exif()
    ex.get_ifd(0x8769)[0x9003] = "2026:07:14 12:00:00"    # two hours after the walk
    im.save(d / "camera" / "IMG_0099.jpg", exif=ex)
    Image.new("RGB", (8, 8)).save(d / "camera" / "IMG_0100.jpg")   # no EXIF at all
    tl = build_timeline(d)
    assert tl.qa["summary"]["frames_outside_track"] == 1
    assert tl.qa["sources"]["frames"]["quarantine_reasons"] == {"no_exif_time": 1, "outside_track_span": 1}
    assert tl.qa["sources"]["frames"]["rows_read"] == 12 and tl.qa["sources"]["frames"]["attached"] == 10
    q = tl.quarantine[tl.quarantine["source"] == "frames"]
    assert set(q["raw"]) == {"camera/IMG_0099.jpg", "camera/IMG_0100.jpg"}
