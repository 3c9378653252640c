"""Damaged sessions made from the good fixture walk, each damaging one thing.

``CASES`` maps a case id to ``(damage, expect)``: ``damage(folder)`` edits a copy of
``tests/fixtures/sessions/walk_ok`` in place; ``expect`` is ``"ok"`` (check passes with
reconciled counts), ``"refuse"`` (check exits 2 with one line) or ``"either"`` (both are
acceptable answers, the invariants still hold). Used by ``test_session_damaged.py``.
"""

from __future__ import annotations

import json
import re
import struct
import zlib
from pathlib import Path

FIXTURE = Path(__file__).resolve().parents[1] / "fixtures" / "sessions" / "walk_ok"
GPX, WEATHER, NOISE, LIGHT, VOTES = "gps/track.gpx", "logger/weather.csv", "slm/levels.csv", "lux/light.csv", "votes.csv"
CSV_SOURCES = {"weather": WEATHER, "noise": NOISE, "light": LIGHT, "votes": VOTES}

CASES: dict[str, tuple] = {}


def case(name: str, expect: str):
    def deco(fn):
        CASES[name] = (fn, expect)
        return fn
    return deco


def _edit(folder: Path, rel: str, fn) -> None:
    p = folder / rel
    p.write_text(fn(p.read_text(encoding="utf-8")), encoding="utf-8")


def _edit_bytes(folder: Path, rel: str, fn) -> None:
    p = folder / rel
    p.write_bytes(fn(p.read_bytes()))


def _toml(folder: Path, fn) -> None:
    _edit(folder, "session.toml", fn)


def _lines(text: str) -> list[str]:
    return text.split("\n")


def _rows(fn):
    """Apply ``fn(header, rows) -> (header, rows)`` to a CSV text."""
    def go(text: str) -> str:
        lines = [ln for ln in text.split("\n") if ln]
        header, rows = fn(lines[0], lines[1:])
        return "\n".join([header, *rows]) + "\n"
    return go


def _source_block(text: str, path: str) -> tuple[int, int]:
    """Start and end of the [[source]] table whose path is ``path``."""
    at = text.index(f'path = "{path}"')
    start = text.rindex("[[source]]", 0, at)
    nxt = text.find("[[source]]", at)
    return start, (len(text) if nxt < 0 else nxt)


def _in_source(path: str, fn):
    def go(text: str) -> str:
        a, b = _source_block(text, path)
        return text[:a] + fn(text[a:b]) + text[b:]
    return go


def _drop_source(path: str):
    def go(text: str) -> str:
        a, b = _source_block(text, path)
        return text[:a] + text[b:]
    return go


