"""``walkcomfort map`` (the HTML route map) and ``walkcomfort report`` (session and model reports)."""

from __future__ import annotations

import json
from pathlib import Path

import click

from walkcomfort.errors import InputError
from walkcomfort.report.tables import network_times, read_network_layers, read_route_tables

TIMELINE_FILE = "timeline.parquet"
BUNDLE_MANIFEST = "manifest.json"
SESSION_REPORT_FILE = "session_report.html"
MODEL_REPORT_FILE = "model_report.html"


# --------------------------------------------------------------------------------------
# reading what the other stages wrote
# --------------------------------------------------------------------------------------
PREDICTION_COLUMNS = ("comfort_class", "p_comfortable", "p_neutral", "p_uncomfortable", "predictor", "reasons")


def _walk_key(timeline) -> tuple[str | None, str | None]:
    """(walk_id, participant) of a timeline: its session attributes, else its columns."""
    from walkcomfort import columns as C

    session = (timeline.attrs or {}).get("session") or {}
    out = []
    for attr in (C.WALK_ID, C.PARTICIPANT):
        v = session.get(attr)
        if not v and attr in timeline.columns and timeline[attr].notna().any():
            v = timeline[attr].dropna().iloc[0]
        out.append(str(v) if v else None)
    return out[0], out[1]


def predicted_walks(paths, model_path: Path) -> tuple[list, str]:
    """Recorded timelines with the model's prediction columns added (for the model-error layer).

    When the bundle holds the out-of-fold predictions of its fit (``oof_predictions.parquet``,
    comfort target), a walk that trained the model gets those at its votes: each predicted by
    a model that never saw that walker. A walk whose walker did not train the model is
    predicted by the bundle (also held out). Otherwise the bundle predicts every walk.

    Returns
    -------
    (list of DataFrame, str)
        The walks, and ``"held-out"`` when every vote's prediction comes from a model that
        never saw its walker, else ``"in-sample"``.
    """
    import numpy as np
    import pandas as pd

    from walkcomfort import columns as C
    from walkcomfort.model.bundle import load_bundle
    from walkcomfort.model.predict import predict_timeline
    from walkcomfort.session.timeline import read_timeline

    if not is_model_bundle(Path(model_path)):
        raise InputError("not a model bundle (no manifest.json of a walkcomfort model)", where=model_path,
                         fix="pass the folder written by 'walkcomfort fit'")
    oof = None
    try:
        from walkcomfort.model.workflow import read_oof_predictions
    except ImportError:  # pragma: no cover - model stage not installed
        read_oof_predictions = None
    if read_oof_predictions is not None:
        oof = read_oof_predictions(model_path)
        if oof is not None and not set(oof["vote"].dropna()) <= set(C.COMFORT_CLASSES):
            oof = None  # a sensation-vote bundle: its classes are not the map's comfort classes
    trained_walkers = set(oof[C.PARTICIPANT].dropna()) if oof is not None else set()
    model = None
    source = "held-out" if oof is not None else "in-sample"
    out = []
    for p in paths:
        timeline = read_timeline(p)
        walk_id, participant = _walk_key(timeline)
        mine = oof[oof[C.WALK_ID] == walk_id] if oof is not None and walk_id is not None else None
        if mine is not None and len(mine):
            walk = timeline.drop(columns=[c for c in PREDICTION_COLUMNS if c in timeline.columns])
            at = walk.index.get_indexer(mine.index)
            found = at >= 0
            cls = np.full(len(walk), None, dtype=object)
            cls[at[found]] = mine["predicted"].to_numpy(dtype=object)[found]
            walk["comfort_class"] = cls
            for c in C.COMFORT_CLASSES:
                col = np.full(len(walk), np.nan)
                if f"p_{c}" in mine.columns:
                    col[at[found]] = mine[f"p_{c}"].to_numpy(float)[found]
                walk[f"p_{c}"] = col
            walk["predictor"] = pd.array(np.where(pd.isna(cls), None, "held-out fold of the fit"), dtype="string")
        else:
            if participant is None or participant in trained_walkers:
                source = "in-sample"  # the bundle has seen this walker (or cannot tell)
            model = model if model is not None else load_bundle(model_path)
            pred = predict_timeline(model, timeline, reasons=False)
            clash = [c for c in pred.columns if c in timeline.columns]
            walk = timeline.drop(columns=clash).join(pred)  # the model's view replaces any older one
        walk.attrs = dict(timeline.attrs)
        out.append(walk)
    return out, source


