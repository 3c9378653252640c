"""Bundles round-trip exactly without pickle; contributions sum to raw scores; reasons read well."""

from __future__ import annotations

import json

import numpy as np
import pytest

from walkcomfort.errors import InputError
from walkcomfort.model.bundle import load_bundle, save_bundle
from walkcomfort.model.classifier import ComfortClassifier
from walkcomfort.model.explain import contributions, importance_table, top_reasons


@pytest.fixture(scope="module")
def fitted(small_table):
    return ComfortClassifier(n_estimators=60).fit(small_table.X, small_table.y, groups=small_table.groups)


def test_save_load_gives_identical_predictions(fitted, small_table, tmp_path):
    save_bundle(fitted, tmp_path / "b", training_digest=small_table.digest, cv_metrics={"macro_f1": 0.5})
    assert sorted(p.name for p in (tmp_path / "b").iterdir()) == ["manifest.json", "model.txt"]
    back = load_bundle(tmp_path / "b")
    assert np.array_equal(back.predict_proba(small_table.X), fitted.predict_proba(small_table.X))
    assert list(back.classes_) == list(fitted.classes_)
    m = json.loads((tmp_path / "b" / "manifest.json").read_text())
    assert m["training_digest"] == small_table.digest and m["versions"]["lightgbm"]
    # saving twice gives the same bytes (no wall-clock time in the bundle)
    save_bundle(fitted, tmp_path / "c", training_digest=small_table.digest, cv_metrics={"macro_f1": 0.5})
    for name in ("model.txt", "manifest.json"):
        assert (tmp_path / "b" / name).read_bytes() == (tmp_path / "c" / name).read_bytes()


def test_load_refuses_a_changed_model_file_or_other_lightgbm(fitted, tmp_path):
    save_bundle(fitted, tmp_path / "b")
    model = tmp_path / "b" / "model.txt"
    model.write_text(model.read_text().replace("learning_rate", "learning_rate", 1) + "\n")
    with pytest.raises(InputError, match="digest"):
        load_bundle(tmp_path / "b")
    save_bundle(fitted, tmp_path / "d")
    man = tmp_path / "d" / "manifest.json"
    m = json.loads(man.read_text())
    m["versions"]["lightgbm"] = "0.0.1"
    man.write_text(json.dumps(m))
    with pytest.raises(InputError, match="LightGBM 0.0.1"):
        load_bundle(tmp_path / "d")
    with pytest.raises(InputError, match="no manifest.json"):
        load_bundle(tmp_path / "nowhere")


def test_cumulative_contributions_sum_to_the_threshold_log_odds(fitted, small_table):
    X = small_table.X.iloc[:50]
    c = contributions(fitted, X)
    # one block per threshold of the ordered classes (comfortable | neutral | uncomfortable)
    assert c.shape == (50, 2, len(fitted.feature_names_in_) + 1)
    np.testing.assert_allclose(c.sum(axis=2), fitted.predict_raw(X), atol=1e-9)
    # the logistic function of the log-odds gives P(vote > k); their differences the class probabilities
    up = 1 / (1 + np.exp(-c.sum(axis=2)))
    p = fitted.predict_proba(X)
    np.testing.assert_allclose(p[:, 2], up[:, 1], atol=1e-9)
    np.testing.assert_allclose(p[:, 0], 1 - up[:, 0], atol=1e-9)


def test_contributions_sum_to_raw_scores_for_every_class(small_table):
    fitted = ComfortClassifier(n_estimators=60, formulation="multiclass").fit(small_table.X, small_table.y)
    X = small_table.X.iloc[:50]
    c = contributions(fitted, X)
    assert c.shape == (50, 3, len(fitted.feature_names_in_) + 1)
    np.testing.assert_allclose(c.sum(axis=2), fitted.predict_raw(X), atol=1e-9)
    # softmax of the raw scores gives the probabilities (LightGBM multiclass objective)
    raw = c.sum(axis=2)
    soft = np.exp(raw - raw.max(axis=1, keepdims=True))
    np.testing.assert_allclose(soft / soft.sum(axis=1, keepdims=True), fitted.predict_proba(X), atol=1e-9)


def test_top_reasons_are_words_about_the_point(fitted, small_table):
    reasons = top_reasons(fitted, small_table.X.iloc[:20], n=3)
    assert len(reasons) == 20 and all(1 <= len(r) <= 3 for r in reasons)
    flat = " ".join(" ".join(r) for r in reasons)
    assert "_" not in flat  # no raw feature names
    imp = importance_table(fitted)
    assert imp["share"].sum() == pytest.approx(1.0) and imp["gain"].is_monotonic_decreasing
    assert len(imp) == len(fitted.feature_names_in_)


def test_families_sum_the_features_and_name_one_or_two(fitted, small_table):
    from walkcomfort.model.explain import discomfort_push, family_contributions, main_factors
    from walkcomfort.model.features import FAMILIES

    X = small_table.X.iloc[:40]
    fam = family_contributions(fitted, X)
    assert list(fam.columns) == list(FAMILIES)
    # the families partition the features: their sums equal the sum over all features
    np.testing.assert_allclose(fam.sum(axis=1), discomfort_push(fitted, contributions(fitted, X)).sum(axis=1))
    words = main_factors(fitted, X)
    assert len(words) == 40
    for w in words:
        named = [f for f in FAMILIES if w.startswith(f) or f", then {f}" in w]
        assert 1 <= len(named) <= 2 or w == "no single factor stands out"


def test_reason_wording_for_units():
    from walkcomfort.model.explain import _describe

    assert _describe("sun_streak_min", 5.0) == "5.0 min in full sun before this point"
    assert _describe("sky_frac_1min", 0.25).endswith("25 %")
    assert _describe("log_illum", np.log10(10001.0)).endswith("10,000 lx")
    assert _describe("utci_c", 31.26) == "UTCI here 31.3 °C"
    assert _describe("heat_dose_10min", 42.4) == "heat dose 42 °C·min above UTCI 26 °C in the last 10 min"
