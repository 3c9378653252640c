"""The ``network`` verb: every street segment x time x scheme, in-process or on Dask."""

from __future__ import annotations

import json
import time as _time
from pathlib import Path

import click

from walkcomfort import columns as C
from walkcomfort.errors import InputError

SUMMARY_PARQUET = "segment_summary.parquet"
SUMMARY_GEOJSON = "segment_summary.geojson"
LAYER_GEOJSON = "network_layer_{scheme}.geojson"
QUARANTINE_CSV = "network_quarantine.csv"

#: Exit code when one or more partitions failed after their retries.
EXIT_PARTITIONS_FAILED = 3


def _check_speed(speed: float) -> float:
    if not (0.3 <= float(speed) <= 2.5):
        raise InputError(f"walking speed {speed:g} m/s is outside 0.3–2.5 m/s", where="--speed",
                         fix="give the flat-ground walking speed in m/s, e.g. 1.1 for an older walker")
    return float(speed)


def plan_from_files(streets, scene_path, scheme_paths, start, end, step, timezone, weather_path=None,
                    conditions=None, segment_length_m=50.0, spacing_m=10.0, tile_size_m=250.0, time_chunk=24,
                    min_sun_elev_deg=5.0, model=None, logger_wind_height=None, max_station_km=50.0,
                    daytime=False, index="utci", wbgt_limit=None, strict=False, weather_format=None,
                    weather_map=None, flat_speed_ms=None):
    """Read the inputs named on the command line and plan the batch (returns ``(network, job)``)."""
    from walkcomfort.network.batch import BASE, plan_job, sunlit_times, time_range
    from walkcomfort.network.segments import load_network
    from walkcomfort.routes.schemes import apply_scheme, load_scheme
    from walkcomfort.routes.weather import open_weather, parse_conditions

    scene = None
    if scene_path:
        from walkcomfort.environment.scene import load_scene

        scene = load_scene(scene_path)
    network = load_network(streets, segment_length_m, spacing_m, crs=getattr(scene, "crs", None))
    if scene is not None:
        from walkcomfort.environment.coverage import check_scene_coverage, scene_coverage

        lon, lat = network.points[C.LON], network.points[C.LAT]
        note = check_scene_coverage(scene, lon, lat, "the street network", strict=strict, where=scene_path)
        if note:
            mostly = scene_coverage(scene, lon, lat).mostly_outside
            click.echo(f"{'warning' if mostly else 'note'}: {note}", err=True)
    scenes = {BASE: scene.to_geojson() if scene is not None else None}
    for p in scheme_paths:
        scheme = load_scheme(p)
        if scene is None:
            raise InputError(f"scheme {scheme.name!r} edits a scene, but no scene was given", where=p,
                             fix="give --scene with the base scene the scheme edits")
        if scheme.name in scenes:
            raise InputError(f"scheme name {scheme.name!r} is given twice", where=p,
                             fix="give every scheme its own name (top-level walkcomfort.scheme)")
        scenes[scheme.name] = apply_scheme(scene, scheme).to_geojson()
    times = time_range(start, end, step, timezone)
    site_meta = ((scenes[BASE] or {}).get("walkcomfort") or {}).get("site") or {}
    site = {"lat": float(site_meta.get("lat", network.points[C.LAT].mean())),
            "lon": float(site_meta.get("lon", network.points[C.LON].mean())),
            "elev_m": float(site_meta.get("elev_m", 0.0))}
    kw = {"max_distance_km": max_station_km, "fmt": weather_format, "column_map": weather_map}
    if logger_wind_height is not None:
        kw["wind_height_m"] = logger_wind_height
    if daytime:
        n_all = len(times)
        times = sunlit_times(times, site)
        if len(times) == 0:
            raise InputError(f"none of the {n_all} times from {start} to {end} has the sun above the horizon",
                             fix="choose daytime hours or leave out --daytime")
    source = open_weather(weather_path, parse_conditions(conditions, complete=weather_path is None), **kw)
    weather = source.conditions(times, site["lat"], site["lon"], site["elev_m"])
    predictor, bundle = "physics-rule", None
    if model:
        # load once here: a bad bundle is one clear error now, not a failure in every partition
        from walkcomfort.model.features import uses_pet
        from walkcomfort.network.shipping import pack_bundle
        from walkcomfort.routes.predict import Predictor

        loaded = Predictor.from_bundle(model)
        predictor = loaded.label
        if uses_pet(loaded.model):  # a model fitted on PET: the chain computes PET for it
            index = "pet"
        bundle = pack_bundle(model)  # travels with the job: workers never see this machine's path
    context = {"wind_height_m": float(weather.attrs.get("wind_height_m", source.wind_height_m)),
               "weather": getattr(source, "label", "weather"), "model": bundle["digest"] if bundle else None,
               "predictor": predictor}
    if index == "pet":  # only then: a UTCI job keeps its digest
        context["indices"] = ["pet"]
    if wbgt_limit is not None:
        context["indices"] = [*context.get("indices", []), "wbgt"]
        context["wbgt_limit_c"] = float(wbgt_limit)
    if flat_speed_ms is not None:  # only when stated: a run at the routes' default keeps its digest
        context["flat_speed_ms"] = _check_speed(flat_speed_ms)
    weather = weather.copy()
    weather.attrs = {}
    job = plan_job(network, times, scenes, weather, tile_size_m=tile_size_m, time_chunk=time_chunk,
                   min_sun_elev_deg=min_sun_elev_deg, site=site, context=context)
    job.bundle = bundle
    return network, job


