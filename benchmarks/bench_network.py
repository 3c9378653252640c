"""Network batch at stated sizes: CPU per row with a comfort model, driver memory, what the cluster holds.

Default (the city-scale section), for 2,000 and 8,000 street segments of 100 m sampled
every 10 m x 14 daytime hours (06–19 h local, 14 July) x 2 schemes (56,000 and 224,000
rows), with a comfort model bundle ("small" preset, fitted on an invented campaign, or
``--model BUNDLE``):

- CPU per row of the partition work with the model and with the UTCI-band rule (thread
  CPU of the in-process engine; the process CPU, which also counts LightGBM's OpenMP
  threads, is printed beside it), rows per second per core, and the ratio of the engine's
  computing against the path before shipping (the partition function called on
  partitions that name the bundle by path) in the same run;
- a run on a scheduler and 2 single-thread workers in their own processes: the driver's
  Python heap peak (tracemalloc) while planning and running, the scheduler process's
  growth, the tasks in flight (bounded waves);
- scheduler-held bytes per task in Dask's wire format, against the former partitions
  that carried their scene subset;
- the extrapolation to 12 M rows (100,000 segments x 24 h x 5 schemes).

Goals: <= 0.5 ms CPU per row with the model; driver heap <= 400 MB at 8,000 segments.
Measured (2 shared cores, load 3–7, December 2026): with the model 0.26 ms (2,000) and
0.30 ms (8,000) thread CPU per row; with OMP_NUM_THREADS=1 the process CPU is the same
(0.28 ms at 2,000); the rule alone 0.16–0.17 ms; engine computing / path before x1.00–1.08
(the row-count check); Dask 2 workers x1.2–1.4 of
in-process CPU; driver peak 36 MB (2,000) and 145 MB (8,000), unchanged by the run
(inputs and plan); 3.5 kB per task instead of 66–75 kB; tile data 58–65 kB once per tile;
1.0 CPU-hour projected for 12 M rows. Since the environment chain computes Tmrt from the
sunlit and shaded surfaces in view (radiation="surroundings", the default from 3 December
2026) the same run measures 2.45 ms per row with the model and 2.38 ms with the rule alone
(2,000 segments, OMP_NUM_THREADS=1; 8.2 CPU-hours for 12 M rows): the goal is then not met,
and the time is in ``environment.surroundings.walker_fluxes`` (surface temperatures: the
diurnal forcing recomputes sun position and clear-sky irradiance, with pvlib's turbidity
table lookup, for every partition), not in the batch machinery (engine / path before x0.97).

``--engines``: the engine comparison at 2,000 segments (in-process, LocalCluster with 1
and 2 workers) against naive one-segment-hour-at-a-time baselines, with a projection
for N workers. The scene is the synthetic grid town of :mod:`walkcomfort.network.synthetic`
(one building per 100 m block, a tree at every crossing); the second scheme adds a street
tree every 25 m along every street. Weather: stated (33 °C, 35 %, 2 m/s at 10 m, clear sky).

Usage::

    python benchmarks/bench_network.py                              # the city-scale section
    python benchmarks/bench_network.py --sizes 300 --hours 4        # a quick look
    python benchmarks/bench_network.py --engines [--segments 200]   # engines vs naive baselines
"""

from __future__ import annotations

import argparse
import os
import tempfile
import time

os.environ.setdefault("WALKCOMFORT_NO_PROGRESS", "1")
os.environ.setdefault("OMP_WAIT_POLICY", "PASSIVE")  # spinning OpenMP threads would count as CPU

import numpy as np  # noqa: E402

from walkcomfort import columns as C  # noqa: E402
from walkcomfort.network.batch import Partition, plan_job, time_range  # noqa: E402
from walkcomfort.network.engines import run_job  # noqa: E402
from walkcomfort.network.segments import network_from_geojson  # noqa: E402
from walkcomfort.network.synthetic import _lonlat, grid_network, grid_scene  # noqa: E402

N_X, N_Y, BLOCK_M = 26, 40, 100.0     # 26 x 40 streets: 2,014 block segments (more streets east for more)
LON0, LAT0 = -3.70, 40.42


