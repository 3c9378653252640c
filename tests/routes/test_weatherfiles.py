"""Weather files nobody here wrote (pvlib's test data, copied under ../shared/realdata/weather/).

Every expected value below is read off the file's own rows by plain text parsing in the
test (not through pvlib or our reader), and the instant it must land on follows from the
format's documented time convention (see walkcomfort.routes.weatherfiles).
"""

from __future__ import annotations

import json
import os
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from walkcomfort import columns as C
from walkcomfort.errors import DataQualityWarning, InputError
from walkcomfort.routes.weather import WeatherFile, open_weather
from walkcomfort.routes.weatherfiles import detect_format, read_weather_file


def realdata_dir() -> Path:
    """``../shared/realdata`` beside the project (or ``$WALKCOMFORT_REALDATA``)."""
    env = os.environ.get("WALKCOMFORT_REALDATA")
    return Path(env) if env else Path(__file__).resolve().parents[2].parent / "shared" / "realdata"


WEATHER = realdata_dir() / "weather"
pytestmark = pytest.mark.skipif(not WEATHER.is_dir(),
                                reason=f"real third-party weather files not present at {WEATHER} (a fresh clone "
                                       "without ../shared/realdata)")


def _lines(name: str) -> list[str]:
    return (WEATHER / name).read_text(encoding="utf-8").splitlines()


def _at(data: pd.DataFrame, when: str) -> pd.Series:
    return data.loc[pd.Timestamp(when)]


def test_every_sample_is_recognised_from_its_content():
    expected = {"NLD_Amsterdam062400_IWEC.epw": "epw", "tmy_45.000_8.000_2005_2023.epw": "epw",
                "tmy_45.000_8.000_2005_2023.csv": "pvgis-tmy", "tmy_45.000_8.000_2005_2023.json": "pvgis-tmy",
                "pvgis_hourly_Timeseries_45.000_8.000_SA_30deg_0deg_2016_2016.csv": "pvgis-hourly",
                "test_read_psm3.csv": "nsrdb", "midc_20181014.txt": "midc", "surfrad-slv16001.dat": "surfrad",
                "CRNS0101-05-2019-AZ_Tucson_11_W.txt": "crn"}
    for name, fmt in expected.items():
        head = (WEATHER / name).read_bytes()[:4096].decode("latin-1")
        assert detect_format(head) == fmt, name


def test_epw_amsterdam_hour_ending_local_standard_time():
    data, meta = read_weather_file(WEATHER / "NLD_Amsterdam062400_IWEC.epw")
    f = _lines("NLD_Amsterdam062400_IWEC.epw")[8].split(",")  # first data row: 1995,1,1,1,60,…
    assert f[:4] == ["1995", "1", "1", "1"]
    assert meta["format"] == "epw" and meta["typical"] and meta["utc_offset_h"] == 1.0  # LOCATION …,1.0,-2.0
    # hour 1 in UTC+1 is the hour ending 01:00 local = 00:00 UTC (EPW: hour-ending, local standard time)
    row = _at(data, "2001-01-01T00:00Z")
    assert row[C.T_AIR_C] == float(f[6]) and row[C.RH_PCT] == float(f[8]) and row[C.WIND_MS] == float(f[21])
    assert row[C.PRESSURE_HPA] == float(f[9]) / 100  # Pa -> hPa
    noon = _lines("NLD_Amsterdam062400_IWEC.epw")[8 + 4 * 24 + 12].split(",")  # 5 January, hour 13 local
    assert (noon[1], noon[2], noon[3]) == ("1", "5", "13")
    assert _at(data, "2001-01-05T12:00Z")[C.GHI_WM2] == float(noon[13])
    assert meta["time"]["label"] == "interval_end" and meta["time"]["irradiance"] == "interval_mean"
    assert len(data) == 8760 and len(meta["quarantine"]) == 0


def _pvgis_csv_row(stamp: str) -> dict:
    lines = _lines("tmy_45.000_8.000_2005_2023.csv")
    head = next(i for i, s in enumerate(lines) if s.startswith("time(UTC),"))
    cols = lines[head].split(",")
    row = next(s for s in lines[head + 1:] if s.startswith(stamp)).split(",")
    return dict(zip(cols, row, strict=True))


