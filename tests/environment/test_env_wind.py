"""Ambient wind from a carried anemometer; station wind brought to the street."""

import numpy as np
import pytest

from walkcomfort.environment import wind


@pytest.mark.parametrize("ambient", [0.5, 1.0, 2.0, 3.5])
def test_carried_correction_recovers_known_ambient_on_simulated_walks(ambient):
    rng = np.random.default_rng(int(ambient * 10))
    n = 3600
    # a walk through streets: a new heading, random relative to the wind, every 15 s (turns,
    # corners); the wind direction drifts; gusts of ±20 %
    heading = np.repeat(rng.uniform(0, 2 * np.pi, n // 15 + 1), 15)[:n]
    wind_dir = 1.0 + np.cumsum(rng.normal(0, 0.02, n))
    walk = np.clip(rng.normal(1.25, 0.1, n), 0.8, 1.6)
    amb = ambient * np.clip(rng.normal(1.0, 0.2, n), 0.2, None)
    rel = np.hypot(amb * np.sin(wind_dir) - walk * np.sin(heading), amb * np.cos(wind_dir) - walk * np.cos(heading))
    est = wind.ambient_from_carried(rel, walk, window_s=120.0)
    true_rms = np.sqrt(np.mean(amb ** 2))
    assert np.median(est) == pytest.approx(true_rms, rel=0.15, abs=0.15)
    # the raw reading overstates a light wind badly
    if ambient <= 1.0:
        assert np.median(rel) > 1.3 * true_rms


def test_street_wind_weaker_than_station_and_open_terrain_unchanged():
    eq = float(wind.street_equivalent_10m(3.0, 15.0))
    assert 0.5 < eq < 1.5  # a 3 m/s mast wind is about 1 m/s in a street of 15 m buildings
    open_ = float(wind.street_wind(3.0, 0.0, z_m=10.0))
    assert open_ == pytest.approx(3.0)
    assert wind.street_equivalent_10m(3.0, 15.0, attenuation=2.0) < eq  # calmer with a denser canopy
    assert "Grimmond & Oke" in wind.describe_street_profile(15.0)
