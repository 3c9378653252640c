"""History features: look back only, stay inside a walk, and follow their definitions."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from walkcomfort import columns as C
from walkcomfort.errors import InputError
from walkcomfort.model.features import FEATURE_INFO, FEATURES, build_features


def _walk(n=900, walk="w1", participant="P01", start="2026-07-14 08:00", **cols):
    idx = pd.date_range(start, periods=n, freq="s", tz="UTC", name=C.TIME)
    df = pd.DataFrame({C.WALK_ID: walk, C.PARTICIPANT: participant}, index=idx)
    for k, v in cols.items():
        df[k] = v
    return df


def test_declared_features_are_the_columns_and_are_described():
    tl = _walk(60, utci_c=30.0)
    X = build_features(tl)
    assert list(X.columns) == list(FEATURES)
    assert set(FEATURE_INFO) == set(FEATURES)
    # 63 UTCI-based features and the 17 PET ones that replace UTCI's in the "*-pet" sets
    assert len(FEATURES) == len(set(FEATURES)) and 70 <= len(FEATURES) <= 85
    assert X.index.equals(tl.index)


def test_missing_sources_give_nan_not_errors():
    X = build_features(_walk(120))  # no sensor columns at all
    assert X.shape == (120, len(FEATURES))
    assert X[C.UTCI_C].isna().all() and X["leq_5min"].isna().all()
    # 120 rows at 1 s: the last is 119 s = 119/60 min after the start (from the definition)
    assert np.allclose(X["walk_elapsed_min"].iloc[-1], 119 / 60)


def test_history_looks_back_only():
    rng = np.random.default_rng(3)
    tl = _walk(900, utci_c=30 + rng.normal(0, 3, 900), shade_frac=rng.random(900),
               laeq_db=60 + rng.normal(0, 5, 900), elev_m=np.cumsum(rng.normal(0, 0.1, 900)))
    base = build_features(tl)
    changed = tl.copy()
    changed.iloc[500:, changed.columns.get_loc(C.UTCI_C)] += 15.0
    changed.iloc[500:, changed.columns.get_loc(C.SHADE_FRAC)] = 0.0
    after = build_features(changed)
    # causal windows: a change at row 500 cannot reach earlier rows (from the definition of a trailing window)
    pd.testing.assert_frame_equal(base.iloc[:500], after.iloc[:500])
    assert not np.allclose(base["utci_ewm_10min"].iloc[500:], after["utci_ewm_10min"].iloc[500:])


def test_windows_never_reach_into_the_previous_walk_and_order_is_kept():
    rng = np.random.default_rng(4)
    a = _walk(700, "a", utci_c=40 + rng.normal(0, 1, 700), shade_frac=0.0)
    b = _walk(700, "b", "P02", start="2026-07-14 08:11:40", utci_c=20 + rng.normal(0, 1, 700), shade_frac=1.0)
    stacked = pd.concat([a, b]).sample(frac=1.0, random_state=1)  # shuffled rows, overlapping clocks
    Xs = build_features(stacked)
    assert Xs.index.equals(stacked.index)
    Xb = build_features(b)
    got = Xs[stacked[C.WALK_ID].to_numpy() == "b"].sort_index()
    # windows are per walk: b's features are the same with or without a stacked beside it (from the definition)
    np.testing.assert_allclose(got.to_numpy(), Xb.sort_index().to_numpy(), rtol=1e-12, atol=1e-9)


def test_heat_dose_sun_time_and_time_since_change_from_their_definitions():
    # 10 min in full sun at UTCI 30 °C, then shade at UTCI 24 °C
    n = 1200
    utci = np.where(np.arange(n) < 600, 30.0, 24.0)
    shade = np.where(np.arange(n) < 600, 0.0, 1.0)
    X = build_features(_walk(n, utci_c=utci, shade_frac=shade))
    # from the definition: 5 min × (30 − 26) °C = 20 °C·min; 5 min of sun in a 5-min window
    assert X["heat_dose_5min"].iloc[599] == pytest.approx(20.0)
    assert X["sun_min_5min"].iloc[599] == pytest.approx(5.0)
    assert X["sun_min_10min"].iloc[599] == pytest.approx(10.0)
    # two minutes into the shade: 3 of the last 5 min were in sun, dose 3 × 4 = 12 °C·min
    assert X["sun_min_5min"].iloc[719] == pytest.approx(3.0)
    assert X["heat_dose_5min"].iloc[719] == pytest.approx(12.0)
    assert X["since_sun_shade_change_s"].iloc[719] == pytest.approx(119.0)
    assert X["in_sun"].iloc[599] == 1.0 and X["in_sun"].iloc[600] == 0.0
    assert X["utci_max_3min"].iloc[719] == 30.0 and X["utci_max_1min"].iloc[719] == 24.0
    assert X["utci_mean_3min"].iloc[719] == pytest.approx((60 * 30 + 120 * 24) / 180)


def test_leq_is_an_energy_average():
    # 30 s at 60 dB then 30 s at 70 dB: Leq = 10 log10((10^6 + 10^7) / 2) = 67.40 dB (from the definition)
    laeq = np.where(np.arange(60) < 30, 60.0, 70.0)
    X = build_features(_walk(60, laeq_db=laeq))
    assert X["leq_1min"].iloc[-1] == pytest.approx(10 * np.log10((1e6 + 1e7) / 2), abs=1e-9)
    assert X["leq_1min"].iloc[-1] == pytest.approx(67.40, abs=0.01)


def test_ewm_matches_pandas_time_weighted_ewm():
    # pandas' time-aware EWM (adjust=True) weights 0.5^(Δt / halflife) = exp(−Δt / τ) for halflife = τ ln 2;
    # with a regular 1 s step our dt-weighted mean is the same estimator.
    rng = np.random.default_rng(5)
    u = 30 + rng.normal(0, 2, 800)
    tl = _walk(800, utci_c=u)
    X = build_features(tl)
    ref = pd.Series(u, index=tl.index).ewm(halflife=pd.Timedelta(seconds=300 * np.log(2)),
                                            times=tl.index).mean()
    np.testing.assert_allclose(X["utci_ewm_5min"].to_numpy(), ref.to_numpy(), rtol=1e-9)


def test_participant_attributes_from_session_attrs():
    tl = _walk(30, utci_c=28.0)
    tl.attrs["session"] = {"clo": 0.6, "acclimatised": True, "age_band": "35-49"}
    X = build_features(tl)
    # copied from the session attributes; an age band's lower bound is its first number (from the definition)
    assert (X["clo"] == 0.6).all() and (X["acclimatised"] == 1.0).all() and (X["age_band_lower"] == 35).all()
    X2 = build_features(_walk(30), participants={"P01": {"clo": 0.4, "age_band": "65+"}})
    assert (X2["clo"] == 0.4).all() and (X2["age_band_lower"] == 65).all() and X2["acclimatised"].isna().all()


def test_bad_input_gives_one_line_errors():
    with pytest.raises(InputError, match="tz-aware"):
        build_features(pd.DataFrame({"utci_c": [1.0]}))
    tl = _walk(5, utci_c=["30", "31", "hot", "32", "33"])
    with pytest.raises(InputError, match="row 2"):
        build_features(tl)


def test_feature_time_for_a_campaign_is_reasonable(small_campaign):
    # not a speed assertion (see benchmarks/bench_model.py): just that a 38 400-row campaign builds
    X = build_features(small_campaign)
    assert len(X) == len(small_campaign) and X["utci_ewm_10min"].notna().all()


def test_irregular_steps_are_time_weighted():
    # a simulated walk: rows 10 s apart, then 2 s apart. Each row stands for the interval since
    # the row before it, so over the last 60 s the mean is the dt-weighted one (from the definition).
    t = np.r_[np.arange(0, 100, 10.0), 100 + np.arange(1, 21) * 2.0]  # ends at t = 140 s
    idx = pd.DatetimeIndex(pd.Timestamp("2026-07-14 08:00", tz="UTC") + pd.to_timedelta(t, unit="s"), name=C.TIME)
    u = np.where(t < 100, 30.0, 40.0)
    tl = pd.DataFrame({C.WALK_ID: "sim", C.UTCI_C: u, C.SHADE_FRAC: 0.0}, index=idx)
    X = build_features(tl)
    # window (80, 140]: the row at 90 s (dt 10, 30 °C) and at 100 s... then 20 rows of 2 s at 40 °C
    inside = (t > 80) & (t <= 140)
    dt = np.diff(t, prepend=t[0] - 10.0)
    expected = np.sum(u[inside] * dt[inside]) / np.sum(dt[inside])
    assert X["utci_mean_1min"].iloc[-1] == pytest.approx(expected)
    # minutes in sun over the last minute: all of it, counted by time, not by rows
    assert X["sun_min_1min"].iloc[-1] == pytest.approx(np.sum(dt[inside]) / 60)


def test_duplicate_times_inside_a_walk_do_not_break_the_windows():
    idx = pd.DatetimeIndex(["2026-07-14 08:00:00", "2026-07-14 08:00:00", "2026-07-14 08:00:01"], tz="UTC",
                           name=C.TIME)
    tl = pd.DataFrame({C.WALK_ID: "w", C.UTCI_C: [30.0, 32.0, 34.0]}, index=idx)
    X = build_features(tl)
    assert X["utci_mean_1min"].notna().all() and X["utci_ewm_5min"].notna().all()
    # the maximum of 30, 32, 34 over the last minute (from the definition)
    assert X["utci_max_1min"].iloc[-1] == 34.0
