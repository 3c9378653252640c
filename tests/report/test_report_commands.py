"""``walkcomfort map`` and ``walkcomfort report`` through the CLI entry point."""

from __future__ import annotations

import re

import _report_synth as S
import pandas as pd
import pytest

from walkcomfort import _io
from walkcomfort.cli import main


def _write_walk(folder, note=None, with_prediction=True):
    w = S.timeline(note=note, with_prediction=with_prediction)
    data = w.copy()
    data.attrs = {}
    session = dict(w.attrs["session"], walk_id=folder.name, participant="P01")
    _io.write_parquet(folder / "timeline.parquet", data, {"session": session})
    _io.write_json(folder / "qa.json", {"summary": {"rows_read": 5, "rows_used": 5, "rows_quarantined": 0,
                                                    "reconciles": True}})
    _io.write_csv(folder / "quarantine.csv", pd.DataFrame(columns=["source", "file", "row", "reason", "raw"]),
                  index=False)
    return folder


@pytest.fixture
def points(tmp_path):
    pred = S.predictions()
    path = _io.write_parquet(tmp_path / "routes" / "points.parquet", pred,
                             {"attrs": {"session": {"timezone": "Europe/Madrid"}}})
    return path


def test_map_command_writes_offline_html(tmp_path, points, capsys):
    walks = tmp_path / "ingest"
    _write_walk(walks / "tw-a")
    _write_walk(walks / "tw-b")
    scene = _io.write_json(tmp_path / "scene.geojson", S.scene())
    scheme = _io.write_json(tmp_path / "trees.geojson", S.scheme())
    out = tmp_path / "map.html"
    rc = main(["map", str(points.parent), "--walk", str(walks), "--scene", str(scene), "--scheme", str(scheme),
               "-o", str(out)])
    assert rc == 0
    assert f"wrote {out}" in capsys.readouterr().out
    page = out.read_text()
    assert "cdn.jsdelivr" not in page  # self-contained by default
    data = S.page_data(page)
    assert data["routes"]["deps"][0]["label"] == "09:00"  # zone from the table's metadata
    assert data["schemes"][1]["label"] == "More street trees"  # label from the scheme file
    assert [w["walk"] for w in data["walks"]] == ["tw-a", "tw-b"]
    # --online links Leaflet; the older --offline flag is still accepted
    assert main(["map", str(points.parent), "--online", "-o", str(out)]) == 0
    assert "cdn.jsdelivr" in out.read_text()
    assert main(["map", str(points.parent), "--offline", "-o", str(out)]) == 0
    assert main(["map", str(points.parent), "--offline", "--online", "-o", str(out)]) == 2


def test_map_command_size_warning_is_one_line(tmp_path, points, capsys):
    assert main(["map", str(points), "--budget-mb", "0.01", "-o", str(tmp_path / "m.html")]) == 0
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("warning: m.html is") and "budget" in err[0]


def test_map_command_errors_are_one_line(tmp_path, points, capsys):
    rc = main(["map", str(points), "--tiles", "https://t.example/{z}/{x}/{y}.png", "-o", str(tmp_path / "m.html")])
    assert rc == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith("error: --attribution:") and "Fix:" in err and "\n" not in err
    rc = main(["map", str(tmp_path / "nothing"), "-o", str(tmp_path / "m.html")])
    assert rc == 2 and "no prediction table" in capsys.readouterr().err
    rc = main(["map", "-o", str(tmp_path / "m.html")])
    assert rc == 2 and "nothing to map" in capsys.readouterr().err


@pytest.mark.slow
def test_report_command_for_walks(tmp_path, capsys):
    walks = tmp_path / "ingest"
    _write_walk(walks / "tw-a", note="<b>bold?</b>")
    _write_walk(walks / "tw-b")
    # a folder of walk folders: one report beside each timeline
    assert main(["report", str(walks)]) == 0
    assert capsys.readouterr().out.count("wrote ") == 2
    page = (walks / "tw-a" / "session_report.html").read_text()
    assert "&lt;b&gt;bold?&lt;/b&gt;" in page
    assert (walks / "tw-b" / "session_report.html").is_file()
    # one input can go to a named file, with a title
    assert main(["report", str(walks / "tw-b" / "timeline.parquet"), "-o", str(tmp_path / "one.html"),
                 "--title", "Morning walk"]) == 0
    assert "<title>Morning walk</title>" in (tmp_path / "one.html").read_text()
    assert main(["report", str(walks), "-o", str(tmp_path / "x.html")]) == 2
    assert "names one file" in capsys.readouterr().err


def test_report_command_for_a_model_bundle(tmp_path, capsys):
    bundle = tmp_path / "bundle"
    _io.write_json(bundle / "manifest.json", {"schema": "walkcomfort-model/1"})
    assert main(["report", str(bundle)]) == 2
    assert "re-run 'walkcomfort fit'" in capsys.readouterr().err
    _io.atomic_write_text(bundle / "report.html", "<!DOCTYPE html><title>model</title>")
    assert main(["report", str(bundle), "-o", str(tmp_path / "m.html")]) == 0
    assert (tmp_path / "m.html").read_text().startswith("<!DOCTYPE html><title>model</title>")


