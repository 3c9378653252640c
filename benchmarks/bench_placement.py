"""Benchmark: the placement advisor on 500 candidates × a 1 km route at 5 m × 12 departures.

Size: a straight 1 km street at 40.4° N with buildings on both sides (one block every
25 m, 6–20 m high), 500 candidate tree sites on the street's two verges, 12 departures
(08:00–19:00 local, 15 July), stated weather, physics objective (heat dose), budget 20
trees.

Prints: the time to simulate the walks, to trace every candidate alone (the shade
caster, once per candidate), and the greedy selection (with its number of objective
evaluations); then the baseline that the advisor replaces — one full comparison
(``compare_schemes``: the whole chain for the edited scene) per candidate — timed on a
sample of candidates and scaled to all 500, and the ratio. CPU time is the steadier
number on a shared machine.

Goal: the advisor under 60 s on 2 cores.

Last measured (2026-12-03, shared machine, load 6–11): advisor 29.3 s wall / 22.1 s CPU
(575 objective evaluations; each pick evaluated through the whole chain with the items
built), the per-candidate comparison 838 s wall / 748 s CPU scaled from 4 candidates:
28.6× wall, 33.9× CPU.

    python benchmarks/bench_placement.py             # full size
    python benchmarks/bench_placement.py --quick     # 100 candidates, 4 departures
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
from pathlib import Path

import pandas as pd

os.environ.setdefault("WALKCOMFORT_NO_PROGRESS", "1")
sys.path.insert(0, str(Path(__file__).resolve().parent))

from bench_routes import build_inputs  # noqa: E402  (the shared benchmark street, after the path is set)


def timed(fn, *a, **kw):
    w, c = time.perf_counter(), time.process_time()
    out = fn(*a, **kw)
    return out, time.perf_counter() - w, time.process_time() - c


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--baseline-sample", type=int, default=4, help="candidates timed for the per-candidate baseline")
    args = ap.parse_args()
    n_sites, n_dep = (100, 4) if args.quick else (500, 12)

    from walkcomfort.routes.placement.advisor import advise
    from walkcomfort.routes.placement.catalogue import DEFAULT_CATALOGUE
    from walkcomfort.routes.placement.outputs import scheme_geojson
    from walkcomfort.routes.placement.sites import sites_along_routes
    from walkcomfort.routes.schemes import scheme_from_geojson
    from walkcomfort.routes.simulate import simulate_walk
    from walkcomfort.routes.weather import open_weather, parse_conditions

    with tempfile.TemporaryDirectory() as tmp:
        scene, route, _schemes = build_inputs(1000.0, Path(tmp))
    weather = open_weather(None, parse_conditions("t_air_c=34,rh_pct=30,wind_ms=1.5"))
    deps = pd.date_range("2026-07-15 08:00", "2026-07-15 19:00", periods=n_dep, tz="Europe/Madrid").tz_convert("UTC")
    walk, w_s, w_c = timed(simulate_walk, route, deps, weather, scene=scene, timezone="Europe/Madrid")
    spacing = 2 * route.length_m / n_sites
    sites = sites_along_routes([route], scene, offset_m=4.0, spacing_m=spacing)
    cat = {"tree-medium": DEFAULT_CATALOGUE["tree-medium"]}
    adv, a_s, a_c = timed(advise, [walk], scene, sites, cat, max_count=20, min_facade_m=0.5, min_tree_m=2.0)
    print(f"walk points × departures: {len(walk):,}; candidate sites: {len(sites)} "
          f"({len(adv.sites)} after screening)")
    print(f"simulate walks:         {w_s:7.2f} s wall  {w_c:7.2f} s CPU")
    print(f"advisor (trace+select): {a_s:7.2f} s wall  {a_c:7.2f} s CPU   "
          f"({adv.selection.evaluations} objective evaluations, gain {adv.selection.total:.1f} {adv.unit})")

    # baseline: one full comparison per candidate (sampled, scaled to every candidate)
    from walkcomfort.routes.compare import compare_schemes
    from walkcomfort.routes.placement.select import Selection

    sample = [o for o in adv.options if o.rows.size][: args.baseline_sample]
    b_s = b_c = 0.0
    for o in sample:
        one = type(adv)(adv.objective, adv.unit, Selection(chosen=[o], gains=[0.0]), [], adv.sites, adv.excluded,
                        0.0, adv.departures, adv.routes, 1, None, adv.threshold_c)
        scheme = scheme_from_geojson(scheme_geojson(one, scene, "one"))
        _, s, c = timed(compare_schemes, route, [scheme], deps, weather, scene=scene, timezone="Europe/Madrid",
                        explain=False)
        b_s += s
        b_c += c
    n_opt = len(adv.options)
    scale = n_opt / max(len(sample), 1)
    print(f"baseline, one full comparison per candidate: {b_s * scale:8.1f} s wall  {b_c * scale:8.1f} s CPU "
          f"(timed on {len(sample)}, scaled to {n_opt})")
    print(f"ratio baseline / advisor: {b_s * scale / a_s:6.1f}× wall, {b_c * scale / a_c:6.1f}× CPU "
          "(the baseline ranks candidates one by one and still has no selection)")
    print(f"goal: advisor under 60 s -> {'met' if a_s + w_s < 60 else 'NOT met'} ({a_s + w_s:.1f} s incl. walks)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
