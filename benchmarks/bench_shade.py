"""Benchmark: direct-beam shade for 1,000 points x 96 times x 3,000 obstacles.

Size (stated, fixed): an invented scene of 1,800 buildings (30 % L-shaped) and 1,200
point trees in a 1.2 km square (walkcomfort.environment.synthetic.random_scene,
seed 1); 1,000 points in the central 1 km; 96 sun positions evenly spread over the
daylight of 14 July at Madrid (the hard case: no night-time columns to skip).

Timed:
  * scene load      — Scene.from_geojson of the 3,000-feature GeoJSON (validation);
  * scene prep      — obstacle arrays + STRtree (Scene.obstacles);
  * grid            — shade.beam_transmittance_grid (1,000 x 96);
  * naive loop      — shade.beam_transmittance_naive, per (point, time) over every
                      obstacle with shapely predicates, on a random subsample, scaled;
  * indexed loop    — the same loop over STRtree candidates only (a stronger baseline).
The results of both loops on the subsample are checked to equal the vectorised ones.

Run:  python benchmarks/bench_shade.py  [--sample 40]
Goal (issue 3): grid + load + prep < 1 s, and >= 300 x the naive loop.
"""

from __future__ import annotations

import argparse
import time

import numpy as np
import pandas as pd

from walkcomfort.environment import shade, sun
from walkcomfort.environment.scene import Scene
from walkcomfort.environment.synthetic import random_scene


def main(sample: int = 40) -> None:
    scene0, (x0, y0) = random_scene(1800, 1200, 1200.0, seed=1)
    geojson = scene0.to_geojson()
    rng = np.random.default_rng(2)
    n_pts = 1000
    x = x0 + rng.uniform(-500, 500, n_pts)
    y = y0 + rng.uniform(-500, 500, n_pts)
    day = pd.date_range("2026-07-14 00:00", "2026-07-14 23:59", freq="1min", tz="Europe/Madrid")
    pos_day = sun.solar_position(day, 40.4168, -3.7038)
    up = day[pos_day["sun_elev_deg"].to_numpy() > 0.5]
    times = pd.DatetimeIndex(np.linspace(up[0].value, up[-1].value, 96).astype("int64"), tz="UTC")
    pos = sun.solar_position(times, 40.4168, -3.7038)
    elev, azim = pos["sun_elev_deg"].to_numpy(), pos["sun_azim_deg"].to_numpy()

    # wall-clock and CPU time: the machine is shared, so CPU time of this (single-threaded)
    # process is the steadier figure; both are printed
    c0, t0 = time.process_time(), time.perf_counter()
    scene = Scene.from_geojson(geojson)
    c1, t1 = time.process_time(), time.perf_counter()
    obs = scene.obstacles
    c2, t2 = time.process_time(), time.perf_counter()
    grid = shade.beam_transmittance_grid(scene, x, y, elev, azim, z_m=1.1)
    c3, t3 = time.process_time(), time.perf_counter()
    t_load, t_prep, t_grid = t1 - t0, t2 - t1, t3 - t2
    total = t_load + t_prep + t_grid
    cpu_total = c3 - c0

    ii = rng.integers(0, n_pts, sample)
    jj = rng.integers(0, times.size, sample)
    c4, t4 = time.process_time(), time.perf_counter()
    naive = shade.beam_transmittance_naive(scene, x[ii], y[ii], elev[jj], azim[jj], z_m=1.1)
    c5, t5 = time.process_time(), time.perf_counter()
    indexed = shade.beam_transmittance_naive(scene, x[ii], y[ii], elev[jj], azim[jj], z_m=1.1, candidates="strtree")
    c6, t6 = time.process_time(), time.perf_counter()
    assert np.allclose(naive, grid[ii, jj]) and np.allclose(indexed, grid[ii, jj]), "results differ"
    n_rays = n_pts * times.size
    naive_full = (t5 - t4) / sample * n_rays
    indexed_full = (t6 - t5) / sample * n_rays

    print(f"scene: {obs.n} obstacles ({int((obs.kind == 0).sum())} buildings, {int((obs.kind == 1).sum())} trees), "
          f"{int(obs.edge_ptr[-1])} edges; {n_pts} points x {times.size} daylight times = {n_rays} rays")
    print("                                   wall        cpu")
    print(f"scene load (GeoJSON, validated) {t_load:8.3f} s {c1 - c0:8.3f} s")
    print(f"scene prep (arrays + STRtree)   {t_prep:8.3f} s {c2 - c1:8.3f} s")
    print(f"grid shade 1000 x 96            {t_grid:8.3f} s {c3 - c2:8.3f} s")
    print(f"total                           {total:8.3f} s {cpu_total:8.3f} s   (goal < 1 s)")
    print(f"naive loop, {sample} rays          {t5 - t4:8.3f} s {c5 - c4:8.3f} s -> {naive_full:9.1f} s wall "
          "for all rays (scaled)")
    print(f"indexed loop, {sample} rays        {t6 - t5:8.3f} s {c6 - c5:8.3f} s -> {indexed_full:9.1f} s wall "
          "for all rays (scaled)")
    naive_cpu = (c5 - c4) / sample * n_rays
    indexed_cpu = (c6 - c5) / sample * n_rays
    print(f"ratio naive / vectorised (total incl. load+prep)   wall {naive_full / total:8.0f} x, "
          f"cpu {naive_cpu / cpu_total:8.0f} x   (goal >= 300 x)")
    print(f"ratio indexed loop / vectorised (total)            wall {indexed_full / total:8.0f} x, "
          f"cpu {indexed_cpu / cpu_total:8.0f} x")
    print(f"shaded share of rays: {(grid < 0.5).mean():.3f}")


if __name__ == "__main__":
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sample", type=int, default=40, help="rays timed for the naive loops")
    main(ap.parse_args().sample)
