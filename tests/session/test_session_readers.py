"""Readers: units by exact definitions, energy averaging of levels, time zones and DST, GPX 1.0/1.1."""

from __future__ import annotations

import shutil
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from walkcomfort import columns as C
from walkcomfort.errors import InputError
from walkcomfort.session.manifest import load_manifest
from walkcomfort.session.readers import (
    energy_average,
    read_frames,
    read_gps,
    read_noise,
    read_votes,
    read_weather,
    to_si,
)

SESSIONS = Path(__file__).resolve().parents[1] / "fixtures" / "sessions"
WALK_OK = SESSIONS / "walk_ok"


# --- LAeq: ISO 1996-1 energy average -------------------------------------------------------
def test_laeq_two_levels_equal_time():
    # ISO 1996-1:2016 equivalent continuous level, energy average: 60 and 70 dB for equal
    # time -> 10·log10((10^6 + 10^7)/2) = 67.40 dB (issue check value)
    assert energy_average([60.0, 70.0]) == pytest.approx(67.40, abs=0.005)


def test_laeq_three_levels():
    # same definition: 70/80/90 dB -> 10·log10((10^7 + 10^8 + 10^9)/3) = 85.68 dB
    assert energy_average([70.0, 80.0, 90.0]) == pytest.approx(85.68, abs=0.005)


def test_laeq_is_not_arithmetic_and_ignores_nan():
    assert energy_average([60.0, 70.0, np.nan]) == pytest.approx(67.40, abs=0.005)
    assert energy_average([60.0, 70.0]) != pytest.approx(65.0, abs=0.5)
    assert np.isnan(energy_average([np.nan, np.nan]))
    # weights are durations: 60 dB for 3 s and 70 dB for 1 s (from the definition)
    assert energy_average([60.0, 70.0], weights=[3, 1]) == pytest.approx(10 * np.log10((3e6 + 1e7) / 4))
    # a very loud level does not overflow
    assert energy_average([400.0, 400.0]) == pytest.approx(400.0)


# --- units: exact definitions ------------------------------------------------------------------
@pytest.mark.parametrize("field, unit, value, si", [
    ("t_air", "degF", 212.0, 100.0),          # water boils at 212 °F = 100 °C (definition of °F)
    ("t_air", "degF", 32.0, 0.0),
    ("t_air", "°F", -40.0, -40.0),            # the scales cross at −40 (from the definition)
    ("t_globe", "K", 273.15, 0.0),            # T[°C] = T[K] − 273.15 (SI Brochure)
    ("t_air", "degC", 21.5, 21.5),
    ("wind", "km/h", 36.0, 10.0),             # 1 km/h = 1000/3600 m/s
    ("wind", "kn", 1.0, 1852.0 / 3600.0),     # 1 kn = 1 nautical mile (1852 m) per hour, exact
    ("wind", "mph", 1.0, 0.44704),            # 1 mph = 1609.344 m / 3600 s = 0.44704 m/s, exact
    ("wind", "m/s", 3.0, 3.0),
    ("pressure", "Pa", 101325.0, 1013.25),    # 1 hPa = 100 Pa
    ("pressure", "kPa", 101.325, 1013.25),
    ("pressure", "inHg", 1.0, 33.86389),      # NIST SP 811 B.8 (conventional, 0 °C)
    ("illum", "fc", 1.0, 10.763910416709722),  # 1 lm/ft² = 1/0.3048² lx
    ("elev", "ft", 1000.0, 304.8),            # international foot = 0.3048 m, exact
    ("rh", "fraction", 0.5, 50.0),
])
def test_unit_conversions(field, unit, value, si):
    assert to_si([value], field, unit)[0] == pytest.approx(si, rel=1e-12, abs=1e-12)


def test_unknown_or_undeclared_unit_is_an_error():
    with pytest.raises(InputError, match="not known"):
        to_si([1.0], "wind", "furlongs per fortnight")
    with pytest.raises(InputError, match="no unit declared"):
        to_si([1.0], "t_air", None)
    # a quantity with one common unit has a default
    assert to_si([55.0], "laeq", None)[0] == 55.0