def test_pvgis_typical_year_csv_and_json_instants_in_utc():
    csv, meta = read_weather_file(WEATHER / "tmy_45.000_8.000_2005_2023.csv")
    js, meta_j = read_weather_file(WEATHER / "tmy_45.000_8.000_2005_2023.json")
    r = _pvgis_csv_row("20180101:0900")
    for data in (csv, js):
        row = _at(data, "2001-01-01T09:00Z")  # time(UTC) 20180101:0900, coerced to the typical year
        assert row[C.T_AIR_C] == float(r["T2m"]) and row[C.RH_PCT] == float(r["RH"])
        assert row[C.GHI_WM2] == float(r["G(h)"]) and row[C.DNI_WM2] == float(r["Gb(n)"])
        assert row[C.PRESSURE_HPA] == pytest.approx(float(r["SP"]) / 100)  # Pa -> hPa
        assert row[C.WIND_MS] == float(r["WS10m"])
    # the JSON's own record for the same hour
    rec = json.loads((WEATHER / "tmy_45.000_8.000_2005_2023.json").read_text())["outputs"]["tmy_hourly"][9]
    assert rec["time(UTC)"] == "20180101:0900" and rec["T2m"] == float(r["T2m"])
    # "Irradiance Time Offset (h): 0.1761" in the CSV header, 0.1761 in the JSON inputs
    assert meta["time"]["irradiance_offset_s"] == pytest.approx(0.1761 * 3600)
    assert meta_j["time"]["irradiance_offset_s"] == pytest.approx(0.1761 * 3600)
    assert meta["typical"] and meta["utc_offset_h"] == 0.0 and meta["wind_height_m"] == 10.0


def test_pvgis_irradiance_offset_puts_the_sun_at_solar_noon():
    # independent check of the offset convention: the irradiance-weighted mean time of July days
    # must match that of the clear-sky model at 45° N 8° E (pvlib Ineichen via the environment stage)
    from walkcomfort.environment.sun import clearsky_irradiance

    data, meta = read_weather_file(WEATHER / "tmy_45.000_8.000_2005_2023.csv")
    g = data.loc["2001-07-01":"2001-07-31", C.GHI_WM2]
    t = g.index + pd.Timedelta(seconds=meta["time"]["irradiance_offset_s"])
    hours = np.asarray(t.hour + t.minute / 60 + t.second / 3600)
    centroid = float((hours * g.to_numpy()).sum() / g.sum())
    cs = clearsky_irradiance(pd.date_range("2001-07-16", periods=1440, freq="1min", tz="UTC"), 45.0, 8.0)
    ref = float((np.arange(1440) / 60 * cs[C.GHI_WM2].to_numpy()).sum() / cs[C.GHI_WM2].sum())
    assert abs(centroid - ref) < 5 / 60  # within 5 min; a one-hour slip would be 60 min


def test_pvgis_epw_twin_gives_the_same_values_at_the_same_instants():
    csv, meta = read_weather_file(WEATHER / "tmy_45.000_8.000_2005_2023.csv")
    epw, meta_e = read_weather_file(WEATHER / "tmy_45.000_8.000_2005_2023.epw")
    common = csv.index.intersection(epw.index)
    assert len(common) == 8760
    np.testing.assert_allclose(epw.loc[common, C.T_AIR_C], csv.loc[common, C.T_AIR_C])
    np.testing.assert_allclose(epw.loc[common, C.GHI_WM2], csv.loc[common, C.GHI_WM2])
    # the EPW says "Irradiance Time Offset (h):-0.8239" against its hour read as UTC: the same instants
    assert meta_e["time"]["irradiance"] == "instant"
    assert meta_e["time"]["irradiance_offset_s"] == pytest.approx(meta["time"]["irradiance_offset_s"])


def test_pvgis_hourly_tilted_plane_and_missing_humidity():
    name = "pvgis_hourly_Timeseries_45.000_8.000_SA_30deg_0deg_2016_2016.csv"
    data, meta = read_weather_file(WEATHER / name)
    lines = _lines(name)
    assert lines[17].startswith("20160101:0810")
    f = lines[17].split(",")  # time,Gb(i),Gd(i),Gr(i),H_sun,T2m,WS10m,Int
    row = _at(data, "2016-01-01T08:10Z")
    assert row[C.T_AIR_C] == float(f[5]) and row[C.WIND_MS] == float(f[6])
    assert not meta["typical"] and len(data) == 14
    # "Slope: 30 deg." - irradiance on a tilted plane is not the horizontal: not used, and said so
    assert C.GHI_WM2 in meta["missing"] and C.RH_PCT in meta["missing"]
    assert any("tilted 30" in n for n in meta["notices"])
    with pytest.raises(InputError, match="no rh_pct"):
        WeatherFile(WEATHER / name)
    w = open_weather(WEATHER / name, {"rh_pct": 70.0})
    c = w.conditions(pd.DatetimeIndex(["2016-01-01T08:40Z"]), 45.0, 8.0, 250.0)
    # 08:40 is half-way between the 08:10 and 09:10 rows (linear interpolation, from the definition)
    nxt = lines[18].split(",")
    assert c[C.T_AIR_C].iloc[0] == pytest.approx((float(f[5]) + float(nxt[5])) / 2)
    assert c[C.RH_PCT].iloc[0] == 70.0 and c[C.GHI_WM2].iloc[0] > 0


