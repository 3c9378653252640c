"""Heat safety of a recorded walk: the limits table, time above it, the ingest caution and qa.json."""

from __future__ import annotations

import json
import re
import shutil
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from walkcomfort.cli import main
from walkcomfort.session import heat_safety as H
from walkcomfort.session.timeline import build_timeline

REPO = Path(__file__).resolve().parents[2]
WALK_OK = REPO / "tests" / "fixtures" / "sessions" / "walk_ok"
LOGGER_STEP_S = 10


def _f(c):
    return c * 9 / 5 + 32


def _walk_with_hot_spell(tmp_path, hot_from_s=120, hot_s=360, acclimatised=True):
    """The fixture walk (10:00–10:10 local) with a logger every 10 s: cool, then hot for ``hot_s``."""
    d = tmp_path / "w"
    shutil.copytree(WALK_OK, d)
    rows = ["DateTime,Temp_F,RH,Wind_kmh,Globe_F"]
    for s in range(-20, 620, LOGGER_STEP_S):
        hot = hot_from_s <= s < hot_from_s + hot_s
        ta, rh, globe = (34.0, 55.0, 48.0) if hot else (26.0, 40.0, 30.0)
        x = 10 * 3600 + s + 7  # the logger's clock is 7 s ahead (the fixture's sync event)
        rows.append(f"2026-07-14 {x // 3600:02d}:{x % 3600 // 60:02d}:{x % 60:02d},{_f(ta):.3f},{rh},5.0,{_f(globe):.3f}")
    (d / "logger" / "weather.csv").write_text("\n".join(rows) + "\n")
    if not acclimatised:
        p = d / "session.toml"
        p.write_text(p.read_text().replace("acclimatised = true", "acclimatised = false"))
    return d


def test_six_minutes_above_the_limit_are_reported_as_six(tmp_path):
    tl = build_timeline(_walk_with_hot_spell(tmp_path))
    hs = H.walk_heat_safety(tl.data)
    assert hs["assessed"] and hs["limit"]["limit_c"] == 28.0  # moderate, acclimatised, 0.5 clo
    # the hot readings clear the limit and the cool ones stay below it, so the crossing is the spell
    assert hs["peak_wbgt_c"] > 29.0
    assert hs["minutes_above"] == pytest.approx(6.0, abs=LOGGER_STEP_S / 60)  # ± one logger interval
    (ep,) = hs["episodes"]
    assert ep["start"].startswith("2026-07-14T10:02") or ep["start"].startswith("2026-07-14T10:01:5")
    assert ep["start"].endswith("+02:00")  # local time of the session
    assert ep["minutes"] == hs["minutes_above"]
    assert "6" in hs["caution"] and "28 °C" in hs["caution"]


def test_ingest_prints_one_caution_line_and_writes_heat_safety(tmp_path, capsys):
    d = _walk_with_hot_spell(tmp_path, acclimatised=False)
    assert main(["ingest", str(d), "-o", str(tmp_path / "out")]) == 0
    lines = [x for x in capsys.readouterr().out.splitlines() if x.strip().startswith("caution:")]
    assert len(lines) == 1 and "not acclimatised" in lines[0] and "26 °C" in lines[0]
    qa = json.loads((tmp_path / "out" / "fixture-p01-am" / "qa.json").read_text())
    hs = qa["heat_safety"]
    assert hs["limit"]["limit_c"] == 26.0 and hs["minutes_above"] >= 6.0 - LOGGER_STEP_S / 60
    assert hs["episodes"] and hs["caveats"]


def test_no_caution_when_the_walk_stays_below(tmp_path, capsys):
    d = _walk_with_hot_spell(tmp_path, hot_s=0)
    assert main(["ingest", str(d), "-o", str(tmp_path / "out")]) == 0
    assert "caution:" not in capsys.readouterr().out
    hs = json.loads((tmp_path / "out" / "fixture-p01-am" / "qa.json").read_text())["heat_safety"]
    assert hs["assessed"] and hs["minutes_above"] == 0 and hs["episodes"] == [] and hs["caution"] is None


