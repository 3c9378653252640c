"""The history gain is found when the votes have a history and not when they do not.

Walks alternate between sun and shade (the synthetic walks of ``walkcomfort.model._synthetic``);
the votes come from the demo's invented body-state process (``walkcomfort.demo.latent``), which is
not built from the model's features: once with the body state (a first-order lag with a rate term)
and once with its no-history variant (the state follows the UTCI at once). The same learner with
and without the history features is compared with a walker-paired bootstrap interval.
"""

from __future__ import annotations

import numpy as np
import pytest

from walkcomfort import columns as C
from walkcomfort.demo import latent
from walkcomfort.model._synthetic import synthetic_campaign
from walkcomfort.model.evaluate import cross_validate, default_models, training_table


def campaign(variant: str, seed: int = 11):
    camp = synthetic_campaign(n_participants=12, walks_per_participant=2, duration_s=2400, vote_every_s=45,
                              seed=seed).copy()
    rng = np.random.default_rng(seed + 100)  # the same walkers and noise draws for both variants
    walkers = {p: latent.Walker(p, 1.3, float(rng.uniform(0.85, 1.15)), float(rng.normal(0.0, 0.15)), 0.5, "25-34",
                                True) for p in camp[C.PARTICIPANT].unique()}
    d = np.empty(len(camp))
    for rows in camp.groupby(C.WALK_ID, sort=False).indices.values():
        walk = camp.iloc[rows]
        w = walkers[walk[C.PARTICIPANT].iloc[0]]
        n = len(walk)
        d[rows] = latent.discomfort(w, walk[C.UTCI_C].to_numpy(), 1.0 - walk[C.SHADE_FRAC].to_numpy(), np.zeros(n),
                                    np.full(n, 55.0), np.zeros(n), variant=variant)["d"]
    # one shift for the whole campaign puts its median score between the class thresholds
    shift = (latent.COMFORTABLE_BELOW + latent.UNCOMFORTABLE_ABOVE) / 2 - np.median(d)
    cls = latent.comfort_class(d + shift + rng.normal(0.0, latent.VOTE_NOISE, len(d)))
    voted = camp[C.VOTE_COMFORT].notna().to_numpy()
    votes = camp[C.VOTE_COMFORT].astype(object).to_numpy().copy()
    votes[voted] = cls[voted]
    camp[C.VOTE_COMFORT] = votes
    return training_table(camp)


def gain(variant: str) -> dict:
    table = campaign(variant)
    models = {k: v for k, v in default_models(n_estimators=150).items() if k in ("history", "current")}
    cv = cross_validate(table, models=models, n_splits=6, n_boot=2000, progress=False)
    return cv.gains["history-current"]


@pytest.mark.slow
def test_history_gain_is_found_with_a_body_state_and_not_without():
    with_history = gain("body")
    without = gain("no-history")
    print(with_history, without)
    # the body state lags the UTCI by minutes: looking back helps, beyond the model error
    assert with_history["lo"] > 0
    # the no-history variant: the votes depend on the conditions now only; the gain is within model error
    assert without["lo"] <= 0 <= without["hi"]
