"""`walkcomfort fit` writes a bundle and report; `walkcomfort evaluate` reproduces their numbers."""

from __future__ import annotations

import json

import pandas as pd
import pytest

from walkcomfort import _io
from walkcomfort.cli import main
from walkcomfort.model._synthetic import synthetic_campaign


@pytest.fixture(scope="module")
def timeline_dir(tmp_path_factory):
    """Synthetic walks written the way `walkcomfort ingest`/`thermal` write them: OUT/<walk_id>/timeline.parquet."""
    out = tmp_path_factory.mktemp("thermal")
    camp = synthetic_campaign(n_participants=5, walks_per_participant=2, duration_s=1200, vote_every_s=60, seed=3)
    for wid, df in camp.groupby("walk_id", sort=True):
        att = {"walk_id": wid, "participant": df["participant"].iloc[0], "timezone": "UTC",
               "clo": float(df["clo"].iloc[0]), "acclimatised": bool(df["acclimatised"].iloc[0]),
               "age_band": df["age_band"].iloc[0]}
        data = df.drop(columns=["clo", "acclimatised", "age_band"])
        _io.write_parquet(out / wid / "timeline.parquet", data, {"session": att, "provenance": {}})
    return out


@pytest.mark.slow
def test_fit_then_evaluate_give_the_same_numbers(timeline_dir, tmp_path, capsys):
    bundle = tmp_path / "bundle"
    assert main(["fit", str(timeline_dir), "-o", str(bundle), "--folds", "3", "--rounds", "30",
                 "--bootstrap", "20"]) == 0
    fit_out = capsys.readouterr().out
    # the bundle's files (DEVELOPERS.md contract); out-of-fold predictions since e9ce00e
    # and the fold models (folds/), the replicates behind the intervals on scheme differences
    assert {p.name for p in bundle.iterdir()} == {"model.txt", "manifest.json", "metrics.json", "report.html",
                                                  "oof_predictions.parquet", "folds"}
    assert len(list((bundle / "folds").glob("fold_*.txt"))) == 3
    # the fit prints the history gain with its interval, worded by the interval
    assert "history gain is" in fit_out and "interval over" in fit_out
    report = (bundle / "report.html").read_text()
    assert "not a heat-safety tool" in report and report.count("data:image/png;base64,") >= 6
    metrics = json.loads((bundle / "metrics.json").read_text())
    hist = metrics["cv"]["metrics"]["history"]["macro_f1"]
    assert f"{hist:.3f}" in fit_out and f"{hist:.3f}" in report

    # the bundle on its own training votes: the report's in-sample table
    assert main(["evaluate", str(bundle), str(timeline_dir)]) == 0
    ev = capsys.readouterr().out
    assert "in-sample" in ev and f"{metrics['in_sample']['macro_f1']:.3f}" in ev
    assert f"{metrics['in_sample']['macro_f1']:.3f}" in report

    # re-running the grouped validation from the bundle's settings prints the fit's table line for line
    assert main(["evaluate", str(bundle), str(timeline_dir), "--cross-validate"]) == 0
    cv_out = capsys.readouterr().out
    def table(text):
        return [ln for ln in text.splitlines() if ln.startswith(("history", "current", "UTCI", "fixed",
                                                                               "logistic", "majority", "model "))]
    assert table(cv_out) == table(fit_out) and len(table(fit_out)) == 8


def test_fit_without_thermal_columns_is_a_one_line_error(tmp_path, capsys):
    camp = synthetic_campaign(n_participants=2, walks_per_participant=1, duration_s=300, seed=1)
    df = camp[camp["walk_id"] == "P01-w1"].drop(columns=["utci_c"])
    _io.write_parquet(tmp_path / "t" / "P01-w1" / "timeline.parquet", df,
                      {"session": {"walk_id": "P01-w1", "participant": "P01"}})
    assert main(["fit", str(tmp_path / "t"), "-o", str(tmp_path / "b")]) == 2
    err = capsys.readouterr().err
    assert "utci_c" in err and "walkcomfort thermal" in err and len(err.strip().splitlines()) == 1


def test_fit_refuses_a_single_walker_or_no_votes(tmp_path, capsys):
    camp = synthetic_campaign(n_participants=1, walks_per_participant=2, duration_s=600, vote_every_s=60, seed=2)
    for wid, df in camp.groupby("walk_id"):
        _io.write_parquet(tmp_path / "one" / wid / "timeline.parquet", df,
                          {"session": {"walk_id": wid, "participant": "P01"}})
    assert main(["fit", str(tmp_path / "one"), "-o", str(tmp_path / "b")]) == 2
    assert "at least 2 walkers" in capsys.readouterr().err
    silent = camp[camp["walk_id"] == "P01-w1"].assign(vote_comfort=pd.NA)
    _io.write_parquet(tmp_path / "none" / "P01-w1" / "timeline.parquet", silent,
                      {"session": {"walk_id": "P01-w1", "participant": "P01"}})
    assert main(["fit", str(tmp_path / "none"), "-o", str(tmp_path / "c")]) == 2
    assert "no usable votes" in capsys.readouterr().err
    assert not (tmp_path / "b").exists() and not (tmp_path / "c").exists()


@pytest.mark.slow
def test_evaluate_on_walkers_the_bundle_never_saw(timeline_dir, tmp_path, capsys):
    train = tmp_path / "train"
    for p in sorted(timeline_dir.iterdir()):
        if not p.name.startswith("P05"):
            (train / p.name).mkdir(parents=True)
            (train / p.name / "timeline.parquet").write_bytes((p / "timeline.parquet").read_bytes())
    assert main(["fit", str(train), "-o", str(tmp_path / "b"), "--folds", "2", "--rounds", "20",
                 "--bootstrap", "0"]) == 0
    capsys.readouterr()
    held_out = [str(p) for p in sorted(timeline_dir.iterdir()) if p.name.startswith("P05")]
    assert main(["evaluate", str(tmp_path / "b"), *held_out]) == 0
    out = capsys.readouterr().out
    assert "from 1 walker in" in out and "in-sample" not in out and "bundle model on these votes" in out