def test_walk_without_globe_is_not_assessed_and_says_why():
    idx = pd.date_range("2026-07-14 08:00", periods=5, freq="1s", tz="UTC")
    df = pd.DataFrame({"t_air_c": 30.0, "rh_pct": 40.0, "wind_ms": 1.0}, index=idx)
    df.attrs["session"] = {"globe_diameter_m": 0.038, "timezone": "Europe/Madrid", "step_s": 1.0}
    hs = H.walk_heat_safety(df)
    assert not hs["assessed"] and "t_globe_c" in hs["reason"] and hs["caution"] is None


@pytest.mark.parametrize(("clo", "accl", "activity", "limit", "n_assumed"), [
    (0.5, True, "walking", 28.0, 0),     # ISO 7243 moderate class, acclimatised (from memory)
    (0.5, False, "walking", 26.0, 0),    # not acclimatised
    (None, None, None, 26.0, 3),         # unknowns: the cautious reading, each stated
    (1.4, True, "walking", 25.0, 0),     # double-layer clothing: +3 °C clothing adjustment
    (0.6, True, "sitting", 33.0, 0),     # resting class
    (0.6, False, "cycling", 26.0, 1),    # unknown activity taken as walking
])
def test_walker_limit_from_the_one_table(clo, accl, activity, limit, n_assumed):
    lim = H.walker_limit(clo, accl, activity)
    assert lim["limit_c"] == limit and len(lim["assumptions"]) == n_assumed


def test_safety_document_reproduces_the_table_in_code():
    text = (REPO / "field_protocol" / "safety.md").read_text(encoding="utf-8")
    lines = [x.strip() for x in text.splitlines()]
    want = [x for x in H.reference_table_markdown() if x]
    start = lines.index(want[0])
    got = [x for x in lines[start:start + len(want) + 1] if x]
    assert got == want
    # every number the document quotes for WBGT limits is one of the table's
    quoted = {float(m) for m in re.findall(r"WBGT[^|\n]{0,80}?(\d\d) °C", text)}
    assert quoted <= {r.wbgt_c for r in H.WBGT_REFERENCE_VALUES}


def test_time_above_counts_steps_merges_close_runs_and_skips_missing():
    idx = pd.date_range("2026-07-14 08:00", periods=400, freq="1s", tz="UTC")
    v = np.full(400, 25.0)
    v[10:70] = 29.0       # 60 s
    v[90:100] = 29.0      # 10 s, 20 s after: same episode
    v[300:330] = 29.0     # 30 s, far: a second episode
    v[200:250] = np.nan   # unknown, not counted
    out = H.time_above(pd.Series(v, idx), 28.0, 1.0, "Europe/Madrid")
    assert out["minutes_above"] == pytest.approx(100 / 60, abs=0.01)
    assert out["minutes_unknown"] == pytest.approx(50 / 60, abs=0.01)
    assert [e["minutes"] for e in out["episodes"]] == [pytest.approx(70 / 60, abs=0.01), pytest.approx(0.5)]
    assert out["episodes"][0]["start"] == "2026-07-14T10:00:10+02:00"
    assert out["episodes"][0]["end"] == "2026-07-14T10:01:40+02:00"


def test_report_lines_name_the_limit_the_episodes_and_the_caveats(tmp_path):
    hs = H.walk_heat_safety(build_timeline(_walk_with_hot_spell(tmp_path)).data)
    lines = H.report_lines(hs)
    assert lines[0].startswith("WBGT limit 28 °C (moderate activity, acclimatised")
    assert any(x.strip().startswith("10:0") and "min above" in x for x in lines)
    assert sum(x.startswith("note:") for x in lines) == len(hs["caveats"])
    assert H.report_lines({}) == []
    assert "not assessed" in H.report_lines({"assessed": False, "reason": "no globe", "limit": {}})[1]