# --- time zones and daylight saving -------------------------------------------------------------
def _weather_session(tmp_path, rows, time_zone="local", tz="Europe/Madrid"):
    d = tmp_path / "s"
    shutil.copytree(SESSIONS / "broken" / "gpx10_ok", d)
    (d / "weather.csv").write_text("time,t_air\n" + "\n".join(f"{t},20" for t in rows) + "\n")
    text = (d / "session.toml").read_text().replace('"Europe/Madrid"', f'"{tz}"')
    text = text.replace('device = "logger1"', f'device = "logger1"\ntime_zone = "{time_zone}"')
    (d / "session.toml").write_text(text)
    spec = load_manifest(d)
    return spec, spec.sources_of("weather")[0]


def test_spring_forward_local_times(tmp_path):
    # Europe/Madrid 2026-03-29: 02:00 CET jumps to 03:00 CEST (EU summer time, last Sunday of March)
    rows = ["2026-03-29 01:59:58", "2026-03-29 01:59:59", "2026-03-29 03:00:00", "2026-03-29 02:30:00"]
    spec, src = _weather_session(tmp_path, rows)
    df, meta = read_weather(src.abs_path, src, spec)
    assert list(df.index) == [pd.Timestamp("2026-03-29T00:59:58Z"), pd.Timestamp("2026-03-29T00:59:59Z"),
                              pd.Timestamp("2026-03-29T01:00:00Z")]
    # 02:30 does not exist on that day: quarantined, never shifted
    q = meta["quarantine"]
    assert list(q["reason"]) == ["nonexistent_local_time"] and list(q["row"]) == [5]
    assert meta["rows_read"] == meta["rows_used"] + meta["rows_quarantined"] == 4


def test_fall_back_local_times_follow_row_order(tmp_path):
    # 2026-10-25: 03:00 CEST goes back to 02:00 CET; a logger writing its clock in order passes 02:30 twice
    rows = ["2026-10-25 02:30:00", "2026-10-25 02:59:59", "2026-10-25 02:00:00", "2026-10-25 02:30:00"]
    spec, src = _weather_session(tmp_path, rows)
    df, meta = read_weather(src.abs_path, src, spec)
    # 02:30 CEST = 00:30 UTC, 02:59:59 CEST = 00:59:59 UTC, then 02:00 CET = 01:00 UTC (IANA tz database)
    assert list(df.index) == [pd.Timestamp("2026-10-25T00:30:00Z"), pd.Timestamp("2026-10-25T00:59:59Z"),
                              pd.Timestamp("2026-10-25T01:00:00Z"), pd.Timestamp("2026-10-25T01:30:00Z")]
    assert meta["rows_quarantined"] == 0


def test_ambiguous_hour_without_order_is_quarantined(tmp_path):
    rows = ["2026-10-25 01:59:00", "2026-10-25 02:30:00", "2026-10-25 03:30:00"]
    spec, src = _weather_session(tmp_path, rows)
    df, meta = read_weather(src.abs_path, src, spec)
    # 02:30 on 2026-10-25 occurs twice in Europe/Madrid (IANA tz database); with no order to tell, it is set aside
    assert list(meta["quarantine"]["reason"]) == ["ambiguous_local_time"]
    assert len(df) == 2


def test_declared_zone_and_explicit_offsets(tmp_path):
    spec, src = _weather_session(tmp_path, ["2026-07-14 08:00:00"], time_zone="UTC")
    df, _ = read_weather(src.abs_path, src, spec)
    assert df.index[0] == pd.Timestamp("2026-07-14T08:00:00Z")
    spec, src = _weather_session(tmp_path / "b", ["2026-07-14T10:00:00+02:00", "2026-07-14T08:00:01Z"])
    df, _ = read_weather(src.abs_path, src, spec)
    assert list(df.index) == [pd.Timestamp("2026-07-14T08:00:00Z"), pd.Timestamp("2026-07-14T08:00:01Z")]


# --- GPX ------------------------------------------------------------------------------------------
def _gps(folder):
    spec = load_manifest(folder)
    src = spec.sources_of("gps")[0]
    return read_gps(src.abs_path, src, spec)


def test_gpx11_with_namespaced_extensions():
    df, meta = _gps(WALK_OK)
    assert meta["gpx_version"] == "1.1"
    assert {"hr", "atemp"} <= set(meta["extensions"])
    # the fixture writes hr = 90 + i % 7 and atemp = 29 + i/300 (gpxtpx: prefix)
    assert df[C.HR_BPM].iloc[0] == 90 and df[C.HR_BPM].iloc[3] == 93
    assert df[C.T_DEVICE_C].iloc[0] == pytest.approx(29.0)
    assert str(df.index.tz) == "UTC" and df.index.name == "time"
    assert meta["rows_read"] == 600 and meta["rows_used"] == 599