def test_nsrdb_psm3_local_standard_time_half_hourly():
    data, meta = read_weather_file(WEATHER / "test_read_psm3.csv")
    lines = _lines("test_read_psm3.csv")
    cols = lines[2].split(",")
    assert lines[1].split(",")[7] == "-7"  # Time Zone
    # the first row with sun: its local standard time is UTC-7
    row = next(r.split(",") for r in lines[3:] if float(r.split(",")[cols.index("GHI")]) > 100)
    v = dict(zip(cols, row, strict=True))
    local = pd.Timestamp(int(v["Year"]), int(v["Month"]), int(v["Day"]), int(v["Hour"]), int(v["Minute"]))
    got = _at(data, (local + pd.Timedelta(hours=7)).tz_localize("UTC").isoformat())
    assert got[C.GHI_WM2] == float(v["GHI"]) and got[C.DNI_WM2] == float(v["DNI"])
    assert got[C.T_AIR_C] == float(v["Temperature"]) and got[C.PRESSURE_HPA] == float(v["Pressure"])  # mbar = hPa
    assert got[C.RH_PCT] == float(v["Relative Humidity"]) and got[C.WIND_MS] == float(v["Wind Speed"])
    assert not meta["typical"] and meta["time"]["interval_s"] == 1800 and meta["utc_offset_h"] == -7.0
    assert meta["site"].lat == 40.53 and meta["site"].lon == -108.54


def test_midc_one_minute_series_local_standard_time():
    data, meta = read_weather_file(WEATHER / "midc_20181014.txt")
    lines = _lines("midc_20181014.txt")
    assert lines[0].split(",")[1] == "MST"
    f = lines[1 + 12 * 60].split(",")  # 10/14/2018 12:00 MST
    assert f[1] == "12:00"
    row = _at(data, "2018-10-14T19:00Z")  # MST = UTC-7
    assert row[C.T_AIR_C] == float(f[4]) and row[C.GHI_WM2] == float(f[2])
    # night-time pyranometer offsets (the file's first row: -7.69 W/m²) read as zero, not as bad values
    assert float(lines[1].split(",")[2]) < 0 and _at(data, "2018-10-14T07:00Z")[C.GHI_WM2] == 0.0
    assert set(meta["missing"]) >= {C.RH_PCT, C.WIND_MS} and meta["site"] is None
    with pytest.raises(InputError, match="no rh_pct"):
        open_weather(WEATHER / "midc_20181014.txt", {})


def test_surfrad_utc_and_west_longitude():
    data, meta = read_weather_file(WEATHER / "surfrad-slv16001.dat")
    lines = _lines("surfrad-slv16001.dat")
    f = lines[2 + 12 * 60].split()  # 2016 1 1 1 12 0 … (year, jday, month, day, hour, minute)
    assert f[4:6] == ["12", "0"]
    row = _at(data, "2016-01-01T12:00Z")
    # columns: …, dw_solar (8), uw_solar, direct_n (12), diffuse (14), …, temp (38), rh (40), wind (42), …, pressure (46)
    assert row[C.T_AIR_C] == float(f[38]) and row[C.RH_PCT] == float(f[40]) and row[C.WIND_MS] == float(f[42])
    assert row[C.PRESSURE_HPA] == float(f[46])
    # the header "37.70  105.92 2317 m" is Alamosa, Colorado, at 105.92° W
    assert meta["site"].lon == pytest.approx(-105.92) and meta["site"].lat == pytest.approx(37.70)
    assert len(data) == 1440 and meta["time"]["interval_s"] == 60


def test_crn_five_minute_means_at_interval_end_utc():
    with pytest.warns(DataQualityWarning, match="1 weather values"):  # the first row's -9999.0 temperature
        data, meta = read_weather_file(WEATHER / "CRNS0101-05-2019-AZ_Tucson_11_W.txt")
    f = _lines("CRNS0101-05-2019-AZ_Tucson_11_W.txt")[1].split()  # UTC 20190101 1615
    row = _at(data, "2019-01-01T16:15Z")
    assert row[C.T_AIR_C] == float(f[8]) and row[C.GHI_WM2] == float(f[10]) and row[C.RH_PCT] == float(f[15])
    assert row[C.WIND_MS] == float(f[21])
    assert meta["time"]["label"] == "interval_end" and meta["time"]["met"] == "interval_mean"
    assert meta["wind_height_m"] == 1.5  # USCRN wind at 1.5 m (pvlib read_crn documentation)
    assert len(meta["quarantine"]) == 1 and "missing" in meta["quarantine"]["reason"].iloc[0]


