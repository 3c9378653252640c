"""Every caller of the environment chain gives the same columns for the same inputs (exactly).

Callers: recorded walks (``environment.pipeline.add_environment``), planned walks
(``add_planned_environment`` and ``routes.simulate.add_simulated_environment``), the
city-wide batch (``network._physics.point_environment``, a points x times grid) and the
demo's truth (``demo.simulator.environment_at``). Inputs: one short walk, one planned
route (two departures) and one city-wide tile; each is given to every caller in the form
that caller takes (a walk is the diagonal of its positions x its times on a grid; a grid
is its rows, position-major, for a row-wise caller). Equality is exact (from the
definition of "one chain"): no tolerance.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from shapely.geometry import Point, Polygon

from walkcomfort import columns as C
from walkcomfort.demo import simulator
from walkcomfort.environment.chain import ENV_COLUMNS, environment_columns, leaf_month
from walkcomfort.environment.geo import LocalFrame
from walkcomfort.environment.pipeline import add_environment, add_planned_environment
from walkcomfort.environment.scene import Scene, scene_from_local
from walkcomfort.errors import InputError
from walkcomfort.network import _physics
from walkcomfort.network.partition import Partition
from walkcomfort.routes.geometry import load_route
from walkcomfort.routes.simulate import add_simulated_environment, simulate_timeline
from walkcomfort.routes.weather import StatedConditions

LAT, LON = 38.80, -0.75
FRAME = LocalFrame(LON, LAT)
WIND_H = simulator.WIND_HEIGHT_M  # the demo's anemometer height: every caller is given the same
WEATHER = (C.T_AIR_C, C.RH_PCT, C.WIND_MS, C.PRESSURE_HPA)
NETWORK_COLUMNS = (C.SUN_ELEV_DEG, C.SUN_AZIM_DEG, C.SHADE_FRAC, C.SVF, C.TMRT_C, C.UTCI_C, C.QA_UTCI_RANGE,
                   C.QA_INSIDE_BUILDING)


def _scene() -> Scene:
    x0, y0 = FRAME.project(LON, LAT)
    month_tau = {str(m): (0.7 if m in (12, 1, 2) else 0.15) for m in range(1, 13)}
    items = [
        (Polygon([(x0 - 30, y0 + 6), (x0 + 30, y0 + 6), (x0 + 30, y0 + 20), (x0 - 30, y0 + 20)]),
         {"id": "block", "kind": "building", "height_m": 14.0}),
        (Polygon([(x0 + 12, y0 - 25), (x0 + 24, y0 - 25), (x0 + 24, y0 - 8), (x0 + 12, y0 - 8)]),
         {"id": "tower", "kind": "building", "height_m": 30.0}),
        (Point(x0 - 8, y0 - 3), {"id": "tree", "kind": "tree", "height_m": 9.0, "crown_base_m": 3.0,
                                 "crown_radius_m": 3.5, "transmissivity": 0.15,
                                 "transmissivity_by_month": month_tau}),
        (Polygon([(x0 - 4, y0 - 6), (x0 + 4, y0 - 6), (x0 + 4, y0 - 1), (x0 - 4, y0 - 1)]),
         {"id": "awning", "kind": "canopy", "height_m": 3.0, "transmissivity": 0.3}),
    ]
    return scene_from_local(items, LAT, LON, elev_m=20.0)


def _weather_at(times: pd.DatetimeIndex) -> pd.DataFrame:
    """Invented weather, a function of time only (so a grid's times carry it)."""
    h = np.asarray((times.hour + times.minute / 60.0 + times.second / 3600.0), dtype=float)
    return pd.DataFrame({C.T_AIR_C: 24.0 + 8.0 * np.sin(np.pi * (h - 5.0) / 16.0), C.RH_PCT: 45.0 - h,
                         C.WIND_MS: 0.3 + 0.1 * h, C.PRESSURE_HPA: 1005.0 + 0.2 * h})


def _positions_along(n: int) -> tuple[np.ndarray, np.ndarray]:
    """A path past the awning, under the tree, along the block's south face and into the tower's shadow."""
    x0, y0 = FRAME.project(LON, LAT)
    t = np.linspace(0.0, 1.0, n)
    x = x0 - 35.0 + 70.0 * t
    y = y0 - 3.5 + 1.0 * np.sin(3.0 * t)
    x[n // 2] = x[n // 2 - 1]  # a stop: the same place twice
    y[n // 2] = y[n // 2 - 1]
    lon, lat = FRAME.unproject(x, y)
    return np.asarray(lon, float), np.asarray(lat, float)


def _walk():
    """A short recorded walk: 40 rows, 30 s apart, as the evening sun sinks to a few degrees."""
    times = pd.date_range("2026-07-15 18:40", periods=40, freq="30s", tz="UTC", name=C.TIME)
    lon, lat = _positions_along(len(times))
    return times, lon, lat, _weather_at(times)


def _tile():
    """A city-wide tile: 12 street points x every hour of a July day (night, low sun and noon)."""
    times = pd.date_range("2026-07-15 03:00", "2026-07-15 20:00", freq="1h", tz="UTC", name=C.TIME)
    lon, lat = _positions_along(12)
    return times, lon, lat, _weather_at(times)


def _route(tmp_path):
    """A planned route walked at two departures (weather from a stated-conditions source)."""
    lon, lat = _positions_along(6)
    path = tmp_path / "route.geojson"
    path.write_text(json.dumps({"type": "FeatureCollection", "features": [{
        "type": "Feature", "properties": {"id": "r1"},
        "geometry": {"type": "LineString", "coordinates": [[float(a), float(b)] for a, b in zip(lon, lat,
                                                                                                strict=True)]}}]}))
    route = load_route(path, spacing_m=5.0)
    weather = StatedConditions(t_air_c=31.0, rh_pct=38.0, wind_ms=1.2, wind_height_m=WIND_H)
    deps = pd.DatetimeIndex(["2026-07-15 07:00", "2026-07-15 16:30"], tz="UTC")
    return simulate_timeline(route, deps, weather, timezone="Europe/Madrid")


def _timeline(times, lon, lat, weather: pd.DataFrame) -> pd.DataFrame:
    df = pd.DataFrame({C.LAT: lat, C.LON: lon, **{c: weather[c].to_numpy() for c in weather.columns}},
                      index=pd.DatetimeIndex(times, name=C.TIME))
    df.attrs["session"] = {"timezone": "Europe/Madrid", "wind_height_m": WIND_H}
    return df


def _network(scene: Scene, times, lon, lat, weather: pd.DataFrame) -> dict:
    """The batch's point environment on the grid of the given positions x the given times."""
    x, y = scene.project(lon, lat)
    points = pd.DataFrame({C.SEGMENT_ID: "s", "point_n": np.arange(len(lon)), C.X_M: x, C.Y_M: y,
                           C.LON: lon, C.LAT: lat})
    ctx = {"site": dict(scene.site), "z_m": 1.1, "min_sun_elev_deg": 5.0, "wind_height_m": WIND_H}
    part = Partition("base/t/c0", "base", "t", 0, pd.DatetimeIndex(times, name=C.TIME), points, ["s"],
                     scene.to_geojson(), weather.reset_index(drop=True).set_index(pd.DatetimeIndex(times)), ctx)
    return _physics.point_environment(part)


def _assert_same(got: pd.DataFrame, ref: pd.DataFrame, columns=ENV_COLUMNS, who=""):
    for c in columns:
        a, b = got[c].to_numpy(), ref[c].to_numpy()
        if a.dtype == object or b.dtype == object or str(got[c].dtype) == "string":
            assert got[c].astype("string").fillna("<NA>").tolist() == ref[c].astype("string").fillna("<NA>").tolist(), (
                who, c)
        else:
            np.testing.assert_array_equal(a, b, err_msg=f"{who}: {c}")


def _network_frame(env: dict, pick_i: np.ndarray, pick_j: np.ndarray) -> pd.DataFrame:
    out = {}
    for c in NETWORK_COLUMNS:
        v = np.asarray(env[c])
        out[c] = v[pick_j] if v.ndim == 1 else v[pick_i, pick_j]
    return pd.DataFrame(out)


def _every_caller(scene, times, lon, lat, weather: pd.DataFrame, ref: pd.DataFrame):
    """Give the rows (times[i] at lon[i], lat[i]) to each row-wise caller and compare with ``ref``."""
    tl = _timeline(times, lon, lat, weather)
    if C.GHI_WM2 in weather.columns:
        irr = weather[[C.GHI_WM2, C.DNI_WM2, C.DHI_WM2]].set_axis(tl.index)
        recorded = add_environment(tl.drop(columns=[C.GHI_WM2, C.DNI_WM2, C.DHI_WM2]), scene=scene,
                                   irradiance=irr, warn=False)
    else:
        recorded = add_environment(tl, scene=scene, warn=False)
    _assert_same(recorded, ref, who="recorded walk (add_environment)")
    _assert_same(add_planned_environment(tl, scene=scene, warn=False), ref, who="planned walk")
    _assert_same(add_simulated_environment(tl, scene=scene), ref, who="routes.simulate")
    truth = simulator.environment_at({"scene": scene}, times, lon, lat, weather)
    _assert_same(truth, ref, who="demo truth")


def test_a_short_walk_is_the_same_through_every_caller():
    scene = _scene()
    times, lon, lat, weather = _walk()
    ref = environment_columns(times, pd.DataFrame({C.LON: lon, C.LAT: lat}), weather, scene=scene,
                              wind_height_m=WIND_H, warn=False)
    # the walk meets sun and building shade, with the sun below 5° at its end
    trans = ref[C.BEAM_TRANS_FRAC]
    assert (trans == 1).any() and (trans == 0).any()
    assert ref[C.SUN_ELEV_DEG].min() < 5.0 < ref[C.SUN_ELEV_DEG].max()
    _every_caller(scene, times, lon, lat, weather, ref)
    # the batch on the walk's positions x its times: the walk is the grid's diagonal
    k = np.arange(len(times))
    _assert_same(_network_frame(_network(scene, times, lon, lat, weather), k, k), ref, NETWORK_COLUMNS, "network")


def test_a_planned_route_is_the_same_through_every_caller(tmp_path):
    scene = _scene()
    tl = _route(tmp_path)
    times = tl.index
    lon, lat = tl[C.LON].to_numpy(float), tl[C.LAT].to_numpy(float)
    weather = tl[[*WEATHER, C.GHI_WM2, C.DNI_WM2, C.DHI_WM2]].reset_index(drop=True)
    ref = environment_columns(times, pd.DataFrame({C.LON: lon, C.LAT: lat}), weather, scene=scene,
                              wind_height_m=WIND_H, warn=False)
    assert (ref[C.BEAM_TRANS_FRAC] < 1).any() and (ref[C.BEAM_TRANS_FRAC] == 1).any()
    _every_caller(scene, times, lon, lat, weather, ref)
    # the route's own caller, as `walkcomfort route` runs it
    _assert_same(add_simulated_environment(tl, scene=scene), ref, who="routes.simulate (own timeline)")
    assert not times.has_duplicates
    k = np.arange(len(times))
    _assert_same(_network_frame(_network(scene, times, lon, lat, weather), k, k), ref, NETWORK_COLUMNS, "network")


def test_a_city_tile_is_the_same_through_every_caller():
    scene = _scene()
    times, lon, lat, weather = _tile()
    n, t = len(lon), len(times)
    ref = environment_columns(times, pd.DataFrame({C.LON: lon, C.LAT: lat}), weather, scene=scene,
                              wind_height_m=WIND_H, grid=True, warn=False)
    assert len(ref) == n * t and (ref[C.SUN_ELEV_DEG] < 0).any() and ((ref[C.SUN_ELEV_DEG] > 0)
                                                                     & (ref[C.SUN_ELEV_DEG] < 5)).any()
    # night, open sun, building shade, the crown (its July value) and the canopy all occur
    assert {0.0, 1.0, 0.15, 0.3} <= set(np.round(ref[C.BEAM_TRANS_FRAC], 6))
    net = _network(scene, times, lon, lat, weather)
    ii, jj = np.repeat(np.arange(n), t), np.tile(np.arange(t), n)
    _assert_same(_network_frame(net, ii, jj), ref, NETWORK_COLUMNS, "network")
    # the grid's rows, position-major, through every row-wise caller
    _every_caller(scene, ref.index, np.repeat(lon, t), np.repeat(lat, t),
                  pd.concat([weather] * n, ignore_index=True), ref)
    # the same rows in another order give the same values row for row (nothing depends on order)
    perm = np.random.default_rng(3).permutation(n * t)
    shuffled = environment_columns(ref.index[perm], pd.DataFrame({C.LON: np.repeat(lon, t)[perm],
                                                                   C.LAT: np.repeat(lat, t)[perm]}),
                                   pd.concat([weather] * n, ignore_index=True).iloc[perm], scene=scene,
                                   wind_height_m=WIND_H, warn=False)
    _assert_same(shuffled, ref.iloc[perm], who="shuffled rows")


def test_decisions_month_wind_height_low_sun():
    scene = _scene()
    times, lon, lat, weather = _walk()
    pos = pd.DataFrame({C.LON: lon, C.LAT: lat})
    # (b) a wind speed without its height is refused, never taken as 10 m
    with pytest.raises(InputError, match="wind sensor height"):
        environment_columns(times, pos, weather, scene=scene)
    # (a) the trees' month is the local (mean solar) one: 23:30 UTC on 31 July is already
    # August east of 7.5° E and still July at the demo town (from the definition)
    t = pd.DatetimeIndex(["2026-07-31 23:30"], tz="UTC")
    assert leaf_month(t, 15.0)[0] == 8 and leaf_month(t, -0.75)[0] == 7
    # (c) no elevation cut: a point in the open gets the direct beam with the sun at 1–5°
    open_pos = pd.DataFrame({C.LON: [LON + 0.01], C.LAT: [LAT]})
    late = pd.date_range("2026-07-15 18:40", "2026-07-15 19:20", freq="5min", tz="UTC")
    env = environment_columns(late, pd.concat([open_pos] * len(late), ignore_index=True), _weather_at(late),
                              scene=scene, wind_height_m=WIND_H, warn=False)
    low = (env[C.SUN_ELEV_DEG] > 0.5) & (env[C.SUN_ELEV_DEG] < 5)
    assert low.any() and (env.loc[low, C.BEAM_TRANS_FRAC] == 1).all() and (env.loc[low, C.DNI_WM2] > 0).all()
