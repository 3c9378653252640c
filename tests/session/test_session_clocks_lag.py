"""Clock fits from sync events, and the first-order lag model, its inverse and the settling flag."""

from __future__ import annotations

import shutil
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from walkcomfort import columns as C
from walkcomfort.errors import InputError
from walkcomfort.session.clocks import ClockFit, fit_clock
from walkcomfort.session.lag import (
    correct_lag,
    first_order_response,
    inverse_first_order,
    moving_average,
    settling_mask,
)
from walkcomfort.session.timeline import build_timeline

SESSIONS = Path(__file__).resolve().parents[1] / "fixtures" / "sessions"


# --- lag -------------------------------------------------------------------------------------
def test_step_response_after_one_step():
    # first-order response to a 20 -> 30 °C step, τ = 10 s, Δt = 1 s:
    # 20 + 10·(1 − e^(−0.1)) = 20.9516 °C (issue check value; from the definition of a first-order lag)
    y = first_order_response([20.0, 30.0, 30.0], dt_s=1.0, tau_s=10.0)
    assert y[1] == pytest.approx(20.9516, abs=5e-5)
    # after one τ (10 steps) 63.2 % of the step is covered: 1 − e^(−1) (definition)
    y = first_order_response([20.0] + [30.0] * 10, 1.0, 10.0)
    assert y[10] == pytest.approx(20 + 10 * (1 - np.exp(-1)), rel=1e-12)


def test_inverse_recovers_the_step():
    x = np.array([20.0] * 5 + [30.0] * 40)
    y = first_order_response(x, 1.0, 10.0)
    np.testing.assert_allclose(inverse_first_order(y, 1.0, 10.0), x, atol=1e-9)
    # uneven sampling: per-sample Δt
    dt = np.r_[1.0, np.tile([1.0, 2.0], 22)]
    y = first_order_response(x, dt, 10.0)
    np.testing.assert_allclose(inverse_first_order(y, dt, 10.0), x, atol=1e-9)


def test_smoothed_inverse_keeps_noise_bounded():
    rng = np.random.default_rng(3)
    x = np.r_[np.full(300, 20.0), np.full(300, 30.0)]
    y = first_order_response(x, 1.0, 60.0) + rng.normal(0, 0.05, x.size)
    raw = inverse_first_order(y, 1.0, 60.0)
    smooth = inverse_first_order(y, 1.0, 60.0, smooth_samples=31)
    # the bare inverse amplifies 0.05 K noise to several kelvin; smoothing keeps it well under 1 K
    assert np.std(raw[350:] - 30) > 2.0
    assert np.std(smooth[350:-20] - 30) < 0.6
    # and the step is back at its place (half-way within the smoothing window)
    assert smooth[280] == pytest.approx(20, abs=0.7) and smooth[330] == pytest.approx(30, abs=0.7)


def test_correct_lag_series_restarts_after_gaps():
    idx = pd.date_range("2026-07-14 08:00", periods=60, freq="1s", tz="UTC")
    x = np.r_[np.full(20, 20.0), np.full(40, 25.0)]
    y = first_order_response(x, 1.0, 5.0)
    s = pd.Series(y, index=idx).drop(idx[40:45])
    out = correct_lag(s, 5.0, smooth_s=0.0, max_gap_s=3.0)
    assert out.index.equals(s.index)
    # the exact inverse of the first-order lag recovers the 20 -> 25 °C step before the gap
    # (from the definition of the first-order response)
    np.testing.assert_allclose(out.iloc[:40], x[:40], atol=1e-9)


def test_moving_average_nan_aware():
    out = moving_average([1.0, np.nan, 3.0, 5.0], 3)
    # centred 3-sample mean over the finite values: [1] -> 1, [3, 5] -> 4; a NaN input stays NaN
    # (from the definition)
    assert np.isnan(out[1]) and out[0] == 1.0 and out[2] == 4.0


def test_settling_mask():
    steps = pd.date_range("2026-07-14 08:00", periods=100, freq="1s", tz="UTC")
    samples = steps[:40].append(steps[70:])
    m = settling_mask(samples, steps, tau_s=5.0, n_tau=3.0, max_gap_s=10.0)
    assert m[:15].all() and not m[15:70].any() and m[70:85].all() and not m[85:].any()
    assert not settling_mask(samples, steps, None).any()


def test_bad_tau_is_an_error():
    with pytest.raises(InputError, match="time constant"):
        first_order_response([1.0, 2.0], 1.0, 0.0)


