"""``walkcomfort route`` (one route, one scheme, one or many departures) and ``walkcomfort compare``."""

from __future__ import annotations

from pathlib import Path

import click

from walkcomfort.errors import InputError
from walkcomfort.routes.indices import INDEX_OPTION, WBGT_LIMIT_OPTION, add_pet, add_wbgt_minutes, index_line
from walkcomfort.routes.weather import FORMAT_CHOICES

DESIGN_HELP = ("Put clock-time departures on a design day from the weather file: 'hottest', 'pNN' (the day "
               "closest to the NNth percentile of daily maxima, e.g. p95), or a date YYYY-MM-DD.")


def route_options(f):
    """The options shared by ``route``, ``compare`` and ``advise`` (inputs of a planned walk)."""
    opts = [
        click.option("-o", "--out", "out_dir", type=click.Path(path_type=Path), required=True,
                     help="Output folder."),
        click.option("--scene", "scene_path", type=click.Path(path_type=Path), default=None,
                     help="Base scene GeoJSON (buildings, trees, canopies). Without it: open ground."),
        click.option("--depart", "departures", multiple=True, required=True,
                     help="Departure: ISO date-time, HH:MM on the design day, or a sweep START..END/STEP "
                          "(e.g. 08:00..18:00/1h). Repeatable."),
        click.option("--timezone", default=None, help="IANA zone for departures without an offset and for reports."),
        click.option("--weather", "weather_path", type=click.Path(path_type=Path), default=None,
                     help="Weather file (EPW, TMY2, TMY3, PVGIS typical year or hourly CSV/JSON, NSRDB PSM CSV, "
                          "MIDC, SURFRAD, USCRN; recognised from its content), a logger CSV or a timeline.parquet."),
        click.option("--weather-format", type=click.Choice(FORMAT_CHOICES), default=None,
                     help="Read --weather as this format instead of recognising it from the content."),
        click.option("--weather-map", type=click.Path(path_type=Path), default=None,
                     help="TOML column map for a logger CSV given as --weather (the keys of a session "
                          "manifest's weather [[source]] table, plus timezone and wind_height_m)."),
        click.option("--conditions", default=None,
                     help="Stated weather instead of a file: 't_air_c=33,rh_pct=30,wind_ms=1.5"
                          "[,wind_height_m=10][,cloud_frac=0.2|ghi_wm2=800]'. With --weather, only fills "
                          "what the file lacks (e.g. 'rh_pct=40')."),
        click.option("--design-day", default=None, help=DESIGN_HELP),
        click.option("--season", default=None, help="Months for the design-day rule, e.g. 6-8."),
        click.option("--model", "model_path", type=click.Path(path_type=Path), default=None,
                     help="Comfort model bundle folder; without it the physics-only UTCI-band rule is used."),
        click.option("--spacing", "spacing_m", type=float, default=5.0, show_default=True,
                     help="Point spacing along the route [m]."),
        click.option("--speed", "flat_speed_ms", type=float, default=1.3, show_default=True,
                     help="Walking speed on flat ground [m/s] (slopes by Tobler's function)."),
        click.option("--route-id", default=None, help="Which line of the route file, if it holds several."),
        click.option("--dem", type=click.Path(path_type=Path), default=None,
                     help="DEM raster for elevations (needs: pip install rasterio)."),
        click.option("--actual-year", is_flag=True,
                     help="The weather file is an actual (not typical) year: walks must fall within its dates."),
        click.option("--max-station-km", type=float, default=50.0, show_default=True,
                     help="Refuse a weather file whose station is farther from the route [km]."),
        click.option("--logger-wind-height", type=float, default=None,
                     help="Wind sensor height of the weather data [m] (a logger, or a station file whose format "
                          "does not state it)."),
        click.option("--walker", default=None,
                     help="Walker attributes the model may use: 'clo=0.5,acclimatised=1,age_band=25-34'."),
        click.option("--no-reasons", is_flag=True, help="Skip per-point explanations (faster)."),
        click.option("--strict", is_flag=True,
                     help="Refuse routes that lie mostly outside the scene's extent instead of warning."),
    ]
    for o in reversed(opts):
        f = o(f)
    return f


