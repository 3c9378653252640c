"""Weather sources: the TMY3/TMY2 files shipped inside pvlib, an EPW written from them, loggers, stated."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from walkcomfort import columns as C
from walkcomfort.environment.sky import cloud_scaled_ghi
from walkcomfort.errors import InputError
from walkcomfort.routes.designday import daily_max_temperature, design_day
from walkcomfort.routes.weather import (
    LoggerSeries,
    StatedConditions,
    WeatherFile,
    open_weather,
    read_weather_file,
)

GSO = (36.1, -79.95, 273.0)  # the Greensboro station of the TMY3 file's header


def test_tmy3_reads_on_the_hour_ending_convention(greensboro_tmy3):
    data, meta = read_weather_file(greensboro_tmy3)
    assert len(data) == 8760 and meta["format"] == "tmy3"
    assert meta["site"].lat == pytest.approx(36.1) and meta["utc_offset_h"] == -5
    # the file's first record is 01/01 01:00 local standard time (UTC-5): the hour 00:00-01:00
    assert data.index[0] == pd.Timestamp("2001-01-01T06:00Z")
    assert len(meta["quarantine"]) == 0


def test_temperature_at_the_hour_is_the_files_value(greensboro_tmy3, gso_file):
    from pvlib.iotools import read_tmy3

    raw, _ = read_tmy3(str(greensboro_tmy3), coerce_year=2001, map_variables=True)
    w = gso_file
    t = pd.DatetimeIndex(["2026-07-09T15:00-05:00", "2026-07-09T15:30-05:00"])
    c = w.conditions(t, *GSO)
    at15 = float(raw.loc["2001-07-09 15:00", "temp_air"])
    at16 = float(raw.loc["2001-07-09 16:00", "temp_air"])
    # reference: pvlib.iotools.read_tmy3 reads the same file; between hours the value is linear
    # (15:30 = mean of 15:00 and 16:00, from the definition of linear interpolation)
    assert c[C.T_AIR_C].iloc[0] == pytest.approx(at15)
    assert c[C.T_AIR_C].iloc[1] == pytest.approx((at15 + at16) / 2)


def test_irradiance_keeps_the_hourly_energy_and_the_night_dark(greensboro_tmy3, gso_file):
    w = gso_file
    day = pd.date_range("2026-07-09T00:00-05:00", periods=24 * 12, freq="5min")
    c = w.conditions(day, *GSO)
    # hourly means of our 5-min values against the file's hour-ending values (TMY3 convention)
    hourly = c[C.GHI_WM2].groupby(np.arange(len(day)) // 12).mean()
    file_vals = w.data.loc["2001-07-09T05:00Z":"2001-07-10T05:00Z", C.GHI_WM2].to_numpy()[1:]
    bright = file_vals > 200
    assert np.allclose(hourly.to_numpy()[bright], file_vals[bright], rtol=0.08)
    # total daily energy within 5 %
    assert hourly.sum() == pytest.approx(file_vals.sum(), rel=0.05)
    from walkcomfort.environment.sun import solar_position

    elev = solar_position(day, GSO[0], GSO[1], GSO[2])[C.SUN_ELEV_DEG].to_numpy()
    night = elev <= 0
    assert (c[C.DNI_WM2].to_numpy()[night] == 0).all() and (c[C.GHI_WM2].to_numpy()[night] == 0).all()
    # daylight hours: the file has sun from the hour ending 06:00 to the hour ending 20:00 local
    # standard time on 9 July at Greensboro (read off the file)
    sun_hours = np.flatnonzero(file_vals > 0) + 1
    assert sun_hours.min() == 6 and sun_hours.max() == 20
    assert (elev[(day.hour >= 7) & (day.hour < 19)] > 0).all()
    assert (elev[(day.hour < 4) | (day.hour >= 21)] < 0).all()


def test_epw_and_tmy3_of_the_same_data_agree(greensboro_tmy3, tmp_path):
    # pvlib labels EPW rows at the hour's start and TMY3 rows at its end; the same numbers
    # written in both formats must give the same weather along a walk
    from pvlib.iotools import read_tmy3

    raw, meta = read_tmy3(str(greensboro_tmy3), map_variables=False)
    lines = ["LOCATION,Greensboro,NC,USA,TMY3,723170,36.1,-79.95,-5.0,273.0",
             "DESIGN CONDITIONS,0", "TYPICAL/EXTREME PERIODS,0", "GROUND TEMPERATURES,0",
             "HOLIDAYS/DAYLIGHT SAVINGS,No,0,0,0", "COMMENTS 1,written by a test from the TMY3 file",
             "COMMENTS 2,", "DATA PERIODS,1,1,Data,Sunday, 1/ 1,12/31"]
    for _, r in raw.iterrows():
        mm, dd, yy = r["Date (MM/DD/YYYY)"].split("/")
        hh = int(r["Time (HH:MM)"].split(":")[0])
        fields = [yy, int(mm), int(dd), hh, 60, "?", r["Dry-bulb (C)"], r["Dew-point (C)"], r["RHum (%)"],
                  r["Pressure (mbar)"] * 100, 9999, 9999, 9999, r["GHI (W/m^2)"], r["DNI (W/m^2)"],
                  r["DHI (W/m^2)"], 999999, 999999, 999999, 9999, r["Wdir (degrees)"], r["Wspd (m/s)"],
                  99, 99, 9999, 99999, 9, 999999999, 999, 0.999, 999, 99, 999, 999, 99]
        lines.append(",".join(str(f) for f in fields))
    epw = tmp_path / "gso.epw"
    epw.write_text("\n".join(lines) + "\n")
    t = pd.date_range("2026-07-09T05:10-05:00", "2026-07-09T21:40-05:00", freq="7min")
    a = WeatherFile(greensboro_tmy3).conditions(t, *GSO)
    b = WeatherFile(epw).conditions(t, *GSO)
    pd.testing.assert_frame_equal(a, b, check_exact=False, atol=1e-6)


def test_tmy2_units_are_converted(miami_tmy2):
    from pvlib.iotools import read_tmy2

    raw, _ = read_tmy2(str(miami_tmy2))
    data, meta = read_weather_file(miami_tmy2)
    assert meta["format"] == "tmy2" and meta["site"].name == "MIAMI"
    # TMY2 stores dry bulb in tenths of °C and wind in tenths of m/s (TMY2 user's manual, from memory)
    assert data[C.T_AIR_C].to_numpy() == pytest.approx(raw["DryBulb"].to_numpy() / 10)
    assert 0 < data[C.T_AIR_C].mean() < 40
    assert data[C.WIND_MS].to_numpy() == pytest.approx(raw["Wspd"].to_numpy() / 10)
    # pvlib labels TMY2 rows at the hour's start: our interval end is one hour later
    assert data.index[0] == raw.index[0].tz_convert("UTC").replace(year=2001) + pd.Timedelta(hours=1)


def test_walk_far_from_the_station_is_refused(greensboro_tmy3, gso_file):
    w = gso_file
    t = pd.DatetimeIndex(["2026-07-09T15:00Z"])
    with pytest.raises(InputError, match="km from the weather station"):
        w.conditions(t, 40.4, -3.7)
    WeatherFile(greensboro_tmy3, max_distance_km=1e5).conditions(t, 40.4, -3.7)


def test_leap_day_and_out_of_period(greensboro_tmy3):
    with pytest.raises(InputError, match="29 February"):
        WeatherFile(greensboro_tmy3).conditions(pd.DatetimeIndex(["2028-02-29T12:00-05:00"]), *GSO)
    with pytest.raises(InputError, match="outside the period"):
        WeatherFile(greensboro_tmy3, typical=False).conditions(pd.DatetimeIndex(["2026-07-09T12:00Z"]), *GSO)


def test_new_year_walk_wraps(greensboro_tmy3, gso_file):
    t = pd.date_range("2026-12-31T23:50-05:00", periods=5, freq="5min")
    c = gso_file.conditions(t, *GSO)
    assert c[C.T_AIR_C].notna().all()


def test_design_day_rules(greensboro_tmy3, gso_file):
    from pvlib.iotools import read_tmy3

    w = gso_file
    raw, _ = read_tmy3(str(greensboro_tmy3), coerce_year=2001, map_variables=True)
    # independent daily maxima: each hour-ending value belongs to the day its hour starts in
    start = raw.index.tz_localize(None) - pd.Timedelta(hours=1)
    tmax = raw["temp_air"].groupby(start.normalize()).max()
    # reference values computed here from pvlib.iotools.read_tmy3's reading of the same file
    assert daily_max_temperature(w).max() == pytest.approx(tmax.max())
    hot = design_day(w, "hottest")
    assert hot.t_max_c == pytest.approx(tmax.max())
    assert pd.Timestamp(hot.date) == tmax.idxmax()
    summer = tmax[tmax.index.month.isin([6, 7, 8])]
    p95 = design_day(w, "percentile", percentile=95, months="6-8")
    target = np.percentile(summer.to_numpy(), 95)
    assert abs(p95.t_max_c - target) == pytest.approx(np.abs(summer - target).min())
    assert p95.t_max_c <= hot.t_max_c
    d = design_day(w, "date", date="2026-07-15")
    assert (d.date.month, d.date.day) == (7, 15)
    with pytest.raises(InputError):
        design_day(w, "percentile", percentile=120)
    with pytest.raises(InputError):
        design_day(w, "wettest")


def test_stated_conditions_and_cloud():
    s = StatedConditions(30.0, 40.0, 2.0, wind_height_m=1.1)
    t = pd.DatetimeIndex(["2026-07-15T13:00Z", "2026-07-15T23:30Z"])  # Madrid: afternoon, night
    c = s.conditions(t, 40.4, -3.7, 650)
    assert (c[C.T_AIR_C] == 30.0).all() and c.attrs["wind_height_m"] == 1.1
    assert c[C.GHI_WM2].iloc[0] > 700 and c[C.GHI_WM2].iloc[1] == 0 and c[C.DNI_WM2].iloc[1] == 0
    # Kasten & Czeplak (1980): overcast (N = 1) leaves 25 % of the clear-sky global irradiance
    assert cloud_scaled_ghi(800.0, 1.0) == pytest.approx(200.0)
    assert cloud_scaled_ghi(800.0, 0.0) == pytest.approx(800.0)
    cloudy = StatedConditions(30.0, 40.0, 2.0, cloud_frac=1.0).conditions(t, 40.4, -3.7, 650)
    assert cloudy[C.GHI_WM2].iloc[0] == pytest.approx(0.25 * c[C.GHI_WM2].iloc[0])
    assert cloudy[C.DNI_WM2].iloc[0] < c[C.DNI_WM2].iloc[0]
    with pytest.raises(InputError):
        StatedConditions(30.0, 140.0, 2.0)


def test_logger_series_interpolates_and_refuses_outside(tmp_path):
    idx = pd.date_range("2026-07-15T12:00Z", periods=7, freq="10min")
    df = pd.DataFrame({"time": idx.strftime("%Y-%m-%dT%H:%M:%S+00:00"), "t_air_c": np.arange(7.0) + 30,
                       "rh_pct": 40.0, "wind_ms": 1.0})
    p = tmp_path / "logger.csv"
    df.to_csv(p, index=False)
    src = open_weather(p, wind_height_m=1.1)
    assert isinstance(src, LoggerSeries) and src.notices  # no pyranometer: says so
    # 12:05 is half-way between 30 °C at 12:00 and 31 °C at 12:10: 30.5 °C (linear interpolation, from the definition)
    c = src.conditions(pd.DatetimeIndex(["2026-07-15T12:05Z"]), 40.4, -3.7)
    assert c[C.T_AIR_C].iloc[0] == pytest.approx(30.5)
    with pytest.raises(InputError, match="outside the logger"):
        src.conditions(pd.DatetimeIndex(["2026-07-15T14:05Z"]), 40.4, -3.7)
    with pytest.raises(InputError, match="wind sensor height"):
        open_weather(p)


def test_open_weather_tells_tmy3_from_logger(greensboro_tmy3):
    assert isinstance(open_weather(greensboro_tmy3), WeatherFile)
    with pytest.raises(InputError):
        open_weather()


def test_missing_markers_are_quarantined_not_dropped(greensboro_tmy3, tmp_path):
    from walkcomfort.errors import DataQualityWarning

    lines = greensboro_tmy3.read_text().splitlines()
    cols = lines[1].split(",")
    k = cols.index("Dry-bulb (C)")
    row = lines[4500].split(",")
    row[k] = "9999"  # an out-of-range marker in one hour
    lines[4500] = ",".join(row)
    bad = tmp_path / "broken.csv"
    bad.write_text("\n".join(lines) + "\n")
    with pytest.warns(DataQualityWarning, match="1 weather values"):
        data, meta = read_weather_file(bad)
    q = meta["quarantine"]
    # TMY3 has two header lines before the 8760 hourly records (NREL TMY3 user's manual, from memory)
    assert len(q) == 1 and q["row"].iloc[0] == 4500 - 2 and "t_air_c" in q["reason"].iloc[0]
    assert len(data) == 8760 and data[C.T_AIR_C].isna().sum() == 1
    truncated = tmp_path / "cut.csv"
    truncated.write_text("\n".join(greensboro_tmy3.read_text().splitlines()[:1]) + "\n")
    with pytest.raises(InputError):
        read_weather_file(truncated)


def test_logger_from_an_ingested_timeline_parquet(tmp_path):
    from walkcomfort import _io

    idx = pd.date_range("2026-07-15T12:00Z", periods=61, freq="10s", name="time")
    df = pd.DataFrame({"t_air_c": np.linspace(30, 31, 61), "rh_pct": 40.0, "wind_ms": 1.0,
                       "ghi_wm2": 800.0}, index=idx)
    p = _io.write_parquet(tmp_path / "timeline.parquet", df, {"session": {"wind_height_m": 1.1}})
    src = open_weather(p)
    assert isinstance(src, LoggerSeries) and src.wind_height_m == 1.1 and not src.notices
    # linspace(30, 31) over 10 min: 30.5 °C at 12:05 (from the definition of the test series)
    c = src.conditions(pd.DatetimeIndex(["2026-07-15T12:05Z"]), 40.4, -3.7)
    assert c[C.T_AIR_C].iloc[0] == pytest.approx(30.5)
    # the measured global irradiance is kept and split into beam and diffuse (Erbs)
    assert c[C.GHI_WM2].iloc[0] == pytest.approx(800.0)
    assert c[C.DNI_WM2].iloc[0] > 0 and c[C.DHI_WM2].iloc[0] > 0


def test_logger_csv_through_a_column_map(tmp_path):
    # a met-station export in its own columns and units, naive local times (Madrid, UTC+2 in July)
    rows = ["DateTime;Temp_F;RH;Wind_kmh"] + [f"15/07/2026 14:{m:02d};{86 + m / 10:.1f};40;7,2".replace(".", ",")
                                               for m in range(0, 60, 10)]
    csv = tmp_path / "station.csv"
    csv.write_text("\n".join(rows) + "\n")
    cmap = tmp_path / "station.toml"
    cmap.write_text('timezone = "Europe/Madrid"\nwind_height_m = 2.0\ntime_format = "%d/%m/%Y %H:%M"\n'
                    'delimiter = ";"\ndecimal = ","\n'
                    '[columns]\ntime = "DateTime"\nt_air = "Temp_F"\nrh = "RH"\nwind = "Wind_kmh"\n'
                    '[units]\nt_air = "degF"\nwind = "km/h"\n')
    src = open_weather(csv, column_map=cmap)
    assert isinstance(src, LoggerSeries) and src.wind_height_m == 2.0
    c = src.conditions(pd.DatetimeIndex(["2026-07-15T12:10Z"]), 40.4, -3.7)
    # 14:10 Madrid = 12:10 UTC: 87.0 °F = 30.5556 °C; 7.2 km/h = 2 m/s (unit definitions)
    assert c[C.T_AIR_C].iloc[0] == pytest.approx((87.0 - 32) / 1.8)
    assert c[C.WIND_MS].iloc[0] == pytest.approx(2.0)
    bad = tmp_path / "nozone.toml"
    bad.write_text('[columns]\ntime = "DateTime"\nt_air = "Temp_F"\n[units]\nt_air = "degF"\n')
    with pytest.raises(InputError, match="names none"):
        open_weather(csv, column_map=bad)
    with pytest.raises(InputError, match="--weather-map"):
        open_weather(csv, wind_height_m=2.0)  # no map: not our columns, not a weather-file format


def test_weather_file_and_statement_fill_only_what_is_missing(greensboro_tmy3):
    w = open_weather(greensboro_tmy3, {"rh_pct": 5.0})
    t = pd.DatetimeIndex(["2026-07-09T15:00-05:00"])
    # the file has humidity: the statement is not used
    assert w.conditions(t, *GSO)[C.RH_PCT].iloc[0] != 5.0 and not w.fill
    assert w.describe()["time"]["irradiance"] == "interval_mean"
