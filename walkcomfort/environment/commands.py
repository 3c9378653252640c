"""``walkcomfort thermal``: add sun, shade, sky view, Tmrt and UTCI to ingested timelines."""

from __future__ import annotations

from collections import Counter
from pathlib import Path

import click

from walkcomfort.errors import InputError

TIMELINE_FILE = "timeline.parquet"
ENVIRONMENT_FILE = "environment.json"
#: Files of a walk folder copied along when the output goes to another folder.
COMPANIONS = ("qa.json", "quarantine.csv")
#: Lower edge of "very strong heat stress" on the UTCI assessment scale [°C] (Bröde et al. 2012).
HEAT_CAUTION_UTCI_C = 38.0


def _read(path: Path):
    """A timeline with its attrs (session.timeline.read_timeline), plus the raw Parquet metadata."""
    from walkcomfort import _io
    from walkcomfort.session.timeline import read_timeline

    return read_timeline(path), _io.read_parquet_metadata(path)


def _irradiance_table(path: Path):
    import pandas as pd

    from walkcomfort import columns as C

    try:
        tab = pd.read_csv(path)
    except (OSError, pd.errors.ParserError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read the irradiance table ({exc})", where=path,
                         fix="give a CSV with columns time, ghi_wm2 [, dni_wm2, dhi_wm2]") from None
    if "time" not in tab.columns or C.GHI_WM2 not in tab.columns:
        raise InputError(f"irradiance CSV needs columns 'time' and '{C.GHI_WM2}' (has {list(tab.columns)})",
                         where=path, fix="rename the columns; times in ISO 8601 with offset")
    t = pd.to_datetime(tab["time"], errors="coerce", utc=False, format="ISO8601")
    bad = t.isna()
    if bad.any():
        row = int(bad.to_numpy().argmax())
        raise InputError(f"time {tab['time'].iloc[row]!r} cannot be read", where=f"{path} row {row + 2}",
                         fix="write ISO 8601 times with a UTC offset, e.g. 2026-07-14T10:00:00+02:00")
    idx = pd.DatetimeIndex(t)
    if idx.tz is None:
        raise InputError("irradiance times have no UTC offset", where=path,
                         fix="write times with an offset (…+02:00) or Z")
    tab.index = idx.tz_convert("UTC")
    return tab.drop(columns=["time"])


@click.command()
@click.argument("timelines", nargs=-1, required=True, type=click.Path(path_type=Path))
@click.option("--scene", "scene_path", type=click.Path(path_type=Path), default=None,
              help="Scene GeoJSON (buildings, trees, canopies) for shade and sky view; none = open ground.")
@click.option("--out", "-o", "out_dir", type=click.Path(path_type=Path), default=None,
              help="Output folder (OUT/<walk_id>/timeline.parquet); default: replace each timeline in place.")
@click.option("--irradiance", "irradiance", default="clearsky", show_default=True,
              help="'clearsky' or a CSV of irradiance measured in the open, e.g. a rooftop station, not on the "
                   "walker (time, ghi_wm2 [, dni_wm2, dhi_wm2]).")
@click.option("--body-height", "z_m", type=float, default=1.1, show_default=True,
              help="Height of the point that must see sun and sky [m].")
@click.option("--sectors", "n_sectors", type=int, default=36, show_default=True,
              help="Azimuth sectors for the sky view factor.")
@click.option("--no-globe", is_flag=True, help="Ignore the globe thermometer; Tmrt from fluxes everywhere.")
@click.option("--crown-model", type=click.Choice(["per_crossing", "path_length"]), default="per_crossing",
              show_default=True, help="Crowns pass their transmissivity once per crossing, or by path length.")
@click.option("--inside-buildings", "inside", type=click.Choice(["flag", "snap"]), default="flag", show_default=True,
              help="Positions inside a building footprint (GPS error): flag them, or also move them just outside "
                   "the nearest wall for shade and sky view.")
@click.option("--extra-index", "extra_index", type=click.Choice(["pet", "wbgt"]), multiple=True,
              help="Also compute PET of the reference person (pet_c, pet_class) and/or WBGT (wbgt_c). Repeatable.")
@click.option("--strict", is_flag=True,
              help="Refuse walks that lie mostly outside the scene's extent instead of warning.")
