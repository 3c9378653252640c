"""The honesty checks: yardsticks that can be beaten only by real signal, coherent predictions, known truths recovered."""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from walkcomfort.model.baselines import OrdinalUTCIBaseline
from walkcomfort.model.classifier import MONOTONE_DECREASING, MONOTONE_INCREASING, ComfortClassifier
from walkcomfort.model.evaluate import TrainingTable, cross_validate, paired_gain

CLASSES = np.array(["comfortable", "neutral", "uncomfortable"], dtype=object)


def test_ordinal_baseline_recovers_the_thresholds_of_a_threshold_rule():
    # votes from a known rule: comfortable below 30 °C, uncomfortable above 36 °C, read with logistic noise
    rng = np.random.default_rng(3)
    u = rng.uniform(20.0, 46.0, 1500)
    noisy = u + rng.logistic(0.0, 1.0, u.size)
    y = CLASSES[np.digitize(noisy, [30.0, 36.0])]
    m = OrdinalUTCIBaseline().fit(pd.DataFrame({"utci_c": u}), y)
    # from the definition of the cumulative logit: the cut point is where P(above) = 1/2, i.e. the threshold
    np.testing.assert_allclose(m.cut_points_c_, [30.0, 36.0], atol=0.35)
    # the same fit as statsmodels' OrderedModel (reference implementation, logit link)
    from statsmodels.miscmodels.ordinal_model import OrderedModel

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ref = OrderedModel(np.digitize(noisy, [30.0, 36.0]), u[:, None], distr="logit").fit(method="bfgs", disp=False)
    beta, t0 = ref.params[0], ref.params[1]
    t1 = t0 + np.exp(ref.params[2])
    np.testing.assert_allclose(m.cut_points_c_, [t0 / beta, t1 / beta], rtol=1e-4)
    p = m.predict_proba(pd.DataFrame({"utci_c": [25.0, 33.0, 41.0, np.nan]}))
    assert list(CLASSES[p[:3].argmax(axis=1)]) == list(CLASSES)
    np.testing.assert_allclose(p[3], m.prior_)  # no UTCI: the training shares


def test_permuting_labels_within_walkers_drops_every_model_to_chance(small_table):
    rng = np.random.default_rng(1)
    y = small_table.y.copy()
    for g in np.unique(small_table.groups):
        rows = np.flatnonzero(small_table.groups == g)
        y[rows] = y[rng.permutation(rows)]
    table = TrainingTable(X=small_table.X, y=y, groups=small_table.groups,
                                                       walk_id=small_table.walk_id,
                                                       attributes=small_table.attributes)
    cv = cross_validate(table, n_splits=4, n_boot=0, progress=False)
    f1 = {k: m["macro_f1"] for k, m in cv.metrics.items()}
    # chance for 3 classes is about 1/3 macro-F1 (a learner that finds nothing and guesses one class
    # scores less): no model may do better than chance, and the boosted models land near it
    assert max(f1.values()) < 0.42, f1
    for k in ("history", "history_free", "current"):
        assert abs(f1[k] - 1 / 3) < 0.08, (k, f1[k])


def test_paired_gain_is_zero_for_a_model_against_itself_and_follows_a_clear_gain():
    rng = np.random.default_rng(0)
    y = CLASSES[rng.integers(0, 3, 600)]
    groups = np.repeat([f"P{i}" for i in range(12)], 50)
    same = paired_gain(y, y, y, groups, list(CLASSES), n_boot=300)
    assert same["delta"] == same["lo"] == same["hi"] == 0.0 and not same["excludes_0"]
    noisy = np.where(rng.random(600) < 0.5, y, CLASSES[rng.integers(0, 3, 600)])
    g = paired_gain(y, y, noisy, groups, list(CLASSES), n_boot=300)
    assert g["lo"] > 0 and g["excludes_0"] and g["lo"] <= g["delta"] <= g["hi"]


