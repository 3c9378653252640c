"""The HTML route map: predicted comfort along planned routes, per scheme and departure.

One job per module:

- :mod:`~walkcomfort.report.map.build` — :func:`route_map`, assembling the data;
- :mod:`~walkcomfort.report.map.routelayer` — routes per scheme × departure, the
  difference from the base and its classes, the opening view;
- :mod:`~walkcomfort.report.map.streets` — street-network layers;
- :mod:`~walkcomfort.report.map.scene`, :mod:`~walkcomfort.report.map.walks` — the scene
  as each scheme draws it; recorded walks, votes and model-error cells;
- :mod:`~walkcomfort.report.map.legend`, :mod:`~walkcomfort.report.map.context` — what the
  legend, popups and title block say;
- :mod:`~walkcomfort.report.map.geometry`, :mod:`~walkcomfort.report.map.inputs`,
  :mod:`~walkcomfort.report.map.tiles` — simplification, checked inputs, base maps;
- :mod:`~walkcomfort.report.map.page` — the page (``static/map.js``, ``static/map.css``),
  :func:`write_map`.
"""

from walkcomfort.report.map.build import DEFAULT_LAYERS, LAYER_KINDS, RouteMap, route_map
from walkcomfort.report.map.context import context_from_table
from walkcomfort.report.map.geometry import rdp_keep
from walkcomfort.report.map.page import DEFAULT_SIZE_BUDGET_BYTES, MapSizeWarning, render_map_html, write_map
from walkcomfort.report.map.tiles import TileSource, tile_source

__all__ = ["DEFAULT_LAYERS", "DEFAULT_SIZE_BUDGET_BYTES", "LAYER_KINDS", "MapSizeWarning", "RouteMap",
           "context_from_table", "rdp_keep", "render_map_html", "route_map", "tile_source", "TileSource",
           "write_map"]
