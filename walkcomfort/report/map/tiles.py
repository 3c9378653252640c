"""Base maps for the route map: none (default), a named provider, a URL template or a local folder."""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path
from urllib.parse import urlsplit

from walkcomfort.errors import InputError

# Named tile providers: (URL template, attribution, max zoom). Requests go to the provider
# only when a reader opens the map with tiles chosen; the default is no base map.
TILE_PRESETS: dict[str, tuple[str, str, int]] = {
    "osm": ("https://tile.openstreetmap.org/{z}/{x}/{y}.png", "© OpenStreetMap contributors", 19),
}


@dataclass(frozen=True)
class TileSource:
    """Where the base map comes from.

    ``url`` is a ``{z}/{x}/{y}`` template; for a local folder ``folder`` is set and the
    template is made relative to the written HTML by :func:`write_map`.
    """

    url: str
    attribution: str
    max_zoom: int = 19
    folder: Path | None = None
    ext: str = "png"


def tile_source(tiles=None, attribution: str | None = None, max_zoom: int | None = None) -> TileSource | None:
    """Resolve the ``tiles`` option of :func:`route_map`.

    Parameters
    ----------
    tiles : None, "none", a preset name, a URL template or a folder
        ``None``/``"none"``: no base map (works offline, sends nothing anywhere).
        ``"osm"``: OpenStreetMap's standard tiles. A URL containing ``{z}``, ``{x}`` and
        ``{y}``: any provider (``attribution`` required). An existing folder laid out
        ``<z>/<x>/<y>.png`` (or ``.jpg``/``.webp``): local tiles, referenced relative to the
        HTML so the map and the folder can be copied together.
    attribution : str, optional
        Attribution text shown on the map (plain text; required for URLs and folders).
    max_zoom : int, optional
        Highest zoom level the tiles exist for.

    Returns
    -------
    TileSource or None
    """
    if tiles is None or (isinstance(tiles, str) and tiles.strip().lower() in ("", "none")):
        return None
    if isinstance(tiles, TileSource):
        return tiles
    text = os.fspath(tiles)
    if text.lower() in TILE_PRESETS:
        url, attr, zmax = TILE_PRESETS[text.lower()]
        return TileSource(url, attribution or attr, max_zoom or zmax)
    if all(k in text for k in ("{z}", "{x}", "{y}")):
        if urlsplit(text).scheme not in ("http", "https"):
            raise InputError(f"tile URL {text!r} must start with http:// or https://",
                             where="--tiles", fix="give an http(s) URL template, a tile folder or 'none'")
        if not attribution:
            raise InputError(f"tile URL {text!r} given without an attribution",
                             where="--attribution", fix="state the tile provider's required attribution text")
        return TileSource(text, attribution, max_zoom or 19)
    folder = Path(text)
    if folder.is_dir():
        ext = _tile_extension(folder)
        if not attribution:
            raise InputError(f"local tile folder {text!r} given without an attribution",
                             where="--attribution", fix="state the attribution the tiles' source requires")
        return TileSource("", attribution, max_zoom or 19, folder=folder.resolve(), ext=ext)
    raise InputError(f"tiles {text!r} is neither 'none', a preset ({', '.join(TILE_PRESETS)}), "
                     "a {z}/{x}/{y} URL template nor an existing folder",
                     where="--tiles", fix="pass one of those")


def _tile_extension(folder: Path) -> str:
    for ext in ("png", "jpg", "jpeg", "webp"):
        if next(folder.glob(f"*/*/*.{ext}"), None) is not None:
            return ext
    raise InputError(f"tile folder {folder} has no <z>/<x>/<y>.png (or .jpg/.webp) files",
                     where=folder, fix="point --tiles at the folder that holds the zoom-level folders")


def tile_csp_sources(source: TileSource | None) -> list[str]:
    """Image sources the page policy must allow for these tiles."""
    if source is None:
        return []
    if source.folder is not None:
        return ["'self'", "file:"]
    parts = urlsplit(source.url)
    return [f"{parts.scheme}://{parts.netloc.replace('{s}', '*')}"]


def tile_url(source: TileSource, out_dir: Path | None) -> str:
    """The ``{z}/{x}/{y}`` template as the written page must use it (local folders relative to it)."""
    if source.folder is None:
        return source.url
    rel = Path(os.path.relpath(source.folder, out_dir or Path.cwd())).as_posix()
    return f"{rel}/{{z}}/{{x}}/{{y}}.{source.ext}"
