"""The fit workflow on the 7-point target, and the report's plain-language summary and caution."""

from __future__ import annotations

import json

import numpy as np
import pytest

from walkcomfort.model.evaluate import training_table
from walkcomfort.model.workflow import fit_table, format_metrics, write_fit_outputs


@pytest.mark.slow
def test_seven_point_target_fits_validates_and_reports(small_campaign, tmp_path):
    table = training_table(small_campaign, target="tsv")
    res = fit_table(table, n_splits=3, n_estimators=20, n_boot=0)
    assert set(res.cv.labels) <= set(range(-3, 4))
    assert np.isfinite(res.calibration["neutral"]["neutral_utci_c"])
    paths = write_fit_outputs(res, tmp_path / "b")
    html = paths["report"].read_text()
    assert "Caution" in html and "Neutral UTCI" in html
    manifest = json.loads((tmp_path / "b" / "manifest.json").read_text())
    assert manifest["target"] == "tsv" and manifest["classes"] == sorted(manifest["classes"])


def test_comfort_fit_reports_groups_and_summary(small_table, tmp_path):
    res = fit_table(small_table, n_splits=4, n_estimators=20, n_boot=0)
    assert set(res.per_group) == {"age_band", "acclimatised", "clo"}
    assert res.per_group["age_band"]["n"].sum() == len(small_table.y)
    text = format_metrics(res.cv.metrics)
    # one row per compared model (history, unconstrained, current, ordinal UTCI, logistic, fixed rule, majority)
    assert text.splitlines()[0].split()[:2] == ["model", "macro-F1"] and len(text.splitlines()) == 8
    html = write_fit_outputs(res, tmp_path / "b")["report"].read_text()
    assert "In plain words" in html and "never seen that walker" in html
    assert "<script" not in html


def test_planned_feature_set_leaves_out_sensor_only_features(small_table):
    from walkcomfort.model.features import FEATURE_SETS, SENSOR_ONLY_FEATURES

    res = fit_table(small_table, n_splits=3, n_estimators=10, n_boot=0, feature_set="planned")
    names = set(res.model.feature_names_in_)
    assert names == set(FEATURE_SETS["planned"]) and not names & set(SENSOR_ONLY_FEATURES)
    assert res.settings["feature_set"] == "planned"
