"""The session report: content, escaping, QA reconciliation, atomic write, inputs from disk."""

from __future__ import annotations

import base64
import html.parser
import io
import json

import _report_synth as S
import pandas as pd
import pytest
from PIL import Image

from walkcomfort import columns as C
from walkcomfort.errors import InputError
from walkcomfort.report import session_report as SR

QA = {
    "walk_id": "tw-p01-am",
    "summary": {"rows_read": 1210, "rows_used": 1203, "rows_quarantined": 7, "reconciles": True,
                "gps_jumps": 2, "out_of_range_rows": 5},
    "sources": {
        "gps": {"kind": "gps", "file": "gps/track.gpx", "rows_read": 600, "rows_used": 598,
                "rows_quarantined": 2, "reconciles": True, "quarantine_reasons": {"gps_jump": 2}},
        "weather": {"kind": "weather", "file": "logger/w.csv", "rows_read": 610, "rows_used": 605,
                    "rows_quarantined": 5, "reconciles": True,
                    "quarantine_reasons": {"out_of_range:t_air_c": 3, "out_of_range:rh_pct": 2}},
    },
    "clocks": {"logger1": {"method": "sync", "offset_s": 7.0, "drift_ppm": 1.5, "residual_max_s": 0.2}},
    "warnings": ["weather: 3 rows <b>out of range</b>"],
}


class _Imgs(html.parser.HTMLParser):
    def __init__(self):
        super().__init__()
        self.imgs, self.tags = [], []

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))
        if tag == "img":
            self.imgs.append(dict(attrs)["src"])


def _parse(page):
    p = _Imgs()
    p.feed(page)
    return p


def test_report_has_plots_tables_and_escaped_notes(tmp_path):
    w = S.timeline(note=S.XSS_NOTE)
    w[C.QA_GPS_JUMP] = False
    w.iloc[100:110, w.columns.get_loc(C.QA_GPS_JUMP)] = True
    out = SR.write_session_report(w, QA, tmp_path / "r.html")
    page = out.read_text()
    parsed = _parse(page)
    # two embedded PNGs (time series, track map), nothing linked from outside
    assert len(parsed.imgs) == 2 and all(s.startswith("data:image/png;base64,") for s in parsed.imgs)
    sizes = [Image.open(io.BytesIO(base64.b64decode(s.split(",", 1)[1]))).size for s in parsed.imgs]
    assert sizes[0][0] == 1000 and sizes[0][1] > 600  # 10 in x 100 dpi, six panels tall
    assert not [t for t, a in parsed.tags if t in ("script", "link", "iframe")]  # the policy meta aside
    assert not [a for t, a in parsed.tags if any(k.startswith("on") for k in a)]
    # the note is text in a table cell, never markup
    assert "<script>window" not in page and "<img src=x" not in page
    assert "&lt;/script&gt;&lt;script&gt;window.__pwned=1&lt;/script&gt;" in page
    assert "&lt;b&gt;out of range&lt;/b&gt;" in page  # ingest warnings are escaped too
    # QA summary and quarantine counts from qa.json
    assert "all rows accounted for" in page
    assert "<td>GPS jumps</td><td>2</td>" in page
    assert "<td>weather</td><td>out_of_range:t_air_c</td><td>3</td>" in page
    assert "7 row(s) set aside" in page
    # flags in words, counted in steps and minutes (1 s steps: 10 steps = 0.2 min)
    assert "<td>GPS jump</td><td>10</td><td>0.2</td>" in page
    assert 'http-equiv="Content-Security-Policy"' in page and "script-src 'none'" in page.replace("&#x27;", "'")
    # local times in the session's zone (07:58Z is 09:58 CEST)
    assert "09:58:00 – 10:07:59 (Europe/Madrid)" in page
    assert "+2 (warm)" in page and "<td>0 (neutral)</td>" in page
    assert "heat" in page.lower() and "occupational-health" in page  # the field caution


def test_quarantine_table_wins_over_qa_counts():
    quar = pd.DataFrame({"source": ["gps", "gps", "votes"], "file": "x", "row": [3, 9, 2],
                         "reason": ["gps_jump", "gps_jump", "bad_comfort"], "raw": ""})
    counts = SR.quarantine_counts(QA, quar)
    assert counts.values.tolist() == [["gps", "gps_jump", 2], ["votes", "bad_comfort", 1]]
    assert SR.quarantine_counts(QA, None)["rows"].sum() == 7


