"""Tmrt from the walker's surroundings against the point model, inside the chain, at a stated size.

Size: a one-hour walk sampled every second (3,600 rows) through an invented scene of 600
buildings and 400 trees over 1 km (``environment.synthetic.random_scene``), 15 July from
11:00 local time, clear sky.

Prints wall time of ``environment.chain.environment_columns`` with
``radiation="surroundings"`` (the default: ground and wall samples around every row,
surface energy balance) and with ``radiation="point"`` (the former model, ground at the
walker's own point) in the same process, their ratio, and the mean Tmrt of each for rows
in sun and in shade (the point model's shade is too cool; see environment/surroundings.py).

Usage::

    python benchmarks/bench_surroundings.py              # the stated size
    python benchmarks/bench_surroundings.py --rows 600   # a quick look
"""

from __future__ import annotations

import argparse
import time

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.environment import chain
from walkcomfort.environment.synthetic import random_scene


def main(rows: int = 3600) -> None:
    scene, (cx, cy) = random_scene(600, 400, 1000.0, seed=1)
    rng = np.random.default_rng(1)
    heading = np.pi / 2 + 0.6 * np.sin(np.cumsum(rng.normal(0, 0.05, rows)))  # eastward, meandering
    step = 900.0 / rows  # the walk crosses 900 m of the scene whatever the number of rows
    x = cx - 450 + np.cumsum(step * np.sin(heading))
    y = cy + np.cumsum(step * np.cos(heading))
    keep = ~scene.inside_buildings(x, y)
    x, y = x[keep], y[keep]
    lon, lat = scene.unproject(x, y)
    times = pd.date_range("2026-07-15 11:00", periods=x.size, freq="1s", tz="Europe/Madrid")
    weather = pd.DataFrame({C.T_AIR_C: np.full(x.size, 33.0), C.RH_PCT: 30.0, C.WIND_MS: 1.0})
    pos = pd.DataFrame({C.LON: lon, C.LAT: lat})
    out = {}
    for model in ("point", "surroundings"):
        t0 = time.perf_counter()
        env = chain.environment_columns(times, pos, weather, scene=scene, wind_height_m=1.1, radiation=model,
                                        warn=False)
        out[model] = (time.perf_counter() - t0, env)
    print(f"rows: {x.size}")
    for model, (dt, env) in out.items():
        sun = env[C.BEAM_TRANS_FRAC].to_numpy() > 0.5
        tm = env[C.TMRT_C].to_numpy()
        print(f"{model:>13}: {dt:6.2f} s  Tmrt sun {np.nanmean(tm[sun]):5.1f} °C  shade {np.nanmean(tm[~sun]):5.1f} °C")
    print(f"ratio surroundings / point: {out['surroundings'][0] / out['point'][0]:.2f}")


if __name__ == "__main__":
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rows", type=int, default=3600)
    main(ap.parse_args().rows)
