"""Fixtures for the routes tests: small route files written into tmp_path."""

from __future__ import annotations

import json
import os
from pathlib import Path

import pytest


def pvlib_data() -> Path:
    import pvlib

    return Path(os.path.dirname(pvlib.__file__)) / "data"


@pytest.fixture
def greensboro_tmy3() -> Path:
    # NREL TMY3 file for Greensboro, NC that ships inside pvlib's package data
    return pvlib_data() / "723170TYA.CSV"


@pytest.fixture
def miami_tmy2() -> Path:
    # NREL TMY2 file for Miami, FL that ships inside pvlib's package data
    return pvlib_data() / "12839.tm2"


def write_line(path: Path, coords, props=None, extra_features=()) -> Path:
    feats = [{"type": "Feature", "properties": props or {}, "geometry": {"type": "LineString", "coordinates": coords}}]
    feats += list(extra_features)
    path.write_text(json.dumps({"type": "FeatureCollection", "features": feats}))
    return path


@pytest.fixture
def line_factory(tmp_path):
    def make(coords, props=None, extra_features=(), name="route.geojson"):
        return write_line(tmp_path / name, coords, props, extra_features)

    return make


@pytest.fixture(scope="session")
def gso_file():
    """The Greensboro TMY3 file read once (WeatherFile objects are not changed by use)."""
    from walkcomfort.routes.weather import WeatherFile

    return WeatherFile(pvlib_data() / "723170TYA.CSV")


@pytest.fixture(scope="session")
def folded_bundle(tmp_path_factory):
    """A small fitted bundle with its 4 fold models (grouped validation by walker), for the
    intervals of route comparisons and of the placement advisor's gains."""
    from walkcomfort.model._synthetic import synthetic_campaign
    from walkcomfort.model.evaluate import training_table
    from walkcomfort.model.workflow import fit_table, write_fit_outputs

    table = training_table(synthetic_campaign(n_participants=4, walks_per_participant=1, duration_s=900, seed=2))
    folder = tmp_path_factory.mktemp("bundle")
    write_fit_outputs(fit_table(table, n_estimators=30, n_boot=0, feature_set="planned"), folder)
    return folder