def run_from_files(route_path, scheme_paths, departures, out_dir=None, scene_path=None, timezone=None,
                   weather_path=None, conditions=None, design_day=None, season=None, model_path=None,
                   spacing_m=5.0, flat_speed_ms=1.3, route_id=None, dem=None, max_station_km=50.0,
                   logger_wind_height=None, no_reasons=False, include_base=True, echo=None, walker=None,
                   actual_year=False, weather_format=None, weather_map=None, wbgt_limit=None, index="utci",
                   strict=False, sensitivity=False):
    """Read the inputs named on the command line, run the comparison, write outputs if ``out_dir``.

    Returns
    -------
    (Comparison, dict of written files)
    """
    from walkcomfort import _io
    from walkcomfort.routes.compare import compare_schemes
    from walkcomfort.routes.geometry import load_route
    from walkcomfort.routes.predict import Predictor
    from walkcomfort.routes.schemes import load_scheme
    from walkcomfort.routes.weather import open_weather, parse_conditions

    echo = echo or (lambda s: None)
    scene = None
    if scene_path is not None:
        from walkcomfort.environment.scene import load_scene

        scene = load_scene(scene_path)
    route = load_route(route_path, spacing_m=spacing_m, dem=dem, route_id=route_id,
                       crs=scene.crs if scene is not None else None)
    coverage_note = route_coverage(route, scene, strict, scene_path, echo)
    schemes = [load_scheme(p) for p in scheme_paths]
    if schemes and scene is None:
        raise InputError(f"scheme '{schemes[0].name}' edits a scene, but no scene was given", where=scheme_paths[0],
                         fix="give the base scene with --scene")
    weather = open_weather(weather_path, parse_conditions(conditions, complete=weather_path is None),
                           fmt=weather_format, column_map=weather_map, typical=False if actual_year else None,
                           max_distance_km=max_station_km, wind_height_m=logger_wind_height)
    deps, chosen, day_note = resolve_departures(weather, departures, timezone, design_day, season, echo)
    predictor = Predictor.from_bundle(model_path)
    for n in route.notices:
        echo(f"note: {n}")
    for n in getattr(weather, "notices", []) or []:
        echo(f"note: {n}")
    if not predictor.is_model:
        echo("note: no model bundle given: classes come from the physics-only UTCI-band rule")
    walker_attrs = parse_walker(walker)
    result = compare_schemes(route, schemes, deps, weather, scene=scene, predictor=predictor,
                             include_base=include_base, flat_speed_ms=flat_speed_ms, timezone=timezone,
                             walker=walker_attrs, explain=not no_reasons)
    told = set(route.notices) | set(getattr(weather, "notices", []) or []) | {coverage_note}
    for n in result.notices:
        if n not in told:
            echo(f"note: {n}")
    if day_note:
        result.notices.append(day_note)
    if index == "pet":  # indices beside the comfort figures (routes/indices.py)
        add_pet(result)
    if wbgt_limit is not None:
        add_wbgt_minutes(result, wbgt_limit)
    written = {}
    if out_dir is not None:
        inputs = [p for p in [route_path, scene_path, weather_path, weather_map, *scheme_paths] if p is not None]
        if model_path is not None:
            inputs += sorted(p for p in Path(model_path).iterdir() if p.is_file())
        params = {"departures": [d.isoformat() for d in deps], "timezone": timezone, "conditions": conditions,
                  "design_day": chosen.as_dict() if chosen else None, "season": season, "spacing_m": spacing_m,
                  "flat_speed_ms": flat_speed_ms, "route_id": route.route_id, "walker": walker_attrs,
                  "schemes": [s.name for s in schemes], "predictor": predictor.label,
                  "weather": weather.describe(), "elevation_source": route.elevation_source,
                  "wbgt_limit_c": wbgt_limit, "index": index}
        prov = _io.provenance(inputs, params)
        written = _write(result, out_dir, prov, timezone)
    if sensitivity:
        written.update(_sensitivity(route, schemes, deps, weather, scene, predictor, out_dir, echo, result,
                                    flat_speed_ms=flat_speed_ms, timezone=timezone, walker=walker_attrs))
    return result, written


def _sensitivity(route, schemes, deps, weather, scene, predictor, out_dir, echo, result, **kw) -> dict:
    """``--sensitivity``: the comparison re-run with crown density and ground at the ends of their ranges."""
    from walkcomfort import _io
    from walkcomfort.routes.sensitivity import scheme_sensitivity, sensitivity_line

    if scene is None or not schemes:
        raise InputError("a sensitivity run varies the scene and the schemes; none was given", where="--sensitivity",
                         fix="give --scene and at least one --scheme")
    table = scheme_sensitivity(route, schemes, deps, weather, scene,
                               predictor=predictor if predictor.is_model else None, **kw)
    line = sensitivity_line(table)
    echo(f"note: {line}")
    result.notices.append(line)
    if out_dir is None:
        return {}
    return {"sensitivity.csv": _io.write_csv(Path(out_dir) / "sensitivity.csv", table, index=False)}


def route_coverage(route, scene, strict: bool, scene_path, echo) -> str | None:
    """Warn (or refuse with ``strict``) when the route lies mostly outside the scene; the notice text."""
    from walkcomfort import columns as C
    from walkcomfort.environment.coverage import check_scene_coverage, scene_coverage

    if scene is None:
        return None
    lon, lat = route.points[C.LON], route.points[C.LAT]
    note = check_scene_coverage(scene, lon, lat, "the route", strict=strict, where=scene_path)
    cov = scene_coverage(scene, lon, lat)
    if note and cov is not None and cov.mostly_outside:
        echo(f"warning: {note}")
    return note