def is_model_bundle(path: Path) -> bool:
    manifest = path / BUNDLE_MANIFEST
    if not (path.is_dir() and manifest.is_file()):
        return False
    try:
        schema = json.loads(manifest.read_text(encoding="utf-8")).get("schema", "")
    except (OSError, json.JSONDecodeError, AttributeError):
        return False
    return str(schema).startswith("walkcomfort-model/")


# --------------------------------------------------------------------------------------
# map
# --------------------------------------------------------------------------------------
@click.command("map")
@click.argument("points", nargs=-1, type=click.Path(path_type=Path))
@click.option("-o", "--out", "out_html", type=click.Path(path_type=Path), required=True,
              help="The HTML file to write.")
@click.option("--scene", "scene_path", type=click.Path(path_type=Path), default=None,
              help="Scene GeoJSON (buildings, trees, canopies) to draw under the routes.")
@click.option("--scheme", "scheme_paths", multiple=True, type=click.Path(path_type=Path),
              help="Scheme GeoJSON (names the scheme, draws its edits). Repeatable.")
@click.option("--walk", "walk_paths", multiple=True, type=click.Path(path_type=Path),
              help="Recorded walk: timeline.parquet, its folder, or a folder of walk folders. Repeatable.")
@click.option("--model", "model_path", type=click.Path(path_type=Path), default=None,
              help="Model bundle: predict each recorded walk, so the map shows where the model disagrees "
                   "with the votes (held-out walkers: the fit's out-of-fold predictions, when the bundle has them).")
@click.option("--network", "network_dir", type=click.Path(path_type=Path), default=None,
              help="Output folder of 'walkcomfort network' (or one network_layer_<scheme>.geojson): "
                   "the street segments, following the scheme picker.")
@click.option("--network-scheme", "network_schemes", multiple=True,
              help="Only these schemes of --network (repeatable; default all, the base first).")
@click.option("--online", is_flag=True,
              help="Load the map library (Leaflet) from the internet instead of inlining it (smaller file; "
                   "without a connection the page shows a message instead of the map).")
@click.option("--offline", "offline_flag", is_flag=True, hidden=True,
              help="Accepted for older scripts: inlining is now the default.")
@click.option("--tiles", default="none", show_default=True,
              help="Base map: 'none', 'osm', an http(s) {z}/{x}/{y} URL template, or a local tile folder.")
@click.option("--attribution", default=None, help="Attribution text the tile source requires.")
@click.option("--max-zoom", type=int, default=None, help="Highest zoom level of the tiles.")
@click.option("--timezone", default=None, help="IANA zone for times in popups (default: the table's, else UTC).")
@click.option("--layers", default="routes,scene,votes,errors,network", show_default=True,
              help="Comma-separated kinds of layer to draw.")
@click.option("--decimals", type=int, default=5, show_default=True, help="Decimal places kept in coordinates.")
@click.option("--simplify-m", type=float, default=1.0, show_default=True,
              help="Line simplification tolerance [m] (colour changes are always kept).")
@click.option("--error-cell-m", type=float, default=50.0, show_default=True,
              help="Grid size of the model-error layer [m].")
@click.option("--budget-mb", type=float, default=5.0, show_default=True, help="Warn when the file is larger [MB].")
@click.option("--title", default=None, help="Title on the map (default: 'Predicted walking comfort').")
@click.option("--site", default=None, help="Site name for the title block (default: the table's).")
@click.option("--sites", "sites_path", type=click.Path(path_type=Path), default=None,
              help="sites.geojson of 'walkcomfort advise': chosen sites numbered in order, runner-ups faded.")
@click.option("--index", type=click.Choice(["utci", "pet"]), default="utci", show_default=True,
              help="Thermal index of the band colouring and the popups (pet needs tables from --index pet).")