# ---------------------------------------------------------------- manifest: one key at a time
_MANIFEST_EDITS = {
    "no_session_id": (lambda t: t.replace('id = "fixture-p01-am"\n', ""), "refuse"),
    "id_with_slash": (lambda t: t.replace('id = "fixture-p01-am"', 'id = "a/b"'), "refuse"),
    "no_participant": (lambda t: t.replace('participant = "P01"\n', "", 1), "refuse"),
    "no_timezone": (lambda t: t.replace('timezone = "Europe/Madrid"\n', ""), "refuse"),
    "bad_timezone": (lambda t: t.replace('"Europe/Madrid"', '"Europe/Atlantis"'), "refuse"),
    "typo_top_key": (lambda t: "sesion_note = 1\n" + t, "refuse"),
    "typo_session_key": (lambda t: t.replace('site = ', 'sight = '), "refuse"),
    "typo_participant_key": (lambda t: t.replace("clo = 0.5", "clothing = 0.5"), "refuse"),
    "clo_text": (lambda t: t.replace("clo = 0.5", 'clo = "half"'), "refuse"),
    "clo_negative": (lambda t: t.replace("clo = 0.5", "clo = -1"), "refuse"),
    "acclimatised_text": (lambda t: t.replace("acclimatised = true", 'acclimatised = "yes"'), "refuse"),
    "start_not_iso": (lambda t: t.replace('site = "', 'start = "10:00"\nsite = "'), "refuse"),
    "end_before_start": (lambda t: t.replace('site = "', 'start = "2026-07-14T10:05:00"\nend = "2026-07-14T10:01:00"\n'
                                                        'site = "'), "refuse"),
    "window_outside_track": (lambda t: t.replace('site = "', 'start = "2026-07-15T10:00:00"\nend = '
                                                            '"2026-07-15T11:00:00"\nsite = "'), "refuse"),
    "window_trims": (lambda t: t.replace('site = "', 'start = "2026-07-14T10:02:00"\nend = "2026-07-14T10:07:00"\n'
                                                    'site = "'), "ok"),
    "schema_wrong": (lambda t: t.replace("walkcomfort-session/1", "walkcomfort-session/9"), "refuse"),
    "two_references": (lambda t: t.replace("offset_s = 0.0", "reference = true"), "refuse"),
    "reference_with_offset": (lambda t: t.replace("[devices.gps1]\nreference = true",
                                                  "[devices.gps1]\nreference = true\noffset_s = 3.0"), "refuse"),
    "device_not_table": (lambda t: t.replace("[devices.logger1]\noffset_s = 0.0", "[devices]\nlogger1 = 3"), "refuse"),
    "drift_absurd": (lambda t: t.replace("offset_s = 0.0", "drift_ppm = 1e9"), "refuse"),
    "sync_unknown_device": (lambda t: t.replace('device = "logger1"\ndevice_time', 'device = "loger1"\ndevice_time'),
                            "refuse"),
    "sync_missing_true_time": (lambda t: t.replace('true_time = "2026-07-14T10:00:00"\n', ""), "refuse"),
    "sync_bad_time": (lambda t: t.replace('device_time = "2026-07-14T10:00:07"', 'device_time = "ten o\'clock"'),
                      "refuse"),
    "sync_frame_and_time": (lambda t: t.replace('device = "logger1"\ndevice_time',
                                                'device = "cam1"\nframe = "camera/IMG_0001.jpg"\ndevice_time'),
                            "refuse"),
    "sync_frame_no_camera": (lambda t: _drop_source("camera")(t).replace(
        'device = "logger1"\ndevice_time = "2026-07-14T10:00:07"', 'device = "cam1"\nframe = "camera/IMG_0001.jpg"'),
        "refuse"),
    "sync_same_device": (lambda t: t.replace('device = "logger1"\ndevice_time',
                                             'device = "gps1"\ndevice_time'), "refuse"),
    "no_sources": (lambda t: t[:t.index("[[source]]")], "refuse"),
    "no_gps_source": (_drop_source(GPX), "refuse"),
    "source_kind_bogus": (lambda t: t.replace('kind = "noise"', 'kind = "nose"'), "refuse"),
    "second_weather": (lambda t: t + '\n[[source]]\nkind = "weather"\npath = "logger/weather.csv"\n', "refuse"),
    "path_absolute": (lambda t: t.replace('path = "slm/levels.csv"', 'path = "/etc/passwd"'), "refuse"),
    "path_dotdot": (lambda t: t.replace('path = "slm/levels.csv"', 'path = "../levels.csv"'), "refuse"),
    "path_nul_byte": (lambda t: t.replace('path = "slm/levels.csv"', 'path = "slm/lev\\u0000els.csv"'), "refuse"),
    "path_spaces": (lambda t: t.replace('path = "slm/levels.csv"', 'path = " slm/levels.csv"'), "refuse"),
    "gps_format_bogus": (lambda t: t.replace('format = "gpx"', 'format = "kml"'), "refuse"),
    "weather_format_json": (_in_source(WEATHER, lambda b: b.replace('time_zone = "local"',
                                                                    'time_zone = "local"\nformat = "json"')), "refuse"),
    "weather_zone_bogus": (lambda t: t.replace('time_zone = "local"', 'time_zone = "Mars/Olympus"'), "refuse"),
    "weather_zone_utc": (lambda t: t.replace('time_zone = "local"', 'time_zone = "UTC"'), "refuse"),
    "light_zone_tokyo": (_in_source(LIGHT, lambda b: b.replace('device = "lux1"',
                                                               'device = "lux1"\ntime_zone = "Asia/Tokyo"')), "refuse"),
    "unit_bogus_t_air": (lambda t: t.replace('t_air = "degF"', 't_air = "degR"'), "refuse"),
    "unit_missing_wind": (lambda t: t.replace('wind = "km/h"\n', ""), "refuse"),
    "unit_missing_t_globe": (lambda t: t.replace('t_globe = "degF"\n', ""), "refuse"),
    "unit_degc_for_degf_air": (lambda t: t.replace('t_air = "degF"', 't_air = "degC"'), "refuse"),
    "unit_degc_for_degf_globe": (lambda t: t.replace('t_globe = "degF"', 't_globe = "degC"'), "refuse"),
    "unit_kelvin_for_degf": (lambda t: t.replace('t_air = "degF"', 't_air = "K"'), "refuse"),
    "unit_on_time": (lambda t: t.replace('wind = "km/h"', 'wind = "km/h"\ntime = "s"'), "refuse"),
    "unit_field_unknown": (lambda t: t.replace('wind = "km/h"', 'wind = "km/h"\nhumidex = "%"'), "refuse"),
    "units_not_text": (lambda t: t.replace('wind = "km/h"', 'wind = 3.6'), "refuse"),
    "column_missing_t_air": (lambda t: t.replace('t_air = "Temp_F"', 't_air = "Temp_X"'), "refuse"),
    "column_missing_rh": (lambda t: t.replace('rh = "RH"', 'rh = "Humidity"'), "refuse"),
    "column_missing_time": (lambda t: t.replace('time = "DateTime"', 'time = "Timestamp"'), "refuse"),
    "column_missing_laeq": (lambda t: t.replace('laeq = "LAeq"', 'laeq = "LAFmax"'), "refuse"),
    "column_missing_illum": (lambda t: t.replace('illum = "lux"', 'illum = "Lux"'), "refuse"),
    "column_field_unknown": (lambda t: t.replace('rh = "RH"', 'rh = "RH"\nhumidity = "RH"'), "refuse"),
    "time_columns_empty": (lambda t: t.replace('time = "DateTime"', 'time = []'), "refuse"),
    "time_format_wrong": (_in_source(WEATHER, lambda b: b.replace('time_zone = "local"',
                                                                  'time_zone = "local"\ntime_format = "%d/%m/%Y %H:%M"')),
                          "refuse"),
    "time_format_epoch_for_text": (_in_source(WEATHER, lambda b: b.replace(
        'time_zone = "local"', 'time_zone = "local"\ntime_format = "epoch_s"')), "refuse"),
    "time_format_list_mismatch": (_in_source(WEATHER, lambda b: b.replace(
        'time_zone = "local"', 'time_zone = "local"\ntime_format = ["%Y-%m-%d", "HHMM"]')), "refuse"),
    "time_format_token_alone": (_in_source(WEATHER, lambda b: b.replace(
        'time_zone = "local"', 'time_zone = "local"\ntime_format = "HHMM"')), "refuse"),
    "delimiter_two_chars": (_in_source(LIGHT, lambda b: b.replace('device = "lux1"', 'device = "lux1"\ndelimiter = ";;"')),
                            "refuse"),
    "delimiter_wrong": (_in_source(LIGHT, lambda b: b.replace('device = "lux1"', 'device = "lux1"\ndelimiter = ","')),
                        "refuse"),
    "decimal_bogus": (_in_source(NOISE, lambda b: b.replace('device = "slm1"', 'device = "slm1"\ndecimal = "·"')),
                      "refuse"),
    "decimal_comma_wrong": (_in_source(NOISE, lambda b: b.replace('device = "slm1"', 'device = "slm1"\ndecimal = ","')),
                            "ok"),
    "na_values_text": (_in_source(NOISE, lambda b: b.replace('device = "slm1"', 'device = "slm1"\nna_values = "-"')),
                       "refuse"),
    "max_gap_negative": (_in_source(NOISE, lambda b: b.replace('device = "slm1"', 'device = "slm1"\nmax_gap_s = -1')),
                         "refuse"),
    "comfort_label_bogus": (_in_source(VOTES, lambda b: b + '[source.comfort_labels]\nok = "fine"\n'), "refuse"),
    "encoding_bogus": (_in_source(NOISE, lambda b: b.replace('device = "slm1"', 'device = "slm1"\nencoding = "utf-99"')),
                       "refuse"),
    "frames_time_from_bogus": (lambda t: t.replace('time_from = "exif"', 'time_from = "gps"'), "refuse"),
    "frames_filename_no_pattern": (lambda t: t.replace('time_from = "exif"', 'time_from = "filename"'), "refuse"),
    "frames_filename_pattern_bad": (lambda t: t.replace('time_from = "exif"',
                                                        'time_from = "filename"\nfilename_pattern = "IMG_%Q"'),
                                    "refuse"),
    "frames_filename_unmatched": (lambda t: t.replace('time_from = "exif"',
                                                      'time_from = "filename"\nfilename_pattern = "IMG_%Y%m%d"'),
                                  "refuse"),
    "sensor_out_of_range": (lambda t: t.replace("globe_diameter_m = 0.038", "globe_diameter_m = 38"), "refuse"),
    "sensor_unknown": (lambda t: t.replace("wind_height_m = 1.1", "wind_heigth_m = 1.1"), "refuse"),
    "checks_unknown_key": (lambda t: t + "\n[checks]\nmax_lost = 0.2\n", "refuse"),
    "checks_out_of_range": (lambda t: t + "\n[checks]\nfail_lost_share = 2.0\n", "refuse"),
    "checks_warn_above_fail": (lambda t: t + "\n[checks]\nwarn_lost_share = 0.9\n", "refuse"),
    "checks_accept_text": (lambda t: t + '\n[checks]\naccept_losses = "yes"\n', "refuse"),
    "checks_strict_fails": (lambda t: t + "\n[checks]\nfail_lost_share = 0.01\nwarn_lost_share = 0.0\n", "refuse"),
    "checks_accept_strict": (lambda t: t + "\n[checks]\nfail_lost_share = 0.01\nwarn_lost_share = 0.0\n"
                                           "accept_losses = true\n", "ok"),
    "toml_syntax": (lambda t: t.replace('timezone = "Europe/Madrid"', 'timezone = "Europe/Madrid'), "refuse"),
    "toml_not_utf8": (None, "refuse"),
    "manifest_missing": (None, "refuse"),
    "drop_noise_source": (_drop_source(NOISE), "ok"),
    "drop_votes_source": (_drop_source(VOTES), "ok"),
    "drop_camera_source": (_drop_source("camera"), "ok"),
}
for _name, (_fn, _expect) in _MANIFEST_EDITS.items():
    if _fn is not None:
        CASES[f"manifest_{_name}"] = ((lambda fn: lambda d: _toml(d, fn))(_fn), _expect)