def street_trees_scheme(scene_geojson: dict, n_x: int = N_X, n_y: int = N_Y):
    """A scheme adding a tree every 25 m along every street (between the crossings)."""
    from walkcomfort.environment.scene import Scene
    from walkcomfort.routes.schemes import apply_scheme, scheme_from_geojson

    edits = []
    for i in range(n_x):
        for j in range(n_y):
            for k in (1, 2, 3):
                for name, (x, y) in (("n", (i * BLOCK_M + 6.0, j * BLOCK_M + k * 25.0)),
                                     ("e", (i * BLOCK_M + k * 25.0, j * BLOCK_M + 6.0))):
                    if (name == "n" and j == n_y - 1) or (name == "e" and i == n_x - 1):
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

    # 26 x 40 streets give 2,014 segments; longer east-west for more (about 80 segments per extra street)
    n_x = max(N_X, -(-(n_segments + N_Y) // (2 * N_Y - 1)))
    net = network_from_geojson(grid_network(n_x, N_Y, BLOCK_M, LON0, LAT0), segment_length_m=BLOCK_M, spacing_m=10.0)
    if n_segments < net.n_segments:
        net = net.subset(net.segments.index[:n_segments])
    base = grid_scene(n_x, N_Y, BLOCK_M, lon0=LON0, lat0=LAT0)
    name, trees = street_trees_scheme(base, n_x, N_Y)
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


def engines_main(args) -> None:

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

# --- city scale: CPU per row with a model, driver memory, what the scheduler holds ---------------------

#: The driver's memory budget: peak Python heap of this process while planning and running a job
#: on Dask (workers compute and write) [MB] at 8,000 segments, and extrapolated to 12 M rows.
DRIVER_BUDGET_MB_8K = 400.0
DRIVER_BUDGET_MB_CITY = 2_000.0
#: The per-row CPU goal with a model [ms].
GOAL_MS_PER_ROW = 0.5
CITY_ROWS = 12_000_000      # 100,000 segments x 24 h x 5 schemes
CITY_SEGMENTS = 100_000


def synthetic_bundle(folder: str) -> str:
    """A comfort model bundle fitted on an invented campaign (the "small" preset the demo uses)."""
    from walkcomfort.model._synthetic import synthetic_campaign
    from walkcomfort.model.bundle import save_bundle
    from walkcomfort.model.classifier import ComfortClassifier
    from walkcomfort.model.evaluate import training_table

    table = training_table(synthetic_campaign(n_participants=6, walks_per_participant=2, duration_s=1800,
                                              vote_every_s=60, seed=5))
    save_bundle(ComfortClassifier().fit(table.X, table.y), folder)
    return folder


def wire_bytes(obj) -> int:
    """Bytes of ``obj`` in Dask's own wire format (what the scheduler keeps for a task's arguments)."""
    from distributed.protocol import serialize_bytes

    return len(serialize_bytes(obj))


def held_bytes(job) -> dict:
    """Per task now (partition description; tile data once per tile; bundle once) vs per task before."""
    from walkcomfort.network.shipping import strip_partition, tile_keys

    parts = job.partitions
    sample = parts[:: max(1, len(parts) // 40)]
    task = np.mean([wire_bytes(strip_partition(p)) for p in sample])
    tiles = {}
    for p in parts:
        tiles.setdefault(tile_keys(p)[1], p)
    tile = np.mean([wire_bytes((p.points, p.scene)) for p in list(tiles.values())[:: max(1, len(tiles) // 40)]])
    before = np.mean([wire_bytes(p) for p in sample])  # the partition with its scene subset, per task
    return {"task": task, "tile": tile, "tiles": len(tiles), "before": before,
            "bundle": wire_bytes(job.bundle) if job.bundle else 0}


def with_bundle(job, bundle_folder: str):
    from walkcomfort.network.shipping import pack_bundle

    bundle = pack_bundle(bundle_folder)
    for p in job.partitions:
        p.context = {**p.context, "model": bundle["digest"]}
    job.bundle = bundle
    return job


def cpu_per_row(job, tmp: str, name: str) -> tuple[float, object]:
    """CPU ms per row of the partition threads (compute + write), in-process engine."""
    from walkcomfort.network import _physics

    _physics._SVF_CACHE.clear()
    p0 = time.process_time()
    report = run_job(job, os.path.join(tmp, name), "in-process", overwrite=True)
    assert report.ok, report.failed[:1]
    compute = report.timings["cpu"] - report.timings.get("cpu_write", 0.0)
    n = report.written_rows
    return 1000.0 * report.timings["cpu"] / n, 1000.0 * compute / n, 1000.0 * (time.process_time() - p0) / n


def direct_cpu_per_row(job, bundle_folder: str | None) -> float:
    """The path before shipping: the partition function called on partitions that name the bundle by path."""
    import dataclasses

    from walkcomfort.network import _physics

    _physics._SVF_CACHE.clear()
    c0, n = time.thread_time(), 0
    for p in job.partitions:
        q = dataclasses.replace(p, context={**p.context, "model": bundle_folder}) if bundle_folder else p
        n += len(job.partition_fn(q))
    return 1000.0 * (time.thread_time() - c0) / n


class SeparateCluster:
    """A scheduler and 2 single-thread workers in their own processes (as on a real cluster), on 127.0.0.1.

    The driver's memory then holds only what the client keeps; the scheduler's own growth is read
    from its process.
    """

    def __init__(self, tmp: str, workers: int = 2):
        import subprocess
        import sys

        self.file = os.path.join(tmp, "scheduler.json")
        exe = [sys.executable, "-m", "distributed.cli"]
        self.procs = [subprocess.Popen([*exe[:2], "distributed.cli.dask_scheduler", "--host", "127.0.0.1",
                                        "--port", "0", "--no-dashboard", "--scheduler-file", self.file],
                                       stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)]
        for _ in range(120):
            if os.path.exists(self.file):
                break
            time.sleep(0.5)
        self.procs.append(subprocess.Popen([*exe[:2], "distributed.cli.dask_worker", "--nworkers", str(workers),
                                            "--nthreads", "1", "--no-dashboard", "--scheduler-file", self.file],
                                           stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL))
        import json

        from distributed import Client

        with open(self.file) as fh:
            self.address = json.load(fh)["address"]
        self.client = Client(self.address, timeout=60)
        self.client.wait_for_workers(workers, timeout=120)

    def scheduler_rss_mb(self) -> float:
        return self.client.run_on_scheduler(_rss_mb)  # after importing what unpickling our tasks imports

    def close(self) -> None:
        self.client.close()
        for p in reversed(self.procs):
            p.terminate()
            p.wait(timeout=30)


def _rss_mb() -> float:
    import psutil

    import walkcomfort.network.engines  # noqa: F401  (the imports unpickling a task brings, not held data)

    return psutil.Process().memory_info().rss / 1e6


def driver_run(job_builder, tmp: str, name: str, cluster: SeparateCluster) -> dict:
    """Plan and run on a separate cluster, tracing this process's Python heap (workers compute and write)."""
    import tracemalloc

    rss0 = cluster.scheduler_rss_mb()
    tracemalloc.start()
    t0 = time.perf_counter()
    job = job_builder()
    plan_peak = tracemalloc.get_traced_memory()[1]
    report = run_job(job, os.path.join(tmp, name), "dask", scheduler=cluster.address, overwrite=True,
                     summarise=True)
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    assert report.ok, report.failed[:1]
    return {"job": job, "report": report, "plan_peak_mb": plan_peak / 1e6, "peak_mb": peak / 1e6,
            "wall_s": time.perf_counter() - t0, "scheduler_growth_mb": cluster.scheduler_rss_mb() - rss0}


def city_main(args) -> None:
    import resource

    sizes = [int(x) for x in args.sizes.split(",")]
    print(f"city scale: {sizes} segments x {args.hours} h x 2 schemes; load average {os.getloadavg()[0]:.1f} on "
          f"{os.cpu_count()} cores (CPU times are the steady numbers on this shared machine)")
    rows_by_size = {}
    with tempfile.TemporaryDirectory() as tmp:
        bundle = args.model or synthetic_bundle(os.path.join(tmp, "model"))
        for n in sizes:
            net, job, _ = build_job(n, args.hours, args.tile_size)
            job.parameters.pop("_plan_s", None)
            first = n == sizes[0]
            rule_ms = cpu_per_row(job, tmp, f"rule{n}")[0] if first else float("nan")
            with_bundle(job, bundle)
            model_ms, compute_ms, process_ms = cpu_per_row(job, tmp, f"model{n}")
            before_ms = direct_cpu_per_row(job, bundle) if first else float("nan")
            hb = held_bytes(job)

            def builder(n=n):
                return with_bundle(build_job(n, args.hours, args.tile_size)[1], bundle)

            cluster = SeparateCluster(tmp)
            try:
                d = driver_run(builder, tmp, f"dask{n}", cluster)
            finally:
                cluster.close()
            dcpu = 1000.0 * d["report"].timings["cpu"] / d["report"].written_rows
            rows_by_size[n] = {"rows": job.expected_rows, "driver_mb": d["peak_mb"], "model_ms": model_ms}
            print(f"\n{n} segments ({len(net.points)} points), {job.expected_rows} rows, {len(job.partitions)} "
                  f"partitions, {hb['tiles']} tiles")
            print(f"  CPU per row: rule {rule_ms:.3f} ms; with the model {model_ms:.3f} ms "
                  f"({1000.0 / model_ms:,.0f} rows/s per core; goal <= {GOAL_MS_PER_ROW} ms: "
                  f"{'met' if model_ms <= GOAL_MS_PER_ROW else 'NOT met'}; process CPU, all threads: "
                  f"{process_ms:.3f} ms), of which computing {compute_ms:.3f} ms "
                  f"and the Parquet write the rest; the path before shipping (the partition function on "
                  f"partitions naming the bundle by path, no write) {before_ms:.3f} ms -> ratio computing "
                  f"engine/before x{compute_ms / before_ms:.2f}; Dask 2 workers {dcpu:.3f} ms "
                  f"(x{dcpu / model_ms:.2f} of in-process, write included)")
            print(f"  driver (Dask run on a separate scheduler + 2 workers; this process's Python heap): plan peak "
                  f"{d['plan_peak_mb']:.0f} MB, run peak {d['peak_mb']:.0f} MB; scheduler process grew "
                  f"{d['scheduler_growth_mb']:.0f} MB; peak tasks in flight {d['report'].timings.get('peak_in_flight')}"
                  f"; wall {d['wall_s']:.0f} s; summary on the workers {d['report'].timings.get('summary', 0):.1f} s")
            print(f"  scheduler-held bytes per task: {hb['task'] / 1e3:.1f} kB (before: {hb['before'] / 1e3:.1f} kB "
                  f"with the scene subset in every task, x{hb['before'] / hb['task']:.0f}); tile data "
                  f"{hb['tile'] / 1e3:.1f} kB once per tile while its partitions are in flight; model bundle "
                  f"{hb['bundle'] / 1e3:.0f} kB once per job")
        print(f"\ndriver process maximum resident set (whole benchmark, includes the in-process runs): "
              f"{resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1e3:.0f} MB")
    big = max(rows_by_size)
    ms = rows_by_size[big]["model_ms"]
    print(f"\nextrapolation to {CITY_ROWS / 1e6:.0f} M rows ({CITY_SEGMENTS:,} segments x 24 h x 5 schemes) at "
          f"{ms:.3f} ms per row: {CITY_ROWS * ms / 3.6e6:.1f} CPU-hours "
          f"({CITY_ROWS * ms / 3.6e6 / 32 * 60:.0f} min on 32 cores)")
    if len(rows_by_size) > 1:
        small = min(rows_by_size)
        a, b = rows_by_size[small], rows_by_size[big]
        per_seg = (b["driver_mb"] - a["driver_mb"]) / (big - small)
        # the plan holds one scene subset per tile and scheme: 5 schemes instead of 2 (one time chunk either way)
        city_mb = b["driver_mb"] + per_seg * (CITY_SEGMENTS - big) * 5 / 2
        print(f"  driver heap grows {per_seg * 1e3:.1f} kB per segment (plan: tiles, scene subsets, partitions; x5/2 "
              f"for five schemes) -> "
              f"~{city_mb:,.0f} MB at {CITY_SEGMENTS:,} segments (budget {DRIVER_BUDGET_MB_CITY:,.0f} MB: "
              f"{'held' if city_mb <= DRIVER_BUDGET_MB_CITY else 'NOT held'}); at {big} segments "
              f"{b['driver_mb']:.0f} MB (budget {DRIVER_BUDGET_MB_8K:.0f} MB: "
              f"{'held' if b['driver_mb'] <= DRIVER_BUDGET_MB_8K else 'NOT held'})")
    print("  the scheduler holds at most max_in_flight task descriptions plus the tiles in flight: bounded, "
          "not growing with the city")


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--segments", type=int, default=2000, help="engine comparison size (--engines)")
    ap.add_argument("--hours", type=int, default=14)
    ap.add_argument("--tile-size", type=float, default=400.0)
    ap.add_argument("--naive-sample", type=int, default=20)
    ap.add_argument("--skip-dask", action="store_true")
    ap.add_argument("--engines", action="store_true", help="the engine comparison against the naive baselines")
    ap.add_argument("--sizes", default="2000,8000", help="city-scale section: segment counts")
    ap.add_argument("--model", default=None, help="model bundle folder (default: one fitted on a synthetic campaign)")
    args = ap.parse_args(argv)
    if args.engines:
        engines_main(args)
    else:
        city_main(args)


if __name__ == "__main__":
    main()
