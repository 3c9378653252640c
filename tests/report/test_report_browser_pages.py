"""Every HTML page walkcomfort writes, opened in Chromium with hostile text in every user string.

Script tags, event-handler attributes, backticks and ``javascript:`` links in notes, names,
labels and notices must show as text and run nothing: a sentinel stays unset, with the
page's Content-Security-Policy and with it removed (escaping alone).
"""

from __future__ import annotations

import re

import _report_synth as S
import pytest

from walkcomfort import _io
from walkcomfort.report.session_report import write_session_report
from walkcomfort.routes.outputs import summary_html

pytestmark = pytest.mark.browser

HOSTILE = (S.XSS_NOTE + " " + S.XSS_LABEL + ' <a href="javascript:window.__pwned=8">link</a> '
           "<svg onload=window.__pwned=9></svg> `${window.__pwned=10}`")
_CSP = re.compile(r'<meta http-equiv="Content-Security-Policy" content="[^"]*">\n?')


def _pages(tmp_path) -> dict:
    w = S.timeline(note=HOSTILE)
    w.attrs["session"] = dict(w.attrs["session"], site=HOSTILE, participant=HOSTILE)
    pages = {"session": write_session_report(w, {"warnings": [HOSTILE]}, tmp_path / "session.html", title=HOSTILE)}
    md = "\n".join([f"# {HOSTILE}", "", f"- Weather: {HOSTILE}", "", f"> Note: {HOSTILE}", "", f"## {HOSTILE}", "",
                    "| scheme | value |", "|---|---|", f"| {HOSTILE.replace('|', '/')} | 1 |", ""])
    pages["summary"] = _io.atomic_write_text(tmp_path / "summary.html", summary_html(md, images=(
        (HOSTILE, b"\x89PNG\r\n\x1a\n"),)))
    return pages


@pytest.mark.parametrize("csp", [True, False], ids=["with-csp", "escaping-alone"])
def test_hostile_text_runs_nothing_in_reports(browser, served, tmp_path, csp):
    from walkcomfort.report.brief import brief_html

    pages = _pages(tmp_path)
    pages["brief"] = _io.atomic_write_text(tmp_path / "brief.html", brief_html(
        HOSTILE, {k: HOSTILE for k in ("site", "date", "weather", "design_day", "walker", "model")},
        [{"scheme": HOSTILE, "departure": HOSTILE, "d_comf": HOSTILE, "d_dose": HOSTILE, "d_peak": HOSTILE}],
        None, HOSTILE, HOSTILE, [HOSTILE]))
    browser.allowed_origin = served.origin
    for name, path in pages.items():
        text = path.read_text()
        assert _CSP.search(text), name  # every page carries the shared policy
        if not csp:
            path.write_text(_CSP.sub("", text))
        page = browser.new_page()
        page.goto(served.url(path.name))
        page.wait_for_load_state("load")
        page.wait_for_timeout(300)  # give an injected onerror/onload the chance to fire
        assert page.evaluate("typeof window.__pwned") == "undefined", name
        assert page.locator("a[href^='javascript:'], svg[onload], img[onerror], script:not([type])").count() == 0, name
        assert "window.__pwned=1" in page.locator("body").inner_text(), name  # shown as text
        page.close()
    assert browser.page_errors == [] and browser.dialogs == []
