"""The route and compare verbs: files written, byte-stable re-runs, one-line errors."""

from __future__ import annotations

import json

import pandas as pd
import pytest

from walkcomfort.cli import main
from walkcomfort.routes.outputs import FILES

from .test_predict import LAT, LON, STREET_M, _street_lon, tree_row_scheme


@pytest.fixture
def files(tmp_path):
    route = tmp_path / "street.geojson"
    route.write_text(json.dumps({"type": "Feature", "properties": {"route_id": "street"},
                                 "geometry": {"type": "LineString",
                                              "coordinates": [[LON, LAT], [_street_lon(STREET_M), LAT]]}}))
    d = 0.0002
    box = [[LON, LAT + 0.001], [LON + d, LAT + 0.001], [LON + d, LAT + 0.001 + d], [LON, LAT + 0.001 + d],
           [LON, LAT + 0.001]]
    scene = tmp_path / "scene.geojson"
    scene.write_text(json.dumps({"type": "FeatureCollection", "walkcomfort": {"site": {"lat": LAT, "lon": LON}},
                                 "features": [{"type": "Feature", "geometry": {"type": "Polygon", "coordinates": [box]},
                                               "properties": {"id": "b1", "kind": "building", "height_m": 10}}]}))
    scheme = tmp_path / "tree-row.geojson"
    scheme.write_text(json.dumps(tree_row_scheme().to_geojson()))
    return route, scene, scheme


