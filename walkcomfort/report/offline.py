"""Leaflet assets for the HTML map: linked from the CDN, or inlined for offline use.

folium's default page pulls Leaflet plus jQuery, Bootstrap, two icon fonts and the
awesome-markers plugin from public CDNs. The walkcomfort map uses none of those extras
(popups, tooltips and the legend are built with plain DOM calls), so the page carries
only Leaflet's own ``leaflet.js`` and ``leaflet.css``.

Where the files come from
-------------------------
The PyPI package ``XStatic-Leaflet`` (XStatic packaging standard, no code and no
dependencies) ships Leaflet's ``dist`` folder; its version 1.9.3 is the very Leaflet
folium 0.20 links to, and its ``leaflet.js``/``leaflet.css`` are byte-identical to the
npm ``leaflet@1.9.3`` tarball (checked once with ``npm pack leaflet@1.9.3``; the SHA-256
digests below are those of the npm files). The digests are checked every time the files
are read, so a different or altered copy is refused rather than silently inlined.

Linked mode (``offline=False``) points at the same CDN URLs folium uses, with Subresource
Integrity attributes computed from the packaged bytes, so the browser refuses a CDN copy
that differs from what we checked.
"""

from __future__ import annotations

import base64
import hashlib
import html
import re
from functools import lru_cache
from pathlib import Path

from walkcomfort.errors import WalkcomfortError

LEAFLET_VERSION = "1.9.3"
CDN_BASE = f"https://cdn.jsdelivr.net/npm/leaflet@{LEAFLET_VERSION}/dist/"
# SHA-256 of Leaflet 1.9.3's dist files, as published in the npm tarball ``leaflet@1.9.3``.
LEAFLET_SHA256 = {
    "leaflet.js": "5819285cec137b229c94e1ee5ad73e8b6b84345a4367d60f75fe477fe0fb7b03",
    "leaflet.css": "90b693d86392a4779c861b28cf307e7e59c3fb35328c4d8b95f58f814d38c722",
}
_INSTALL_FIX = f"install the packaged Leaflet files: pip install 'XStatic-Leaflet=={LEAFLET_VERSION}.0'"


def cdn_url(name: str) -> str:
    """The public URL of a Leaflet dist file (``leaflet.js``, ``leaflet.css``, ``images/…``)."""
    return CDN_BASE + name


@lru_cache(maxsize=1)
def leaflet_dir() -> Path:
    """Folder holding Leaflet's dist files from the installed ``XStatic-Leaflet`` package.

    Raises
    ------
    WalkcomfortError
        If the package is missing or ships another Leaflet version.
    """
    try:
        import xstatic.pkg.leaflet as pkg
    except ImportError as exc:
        raise WalkcomfortError("the Leaflet files for the HTML map are not installed "
                               f"({exc.name or exc})", fix=_INSTALL_FIX) from None
    if getattr(pkg, "VERSION", None) != LEAFLET_VERSION:
        raise WalkcomfortError(f"XStatic-Leaflet ships Leaflet {getattr(pkg, 'VERSION', '?')}, "
                               f"the map needs Leaflet {LEAFLET_VERSION}", fix=_INSTALL_FIX)
    return Path(pkg.BASE_DIR)


def leaflet_file(name: str) -> bytes:
    """Bytes of one packaged Leaflet file; ``leaflet.js`` and ``leaflet.css`` are digest-checked."""
    path = leaflet_dir() / name
    if not path.is_file():
        raise WalkcomfortError(f"Leaflet file {name!r} is missing from {leaflet_dir()}", fix=_INSTALL_FIX)
    data = path.read_bytes()
    want = LEAFLET_SHA256.get(name)
    if want is not None and hashlib.sha256(data).hexdigest() != want:
        raise WalkcomfortError(f"{path} is not the Leaflet {LEAFLET_VERSION} release (SHA-256 differs)",
                               fix=_INSTALL_FIX)
    return data


def sri(data: bytes) -> str:
    """Subresource Integrity value (``sha384-…``) of ``data``."""
    return "sha384-" + base64.b64encode(hashlib.sha384(data).digest()).decode("ascii")


_SOURCE_MAP = re.compile(r"\n?//# sourceMappingURL=[^\n]*\s*$")
_CSS_URL = re.compile(r"url\((['\"]?)(images/[A-Za-z0-9_.-]+\.png)\1\)")


@lru_cache(maxsize=1)
def inline_js() -> str:
    """``leaflet.js`` ready to sit inside a ``<script>`` element (source-map comment removed)."""
    text = leaflet_file("leaflet.js").decode("utf-8")
    text = _SOURCE_MAP.sub("\n", text)
    if "</script" in text.lower():  # pragma: no cover - guards a future Leaflet build
        raise WalkcomfortError("leaflet.js contains '</script' and cannot be inlined safely")
    return text


@lru_cache(maxsize=1)
def inline_css() -> str:
    """``leaflet.css`` with its image references turned into ``data:`` URIs."""
    text = leaflet_file("leaflet.css").decode("utf-8")

    def as_data_uri(match: re.Match) -> str:
        png = leaflet_file(match.group(2))
        return "url(data:image/png;base64," + base64.b64encode(png).decode("ascii") + ")"

    text = _CSS_URL.sub(as_data_uri, text)
    if "</style" in text.lower():  # pragma: no cover
        raise WalkcomfortError("leaflet.css contains '</style' and cannot be inlined safely")
    return text


def asset_tags(offline: bool) -> str:
    """HTML for the page head that loads Leaflet.

    Parameters
    ----------
    offline : bool
        True: Leaflet's CSS and JS inlined (no request leaves the page for them).
        False: links to the CDN with Subresource Integrity checks.

    Returns
    -------
    str
        ``<link>``/``<script>`` (or ``<style>``/``<script>``) elements.
    """
    if offline:
        return f"<style>\n{inline_css()}\n</style>\n<script>\n{inline_js()}\n</script>\n"
    css, js = leaflet_file("leaflet.css"), leaflet_file("leaflet.js")
    return (f'<link rel="stylesheet" href="{html.escape(cdn_url("leaflet.css"))}" '
            f'integrity="{sri(css)}" crossorigin="anonymous"/>\n'
            f'<script src="{html.escape(cdn_url("leaflet.js"))}" '
            f'integrity="{sri(js)}" crossorigin="anonymous"></script>\n')


def local_asset(url: str) -> tuple[bytes, str] | None:
    """Packaged bytes and content type for a Leaflet CDN URL, or None if it is not one.

    Used by tests (and anyone serving the map from a local web server) to answer the
    page's Leaflet requests without the network.
    """
    if not url.startswith(CDN_BASE):
        return None
    name = url[len(CDN_BASE):].split("?", 1)[0]
    if not re.fullmatch(r"(images/)?[A-Za-z0-9_.-]+", name):
        return None
    kind = {"js": "application/javascript", "css": "text/css", "png": "image/png"}.get(name.rsplit(".", 1)[-1])
    if kind is None:
        return None
    try:
        return leaflet_file(name), kind
    except WalkcomfortError:
        return None