def thermal(timelines, scene_path, out_dir, irradiance, z_m, n_sectors, no_globe, crown_model, inside,
            extra_index=(), strict=False):
    """Add sun, shade, sky view, Tmrt and UTCI to ingested timelines (TIMELINES: walk or output folders).

    Tmrt comes from the globe thermometer (ISO 7726) where it was logged, otherwise from
    short- and long-wave fluxes. UTCI is an exposure index, not heat-health advice:
    follow local occupational-health guidance during field work.
    """
    import pandas as pd

    from walkcomfort import _io
    from walkcomfort import columns as C
    from walkcomfort.environment.coverage import check_scene_coverage
    from walkcomfort.environment.pipeline import ENV_COLUMNS, add_environment
    from walkcomfort.environment.scene import load_scene
    from walkcomfort.session.timeline import find_timelines

    files = find_timelines(timelines)
    scene = load_scene(scene_path) if scene_path is not None else None
    irr = "clearsky" if irradiance == "clearsky" else _irradiance_table(Path(irradiance))
    inputs_extra = [scene_path] if scene_path is not None else []
    if not isinstance(irr, str):
        inputs_extra.append(Path(irradiance))
    for path in files:
        df, meta = _read(path)
        walk_id = str(df.attrs["session"].get("walk_id") or path.parent.name)
        if scene is not None and C.LAT in df.columns:
            note = check_scene_coverage(scene, df[C.LON], df[C.LAT], f"walk {walk_id}", strict=strict,
                                        where=scene_path)
            if note:
                click.echo(f"warning: {note}", err=True)
        again = [c for c in ENV_COLUMNS if c in df.columns]
        if again:
            click.echo(f"{walk_id}: replacing environment columns from an earlier run ({len(again)} columns)")
        env = add_environment(df, scene=scene, irradiance=irr, use_globe=not no_globe, z_m=z_m,
                              n_sectors=n_sectors, overwrite=bool(again), crown_model=crown_model,
                              inside_buildings=inside, warn=False, indices=extra_index)
        target_dir = path.parent if out_dir is None else Path(out_dir) / walk_id
        parameters = {"scene": None if scene_path is None else Path(scene_path).name,
                      "irradiance": irradiance if isinstance(irr, str) else Path(irradiance).name,
                      "body_height_m": z_m, "n_sectors": n_sectors, "use_globe": not no_globe,
                      "crown_model": crown_model, "inside_buildings": inside, "extra_index": list(extra_index)}
        prov = _io.provenance(inputs=[path, *inputs_extra], parameters=parameters)
        new_meta = dict(meta)
        new_meta["session"] = env.attrs["session"]
        new_meta["environment"] = env.attrs["environment"]
        new_meta["provenance_environment"] = prov
        data = env.copy()
        data.attrs = {}
        # tmrt_source/utci_band hold None where unknown; Parquet keeps them as strings + nulls
        for col in (C.TMRT_SOURCE, C.UTCI_BAND, "pet_class"):
            if col in data.columns:
                data[col] = pd.array(data[col], dtype="string")
        if out_dir is not None:
            for name in COMPANIONS:
                src = path.parent / name
                if src.is_file():
                    _io.atomic_write_bytes(target_dir / name, src.read_bytes())
        _io.write_parquet(target_dir / TIMELINE_FILE, data, new_meta)
        _io.write_json(target_dir / ENVIRONMENT_FILE, {"walk_id": walk_id, "environment": env.attrs["environment"],
                                                       "provenance": prov})
        q = env.attrs["environment"]["qa_counts"]
        click.echo(f"{walk_id}: {q['rows']} rows; Tmrt from globe {q['tmrt_globe']}, from fluxes {q['tmrt_fluxes']}, "
                   f"missing {q['tmrt_missing']}; UTCI out of range {q['out_of_range']}, wind clamped to 0.5 m/s "
                   f"{q['wind_clamped']} -> {target_dir / TIMELINE_FILE}")
        if q["inside_building"]:
            click.echo(f"  note: {q['inside_building']} rows lie inside a building footprint (GPS error?); "
                       f"flagged in qa_inside_building" + (", moved outside for shade/sky view" if inside == "snap"
                                                           else ""))
        gap = (env.attrs["environment"].get("globe") or {}).get("globe_minus_fluxes_k")
        if gap:
            click.echo(f"  globe minus flux model: median {gap['median']:+.1f} K (IQR {gap['q25']:+.1f} … "
                       f"{gap['q75']:+.1f} K) over {gap['rows']} rows")
        hot = int((pd.to_numeric(env[C.UTCI_C], errors="coerce") > HEAT_CAUTION_UTCI_C).sum())
        if hot:
            click.echo(f"  caution: {hot} rows at very strong or extreme heat stress (UTCI > "
                       f"{HEAT_CAUTION_UTCI_C:g} °C). On field walks follow local occupational-health guidance "
                       "(rest, water, shade, stopping rules); these figures are not medical advice.")