def write_outputs(out_dir, network, job, report) -> dict:
    """Summaries next to the batch rows: per-segment Parquet, GeoJSON, quarantined features."""
    from walkcomfort import _io
    from walkcomfort.network.maplayer import write_city_map_layer
    from walkcomfort.network.summaries import network_layer, summary_from_results, summary_geojson

    out_dir = Path(out_dir)
    written = {}
    if len(network.quarantine):
        written["quarantine"] = _io.write_csv(out_dir / QUARANTINE_CSV, network.quarantine, index=False)
    if not report.ok:
        return written
    summary = report.summary if report.summary is not None else summary_from_results(out_dir)
    meta = {"job_digest": job.digest, "parameters": job.parameters}
    written["summary"] = _io.write_parquet(out_dir / SUMMARY_PARQUET, summary, meta)
    try:
        written["map_layer"] = write_city_map_layer(out_dir, summary, network)
    except InputError as exc:  # the results stand; only the browser layer is left out, and said so
        written["map_layer_skipped"] = str(exc)
    full = summary_geojson(summary, network)
    written["geojson"] = _io.write_json(out_dir / SUMMARY_GEOJSON, full)
    for scheme in job.schemes:
        # compact JSON: these small files are meant to be embedded in the HTML map
        text = json.dumps(network_layer(full, scheme), sort_keys=True, separators=(",", ":"), allow_nan=False)
        written[f"layer:{scheme}"] = _io.atomic_write_text(out_dir / LAYER_GEOJSON.format(scheme=scheme), text + "\n")
    return written


@click.command(name="network")
@click.argument("streets", type=click.Path(dir_okay=False, path_type=Path))
@click.option("--scene", "scene_path", type=click.Path(dir_okay=False, path_type=Path),
              help="Scene GeoJSON (buildings, trees, canopies). Without it: open ground everywhere.")
@click.option("--scheme", "scheme_paths", multiple=True, type=click.Path(dir_okay=False, path_type=Path),
              help="Scheme GeoJSON to compare with the base scene; repeat for several.")
@click.option("--weather", "weather_path", type=click.Path(dir_okay=False, path_type=Path),
              help="Weather file (EPW/TMY) or logger series.")
