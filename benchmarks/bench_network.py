"""Network batch at a stated size: 2,000 street segments x 14 daytime hours x 2 schemes.

Prints the wall time and rows per second of

- the in-process engine (tiles x time chunks x schemes, one after the other);
- a Dask LocalCluster (on 127.0.0.1) with 1 worker and with 2 workers (processes);
- a naive baseline in the same process: one segment x one hour at a time against
  the whole scene (no tiling, no batching of points and times), timed on a sample
  of rows and reported as rows per second,

and the ratio of each engine's rate to the naive rate. The scene is the synthetic
grid town of :mod:`walkcomfort.network.synthetic` (one building per 100 m block,
a tree at every crossing); the second scheme adds a street tree every 25 m along
every street. Weather: stated (33 °C, 35 %, 2 m/s at 10 m, clear sky), 14 July,
06:00–19:00 local time (Europe/Madrid).

Usage::

    python benchmarks/bench_network.py                 # the stated size
    python benchmarks/bench_network.py --segments 200  # a quick look
"""

from __future__ import annotations

import argparse
import os
import tempfile
import time

os.environ.setdefault("WALKCOMFORT_NO_PROGRESS", "1")

import numpy as np  # noqa: E402

from walkcomfort import columns as C  # noqa: E402
from walkcomfort.network.batch import Partition, plan_job, time_range  # noqa: E402
from walkcomfort.network.engines import run_job  # noqa: E402
from walkcomfort.network.segments import network_from_geojson  # noqa: E402
from walkcomfort.network.synthetic import _lonlat, grid_network, grid_scene  # noqa: E402

N_X, N_Y, BLOCK_M = 26, 40, 100.0     # 26 x 40 streets: 2,014 block segments
LON0, LAT0 = -3.70, 40.42


def street_trees_scheme(scene_geojson: dict):
    """A scheme adding a tree every 25 m along every street (between the crossings)."""
    from walkcomfort.environment.scene import Scene
    from walkcomfort.routes.schemes import apply_scheme, scheme_from_geojson

    edits = []
    for i in range(N_X):
        for j in range(N_Y):
            for k in (1, 2, 3):
                for name, (x, y) in (("n", (i * BLOCK_M + 6.0, j * BLOCK_M + k * 25.0)),
                                     ("e", (i * BLOCK_M + k * 25.0, j * BLOCK_M + 6.0))):
                    if (name == "n" and j == N_Y - 1) or (name == "e" and i == N_X - 1):
                        continue
                    edits.append({"type": "Feature",
                                  "properties": {"edit": "add", "id": f"new-{name}{i:03d}_{j:03d}_{k}", "kind": "tree",
                                                 "height_m": 7.0, "crown_base_m": 2.5, "crown_radius_m": 3.0,
                                                 "transmissivity": 0.25},
                                  "geometry": {"type": "Point", "coordinates": _lonlat(x, y, LON0, LAT0)}})
    scheme = scheme_from_geojson({"type": "FeatureCollection",
                                  "walkcomfort": {"scheme": "street-trees", "label": "a tree every 25 m"},
                                  "features": edits}, source="benchmark")
    return scheme.name, apply_scheme(Scene.from_geojson(scene_geojson), scheme).to_geojson()


def build_job(n_segments: int, hours: int, tile_size_m: float):
    from walkcomfort.routes.weather import StatedConditions

    net = network_from_geojson(grid_network(N_X, N_Y, BLOCK_M, LON0, LAT0), segment_length_m=BLOCK_M, spacing_m=10.0)
    if n_segments < net.n_segments:
        net = net.subset(net.segments.index[:n_segments])
    base = grid_scene(N_X, N_Y, BLOCK_M, lon0=LON0, lat0=LAT0)
    name, trees = street_trees_scheme(base)
    times = time_range("2026-07-14T06:00", f"2026-07-14T{5 + hours:02d}:00", "1h", "Europe/Madrid")
    site = base["walkcomfort"]["site"]
    source = StatedConditions(t_air_c=33.0, rh_pct=35.0, wind_ms=2.0)
    weather = source.conditions(times, site["lat"], site["lon"], site["elev_m"])
    weather.attrs = {}
    t0 = time.perf_counter()
    job = plan_job(net, times, {"base": base, name: trees}, weather, tile_size_m=tile_size_m, time_chunk=hours,
                   site=site, context={"wind_height_m": 10.0})
    job.parameters["_plan_s"] = time.perf_counter() - t0
    return net, job, {"base": base, name: trees}


