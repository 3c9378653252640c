"""Globe calibrations by type, the causal lag correction, and bounded irradiance."""

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from walkcomfort import columns as C
from walkcomfort.environment import globe, sun
from walkcomfort.errors import InputError
from walkcomfort.session import lag
from walkcomfort.session.manifest import SENSOR_CHOICES


def test_globe_types_are_the_manifest_choices():
    assert tuple(globe.GLOBE_TYPES) == SENSOR_CHOICES["globe_type"][0]


@pytest.mark.parametrize("v, iso, grey", [(1.0, 70.2, 75.7), (2.0, 83.2, 93.7)])
def test_iso_and_thorsson_formulas_reproduced(v, iso, grey):
    # globe 40 °C, air 30 °C, 38 mm globe, emissivity 0.95: ISO 7726 (B.2) vs Thorsson et al.
    # (2007) 1.335e8 V^0.71 (coefficient from memory); hand values of the two formulas
    g_iso = globe.resolve_globe("black_150mm", diameter_m=0.038)
    g_grey = globe.resolve_globe("grey_38mm")
    t_iso = float(globe.tmrt_from_globe_type(40.0, 30.0, v, g_iso))
    t_grey = float(globe.tmrt_from_globe_type(40.0, 30.0, v, g_grey))
    tk = (40 + 273.15) ** 4 + 1.335e8 * v ** 0.71 / (0.95 * 0.038 ** 0.4) * 10.0
    assert t_grey == pytest.approx(tk ** 0.25 - 273.15, abs=1e-9)
    assert t_iso == pytest.approx(iso, abs=0.15)
    assert t_grey == pytest.approx(grey, abs=0.15)


def test_unknown_globe_type_refused_with_choices_and_undeclared_read_by_iso():
    with pytest.raises(InputError, match="black_150mm, grey_38mm"):
        globe.resolve_globe("ping-pong")
    undeclared = globe.resolve_globe(None, diameter_m=0.040)
    assert undeclared["type"] == "black_150mm" and undeclared["diameter_m"] == 0.040
    assert not undeclared["declared"]


def _step_readings(tau=240.0, n=1200, step_at=600, noise=0.0, seed=1):
    t = np.zeros(n)
    t[step_at:] = 10.0
    y = lag.first_order_response(t, 1.0, tau)
    y = y + np.random.default_rng(seed).normal(0.0, noise, n)
    idx = pd.date_range("2026-07-15 10:00", periods=n, freq="1s", tz="UTC")
    return pd.Series(y, index=idx), t


def test_lag_inversion_of_a_step_has_no_response_before_the_step():
    s, truth = _step_readings()
    out = lag.correct_lag(s, 240.0).to_numpy()
    assert np.all(np.abs(out[:600]) < 1e-9)  # nothing announced before the step
    assert np.all(np.abs(out[721:] - 10.0) < 1e-6)  # once the tau/2 = 120 s trailing window has passed


def test_lag_uncertainty_reported_and_matches_simulation():
    s, truth = _step_readings(noise=0.05)
    out = lag.correct_lag(s, 240.0)
    info = out.attrs["lag"]
    assert info["noise_k"] == pytest.approx(0.05, rel=0.3)
    err = out.to_numpy()[800:] - 10.0
    assert np.std(err) == pytest.approx(info["uncertainty_k"], rel=0.3)
    assert info["delay_s"] == pytest.approx(59.5, abs=1.0)


def test_tau_follows_air_speed():
    taus = lag.tau_at_speed(240.0, np.array([0.3, 1.0, 3.0]), 0.038)
    assert taus[1] == pytest.approx(240.0)
    assert taus[0] > taus[1] > taus[2]
    # per-sample tau: a step under a varying wind is still recovered exactly (no noise)
    v = np.where(np.arange(1200) < 900, 0.5, 3.0)
    tau = lag.tau_at_speed(240.0, v, 0.038)
    truth = np.where(np.arange(1200) >= 300, 10.0, 0.0)
    y = np.empty(1200)
    y[0] = 0.0
    a = np.exp(-1.0 / tau)
    for k in range(1, 1200):
        y[k] = a[k] * y[k - 1] + (1 - a[k]) * truth[k]
    idx = pd.date_range("2026-07-15 10:00", periods=1200, freq="1s", tz="UTC")
    out = lag.correct_lag(pd.Series(y, index=idx), 240.0, air_speed_ms=v, diameter_m=0.038).to_numpy()
    assert np.all(np.abs(out[421:] - 10.0) < 1e-6)