# --- clocks ----------------------------------------------------------------------------------------
def test_clock_fit_recovers_offset_and_drift():
    # synthetic events: device = true + 12.5 s + 40 ppm·(true − t_ref)  (values chosen for the test)
    true = pd.date_range("2026-07-14 08:00", periods=6, freq="20min", tz="UTC")
    tref = true.mean()
    dt = (true - tref).total_seconds().to_numpy()
    device = true + pd.to_timedelta(12.5 + 40e-6 * dt, unit="s")
    fit = fit_clock(device, true, device="logger")
    assert fit.offset_s == pytest.approx(12.5, abs=1e-6)
    assert fit.drift_ppm == pytest.approx(40.0, abs=1e-3)
    assert fit.residual_rms_s == pytest.approx(0.0, abs=1e-6) and fit.dof == 4
    ns = lambda i: i.as_unit("ns").asi8  # noqa: E731
    np.testing.assert_allclose(ns(fit.to_true(device)), ns(true), rtol=0, atol=1000)   # within 1 µs
    np.testing.assert_allclose(ns(fit.to_device(true)), ns(device), rtol=0, atol=1000)


def test_clock_fit_reports_residual():
    rng = np.random.default_rng(11)
    true = pd.date_range("2026-07-14 08:00", periods=40, freq="3min", tz="UTC")
    jitter = rng.normal(0, 0.5, len(true))   # reading a clock display to ±0.5 s
    device = true + pd.to_timedelta(-3.0 + jitter, unit="s")
    fit = fit_clock(device, true)
    # least squares on N(0, 0.5 s) jitter: offset within a few standard errors (0.5/√40 ≈ 0.08 s),
    # residual RMS near the jitter's 0.5 s (from the definition of the normal spread)
    assert fit.offset_s == pytest.approx(-3.0, abs=0.3)
    assert fit.residual_rms_s == pytest.approx(0.5, rel=0.35)
    assert fit.residual_max_s >= fit.residual_rms_s


def test_one_event_fits_offset_only():
    t = pd.DatetimeIndex([pd.Timestamp("2026-07-14T08:00:00Z")])
    fit = fit_clock(t + pd.Timedelta(seconds=7), t)
    # one event fixes the offset only (device − true = 7 s) and leaves no degree of freedom (from the definition)
    assert fit.method == "sync-offset" and fit.offset_s == 7.0 and fit.dof == 0


def test_missing_times_stay_missing_both_ways():
    # a NaT reading once came back from to_device as a date in 1677 (int64 minimum); NaT stays NaT
    fit = ClockFit("x", offset_s=5.0)
    idx = pd.DatetimeIndex(["2026-07-14T08:00:00Z", None], name="time")
    for out in (fit.to_true(idx), fit.to_device(idx)):
        assert out.isna().tolist() == [False, True] and out.name == "time"
    # device = true + 5 s (from the definition of the offset)
    assert fit.to_device(idx)[0] == pd.Timestamp("2026-07-14T08:00:05Z")
    assert fit.to_true(idx)[0] == pd.Timestamp("2026-07-14T07:59:55Z")


def test_identity_clock():
    idx = pd.date_range("2026-07-14", periods=3, freq="1s", tz="UTC")
    assert ClockFit("x").to_true(idx).equals(idx)


def _two_event_session(tmp_path, events):
    d = tmp_path / "s"
    shutil.copytree(SESSIONS / "broken" / "gpx10_ok", d)
    text = (d / "session.toml").read_text()
    (d / "session.toml").write_text(text.replace("[[source]]", events + "\n[[source]]", 1))
    return d


def test_session_with_drift_from_two_sync_events(tmp_path):
    # logger 5 s ahead at the start and 6 s ahead 100 s later: offset 5.5 s at the mid-point, drift 10 000 ppm
    # is refused as unreal; 5.0 -> 5.004 s over 100 s (40 ppm) is accepted and recovered
    d = _two_event_session(tmp_path, '[[sync]]\ndevice = "logger1"\ndevice_time = "2026-07-14T10:00:05"\n'
                                     'true_time = "2026-07-14T10:00:00"\n\n[[sync]]\ndevice = "logger1"\n'
                                     'device_time = "2026-07-14T10:01:45.004"\ntrue_time = "2026-07-14T10:01:40"\n')
    tl = build_timeline(d)
    c = tl.qa["clocks"]["logger1"]
    assert c["method"] == "sync-offset-drift" and c["n_events"] == 2
    assert c["drift_ppm"] == pytest.approx(40.0, abs=0.01)
    assert c["offset_s"] == pytest.approx(5.002, abs=1e-6)
    # two events, two parameters: after correction both events line up exactly
    assert [e["residual_s"] for e in tl.qa["sync_events"]] == [pytest.approx(0.0, abs=1e-6)] * 2
    # the mini logger writes t_air = 30 + k/10 at walk second 2k on its own clock -> corrected back:
    # at true 08:00:00 the logger showed 10:00:05 local, i.e. between k=2 (30.2) and k=3 (30.3)
    assert tl.data[C.T_AIR_C].iloc[0] == pytest.approx(30.0 + 0.1 * 2.5, abs=0.002)