def test_not_reconciling_is_shown_loudly(tmp_path):
    qa = json.loads(json.dumps(QA))
    qa["summary"]["reconciles"] = False
    page = SR.session_report_html(S.timeline(), qa)
    assert "rows do not reconcile" in page


def test_report_without_environment_or_position():
    w = S.timeline().drop(columns=[C.TMRT_C, C.UTCI_C, C.LAT, C.LON])
    page = SR.session_report_html(w, {})
    assert "run <code>walkcomfort thermal</code>" in page
    assert len(_parse(page).imgs) == 1  # no track map without positions
    assert "No qa.json was given" in page


def test_utci_bands_shade_the_temperature_panel():
    w = S.timeline()
    from walkcomfort.report.session_figures import timeseries_figure

    fig = timeseries_figure(w, __import__("zoneinfo").ZoneInfo("Europe/Madrid"))
    temp_ax = fig.axes[1]
    labels = {t.get_text() for t in temp_ax.texts}
    lo, hi = temp_ax.get_ylim()
    # every band that overlaps the axis range is drawn and named (bounds: Bröde et al. 2012)
    want = {name for low, high, name in C.UTCI_BANDS if low < hi and high > lo}
    assert labels == want
    assert "moderate heat stress" in want


def test_reads_an_ingest_folder(tmp_path):
    from walkcomfort import _io

    walk = tmp_path / "out" / "tw-p01-am"
    w = S.timeline()
    session = dict(w.attrs["session"], walk_id="tw-p01-am", participant="P01")
    data = w.copy()
    data.attrs = {}
    _io.write_parquet(walk / "timeline.parquet", data, {"session": session, "provenance": {"tool": "walkcomfort",
                                                                                           "inputs": {"a.csv": "sha256:00"}}})
    _io.write_json(walk / "qa.json", QA)
    _io.write_csv(walk / "quarantine.csv", pd.DataFrame({"source": ["gps"], "file": ["g"], "row": [1],
                                                          "reason": ["gps_jump"], "raw": [""]}), index=False)
    out = SR.write_session_report(walk, out_html=tmp_path / "rep.html")
    page = out.read_text()
    assert "<td>gps</td><td>gps_jump</td><td>1</td>" in page  # from quarantine.csv
    assert "sha256:00" in page  # provenance
    again = SR.write_session_report(walk, out_html=tmp_path / "rep2.html").read_bytes()
    assert again == out.read_bytes()  # same inputs, same bytes
    assert not list(tmp_path.glob(".rep*.part"))  # atomic write left no temp file


def test_bad_inputs():
    w = S.timeline()
    with pytest.raises(InputError, match="tz-aware"):
        SR.session_report_html(*SR.load_session(w.tz_localize(None))[:2])
    with pytest.raises(InputError, match="no rows"):
        SR.load_session(w.iloc[:0])
    with pytest.raises(InputError, match="no such"):
        SR.load_session("/nonexistent/walk")
    with pytest.raises(InputError, match="IANA"):
        SR.session_report_html(w, {}, timezone="Nowhere/Land")


def test_scene_is_drawn_under_the_track():
    from zoneinfo import ZoneInfo

    w = S.timeline()
    from walkcomfort.report.session_figures import track_figure

    plain = track_figure(w, ZoneInfo("UTC"))
    with_scene = track_figure(w, ZoneInfo("UTC"), S.scene())
    # the invented scene has one building, one tree crown and one canopy near the track
    assert len(plain.axes[0].patches) == 0
    assert len(with_scene.axes[0].patches) == 3
    with pytest.raises(InputError, match="not valid JSON"):
        SR.session_report_html(w, {}, scene=__file__)


def test_short_walk_time_axis_and_fitted_track_scale():
    import matplotlib.dates as mdates

    from walkcomfort.report import session_figures as F

    w = S.timeline(n=120)  # a two-minute walk
    zone = __import__("zoneinfo").ZoneInfo("Europe/Madrid")
    fig = F.timeseries_figure(w, zone)
    ax = fig.axes[0].get_shared_x_axes().get_siblings(fig.axes[0])[0]
    labels = [mdates.DateFormatter("%H:%M:%S")(v) for v in ax.get_xticks()]
    shown = [ax.xaxis.get_major_formatter()(v) for v in ax.get_xticks()]
    assert shown == labels and len(set(shown)) == len(shown) >= 3, shown  # seconds, no repeated labels
    # the track's colour scale spans only the bands the walk reaches, not -60…60 °C
    tf = F.track_figure(w, zone)
    bar = tf.axes[-1]
    lo, hi = bar.get_ylim()
    assert hi - lo < 30 and lo > -10, (lo, hi)