def map_(points, out_html, scene_path, scheme_paths, walk_paths, model_path, network_dir, network_schemes,
         online, offline_flag, tiles, attribution, max_zoom, timezone, layers, decimals, simplify_m, error_cell_m,
         budget_mb, title, site, sites_path, index):
    """Write the HTML route map from prediction tables (POINTS) and/or recorded walks.

    POINTS are points.parquet files (or their folders) from 'walkcomfort route' / 'compare';
    summary.parquet and comparison.csv beside them add whole-walk figures and the interval of
    each difference. The page is self-contained (opens with no network) unless --online.
    """
    from walkcomfort.report.map import context_from_table, route_map
    from walkcomfort.session.timeline import find_timelines

    if not points and not walk_paths and scene_path is None and network_dir is None and sites_path is None:
        raise InputError("nothing to map", where="walkcomfort map",
                         fix="give points.parquet, --walk folders, a --scene or --network")
    if online and offline_flag:
        raise InputError("--online and --offline contradict each other", where="--online",
                         fix="drop one of them (self-contained is the default)")
    t = read_route_tables(points)
    session = t["attrs"].get("session") if isinstance(t["attrs"].get("session"), dict) else {}
    zone = timezone or session.get("timezone") or "UTC"
    walks = find_timelines(walk_paths)
    error_source = "in-sample"
    if model_path is not None:
        walks, error_source = predicted_walks(walks, model_path)
    network_layers = read_network_layers(network_dir, network_schemes) if network_dir is not None else None
    context = context_from_table(t["attrs"], t["provenance"]) if t["predictions"] is not None else {}
    if site:
        context["site"] = site
    fmap = route_map(t["predictions"], scene=scene_path, schemes=list(scheme_paths), walks=walks,
                     error_source=error_source, network=network_layers or (),
                     network_times=network_times(network_dir if network_dir and network_dir.is_dir() else None, zone),
                     summaries=t["summaries"], comparison=t["comparison"], context=context,
                     timezone=zone, tiles=tiles, attribution=attribution, max_zoom=max_zoom,
                     layers=tuple(k.strip() for k in layers.split(",") if k.strip()), decimals=decimals,
                     simplify_m=simplify_m, error_cell_m=error_cell_m, title=title, sites=sites_path,
                     index=index)
    path = _write_reporting_warnings(fmap, out_html, online, budget_mb)
    click.echo(f"wrote {path} ({path.stat().st_size / 1e3:.0f} kB{', loads Leaflet online' if online else ''})")


def _write_reporting_warnings(fmap, out_html: Path, online: bool, budget_mb: float) -> Path:
    """Write the map; our data-quality warnings become one line each on stderr."""
    import warnings

    from walkcomfort.errors import DataQualityWarning
    from walkcomfort.report.map import write_map

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", DataQualityWarning)
        path = write_map(fmap, out_html, online=online, size_budget_bytes=int(budget_mb * 1e6))
    for w in caught:
        if issubclass(w.category, DataQualityWarning):
            click.echo(f"warning: {w.message}", err=True)
        else:  # not ours to reword: pass it on unchanged
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    return path


# --------------------------------------------------------------------------------------
# report
# --------------------------------------------------------------------------------------
def _model_report(bundle: Path, out: Path) -> Path:
    """The model report of a bundle: rendered by walkcomfort.report.model_report when it can,
    else the report the fit wrote into the bundle."""
    from walkcomfort import _io

    try:
        from walkcomfort.report import model_report
    except ImportError:  # pragma: no cover - the model stage is not installed
        model_report = None
    render = getattr(model_report, "write_bundle_report", None) if model_report is not None else None
    if render is not None:
        return Path(render(bundle, out))
    fitted = bundle / "report.html"
    if fitted.is_file():
        if fitted.resolve() == out.resolve():
            return out
        return _io.atomic_write_bytes(out, fitted.read_bytes())
    raise InputError("this model bundle has no report.html and cannot be re-rendered", where=bundle,
                     fix="re-run 'walkcomfort fit', which writes the model report into the bundle")


