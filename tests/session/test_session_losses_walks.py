"""Loss limits, bounded walks and track gaps: the rules behind check's refusals."""

from __future__ import annotations

import shutil
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from walkcomfort.cli import main
from walkcomfort.errors import InputError
from walkcomfort.session import track, walks
from walkcomfort.session.limits import default_limits
from walkcomfort.session.losses import SessionRefused, unit_cross_check
from walkcomfort.session.timeline import build_timeline

WALK_OK = Path(__file__).resolve().parents[1] / "fixtures" / "sessions" / "walk_ok"
LIM = default_limits()


def _times(*iso):
    return pd.DatetimeIndex([pd.Timestamp(x, tz="UTC") for x in iso]).as_unit("ns")


def test_a_lone_fix_far_in_time_is_an_outlier():
    t = pd.date_range("2026-07-14 08:00", periods=600, freq="1s", tz="UTC").as_unit("ns")
    t = t.insert(0, pd.Timestamp("1970-01-01", tz="UTC"))
    out = walks.time_outliers(t.asi8, LIM)
    assert out[0] and not out[1:].any()


def test_two_walks_are_refused_with_both_listed():
    t = pd.date_range("2026-07-14 08:00", periods=300, freq="1s", tz="UTC").append(
        pd.date_range("2026-07-16 09:00", periods=300, freq="1s", tz="UTC")).as_unit("ns")
    assert not walks.time_outliers(t.asi8, LIM).any()
    with pytest.raises(InputError, match="2 candidate walk") as info:
        walks.refuse_long_track(t, LIM, "Europe/Madrid", "track.gpx", "session.toml")
    msg = str(info.value)
    assert "2026-07-14 10:00" in msg and "2026-07-16 11:00" in msg and "start" in msg


def test_a_long_continuous_track_is_split_by_local_date():
    t = pd.date_range("2026-07-14 00:00", "2026-07-16 00:00", freq="30min", tz="UTC").as_unit("ns")
    cands = walks.candidate_walks(t, LIM, "UTC")
    assert len(cands) == 3 and cands[0]["fixes"] == 48


def test_vehicle_leg_and_jumps():
    t = pd.date_range("2026-07-14 08:00", periods=200, freq="1s", tz="UTC").as_unit("ns")
    lat = 40.0 + np.r_[np.arange(80) * 1.3, 80 * 1.3 + np.arange(60) * 15.0, 80 * 1.3 + 900 + np.arange(60) * 1.3] / 111_195
    lon = np.full(200, -3.7)
    veh = track.vehicle_legs(t.asi8, lat, lon, LIM)
    assert veh[85:135].all() and not veh[:75].any() and not veh[145:].any()
    assert not track.find_jumps(t, lat, lon, 8.0, veh).any()
    lat2 = lat.copy()
    lat2[20] += 0.01   # one spike of 1.1 km in 1 s
    assert np.flatnonzero(track.find_jumps(t, lat2, lon, 8.0, veh)).tolist() == [20]


def test_still_and_sparse_gaps_are_filled_and_flagged():
    t = _times("2026-07-14 08:00:00", "2026-07-14 08:05:00", "2026-07-14 08:06:00").asi8
    fixes = np.array([[40.0, -3.7], [40.0 + 5 / 111_195, -3.7], [40.0 + 105 / 111_195, -3.7]])
    steps = np.arange(t[0], t[-1] + 1, 10**9 * 30)
    vals = np.full((len(steps), 2), np.nan)
    vals[0], vals[10], vals[-1] = fixes[0], fixes[1], fixes[2]
    gap = np.isnan(vals[:, 0])
    out, gap2, still, sparse = track.fill_track_gaps(steps, t, fixes, vals, gap, LIM)
    assert still[1:10].all() and np.allclose(out[1:10], fixes[0])     # 5 m in 5 min: standing
    assert sparse[11] and out[11, 0] == pytest.approx(40.0 + 55 / 111_195)   # 100 m in 60 s: walking, interpolated
    assert not gap2.any()