@settings(max_examples=200, deadline=None)
@given(ghi=st.floats(0.0, 2000.0), zen=st.floats(0.0, 180.0), doy=st.integers(1, 365))
def test_dni_never_above_extraterrestrial_for_any_ghi_and_sun(ghi, zen, doy):
    t = pd.DatetimeIndex([pd.Timestamp("2026-01-01", tz="UTC") + pd.Timedelta(days=doy - 1, hours=12)])
    out = sun.decompose_ghi(np.array([ghi]), np.array([zen]), t)
    dni, dhi = float(out[C.DNI_WM2].iloc[0]), float(out[C.DHI_WM2].iloc[0])
    e0 = float(sun.extraterrestrial_irradiance(t).iloc[0])
    assert 0.0 <= dni <= float(sun.max_dni(np.array([zen]), t)[0]) + 1e-9 <= e0
    assert dhi >= -1e-9
    cosz = max(np.cos(np.radians(zen)), 0.0)
    assert dni * cosz + dhi == pytest.approx(ghi, abs=1e-6)


@pytest.mark.parametrize("zen", [85.0, 86.0, 87.0, 88.0, 89.0, 89.9])
def test_low_sun_guard_85_to_90_degrees(zen):
    t = pd.DatetimeIndex([pd.Timestamp("2026-07-15 19:30", tz="UTC")])
    out = sun.decompose_ghi(np.array([800.0]), np.array([zen]), t)
    dni = float(out[C.DNI_WM2].iloc[0])
    assert dni <= float(sun.max_dni(np.array([zen]), t)[0])
    assert dni < 900.0  # the unguarded split gave several thousand W/m² here


def test_stated_ghi_becomes_clear_index_per_step_and_impossible_value_refused():
    times = pd.date_range("2026-07-15 06:00", "2026-07-15 22:00", freq="1h", tz="Europe/Madrid")
    out = sun.stated_ghi_to_series(800.0, times, 40.42, -3.70)
    cs = sun.clearsky_irradiance(times, 40.42, -3.70)
    kc = out.attrs["clear_index"]["2026-07-15"]
    assert 0.8 < kc < 0.9
    np.testing.assert_allclose(out[C.GHI_WM2], kc * cs[C.GHI_WM2], rtol=1e-3, atol=1e-6)
    assert out[C.DNI_WM2].max() < 1100.0
    assert float(out[C.GHI_WM2].iloc[-1]) == 0.0  # 22 h: the sun has set
    with pytest.raises(InputError, match="more than any sky"):
        sun.stated_ghi_to_series(1400.0, times, 40.42, -3.70)


def test_stated_conditions_ghi_never_gives_an_impossible_beam():
    # the former behaviour: 800 W/m² at every departure, DNI 2211 W/m² at 20 h, 5643 at 21 h (Madrid, July)
    from walkcomfort.routes.weather import StatedConditions

    times = pd.date_range("2026-07-15 06:00", "2026-07-15 22:00", freq="30min", tz="Europe/Madrid")
    out = StatedConditions(t_air_c=33.0, rh_pct=30.0, wind_ms=1.0, ghi_wm2=800.0).conditions(times, 40.42, -3.70)
    zen = sun.solar_position(times, 40.42, -3.70)[C.SUN_ZENITH_DEG].to_numpy()
    assert (out[C.DNI_WM2].to_numpy() <= sun.max_dni(zen, times) + 1e-9).all()
    assert out[C.GHI_WM2].iloc[-1] == 0.0 and out[C.GHI_WM2].max() == pytest.approx(800.0, rel=0.01)
