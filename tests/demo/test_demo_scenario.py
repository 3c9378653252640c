"""The invented demo scenario: its files are what the generator makes, in the formats the readers take."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from walkcomfort import _io
from walkcomfort.demo import scenario
from walkcomfort.demo import simulator as S
from walkcomfort.demo import town as T


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
    """The same seed gives the same bytes: two regenerations of a session (a planted one) agree file by file."""
    prov = _prov()
    town = T.build_town(prov["seed"])
    plan = next(p for p in S.session_plans(prov["n_walkers"]) if p.id == session_id)
    digests = []
    for run in ("a", "b"):
        scenario.write_session(tmp_path / run, town, plan, prov["seed"], S.environment_context(town))
        folder = tmp_path / run / "sessions" / session_id
        digests.append({p.relative_to(folder).as_posix(): _io.file_digest(p) for p in folder.rglob("*") if p.is_file()})
    assert digests[0] == digests[1]
    committed = {k.split("/", 2)[2] for k in prov["files"] if k.startswith(f"sessions/{session_id}/")}
    assert set(digests[0]) == committed


@pytest.mark.slow
def test_whole_folder_regenerates_byte_identical_to_the_committed_one(tmp_path):
    """The committed demo_walks is what the code makes. If this fails after a change to the simulator,
    the environment physics or a writer, regenerate (`walkcomfort demo --regenerate`) and commit demo_walks."""
    from walkcomfort.cli import main

    prov = _prov()
    # through the command a user types: regenerate into a new folder, then ingest it
    assert main(["demo", "--regenerate", "--seed", str(prov["seed"]), "--demo-dir", str(tmp_path / "dw"),
                 "--out", str(tmp_path / "out"), "--only", "ingest"]) == 0
    assert len(list((tmp_path / "out" / "timelines").glob("*/timeline.parquet"))) == len(
        json.loads((_demo() / "truth" / "sessions.json").read_text()))
    again = json.loads((tmp_path / "dw" / "provenance.json").read_text())
    stale = sorted(k for k in set(prov["files"]) | set(again["files"])
                   if prov["files"].get(k) != again["files"].get(k))
    assert not stale, f"demo_walks is stale in {len(stale)} files (first: {stale[:3]}); regenerate and commit it"
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


def test_device_files_are_written_as_the_devices_would():
    import gpxpy
    from PIL import Image

    folder = _demo() / "sessions" / "sv-p01-1"
    with open(folder / "gps" / "track.gpx", encoding="utf-8") as fh:
        gpx = gpxpy.parse(fh)
    assert gpx.version == "1.1"
    pts = gpx.tracks[0].segments[0].points
    assert len(pts) > 600 and all(p.time.utcoffset().total_seconds() == 0 for p in pts[:5])
    assert {round((b.time - a.time).total_seconds()) for a, b in zip(pts, pts[1:], strict=False)} == {2}
    # the weather logger writes °F and km/h with a day-first local clock; the manifest declares it
    head = (folder / "logger" / "weather.csv").read_text().splitlines()[:2]
    assert head[0] == "DateTime,Temp_F,RH_pct,Wind_kmh,Globe_F,Press_hPa"
    assert float(head[1].split(",")[1]) > 60.0           # a July morning in °F
    toml = (folder / "session.toml").read_text()
    assert 't_air = "degF"' in toml and 'wind = "km/h"' in toml and 'time_format = "%d/%m/%Y %H:%M:%S"' in toml
    # camera: EXIF DateTimeOriginal in the camera's local clock, matching the file name
    frame = sorted((folder / "camera").glob("IMG_*.jpg"))[0]
    with Image.open(frame) as im:
        assert im.size == (160, 120)
        stamp = im.getexif().get_ifd(0x8769)[0x9003]
    assert stamp.replace(":", "").replace(" ", "_") == frame.stem[4:]
    # the manifest validates with the ingest engineer's schema
    manifest = pytest.importorskip("walkcomfort.session.manifest")
    spec = manifest.load_manifest(folder)
    assert spec.participant == "P01" and spec.sensors["globe_diameter_m"] == S.GLOBE_DIAMETER_M
    assert {s.kind for s in spec.sources} == {"gps", "weather", "noise", "light", "frames", "votes"}
