"""Simulated walks through the environment and the predictor; summaries and comparison."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from walkcomfort import columns as C
from walkcomfort.errors import InputError
from walkcomfort.routes.compare import compare_schemes, summarise
from walkcomfort.routes.geometry import load_route
from walkcomfort.routes.predict import PHYSICS_RULE, POINT_COLUMNS, Predictor, predict_route
from walkcomfort.routes.schemes import scheme_from_geojson
from walkcomfort.routes.timing import parse_departures
from walkcomfort.routes.weather import StatedConditions

LAT, LON = 40.40, -3.70          # an invented street in a warm mid-latitude town
TZ = "Europe/Madrid"
STREET_M = 120.0


def _street_lon(d_m):
    from pyproj import Geod

    return Geod(ellps="WGS84").fwd(LON, LAT, 90.0, d_m)[0]


@pytest.fixture
def street(tmp_path):
    """A 120 m east-west street, flat, as a GeoJSON route."""
    p = tmp_path / "street.geojson"
    p.write_text(json.dumps({"type": "Feature", "properties": {"route_id": "street"},
                             "geometry": {"type": "LineString",
                                          "coordinates": [[LON, LAT, 650.0], [_street_lon(STREET_M), LAT, 650.0]]}}))
    return p


@pytest.fixture
def scene():
    """One building well away from the street, so the base street is in full sun."""
    from walkcomfort.environment.scene import Scene

    d = 0.0002
    box = [[LON, LAT + 0.001], [LON + d, LAT + 0.001], [LON + d, LAT + 0.001 + d], [LON, LAT + 0.001 + d],
           [LON, LAT + 0.001]]
    feats = [{"type": "Feature", "geometry": {"type": "Polygon", "coordinates": [box]},
              "properties": {"id": "b1", "kind": "building", "height_m": 10}}]
    return Scene.from_geojson({"type": "FeatureCollection", "walkcomfort": {"site": {"lat": LAT, "lon": LON}},
                               "features": feats})


def tree_row_scheme(spacing_m=7.0):
    feats = []
    for i, d in enumerate(np.arange(0.0, STREET_M + 1e-9, spacing_m)):
        feats.append({"type": "Feature", "geometry": {"type": "Point", "coordinates": [_street_lon(d), LAT]},
                      "properties": {"edit": "add", "id": f"row-{i}", "kind": "tree", "height_m": 9.0,
                                     "crown_base_m": 3.0, "crown_radius_m": 4.0, "transmissivity": 0.1}})
    return scheme_from_geojson({"type": "FeatureCollection",
                                "walkcomfort": {"scheme": "tree-row", "label": "street trees"}, "features": feats})


HOT = StatedConditions(t_air_c=33.0, rh_pct=30.0, wind_ms=1.5, wind_height_m=10.0)


def test_point_table_has_the_contract_columns(street, scene):
    r = load_route(street, crs=scene.crs)
    deps = parse_departures("2026-07-15T16:00", timezone=TZ)
    pts = predict_route(r, deps, HOT, scene=scene)
    assert list(pts.columns[:len(POINT_COLUMNS)]) == list(POINT_COLUMNS)
    assert str(pts.index.tz) == "UTC" and pts.index.name == "time"
    p = pts[["p_comfortable", "p_neutral", "p_uncomfortable"]].sum(axis=1)
    # the three class probabilities sum to one (from the definition of a probability)
    assert np.allclose(p, 1.0)
    assert (pts["predictor"] == PHYSICS_RULE).all()
    assert pts["reasons"].str.contains("UTCI-band rule").all()
    assert (pts["scheme"] == "base").all() and (pts["route_id"] == "street").all()


def test_tree_row_gains_shade_and_lowers_utci(street, scene):
    r = load_route(street, crs=scene.crs)
    deps = parse_departures("2026-07-15T17:00", timezone=TZ)  # summer afternoon, sun to the south-west
    res = compare_schemes(r, [tree_row_scheme()], deps, HOT, scene=scene)
    s = res.summary.set_index("scheme")
    # open street vs a dense tree row at 17:00 CEST: shade cuts the beam and so Tmrt and UTCI
    # (physical expectation; the 0.1 / 0.5 / 2 K margins are test thresholds, not published values)
    assert s.loc["base", "shade_share"] < 0.1
    assert s.loc["tree-row", "shade_share"] > 0.5
    assert s.loc["tree-row", "mean_utci_c"] < s.loc["base", "mean_utci_c"] - 2.0
    c = res.comparison.iloc[0]
    assert c["delta_mean_utci_c"] < -2.0 and c["delta_shade_share"] > 0.5
    cost = res.cost.iloc[0]
    assert cost["trees_added"] == len(tree_row_scheme().edits)
    # per-tree gain is the gain over the count (from the definition)
    assert cost["gain_min_per_tree"] == pytest.approx(cost["gain_comfortable_min"] / cost["trees_added"])


def test_empty_scheme_is_identical_to_base(street, scene):
    r = load_route(street, crs=scene.crs)
    deps = parse_departures("2026-07-15T17:00", timezone=TZ)
    empty = scheme_from_geojson({"type": "FeatureCollection", "walkcomfort": {"scheme": "nothing"}, "features": []})
    res = compare_schemes(r, [empty], deps, HOT, scene=scene)
    a = res.points[res.points["scheme"] == "base"].drop(columns="scheme")
    b = res.points[res.points["scheme"] == "nothing"].drop(columns="scheme")
    # a scheme with no edits leaves the scene as it is: identical rows (from the definition)
    pd.testing.assert_frame_equal(a, b, check_exact=True)
    deltas = res.comparison.filter(regex=r"^delta_.*(?<!_lo)(?<!_hi)$")
    assert len(deltas.columns) > 5 and (deltas == 0).all().all()


def test_sweep_gives_one_row_per_departure_and_minutes_add_up(street, scene):
    r = load_route(street, crs=scene.crs)
    deps = parse_departures("2026-07-15T08:00..2026-07-15T20:00/2h", timezone=TZ)
    res = compare_schemes(r, [tree_row_scheme()], deps, HOT, scene=scene)
    s = res.summary
    assert len(s) == 2 * len(deps)
    assert sorted(s[s["scheme"] == "base"]["departure"]) == list(deps)
    walk = r.length_m / 1.3 / 60  # the UTM length (scale factor ~0.9996) is what is walked
    assert np.allclose(s["walk_min"], walk)
    exp = s[["exp_min_comfortable", "exp_min_neutral", "exp_min_uncomfortable"]].sum(axis=1)
    arg = s[["argmax_min_comfortable", "argmax_min_neutral", "argmax_min_uncomfortable"]].sum(axis=1)
    assert np.allclose(exp, s["walk_min"]) and np.allclose(arg, s["walk_min"])
    best = res.best.set_index("scheme")
    assert best.loc["base", "departures_n"] == len(deps)
    b = s[s["scheme"] == "base"]
    assert best.loc["base", "exp_share_comfortable"] == pytest.approx(b["exp_share_comfortable"].max())


def test_stops_are_on_the_timeline(tmp_path, scene):
    p = tmp_path / "r.geojson"
    p.write_text(json.dumps({"type": "Feature", "properties": {"stops": [{"dist_m": 60, "wait_s": 45,
                                                                         "label": "crossing"}]},
                             "geometry": {"type": "LineString", "coordinates": [[LON, LAT], [_street_lon(STREET_M), LAT]]}}))
    r = load_route(p, crs=scene.crs)
    pts = predict_route(r, parse_departures("2026-07-15T17:00", timezone=TZ), HOT, scene=scene)
    s = summarise(pts)
    assert s["walk_min"].iloc[0] == pytest.approx((r.length_m / 1.3 + 45) / 60)
    # the stop sits on a route point (60 m = 12 x 5 m): that point is the arrival, then one row every 5 s
    assert (pts["stop"] == "crossing").sum() == 9


def test_scheme_without_scene_is_refused(street):
    r = load_route(street)
    with pytest.raises(InputError, match="no scene"):
        predict_route(r, parse_departures("2026-07-15T17:00", timezone=TZ), HOT, scheme=tree_row_scheme())


@pytest.mark.slow
def test_model_bundle_predictions(street, scene, tmp_path):
    from walkcomfort.model._synthetic import synthetic_campaign
    from walkcomfort.model.bundle import save_bundle
    from walkcomfort.model.classifier import ComfortClassifier
    from walkcomfort.model.features import build_features

    camp = synthetic_campaign(n_participants=4, walks_per_participant=1, duration_s=900)
    labelled = camp[camp[C.VOTE_COMFORT].notna()]
    X = build_features(camp).loc[labelled.index]
    model = ComfortClassifier(n_estimators=30).fit(X, labelled[C.VOTE_COMFORT])
    save_bundle(model, tmp_path / "bundle")
    pred = Predictor.from_bundle(tmp_path / "bundle")
    assert pred.label.startswith("model:sha256:")
    r = load_route(street, crs=scene.crs)
    res = compare_schemes(r, [tree_row_scheme()], parse_departures("2026-07-15T17:00", timezone=TZ), HOT,
                          scene=scene, predictor=pred)
    pts = res.points
    assert (pts["predictor"] == pred.label).all()
    assert np.allclose(pts[["p_comfortable", "p_neutral", "p_uncomfortable"]].sum(axis=1), 1.0)
    assert (pts["reasons"].str.len() > 0).mean() > 0.9
    exp = res.summary[["exp_min_comfortable", "exp_min_neutral", "exp_min_uncomfortable"]].sum(axis=1)
    assert np.allclose(exp, res.summary["walk_min"])


def test_departures_sharing_instants_stay_apart(tmp_path, scene):
    # two departures 5 s apart with a wait: rows of both walks fall on the same instants
    p = tmp_path / "r.geojson"
    p.write_text(json.dumps({"type": "Feature", "properties": {"stops": [{"dist_m": 30, "wait_s": 60, "label": "x"}]},
                             "geometry": {"type": "LineString", "coordinates": [[LON, LAT], [_street_lon(STREET_M), LAT]]}}))
    r = load_route(p, crs=scene.crs)
    d0 = pd.Timestamp("2026-07-15T15:00Z")
    pts = predict_route(r, pd.DatetimeIndex([d0, d0 + pd.Timedelta("5s")]), HOT, scene=scene)
    assert pts.index.has_duplicates
    s = summarise(pts)
    assert len(s) == 2 and np.allclose(s["walk_min"], (r.length_m / 1.3 + 60) / 60)
    with pytest.raises(InputError, match="given twice"):
        predict_route(r, pd.DatetimeIndex([d0, d0]), HOT, scene=scene)


def test_route_outside_the_scene_says_so(tmp_path, scene):
    # 2 km east of the scene's only building: nothing is known there
    p = tmp_path / "far.geojson"
    p.write_text(json.dumps({"type": "Feature", "properties": {},
                             "geometry": {"type": "LineString",
                                          "coordinates": [[_street_lon(2000), LAT], [_street_lon(2100), LAT]]}}))
    res = compare_schemes(load_route(p, crs=scene.crs), [], parse_departures("2026-07-15T17:00", timezone=TZ), HOT,
                          scene=scene)
    assert any("outside the scene" in n for n in res.notices)
    res = compare_schemes(load_route(p), [], parse_departures("2026-07-15T17:00", timezone=TZ), HOT)
    assert any("open ground" in n for n in res.notices)


def test_simulate_walk_has_the_recorded_timeline_columns(street, scene):
    from walkcomfort.routes.simulate import simulate_walk

    r = load_route(street, crs=scene.crs)
    tl = simulate_walk(r, pd.Timestamp("2026-07-15T15:00Z"), HOT, scene=scene, timezone=TZ)
    recorded = [C.WALK_ID, C.PARTICIPANT, C.LAT, C.LON, C.ELEV_M, C.DIST_M, C.SPEED_MS, C.HEADING_DEG,
                C.SLOPE_PCT, C.T_AIR_C, C.RH_PCT, C.WIND_MS, C.PRESSURE_HPA]
    assert all(c in tl.columns for c in recorded)
    assert tl.attrs["session"]["wind_height_m"] == 10.0 and tl.attrs["session"]["timezone"] == TZ
    assert (tl[C.TMRT_SOURCE] == "fluxes").all() and tl[C.UTCI_C].notna().all()
    assert tl[C.PARTICIPANT].eq("simulated").all() and tl.index.is_monotonic_increasing


def test_along_route_sections_show_where_a_scheme_helps(street, scene):
    from walkcomfort.routes.compare import along_route

    r = load_route(street, crs=scene.crs)
    # trees on the first half of the street only
    half = tree_row_scheme()
    half = _scheme_named_half([e for e in half.edits if e["geometry"]["coordinates"][0] <= _street_lon(55.0)])
    res = compare_schemes(r, [half], parse_departures("2026-07-15T17:00", timezone=TZ), HOT, scene=scene)
    a = res.along[res.along["scheme"] == "half"].set_index("from_m")
    assert list(a.index) == [0.0, 50.0, 100.0]
    assert a.loc[0.0, "to_m"] == 50.0 and a.loc[100.0, "to_m"] == pytest.approx(r.length_m)
    assert a.loc[0.0, "delta_mean_utci_c"] < -2.0 and a.loc[0.0, "delta_shade_share"] > 0.5
    assert a.loc[100.0, "delta_mean_utci_c"] == pytest.approx(0.0, abs=0.05)
    base = res.along[res.along["scheme"] == "base"]
    assert (base["delta_mean_utci_c"] == 0).all()
    with pytest.raises(InputError):
        along_route(res.points, section_m=0)


def _scheme_named_half(edits):
    return scheme_from_geojson({"type": "FeatureCollection", "walkcomfort": {"scheme": "half"}, "features": edits})


def test_scheme_differences_carry_intervals_and_the_flag(street, scene, folded_bundle):
    from walkcomfort.routes.compare import DELTA_COLUMNS

    pred = Predictor.from_bundle(folded_bundle)
    assert pred.n_folds == 4
    r = load_route(street, crs=scene.crs)
    deps = parse_departures("2026-07-15T09:00..2026-07-15T17:00/4h", timezone=TZ)
    res = compare_schemes(r, [tree_row_scheme()], deps, HOT, scene=scene, predictor=pred, explain=False)
    cmp_ = res.comparison
    for col in DELTA_COLUMNS:  # the contract: delta_<col>_lo / delta_<col>_hi beside every delta_<col>
        lo, d, hi = (cmp_[f"delta_{col}{s}"].to_numpy(float) for s in ("_lo", "", "_hi"))
        assert np.all(np.isfinite(lo)) and np.all(lo <= d + 1e-12) and np.all(d <= hi + 1e-12)
    # model-free differences (shade, UTCI, heat dose) have no model error: zero-width intervals
    np.testing.assert_allclose(cmp_["delta_heat_dose_cmin_lo"], cmp_["delta_heat_dose_cmin"])
    np.testing.assert_allclose(cmp_["delta_shade_share_hi"], cmp_["delta_shade_share"])
    # the model's comfortable minutes have a real spread across the fold models
    assert (cmp_["delta_exp_min_comfortable_hi"] - cmp_["delta_exp_min_comfortable_lo"]).max() > 0
    flag = cmp_["within_model_error"]
    assert flag.dtype == "boolean"
    expected = (cmp_["delta_exp_min_comfortable_lo"] <= 0) & (cmp_["delta_exp_min_comfortable_hi"] >= 0)
    assert flag.astype(bool).tolist() == expected.tolist()
    # the same walks with the full model and fold models predicted from one feature pass: the
    # interval is centred on the full model's difference (jackknife: estimate ± t·se)
    mid = (cmp_["delta_exp_min_comfortable_lo"] + cmp_["delta_exp_min_comfortable_hi"]) / 2
    np.testing.assert_allclose(mid, cmp_["delta_exp_min_comfortable"], atol=1e-9)


def test_without_fold_models_the_bounds_are_missing(street, scene):
    r = load_route(street, crs=scene.crs)
    res = compare_schemes(r, [tree_row_scheme()], parse_departures("2026-07-15T17:00", timezone=TZ), HOT,
                          scene=scene)
    cmp_ = res.comparison
    assert cmp_["delta_exp_min_comfortable_lo"].isna().all() and cmp_["within_model_error"].isna().all()


def test_delta_interval_is_the_delete_a_group_jackknife():
    from scipy.stats import t as student_t

    from walkcomfort.routes.compare import delta_interval

    reps = np.array([[1.0, 2.0], [1.2, 2.0], [0.8, 2.0], [1.0, 2.0]])
    lo, hi = delta_interval(np.array([1.0, 2.0]), reps)
    # by hand: K = 4, replicates 1.0, 1.2, 0.8, 1.0 -> se = sqrt(3/4 · 0.08) ; t(3, 0.975) = 3.182 (tables)
    se = np.sqrt(0.75 * 0.08)
    assert student_t.ppf(0.975, 3) == pytest.approx(3.182, abs=1e-3)
    np.testing.assert_allclose([lo[0], hi[0]], [1.0 - student_t.ppf(0.975, 3) * se, 1.0 + student_t.ppf(0.975, 3) * se])
    assert lo[1] == hi[1] == 2.0