@click.command()
@click.argument("extract", type=click.Path(path_type=Path))
@click.option("--out", "-o", "out_path", type=click.Path(path_type=Path), required=True,
              help="Scene GeoJSON to write; the report goes beside it (<name>.report.json).")
@click.option("--bbox", default=None, help="Keep features touching WEST,SOUTH,EAST,NORTH (degrees).")
@click.option("--around", "route_paths", multiple=True, type=click.Path(path_type=Path),
              help="Keep features within --buffer of these routes (GeoJSON lines or GPX); repeatable.")
@click.option("--buffer", "buffer_m", type=float, default=150.0, show_default=True,
              help="Distance around the --around routes [m].")
@click.option("--storey-height", type=float, default=3.0, show_default=True,
              help="Height of one storey for buildings tagged with building:levels only [m].")
@click.option("--default-height", type=float, default=9.0, show_default=True,
              help="Height of buildings with neither height nor building:levels [m].")
@click.option("--tree-height", type=float, default=10.0, show_default=True,
              help="Height of trees without a height tag [m].")
@click.option("--crown-diameter", type=float, default=6.0, show_default=True,
              help="Crown diameter of trees without diameter_crown [m].")
@click.option("--tree-row-spacing", type=float, default=8.0, show_default=True,
              help="Spacing of trees along natural=tree_row lines without a spacing tag [m].")
def scene(extract, out_path, bbox, route_paths, buffer_m, storey_height, default_height, tree_height,
          crown_diameter, tree_row_spacing):
    """Build a scene GeoJSON from a local OpenStreetMap extract (.osm.pbf, .osm or a GeoJSON export).

    Buildings take their height from `height`, else `building:levels` x storey height, else
    the default (each records its source); trees come from natural=tree points and
    natural=tree_row lines; roofs, shelters, canopies and covered ways become canopies.
    Invalid outlines are repaired; everything dropped is listed with its reason in the
    report. Heights from defaults are estimates: check them before design decisions.
    """
    from walkcomfort import _io
    from walkcomfort.environment.osm import read_osm
    from walkcomfort.environment.osmscene import SceneRules, build_scene, clip_around, parse_bbox, read_lines_lonlat

    for name, v in (("--storey-height", storey_height), ("--default-height", default_height),
                    ("--tree-height", tree_height), ("--crown-diameter", crown_diameter),
                    ("--tree-row-spacing", tree_row_spacing)):
        if not v > 0:
            raise InputError(f"{name} {v!r} is not positive", where=name, fix="give a length in metres")
    if bbox is not None and route_paths:
        raise InputError("both --bbox and --around were given", where="--bbox", fix="clip by one of them")
    clip = parse_bbox(bbox) if bbox is not None else None
    if route_paths:
        clip = clip_around([ln for p in route_paths for ln in read_lines_lonlat(p)], buffer_m)
    rules = SceneRules(storey_height_m=storey_height, default_height_m=default_height, tree_height_m=tree_height,
                       crown_diameter_m=crown_diameter, tree_row_spacing_m=tree_row_spacing)
    osm = read_osm(extract)
    built, report = build_scene(osm, rules, clip_lonlat=clip)
    prov = _io.provenance(inputs=[extract, *route_paths], parameters={
        "bbox": bbox, "buffer_m": buffer_m if route_paths else None, "rules": report["rules"]})
    report["provenance"] = prov
    report_path = out_path.with_name(out_path.name.removesuffix(".geojson") + ".report.json")
    _io.write_json(out_path, built.to_geojson())
    _io.write_json(report_path, report)
    c, h = report["counts"], report["height_sources"]
    click.echo(f"{out_path}: {c.get('buildings', 0)} buildings (height from height {h.get('height', 0)}, "
               f"building:levels {h.get('building:levels', 0)}, default {h.get('default', 0)}), "
               f"{c.get('trees', 0) + c.get('tree_row_trees', 0)} trees ({c.get('tree_row_trees', 0)} from tree rows), "
               f"{c.get('canopies', 0)} canopies")
    outside = sum(1 for d in report["dropped"] if d["reason"] == "outside the clip area")
    dropped = Counter(d["kind"] for d in report["dropped"] if d["reason"] != "outside the clip area")
    click.echo(f"  repaired outlines {len(report['repaired'])}; outside the area {outside}; set aside for a problem "
               f"{sum(dropped.values())} ({', '.join(f'{k} {v}' for k, v in sorted(dropped.items())) or 'none'}) "
               f"— reasons in {report_path}")
    if h.get("default", 0):
        click.echo(f"  note: {h['default']} buildings have no height in OpenStreetMap and stand at the default "
                   f"{default_height:g} m; check them (or tag them) before drawing conclusions")
