"""``walkcomfort advise``: turn a budget of trees or canopy panels into a scheme."""

from __future__ import annotations

from pathlib import Path

import click

from walkcomfort.errors import InputError
from walkcomfort.routes.commands import parse_walker, resolve_departures, route_coverage, route_options


def _weights(items, where: str) -> dict:
    out = {}
    for text in items:
        key, sep, val = text.partition("=")
        try:
            out[key.strip()] = float(val)
        except ValueError:
            raise InputError(f"{text!r} is not NAME=WEIGHT", where=where, fix="write e.g. mercat-parc=3.5") from None
        if not sep or out[key.strip()] < 0:
            raise InputError(f"{text!r} is not NAME=WEIGHT with a weight ≥ 0", where=where,
                             fix="write e.g. mercat-parc=3.5")
    return out


@click.command(name="advise")
@click.argument("route_paths", nargs=-1, required=True, type=click.Path(path_type=Path))
@route_options
@click.option("--sites", "sites_path", type=click.Path(path_type=Path), default=None,
              help="Candidate sites GeoJSON (points; lines cut every --site-spacing; polygons on a grid). "
                   "Without it: sites along the routes, both sides.")
@click.option("--site-offset", type=float, default=3.0, show_default=True,
              help="Distance of generated sites from the walking line [m].")
@click.option("--site-spacing", type=float, default=8.0, show_default=True,
              help="Spacing of generated sites, and of sites on drawn lines and grids [m].")
@click.option("--catalogue", "catalogue_path", type=click.Path(path_type=Path), default=None,
              help="Interventions JSON (tree types, canopy panels, costs). Default: the built-in catalogue.")
@click.option("--intervention", "interventions", multiple=True,
              help="Catalogue entries to choose from; repeatable. Default: tree-medium.")
@click.option("--count", "max_count", type=int, default=None, help="Budget: number of items.")
@click.option("--cost", "max_cost", type=float, default=None, help="Budget: total cost (catalogue units).")
@click.option("--objective", type=click.Choice(["heat-dose", "hours-above", "comfort"]), default="heat-dose",
              show_default=True, help="What to improve: heat dose avoided, minutes above --threshold avoided "
                                      "(physics only), or expected comfortable minutes (needs --model).")
@click.option("--threshold", "threshold_c", type=float, default=32.0, show_default=True,
              help="UTCI threshold of the hours-above objective [°C].")
@click.option("--route-weight", "route_weights", multiple=True,
              help="ROUTE_ID=WEIGHT (e.g. pedestrians per hour); repeatable. Default: equal.")
@click.option("--min-facade", type=float, default=2.0, show_default=True,
              help="No site closer than this to a building [m].")
@click.option("--min-tree", type=float, default=4.0, show_default=True,
              help="No site closer than this to an existing tree trunk [m].")
@click.option("--name", default="advised", show_default=True, help="Name of the written scheme.")
@click.option("--no-verify", is_flag=True, help="Skip re-running the chosen scheme through the full comparison.")
@click.option("--check-optimum", is_flag=True,
              help="Also search exhaustively over the 12 most useful candidates (budget ≤ 4) and report the gap.")
def advise(route_paths, **kw):
    """Where should the shade go? Choose sites for a budget of trees or canopy panels.

    Each candidate's shade is traced once on every walk point and departure; a greedy
    selection with lazy re-evaluation picks the set with the largest gain, counting
    overlapping shadows once. Writes a scheme GeoJSON that `compare` and `map` read, a
    ranked table, a gain-versus-budget plot and a map layer of the sites. Planning aid
    only: soil, utilities, sight lines, maintenance and local codes decide, with a
    licensed professional.
    """
    from walkcomfort.routes.placement import CAUTION

    result = run_advice(route_paths, echo=click.echo, **kw)
    click.echo(f"chose {len(result['advice'].selection.chosen)} item(s): gain {result['advice'].selection.total:.2f} "
               f"{result['advice'].unit}")
    if result.get("verification"):
        click.echo(f"check by the full comparison: {result['verification']['text']}")
    click.echo(f"wrote {len(result['written'])} files to {kw['out_dir']}")
    click.echo(f"caution: {CAUTION}")


