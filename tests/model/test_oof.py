"""Out-of-fold predictions written by the fit: one row per usable vote, each from a fold that held out its walker."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from walkcomfort import columns as C
from walkcomfort.errors import InputError
from walkcomfort.model.evaluate import grouped_splits
from walkcomfort.model.workflow import OOF_FILE, fit_table, read_oof_predictions, write_fit_outputs


@pytest.fixture(scope="module")
def located(small_campaign):
    """The synthetic campaign with a position on every row (it has none of its own)."""
    df = small_campaign.copy()
    k = np.arange(len(df), dtype=float)
    df[C.LAT] = 41.38 + 1e-6 * k
    df[C.LON] = 2.17 + 2e-6 * k
    return df


@pytest.fixture(scope="module")
def small_table(located):
    from walkcomfort.model.evaluate import training_table

    return training_table(located)


@pytest.fixture(scope="module")
def fitted(small_table, tmp_path_factory):
    res = fit_table(small_table, n_splits=4, n_estimators=15, n_boot=0)
    folder = tmp_path_factory.mktemp("bundle")
    write_fit_outputs(res, folder)
    return res, folder


def test_oof_file_has_one_row_per_usable_vote(fitted, small_table, located):
    res, folder = fitted
    oof = read_oof_predictions(folder)
    assert len(oof) == len(small_table.y)
    voted = located[C.VOTE_COMFORT].notna().sum()
    assert len(oof) + len(small_table.quarantine) == voted  # nothing silently lost
    assert list(oof["vote"]) == [str(v) for v in small_table.y]
    # each vote keeps the position and walk of its timeline row
    key = located.set_index(C.WALK_ID, append=True)[[C.LAT, C.LON]]
    want = key.loc[list(zip(oof.index, oof[C.WALK_ID], strict=False))]
    np.testing.assert_allclose(oof[C.LAT].to_numpy(), want[C.LAT].to_numpy())
    np.testing.assert_allclose(oof[C.LON].to_numpy(), want[C.LON].to_numpy())
    p = oof[[f"p_{c}" for c in res.cv.labels]].to_numpy()
    np.testing.assert_allclose(p.sum(axis=1), 1.0, atol=1e-9)
    # the predicted class is the cross-validated one the report's metrics were computed from
    assert list(oof["predicted"]) == [str(v) for v in res.cv.pred["history"]]
    manifest = json.loads((folder / "manifest.json").read_text())
    assert manifest["extra"]["oof_predictions"]["rows"] == len(oof)


def test_no_walker_is_predicted_by_a_fold_that_trained_on_them(fitted, small_table):
    res, folder = fitted
    oof = read_oof_predictions(folder)
    folds = grouped_splits(small_table.groups, 4)  # the same deterministic split the fit used
    assert len(folds) == len(res.cv.folds)
    for k, (tr, _te) in enumerate(folds):
        trained_on = set(map(str, small_table.groups[tr]))
        held = oof[oof["fold"] == k]
        assert set(held[C.PARTICIPANT]) == set(res.cv.folds[k]["test_groups"])
        assert not set(held[C.PARTICIPANT]) & trained_on
    # every walker sits in exactly one fold
    assert (oof.groupby(C.PARTICIPANT)["fold"].nunique() == 1).all()


def test_oof_file_is_checked_against_the_manifest(fitted, tmp_path):
    import shutil

    from walkcomfort.model.bundle import load_bundle

    _, folder = fitted
    copy = tmp_path / "b"
    shutil.copytree(folder, copy)
    load_bundle(copy)  # the bundle itself still verifies
    df = pd.read_parquet(copy / OOF_FILE)
    df.loc[df.index[0], "predicted"] = "tampered"
    df.to_parquet(copy / OOF_FILE)
    with pytest.raises(InputError, match="digest"):
        read_oof_predictions(copy)
    (copy / OOF_FILE).unlink()
    assert read_oof_predictions(copy) is None
