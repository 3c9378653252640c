"""The environment chain against the same steps called one by one, at a stated size.

Size: 5,000 street points x 24 hourly times of 15 July (about 110,000 point-times once points
falling inside buildings are dropped) in an invented
scene of 600 buildings and 400 trees over 1 km (``environment.synthetic.random_scene``).

Prints wall and CPU time of

- the chain, ``environment.chain.environment_columns(..., grid=True)`` (what every caller
  now uses), and
- the baseline: the same physics called step by step as the city-wide batch did before
  the chain existed (sun at the site per time, clear sky per time, the points x times beam
  grid, the sky view per point, Tmrt, 10 m wind, UTCI),

in the same process, the ratio chain / baseline, and the largest difference of their UTCI
(they differ only where two points share a 2 m sky-view cell; the baseline's trees take
the UTC month, the chain's the local one, the same month here).

Usage::

    python benchmarks/bench_chain.py            # the stated size
    python benchmarks/bench_chain.py --points 500   # a quick look
"""

from __future__ import annotations

import argparse
import time

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.environment import chain, shade, skyview, sun, tmrt, utci
from walkcomfort.environment.synthetic import random_scene


def _inputs(n_points: int, seed: int = 1):
    scene, (cx, cy) = random_scene(600, 400, 1000.0, seed=seed)
    rng = np.random.default_rng(seed)
    x = cx + rng.uniform(-450, 450, n_points)
    y = cy + rng.uniform(-450, 450, n_points)
    x, y = x[~scene.inside_buildings(x, y)], y[~scene.inside_buildings(x, y)]
    lon, lat = scene.unproject(x, y)
    times = pd.date_range("2026-07-15 00:00", periods=24, freq="1h", tz="UTC")
    h = np.arange(24.0)
    weather = pd.DataFrame({C.T_AIR_C: 24 + 8 * np.sin(np.pi * (h - 5) / 16), C.RH_PCT: 50 - h,
                            C.WIND_MS: 1.0 + 0.1 * h, C.PRESSURE_HPA: 1005.0})
    return scene, np.asarray(lon), np.asarray(lat), times, weather


def _baseline(scene, lon, lat, times, weather):
    site = scene.site
    x, y = scene.project(lon, lat)
    n, t = len(x), len(times)
    sp = sun.solar_position(times, site["lat"], site["lon"], site["elev_m"],
                            pressure_hpa=weather[C.PRESSURE_HPA].to_numpy(), t_air_c=weather[C.T_AIR_C].to_numpy())
    elev, azim = sp[C.SUN_ELEV_DEG].to_numpy(), sp[C.SUN_AZIM_DEG].to_numpy()
    cs = sun.clearsky_irradiance(times, site["lat"], site["lon"], site["elev_m"], position=sp)
    trans = shade.beam_transmittance_grid(scene, x, y, elev, azim, z_m=1.1, month=np.asarray(times.month))
    svf = skyview.sky_view_factor(scene, x, y, z_m=1.1)[C.SVF].to_numpy()
    grid = np.ones((n, t))
    ta, rh = (grid * weather[C.T_AIR_C].to_numpy()).ravel(), (grid * weather[C.RH_PCT].to_numpy()).ravel()
    tr = tmrt.tmrt_outdoor((grid * elev).ravel(), (grid * cs[C.DNI_WM2].to_numpy()).ravel(),
                           (grid * cs[C.DHI_WM2].to_numpy()).ravel(), trans.ravel(), (svf[:, None] * grid).ravel(),
                           ta, rh)
    v10 = (grid * np.asarray(utci.wind_at_10m(weather[C.WIND_MS].to_numpy(), 10.0))).ravel()
    return utci.utci_from_conditions(ta, tr, v10, rh, warn=False)[C.UTCI_C].to_numpy()


def _chain(scene, lon, lat, times, weather):
    env = chain.environment_columns(times, pd.DataFrame({C.LON: lon, C.LAT: lat}), weather, scene=scene,
                                    wind_height_m=10.0, grid=True, warn=False)
    return env[C.UTCI_C].to_numpy()


def _timed(fn, *args):
    w0, c0 = time.perf_counter(), time.process_time()
    out = fn(*args)
    return out, time.perf_counter() - w0, time.process_time() - c0


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--points", type=int, default=5000)
    ap.add_argument("--repeat", type=int, default=2, help="runs of each (the best is reported)")
    args = ap.parse_args()
    inputs = _inputs(args.points)
    n = len(inputs[1])
    print(f"{n} points x {len(inputs[3])} times = {n * len(inputs[3]):,} point-times, "
          f"{len(inputs[0])} obstacles")
    best = {}
    for name, fn in (("baseline (steps one by one)", _baseline), ("chain (environment_columns)", _chain)):
        runs = [_timed(fn, *inputs) for _ in range(args.repeat)]
        out, wall, cpu = min(runs, key=lambda r: r[2])
        best[name] = (out, wall, cpu)
        print(f"{name:30s} wall {wall:6.2f} s   CPU {cpu:6.2f} s")
    (b, _, b_cpu), (c, _, c_cpu) = best.values()
    print(f"ratio chain / baseline (CPU): {c_cpu / b_cpu:.2f}")
    print(f"largest |UTCI chain - baseline|: {np.nanmax(np.abs(c - b)):.3g} K "
          f"(rows differing: {int((np.abs(c - b) > 1e-9).sum())})")


if __name__ == "__main__":
    main()