@click.command("report")
@click.argument("paths", nargs=-1, required=True, type=click.Path(path_type=Path))
@click.option("-o", "--out", "out", type=click.Path(path_type=Path), default=None,
              help="Output: an .html file (one input) or a folder; default beside each input.")
@click.option("--timezone", default=None, help="IANA zone for local times (default: each session's own).")
@click.option("--title", default=None, help="Page title (one input only).")
@click.option("--scene", "scene_path", type=click.Path(path_type=Path), default=None,
              help="Scene GeoJSON drawn under each walk's track in the session reports.")
@click.option("--index", type=click.Choice(["utci", "pet"]), default="utci", show_default=True,
              help="Thermal index drawn in the session reports: UTCI with its bands, or PET of the reference person "
                   "with its classes (computed from the environment when the timeline lacks it).")
def report(paths, out, timezone, title, scene_path, index="utci"):
    """Write HTML reports: a session report for each walk, a model report for a model bundle.

    PATHS are walk folders / timeline.parquet from 'walkcomfort ingest' (or 'thermal'), folders
    of walk folders, or model bundle folders from 'walkcomfort fit'.
    """
    from walkcomfort.report.session_report import write_session_report
    from walkcomfort.session.timeline import find_timelines

    jobs: list[tuple[str, Path]] = []
    for p in paths:
        p = Path(p)
        if is_model_bundle(p):
            jobs.append(("model", p))
        else:
            jobs.extend(("session", t) for t in find_timelines([p]))
    single_file = out is not None and out.suffix.lower() in (".html", ".htm")
    if single_file and len(jobs) != 1:
        raise InputError(f"-o {out} names one file but there are {len(jobs)} reports to write", where="--out",
                         fix="give a folder to -o")
    if title is not None and len(jobs) != 1:
        raise InputError("--title applies to a single report", where="--title", fix="drop --title or give one input")
    for kind, src in jobs:
        if kind == "model":
            target = out if single_file else (out / src.name / MODEL_REPORT_FILE if out else src / MODEL_REPORT_FILE)
            written = _model_report(src, target)
        else:
            folder = src.parent
            target = out if single_file else (out / folder.name / SESSION_REPORT_FILE if out
                                              else folder / SESSION_REPORT_FILE)
            written = write_session_report(src if src.name != TIMELINE_FILE else folder, out_html=target,
                                           title=title, timezone=timezone, scene=scene_path, index=index)
        click.echo(f"wrote {written}")


# --------------------------------------------------------------------------------------
# brief
# --------------------------------------------------------------------------------------
@click.command("brief")
@click.argument("folders", nargs=-1, required=True, type=click.Path(path_type=Path))
@click.option("-o", "--out", "out_dir", type=click.Path(path_type=Path), default=None,
              help="Folder for brief_<route>.html/.pdf (default: each comparison's own folder).")
@click.option("--scene", "scene_path", type=click.Path(path_type=Path), default=None,
              help="Scene GeoJSON drawn under the routes in the map snapshot.")
@click.option("--scheme", "scheme_paths", multiple=True, type=click.Path(path_type=Path),
              help="Scheme GeoJSON (names the schemes, draws their edits). Repeatable.")
@click.option("--no-pdf", is_flag=True, help="Write the HTML only (no Chromium needed; no map snapshot).")
@click.option("--title", default=None, help="Title of the brief (one folder only).")
def brief(folders, out_dir, scene_path, scheme_paths, no_pdf, title):
    """Write a one-page printable brief (HTML and PDF) per route comparison.

    FOLDERS are output folders of 'walkcomfort compare'. The PDF is printed by headless
    Chromium ($WALKCOMFORT_CHROMIUM or chromium on the PATH).
    """
    from walkcomfort.report.brief import write_brief

    if title is not None and len(folders) != 1:
        raise InputError("--title applies to a single brief", where="--title", fix="drop --title or give one folder")
    for folder in folders:
        folder = Path(folder)
        for path in write_brief(folder, out_dir or folder, scene=scene_path, schemes=scheme_paths,
                                pdf=not no_pdf, title=title):
            click.echo(f"wrote {path}")