def test_walk_on_the_amsterdam_file_takes_the_files_temperature():
    w = open_weather(WEATHER / "NLD_Amsterdam062400_IWEC.epw")
    assert isinstance(w, WeatherFile) and w.describe()["time"]["zone"] == "local standard time"
    f = _lines("NLD_Amsterdam062400_IWEC.epw")[8 + 195 * 24 + 13].split(",")  # 15 July, hour 14 local
    assert (f[1], f[2], f[3]) == ("7", "15", "14")
    c = w.conditions(pd.DatetimeIndex(["2026-07-15T13:00Z"]), 52.37, 4.90, 0.0)
    assert c[C.T_AIR_C].iloc[0] == float(f[6])
    assert c.attrs["wind_height_m"] == 10.0


def test_encoding_strict_utf8_then_the_formats_documented_one(tmp_path, greensboro_tmy3):
    raw = greensboro_tmy3.read_bytes()
    first, rest = raw.split(b"\n", 1)
    latin = tmp_path / "provider_tmy3.csv"
    latin.write_bytes(first.replace(b'"GREENSBORO', b'"GREENSBORO \xae') + b"\n" + rest)  # ® in ISO-8859-1
    data, meta = read_weather_file(latin)
    assert meta["encoding"] == "iso-8859-1" and any("not UTF-8" in n for n in meta["notices"])
    assert meta["site"].name.startswith("GREENSBORO \u00ae")
    epw = tmp_path / "bad.epw"
    lines = (WEATHER / "NLD_Amsterdam062400_IWEC.epw").read_bytes().split(b"\n")
    lines[5] = lines[5] + b" \xb0C"  # a stray Latin-1 degree sign in a comment line: EPW documents no fallback
    epw.write_bytes(b"\n".join(lines))
    with pytest.raises(InputError, match=r"bad\.epw:6: byte 0xb0 is not UTF-8"):
        read_weather_file(epw)


def test_format_override_and_unknown_content(tmp_path):
    copy = tmp_path / "station.dat"  # a misleading extension: the content decides
    copy.write_bytes((WEATHER / "NLD_Amsterdam062400_IWEC.epw").read_bytes())
    assert read_weather_file(copy)[1]["format"] == "epw"
    with pytest.raises(InputError, match="cannot read it as TMY3"):
        read_weather_file(copy, fmt="tmy3")
    junk = tmp_path / "notes.txt"
    junk.write_text("hello\nworld\n")
    with pytest.raises(InputError, match="not a weather file format"):
        read_weather_file(junk)


def test_design_day_on_the_pvgis_typical_year_uses_its_utc_instants():
    from walkcomfort.routes.designday import design_day

    lines = _lines("tmy_45.000_8.000_2005_2023.csv")
    head = next(i for i, s in enumerate(lines) if s.startswith("time(UTC),"))
    rows = [r.split(",") for r in lines[head + 1:head + 1 + 8760]]
    # reference: the largest T2m of the file's own rows, and the UTC day it falls on (instants, not hour ends)
    best = max(rows, key=lambda r: float(r[1]))
    hot = design_day(WeatherFile(WEATHER / "tmy_45.000_8.000_2005_2023.csv"), "hottest")
    assert hot.t_max_c == float(best[1])
    assert (hot.date.month, hot.date.day) == (int(best[0][4:6]), int(best[0][6:8]))


def test_route_on_an_nsrdb_download_records_its_time_convention(tmp_path, capsys):
    from walkcomfort.cli import main

    route = tmp_path / "r.geojson"
    route.write_text(json.dumps({"type": "Feature", "properties": {"route_id": "r"}, "geometry": {
        "type": "LineString", "coordinates": [[-108.540, 40.530], [-108.538, 40.530]]}}))
    out = tmp_path / "out"
    assert main(["route", str(route), "--weather", str(WEATHER / "test_read_psm3.csv"), "--depart",
                 "2017-07-15T12:00", "--timezone", "America/Denver", "--no-reasons", "-o", str(out)]) == 0
    capsys.readouterr()
    text = "\n".join(p.read_text(encoding="utf-8") for p in out.glob("*.json"))
    text += "\n".join(p.read_text(encoding="utf-8") for p in out.glob("*.md"))
    assert '"format": "nsrdb"' in text and "local standard time" in text
    pts = pd.read_parquet(out / "points.parquet")
    # 12:00 MDT = 18:00 UTC = 11:00 local standard time (UTC-7): between the file's 11:00 and 11:30 rows
    lines = _lines("test_read_psm3.csv")
    cols = lines[2].split(",")
    vals = {r.split(",")[3] + ":" + r.split(",")[4]: float(r.split(",")[cols.index("Temperature")])
            for r in lines[3:] if r.startswith("2017,7,15,11,")}
    t0 = pts[C.T_AIR_C].iloc[0]
    assert min(vals.values()) - 1e-9 <= t0 <= max(vals.values()) + 1e-9
