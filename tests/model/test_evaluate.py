"""Grouped validation and metrics: checked against scikit-learn's reference implementations."""

from __future__ import annotations

import numpy as np
import pytest
import sklearn.metrics as skm
from sklearn.calibration import calibration_curve

from walkcomfort.model.evaluate import (
    brier,
    classification_metrics,
    confusion,
    cross_validate,
    group_scores,
    grouped_splits,
    log_loss,
    reliability,
    training_table,
)

LABELS = ["comfortable", "neutral", "uncomfortable"]
c, n, u = LABELS
Y_TRUE = [c, c, c, c, n, n, n, u, u, u]
Y_PRED = [c, c, c, n, n, n, u, u, u, c]


def test_metrics_on_a_hand_checked_confusion_matrix():
    # by hand: rows true (c, n, u) = [3 1 0], [0 2 1], [1 0 2]
    cm = confusion(Y_TRUE, Y_PRED, LABELS)
    assert cm.tolist() == [[3, 1, 0], [0, 2, 1], [1, 0, 2]]
    m = classification_metrics(Y_TRUE, Y_PRED, np.eye(3)[[0, 0, 0, 1, 1, 1, 2, 2, 2, 0]] * 0.7 + 0.1, LABELS)
    # by hand: recall 3/4, 2/3, 2/3; precision 3/4, 2/3, 2/3 -> macro-F1 = balanced accuracy = 25/36
    assert m["recall"] == pytest.approx({c: 0.75, n: 2 / 3, u: 2 / 3})
    assert m["macro_f1"] == pytest.approx(25 / 36)
    assert m["balanced_accuracy"] == pytest.approx(25 / 36)
    assert m["accuracy"] == pytest.approx(0.7)
    # the same numbers from scikit-learn's reference implementations
    assert cm.tolist() == skm.confusion_matrix(Y_TRUE, Y_PRED, labels=LABELS).tolist()
    assert m["macro_f1"] == pytest.approx(skm.f1_score(Y_TRUE, Y_PRED, labels=LABELS, average="macro"))
    assert m["balanced_accuracy"] == pytest.approx(skm.balanced_accuracy_score(Y_TRUE, Y_PRED))
    np.testing.assert_allclose(list(m["recall"].values()),
                               skm.recall_score(Y_TRUE, Y_PRED, labels=LABELS, average=None))


def test_a_class_never_predicted_scores_like_scikit_learn_zero_division():
    yt, yp = [c, n, u, u], [c, c, u, u]
    # reference: scikit-learn f1_score with zero_division=0
    m = classification_metrics(yt, yp, np.full((4, 3), 1 / 3), LABELS)
    assert m["macro_f1"] == pytest.approx(skm.f1_score(yt, yp, labels=LABELS, average="macro", zero_division=0))


def test_log_loss_brier_and_reliability_match_scikit_learn():
    rng = np.random.default_rng(0)
    p = rng.dirichlet([1, 1, 1], size=200)
    y = np.array(LABELS, dtype=object)[rng.integers(0, 3, 200)]
    # reference: scikit-learn log_loss, brier_score_loss and calibration_curve
    assert log_loss(y, p, LABELS) == pytest.approx(skm.log_loss(y, p, labels=LABELS))
    assert brier(y, p, LABELS) == pytest.approx(skm.brier_score_loss(y, p, labels=LABELS, scale_by_half=False))
    rel = reliability(y, p, LABELS, n_bins=10)
    for j, lab in enumerate(LABELS):
        obs, pred = calibration_curve(y == lab, p[:, j], n_bins=10, strategy="uniform")
        np.testing.assert_allclose(rel[lab]["observed"], obs)
        np.testing.assert_allclose(rel[lab]["mean_predicted"], pred)


def test_no_walker_is_ever_in_train_and_test(small_table):
    g = small_table.groups
    logo = grouped_splits(g)
    assert len(logo) == len(set(g))
    for folds in (logo, grouped_splits(g, n_splits=3)):
        seen = np.zeros(len(g), dtype=int)
        for tr, te in folds:
            assert not set(g[tr]) & set(g[te])
            assert len(tr) + len(te) == len(g)
            seen[te] += 1
        assert (seen == 1).all()  # every row is tested exactly once


def test_cross_validation_scores_every_row_once_and_reports_groups(small_table):
    cv = cross_validate(small_table, n_splits=4, n_estimators=30)
    assert set(cv.metrics) == {"history", "history_free", "current", "ordinal_utci", "physics", "logistic",
                               "majority"}
    for k in cv.metrics:
        assert not np.isnan(cv.proba[k]).any()
        assert cv.metrics[k]["n"] == len(small_table.y)
    # grouped folds test every row exactly once (from the definition of cross-validation)
    assert sum(f["n_test"] for f in cv.folds) == len(small_table.y)
    per_walker = group_scores(cv.y, cv.pred["history"], cv.groups)
    assert per_walker["n"].sum() == len(cv.y) and len(per_walker) == 8


def test_unusable_votes_are_quarantined_not_dropped(small_campaign):
    tl = small_campaign.copy()
    rows = np.flatnonzero(tl["vote_comfort"].notna().to_numpy())
    tl.iloc[rows[3], tl.columns.get_loc("vote_comfort")] = "meh"
    t = training_table(tl)
    assert len(t.y) + len(t.quarantine) == len(rows)
    assert t.quarantine["row"].tolist() == [int(rows[3])] and "meh" in t.quarantine["raw"].tolist()
    assert t.quarantine["walk_id"].iloc[0] == tl["walk_id"].iloc[rows[3]]


@pytest.mark.slow
def test_history_model_beats_physics_rule_and_current_conditions_logistic():
    # a synthetic campaign whose votes depend on the last minutes (heat dose, relief after sun):
    # 10 walkers, ~1 600 votes, grouped 5-fold by walker
    from walkcomfort.model._synthetic import synthetic_campaign

    table = training_table(synthetic_campaign(n_participants=10, vote_every_s=30, seed=0))
    cv = cross_validate(table, n_splits=5)
    f1 = {k: m["macro_f1"] for k, m in cv.metrics.items()}
    print(f1)
    assert f1["history"] > f1["logistic"] > f1["majority"]
    assert f1["history"] > f1["physics"]