def naive_rate(job, scenes: dict, sample: int, prepared: bool, seed: int = 1) -> float:
    """Rows per second computing one segment x one hour at a time against the whole scene.

    ``prepared=False``: the whole scene is built for every row (what a per-row task
    shipping the city's scene would do); ``prepared=True``: the whole scene is built once
    and reused, so only the lack of tiling and of batching points x times is measured.
    """
    from walkcomfort.environment.scene import Scene
    from walkcomfort.network import _physics

    rng = np.random.default_rng(seed)
    parts = job.partitions
    built = {k: Scene.from_geojson(v) for k, v in scenes.items()} if prepared else {}
    if prepared:
        for sc in built.values():
            _ = sc.obstacles  # prepare the kernels' arrays once, outside the timing
    t0 = time.perf_counter()
    done = 0
    for _ in range(sample):
        p = parts[int(rng.integers(len(parts)))]
        seg = p.segment_ids[int(rng.integers(len(p.segment_ids)))]
        k = int(rng.integers(len(p.times)))
        pts = p.points.loc[p.points[C.SEGMENT_ID] == seg].reset_index(drop=True)
        one = Partition(f"naive/{seg}/{k}", p.scheme, p.tile_id, 0, p.times[k:k + 1], pts, [seg],
                        scenes[p.scheme], p.weather.iloc[k:k + 1], p.context)
        scene = built[p.scheme] if prepared else Scene.from_geojson(scenes[p.scheme])
        env = _physics.point_environment(one, scene=scene)
        rows = _physics.aggregate_points(one, {**env, **_physics.rule_probabilities(env[C.UTCI_C])},
                                         "physics-rule")
        done += len(rows)
    return done / (time.perf_counter() - t0)


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--segments", type=int, default=2000)
    ap.add_argument("--hours", type=int, default=14)
    ap.add_argument("--tile-size", type=float, default=400.0)
    ap.add_argument("--naive-sample", type=int, default=20)
    ap.add_argument("--skip-dask", action="store_true")
    args = ap.parse_args(argv)

    t0 = time.perf_counter()
    net, job, scenes = build_job(args.segments, args.hours, args.tile_size)
    plan_s = job.parameters.pop("_plan_s", float("nan"))
    setup_s = time.perf_counter() - t0
    n_obst = {k: len(v["features"]) for k, v in scenes.items()}
    per_tile = np.mean([len(p.scene["features"]) for p in job.partitions])
    print(f"size: {net.n_segments} segments ({len(net.points)} points) x {len(job.partitions[0].times)} hours x "
          f"{len(job.schemes)} schemes = {job.expected_rows} rows; obstacles {n_obst}; "
          f"{len(job.partitions)} partitions, {per_tile:.0f} obstacles per tile on average; "
          f"load average {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores")
    print(f"setup (synthetic town, scheme applied, weather): {setup_s - plan_s:.2f} s; "
          f"plan (tiles, obstacle buffers, scene subsets, partitions): {plan_s:.2f} s; tile {args.tile_size:g} m")

    naive_cold = naive_rate(job, scenes, max(3, args.naive_sample // 5), prepared=False)
    print(f"naive baseline A (one segment x hour at a time, whole scene built per row): {naive_cold:.2f} rows/s "
          f"-> {job.expected_rows / naive_cold / 3600:.1f} h projected for this job")
    naive = naive_rate(job, scenes, args.naive_sample, prepared=True)
    print(f"naive baseline B (one segment x hour at a time, whole scene built once): {naive:.1f} rows/s "
          f"-> {job.expected_rows / naive / 60:.1f} min projected; ratios below are against B")

    results = []
    with tempfile.TemporaryDirectory() as tmp:
        runs = [("in-process", {})]
        if not args.skip_dask:
            runs += [("dask", {"workers": 1, "processes": True}), ("dask", {"workers": 2, "processes": True})]
        for k, (engine, opts) in enumerate(runs):
            from walkcomfort.network import _physics

            _physics._SVF_CACHE.clear()
            t0 = time.perf_counter()
            report = run_job(job, os.path.join(tmp, f"run{k}"), engine, **opts)
            dt = time.perf_counter() - t0
            if not report.ok:
                raise SystemExit(f"{engine} {opts}: {len(report.failed)} partitions failed: "
                                 f"{report.failed[0].error}")
            label = engine if engine == "in-process" else f"dask LocalCluster, {opts['workers']} worker(s)"
            rate = report.written_rows / dt
            tm = report.timings
            results.append((label, dt, rate, tm))
            print(f"{label:32s} {dt:8.1f} s  {rate:9.0f} rows/s  x{rate / naive:6.1f} vs naive B  "
                  f"(start {tm['start']:.1f} s, writing {tm['write']:.1f} s, partition CPU {tm['cpu']:.1f} s; "
                  f"rows expected {report.expected_rows}, written {report.written_rows})")
    if len(results) == 3:
        one, two = results[1], results[2]
        print(f"2 workers vs 1 worker: x{one[1] / two[1]:.2f} measured on {os.cpu_count()} cores shared at load "
              f"{os.getloadavg()[0]:.1f} (contention, not the engine, sets this number here)")
        # projection: planning and the cluster start are serial; each partition's work (compute and
        # its Parquet write, both done by the worker on a LocalCluster) divides over N workers, one
        # free core each. On a shared machine wall time depends on the neighbours, so the work is
        # taken in CPU seconds of the worker threads (summed over the 2-worker run: it includes
        # any per-partition overhead Dask adds).
        cpu_in, cpu_1, cpu_2 = results[0][3]["cpu"], one[3]["cpu"], two[3]["cpu"]
        serial = plan_s + one[3]["start"]
        print(f"  partition CPU: in-process {cpu_in:.1f} s, 1 worker {cpu_1:.1f} s, 2 workers {cpu_2:.1f} s "
              f"(x{cpu_2 / cpu_in:.2f} of in-process)")
        print(f"  model: T(N) = serial {serial:.1f} s (plan {plan_s:.1f} + cluster start {one[3]['start']:.1f}) "
              f"+ {cpu_2:.1f} CPU s of partition work / N")
        for n in (1, 2, 4, 8, 16, 32):
            proj = serial + cpu_2 / n
            print(f"  projected {n:2d} workers: {proj:7.1f} s ({job.expected_rows / proj:8.0f} rows/s)")

if __name__ == "__main__":
    main()
