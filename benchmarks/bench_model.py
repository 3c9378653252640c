"""Benchmark: history features for a 100k-row campaign, grouped 5-fold CV of the comfort model, and
the cost of the intervals on scheme differences.

Part 1, size (stated): a synthetic campaign (walkcomfort.model._synthetic) of 42 walks × 2 400 s
at 1 s = 100 800 timeline rows, every row labelled (100 800 votes), 63 features; grouped
5-fold CV by walker with the "medium" preset at --rounds boosting rounds (default 50), --threads
(default 2). Ours is the shipped model: the cumulative (ordinal) formulation with monotone
constraints, whose two threshold models are one booster trained on the rows repeated once per
threshold (2 × 100 800 rows per round: both cumulative models are counted).

Naive baseline, run in the same process: bare ``lightgbm.train`` multiclass with the same
parameters, the same float64 arrays and the same folds (no feature pipeline, no label checks,
no constraints, no metrics), interleaved fold by fold with ours so that load from other users of
the machine falls on both alike. Goal: (features + table + CV) / bare ≤ 1.5×.

Part 2 (skip with --no-compare): a 1 km route at 5 m × 24 departures × 3 schemes (+ base), with a
bundle carrying 8 fold models, compared with and without the intervals (``compare_schemes(...,
intervals=True|False)``, reasons on as in ``walkcomfort compare``), interleaved. Goal: ratio < 2×.

Run:  python benchmarks/bench_model.py [--rounds 50] [--threads 2] [--no-compare]
"""

from __future__ import annotations

import argparse
import os
import time

import numpy as np

os.environ.setdefault("WALKCOMFORT_NO_PROGRESS", "1")
# OpenMP threads that spin while waiting make timings on a shared, oversubscribed machine
# meaningless; passive waiting is fair to both sides of the comparison.
os.environ.setdefault("OMP_WAIT_POLICY", "PASSIVE")


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--rounds", type=int, default=50)
    ap.add_argument("--threads", type=int, default=2)
    ap.add_argument("--walks", type=int, default=42)
    ap.add_argument("--no-compare", action="store_true", help="skip part 2 (intervals in compare)")
    args = ap.parse_args()
    cv_part(args)
    if not args.no_compare:
        compare_part()


def cv_part(args) -> None:
    import lightgbm as lgb

    from walkcomfort.model._synthetic import synthetic_campaign
    from walkcomfort.model.classifier import ComfortClassifier
    from walkcomfort.model.evaluate import aligned_proba, classification_metrics, grouped_splits, training_table
    from walkcomfort.model.features import FEATURES, build_features

    t0 = time.perf_counter()
    camp = synthetic_campaign(n_participants=args.walks // 2, walks_per_participant=2, duration_s=2400,
                              vote_every_s=1, seed=7)
    t_gen = time.perf_counter() - t0
    print(f"campaign: {len(camp):,} timeline rows, {camp['walk_id'].nunique()} walks, "
          f"{camp['participant'].nunique()} walkers (generated in {t_gen:.1f} s, not timed below)")

    t0 = time.perf_counter()
    X = build_features(camp)
    t_feat = time.perf_counter() - t0
    print(f"build_features: {t_feat:.2f} s for {len(X):,} rows x {X.shape[1]} features "
          f"({len(X) / t_feat / 1e3:.0f}k rows/s)")

    t0 = time.perf_counter()
    table = training_table(camp, features=X)
    t_table = time.perf_counter() - t0
    print(f"training_table: {t_table:.2f} s for {len(table.y):,} labelled rows")

    model_kw = dict(preset="medium", n_estimators=args.rounds, features=list(FEATURES), random_state=0,
                    n_jobs=args.threads)
    labels = [c for c in ("comfortable", "neutral", "uncomfortable") if c in set(table.y)]
    arr = table.X[list(FEATURES)].to_numpy(dtype="float64")
    codes_all = np.array([labels.index(v) for v in table.y])
    params, rounds = ComfortClassifier(formulation="multiclass", **model_kw).lgb_params(len(labels))
    folds = grouped_splits(table.groups, 5)

    def ours(tr, te):
        # what cross_validate does per fold: DataFrame -> validated matrix, labels, weights, fit, predict
        m = ComfortClassifier(**model_kw).fit(table.X.iloc[tr], table.y[tr], groups=table.groups[tr])
        proba = aligned_proba(m, table.X.iloc[te], labels)
        return proba, m.predict(table.X.iloc[te])

    def bare(tr, te):
        ds = lgb.Dataset(arr[tr], label=codes_all[tr], params=params, free_raw_data=True)
        return lgb.train(params, ds, num_boost_round=rounds).predict(arr[te])

    # Interleaved fold by fold (alternating which goes first) so that load from other users of
    # the shared machine falls on both sides alike.
    t_ours = t_bare = 0.0
    proba = np.zeros((len(table.y), len(labels)))
    bare_pred = np.empty(len(table.y), dtype=object)
    pred = np.empty(len(table.y), dtype=object)
    for k, (tr, te) in enumerate(folds):
        order = ("ours", "bare") if k % 2 == 0 else ("bare", "ours")
        for which in order:
            t0 = time.perf_counter()
            if which == "ours":
                proba[te], pred[te] = ours(tr, te)
                t_ours += time.perf_counter() - t0
            else:
                bare_pred[te] = np.array(labels, dtype=object)[np.argmax(bare(tr, te), axis=1)]
                t_bare += time.perf_counter() - t0
        print(f"  fold {k + 1}/5: ours {t_ours:.1f} s, bare {t_bare:.1f} s (cumulative)", flush=True)
    t0 = time.perf_counter()
    metrics = classification_metrics(table.y, pred, proba, labels)
    t_ours += time.perf_counter() - t0
    bare_f1 = classification_metrics(table.y, bare_pred, np.full((len(table.y), len(labels)), 1 / 3), labels)
    print(f"ours: grouped 5-fold CV (cumulative monotone ComfortClassifier fit/predict + metrics): {t_ours:.1f} s; "
          f"macro-F1 {metrics['macro_f1']:.3f}")
    print(f"bare lightgbm.train multiclass + predict, same params/arrays/folds: {t_bare:.1f} s "
          f"({rounds} rounds, {params['num_threads']} threads); macro-F1 {bare_f1['macro_f1']:.3f}")
    print(f"ratio CV ours / bare: {t_ours / t_bare:.2f}x")
    print(f"ratio (features + table + CV) / bare: {(t_feat + t_table + t_ours) / t_bare:.2f}x  (goal <= 1.5x)")