@click.option("--weather-format", default=None,
              help="Read --weather as this format (epw, tmy3, pvgis-tmy, nsrdb, …) instead of recognising it.")
@click.option("--weather-map", type=click.Path(dir_okay=False, path_type=Path), default=None,
              help="TOML column map for a logger CSV given as --weather (see `walkcomfort route --help`).")
@click.option("--conditions", help="Stated weather instead of a file: 't_air_c=33,rh_pct=30,wind_ms=1.5' "
                                   "(with --weather: fills only what the file lacks).")
@click.option("--logger-wind-height", type=float, default=None,
              help="Wind sensor height of a logger series [m] (if the file does not say).")
@click.option("--max-station-km", type=float, default=50.0, show_default=True,
              help="Refuse a weather file whose station is farther from the network [km].")
@click.option("--model", type=click.Path(file_okay=False, path_type=Path),
              help="Saved comfort model bundle; without it the UTCI-band rule gives the classes.")
@click.option("--start", required=True, help="First time, ISO (e.g. 2026-07-14T07:00).")
@click.option("--end", required=True, help="Last time, ISO, included.")
@click.option("--step", default="1h", show_default=True, help="Time step (1h, 30min, ...).")
@click.option("--timezone", "timezone", help="IANA zone of --start/--end when they carry no offset.")
@click.option("--daytime", is_flag=True, help="Keep only the times with the sun above the horizon (e.g. a month "
              "at 1h: its daytime hours).")
@click.option("--segment-length", "segment_length_m", default=50.0, show_default=True, type=float,
              help="Target segment length [m].")
@click.option("--spacing", "spacing_m", default=10.0, show_default=True, type=float,
              help="Sample-point spacing along a segment [m].")
@click.option("--tile-size", "tile_size_m", default=250.0, show_default=True, type=float,
              help="Side of a spatial tile [m].")
@click.option("--time-chunk", default=24, show_default=True, type=int, help="Time steps per partition.")
@click.option("--lowest-sun", "min_sun_elev_deg", default=5.0, show_default=True, type=float,
              help="Lowest sun elevation whose shadows each tile carries in full [°]; at a lower sun a "
                   "shadow from beyond the tile can be missed, and those times are flagged (qa_low_sun).")
@click.option("--engine", type=click.Choice(["in-process", "dask"]), default="in-process", show_default=True,
              help="Where partitions run.")
@click.option("--scheduler", help="Address of a running Dask scheduler (tcp://host:8786); default a local cluster.")
@click.option("--workers", default=2, show_default=True, type=int, help="Workers of the local Dask cluster.")
@click.option("--threads-per-worker", default=1, show_default=True, type=int)
@click.option("--write-on", type=click.Choice(["workers", "client"]), default=None,
              help="Dask: who writes the Parquet files (default: the workers, into an output folder they share; "
                   "'client': rows come back and this process writes them).")
@click.option("--retries", default=2, show_default=True, type=int, help="Extra attempts for a failing partition.")
@click.option("--resume", is_flag=True, help="Keep partitions an earlier run of the same job already wrote.")
@click.option("--overwrite", is_flag=True, help="Remove another job's results from the output folder first "
              "(without it such a folder is refused: results of two jobs never mix).")
@click.option("--out", "out_dir", required=True, type=click.Path(file_okay=False, path_type=Path),
              help="Output folder.")
@click.option("--index", type=click.Choice(["utci", "pet"]), default="utci", show_default=True,
              help="Also PET of the reference person per segment x time (pet_c; mean_pet_c, max_pet_c per segment).")
@click.option("--wbgt-limit", type=float, default=None,
              help="Also estimated WBGT per segment x time and the hours above this limit [°C] per segment. "
                   "A planning estimate, not a heat-safety assessment.")
@click.option("--strict", is_flag=True, help="Refuse a network that lies mostly outside the scene's extent.")
@click.option("--speed", "flat_speed_ms", type=float, default=None,
              help="Walking speed on flat ground [m/s] (slopes by Tobler's function), as for 'route'; default 1.3.")