def test_point_without_time_is_quarantined_not_invented():
    df, meta = _gps(WALK_OK)
    q = meta["quarantine"]
    assert list(q["reason"]) == ["no_time"] and list(q["row"]) == [121]
    assert q["raw"].iloc[0].startswith("trk 1 seg 1 pt 121: <trkpt") and "<time>" not in q["raw"].iloc[0]
    # its neighbours are there, nothing was placed at its time
    assert pd.Timestamp("2026-07-14T08:02:00Z") not in df.index
    assert pd.Timestamp("2026-07-14T08:01:59Z") in df.index


def test_gpx10():
    df, meta = _gps(SESSIONS / "broken" / "gpx10_ok")
    assert meta["gpx_version"] == "1.0" and len(df) == 60
    assert df[C.ELEV_M].notna().all()
    # the fixture's first GPX 1.0 point is written at 08:00:00Z (tests/fixtures/sessions/make_fixtures.py)
    assert df.index[0] == pd.Timestamp("2026-07-14T08:00:00Z")


def test_gpx_extensions_by_local_name_whatever_the_prefix(tmp_path):
    d = tmp_path / "s"
    shutil.copytree(SESSIONS / "broken" / "gpx10_ok", d)
    (d / "track.gpx").write_text(
        '<?xml version="1.0"?>\n<gpx version="1.1" creator="t" xmlns="http://www.topografix.com/GPX/1/1" '
        'xmlns:ns3="http://example.org/other/v2">\n<trk><trkseg>\n'
        '<trkpt lat="40.0" lon="-3.0"><time>2026-07-14T08:00:00Z</time><extensions>'
        '<ns3:TrackPointExtension><ns3:hr>101</ns3:hr><ns3:atemp>31.5</ns3:atemp></ns3:TrackPointExtension>'
        '</extensions></trkpt>\n'
        '<trkpt lat="40.00001" lon="-3.0"><time>2026-07-14T08:00:01Z</time><extensions><hr>102</hr></extensions></trkpt>\n'
        '</trkseg></trk></gpx>\n')
    df, meta = _gps(d)
    assert list(df[C.HR_BPM]) == [101, 102]
    assert df[C.T_DEVICE_C].iloc[0] == 31.5 and np.isnan(df[C.T_DEVICE_C].iloc[1])
    assert np.isnan(df[C.ELEV_M]).all()


def test_gps_csv(tmp_path):
    d = tmp_path / "s"
    shutil.copytree(SESSIONS / "broken" / "gpx10_ok", d)
    (d / "track.csv").write_text("time,lat,lon,elev\n2026-07-14T08:00:00Z,40.0,-3.0,650\n"
                                 "2026-07-14T08:00:01Z,40.00001,-3.0,651\n2026-07-14T08:00:02Z,95.0,-3.0,651\n"
                                 "2026-07-14T08:00:03Z,0,0,0\n")
    (d / "session.toml").write_text((d / "session.toml").read_text().replace('path = "track.gpx"',
                                                                              'path = "track.csv"'))
    df, meta = _gps(d)
    # latitude is bounded by ±90° (WGS 84 definition); 0,0 is the usual null fix of a receiver (common practice)
    assert len(df) == 2 and list(meta["quarantine"]["reason"]) == ["out_of_range:lat", "null_position"]


# --- other readers ------------------------------------------------------------------------------
def test_weather_fixture_units_and_counts():
    spec = load_manifest(WALK_OK)
    src = spec.sources_of("weather")[0]
    df, meta = read_weather(src.abs_path, src, spec)
    # the counts the fixture generator writes (tests/fixtures/sessions/make_fixtures.py)
    assert meta["rows_read"] == meta["rows_used"] + meta["rows_quarantined"] == 320
    assert list(df.columns) == [C.T_AIR_C, C.RH_PCT, C.WIND_MS, C.T_GLOBE_C]
    assert meta["wind_height_m"] == 1.1


