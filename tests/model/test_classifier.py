"""ComfortClassifier follows the scikit-learn estimator conventions and trains deterministically."""

from __future__ import annotations

import numpy as np
import pytest

from walkcomfort.errors import InputError, NotFittedError
from walkcomfort.model.classifier import ComfortClassifier, balanced_weights


def test_refuses_to_predict_before_fit(small_table):
    with pytest.raises(NotFittedError, match="not fitted"):
        ComfortClassifier().predict_proba(small_table.X)


def test_init_stores_fit_returns_self_and_proba_follow_classes(small_table):
    m = ComfortClassifier(preset="small", n_estimators=40)
    assert m.get_params()["n_estimators"] == 40 and not hasattr(m, "classes_")
    assert m.fit(small_table.X, small_table.y, groups=small_table.groups) is m
    assert list(m.classes_) == ["comfortable", "neutral", "uncomfortable"]
    assert list(m.feature_names_in_) == list(small_table.X.columns)
    p = m.predict_proba(small_table.X)
    assert p.shape == (len(small_table.y), 3)
    np.testing.assert_allclose(p.sum(axis=1), 1.0)
    pred = m.predict(small_table.X)
    assert np.array_equal(pred, m.classes_[p.argmax(axis=1)])
    assert m.n_groups_ == 8
    # in classes_ order: the "uncomfortable" column is highest where the vote was uncomfortable
    hot = small_table.y == "uncomfortable"
    assert p[hot, 2].mean() > p[~hot, 2].mean()


def test_two_fits_give_identical_predictions(small_table):
    a = ComfortClassifier(n_estimators=60).fit(small_table.X, small_table.y).predict_proba(small_table.X)
    b = ComfortClassifier(n_estimators=60).fit(small_table.X, small_table.y).predict_proba(small_table.X)
    assert np.array_equal(a, b)


def test_balanced_weights_match_scikit_learn():
    from sklearn.utils.class_weight import compute_sample_weight

    # reference: scikit-learn compute_sample_weight('balanced'): n / (k · n_class)
    codes = np.array([0, 0, 0, 1, 2, 2, 0, 1])
    np.testing.assert_allclose(balanced_weights(codes, 3), compute_sample_weight("balanced", codes))


def test_seven_point_target(small_campaign):
    from walkcomfort.model.evaluate import training_table

    t = training_table(small_campaign, target="tsv")
    m = ComfortClassifier(target="tsv", n_estimators=30).fit(t.X, t.y)
    assert list(m.classes_) == sorted(set(t.y))
    assert set(m.predict(t.X)) <= set(range(-3, 4))


def test_bad_inputs_name_the_problem(small_table):
    X, y = small_table.X, small_table.y.copy()
    y[5] = "sweaty"
    with pytest.raises(InputError, match=r"fit y row 5.*'sweaty'"):
        ComfortClassifier().fit(X, y)
    with pytest.raises(InputError, match="at least two"):
        ComfortClassifier().fit(X, np.full(len(X), "neutral"))
    with pytest.raises(InputError, match="preset 'huge'"):
        ComfortClassifier(preset="huge").fit(X, small_table.y)
    m = ComfortClassifier(n_estimators=5).fit(X, small_table.y)
    with pytest.raises(InputError, match="missing: utci_c"):
        m.predict_proba(X.drop(columns=["utci_c"]))
    with pytest.raises(InputError, match="not numeric"):
        m.predict_proba(X.assign(utci_c="warm"))
