"""``walkcomfort fit`` and ``walkcomfort evaluate``: thin shells over :mod:`walkcomfort.model.workflow`."""

from __future__ import annotations

from pathlib import Path

import click

from walkcomfort.model.classifier import PRESETS, TARGETS
from walkcomfort.model.features import FEATURE_SETS


def _plural(n: int, word: str) -> str:
    return f"{n} {word}{'' if n == 1 else 's'}"


def _counts(table, files) -> str:
    return (f"{_plural(len(table.y), 'vote')} from {_plural(len(set(map(str, table.groups))), 'walker')} "
            f"in {_plural(len(files), 'timeline')}")


@click.command(help="Fit the comfort model on labelled timelines; validate it on walkers it never saw.\n\n"
                    "TIMELINES are timeline.parquet files, walk folders or output folders of "
                    "`walkcomfort thermal` (OUT/<walk_id>/timeline.parquet). Writes the bundle "
                    "(model.txt, manifest.json), metrics.json and report.html into the -o folder. "
                    "The model describes how walkers voted; it is not a heat-safety tool.")
@click.argument("timelines", nargs=-1, required=True, type=click.Path(exists=True, path_type=Path))
@click.option("-o", "--out", "out", required=True, type=click.Path(file_okay=False, path_type=Path),
              help="Bundle folder to write.")
@click.option("--preset", type=click.Choice(list(PRESETS)), default="small", show_default=True,
              help="Hyper-parameters: 'small' suits a few hundred votes.")
@click.option("--target", type=click.Choice(list(TARGETS)), default="comfort", show_default=True,
              help="3-class comfort vote or 7-point sensation vote.")
@click.option("--folds", type=int, default=None,
              help="Grouped K-fold by walker (default: leave one walker out).")
@click.option("--rounds", type=int, default=None, help="Boosting rounds (default: from the preset).")
@click.option("--seed", type=int, default=0, show_default=True)
@click.option("--threads", type=int, default=1, show_default=True, help="LightGBM threads (fixed for reproducibility).")
@click.option("--bootstrap", type=int, default=200, show_default=True,
              help="Walker resamples for the calibration intervals (0: none).")
@click.option("--feature-set", type=click.Choice(list(FEATURE_SETS)), default="all", show_default=True,
              help="'planned' leaves out sound, light and camera features, which planned routes cannot supply.")
@click.option("--index", type=click.Choice(["utci", "pet"]), default="utci", show_default=True,
              help="Thermal index the model's heat features use: UTCI, or PET of the reference person (computed "
                   "from the timelines' environment when they lack it). The baselines stay UTCI-based.")
def fit(timelines, out, preset, target, folds, rounds, seed, threads, bootstrap, feature_set, index="utci"):
    from walkcomfort.model.workflow import campaign_table, fit_table, format_metrics, write_fit_outputs

    if feature_set.endswith("-pet"):  # a PET feature set needs the timelines' PET
        index = "pet"
    table, files, _ = campaign_table(timelines, target=target, index=index)
    if index == "pet" and not feature_set.endswith("-pet"):
        feature_set = f"{feature_set}-pet"
    click.echo(_counts(table, files)
               + (f"; {len(table.quarantine)} votes set aside (see the report)" if len(table.quarantine) else ""))
    result = fit_table(table, preset=preset, n_splits=folds, n_estimators=rounds, seed=seed, n_jobs=threads,
                       n_boot=bootstrap, inputs=[str(f) for f in files], feature_set=feature_set)
    paths = write_fit_outputs(result, out)
    click.echo(f"cross-validated ({result.cv.scheme}):")
    click.echo(format_metrics(result.cv.metrics))
    from walkcomfort.model.report_page import gain_sentence

    for key, what in (("history-current", "history gain"), ("history-ordinal_utci", "difference to the UTCI-only "
                                                                                     "ordinal baseline"),
                      ("history-history_free", "difference monotone ordinal minus unconstrained multiclass (the price of coherence)")):
        if key in result.cv.gains:
            click.echo(gain_sentence(result.cv.gains[key], what))
    click.echo(f"bundle: {out}  report: {paths['report']}")
    click.echo("caution: the model describes how these walkers voted; it is not a heat-safety tool "
               "(follow local heat-health and occupational-health guidance).")


@click.command(help="Score a saved model bundle on labelled timelines.\n\n"
                    "Prints macro-F1, balanced accuracy, accuracy, log-loss and Brier. With "
                    "--cross-validate, re-runs the grouped validation with the bundle's own settings "
                    "(the numbers of its report when given the same timelines).")
@click.argument("bundle", type=click.Path(exists=True, file_okay=False, path_type=Path))
@click.argument("timelines", nargs=-1, required=True, type=click.Path(exists=True, path_type=Path))
@click.option("--cross-validate", "cross", is_flag=True,
              help="Re-run grouped cross-validation (model and baselines) with the bundle's settings.")
def evaluate(bundle, timelines, cross):
    from walkcomfort.model.bundle import load_bundle
    from walkcomfort.model.evaluate import cross_validate
    from walkcomfort.model.workflow import campaign_table, format_metrics, score_model

    model = load_bundle(bundle)
    manifest = model.manifest_
    table, files, _ = campaign_table(timelines, target=model.target)
    click.echo(_counts(table, files))
    same = table.digest == manifest.get("training_digest")
    if cross:
        s = (manifest.get("extra") or {}).get("settings", {})
        cv = cross_validate(table, n_splits=s.get("n_splits"), preset=s.get("preset", model.preset),
                            n_estimators=s.get("n_estimators"), random_state=s.get("seed", 0),
                            n_jobs=s.get("n_jobs", 1), features=list(model.feature_names_in_))
        click.echo(f"cross-validated ({cv.scheme}):")
        click.echo(format_metrics(cv.metrics))
        return
    metrics = score_model(model, table)
    label = "bundle model on these votes" + (" (its own training votes: in-sample)" if same else "")
    click.echo(format_metrics({"bundle": metrics}, {"bundle": label}))
    if same and manifest.get("cv"):
        click.echo(f"these are the training votes; the validated scores ({manifest['cv'].get('scheme')}) are:")
        click.echo(format_metrics(manifest["cv"]["metrics"]))