def test_noise_and_votes_and_frames_fixture():
    spec = load_manifest(WALK_OK)
    s = spec.sources_of("noise")[0]
    df, meta = read_noise(s.abs_path, s, spec)
    assert list(df.columns) == [C.LAEQ_DB] and meta["rows_used"] == 555
    s = spec.sources_of("votes")[0]
    df, meta = read_votes(s.abs_path, s, spec)
    assert list(df[C.VOTE_COMFORT]) == ["comfortable", "uncomfortable", "neutral"]
    assert (df[C.PARTICIPANT] == "P01").all()
    s = spec.sources_of("frames")[0]
    df, meta = read_frames(s.abs_path, s, spec)
    # EXIF 10:00:30 with OffsetTimeOriginal +02:00 -> 08:00:30 UTC
    assert df.index[0] == pd.Timestamp("2026-07-14T08:00:30Z")
    assert df[C.FRAME_PATH].iloc[0] == "camera/IMG_0001.jpg"
    assert meta["ignored_files"] == ["README.txt"]


def test_frames_from_filename_pattern_and_without_exif(tmp_path):
    from PIL import Image

    d = tmp_path / "s"
    shutil.copytree(SESSIONS / "broken" / "gpx10_ok", d)
    (d / "cam").mkdir()
    for name in ("IMG_20260714_100005_a.png", "IMG_20260714_100017.png", "holiday.png"):
        Image.new("RGB", (4, 4)).save(d / "cam" / name)
    (d / "session.toml").write_text((d / "session.toml").read_text() +
                                    '\n[[source]]\nkind = "frames"\npath = "cam"\ntime_from = "filename"\n'
                                    'filename_pattern = "IMG_%Y%m%d_%H%M%S"\n\n[[source]]\nkind = "frames"\n'
                                    'name = "exifless"\npath = "cam"\n')
    spec = load_manifest(d)
    a, b = spec.sources_of("frames")
    df, meta = read_frames(a.abs_path, a, spec)
    # 10:00:05 and 10:00:17 CEST (UTC+2 in July, IANA tz database) in the file names
    assert list(df.index) == [pd.Timestamp("2026-07-14T08:00:05Z"), pd.Timestamp("2026-07-14T08:00:17Z")]
    assert list(meta["quarantine"]["reason"]) == ["name_does_not_match"]
    df, meta = read_frames(b.abs_path, b, spec)
    assert len(df) == 0 and set(meta["quarantine"]["reason"]) == {"no_exif_time"}


def test_votes_json(tmp_path):
    d = tmp_path / "s"
    shutil.copytree(SESSIONS / "broken" / "gpx10_ok", d)
    (d / "votes.json").write_text('{"votes": [{"time": "2026-07-14T08:00:10Z", "comfort": "Neutral", "tsv": -1},'
                                  ' {"time": "2026-07-14T08:00:20Z", "tsv": 3, "note": "<b>hot</b>"},'
                                  ' {"time": "2026-07-14T08:00:30Z", "comfort": "meh"}]}')
    (d / "session.toml").write_text((d / "session.toml").read_text() +
                                    '\n[[source]]\nkind = "votes"\npath = "votes.json"\n')
    spec = load_manifest(d)
    s = spec.sources_of("votes")[0]
    df, meta = read_votes(s.abs_path, s, spec)
    assert df[C.VOTE_COMFORT].iloc[0] == "neutral" and pd.isna(df[C.VOTE_COMFORT].iloc[1])
    assert list(df[C.VOTE_TSV]) == [-1.0, 3.0]
    assert df[C.VOTE_NOTE].iloc[1] == "<b>hot</b>"   # kept as typed; escaping is the report's job
    assert list(meta["quarantine"]["reason"]) == ["bad_comfort"]


def test_gpx_unreadable_time_keeps_its_text(tmp_path):
    d = tmp_path / "s"
    shutil.copytree(SESSIONS / "broken" / "gpx10_ok", d)
    (d / "track.gpx").write_text(
        '<?xml version="1.0"?>\n<gpx version="1.1" creator="t" xmlns="http://www.topografix.com/GPX/1/1">'
        '<trk><trkseg><trkpt lat="40.0" lon="-3.0"><time>2026-07-14T08:00:00Z</time></trkpt>\n'
        '<trkpt lat="40.00001" lon="-3.0"><time>half past ten</time></trkpt>\n'
        '<trkpt lat="40.00002" lon="-3.0"/>\n'
        '<trkpt lat="40.00003" lon="-3.0"><time>2026-07-14T08:00:03Z</time></trkpt></trkseg></trk></gpx>\n')
    df, meta = _gps(d)
    q = meta["quarantine"]
    assert list(q["reason"]) == ["bad_time", "no_time"] and list(q["row"]) == [2, 3]
    assert "half past ten" in q["raw"].iloc[0]
    assert len(df) == 2


