"""Benchmark: PET and WBGT on a 3-hour walk at 1 s.

Size: 10,800 rows of an invented walk (air warming by 5 K, drying by 15 %RH, sun and shade
alternating every 10–90 s behind a globe-like lag, gusty wind 0.05–5 m/s). Prints

* PET by :func:`walkcomfort.environment.pet.pet_interpolated` on every row (goal: under 5 s
  on the 2-core machine), the number of row-by-row evaluations it needed;
* the row-by-row baseline (:func:`walkcomfort.environment.pet.pet_c`, one body heat balance
  per row) timed on a random sample and scaled to all rows, in the same process, and the
  ratio; the interpolation error on that sample (max, 95th percentile, mean);
* WBGT from the logger readings (:func:`walkcomfort.session.heat_safety.wbgt_from_logger`)
  on every row, for scale.

Run:

    python benchmarks/bench_indices.py [--hours 3] [--sample 400]
"""

from __future__ import annotations

import argparse
import time

import numpy as np
import pandas as pd


def invented_walk(n: int, seed: int = 7) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    t = np.arange(n)
    ta = 27.0 + 5.0 * t / n + 0.3 * np.sin(t / 300) + rng.normal(0, 0.05, n)
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


def _timed(fn):
    w0, c0 = time.perf_counter(), time.process_time()
    out = fn()
    return out, time.perf_counter() - w0, time.process_time() - c0


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--hours", type=float, default=3.0)
    ap.add_argument("--sample", type=int, default=400, help="rows timed one by one for the baseline")
    args = ap.parse_args(argv)

    from walkcomfort.environment import pet as P
    from walkcomfort.session.heat_safety import wbgt_from_logger

    _, iwall, _ = _timed(lambda: __import__("pythermalcomfort.models"))  # one-off, paid by the first PET call
    print(f"import pythermalcomfort.models: {iwall:.2f} s (once per process; not in the times below)")
    walk = invented_walk(int(args.hours * 3600))
    n = len(walk)
    print(f"walk: {n} rows at 1 s ({args.hours:g} h)")

    (fast, n_eval), wall, cpu = _timed(lambda: P.pet_interpolated(walk.t_air_c, walk.tmrt_c, walk.wind_ms,
                                                                   walk.rh_pct, return_evaluations=True))
    print(f"PET interpolated : {wall:6.2f} s wall, {cpu:6.2f} s CPU, {n_eval} row-by-row evaluations "
          f"({n_eval / n:.1%} of the rows); goal < 5 s")

    sample = walk.sample(min(args.sample, n), random_state=1).sort_index()
    full, swall, scpu = _timed(lambda: P.pet_c(sample.t_air_c, sample.tmrt_c, sample.wind_ms, sample.rh_pct))
    scale = n / len(sample)
    print(f"PET row by row   : {swall:6.2f} s wall for {len(sample)} rows -> {swall * scale:7.1f} s wall, "
          f"{scpu * scale:7.1f} s CPU for all rows (scaled)")
    print(f"ratio            : x{swall * scale / wall:.1f} faster (wall), x{scpu * scale / max(cpu, 1e-9):.1f} (CPU)")
    err = (fast.loc[sample.index] - full)
    print(f"error vs row by row on the sample: max |e| {err.abs().max():.3f} K, 95th pct {err.abs().quantile(0.95):.3f} K, "
          f"mean {err.mean():+.3f} K (tolerance {P.PET_INTERPOLATION_TOLERANCE_K} K)")

    globe = walk.t_air_c + (walk.tmrt_c - walk.t_air_c) * 0.35  # a small globe's reading, roughly
    _, wwall, wcpu = _timed(lambda: wbgt_from_logger(walk.t_air_c, walk.rh_pct, walk.wind_ms, globe,
                                                     globe_diameter_m=0.038))
    print(f"WBGT from logger : {wwall:6.2f} s wall, {wcpu:6.2f} s CPU for all rows")


if __name__ == "__main__":
    main()
