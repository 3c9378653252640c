"""End to end on the invented demo town (demo_walks/): its routes, schemes and design-day logger series."""

from __future__ import annotations

import json

import pandas as pd
import pytest

from walkcomfort.cli import main


@pytest.mark.slow
def test_compare_on_the_demo_market_route(demo_dir, tmp_path):
    if not (demo_dir / "scene.geojson").exists():
        pytest.fail("demo_walks/ is missing; regenerate it with walkcomfort demo --regenerate")
    out = tmp_path / "mercat-parc"
    args = ["compare", str(demo_dir / "routes" / "mercat-parc.geojson"), "--scene", str(demo_dir / "scene.geojson"),
            "--scheme", str(demo_dir / "schemes" / "canopy-placa.geojson"),
            "--scheme", str(demo_dir / "schemes" / "pruned-passeig.geojson"),
            "--weather", str(demo_dir / "weather" / "design-day.csv"), "--logger-wind-height", "1.1",
            "--timezone", "Europe/Madrid", "--depart", "2026-07-15T13:00..2026-07-15T17:00/4h", "-o", str(out)]
    assert main(args) == 0
    summary = pd.read_csv(out / "summary.csv")
    assert len(summary) == 3 * 2  # base + 2 schemes, 2 departures
    comp = pd.read_csv(out / "comparison.csv").set_index("scheme")
    canopy = comp.loc["canopy-placa"]
    # the canopy over the square covers part of the market route: more shade, lower mean UTCI at midday
    assert (canopy["delta_shade_share"] > 0.02).all()
    assert (canopy["delta_mean_utci_c"] < 0).all()
    cost = pd.read_csv(out / "cost_effectiveness.csv").set_index("scheme")
    assert cost.loc["canopy-placa", "shade_m2_added"] == pytest.approx(2288, rel=0.01)  # demo README's table
    assert cost.loc["pruned-passeig", "trees_removed"] == 2
    gj = json.loads((out / "points.geojson").read_text())
    assert {f["properties"]["scheme"] for f in gj["features"]} == {"base", "canopy-placa", "pruned-passeig"}


def test_demo_route_reads_the_same_from_gpx_and_geojson(demo_dir):
    from walkcomfort.routes.geometry import load_route

    a = load_route(demo_dir / "routes" / "estacio-escola.geojson")
    b = load_route(demo_dir / "routes" / "estacio-escola.gpx")
    assert a.length_m == pytest.approx(b.length_m, abs=0.01)
    assert a.points["elev_m"].to_numpy() == pytest.approx(b.points["elev_m"].to_numpy(), abs=0.05)
    assert a.elevation_source == b.elevation_source == "file"
