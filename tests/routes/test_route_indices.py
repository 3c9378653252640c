"""``route``/``compare --index pet``: PET beside the comfort figures of planned walks."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from walkcomfort.cli import main
from walkcomfort.environment import pet as P


def test_compare_with_pet_reports_the_time_weighted_mean_and_classes(tmp_path, demo_dir, capsys):
    out = tmp_path / "c"
    scheme = sorted((demo_dir / "schemes").glob("*.geojson"))[0]
    code = main(["compare", str(demo_dir / "routes" / "mercat-parc.geojson"), "--scene", str(demo_dir / "scene.geojson"),
                 "--scheme", str(scheme), "--conditions", "t_air_c=33,rh_pct=40,wind_ms=1.5,wind_height_m=10",
                 "--depart", "2026-07-15T13:00+02:00", "--timezone", "Europe/Madrid", "--no-reasons",
                 "--index", "pet", "-o", str(out)])
    assert code == 0
    assert "mean PET" in capsys.readouterr().out
    pts = pd.read_parquet(out / "points.parquet")
    summary = pd.read_csv(out / "summary.csv")
    for _, row in summary.iterrows():
        walk = pts[pts["scheme"] == row["scheme"]]
        mean = np.average(walk[P.PET_C], weights=walk["step_s"])
        assert row["mean_pet_c"] == pytest.approx(mean, rel=1e-9)  # from the definition of a time-weighted mean
        assert row["peak_pet_c"] == pytest.approx(walk[P.PET_C].max())
    assert (pts[P.PET_CLASS] == P.pet_class(pts[P.PET_C])).all()
    # a hot afternoon: PET warmer in sun than in shade, and within the plausible outdoor range
    sunlit = pts["shade_frac"] < 0.5
    assert pts.loc[sunlit, P.PET_C].mean() > pts.loc[~sunlit, P.PET_C].mean()
    assert pts[P.PET_C].between(20.0, 65.0).all()


def test_unknown_index_is_a_usage_error(tmp_path, demo_dir):
    code = main(["route", str(demo_dir / "routes" / "mercat-parc.geojson"), "--conditions",
                 "t_air_c=33,rh_pct=40,wind_ms=1.5,wind_height_m=10", "--depart", "2026-07-15T13:00+02:00",
                 "--index", "pmv", "-o", str(tmp_path / "r")])
    assert code == 2
