"""Walking speed (Tobler 1993), schedules with stops, departure parsing."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from walkcomfort.errors import InputError
from walkcomfort.routes.timing import parse_departures, tobler_speed_kmh, walk_schedule, walking_speed_ms


def test_tobler_flat_value():
    # Tobler (1993): W = 6 exp(-3.5 |S + 0.05|); on the flat 6 exp(-0.175) = 5.0367 km/h ("5.04 km/h")
    assert tobler_speed_kmh(0.0) == pytest.approx(5.0367, abs=1e-4)
    assert round(tobler_speed_kmh(0.0), 2) == 5.04


def test_tobler_uphill_slower_downhill_fastest():
    # Tobler (1993): the maximum, 6 km/h, is on a 5 % downhill; a 10 % uphill is slower than flat
    assert tobler_speed_kmh(0.10) == pytest.approx(6 * np.exp(-3.5 * 0.15), rel=1e-12)
    assert tobler_speed_kmh(0.10) < tobler_speed_kmh(0.0)
    grid = np.linspace(-0.3, 0.3, 601)
    assert grid[np.argmax(tobler_speed_kmh(grid))] == pytest.approx(-0.05, abs=1e-9)
    assert tobler_speed_kmh(-0.05) == pytest.approx(6.0)


def test_scaled_to_flat_speed():
    # Tobler (1993) scaled so that flat ground walks at the given speed: v(S) = v0·W(S)/W(0)
    v = walking_speed_ms(np.array([0.0, 0.10, -0.05]), flat_speed_ms=1.3)
    assert v[0] == pytest.approx(1.3)
    assert v[1] == pytest.approx(1.3 * np.exp(-3.5 * 0.15) / np.exp(-3.5 * 0.05))
    assert v[2] == pytest.approx(1.3 * 6.0 / tobler_speed_kmh(0.0))
    with pytest.raises(InputError):
        walking_speed_ms(0.0, flat_speed_ms=0.0)


def _points(length_m=100.0, spacing=5.0, slope_pct=0.0):
    d = np.arange(0.0, length_m + 1e-9, spacing)
    return pd.DataFrame({"dist_m": d, "slope_pct": np.full_like(d, slope_pct), "x_m": d, "y_m": 0.0 * d,
                         "lat": 0.0 * d, "lon": 0.0 * d, "elev_m": d * slope_pct / 100})


def test_flat_schedule_takes_length_over_speed_and_steps_sum_to_walk_time():
    # 100 m at 1.25 m/s takes 80 s (from the definition of speed)
    s = walk_schedule(_points(100.0), flat_speed_ms=1.25)
    assert s["t_s"].iloc[-1] == pytest.approx(80.0)
    assert s["step_s"].sum() == pytest.approx(80.0)
    assert (s["step_s"] > 0).all()


def test_uphill_takes_longer_than_downhill():
    # Tobler (1993): a 5 % downhill is fastest and a 10 % uphill slower than flat
    up = walk_schedule(_points(100.0, slope_pct=10.0))["t_s"].iloc[-1]
    down = walk_schedule(_points(100.0, slope_pct=-5.0))["t_s"].iloc[-1]
    flat = walk_schedule(_points(100.0))["t_s"].iloc[-1]
    assert down < flat < up
    assert up == pytest.approx(100.0 / walking_speed_ms(0.10))


def test_stop_adds_its_wait_and_rows_at_its_place():
    # 100 m at 1 m/s = 100 s, plus the 30 s wait = 130 s (from the definition)
    stops = pd.DataFrame({"dist_m": [42.0], "wait_s": [30.0], "label": ["crossing"]})
    s = walk_schedule(_points(100.0), stops, flat_speed_ms=1.0, stop_step_s=5.0)
    assert s["t_s"].iloc[-1] == pytest.approx(130.0)
    assert s["step_s"].sum() == pytest.approx(130.0)
    waiting = s[s["stop"] == "crossing"]
    assert len(waiting) == 7  # arrival plus one row every 5 s over 30 s
    assert np.allclose(waiting["dist_m"], 42.0) and np.allclose(waiting["x_m"], 42.0)
    assert (waiting["speed_ms"] == 0).all()
    assert s["t_s"].is_monotonic_increasing and s["dist_m"].is_monotonic_increasing


def test_stop_on_a_route_point_does_not_duplicate_the_instant():
    # 100 s walking + 10 s wait = 110 s (from the definition)
    stops = pd.DataFrame({"dist_m": [50.0], "wait_s": [10.0], "label": ["light"]})
    s = walk_schedule(_points(100.0), stops, flat_speed_ms=1.0, stop_step_s=5.0)
    assert not s["t_s"].duplicated().any()
    assert s["t_s"].iloc[-1] == pytest.approx(110.0)


def test_departure_sweep_and_single_times():
    # 08:00..10:00 every 30 min is 5 departures, plus 15:00 = 6 (from the definition of the sweep)
    deps = parse_departures(["2026-07-15T08:00..2026-07-15T10:00/30min", "2026-07-15T15:00"], timezone="Europe/Madrid")
    assert len(deps) == 6
    assert str(deps.tz) == "UTC"
    assert deps[0] == pd.Timestamp("2026-07-15T06:00Z")  # CEST is UTC+2 in July
    assert parse_departures("15:00", timezone="Europe/Madrid", day="2026-07-15")[0] == pd.Timestamp("2026-07-15T13:00Z")
    assert parse_departures("2026-07-15T15:00+00:00")[0] == pd.Timestamp("2026-07-15T15:00Z")


@pytest.mark.parametrize("spec, kw", [("2026-07-15T15:00", {}), ("15:00", {"timezone": "UTC"}),
                                      ("not a time", {"timezone": "UTC"}),
                                      ("2026-07-15T10:00..2026-07-15T08:00/1h", {"timezone": "UTC"}),
                                      ("2026-07-15T08:00..2026-07-15T10:00/0h", {"timezone": "UTC"}),
                                      ("2026-03-29T02:30", {"timezone": "Europe/Madrid"})])
def test_bad_departures_are_one_line_errors(spec, kw):
    with pytest.raises(InputError) as exc:
        parse_departures(spec, **kw)
    assert "\n" not in str(exc.value) and "Fix:" in str(exc.value)
    assert str(exc.value).startswith("--depart: ")   # where: the option that holds the departures