def test_fahrenheit_globe_declared_as_celsius_is_named():
    df = pd.DataFrame({"t_air_c": np.full(20, 24.0), "t_globe_c": np.full(20, 80.0)})
    assert "°F" in unit_cross_check(df, "weather")
    df["t_globe_c"] = 30.0
    assert unit_cross_check(df, "weather") is None


def _copy(tmp_path):
    d = tmp_path / "s"
    shutil.copytree(WALK_OK, d)
    return d


def test_refused_session_writes_its_quarantine_and_ingest_can_accept(tmp_path, capsys):
    d = _copy(tmp_path)
    toml = (d / "session.toml").read_text().replace('t_air = "degF"', 't_air = "degC"')
    (d / "session.toml").write_text(toml)
    with pytest.raises(SessionRefused) as info:
        build_timeline(d)
    assert info.value.quarantine is not None and len(info.value.quarantine) >= 300
    out = tmp_path / "out"
    assert main(["ingest", str(d), "-o", str(out)]) == 2
    printed, err = capsys.readouterr()
    assert "out_of_range:t_air_c 320" in printed and "values look like °F" in err
    q = pd.read_csv(out / "refused" / "fixture-p01-am" / "quarantine.csv")
    assert (q["reason"] == "out_of_range:t_air_c").sum() == 320
    assert not (out / "fixture-p01-am").exists()      # no timeline of a refused walk
    assert main(["ingest", str(d), "-o", str(out), "--accept-losses"]) == 0
    import json

    qa = json.loads((out / "fixture-p01-am" / "qa.json").read_text())
    assert qa["losses_accepted"] and qa["losses"][0]["source"] == "weather"
    assert any(w.startswith("ACCEPTED LOSS") for w in qa["warnings"])


def test_check_quarantine_to(tmp_path, capsys):
    d = _copy(tmp_path)
    (d / "session.toml").write_text((d / "session.toml").read_text().replace('wind = "km/h"', 'wind = "km/h"\n') +
                                    "\n[checks]\nfail_lost_share = 0.001\nwarn_lost_share = 0.0\n")
    assert main(["check", str(d), "--quarantine-to", str(tmp_path / "q")]) == 2
    assert (tmp_path / "q" / "fixture-p01-am" / "quarantine.csv").is_file()
    assert (tmp_path / "q" / "fixture-p01-am" / "qa.json").is_file()


def test_warnings_below_the_limits_reach_qa_json(tmp_path):
    d = _copy(tmp_path)
    text = (d / "lux" / "light.csv").read_text().splitlines()
    for i in range(5, 13):   # 8 of 122 values unreadable (+2 duplicates): above the 5 % warning, below 50 %
        text[i] = text[i].replace(";", ";abc")
    (d / "lux" / "light.csv").write_text("\n".join(text) + "\n")
    tl = build_timeline(d)
    assert any(w.startswith("light:") and "quarantined" in w for w in tl.qa["warnings"])
    assert tl.qa["losses"] == [] and tl.qa["summary"]["warnings"] == len(tl.qa["warnings"])


@pytest.mark.parametrize("n", [2, 3, 7])
def test_a_track_shorter_than_the_smoothing_windows_builds(tmp_path, n):
    d = tmp_path / "s"
    d.mkdir()
    pts = "".join(f'<trkpt lat="{40 + i * 1e-5:.6f}" lon="-3.7"><ele>{650 + i}</ele>'
                  f"<time>2026-07-14T08:00:{i:02d}Z</time></trkpt>" for i in range(n))
    (d / "track.gpx").write_text('<?xml version="1.0"?><gpx version="1.1" creator="t" '
                                 f'xmlns="http://www.topografix.com/GPX/1/1"><trk><trkseg>{pts}</trkseg></trk></gpx>')
    (d / "session.toml").write_text('schema = "walkcomfort-session/1"\n[session]\nid = "short"\nparticipant = "P01"\n'
                                    'timezone = "UTC"\n[[source]]\nkind = "gps"\npath = "track.gpx"\n')
    tl = build_timeline(d)   # elevation window 15 s, track window 5 s: both longer than the track
    assert len(tl.data) == n and np.isfinite(tl.data["elev_m"]).all()
