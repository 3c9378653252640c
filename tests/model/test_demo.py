"""On the demo sessions (invented town): ingest → thermal → fit, validated on walkers it never saw.

The demo's invented comfort process depends on the recent exposure history (demo_walks/README.md,
walkcomfort/demo/latent.py); the check is the ordering of the scores, not a magic number.
"""

from __future__ import annotations

import json
import warnings
from pathlib import Path

import pytest

from walkcomfort import _io
from walkcomfort.cli import main
from walkcomfort.errors import DataQualityWarning


@pytest.fixture(scope="module")
def demo_thermal(tmp_path_factory):
    demo_dir = Path(__file__).resolve().parents[2] / "demo_walks"
    sessions = sorted(p for p in (demo_dir / "sessions").glob("*") if (p / "session.toml").is_file())
    if len(sessions) < 4:
        pytest.skip("demo_walks/sessions is not generated in this checkout")
    from walkcomfort.environment.pipeline import add_environment
    from walkcomfort.environment.scene import load_scene
    from walkcomfort.session.timeline import build_timeline

    scene = load_scene(demo_dir / "scene.geojson")
    out = tmp_path_factory.mktemp("demo_thermal")
    with warnings.catch_warnings():
        # the demo plants sensor imperfections on purpose; their warnings are the ingest's business
        warnings.simplefilter("ignore", DataQualityWarning)
        for d in sessions:
            tl = build_timeline(d).data
            env = add_environment(tl, scene, warn=False)
            session = dict(env.attrs.get("session") or tl.attrs["session"])
            data = env.copy()
            data.attrs = {}
            _io.write_parquet(out / session["walk_id"] / "timeline.parquet", data,
                              {"session": session, "provenance": {}})
    return out


@pytest.mark.slow
def test_history_model_beats_both_baselines_on_the_demo(demo_thermal, tmp_path, capsys):
    bundle = tmp_path / "model"
    assert main(["fit", str(demo_thermal), "-o", str(bundle), "--folds", "4", "--bootstrap", "20"]) == 0
    out = capsys.readouterr().out
    print(out)
    m = json.loads((bundle / "metrics.json").read_text())["cv"]["metrics"]
    f1 = {k: v["macro_f1"] for k, v in m.items()}
    assert f1["history"] > f1["logistic"] and f1["history"] > f1["physics"] and f1["history"] > f1["majority"]
    # the bundle scored on its own training votes prints the report's in-sample numbers
    assert main(["evaluate", str(bundle), str(demo_thermal)]) == 0
    ev = capsys.readouterr().out
    in_sample = json.loads((bundle / "metrics.json").read_text())["in_sample"]
    assert f"{in_sample['macro_f1']:.3f}" in ev and f"{in_sample['macro_f1']:.3f}" in (bundle / "report.html").read_text()