def test_date_and_time_in_separate_columns_with_decimal_comma(tmp_path):
    d = tmp_path / "s"
    shutil.copytree(SESSIONS / "broken" / "gpx10_ok", d)
    (d / "weather.csv").write_text("Date;Time;T;Wind\n14/07/2026;10:00:00;30,5;3,6\n14/07/2026;10:00:02;30,7;7,2\n")
    text = (d / "session.toml").read_text().replace(
        '[source.units]\nt_air = "degC"\nwind = "m/s"',
        'delimiter = ";"\ndecimal = ","\ntime_format = "%d/%m/%Y %H:%M:%S"\n[source.columns]\n'
        'time = ["Date", "Time"]\nt_air = "T"\nwind = "Wind"\n[source.units]\nt_air = "degC"\nwind = "km/h"')
    (d / "session.toml").write_text(text)
    spec = load_manifest(d)
    src = spec.sources_of("weather")[0]
    assert src.time_columns == ("Date", "Time")
    df, meta = read_weather(src.abs_path, src, spec)
    assert list(df.index) == [pd.Timestamp("2026-07-14T08:00:00Z"), pd.Timestamp("2026-07-14T08:00:02Z")]
    assert list(df[C.T_AIR_C]) == [30.5, 30.7]
    # 1 km/h = 1/3.6 m/s (from the definition); 10:00 CEST = 08:00 UTC
    assert list(df[C.WIND_MS]) == pytest.approx([1.0, 2.0])   # 3.6 and 7.2 km/h


@pytest.mark.parametrize("fmt, values", [("epoch_s", ["1784016000", "1784016001.5", "x", "1e20"]),
                                         ("epoch_ms", ["1784016000000", "1784016001500", "x", "1e25"])])
def test_epoch_times(tmp_path, fmt, values):
    d = tmp_path / "s"
    shutil.copytree(SESSIONS / "broken" / "gpx10_ok", d)
    (d / "weather.csv").write_text("time,t_air\n" + "\n".join(f"{v},20" for v in values) + "\n")
    (d / "session.toml").write_text((d / "session.toml").read_text().replace(
        'device = "logger1"', f'device = "logger1"\ntime_format = "{fmt}"'))
    spec = load_manifest(d)
    src = spec.sources_of("weather")[0]
    df, meta = read_weather(src.abs_path, src, spec)
    # 1784016000 s after 1970-01-01T00:00Z is 2026-07-14T08:00:00Z (from the definition of Unix time)
    assert list(df.index) == [pd.Timestamp("2026-07-14T08:00:00Z"), pd.Timestamp("2026-07-14T08:00:01.5Z")]
    assert list(meta["quarantine"]["reason"]) == ["bad_time", "bad_time"]


def test_large_files_are_read_column_wise_with_the_same_result(monkeypatch, tmp_path):
    """The Arrow column-wise path of big quote-free files gives the rows, values and quarantine of the row loop."""
    import walkcomfort.session.readers._common as common
    from walkcomfort.session.readers import read_source

    d = tmp_path / "s"
    shutil.copytree(Path(__file__).resolve().parents[1] / "fixtures" / "sessions" / "walk_ok", d)
    w = d / "logger" / "weather.csv"
    lines = w.read_text().splitlines()
    lines[4] += ","                      # a trailing delimiter: kept
    lines[6] += ",9"                     # one field too many: bad_line
    lines[8] = lines[8].replace(",", ",\x01", 1)   # a control byte: bad_line
    lines.insert(10, "# a comment")
    w.write_text("\n".join(lines) + "\n")
    spec = load_manifest(d)
    src = [s for s in spec.sources if s.kind in ("weather", "noise", "light")]
    rows_loop = {s.name: read_source(s, spec) for s in src}
    monkeypatch.setattr(common, "_COLUMNWISE_ROWS", 0)
    for s in src:
        a, ma = rows_loop[s.name]
        b, mb = read_source(s, spec)
        pd.testing.assert_frame_equal(a, b)
        pd.testing.assert_frame_equal(ma["quarantine"], mb["quarantine"])
        assert list(ma["row_numbers"]) == list(mb["row_numbers"]) and ma["raw_lines"] == mb["raw_lines"]
    assert (rows_loop["weather"][1]["quarantine"]["reason"] == "bad_line").sum() == 2
