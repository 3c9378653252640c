"""Planned routes: geometry and timing, weather sources, shade schemes, prediction, comparison.

The public API, imported lazily so that ``walkcomfort route --help`` stays fast::

    from walkcomfort.routes import load_route, open_weather, load_scheme, compare_schemes
    route = load_route("routes/school.geojson", crs=scene.crs)
    result = compare_schemes(route, [load_scheme("trees.geojson")], departures, open_weather("site.epw"),
                             scene=scene)
    result.summary        # one row per route x scheme x departure (a DataFrame)
"""

from __future__ import annotations

import importlib

_API = {
    "load_route": "geometry", "Route": "geometry",
    "tobler_speed_kmh": "timing", "walking_speed_ms": "timing", "walk_schedule": "timing",
    "parse_departures": "timing",
    "open_weather": "weather", "WeatherFile": "weather", "LoggerSeries": "weather",
    "StatedConditions": "weather", "read_weather_file": "weather", "parse_conditions": "weather",
    "design_day": "designday", "daily_max_temperature": "designday",
    "Scheme": "schemes", "load_scheme": "schemes", "apply_scheme": "schemes", "scheme_inventory": "schemes",
    "simulate_timeline": "simulate", "simulate_walk": "simulate",
    "Predictor": "predict", "predict_route": "predict",
    "summarise": "compare", "compare_to_base": "compare", "best_departures": "compare",
    "cost_effectiveness": "compare", "compare_schemes": "compare", "Comparison": "compare",
    "write_outputs": "outputs", "plot_comfort_along_route": "plots",
}

__all__ = sorted(_API)


def __getattr__(name):
    if name in _API:
        return getattr(importlib.import_module(f"walkcomfort.routes.{_API[name]}"), name)
    raise AttributeError(f"module 'walkcomfort.routes' has no attribute {name!r}")