def run_advice(route_paths, out_dir, echo=None, **kw) -> dict:
    """Read the inputs, run the advisor, verify, write (see :func:`advise`)."""
    from walkcomfort import _io
    from walkcomfort.environment.scene import load_scene
    from walkcomfort.routes.geometry import load_route
    from walkcomfort.routes.placement.advisor import advise as run
    from walkcomfort.routes.placement.catalogue import catalogue_record, load_catalogue
    from walkcomfort.routes.placement.outputs import scheme_geojson, write_advice
    from walkcomfort.routes.placement.sites import sites_along_routes, sites_from_geojson
    from walkcomfort.routes.placement.verify import verify_with_comparison
    from walkcomfort.routes.predict import Predictor
    from walkcomfort.routes.schemes import scheme_from_geojson
    from walkcomfort.routes.simulate import simulate_walk
    from walkcomfort.routes.weather import open_weather, parse_conditions

    echo = echo or (lambda s: None)
    if kw["scene_path"] is None:
        raise InputError("placing shade needs the base scene", where="--scene", fix="give --scene scene.geojson")
    if kw["max_count"] is None and kw["max_cost"] is None:
        raise InputError("no budget given", where="--count/--cost", fix="give --count N and/or --cost X")
    scene = load_scene(kw["scene_path"])
    routes = [load_route(p, spacing_m=kw["spacing_m"], dem=kw["dem"], route_id=kw["route_id"], crs=scene.crs)
              for p in route_paths]
    for r in routes:
        route_coverage(r, scene, kw["strict"], kw["scene_path"], echo)
    weather = open_weather(kw["weather_path"], parse_conditions(kw["conditions"], complete=kw["weather_path"] is None),
                           fmt=kw["weather_format"], column_map=kw["weather_map"],
                           typical=False if kw["actual_year"] else None,
                           max_distance_km=kw["max_station_km"], wind_height_m=kw["logger_wind_height"])
    deps, chosen, _ = resolve_departures(weather, kw["departures"], kw["timezone"], kw["design_day"], kw["season"],
                                         echo)
    catalogue = load_catalogue(kw["catalogue_path"])
    names = list(kw["interventions"]) or ["tree-medium"]
    unknown = [n for n in names if n not in catalogue]
    if unknown:
        raise InputError(f"intervention(s) {unknown} not in the catalogue; known: {', '.join(catalogue)}",
                         where="--intervention", fix="choose from the catalogue or give --catalogue")
    catalogue = {n: catalogue[n] for n in names}
    predictor = Predictor.from_bundle(kw["model_path"])
    walker = parse_walker(kw["walker"])
    walks = [simulate_walk(r, deps, weather, scene=scene, timezone=kw["timezone"], walker=walker,
                           flat_speed_ms=kw["flat_speed_ms"]) for r in routes]
    weights = _weights(kw["route_weights"], "--route-weight")
    if kw["sites_path"] is not None:
        sites = sites_from_geojson(kw["sites_path"], scene, spacing_m=kw["site_spacing"], grid_m=kw["site_spacing"])
    else:
        sites = sites_along_routes(routes, scene, offset_m=kw["site_offset"], spacing_m=kw["site_spacing"])
    advice = run(walks, scene, sites, catalogue, objective=kw["objective"], max_count=kw["max_count"],
                 max_cost=kw["max_cost"], threshold_c=kw["threshold_c"], predictor=predictor,
                 walk_weights=[weights.get(r.route_id, 1.0) for r in routes], min_facade_m=kw["min_facade"],
                 min_tree_m=kw["min_tree"], check_optimum=kw["check_optimum"])
    for n in advice.notes:
        echo(f"note: {n}")
    obj = scheme_geojson(advice, scene, kw["name"])
    verification = None
    if not kw["no_verify"] and advice.selection.chosen:
        verification = verify_with_comparison(advice, routes, scheme_from_geojson(obj), deps, weather, scene,
                                              predictor=predictor if predictor.is_model else None,
                                              timezone=kw["timezone"], walker=walker,
                                              flat_speed_ms=kw["flat_speed_ms"], route_weights=weights)
    inputs = [p for p in [*route_paths, kw["scene_path"], kw["weather_path"], kw["sites_path"],
                          kw["catalogue_path"]] if p is not None]
    params = {"departures": [d.isoformat() for d in deps], "timezone": kw["timezone"],
              "conditions": kw["conditions"], "design_day": chosen.as_dict() if chosen else None,
              "objective": kw["objective"], "threshold_c": kw["threshold_c"], "max_count": kw["max_count"],
              "max_cost": kw["max_cost"], "catalogue": catalogue_record(catalogue), "route_weights": weights,
              "site_offset_m": kw["site_offset"], "site_spacing_m": kw["site_spacing"],
              "min_facade_m": kw["min_facade"], "min_tree_m": kw["min_tree"], "predictor": predictor.label,
              "weather": weather.describe(), "verification": verification}
    written = write_advice(advice, scene, out_dir, kw["name"], _io.provenance(inputs, params), verification)
    return {"advice": advice, "verification": verification, "written": written}
