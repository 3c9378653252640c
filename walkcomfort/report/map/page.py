"""Write the route map as one HTML page: Leaflet inlined by default, data as JSON, our script and style.

The page's own script and style are real files (``static/map.js``, ``static/map.css``)
read with :mod:`importlib.resources`. Data travel in a ``<script type="application/json">``
block (never executed); the script builds every popup, label and legend entry with
``textContent``. The Content-Security-Policy of :mod:`walkcomfort._html` allows
only the page's own inline scripts, by hash.

Leaflet is inlined unless ``online=True`` (then it is linked from the CDN with
Subresource Integrity). Either way, a page whose map library did not load shows a
message saying so and how to fix it, never a blank page.
"""

from __future__ import annotations

import os
import warnings
from functools import lru_cache
from importlib import resources
from pathlib import Path

from walkcomfort._html import esc, json_block, with_policy
from walkcomfort._io import atomic_write_text
from walkcomfort.errors import DataQualityWarning, InputError
from walkcomfort.report import offline as leaflet
from walkcomfort.report.map.build import RouteMap
from walkcomfort.report.map.tiles import tile_csp_sources, tile_url

DEFAULT_SIZE_BUDGET_BYTES = 5_000_000
NO_LIBRARY = ("The map library (Leaflet) did not load, so the routes cannot be drawn. This page was "
              "written to load it from the internet: connect and reload, or write the map again without "
              "--online (the default inlines it).")


class MapSizeWarning(DataQualityWarning):
    """The written map is larger than its size budget (slow to open, heavy to share)."""


@lru_cache(maxsize=4)
def static_text(name: str) -> str:
    """A file of ``walkcomfort/report/map/static`` (the page's script and style)."""
    return resources.files("walkcomfort.report.map").joinpath("static", name).read_text(encoding="utf-8")


def render_map_html(fmap: RouteMap, *, online: bool = False, out_dir: str | os.PathLike | None = None,
                    csp: bool = True) -> str:
    """The map as one HTML page (deterministic for the same inputs).

    Parameters
    ----------
    fmap : RouteMap
        From :func:`walkcomfort.report.map.build.route_map`.
    online : bool
        Link Leaflet from the CDN instead of inlining it (smaller file, needs the network).
    out_dir : path, optional
        Folder the HTML will be written to (local tile folders are referenced relative to it).
    csp : bool
        Add the Content-Security-Policy meta element (default True).
    """
    if not isinstance(fmap, RouteMap):
        raise InputError(f"this is a {type(fmap).__name__}, not a map built by walkcomfort's route_map",
                         where="write_map", fix="build the map with route_map(...)")
    data = dict(fmap.data)
    if fmap.tiles is not None:
        src = fmap.tiles
        data["tiles"] = {"url": tile_url(src, Path(out_dir).resolve() if out_dir is not None else None),
                         "attribution": esc(src.attribution), "max_zoom": int(src.max_zoom)}
    page = ('<!DOCTYPE html>\n<html lang="en">\n<head>\n<meta charset="utf-8">\n'
            '<meta name="viewport" content="width=device-width, initial-scale=1">\n'
            f"<title>{esc(fmap.title)}</title>\n{leaflet.asset_tags(not online)}"
            f"<style>\n{static_text('map.css')}</style>\n</head>\n<body>\n"
            '<main id="wc-map" aria-label="Map of predicted walking comfort"></main>\n'
            f'<div id="wc-nolib" class="wc-nolib" role="alert" hidden>{esc(NO_LIBRARY)}</div>\n'
            "<noscript><p class=\"wc-nolib\">This map needs JavaScript to draw the routes.</p></noscript>\n"
            f"{json_block('wc-data', data)}\n<script>\n{static_text('map.js')}</script>\n</body>\n</html>\n")
    if not csp:
        return page
    return with_policy(page, script_src=[] if not online else [leaflet.CDN_BASE],
                       style_src=[] if not online else [leaflet.CDN_BASE],
                       img_src=["data:", *tile_csp_sources(fmap.tiles), *([leaflet.CDN_BASE] if online else [])])


def write_map(fmap: RouteMap, path: str | os.PathLike, *, online: bool = False,
              size_budget_bytes: int | None = DEFAULT_SIZE_BUDGET_BYTES, csp: bool = True) -> Path:
    """Write the map atomically as one HTML file.

    Parameters
    ----------
    fmap : RouteMap
        From :func:`walkcomfort.report.map.build.route_map`.
    path : path
        Output ``.html``.
    online : bool
        Link Leaflet from the CDN (default False: self-contained, opens with no network).
    size_budget_bytes : int or None
        Warn with :class:`MapSizeWarning` when the file is larger; None never warns.
    csp : bool
        Add the Content-Security-Policy meta element.
    """
    path = Path(path)
    page = render_map_html(fmap, online=online, out_dir=path.parent, csp=csp)
    size = len(page.encode("utf-8"))
    if size_budget_bytes is not None and size > size_budget_bytes:
        warnings.warn(f"{path.name} is {size / 1e6:.1f} MB, above the {size_budget_bytes / 1e6:.1f} MB "
                      "budget; raise simplify_m, lower decimals, or map fewer schemes/departures",
                      MapSizeWarning, stacklevel=2)
    atomic_write_text(path, page)
    return path
