"""PET of the reference person: its defining room, published examples, interpolation, classes and colours."""

from __future__ import annotations

import itertools

import numpy as np
import pandas as pd
import pytest

from walkcomfort.environment import pet as P


def _rh_for_vapour_pressure(t_c, e_hpa):
    # Magnus formula over water (common practice) for the saturation pressure
    return 100.0 * e_hpa / (6.1078 * 10 ** (7.5 * t_c / (237.3 + t_c)))


@pytest.mark.parametrize("t", [12.0, 21.0, 30.0, 38.0])  # 12 hPa saturates below 10 °C
def test_pet_equals_air_temperature_in_its_defining_room(t):
    # Höppe (1999), VDI 3787-2: the reference room has Tmrt = Ta, v = 0.1 m/s, vapour pressure 12 hPa
    assert P.pet_c(t, t, 0.1, _rh_for_vapour_pressure(t, 12.0)) == pytest.approx(t, abs=0.1)


@pytest.mark.parametrize(("ta", "tmrt", "v", "e", "published", "tol"), [
    (30.0, 30.0, 1.0, 21.0, 29.0, 0.5),    # summer, shade
    (-5.0, -5.0, 5.0, 2.0, -13.0, 1.5),    # winter, shade, windy
    (30.0, 60.0, 1.0, 21.0, 43.0, 3.0),    # summer, sun
])
def test_published_examples(ta, tmrt, v, e, published, tol):
    # Höppe (1999), Table 1 (values from memory). The library solves the corrected model of
    # Walther & Goestchel (2018), which departs from the original routine by a few K under
    # strong radiation (their paper): hence the wider tolerance in sun (library: 40.7 °C).
    assert P.pet_c(ta, tmrt, v, _rh_for_vapour_pressure(ta, e)) == pytest.approx(published, abs=tol)


def test_pet_rises_with_radiation_and_falls_with_wind():
    # from the definition: more radiant heat -> warmer; more wind on a warm day -> cooler
    p = P.pet_c(30.0, np.array([30.0, 45.0, 60.0]), 1.0, 40.0)
    assert np.all(np.diff(p) > 0)
    w = P.pet_c(30.0, 55.0, np.array([0.3, 1.0, 3.0]), 40.0)
    assert np.all(np.diff(w) < 0)


def _demo_like_walk(n, seed=3):
    """Invented: sun/shade alternating every 10–90 s behind a globe-like lag, warming, drying, gusty."""
    rng = np.random.default_rng(seed)
    t = np.arange(n)
    ta = 27.0 + 5.0 * t / n + rng.normal(0, 0.05, n)
    rh = 55.0 - 15.0 * t / n + rng.normal(0, 0.5, n)
    sun = np.zeros(n)
    i, s = 0, 1
    while i < n:
        k = int(rng.integers(10, 90))
        sun[i:i + k], s, i = s, 1 - s, i + k
    target = np.where(sun > 0, 58 + rng.normal(0, 2, n), 34 + rng.normal(0, 1, n))
    tr = np.empty(n)
    tr[0] = target[0]
    for j in range(1, n):
        tr[j] = tr[j - 1] + (target[j] - tr[j - 1]) / 20.0
    v = np.clip(1.2 + 0.8 * np.sin(t / 50) + rng.gamma(1.5, 0.4, n) - 0.6, 0.05, None)
    idx = pd.date_range("2026-07-14 08:00", periods=n, freq="1s", tz="UTC")
    return pd.DataFrame({"t_air_c": ta, "tmrt_c": tr, "wind_ms": v, "rh_pct": rh}, index=idx)