def network(streets, scene_path, scheme_paths, weather_path, weather_format, weather_map, conditions,
            logger_wind_height, max_station_km, model, start, end, step, timezone, daytime, segment_length_m,
            spacing_m, tile_size_m, time_chunk, min_sun_elev_deg, engine, scheduler, workers, threads_per_worker,
            write_on, retries, resume, overwrite, out_dir, index="utci", wbgt_limit=None, strict=False,
            flat_speed_ms=None):
    """Batch every street segment x time x scheme of a network; write rows, summaries and GeoJSON.

    Predictions are estimates for comparing design options, not a safety assessment:
    for heat on real streets follow local heat-health guidance, local codes and
    licensed practice.
    """
    from walkcomfort.network.engines import run_job

    if timezone is None and any(_naive(t) for t in (start, end)):
        raise InputError(f"--start {start!r} / --end {end!r} carry no UTC offset and no --timezone was given",
                         fix="add --timezone Europe/Madrid (the site's zone) or write times with an offset")
    if engine == "in-process" and scheduler:
        raise InputError("--scheduler was given with --engine in-process", fix="add --engine dask")
    net, job = plan_from_files(streets, scene_path, scheme_paths, start, end, step, timezone or "UTC",
                               weather_path, conditions, segment_length_m, spacing_m, tile_size_m, time_chunk,
                               min_sun_elev_deg, model, logger_wind_height, max_station_km, daytime, index=index,
                               wbgt_limit=wbgt_limit, strict=strict, weather_format=weather_format,
                               weather_map=weather_map, flat_speed_ms=flat_speed_ms)
    click.echo(f"network {net.name}: {net.n_segments} segments, {job.parameters['times']['n']} times, "
               f"{len(job.schemes)} schemes -> {job.expected_rows} rows in {len(job.partitions)} partitions",
               err=True)
    opts = {"retries": retries}
    if engine == "dask":
        opts.update(scheduler=scheduler, workers=workers, threads_per_worker=threads_per_worker, write_on=write_on)
    t0 = _time.perf_counter()
    report = run_job(job, out_dir, engine, resume=resume, overwrite=overwrite, summarise=True, **opts)
    seconds = _time.perf_counter() - t0
    written = write_outputs(out_dir, net, job, report)
    if "map_layer_skipped" in written:
        click.echo(f"note: map layer not written: {written['map_layer_skipped']}", err=True)
    rate = report.written_rows / seconds if seconds > 0 else float("nan")
    click.echo(f"rows expected {report.expected_rows}, written {report.written_rows} "
               f"({seconds:.1f} s, {rate:.0f} rows/s) -> {out_dir}", err=True)
    if wbgt_limit is not None:
        from walkcomfort.environment.wbgt import PLANNING_CAUTION

        click.echo(f"note: wbgt_h_above_limit counts the hours with estimated WBGT above {wbgt_limit:g} °C. "
                   f"{PLANNING_CAUTION}", err=True)
    if len(net.quarantine):
        click.echo(f"{len(net.quarantine)} network features quarantined: see {Path(out_dir) / QUARANTINE_CSV}",
                   err=True)
    if not report.ok:
        ids = ", ".join(o.partition_id for o in report.failed[:10])
        more = f" and {len(report.failed) - 10} more" if len(report.failed) > 10 else ""
        click.echo(f"error: {len(report.failed)} partitions failed after {retries} retries: {ids}{more}; "
                   f"errors in {Path(out_dir) / 'job.json'}. Fix: correct the cause and re-run with --resume.",
                   err=True)
        raise click.exceptions.Exit(EXIT_PARTITIONS_FAILED)


def _naive(text: str) -> bool:
    import pandas as pd

    try:
        return pd.Timestamp(text).tzinfo is None
    except (ValueError, TypeError):
        return False