def test_sync_between_two_devices_chains_to_reference(tmp_path):
    d = _two_event_session(tmp_path, '[devices.phone1]\n\n[[sync]]\ndevice_a = "phone1"\ntime_a = "2026-07-14T10:00:03"\n'
                                     'device_b = "gps1"\ntime_b = "2026-07-14T10:00:00"\n\n[[sync]]\n'
                                     'device_a = "logger1"\ntime_a = "2026-07-14T10:00:01"\n'
                                     'device_b = "phone1"\ntime_b = "2026-07-14T10:00:04"\n')
    tl = build_timeline(d)
    # phone = true + 3 s; logger shows 10:00:01 when the phone shows 10:00:04 = true 10:00:01 -> logger offset 0
    assert tl.qa["clocks"]["phone1"]["offset_s"] == pytest.approx(3.0)
    assert tl.qa["clocks"]["logger1"]["offset_s"] == pytest.approx(0.0)


def test_sync_that_never_reaches_the_reference(tmp_path):
    d = _two_event_session(tmp_path, '[devices.phone1]\n\n[[sync]]\ndevice_a = "phone1"\ntime_a = "2026-07-14T10:00:03"\n'
                                     'device_b = "logger1"\ntime_b = "2026-07-14T10:00:00"\n')
    with pytest.raises(InputError, match="never reach the reference"):
        build_timeline(d)


def test_sync_from_a_frame(tmp_path):
    # "frame X shows the GPS clock reading 10:00:35": the camera (EXIF 10:00:30) is 5 s behind
    d = tmp_path / "w"
    shutil.copytree(SESSIONS / "walk_ok", d)
    text = (d / "session.toml").read_text()
    (d / "session.toml").write_text(text.replace("[[source]]", '[[sync]]\ndevice = "cam1"\n'
                                                 'frame = "camera/IMG_0001.jpg"\ntrue_time = "2026-07-14T10:00:35"\n\n'
                                                 "[[source]]", 1))
    tl = build_timeline(d)
    assert tl.qa["clocks"]["cam1"]["offset_s"] == pytest.approx(-5.0)
    assert tl.data.loc["2026-07-14T08:00:35Z", C.FRAME_PATH] == "camera/IMG_0001.jpg"
    assert tl.qa["summary"]["clock_corrections"] == 2


def test_lag_error_is_tau_times_rate():
    # a first-order sensor with τ = 30 s following a ramp of 0.02 K/s trails it by τ·rate = 0.6 K
    # once settled (from the definition of the first-order lag)
    from walkcomfort.session.lag import lag_error

    t = pd.date_range("2026-07-14", periods=600, freq="1s", tz="UTC")
    true = 20 + 0.02 * np.arange(600)
    read = first_order_response(true, 1.0, 30.0)
    err = lag_error(t, read, 30.0)
    assert np.median(err[300:-20]) == pytest.approx(0.6, abs=0.01)
    assert np.median((true - read)[300:]) == pytest.approx(0.6, abs=0.02)


def test_declared_offset_without_sync_events(tmp_path):
    # no sync event: the manifest's offset_s is used (logger shows 4 s more than true time)
    d = _two_event_session(tmp_path, '[devices.logger1]\noffset_s = 4.0\n')
    tl = build_timeline(d)
    c = tl.qa["clocks"]["logger1"]
    assert c["method"] == "manifest" and c["offset_s"] == 4.0
    # logger reading k=2 (30.2 °C, logger clock 10:00:04) belongs at true 08:00:00
    assert tl.data[C.T_AIR_C].iloc[0] == pytest.approx(30.2, abs=1e-9)
    # the GPS is the default reference and undeclared devices keep their clocks
    assert tl.qa["clocks"]["gps1"]["method"] == "reference"