def compare_part(n_dep: int = 24, length_m: float = 1000.0, reps: int = 3) -> None:
    """compare_schemes with and without the fold-model intervals on the same inputs."""
    import sys
    import tempfile
    from pathlib import Path

    import pandas as pd

    sys.path.insert(0, str(Path(__file__).resolve().parent))
    import bench_routes as br  # the route benchmark's invented street, scene and schemes

    from walkcomfort.model._synthetic import synthetic_campaign
    from walkcomfort.model.evaluate import training_table
    from walkcomfort.model.workflow import fit_table, write_fit_outputs
    from walkcomfort.routes.compare import compare_schemes
    from walkcomfort.routes.predict import Predictor
    from walkcomfort.routes.schemes import scheme_from_geojson
    from walkcomfort.routes.weather import StatedConditions

    weather = StatedConditions(t_air_c=32.0, rh_pct=35.0, wind_ms=1.5, wind_height_m=10.0)
    with tempfile.TemporaryDirectory() as tmp:
        table = training_table(synthetic_campaign(n_participants=8, walks_per_participant=1, duration_s=1200))
        write_fit_outputs(fit_table(table, n_boot=0, feature_set="planned"), Path(tmp) / "bundle")
        predictor = Predictor.from_bundle(Path(tmp) / "bundle")
        scene, route, schemes = br.build_inputs(length_m, Path(tmp))
        dlat = 1.0 / 111_000.0
        sparse = scheme_from_geojson({"type": "FeatureCollection", "walkcomfort": {"scheme": "tree-row-sparse"},
                                      "features": [{"type": "Feature", "geometry": {"type": "Point", "coordinates": [
                                          br._lon_at(d), br.LAT + 3 * dlat]}, "properties": {
                                          "edit": "add", "kind": "tree", "height_m": 7.0, "crown_base_m": 2.5,
                                          "crown_radius_m": 3.0, "transmissivity": 0.15}}
                                          for d in np.arange(4.0, length_m, 16.0)]})
        schemes = [*schemes, sparse]
        deps = pd.date_range("2026-07-15T05:00Z", periods=n_dep, freq="30min")
        compare_schemes(route, schemes[:1], deps[:1], weather, scene=scene, predictor=predictor)  # warm-up
        times = {True: [], False: []}
        cpu = {True: [], False: []}
        for k in range(reps):
            for flag in ((True, False) if k % 2 == 0 else (False, True)):
                t0, c0 = time.perf_counter(), time.process_time()
                res = compare_schemes(route, schemes, deps, weather, scene=scene, predictor=predictor,
                                      intervals=flag)
                times[flag].append(time.perf_counter() - t0)
                cpu[flag].append(time.process_time() - c0)
        n_pts = len(res.points)
        print(f"compare: {len(schemes)} schemes + base x {n_dep} departures, {n_pts:,} points, "
              f"{predictor.n_folds} fold models")
        for flag in (False, True):
            print(f"  intervals={flag}: wall median {np.median(times[flag]):.2f} s, CPU median "
                  f"{np.median(cpu[flag]):.2f} s")
        print(f"ratio with / without intervals: wall {np.median(times[True]) / np.median(times[False]):.2f}x, "
              f"CPU {np.median(cpu[True]) / np.median(cpu[False]):.2f}x  (goal < 2x)")
        cmp_ = res.comparison
        print(f"within_model_error: {int(cmp_['within_model_error'].sum())} of {len(cmp_)} scheme x departure rows")


if __name__ == "__main__":
    main()
