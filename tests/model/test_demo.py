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


@pytest.mark.slow
def test_no_shade_adding_scheme_lowers_comfort_beyond_the_model_error(demo_thermal, tmp_path, capsys):
    """The demo's planned-route model (monotone in heat) on the demo routes: adding shade never costs
    expected comfortable minutes outside the fold-model interval, at any departure of the day."""
    import pandas as pd

    from walkcomfort.demo.scenario import DESIGN_DAY
    from walkcomfort.demo.town import TIMEZONE

    demo = Path(__file__).resolve().parents[2] / "demo_walks"
    bundle = tmp_path / "planned"
    assert main(["fit", str(demo_thermal), "-o", str(bundle), "--feature-set", "planned", "--bootstrap", "0"]) == 0
    fit_out = capsys.readouterr().out
    assert "history gain is" in fit_out and "interval over 8 walkers" in fit_out
    adding = [demo / "schemes" / f"{s}.geojson" for s in ("trees-costa", "canopy-placa")]
    for rid in ("estacio-escola", "mercat-parc"):
        out = tmp_path / rid
        args = ["compare", str(demo / "routes" / f"{rid}.geojson"), *[a for p in adding for a in ("--scheme", str(p))],
                "-o", str(out), "--scene", str(demo / "scene.geojson"), "--weather",
                str(demo / "weather" / "design-day.csv"), "--logger-wind-height", "1.1", "--timezone", TIMEZONE,
                "--depart", f"{DESIGN_DAY}T08:00..{DESIGN_DAY}T20:00/1h", "--model", str(bundle),
                "--walker", "clo=0.5,acclimatised=1,age_band=25-34", "--no-reasons"]
        assert main(args) == 0
        cmp_ = pd.read_csv(out / "comparison.csv")
        assert len(cmp_) == 2 * 13 and cmp_["delta_exp_min_comfortable_lo"].notna().all()
        # shade added: the interval's upper end is never below 0 (no loss beyond the model error)
        worst = cmp_.loc[cmp_["delta_exp_min_comfortable_hi"].idxmin()]
        assert (cmp_["delta_exp_min_comfortable_hi"] >= 0).all(), worst.to_dict()
        # the schemes add shade (the premise of the check)
        assert (cmp_["delta_shade_share"] >= 0).all() and (cmp_["delta_shade_share"] > 0).any()
