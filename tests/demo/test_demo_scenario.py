"""The invented demo scenario: its files are what the generator makes, in the formats the readers take."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from walkcomfort import _io
from walkcomfort.demo import scenario, simulator as S, town as T


def _demo():
    from pathlib import Path

    return Path(__file__).resolve().parents[2] / "demo_walks"


def _prov():
    return json.loads((_demo() / "provenance.json").read_text())


def test_committed_folder_matches_its_provenance_digests():
    prov = _prov()
    root = _demo()
    on_disk = sorted(p.relative_to(root).as_posix() for p in root.rglob("*")
                     if p.is_file() and p.name != "provenance.json")
    assert on_disk == sorted(prov["files"])
    for rel, digest in prov["files"].items():
        assert _io.file_digest(root / rel) == digest, rel


@pytest.mark.parametrize("session_id", ["sv-p03-2", "sv-p06-1"])
def test_one_session_regenerates_byte_identical(tmp_path, session_id):
    """Regenerating a session with the same seed gives the committed bytes (a planted one included)."""
    prov = _prov()
    town = T.build_town(prov["seed"])
    plan = next(p for p in S.session_plans(prov["n_walkers"]) if p.id == session_id)
    scenario.write_session(tmp_path, town, plan, prov["seed"], S._env_funcs(town))
    made = sorted(p for p in (tmp_path / "sessions" / session_id).rglob("*") if p.is_file())
    assert made
    expected = {k: v for k, v in prov["files"].items() if k.startswith(f"sessions/{session_id}/")}
    assert sorted(p.relative_to(tmp_path).as_posix() for p in made) == sorted(expected)
    for p in made:
        assert _io.file_digest(p) == expected[p.relative_to(tmp_path).as_posix()], p.name


@pytest.mark.slow
def test_whole_folder_regenerates_byte_identical(tmp_path):
    prov = _prov()
    scenario.generate_demo(tmp_path / "dw", seed=prov["seed"], n_walkers=prov["n_walkers"])
    again = json.loads((tmp_path / "dw" / "provenance.json").read_text())
    assert again == prov


def test_scale_of_the_scenario():
    prov = _prov()
    sessions = json.loads((_demo() / "truth" / "sessions.json").read_text())
    assert len(sessions) >= 12
    assert len({s["participant"] for s in sessions}) >= 6
    assert all(20 * 60 <= s["duration_s"] <= 30 * 60 for s in sessions)
    hours = {int(s["start_local"][11:13]) for s in sessions}
    assert min(hours) <= 10 and max(hours) >= 18          # morning to evening
    size = sum((_demo() / rel).stat().st_size for rel in prov["files"])
    assert size < 8_000_000                                 # "a few MB"
    scene = json.loads((_demo() / "scene.geojson").read_text())
    kinds = pd.Series([f["properties"]["kind"] for f in scene["features"]]).value_counts()
    assert kinds["building"] >= 30 and 80 <= kinds["tree"] <= 130 and kinds["canopy"] >= 1


def test_scene_and_schemes_load_with_the_environment_and_route_stages():
    scene_mod = pytest.importorskip("walkcomfort.environment.scene")
    scene = scene_mod.load_scene(_demo() / "scene.geojson")
    assert len(scene) == len(json.loads((_demo() / "scene.geojson").read_text())["features"])
    schemes = pytest.importorskip("walkcomfort.routes.schemes")
    for path in sorted((_demo() / "schemes").glob("*.geojson")):
        sch = schemes.load_scheme(path)
        out = schemes.apply_scheme(scene, sch)
        assert len(out) != len(scene) or path.stem == "pruned-passeig"


def test_town_geometry_round_trips_through_wgs84():
    x = np.array([-300.0, 0.0, 250.0])
    y = np.array([-180.0, 0.0, 240.0])
    lon, lat = T.to_lonlat(x, y)
    bx, by = T.from_lonlat(lon, lat)
    assert np.allclose(bx, x, atol=0.02) and np.allclose(by, y, atol=0.02)  # 1e-7° rounding ~ 1 cm


def test_tobler_ratio_matches_the_hiking_function():
    # Tobler (1993): W = 6 exp(-3.5 |S + 0.05|) km/h; fastest at S = -0.05 and 10 % uphill slower
    assert S.tobler_ratio(0.0) == pytest.approx(1.0)
    assert S.tobler_ratio(-0.05) == pytest.approx(np.exp(3.5 * 0.05))
    assert S.tobler_ratio(0.10) == pytest.approx(6 * np.exp(-3.5 * 0.15) / (6 * np.exp(-3.5 * 0.05)))
