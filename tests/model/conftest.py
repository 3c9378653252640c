"""Synthetic labelled campaigns shared by the model tests (module-scoped: built once)."""

from __future__ import annotations

import pytest

from walkcomfort.model._synthetic import synthetic_campaign


@pytest.fixture(scope="session")
def small_campaign():
    """8 walkers × 2 walks of 40 min, a vote about every 2 min (~320 votes)."""
    return synthetic_campaign(n_participants=8, walks_per_participant=2, vote_every_s=120, seed=0)


@pytest.fixture(scope="session")
def small_table(small_campaign):
    from walkcomfort.model.evaluate import training_table

    return training_table(small_campaign)