@pytest.fixture(scope="module")
def held_out(small_table):
    """The history model fitted on six walkers; the rows of the two it never saw."""
    groups = small_table.groups.astype(str)
    train = ~np.isin(groups, ["P07", "P08"])
    m = ComfortClassifier(n_estimators=80).fit(small_table.X[train], small_table.y[train])
    return m, small_table.X[~train].reset_index(drop=True)


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(row=st.integers(0, 10_000), lo=st.floats(15.0, 50.0), step=st.floats(0.0, 15.0),
       shade_lo=st.floats(0.0, 1.0), shade_step=st.floats(0.0, 1.0))
def test_more_heat_or_less_shade_never_makes_comfort_more_likely(held_out, row, lo, step, shade_lo, shade_step):
    model, X = held_out
    base = X.iloc[[row % len(X)]]
    hot, cool = base.copy(), base.copy()
    # UTCI sweep, everything else equal
    cool["utci_c"], hot["utci_c"] = lo, lo + step
    p_cool, p_hot = model.predict_proba(cool)[0], model.predict_proba(hot)[0]
    assert p_hot[0] <= p_cool[0] + 1e-12 and p_hot[2] >= p_cool[2] - 1e-12
    # shade sweep, everything else equal: more shade never lowers comfortable nor raises uncomfortable
    less, more = base.copy(), base.copy()
    less["shade_frac"], more["shade_frac"] = shade_lo, min(1.0, shade_lo + shade_step)
    p_less, p_more = model.predict_proba(less)[0], model.predict_proba(more)[0]
    assert p_more[0] >= p_less[0] - 1e-12 and p_more[2] <= p_less[2] + 1e-12
    # every heat-exposure input hotter at once (UTCI, Tmrt, heat dose, time in sun, ...) and less shade
    joint = base.copy()
    up = [c for c in MONOTONE_INCREASING if c in joint.columns]
    joint[up] = joint[up].to_numpy() + step
    joint[list(MONOTONE_DECREASING)] = np.clip(joint[list(MONOTONE_DECREASING)].to_numpy() - shade_step, 0, 1)
    p_joint = model.predict_proba(joint)[0]
    p_base = model.predict_proba(base)[0]
    assert p_joint[0] <= p_base[0] + 1e-12 and p_joint[2] >= p_base[2] - 1e-12


def test_cumulative_probabilities_never_cross(held_out):
    model, X = held_out
    up = model.cumulative_from_matrix(model._matrix(X))
    assert np.all(up[:, 0] >= up[:, 1])
    p = model.predict_proba(X)
    assert np.all(p >= 0) and np.allclose(p.sum(axis=1), 1.0)


def test_neutral_utci_and_acceptable_range_are_recovered_within_their_intervals():
    from walkcomfort.model.calibration import local_calibration

    # votes simulated with a known neutral point (24 °C) and a known 80 % acceptability edge (32 °C)
    rng = np.random.default_rng(5)
    n_walkers, per = 16, 40
    groups = np.repeat([f"W{i:02d}" for i in range(n_walkers)], per)
    u = rng.uniform(14.0, 42.0, groups.size)
    bias = np.repeat(rng.normal(0.0, 0.15, n_walkers), per)
    latent = (u - 24.0) / 4.0 + bias + rng.logistic(0.0, 0.4, u.size)
    tsv = np.clip(np.rint(latent), -3, 3)  # symmetric categories around 0: E[vote] = 0 at 24 °C
    p_ok = 1.0 / (1.0 + np.exp(-(np.log(0.8 / 0.2) - 0.5 * (u - 32.0))))
    comfort = np.where(rng.random(u.size) < p_ok, "comfortable", "uncomfortable")
    cal = local_calibration(u, tsv=tsv, comfort=comfort, groups=groups, n_boot=120, seed=1, progress=False)
    neu = cal["neutral"]
    assert neu["method"].startswith("cumulative logit") and abs(neu["neutral_utci_c"] - 24.0) < 0.8
    lo, hi = cal["ci"]["neutral_utci_c"]
    assert lo <= 24.0 <= hi
    lo, hi = cal["ci"]["upper_c"]
    assert lo <= 32.0 <= hi and abs(cal["range"]["upper_c"] - 32.0) < 1.5
