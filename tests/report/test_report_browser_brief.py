"""The one-page brief: printed by headless Chromium, one page, the comparison's own numbers."""

from __future__ import annotations

import _report_synth as S
import pandas as pd
import pytest

from walkcomfort import _io
from walkcomfort.cli import main
from walkcomfort.report.brief import signed

pytestmark = pytest.mark.browser


def _comparison_folder(folder, label_scheme=None):
    # three schemes and a long notice: the page must still be one
    pred = S.predictions(schemes=("base", "trees", "awnings", "pergola"))
    meta = {"attrs": {"session": {"timezone": "Europe/Madrid", "site": "Invented square", "clo": 0.5},
                      "route_id": "r1", "weather": "stated conditions", "predictor": "physics-rule",
                      "notices": ["an invented table; " * 12]}}
    _io.write_parquet(folder / "points.parquet", pred, meta)
    summ = S.summaries(pred)
    _io.write_parquet(folder / "summary.parquet", summ, meta)
    comp = S.comparison(pred, half_width_min=0.8)
    _io.write_csv(folder / "comparison.csv", comp, index=False)
    best = summ.sort_values(["scheme", "exp_share_comfortable"], ascending=[True, False]).groupby("scheme").head(1)
    _io.write_csv(folder / "best_departures.csv", best, index=False)
    return comp, best


def test_brief_is_one_page_with_the_comparison_numbers(tmp_path, artifacts_dir, capsys):
    from pypdf import PdfReader

    folder = tmp_path / "cmp"
    comp, best = _comparison_folder(folder)
    scheme = _io.write_json(tmp_path / "trees.geojson", S.scheme(name="trees", label="More street trees"))
    assert main(["brief", str(folder), "--scheme", str(scheme), "--scene", str(_io.write_json(
        tmp_path / "scene.geojson", S.scene()))]) == 0
    out = capsys.readouterr().out
    assert "brief_r1.html" in out and "brief_r1.pdf" in out
    reader = PdfReader(str(folder / "brief_r1.pdf"))
    assert len(reader.pages) == 1
    text = " ".join(reader.pages[0].extract_text().split())
    # the headline row: the scheme's best departure and comparison.csv's numbers at it
    b = best[best["scheme"] == "trees"].iloc[0]
    row = comp[pd.to_datetime(comp["departure"], utc=True) == pd.Timestamp(b["departure"]).tz_convert("UTC")].iloc[0]
    for number in (signed(row["delta_exp_min_comfortable"], 1), signed(row["delta_exp_min_comfortable_lo"], 1),
                   signed(row["delta_exp_min_comfortable_hi"], 1), signed(row["delta_heat_dose_cmin"], 0),
                   signed(row["delta_peak_utci_c"], 1)):
        assert number in text, (number, text)
    assert pd.Timestamp(b["departure"]).tz_convert("Europe/Madrid").strftime("%H:%M") in text
    for words in ("More street trees", "Invented square", "Tue 14 Jul 2026", "stated conditions", "clothing 0.5 clo",
                  "licensed professional practice", "within model error"):
        assert words in text, (words, text)
    html = (folder / "brief_r1.html").read_text()
    assert 'http-equiv="Content-Security-Policy"' in html and 'src="data:image/png;base64,' in html
    import base64
    import re

    png = base64.b64decode(re.search(r'src="data:image/png;base64,([^"]+)"', html).group(1))
    (artifacts_dir / "brief_map_snapshot.png").write_bytes(png)
    assert len(png) > 5_000  # a drawn map, not an empty frame


def test_brief_without_chromium_or_comparison_is_one_line(tmp_path, monkeypatch, capsys):
    folder = tmp_path / "cmp"
    _comparison_folder(folder)
    assert main(["brief", str(folder), "--no-pdf", "-o", str(tmp_path / "out")]) == 0
    assert (tmp_path / "out" / "brief_r1.html").is_file() and not (tmp_path / "out" / "brief_r1.pdf").exists()
    monkeypatch.setenv("WALKCOMFORT_CHROMIUM", str(tmp_path / "no-chromium"))
    monkeypatch.setenv("PATH", str(tmp_path))
    assert main(["brief", str(folder)]) == 2
    err = capsys.readouterr().err.strip()
    assert "Chromium" in err and "\n" not in err
    assert main(["brief", str(tmp_path)]) == 2
    assert "comparison.csv" in capsys.readouterr().err