def test_map_command_predicts_walks_with_a_model(tmp_path, monkeypatch, capsys):
    """--model adds the model's classes to the recorded walks, so the error layer appears."""
    import walkcomfort.model.bundle as bundle
    import walkcomfort.model.predict as predict

    walks = tmp_path / "ingest"
    _write_walk(walks / "tw-a", with_prediction=False)
    model_dir = tmp_path / "bundle"
    _io.write_json(model_dir / "manifest.json", {"schema": "walkcomfort-model/1"})
    seen = {}

    def fake_predict(model, timeline, reasons=True, **kw):
        seen["model"], seen["reasons"] = model, reasons
        # a stand-in model that always answers "neutral"
        out = pd.DataFrame(index=timeline.index)
        out["p_comfortable"], out["p_neutral"], out["p_uncomfortable"] = 0.2, 0.6, 0.2
        out["comfort_class"], out["predictor"], out["reasons"] = "neutral", "model:sha256:0", ""
        return out

    monkeypatch.setattr(bundle, "load_bundle", lambda folder: f"model from {folder}")
    monkeypatch.setattr(predict, "predict_timeline", fake_predict)
    out = tmp_path / "m.html"
    assert main(["map", "--walk", str(walks), "-o", str(out)]) == 0
    assert S.page_data(out.read_text())["errors"] is None  # no prediction, no error layer
    assert main(["map", "--walk", str(walks), "--model", str(model_dir), "-o", str(out)]) == 0
    assert seen == {"model": f"model from {model_dir}", "reasons": False}
    data = S.page_data(out.read_text())
    assert data["errors"]["cell_m"] == 50.0
    assert data["cfg"]["errors_title"] == "Where the model errs (in-sample)"
    assert main(["map", "--walk", str(walks), "--model", str(tmp_path), "-o", str(out)]) == 2
    assert "not a model bundle" in capsys.readouterr().err


def _oof_bundle(folder, walk_id, timeline, predicted="comfortable"):
    """A bundle folder holding out-of-fold predictions of the votes of one walk (manifest digest set)."""
    import numpy as np

    from walkcomfort import columns as C
    from walkcomfort.model.bundle import SCHEMA
    from walkcomfort.model.workflow import OOF_FILE

    votes = timeline[timeline[C.VOTE_COMFORT].notna()]
    n = len(votes)
    oof = pd.DataFrame({C.WALK_ID: pd.array([walk_id] * n, dtype="string"),
                        C.PARTICIPANT: pd.array(["P01"] * n, dtype="string"),
                        C.LAT: votes[C.LAT].to_numpy(), C.LON: votes[C.LON].to_numpy(),
                        "vote": pd.array(votes[C.VOTE_COMFORT].astype(str), dtype="string"),
                        "predicted": pd.array([predicted] * n, dtype="string"),
                        "p_comfortable": 0.7, "p_neutral": 0.2, "p_uncomfortable": 0.1,
                        "fold": np.zeros(n, dtype="int64")}, index=votes.index)
    path = _io.write_parquet(folder / OOF_FILE, oof)
    _io.write_json(folder / "manifest.json", {"schema": SCHEMA, "extra": {"oof_predictions": {
        "file": OOF_FILE, "digest": _io.file_digest(path), "rows": n}}})
    return folder


def test_map_command_uses_the_held_out_predictions_of_the_bundle(tmp_path, monkeypatch):
    """A walk that trained the model gets the fit's out-of-fold classes, and the layer says held-out."""
    import walkcomfort.model.bundle as bundle

    walks = tmp_path / "ingest"
    _write_walk(walks / "tw-a", with_prediction=False)
    model_dir = _oof_bundle(tmp_path / "bundle", "tw-a", S.timeline(with_prediction=False))

    def no_bundle(folder):
        raise AssertionError("the held-out predictions need no refitted model")

    monkeypatch.setattr(bundle, "load_bundle", no_bundle)
    out = tmp_path / "m.html"
    assert main(["map", "--walk", str(walks), "--model", str(model_dir), "-o", str(out)]) == 0
    page = out.read_text()
    data = S.page_data(page)
    assert data["cfg"]["errors_title"] == "Where the model errs on held-out walkers"
    assert "never saw that walker" in data["cfg"]["errors_note"]
    # 5 votes, all predicted "comfortable": 4 disagree (one vote is comfortable)
    cells = re.findall(r'"n":(\d+),"w":(\d+)', page)
    assert sum(int(n) for n, _ in cells) == 5 and sum(int(w) for _, w in cells) == 4


def test_map_command_falls_back_to_in_sample_for_a_walker_who_trained_it(tmp_path, monkeypatch):
    """A walk missing from the out-of-fold file, by a walker who trained the model: in-sample, with its caveat."""
    import walkcomfort.model.bundle as bundle
    import walkcomfort.model.predict as predict

    walks = tmp_path / "ingest"
    _write_walk(walks / "tw-b", with_prediction=False)  # participant P01, as in the bundle's folds
    model_dir = _oof_bundle(tmp_path / "bundle", "tw-a", S.timeline(with_prediction=False))

    def fake_predict(model, timeline, reasons=True, **kw):
        out = pd.DataFrame(index=timeline.index)
        out["comfort_class"] = "neutral"
        return out

    monkeypatch.setattr(bundle, "load_bundle", lambda folder: "model")
    monkeypatch.setattr(predict, "predict_timeline", fake_predict)
    out = tmp_path / "m.html"
    assert main(["map", "--walk", str(walks), "--model", str(model_dir), "-o", str(out)]) == 0
    data = S.page_data(out.read_text())
    assert data["cfg"]["errors_title"].endswith("(in-sample)") and "in-sample errors" in data["cfg"]["errors_note"]