@pytest.mark.slow
def test_interpolated_pet_within_tolerance_of_the_row_by_row_computation():
    walk = _demo_like_walk(1800)
    fast, n_eval = P.pet_interpolated(walk.t_air_c, walk.tmrt_c, walk.wind_ms, walk.rh_pct, return_evaluations=True)
    assert isinstance(fast, pd.Series) and fast.index.equals(walk.index)
    sample = walk.iloc[::9]  # 200 rows computed one by one
    full = P.pet_c(sample.t_air_c, sample.tmrt_c, sample.wind_ms, sample.rh_pct)
    err = (fast.loc[sample.index] - full).abs()
    assert err.max() < P.PET_INTERPOLATION_TOLERANCE_K, err.describe()
    assert err.quantile(0.95) < 0.35
    # the cost follows the conditions met, not the rows: the same walk at twice the rows costs the same
    part = walk.iloc[:240]
    twice = part.iloc[np.repeat(np.arange(len(part)), 2)]
    counts = [P.pet_interpolated(w.t_air_c, w.tmrt_c, w.wind_ms, w.rh_pct, return_evaluations=True)[1]
              for w in (part, twice)]
    assert counts[0] == counts[1] < n_eval


def test_nan_rows_stay_nan_in_both_paths():
    ta = pd.Series([30.0, np.nan, 31.0])
    assert P.pet_c(ta, 40.0, 1.0, 40.0).isna().tolist() == [False, True, False]
    assert P.pet_interpolated(ta, 40.0, 1.0, 40.0).isna().tolist() == [False, True, False]


def test_classes_follow_the_published_bounds():
    # Matzarakis & Mayer (1996) PET classes (from memory): lower bound exclusive, upper inclusive
    assert P.pet_class(18.0) == "slightly cool" and P.pet_class(18.01) == "comfortable"
    assert P.pet_class(23.0) == "comfortable" and P.pet_class(41.5) == "very hot"
    assert P.pet_class(4.0) == "very cold" and P.pet_class(np.nan) is None
    bounds = [c[1] for c in P.PET_CLASSES[:-1]]
    assert bounds == [4.0, 8.0, 13.0, 18.0, 23.0, 29.0, 35.0, 41.0]
    assert list(P.PET_CLASS_COLOURS) == [c[2] for c in P.PET_CLASSES]


def _rgb1(colour):
    return np.array([int(colour[i:i + 2], 16) for i in (1, 3, 5)], dtype=float) / 255.0


@pytest.mark.parametrize("cvd", [None, "deuteranomaly", "protanomaly", "tritanomaly"])
def test_pet_colours_stay_apart_under_colour_vision_deficiency(cvd):
    # Reference library: colorspacious (test-only), Machado et al. (2009) CVD simulation
    # (doi:10.1109/TVCG.2009.113) and CAM02-UCS differences, as for the comfort palette.
    from colorspacious import cspace_convert, deltaE

    cols = [_rgb1(c) for c in P.PET_CLASS_COLOURS.values()]
    if cvd is not None:
        space = {"name": "sRGB1+CVD", "cvd_type": cvd, "severity": 100}
        cols = [np.clip(cspace_convert(c, space, "sRGB1"), 0, 1) for c in cols]
    adjacent = [float(deltaE(a, b, input_space="sRGB1", uniform_space="CAM02-UCS")) for a, b in itertools.pairwise(cols)]
    # neighbouring classes on a nine-step ramp: ΔE' above 10 reads as a distinct step (common practice)
    assert min(adjacent) > 10.0, adjacent
    # the two ends never meet: cold and hot extremes stay far apart
    assert float(deltaE(cols[0], cols[-1], input_space="sRGB1", uniform_space="CAM02-UCS")) > 30.0


def test_pet_ramp_lightness_peaks_at_comfortable():
    from colorspacious import cspace_convert

    light = [float(cspace_convert(_rgb1(c), "sRGB1", "JCh")[0]) for c in P.PET_CLASS_COLOURS.values()]
    mid = list(P.PET_CLASS_COLOURS).index("comfortable")
    assert all(np.diff(light[:mid + 1]) > 0) and all(np.diff(light[mid:]) < 0), light
