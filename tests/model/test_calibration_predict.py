"""Local calibration recovers a planted neutral UTCI and range; predict_timeline fills the contract."""

from __future__ import annotations

import numpy as np
import pytest

from walkcomfort.model.calibration import acceptable_range, bin_votes, local_calibration, neutral_utci


def _votes(seed=0, n_walkers=12, per=60):
    rng = np.random.default_rng(seed)
    u = rng.uniform(14, 40, n_walkers * per)
    g = np.repeat([f"P{i}" for i in range(n_walkers)], per)
    # planted: MTSV = (UTCI − 24) / 5, i.e. neutral UTCI 24 °C, plus walker offsets and vote noise
    offset = np.repeat(rng.normal(0, 0.15, n_walkers), per)
    tsv = np.clip(np.round((u - 24) / 5 + offset + rng.normal(0, 0.5, len(u))), -3, 3)
    # planted acceptability: logistic in UTCI, 80 % at 18 °C and 30 °C (symmetric about 24)
    logit = np.log(4) - 0.08 * ((u - 24) ** 2 - 36)
    acc = rng.random(len(u)) < 1 / (1 + np.exp(-logit))
    comfort = np.where(acc, "comfortable", "uncomfortable")
    return u, tsv, comfort, g


def test_weighted_line_matches_numpy_polyfit():
    u, tsv, comfort, g = _votes()
    bins = bin_votes(u, tsv, comfort, bin_width=2.0)
    fit = neutral_utci(bins, min_votes=5)
    b = bins[bins["n"] >= 5]
    # numpy's weighted least squares (weights enter squared: w = sqrt(n))
    slope, intercept = np.polyfit(b["utci_mid"], b["mean_tsv"], 1, w=np.sqrt(b["n"]))
    assert fit["slope_per_c"] == pytest.approx(slope) and fit["intercept"] == pytest.approx(intercept)
    assert bins["n"].sum() == len(u)


def test_planted_neutral_utci_and_range_are_recovered_with_walker_intervals():
    u, tsv, comfort, g = _votes()
    res = local_calibration(u, tsv, comfort, groups=g, n_boot=60, seed=1)
    # rounding to the 7-point scale biases the line little near the middle; 1.5 °C is generous
    # 24 °C neutral and the 18..30 °C acceptable range are planted in _votes() (invented test data)
    assert res["neutral"]["neutral_utci_c"] == pytest.approx(24.0, abs=1.5)
    lo, hi = res["ci"]["neutral_utci_c"]
    assert lo <= res["neutral"]["neutral_utci_c"] <= hi
    assert res["range"]["lower_c"] == pytest.approx(18.0, abs=2.0)
    assert res["range"]["upper_c"] == pytest.approx(30.0, abs=2.0)
    assert not res["range"]["lower_open"] and not res["range"]["upper_open"]
    # 9..26 °C is the UTCI 'no thermal stress' band (Bröde et al. 2012, doi:10.1007/s00484-011-0454-1)
    assert res["reference_band_c"] == [9.0, 26.0] and res["n_walkers"] == 12


def test_a_range_beyond_the_data_is_marked_open():
    rng = np.random.default_rng(2)
    u = rng.uniform(28, 42, 400)  # hot days only: acceptability only falls
    acc = rng.random(400) < 1 / (1 + np.exp(-(0.6 * (34 - u) + np.log(4))))
    r = acceptable_range(u, np.where(acc, "neutral", "uncomfortable"))
    # the planted logistic crosses 50 % acceptability at 34 °C (invented test data); below the data the range is open
    assert r["lower_open"] and not r["upper_open"]
    assert r["lower_c"] == pytest.approx(u.min()) and r["upper_c"] == pytest.approx(34.0, abs=1.5)


def test_predict_timeline_gives_the_contract_columns(small_campaign, small_table, tmp_path):
    from walkcomfort.model.bundle import save_bundle
    from walkcomfort.model.classifier import ComfortClassifier
    from walkcomfort.model.predict import predict_timeline

    m = ComfortClassifier(n_estimators=30).fit(small_table.X, small_table.y)
    save_bundle(m, tmp_path / "b")
    walk = small_campaign[small_campaign["walk_id"] == "P01-w1"].iloc[:300]
    out = predict_timeline(tmp_path / "b", walk)
    assert list(out.columns) == ["p_comfortable", "p_neutral", "p_uncomfortable", "comfort_class", "predictor",
                                 "reasons", "main_factors"]
    assert out.index.equals(walk.index)
    np.testing.assert_allclose(out[["p_comfortable", "p_neutral", "p_uncomfortable"]].sum(axis=1), 1.0)
    assert out["predictor"].iloc[0].startswith("model:sha256:")
    assert all(isinstance(r, str) and r for r in out["reasons"])
    families = ("current heat", "heat history", "shade history", "slope and pace", "sound", "light", "scene view",
                "walker", "no single factor")
    assert all(f.startswith(families) for f in out["main_factors"])
    direct = predict_timeline(m, walk, reasons=False)
    np.testing.assert_array_equal(direct["p_neutral"].to_numpy(), out["p_neutral"].to_numpy())


def test_newton_logistic_matches_scikit_learn_unpenalised():
    from sklearn.linear_model import LogisticRegression

    from walkcomfort.model.calibration import _logistic_newton

    rng = np.random.default_rng(4)
    z = rng.normal(size=(500, 2))
    y = (rng.random(500) < 1 / (1 + np.exp(-(0.5 + 1.2 * z[:, 0] - 0.7 * z[:, 1])))).astype(float)
    # reference: scikit-learn LogisticRegression with a negligible penalty (C = 1e8)
    beta = _logistic_newton(z, y)
    ref = LogisticRegression(C=1e8, tol=1e-10, max_iter=10000).fit(z, y)
    np.testing.assert_allclose(beta, np.r_[ref.intercept_, ref.coef_[0]], rtol=1e-4, atol=1e-5)
