"""``fit --index pet``: heat features from PET in place of UTCI, recorded in the bundle, used when predicting."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from walkcomfort import _io
from walkcomfort import columns as C
from walkcomfort.cli import main
from walkcomfort.environment.utci import wind_at_10m
from walkcomfort.model import features as F
from walkcomfort.model._synthetic import synthetic_campaign


@pytest.fixture(scope="module")
def timeline_dir(tmp_path_factory):
    """Invented walks as `thermal` writes them (with wind at 10 m), without PET."""
    out = tmp_path_factory.mktemp("thermal")
    camp = synthetic_campaign(n_participants=4, walks_per_participant=2, duration_s=900, vote_every_s=60, seed=4)
    camp["wind10_ms"] = wind_at_10m(camp["wind_ms"], 1.1)
    for wid, df in camp.groupby("walk_id", sort=True):
        att = {"walk_id": wid, "participant": df["participant"].iloc[0], "timezone": "UTC",
               "clo": float(df["clo"].iloc[0]), "acclimatised": bool(df["acclimatised"].iloc[0]),
               "age_band": df["age_band"].iloc[0]}
        _io.write_parquet(out / wid / "timeline.parquet", df.drop(columns=["clo", "acclimatised", "age_band"]),
                          {"session": att, "provenance": {}})
    return out, camp


def test_pet_feature_sets_swap_utci_for_pet():
    for name in ("all", "planned"):
        pet = set(F.FEATURE_SETS[f"{name}-pet"])
        assert not pet & set(F.UTCI_FEATURES) and set(F.PET_FEATURES) <= pet
        assert pet - set(F.PET_FEATURES) == set(F.FEATURE_SETS[name]) - set(F.UTCI_FEATURES)
        assert not set(F.FEATURE_SETS[name]) & set(F.PET_FEATURES)  # the UTCI sets are as they were
    assert all(f in F.FAMILY_OF for f in F.PET_FEATURES)


@pytest.mark.slow
def test_fit_with_pet_records_the_index_and_predicts_from_pet(timeline_dir, tmp_path):
    from walkcomfort.environment.indices import with_pet
    from walkcomfort.model.bundle import load_bundle
    from walkcomfort.model.predict import predict_timeline

    folder, camp = timeline_dir
    bundle = tmp_path / "b"
    assert main(["fit", str(folder), "-o", str(bundle), "--index", "pet", "--folds", "2", "--rounds", "15",
                 "--bootstrap", "0"]) == 0
    manifest = json.loads((bundle / "manifest.json").read_text())
    assert manifest["extra"]["settings"]["index"] == "pet"  # the bundle says which index it saw
    assert manifest["extra"]["settings"]["feature_set"] == "all-pet"
    model = load_bundle(bundle)
    assert F.uses_pet(model) and C.UTCI_C not in set(model.feature_names_in_)
    # a timeline without PET is given its PET before the features: same as giving it
    walk = camp[camp["walk_id"] == camp["walk_id"].iloc[0]].drop(columns=["clo", "acclimatised", "age_band"])
    walk.attrs["session"] = {"clo": 0.5, "acclimatised": True, "age_band": "25-34"}
    plain = predict_timeline(model, walk, reasons=False)
    given = predict_timeline(model, with_pet(walk), reasons=False)
    pd.testing.assert_frame_equal(plain, given)
    assert np.isfinite(with_pet(walk)["pet_c"]).all()