@case("manifest_toml_not_utf8", "refuse")
def _toml_latin1(d):
    _edit_bytes(d, "session.toml", lambda b: b.replace(b'site = "Fixture', b'site = "F\xe9xture'))


@case("manifest_manifest_missing", "refuse")
def _no_manifest(d):
    (d / "session.toml").unlink()


# ---------------------------------------------------------------- missing and empty files
for _src, _rel in {**CSV_SOURCES, "gps": GPX}.items():
    CASES[f"missing_file_{_src}"] = ((lambda rel: lambda d: (d / rel).unlink())(_rel), "refuse")
    CASES[f"empty_file_{_src}"] = ((lambda rel: lambda d: (d / rel).write_bytes(b""))(_rel), "refuse")


# ---------------------------------------------------------------- delimited files: one damage each
def _csv_damages():
    return {
        "header_only": (lambda t: t.split("\n", 1)[0] + "\n", "either"),
        "truncated_mid_line": (lambda t: t[: len(t) * 2 // 3], "ok"),
        "garbage_lines": (lambda t: t + "@@@@\n;;;;;;;;\n\x01\x02binary\n", "ok"),
        "duplicated_rows": (_rows(lambda h, r: (h, r + r[:3])), "either"),
        "reversed_rows": (_rows(lambda h, r: (h, r[::-1])), "ok"),
        "one_value_text": (_rows(lambda h, r: (h, [r[0] + "x"] + r[1:])), "ok"),
        "crlf": (lambda t: t.replace("\n", "\r\n"), "ok"),
        "bom": (lambda t: "\ufeff" + t, "ok"),
        "comment_lines": (lambda t: "# exported by logger v2\n# units below\n" + t, "ok"),
        "blank_lines": (lambda t: t.replace("\n", "\n\n"), "ok"),
        "trailing_delimiters": (_rows(lambda h, r: (h, [x + "," if "," in x else x + ";" for x in r])), "ok"),
        "all_times_shifted_2h": (lambda t: _shift_times(t, hours=2), "refuse"),
        "all_times_shifted_1d": (lambda t: _shift_times(t, hours=24), "refuse"),
        "times_garbled": (lambda t: re.sub(r"2026-07-14 ", "14.07.2026 ", t), "refuse"),
        "most_times_garbled": (_rows(lambda h, r: (h, [re.sub("2026-07-14 ", "14/07/2026 ", x) if i % 3 else x
                                                      for i, x in enumerate(r)])), "refuse"),
        "slash_iso_dates": (_rows(lambda h, r: (h, [re.sub("2026-07-14 ", "2026/07/14T", x) for x in r])), "ok"),
        "times_with_z_mixed": (_rows(lambda h, r: (h, [re.sub(r"(\d\d:\d\d:\d\d)", r"\1Z", r[0], count=1)] + r[1:])),
                               "refuse"),
        "time_hhmm_unpadded": (lambda t: re.sub(r"2026-07-14 (\d\d):(\d\d):\d\d",
                                                lambda m: f"2026-07-14 {int(m.group(1))}{m.group(2)}", t), "refuse"),
        "nul_byte_row": (_rows(lambda h, r: (h, r[:1] + [r[1].replace(",", ",\x00", 1)] + r[2:])), "ok"),
        "mixed_encoding": (None, "refuse"),
        "all_cp1252": (None, "ok"),
        "header_100k_columns": (lambda t: t.split("\n", 1)[0] + "".join(f",c{i}" for i in range(100_000)) + "\n"
                                + t.split("\n", 1)[1], "either"),
        "duplicate_column": (lambda t: t.split("\n", 1)[0] + "," + t.split("\n", 1)[0].split(",")[-1].split(";")[-1]
                             + "\n" + t.split("\n", 1)[1], "either"),
        "semicolon_file": (lambda t: t.replace(",", ";") if "," in t.split("\n", 1)[0] else t, "either"),
        "unterminated_quote": (_rows(lambda h, r: (h, r[:1] + ['"' + r[1]] + r[2:])), "ok"),
    }


def _shift_times(text: str, hours: int) -> str:
    import pandas as pd

    def go(m):
        return (pd.Timestamp(m.group(0)) + pd.Timedelta(hours=hours)).strftime("%Y-%m-%d %H:%M:%S")
    return re.sub(r"2026-07-14 \d\d:\d\d:\d\d", go, text)


def _latin1_line(d: Path, rel: str) -> None:
    def go(b: bytes) -> bytes:
        lines = b.split(b"\n")
        lines[0] = lines[0] + "_°".encode()          # UTF-8 in the header
        lines[3] = lines[3] + b"\xb0" if b"," in lines[3] else lines[3]
        return b"\n".join(lines)
    _edit_bytes(d, rel, go)


def _all_cp1252(d: Path, rel: str) -> None:
    _edit_bytes(d, rel, lambda b: b.replace(b"\n", b" \xb0\n", 1) if rel != VOTES else
                b.replace(b"shady start", b"sombra ca\xf1a"))


for _src, _rel in CSV_SOURCES.items():
    for _name, (_fn, _expect) in _csv_damages().items():
        if _name == "mixed_encoding":
            CASES[f"{_src}_{_name}"] = ((lambda rel: lambda d: _latin1_line(d, rel))(_rel), "refuse")
        elif _name == "all_cp1252":
            CASES[f"{_src}_{_name}"] = ((lambda rel: lambda d: _all_cp1252(d, rel))(_rel), "either")
        else:
            CASES[f"{_src}_{_name}"] = ((lambda rel, fn: lambda d: _edit(d, rel, fn))(_rel, _fn),
                                        "either" if _src == "votes" and _expect == "refuse" else _expect)


# ---------------------------------------------------------------- values and units
@case("weather_values_fahrenheit_as_celsius_header", "refuse")
def _f_as_c(d):
    _toml(d, lambda t: t.replace('t_air = "degF"', 't_air = "degC"').replace('t_globe = "degF"', 't_globe = "degC"'))


@case("weather_comma_decimals", "refuse")
def _comma_decimals(d):
    _edit(d, WEATHER, lambda t: t.replace(",", ";").replace(".", ","))


@case("noise_comma_decimals", "refuse")
def _noise_comma(d):
    _edit(d, NOISE, lambda t: t.replace(",", ";").replace(".", ","))


@case("light_klux_as_lux_ok", "ok")
def _klux(d):
    _edit(d, LIGHT, lambda t: re.sub(r";(\d+)", lambda m: f";{int(m.group(1)) / 1000:.3f}", t))
    _toml(d, lambda t: t.replace('illum = "lux"', 'illum = "lux"\n[source.units]\nillum = "klux"'))


@case("noise_negative_levels", "refuse")
def _neg(d):
    _edit(d, NOISE, lambda t: re.sub(r",(\d)", r",-\1", t))


@case("weather_one_row_out_of_range", "ok")
def _one_oor(d):
    _edit(d, WEATHER, _rows(lambda h, r: (h, r[:10] + [re.sub(r",[\d.]+,", ",999,", r[10], count=1)] + r[11:])))


# ---------------------------------------------------------------- votes
@case("votes_note_1mb", "ok")
def _big_note(d):
    _edit(d, VOTES, lambda t: t.replace('"hot, no shade"', '"' + "hot, no shade " * 75_000 + '"'))


@case("votes_note_line_break", "ok")
def _note_break(d):
    _edit(d, VOTES, lambda t: t.replace('"hot, no shade"', '"hot,\nno shade"'))


for _i, _brk in enumerate(("\r\n", "\u2028", "\x85", "\x0c", "\u2029")):
    CASES[f"votes_note_break_{_i}"] = ((lambda brk: lambda d: _edit(
        d, VOTES, lambda t: t.replace('"hot, no shade"', f'"hot,{brk}no shade"')))(_brk), "ok")


@case("votes_json_deep", "refuse")
def _deep_json(d):
    (d / "votes.json").write_text("[" * 100_000 + "]" * 100_000)
    _toml(d, lambda t: t.replace('path = "votes.csv"', 'path = "votes.json"'))


@case("votes_json_not_list", "refuse")
def _json_obj(d):
    (d / "votes.json").write_text(json.dumps({"time": "2026-07-14 10:01:00", "comfort": "neutral"}))
    _toml(d, lambda t: t.replace('path = "votes.csv"', 'path = "votes.json"'))


@case("votes_json_ok", "ok")
def _json_ok(d):
    votes = [{"time": "2026-07-14 10:01:00", "comfort": "comfortable", "note": "caña"},
             {"time": "2026-07-14 10:05:10", "comfort": "neutral", "tsv": 1, "note": {"nested": [1, 2]}}]
    (d / "votes.json").write_text(json.dumps(votes, ensure_ascii=False), encoding="utf-8")
    _toml(d, lambda t: t.replace('path = "votes.csv"', 'path = "votes.json"'))


@case("votes_json_broken", "refuse")
def _json_broken(d):
    (d / "votes.json").write_text('[{"time": "2026-07-14 10:01:00",')
    _toml(d, lambda t: t.replace('path = "votes.csv"', 'path = "votes.json"'))


@case("votes_other_participant", "either")
def _other(d):
    _edit(d, VOTES, lambda t: t.replace("time,comfort", "time,participant,comfort").replace(
        "2026-07-14 10:01:00,", "2026-07-14 10:01:00,P02,").replace("2026-07-14 10:05:10,", "2026-07-14 10:05:10,P02,")
        .replace("2026-07-14 10:09:10,", "2026-07-14 10:09:10,P01,"))


# ---------------------------------------------------------------- GPX
def _gpx(fn):
    return lambda d: _edit(d, GPX, fn)


def _points(text: str) -> tuple[str, list[str], str]:
    a = text.index("<trkpt")
    b = text.rindex("</trkpt>") + len("</trkpt>")
    pts = re.findall(r"<trkpt.*?</trkpt>", text[a:b], flags=re.S)
    return text[:a], pts, text[b:]


def _with_points(fn):
    def go(text: str) -> str:
        head, pts, tail = _points(text)
        return head + "\n".join(fn(pts)) + tail
    return _gpx(go)


def _retime(pt: str, when: str) -> str:
    return re.sub(r"<time>[^<]*</time>", f"<time>{when}</time>", pt)


_GPX_CASES = {
    "truncated": (_gpx(lambda t: t[: len(t) // 2]), "refuse"),
    "not_xml": (_gpx(lambda t: "this is not a track\n"), "refuse"),
    "no_times": (_gpx(lambda t: re.sub(r"<time>[^<]*</time>", "", t)), "refuse"),
    "some_times_missing": (_with_points(lambda p: [re.sub(r"<time>[^<]*</time>", "", x) if i % 50 == 7 else x
                                                   for i, x in enumerate(p)]), "ok"),
    "half_times_missing": (_with_points(lambda p: [re.sub(r"<time>[^<]*</time>", "", x) if i % 3 else x
                                                   for i, x in enumerate(p)]), "refuse"),
    "lat_nan": (_with_points(lambda p: [re.sub(r'lat="[^"]*"', 'lat="NaN"', x) if i == 100 else x
                                        for i, x in enumerate(p)]), "ok"),
    "all_lat_nan": (_with_points(lambda p: [re.sub(r'lat="[^"]*"', 'lat="NaN"', x) for x in p]), "refuse"),
    "lat_out_of_range": (_with_points(lambda p: [re.sub(r'lat="[^"]*"', 'lat="123.4"', x) if i == 50 else x
                                                 for i, x in enumerate(p)]), "ok"),
    "null_island": (_with_points(lambda p: [re.sub(r'lat="[^"]*" lon="[^"]*"', 'lat="0" lon="0"', x) if i < 5 else x
                                            for i, x in enumerate(p)]), "ok"),
    "one_point_1970": (_with_points(lambda p: [_retime(p[0], "1970-01-01T00:00:00Z")] + p[1:]), "ok"),
    "one_point_2099": (_with_points(lambda p: p[:-1] + [_retime(p[-1], "2099-01-01T00:00:00Z")]), "ok"),
    "one_point_year_1": (_with_points(lambda p: p[:-1] + [_retime(p[-1], "0001-01-01T00:00:00Z")]), "ok"),
    "one_point_day_early": (_with_points(lambda p: [_retime(p[0], "2026-07-13T08:00:00Z")] + p[1:]), "ok"),
    "two_walks_days_apart": (_with_points(lambda p: p[:300] + [_retime(x, re.search(r"<time>([^<]*)</time>", x).group(1)
                                                                            .replace("2026-07-14", "2026-07-16"))
                                                              for x in p[300:]]), "refuse"),
    "two_years": (_with_points(lambda p: p[:300] + [_retime(x, re.search(r"<time>([^<]*)</time>", x).group(1)
                                                          .replace("2026-07-14", "2028-07-14")) for x in p[300:]]),
                  "refuse"),
    "reversed_points": (_with_points(lambda p: p[::-1]), "ok"),
    "duplicated_points": (_with_points(lambda p: p + p[:20]), "ok"),
    "one_jump": (_with_points(lambda p: [re.sub(r'lat="40\.41', 'lat="40.51', x) if i == 200 else x
                                         for i, x in enumerate(p)]), "ok"),
    "naive_times": (_gpx(lambda t: t.replace("Z</time>", "</time>")), "ok"),
    "mixed_zones": (_with_points(lambda p: [x.replace("Z</time>", "</time>") if i == 3 else x
                                            for i, x in enumerate(p)]), "refuse"),
    "offset_times": (_gpx(lambda t: re.sub(r"T08:(\d\d:\d\d)Z", r"T10:\1+02:00", t)), "ok"),
    "no_elevation": (_gpx(lambda t: re.sub(r"<ele>[^<]*</ele>", "", t)), "ok"),
    "latin1_name": (lambda d: _edit_bytes(d, GPX, lambda b: b.replace(b"<name>fixture", b"<name>fixtur\xe9")), "refuse"),
    "bom": (lambda d: _edit_bytes(d, GPX, lambda b: b"\xef\xbb\xbf" + b), "ok"),
    "five_points": (_with_points(lambda p: p[:5]), "refuse"),
    "twelve_points": (_with_points(lambda p: p[100:112]), "refuse"),
    "only_waypoints": (_gpx(lambda t: re.sub(r"<trk>.*</trk>", '<wpt lat="40.4" lon="-3.7"></wpt>', t, flags=re.S)),
                       "refuse"),
    "empty_segment_added": (_gpx(lambda t: t.replace("</trkseg>", "</trkseg><trkseg></trkseg>", 1)), "ok"),
    "second_segment": (_with_points(lambda p: p[:300] + ["</trkseg><trkseg>"] + p[300:]), "ok"),
    "sparse_motion_logging": (_with_points(lambda p: [x for i, x in enumerate(p) if i % 25 == 0 or i > 590]), "ok"),
    "gps_clock_2h_off": (_gpx(lambda t: re.sub(r"T08:(\d\d:\d\d)Z", r"T06:\1Z", t)), "refuse"),
    "gpx_csv_format_declared": (lambda d: _toml(d, lambda t: t.replace('format = "gpx"', 'format = "csv"')), "refuse"),
}
for _name, (_fn, _expect) in _GPX_CASES.items():
    CASES[f"gpx_{_name}"] = (_fn, _expect)


@case("gpx_vehicle_leg", "ok")
def _vehicle(d):
    def go(pts):
        out = []
        for i, x in enumerate(pts):
            if 300 <= i < 360:   # a minute at ~14 m/s north, then back where the walk resumes
                k = i - 300 if i < 330 else 360 - i
                x = re.sub(r'lat="([\d.]+)"', lambda m, k=k: f'lat="{float(m.group(1)) + k * 14 / 111_195:.7f}"', x)
            out.append(x)
        return out
    _with_points(go)(d)


# ---------------------------------------------------------------- epoch and HHMM columns
@case("light_epoch_ms_declared_s", "refuse")
def _epoch_ms(d):
    import pandas as pd

    def go(t):
        return re.sub(r"2026-07-14 \d\d:\d\d:\d\d", lambda m: str(int(pd.Timestamp(m.group(0), tz="Europe/Madrid")
                                                                     .value // 1_000_000)), t)
    _edit(d, LIGHT, go)
    _toml(d, _in_source(LIGHT, lambda b: b.replace('device = "lux1"', 'device = "lux1"\ntime_format = "epoch_s"')))


@case("light_epoch_ms_declared_ms", "ok")
def _epoch_ms_ok(d):
    _epoch_ms(d)
    _toml(d, lambda t: t.replace('time_format = "epoch_s"', 'time_format = "epoch_ms"'))


@case("light_plain_numbers_no_format", "refuse")
def _epoch_undeclared(d):
    _epoch_ms(d)
    _toml(d, lambda t: t.replace('time_format = "epoch_s"\n', ""))


@case("weather_date_and_hhmm_declared", "ok")
def _hhmm_ok(d):
    def go(t):
        lines = t.rstrip("\n").split("\n")
        seen, keep = set(), [lines[0].replace("DateTime,", "Date,Time,", 1)]
        for ln in lines[1:]:      # an HHMM logger writes once a minute: keep each minute's first row
            minute = ln[:16]
            if minute not in seen:
                seen.add(minute)
                keep.append(re.sub(r"2026-07-14 (\d\d):(\d\d):\d\d",
                                   lambda m: f"2026-07-14,{int(m.group(1))}{m.group(2)}", ln))
        return "\n".join(keep) + "\n"
    _edit(d, WEATHER, go)
    _toml(d, lambda t: t.replace('time = "DateTime"', 'time = ["Date", "Time"]').replace(
        'time_zone = "local"', 'time_zone = "local"\ntime_format = ["%Y-%m-%d", "HHMM"]\nmax_gap_s = 70'))


@case("weather_date_and_hhmm_as_pattern", "refuse")
def _hhmm_pattern(d):
    _hhmm_ok(d)
    _toml(d, lambda t: t.replace('time_format = ["%Y-%m-%d", "HHMM"]', 'time_format = "%Y-%m-%d %H%M"'))


@case("weather_date_and_hhmm_undeclared", "refuse")
def _hhmm_undeclared(d):
    _hhmm_ok(d)
    _toml(d, lambda t: t.replace('time_format = ["%Y-%m-%d", "HHMM"]\n', ""))


@case("weather_year_doy_hhmmss", "ok")
def _doy(d):
    def go(t):
        t = t.replace("DateTime,", "Year,DOY,HMS,", 1)
        return re.sub(r"2026-07-14 (\d\d):(\d\d):(\d\d)",
                      lambda m: f"2026,195,{int(m.group(1))}{m.group(2)}{m.group(3)}", t)
    _edit(d, WEATHER, go)
    _toml(d, lambda t: t.replace('time = "DateTime"', 'time = ["Year", "DOY", "HMS"]').replace(
        'time_zone = "local"', 'time_zone = "local"\ntime_format = ["YEAR", "DOY", "HHMMSS"]'))


# ---------------------------------------------------------------- frames
def _png_header(w: int, h: int) -> bytes:
    ihdr = struct.pack(">IIBBBBB", w, h, 8, 2, 0, 0, 0)
    chunk = b"IHDR" + ihdr
    return (b"\x89PNG\r\n\x1a\n" + struct.pack(">I", len(ihdr)) + chunk + struct.pack(">I", zlib.crc32(chunk))
            + struct.pack(">I", 0) + b"IEND" + struct.pack(">I", zlib.crc32(b"IEND")))


_FRAME_CASES = {
    "png_bomb_header": (lambda d: (d / "camera" / "IMG_0099.png").write_bytes(_png_header(100_000, 100_000)), "ok"),
    "zero_byte_jpeg": (lambda d: (d / "camera" / "IMG_0098.jpg").write_bytes(b""), "ok"),
    "corrupt_jpeg": (lambda d: (d / "camera" / "IMG_0003.jpg").write_bytes(b"\xff\xd8\xff garbage"), "ok"),
    "text_file_named_jpg": (lambda d: (d / "camera" / "IMG_0097.jpg").write_text("not an image"), "ok"),
    "all_frames_unreadable": (lambda d: [p.write_bytes(b"junk") for p in (d / "camera").glob("*.jpg")], "refuse"),
    "camera_folder_empty": (lambda d: [p.unlink() for p in (d / "camera").glob("*.jpg")], "ok"),
    "camera_folder_missing": (lambda d: [p.unlink() for p in (d / "camera").iterdir()] and (d / "camera").rmdir(),
                              "refuse"),
}
for _name, (_fn, _expect) in _FRAME_CASES.items():
    CASES[f"frames_{_name}"] = (_fn, _expect)
