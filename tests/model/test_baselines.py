"""Baselines: the UTCI-band rule at the band edges, and the estimator shape of all three."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from walkcomfort.columns import UTCI_BANDS
from walkcomfort.errors import NotFittedError
from walkcomfort.model.baselines import LogisticBaseline, MajorityBaseline, PhysicsRuleBaseline, physics_rule


def test_rule_follows_the_utci_band_edges():
    # band edges of the UTCI assessment scale (Bröde et al. 2012): upper bounds inclusive
    u = [-20.0, 0.0, 0.1, 9.0, 9.1, 26.0, 26.1, 32.0, 32.1, 50.0, np.nan]
    assert list(physics_rule(u)) == ["uncomfortable", "uncomfortable", "neutral", "neutral", "comfortable",
                                     "comfortable", "neutral", "neutral", "uncomfortable", "uncomfortable", None]
    assert list(physics_rule([-13.0, -12.9, 9.0, 26.0, 26.1, 38.0, 38.1], target="tsv")) == [-3, -2, -1, 0, 1, 2, 3]
    # the rule's comfortable class is exactly the band "no thermal stress"
    lo, hi, _ = next(b for b in UTCI_BANDS if b[2] == "no thermal stress")
    assert physics_rule([lo])[0] != "comfortable" and physics_rule([hi])[0] == "comfortable"


def test_rule_probabilities_are_smoothed_training_shares():
    X = pd.DataFrame({"utci_c": [20.0, 20.0, 20.0, 35.0, 35.0]})
    y = np.array(["comfortable", "neutral", "comfortable", "uncomfortable", "uncomfortable"], dtype=object)
    m = PhysicsRuleBaseline().fit(X, y)
    p = m.predict_proba(pd.DataFrame({"utci_c": [21.0, 36.0]}))
    # by hand, add-one smoothing: rule "comfortable" saw (2, 1, 0) -> (3, 2, 1) / 6
    np.testing.assert_allclose(p[0], [3 / 6, 2 / 6, 1 / 6])
    np.testing.assert_allclose(p[1], [1 / 5, 1 / 5, 3 / 5])
    assert list(m.predict(pd.DataFrame({"utci_c": [21.0, 36.0]}))) == ["comfortable", "uncomfortable"]


@pytest.mark.parametrize("cls", [MajorityBaseline, PhysicsRuleBaseline, LogisticBaseline])
def test_estimator_shape(cls, small_table):
    m = cls()
    with pytest.raises(NotFittedError):
        m.predict_proba(small_table.X)
    assert m.fit(small_table.X, small_table.y) is m
    p = m.predict_proba(small_table.X)
    assert p.shape == (len(small_table.y), len(m.classes_))
    np.testing.assert_allclose(p.sum(axis=1), 1.0)
    assert set(m.predict(small_table.X)) <= set(m.classes_)


def test_logistic_uses_current_conditions_only(small_table):
    m = LogisticBaseline().fit(small_table.X, small_table.y)
    shuffled = small_table.X.copy()
    history = [c for c in shuffled.columns if c.endswith("min") or c.endswith("_s")]
    shuffled[history] = shuffled[history].sample(frac=1.0, random_state=0).to_numpy()
    np.testing.assert_array_equal(m.predict_proba(shuffled), m.predict_proba(small_table.X))