def test_compare_writes_every_output_and_reruns_byte_identical(files, tmp_path, capsys):
    route, scene, scheme = files
    args = ["compare", str(route), "--scene", str(scene), "--scheme", str(scheme),
            "--depart", "2026-07-15T15:00..2026-07-15T18:00/1h", "--timezone", "Europe/Madrid",
            "--conditions", "t_air_c=33,rh_pct=30,wind_ms=1.5"]
    assert main([*args, "-o", str(tmp_path / "a")]) == 0
    assert main([*args, "-o", str(tmp_path / "b")]) == 0
    for name in FILES:
        a, b = (tmp_path / "a" / name), (tmp_path / "b" / name)
        assert a.exists(), name
        assert a.read_bytes() == b.read_bytes(), name
    pts = pd.read_parquet(tmp_path / "a" / "points.parquet")
    gj = json.loads((tmp_path / "a" / "points.geojson").read_text())
    assert len(gj["features"]) == len(pts)
    summary = pd.read_csv(tmp_path / "a" / "summary.csv")
    assert len(summary) == 2 * 4
    md = (tmp_path / "a" / "summary.md").read_text()
    assert "physics-only UTCI-band rule" in md and "Caution" in md
    html = (tmp_path / "a" / "summary.html").read_text()
    assert html.startswith("<!DOCTYPE html>") and "<table>" in html
    assert (tmp_path / "a" / "comfort_along_route.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    err = capsys.readouterr().err
    assert "physics-only" in err


def test_route_on_a_design_day_from_the_tmy3_file(tmp_path, greensboro_tmy3):
    route = tmp_path / "gso.geojson"
    route.write_text(json.dumps({"type": "Feature", "properties": {},
                                 "geometry": {"type": "LineString", "coordinates": [[-79.94, 36.08], [-79.939, 36.08]]}}))
    out = tmp_path / "out"
    code = main(["route", str(route), "--weather", str(greensboro_tmy3), "--design-day", "p95", "--season", "6-8",
                 "--depart", "09:00..17:00/4h", "--timezone", "America/New_York", "-o", str(out)])
    assert code == 0
    s = pd.read_csv(out / "summary.csv")
    assert len(s) == 3 and set(s["scheme"]) == {"base"}
    prov = json.loads((out / "provenance.json").read_text())
    assert prov["parameters"]["design_day"]["rule"] == "percentile"


def test_errors_are_one_line_with_exit_2(files, tmp_path, capsys):
    route, scene, scheme = files
    code = main(["compare", str(route), "--scheme", str(scheme), "--depart", "2026-07-15T15:00Z",
                 "--conditions", "t_air_c=33,rh_pct=30,wind_ms=1.5", "-o", str(tmp_path / "x")])
    assert code == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "no scene" in err[0]
    code = main(["route", str(route), "--depart", "2026-07-15T15:00", "--conditions", "t_air_c=33",
                 "-o", str(tmp_path / "y")])
    assert code == 2
    err = capsys.readouterr().err
    assert "lack" in err and err.startswith("error: --conditions: ")   # where: the option at fault


@pytest.mark.slow
def test_route_with_a_model_bundle_and_walker(files, tmp_path):
    from walkcomfort import columns as C
    from walkcomfort.model._synthetic import synthetic_campaign
    from walkcomfort.model.bundle import save_bundle
    from walkcomfort.model.classifier import ComfortClassifier
    from walkcomfort.model.features import build_features

    camp = synthetic_campaign(n_participants=4, walks_per_participant=1, duration_s=900)
    lab = camp[camp[C.VOTE_COMFORT].notna()]
    save_bundle(ComfortClassifier(n_estimators=30).fit(build_features(camp).loc[lab.index], lab[C.VOTE_COMFORT]),
                tmp_path / "bundle")
    route, scene, scheme = files
    out = tmp_path / "out"
    assert main(["route", str(route), "--scene", str(scene), "--scheme", str(scheme), "--model", str(tmp_path / "bundle"),
                 "--walker", "clo=0.5,acclimatised=1,age_band=25-34", "--depart", "2026-07-15T17:00+02:00",
                 "--conditions", "t_air_c=33,rh_pct=30,wind_ms=1.5", "-o", str(out)]) == 0
    pts = pd.read_parquet(out / "points.parquet")
    assert pts["predictor"].str.startswith("model:sha256:").all()
    assert set(pts["scheme"]) == {"tree-row"}
    assert (pts["reasons"].str.len() > 0).mean() > 0.9
    md = (out / "summary.md").read_text()
    assert "comfort model" in md and "physics-only" not in md
    prov = json.loads((out / "provenance.json").read_text())
    assert prov["parameters"]["walker"] == {"clo": 0.5, "acclimatised": True, "age_band": "25-34"}
    assert any(k.endswith("manifest.json") for k in prov["inputs"])
    assert main(["route", str(route), "--walker", "shoe=42", "--depart", "2026-07-15T17:00+02:00",
                 "--conditions", "t_air_c=33,rh_pct=30,wind_ms=1.5", "-o", str(out)]) == 2
    # the synthetic model was fitted with a noise meter on most walks: a planned walk has none, and says so
    assert "cannot supply" in md


def test_actual_year_flag_refuses_dates_outside_the_file(tmp_path, greensboro_tmy3, capsys):
    route = tmp_path / "gso.geojson"
    route.write_text(json.dumps({"type": "Feature", "properties": {},
                                 "geometry": {"type": "LineString", "coordinates": [[-79.94, 36.08], [-79.939, 36.08]]}}))
    code = main(["route", str(route), "--weather", str(greensboro_tmy3), "--actual-year",
                 "--depart", "2026-07-09T15:00-04:00", "-o", str(tmp_path / "o")])
    assert code == 2 and "outside the period" in capsys.readouterr().err


def test_a_zero_step_sweep_is_an_input_error_not_a_crash(files, tmp_path, capsys):
    # a zero STEP once divided by zero (internal error, exit 1); now one line, exit 2
    route, _, _ = files
    code = main(["route", str(route), "--depart", "2026-07-15T08:00..2026-07-15T10:00/0h", "--timezone", "UTC",
                 "--conditions", "t_air_c=33,rh_pct=30,wind_ms=1.5", "-o", str(tmp_path / "z")])
    assert code == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("error: --depart: ") and "zero step" in err[0] and "Fix:" in err[0]