def resolve_departures(weather, departures, timezone, design_day, season, echo):
    """Departure instants (UTC) from ``--depart``, put on a design day of the weather file if asked.

    Returns
    -------
    (DatetimeIndex, DesignDay or None, str or None)
        The departures, the design day picked, and the line that tells the user about it.
    """
    from walkcomfort.routes.designday import design_day as pick_day
    from walkcomfort.routes.timing import parse_departures
    from walkcomfort.routes.weather import WeatherFile

    day = chosen = note = None
    if design_day is not None:
        if not isinstance(weather, WeatherFile):
            raise InputError("a design day is picked from a weather file (EPW/TMY), none was given",
                             where="--design-day", fix="give --weather with an EPW/TMY file, or full dates in --depart")
        text = design_day.strip().lower()
        if text == "hottest":
            chosen = pick_day(weather, "hottest", months=season)
        elif text.startswith("p") and text[1:].replace(".", "", 1).isdigit():
            chosen = pick_day(weather, "percentile", percentile=float(text[1:]), months=season)
        else:
            chosen = pick_day(weather, "date", date=design_day, months=season)
        day = chosen.date
        typical = " of the file's typical year (the year stands for any year)" if weather.typical else ""
        note = f"design day {chosen.date}{typical} (Tmax {chosen.t_max_c:.1f} °C): {chosen.detail}"
        echo(note)
    return parse_departures(list(departures), timezone=timezone, day=day), chosen, note


def parse_walker(text: str | None) -> dict | None:
    """``"clo=0.5,acclimatised=1,age_band=25-34"`` -> walker attributes for the model features."""
    if not text:
        return None
    out: dict = {}
    for item in text.split(","):
        key, sep, value = item.partition("=")
        key, value = key.strip(), value.strip()
        if not sep or key not in ("clo", "acclimatised", "age_band"):
            raise InputError(f"walker attribute {item.strip()!r} is not one of clo=, acclimatised=, age_band=",
                             where="--walker", fix="write e.g. --walker 'clo=0.5,acclimatised=1,age_band=25-34'")
        if key == "clo":
            try:
                out[key] = float(value)
            except ValueError:
                raise InputError(f"clo {value!r} is not a number", where="--walker",
                                 fix="give clothing insulation in clo, e.g. 0.5") from None
        elif key == "acclimatised":
            if value.lower() not in ("1", "0", "true", "false", "yes", "no"):
                raise InputError(f"acclimatised {value!r} is not yes/no", where="--walker",
                                 fix="write acclimatised=1 or 0")
            out[key] = value.lower() in ("1", "true", "yes")
        else:
            out[key] = value
    return out


def _write(result, out_dir, prov, timezone):
    from walkcomfort.routes.outputs import write_outputs

    return write_outputs(result, out_dir, prov, timezone=timezone)


def _report(result, written, out_dir, timezone=None):
    s = result.summary
    for _, r in s.iterrows():
        dep = r["departure"].tz_convert(timezone) if timezone else r["departure"]
        click.echo(f"{r['scheme']:>14} {dep.strftime('%Y-%m-%d %H:%M %Z')}  walk {r['walk_min']:.1f} min  "
                   f"comfortable {r['exp_min_comfortable']:.1f} min (expected)  shade {r['shade_share']:.0%}  "
                   f"{index_line(r)}")
    click.echo(f"wrote {len(written)} files to {out_dir}")


@click.command()
@click.argument("route_path", metavar="ROUTE", type=click.Path(path_type=Path))
@click.option("--scheme", "scheme_path", type=click.Path(path_type=Path), default=None,
              help="One shade scheme GeoJSON applied to the scene (default: the base scene).")
@route_options
@INDEX_OPTION
@WBGT_LIMIT_OPTION
def route(route_path, scheme_path, **kw):
    """Predict comfort along one planned route for one scheme and one or many departures.

    Writes the per-point table (Parquet, CSV, GeoJSON), walk summaries, a Markdown/HTML
    summary and a plot. Planning estimates, not heat-safety advice: follow local heat
    guidance and licensed design practice.
    """
    result, written = run_from_files(route_path, [scheme_path] if scheme_path else [], include_base=False,
                                     echo=lambda s: click.echo(s, err=True), **kw)
    _report(result, written, kw["out_dir"], kw.get("timezone"))


@click.command()
@click.argument("route_path", metavar="ROUTE", type=click.Path(path_type=Path))
@click.option("--scheme", "scheme_paths", type=click.Path(path_type=Path), multiple=True, required=True,
              help="Shade scheme GeoJSON; repeat for each scheme. The base scene is always included.")
@route_options
@INDEX_OPTION
@WBGT_LIMIT_OPTION
@click.option("--sensitivity", is_flag=True,
              help="Also re-run the comparison with crown density and ground material at the ends of their "
                   "ranges; writes sensitivity.csv and says whether the schemes' ranking holds.")
def compare(route_path, scheme_paths, **kw):
    """Compare shade schemes side by side along a planned route (with the base scene).

    Adds the differences against the base, the best departure of a sweep and what each
    scheme buys (comfortable minutes per tree and per 100 m² of shade). Planning
    estimates, not heat-safety advice: follow local heat guidance and licensed practice.
    """
    result, written = run_from_files(route_path, list(scheme_paths), include_base=True,
                                     echo=lambda s: click.echo(s, err=True), **kw)
    _report(result, written, kw["out_dir"], kw.get("timezone"))
