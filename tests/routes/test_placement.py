"""The placement advisor: sites, shade traced once, greedy selection, outputs, CLI.

A synthetic street runs east–west at 38.8° N; a 20 m block stands 4 m south of its
western half, so at 13:00 CEST in July (sun in the south-east, about 68° high) the
western half lies in the block's shade and only the eastern half is sunlit.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from shapely.geometry import box

from walkcomfort.environment.geo import LocalFrame
from walkcomfort.environment.scene import scene_from_local
from walkcomfort.errors import InputError
from walkcomfort.routes.placement.advisor import advise
from walkcomfort.routes.placement.catalogue import DEFAULT_CATALOGUE, load_catalogue
from walkcomfort.routes.placement.select import PhysicsObjective, exhaustive, greedy
from walkcomfort.routes.placement.shadows import add_scene_xy, trace_options, walk_table
from walkcomfort.routes.placement.sites import screen_sites, sites_along_routes

LAT, LON = 38.8, -0.75
X0, Y0 = LocalFrame(LON, LAT).project(LON, LAT)
TREE = {"tree-medium": DEFAULT_CATALOGUE["tree-medium"]}
DEPART = pd.DatetimeIndex([pd.Timestamp("2026-07-15T13:00", tz="Europe/Madrid")]).tz_convert("UTC")


@pytest.fixture(scope="module")
def street(tmp_path_factory):
    from walkcomfort.routes.geometry import load_route
    from walkcomfort.routes.simulate import simulate_walk
    from walkcomfort.routes.weather import open_weather, parse_conditions

    scene = scene_from_local([(box(X0 - 100, Y0 - 24, X0, Y0 - 4), {"id": "b1", "kind": "building", "height_m": 20.0})],
                             LAT, LON, 0.0)
    lon, lat = scene.unproject(np.array([X0 - 100, X0 + 100]), np.array([Y0, Y0]))
    d = tmp_path_factory.mktemp("street")
    path = d / "street.geojson"
    path.write_text(json.dumps({"type": "FeatureCollection", "features": [{
        "type": "Feature", "properties": {"id": "street"},
        "geometry": {"type": "LineString", "coordinates": [[float(lon[0]), float(lat[0])],
                                                           [float(lon[1]), float(lat[1])]]}}]}))
    route = load_route(path, spacing_m=5, crs=scene.crs)
    weather = open_weather(None, parse_conditions("t_air_c=33,rh_pct=30,wind_ms=1.5"))
    walk = simulate_walk(route, DEPART, weather, scene=scene, timezone="Europe/Madrid")
    return {"scene": scene, "route": route, "walk": walk, "weather": weather, "path": path, "dir": d}


def test_the_street_is_shaded_in_the_west_and_sunlit_in_the_east(street):
    # the premise of the tests below, from the geometry: shadow 20 m / tan(68°) ≈ 8 m > 4 m
    w = street["walk"]
    west = w["x_m"] < X0 - 5
    east = w["x_m"] > X0 + 5
    assert (w.loc[west, "shade_frac"] > 0.99).all()
    assert (w.loc[east, "shade_frac"] < 0.01).all()


def test_first_pick_lies_in_the_sunlit_stretch(street):
    sites = sites_along_routes([street["route"]], street["scene"], offset_m=3, spacing_m=10)
    adv = advise([street["walk"]], street["scene"], sites, TREE, max_count=3)
    first = adv.selection.chosen[0]
    assert first.x_m > X0, "the first tree must shade the sunlit eastern half"
    assert all(g > 0 for g in adv.selection.gains)


def test_a_site_that_shades_no_walk_point_is_never_picked(street):
    scene = street["scene"]
    far_x, far_y = np.array([X0 + 50]), np.array([Y0 + 40])  # 40 m north: its shadow falls further north
    lon, lat = scene.unproject(far_x, far_y)
    far = pd.DataFrame({"site_id": ["far"], "x_m": far_x, "y_m": far_y, "lon": lon, "lat": lat, "origin": ["test"]})
    sites = pd.concat([sites_along_routes([street["route"]], scene, offset_m=3, spacing_m=10), far],
                      ignore_index=True)
    adv = advise([street["walk"]], scene, sites, TREE, max_count=50)
    assert "far" not in {o.site_id for o in adv.selection.chosen}
    far_opt = [o for o in adv.options if o.site_id == "far"]
    assert far_opt and far_opt[0].rows.size == 0


def _options(street, spacing_m=3.0):
    scene = street["scene"]
    sites = sites_along_routes([street["route"]], scene, offset_m=3, spacing_m=spacing_m)
    kept, _ = screen_sites(sites, scene)
    table = add_scene_xy(walk_table([street["walk"]]), scene)
    return table, trace_options(table, scene, kept, TREE)


def test_overlapping_shadows_are_not_credited_twice(street):
    table, options = _options(street, spacing_m=3.0)
    obj = PhysicsObjective(table)
    useful = sorted((o for o in options if o.rows.size), key=lambda o: -obj.gain(o))
    a = useful[0]
    b = next(o for o in useful[1:] if np.intersect1d(o.rows, a.rows).size)
    together = obj.set_gain([a, b])
    assert together < obj.gain(a) + obj.gain(b) - 1e-9
    assert together > max(obj.gain(a), obj.gain(b))  # the second crown still removes part of what was left


def test_greedy_against_exhaustive_search_on_a_small_case(street):
    table, options = _options(street, spacing_m=4.0)
    obj = PhysicsObjective(table)
    useful = sorted((o for o in options if o.rows.size), key=lambda o: -obj.gain(o))[:8]
    best, best_gain = exhaustive(useful, obj, 3)
    obj.reset()
    sel = greedy(useful, obj, max_count=3)
    ratio = sel.total / best_gain
    print(f"greedy / optimum = {ratio:.4f} on {len(useful)} candidates, budget 3")  # 8 <= 12: the small case
    # lower bound: (1 - 1/e) for monotone submodular objectives (Nemhauser, Wolsey & Fisher 1978)
    assert ratio >= 1 - 1 / np.e
    assert ratio <= 1 + 1e-9


def test_a_cost_budget_is_never_exceeded(street):
    cat = {"tree-medium": DEFAULT_CATALOGUE["tree-medium"], "canopy-panel": DEFAULT_CATALOGUE["canopy-panel"]}
    sites = sites_along_routes([street["route"]], street["scene"], offset_m=3, spacing_m=10)
    adv = advise([street["walk"]], street["scene"], sites, cat, max_cost=5.0)
    assert 0 < adv.selection.cost <= 5.0
    assert len({o.site_id for o in adv.selection.chosen}) == len(adv.selection.chosen)


def test_screening_keeps_a_reason_for_every_excluded_site(street):
    sites = sites_along_routes([street["route"]], street["scene"], offset_m=3, spacing_m=5)
    kept, excluded = screen_sites(sites, street["scene"])
    assert len(kept) + len(excluded) == len(sites)
    assert len(excluded) > 0 and excluded["reason"].str.len().gt(0).all()


def test_the_written_scheme_reproduces_the_gain_in_the_full_comparison(street):
    from walkcomfort.routes.placement.outputs import scheme_geojson
    from walkcomfort.routes.placement.verify import verify_with_comparison
    from walkcomfort.routes.schemes import scheme_from_geojson

    sites = sites_along_routes([street["route"]], street["scene"], offset_m=3, spacing_m=10)
    adv = advise([street["walk"]], street["scene"], sites, TREE, max_count=3)
    scheme = scheme_from_geojson(scheme_geojson(adv, street["scene"], "advised"))
    v = verify_with_comparison(adv, [street["route"]], scheme, DEPART, street["weather"], street["scene"],
                               timezone="Europe/Madrid")
    # the advisor evaluates every pick through the same chain with the items built (their shade on
    # the walker and on the ground and walls around, the sky they hide), so the full comparison of
    # the written scheme gives the same gain; 2 % leaves room for the walk simulated anew
    assert v["compare_gain"] > 0
    assert abs(v["relative_difference"]) < 0.02, v["text"]


def test_catalogue_errors_are_one_line(tmp_path):
    bad = tmp_path / "cat.json"
    bad.write_text('{"t": {"kind": "tree", "height_m": 5, "transmissivity": 0.2, "crown_radius_m": 2, "colour": 1}}')
    with pytest.raises(InputError, match="unknown key"):
        load_catalogue(bad)
    bad.write_text('{"t": {"kind": "tree", "height_m": 5, "transmissivity": 1.7, "crown_radius_m": 2}}')
    with pytest.raises(InputError, match="transmissivity"):
        load_catalogue(bad)


def test_advise_command_writes_a_scheme_that_compare_reads(street, capsys):
    from walkcomfort.cli import main
    from walkcomfort.routes.placement.outputs import FILES
    from walkcomfort.routes.schemes import load_scheme

    scene_path = street["dir"] / "scene.geojson"
    scene_path.write_text(json.dumps(street["scene"].to_geojson()))
    out = street["dir"] / "advice"
    code = main(["advise", str(street["path"]), "--scene", str(scene_path), "--conditions",
                 "t_air_c=33,rh_pct=30,wind_ms=1.5", "--depart", "2026-07-15T13:00", "--timezone", "Europe/Madrid",
                 "--count", "2", "--check-optimum", "-o", str(out)])
    text = capsys.readouterr().out
    assert code == 0, text
    assert {p.name for p in out.iterdir()} == set(FILES)
    assert "licensed professional" in (out / "advice.md").read_text()
    assert "ratio" in (out / "advice.md").read_text()
    scheme = load_scheme(out / "scheme.geojson")
    assert len(scheme.edits) == 2
    cmp_out = street["dir"] / "cmp"
    assert main(["compare", str(street["path"]), "--scene", str(scene_path), "--scheme", str(out / "scheme.geojson"),
                 "--conditions", "t_air_c=33,rh_pct=30,wind_ms=1.5", "--depart", "2026-07-15T13:00",
                 "--timezone", "Europe/Madrid", "--no-reasons", "-o", str(cmp_out)]) == 0
    comparison = pd.read_csv(cmp_out / "comparison.csv")
    assert (comparison["delta_heat_dose_cmin"] < 0).all()


def test_advise_without_a_budget_is_one_line(street, capsys):
    from walkcomfort.cli import main

    scene_path = street["dir"] / "scene2.geojson"
    scene_path.write_text(json.dumps(street["scene"].to_geojson()))
    code = main(["advise", str(street["path"]), "--scene", str(scene_path), "--conditions",
                 "t_air_c=33,rh_pct=30,wind_ms=1.5", "--depart", "2026-07-15T13:00", "-o",
                 str(street["dir"] / "x")])
    err = capsys.readouterr().err
    assert code == 2
    assert "--count/--cost" in err and len(err.strip().splitlines()) == 1


def test_the_advisor_response_reproduces_the_chain_on_the_base_scene(street):
    # the advisor re-evaluates Tmrt and UTCI for a new beam transmittance; with the base beam it
    # must give back exactly what the environment chain gave the walk (same formulas, same inputs)
    from walkcomfort.routes.placement.select import environment_with_beam

    table = add_scene_xy(walk_table([street["walk"]]), street["scene"])
    tmrt, utci = environment_with_beam(table, np.arange(len(table)), table["beam_trans_frac"].to_numpy(float))
    np.testing.assert_allclose(tmrt, table["tmrt_c"].to_numpy(float), atol=1e-9)
    np.testing.assert_allclose(utci, table["utci_c"].to_numpy(float), atol=1e-9)


def test_comfort_objective_gains_carry_the_fold_interval(street, folded_bundle):
    from walkcomfort.routes.predict import Predictor

    pred = Predictor.from_bundle(folded_bundle)
    sites = sites_along_routes([street["route"]], street["scene"], offset_m=3, spacing_m=10)
    adv = advise([street["walk"]], street["scene"], sites, TREE, objective="comfort", max_count=2,
                 predictor=pred)
    ranked = adv.ranked()
    assert len(ranked) >= 1
    lo, g, hi = ranked["marginal_gain_lo"], ranked["marginal_gain"], ranked["marginal_gain_hi"]
    assert np.isfinite(lo).all() and (lo <= g + 1e-12).all() and (g <= hi + 1e-12).all()
    # the physics objective has no model error to carry
    phys = advise([street["walk"]], street["scene"], sites, TREE, max_count=2).ranked()
    assert phys["marginal_gain_lo"].isna().all()


def test_comfort_objective_without_a_model_is_refused(street):
    from walkcomfort.routes.predict import Predictor

    sites = sites_along_routes([street["route"]], street["scene"], offset_m=3, spacing_m=10)
    with pytest.raises(InputError, match="needs a comfort model"):
        advise([street["walk"]], street["scene"], sites, TREE, objective="comfort", max_count=2,
               predictor=Predictor(None))
