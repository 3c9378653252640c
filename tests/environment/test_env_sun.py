"""Sun position, clear sky and decomposition against published values."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from walkcomfort import columns as C
from walkcomfort.environment import sun
from walkcomfort.errors import InputError


def test_spa_worked_example():
    # Reda & Andreas (2004), NREL/TP-560-34302, Table A5.1 worked example:
    # 2003-10-17 12:30:30 local at UTC-7, lat 39.742476, lon -105.1786, 1830.14 m,
    # 820 mbar, 11 °C, delta T = 67 s -> topocentric zenith 50.11162°, azimuth 194.34024°.
    t = pd.DatetimeIndex([pd.Timestamp("2003-10-17 12:30:30", tz="Etc/GMT+7")])
    pos = sun.solar_position(t, 39.742476, -105.1786, elev_m=1830.14, pressure_hpa=820.0, t_air_c=11.0,
                             delta_t_s=67.0)
    assert pos[C.SUN_ZENITH_DEG].iloc[0] == pytest.approx(50.11162, abs=1e-4)
    assert pos[C.SUN_AZIM_DEG].iloc[0] == pytest.approx(194.34024, abs=1e-4)
    assert pos[C.SUN_ELEV_DEG].iloc[0] == pytest.approx(90 - 50.11162, abs=1e-4)
    assert pos.index.equals(t)  # the caller's index (and zone) comes back


def test_solar_noon_at_expected_local_clock_time():
    # Madrid, 2026-07-14, CEST (UTC+2). Expected solar noon from the definition:
    # 12:00 UTC - 4 min/° x longitude - equation of time (Spencer 1971 series, accurate
    # to about 0.5 min), then +2 h for CEST. A time-zone slip would move it by hours.
    lon, lat = -3.7038, 40.4168
    day = pd.Timestamp("2026-07-14")
    b = 2 * np.pi * (day.day_of_year - 1) / 365
    eot = 229.18 * (0.000075 + 0.001868 * np.cos(b) - 0.032077 * np.sin(b)
                    - 0.014615 * np.cos(2 * b) - 0.040849 * np.sin(2 * b))
    expected_local_min = 12 * 60 - 4 * lon - eot + 120
    times = pd.date_range("2026-07-14 12:00", "2026-07-14 16:00", freq="30s", tz="Europe/Madrid")
    pos = sun.solar_position(times, lat, lon, elev_m=650)
    t_max = pos[C.SUN_ELEV_DEG].idxmax()
    got = t_max.hour * 60 + t_max.minute + t_max.second / 60
    assert got == pytest.approx(expected_local_min, abs=1.5)
    assert 14 * 60 < got < 14 * 60 + 40  # the clock reads ~14:2x local, not ~12:2x
    assert pos.loc[t_max, C.SUN_AZIM_DEG] == pytest.approx(180.0, abs=1.0)  # due south at noon


def test_naive_times_refused_and_nan_position_passes_through():
    with pytest.raises(InputError, match="naive"):
        sun.solar_position(pd.DatetimeIndex(["2026-07-14 12:00"]), 40.0, -3.0)
    t = pd.date_range("2026-07-14 10:00", periods=3, freq="1h", tz="UTC")
    pos = sun.solar_position(t, np.array([40.0, np.nan, 40.0]), -3.0)
    assert np.isnan(pos[C.SUN_ELEV_DEG].iloc[1]) and np.isfinite(pos[C.SUN_ELEV_DEG].iloc[[0, 2]]).all()


def test_interval_midpoints_for_hourly_files():
    # EPW convention (value stands for the hour ending at the stamp): sun at hh:30 of the previous hour.
    t = pd.date_range("2026-07-14 01:00", periods=3, freq="1h", tz="Europe/Madrid")
    mid = sun.interval_midpoints(t, "1h", label="end")
    assert list(mid.strftime("%H:%M")) == ["00:30", "01:30", "02:30"]
    assert list(sun.interval_midpoints(t, "1h", label="start").strftime("%H:%M")) == ["01:30", "02:30", "03:30"]


@pytest.mark.parametrize("day, ghi, zenith, dni, dhi", [
    # pvlib's own test of irradiance.erbs (pvlib/tests/test_irradiance.py::test_erbs)
    ("2019-06-20", 1000.0, 10.0, 842.0, 170.8),
    ("2019-01-01", 1000.0, 10.0, 794.2, 217.9),
    ("2019-01-01", 50.0, 85.0, 96.7, 41.6),
])
def test_erbs_pvlib_reference_values(day, ghi, zenith, dni, dhi):
    t = pd.DatetimeIndex([day], tz="UTC")
    out = sun.decompose_ghi(np.array([ghi]), np.array([zenith]), t)
    assert out[C.DNI_WM2].iloc[0] == pytest.approx(dni, abs=0.5)
    assert out[C.DHI_WM2].iloc[0] == pytest.approx(dhi, abs=0.5)


def test_erbs_low_sun_guard_and_night():
    # From the definition: below the horizon there is no beam; GHI is all diffuse.
    t = pd.DatetimeIndex(["2019-06-20"] * 4, tz="UTC")
    out = sun.decompose_ghi(pd.Series([40.0, 40.0, -2.0, np.nan], index=t), np.array([88.0, 95.0, 95.0, 40.0]), t)
    assert out[C.DNI_WM2].tolist()[:3] == [0.0, 0.0, 0.0]
    assert out[C.DHI_WM2].tolist()[:3] == [40.0, 40.0, 0.0]
    assert np.isnan(out[C.DNI_WM2].iloc[3])
    assert np.isfinite(out.to_numpy()[:3]).all()


def test_clearsky_records_turbidity_and_is_zero_at_night():
    t = pd.date_range("2026-07-14 00:00", periods=24, freq="1h", tz="Europe/Madrid")
    cs = sun.clearsky_irradiance(t, 40.4168, -3.7038, elev_m=650)
    tl = cs.attrs["linke_turbidity"]
    assert set(tl["by_month"]) == {"7"} and 1.5 < tl["by_month"]["7"] < 7.0
    pos = sun.solar_position(t, 40.4168, -3.7038, elev_m=650)
    night = pos[C.SUN_ELEV_DEG] <= 0
    assert (cs.loc[night, [C.GHI_WM2, C.DNI_WM2, C.DHI_WM2]] == 0).all().all()
    # closure GHI = DNI cos Z + DHI holds for the Ineichen output (from the definition)
    day = ~night
    closure = cs[C.DNI_WM2] * np.cos(np.radians(pos[C.SUN_ZENITH_DEG])) + cs[C.DHI_WM2]
    np.testing.assert_allclose(closure[day], cs.loc[day, C.GHI_WM2], rtol=1e-6, atol=1e-6)
    # a clear July midday in Madrid: GHI between 850 and 1050 W m-2 (common practice)
    assert 850 < cs[C.GHI_WM2].max() < 1050
    # a given turbidity is used as is
    cs2 = sun.clearsky_irradiance(t, 40.4168, -3.7038, elev_m=650, linke_turbidity=2.0)
    assert cs2[C.DNI_WM2].max() > cs[C.DNI_WM2].max()


def test_extraterrestrial_irradiance_perihelion_aphelion():
    # From the definition: solar constant 1366.1 W m-2 (pvlib default) x inverse-square
    # Earth-Sun distance; perihelion (~3 Jan) +3.3 %, aphelion (~4 Jul) -3.3 % (from memory).
    t = pd.DatetimeIndex(["2026-01-03 12:00", "2026-07-04 12:00"], tz="UTC")
    e0 = sun.extraterrestrial_irradiance(t)
    assert e0.iloc[0] == pytest.approx(1366.1 * 1.0334, abs=4.0)
    assert e0.iloc[1] == pytest.approx(1366.1 * 0.9666, abs=4.0)
    with pytest.raises(InputError, match="label"):
        sun.interval_midpoints(t, "1h", label="middle")
    with pytest.raises(InputError, match="naive"):
        sun.interval_midpoints(t.tz_localize(None))
