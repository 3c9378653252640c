"""One escaping rule and one Content-Security-Policy for every HTML page walkcomfort writes.

It sits beside :mod:`walkcomfort._io` at the bottom of the layers, so every stage that
writes a page (routes' summary, the model report, the session report, the map, the brief)
uses the same rules.

User text (vote notes, scheme labels, site names, file names) never reaches a page as
markup: text in HTML goes through :func:`esc`, data for scripts through :func:`js_json`
(placed in ``<script type="application/json">`` blocks, never executed), and every page
carries the policy of :func:`policy`: no script runs unless it is one of the page's own
inline scripts, named by its SHA-256 hash, so an injected handler or ``javascript:`` link
cannot run even if an escape were missed.
"""

from __future__ import annotations

import base64
import hashlib
import html
import json
import re
from collections.abc import Iterable
from typing import Any

_JS_ESCAPES = {"<": "\\u003c", ">": "\\u003e", "&": "\\u0026", "\u2028": "\\u2028", "\u2029": "\\u2029"}
_JS_ESCAPE_RE = re.compile("[<>&\u2028\u2029]")
_INLINE_SCRIPT = re.compile(r"<script>(.*?)</script>", re.S)
CSP_META = '<meta http-equiv="Content-Security-Policy" content="{}">'


def esc(value: Any) -> str:
    """Text for HTML (element content or a quoted attribute): ``& < > " '`` escaped."""
    return html.escape("" if value is None else str(value), quote=True)


def js_json(obj: Any) -> str:
    """JSON text that can sit inside a ``<script>`` element.

    ``<``, ``>`` and ``&`` are written as ``\\u`` escapes (so no string can close the
    script element or open a comment), and so are U+2028/U+2029, which JSON allows in
    strings but older JavaScript parsers treat as line ends. NaN is refused.
    """
    text = json.dumps(obj, ensure_ascii=False, separators=(",", ":"), allow_nan=False)
    return _JS_ESCAPE_RE.sub(lambda m: _JS_ESCAPES[m.group(0)], text)


def json_block(element_id: str, obj: Any) -> str:
    """A ``<script type="application/json">`` data block (read with ``JSON.parse``, never run)."""
    return f'<script type="application/json" id="{esc(element_id)}">{js_json(obj)}</script>'


def script_hashes(page: str) -> list[str]:
    """CSP source expressions (``'sha256-…'``) of every plain inline ``<script>`` of the page."""
    return sorted({"'sha256-" + base64.b64encode(hashlib.sha256(m.group(1).encode("utf-8")).digest()).decode()
                   + "'" for m in _INLINE_SCRIPT.finditer(page)})


def policy(page: str = "", *, script_src: Iterable[str] = (), style_src: Iterable[str] = (),
           img_src: Iterable[str] = ("data:",)) -> str:
    """The Content-Security-Policy of a walkcomfort page.

    Parameters
    ----------
    page : str
        The page (its inline ``<script>`` elements are allowed by hash; none when empty).
    script_src, style_src, img_src : iterable of str
        Further sources (the Leaflet CDN for a linked map, a tile server...).
    """
    scripts = " ".join(script_hashes(page) + list(script_src)) or "'none'"
    styles = " ".join(["'unsafe-inline'", *style_src])
    return ("default-src 'none'; "
            f"script-src {scripts}; style-src {styles}; img-src {' '.join(img_src)}; "
            "font-src 'none'; connect-src 'none'; object-src 'none'; base-uri 'none'; form-action 'none'")


def with_policy(page: str, **sources) -> str:
    """The page with the policy's ``<meta>`` as the first element of ``<head>``."""
    meta = CSP_META.format(esc(policy(page, **sources)))
    return page.replace("<head>", f"<head>\n{meta}", 1)


def page(title: str, body: str, *, style: str = "", lang: str = "en") -> str:
    """A small self-contained page (no scripts) with the shared policy: reports, tables, briefs.

    ``title`` is text; ``body`` and ``style`` are markup built by the caller with :func:`esc`.
    """
    doc = (f'<!DOCTYPE html>\n<html lang="{esc(lang)}"><head><meta charset="utf-8">'
           '<meta name="viewport" content="width=device-width, initial-scale=1">'
           f"<title>{esc(title)}</title><style>{style}</style></head><body>\n{body}\n</body></html>\n")
    return with_policy(doc)
