"""Benchmark: history features for a 100k-row campaign, then grouped 5-fold CV of the comfort model.

Size (stated): a synthetic campaign (walkcomfort.model._synthetic) of 42 walks × 2 400 s
at 1 s = 100 800 timeline rows, every row labelled (100 800 votes), 63 features; grouped
5-fold CV by walker with the "medium" preset at --rounds boosting rounds (default 50), --threads
(default 2).

Naive baseline, run in the same process: bare ``lightgbm.train`` with the same
parameters, the same float64 arrays, the same sample weights and the same folds
(no feature pipeline, no label checks, no metrics), interleaved fold by fold with
ours so that load from other users of the machine falls on both alike. The ratio says how much our
feature pipeline and bookkeeping add on top of LightGBM itself (goal ≤ 1.3×).

Run:  python benchmarks/bench_model.py [--rounds 50] [--threads 2]
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
    args = ap.parse_args()

    import lightgbm as lgb

    from walkcomfort.model._synthetic import synthetic_campaign
    from walkcomfort.model.classifier import ComfortClassifier, balanced_weights
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
    params, rounds = ComfortClassifier(**model_kw).lgb_params(len(labels))
    folds = grouped_splits(table.groups, 5)

    def ours(tr, te):
        # what cross_validate does per fold: DataFrame -> validated matrix, labels, weights, fit, predict
        m = ComfortClassifier(**model_kw).fit(table.X.iloc[tr], table.y[tr], groups=table.groups[tr])
        proba = aligned_proba(m, table.X.iloc[te], labels)
        return proba, m.predict(table.X.iloc[te])

    def bare(tr, te):
        w = balanced_weights(codes_all[tr], len(labels))
        ds = lgb.Dataset(arr[tr], label=codes_all[tr], weight=w, params=params, free_raw_data=True)
        return lgb.train(params, ds, num_boost_round=rounds).predict(arr[te])

    # Interleaved fold by fold (alternating which goes first) so that load from other users of
    # the shared machine falls on both sides alike.
    t_ours = t_bare = 0.0
    proba = np.zeros((len(table.y), len(labels)))
    pred = np.empty(len(table.y), dtype=object)
    for k, (tr, te) in enumerate(folds):
        order = ("ours", "bare") if k % 2 == 0 else ("bare", "ours")
        for which in order:
            t0 = time.perf_counter()
            if which == "ours":
                proba[te], pred[te] = ours(tr, te)
                t_ours += time.perf_counter() - t0
            else:
                bare(tr, te)
                t_bare += time.perf_counter() - t0
        print(f"  fold {k + 1}/5: ours {t_ours:.1f} s, bare {t_bare:.1f} s (cumulative)", flush=True)
    t0 = time.perf_counter()
    metrics = classification_metrics(table.y, pred, proba, labels)
    t_ours += time.perf_counter() - t0
    print(f"ours: grouped 5-fold CV (ComfortClassifier fit/predict + metrics): {t_ours:.1f} s; "
          f"macro-F1 {metrics['macro_f1']:.3f}")
    print(f"bare lightgbm.train + predict, same params/arrays/weights/folds: {t_bare:.1f} s "
          f"({rounds} rounds, {params['num_threads']} threads)")
    print(f"ratio CV ours / bare: {t_ours / t_bare:.2f}x")
    print(f"ratio (features + table + CV) / bare: {(t_feat + t_table + t_ours) / t_bare:.2f}x  (goal <= 1.3x)")


if __name__ == "__main__":
    main()
