"""The session report opened in the real browser, offline: plots decode, nothing runs, nothing is fetched."""

from __future__ import annotations

import _report_synth as S
import pytest

from walkcomfort import columns as C
from walkcomfort.report.session_report import write_session_report

pytestmark = pytest.mark.browser


def test_session_report_renders_offline(browser, tmp_path, artifacts_dir):
    w = S.timeline(note=S.XSS_NOTE)
    w[C.QA_GPS_JUMP] = False
    w.iloc[200:215, w.columns.get_loc(C.QA_GPS_JUMP)] = True
    qa = {"summary": {"rows_read": 1200, "rows_used": 1195, "rows_quarantined": 5, "reconciles": True},
          "sources": {"weather": {"kind": "weather", "file": "logger/w.csv", "rows_read": 600, "rows_used": 595,
                                  "rows_quarantined": 5, "reconciles": True,
                                  "quarantine_reasons": {"out_of_range:t_air_c": 5}}}}
    out = write_session_report(w, qa, tmp_path / "session.html")
    browser.context.set_offline(True)
    page = browser.new_page(1100, 900)
    page.goto(out.as_uri())
    page.wait_for_load_state("load")
    sizes = page.evaluate("() => Array.from(document.images).map(i => [i.complete, i.naturalWidth])")
    assert len(sizes) == 2 and all(ok and width > 400 for ok, width in sizes)
    assert page.locator("table.votes td", has_text="window.__pwned=1").count() == 1
    assert page.evaluate("typeof window.__pwned") == "undefined"
    assert all(u.startswith(("file:", "data:")) for u in browser.requests), browser.requests
    page.screenshot(path=str(artifacts_dir / "session_report.png"), full_page=True)
    assert browser.console_errors == [] and browser.page_errors == [] and browser.dialogs == []
