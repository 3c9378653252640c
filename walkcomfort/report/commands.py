"""``walkcomfort map`` (the HTML route map) and ``walkcomfort report`` (session and model reports)."""

from __future__ import annotations

import json
import os
from pathlib import Path

import click

from walkcomfort.errors import InputError

POINTS_FILE = "points.parquet"
SUMMARY_FILE = "summary.parquet"  # route summaries beside the points (walkcomfort.routes.outputs)
TIMELINE_FILE = "timeline.parquet"
BUNDLE_MANIFEST = "manifest.json"
SESSION_REPORT_FILE = "session_report.html"
MODEL_REPORT_FILE = "model_report.html"


# --------------------------------------------------------------------------------------
# reading what the other stages wrote
# --------------------------------------------------------------------------------------
def read_points(path: str | os.PathLike):
    """Per-point prediction table from ``points.parquet`` / ``points.csv`` or a routes output folder.

    Returns
    -------
    (DataFrame, dict)
        The table (index ``time`` UTC) and the ``attrs`` the routes stage stored with it.
    """
    import pandas as pd

    from walkcomfort import _io

    p = Path(path)
    if p.is_dir():
        p = p / POINTS_FILE
    if not p.is_file():
        raise InputError("no prediction table here", where=p,
                         fix="pass points.parquet (or the folder) written by 'walkcomfort route' or 'compare'")
    if p.suffix.lower() == ".csv":
        df = pd.read_csv(p, index_col=0)
        try:
            df.index = pd.to_datetime(df.index, utc=True, format="ISO8601")
        except (ValueError, TypeError):
            raise InputError("the first column of the prediction CSV is not a time stamp", where=p,
                             fix="pass points.parquet or points.csv as written by 'walkcomfort route'") from None
        df.index.name = "time"
        if "departure" in df.columns:
            df["departure"] = pd.to_datetime(df["departure"], utc=True, format="ISO8601")
        return df, {}
    try:
        df = pd.read_parquet(p)
    except (OSError, ValueError) as exc:
        raise InputError(f"cannot read the prediction table ({exc})", where=p,
                         fix="pass points.parquet as written by 'walkcomfort route'") from None
    meta = _io.read_parquet_metadata(p)
    return df, dict(meta.get("attrs") or {})


def find_walks(paths) -> list[Path]:
    """Timeline files under the given paths (a timeline, a walk folder, or a folder of walk folders)."""
    out: list[Path] = []
    for raw in paths:
        p = Path(raw)
        if p.is_file():
            out.append(p)
        elif (p / TIMELINE_FILE).is_file():
            out.append(p / TIMELINE_FILE)
        elif p.is_dir():
            found = sorted(p.glob(f"*/{TIMELINE_FILE}"))
            if not found:
                raise InputError("no timeline.parquet in this folder or its walk folders", where=p,
                                 fix="pass the output folder of 'walkcomfort ingest' (or 'thermal')")
            out.extend(found)
        else:
            raise InputError("no such file or folder", where=p, fix="check the path")
    return out


def predicted_walks(paths, model_path: Path) -> list:
    """Recorded timelines with the model's prediction columns added (for the model-error layer)."""
    from walkcomfort.model.bundle import load_bundle
    from walkcomfort.model.predict import predict_timeline
    from walkcomfort.session.timeline import read_timeline

    if not is_model_bundle(Path(model_path)):
        raise InputError("not a model bundle (no manifest.json of a walkcomfort model)", where=model_path,
                         fix="pass the folder written by 'walkcomfort fit'")
    model = load_bundle(model_path)
    out = []
    for p in paths:
        timeline = read_timeline(p)
        pred = predict_timeline(model, timeline, reasons=False)
        clash = [c for c in pred.columns if c in timeline.columns]
        walk = timeline.drop(columns=clash).join(pred)  # the model's view replaces any older one
        walk.attrs = dict(timeline.attrs)
        out.append(walk)
    return out


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
              help="Scheme GeoJSON (names the layers, draws its edits). Repeatable.")
@click.option("--walk", "walk_paths", multiple=True, type=click.Path(path_type=Path),
              help="Recorded walk: timeline.parquet, its folder, or a folder of walk folders. Repeatable.")
@click.option("--model", "model_path", type=click.Path(path_type=Path), default=None,
              help="Model bundle: predict each recorded walk, so the map shows where the model disagrees "
                   "with the votes.")
@click.option("--offline", is_flag=True, help="Inline Leaflet: one self-contained file that opens without network.")
@click.option("--tiles", default="none", show_default=True,
              help="Base map: 'none', 'osm', an http(s) {z}/{x}/{y} URL template, or a local tile folder.")
@click.option("--attribution", default=None, help="Attribution text the tile source requires.")
@click.option("--max-zoom", type=int, default=None, help="Highest zoom level of the tiles.")
@click.option("--timezone", default=None, help="IANA zone for times in popups (default: the table's, else UTC).")
@click.option("--layers", default=",".join(("comfort", "utci", "shade", "scene", "votes", "errors")),
              show_default=True, help="Comma-separated kinds of layer to draw.")
@click.option("--decimals", type=int, default=5, show_default=True, help="Decimal places kept in coordinates.")
@click.option("--simplify-m", type=float, default=1.0, show_default=True,
              help="Line simplification tolerance [m] (colour changes are always kept).")
@click.option("--error-cell-m", type=float, default=50.0, show_default=True,
              help="Grid size of the model-error layer [m].")
@click.option("--budget-mb", type=float, default=5.0, show_default=True, help="Warn when the file is larger [MB].")
@click.option("--title", default=None, help="Title on the map (default: 'Predicted walking comfort').")
def map_(points, out_html, scene_path, scheme_paths, walk_paths, model_path, offline, tiles, attribution, max_zoom, timezone,
         layers, decimals, simplify_m, error_cell_m, budget_mb, title):
    """Write the HTML route map from prediction tables (POINTS) and/or recorded walks.

    POINTS are points.parquet files (or their folders) from 'walkcomfort route' / 'compare';
    a summary.parquet beside them adds whole-walk figures to the popups.
    """
    import pandas as pd

    from walkcomfort.report.routemap import route_map, write_map

    if not points and not walk_paths and scene_path is None:
        raise InputError("nothing to map", where="walkcomfort map",
                         fix="give points.parquet, --walk folders or a --scene")
    tables, summaries, attrs = [], [], {}
    for p in points:
        df, meta = read_points(p)
        tables.append(df)
        attrs = attrs or meta
        summary = (Path(p) if Path(p).is_dir() else Path(p).parent) / SUMMARY_FILE
        if summary.is_file():
            summaries.append(pd.read_parquet(summary))
    predictions = pd.concat(tables) if tables else None
    zone = timezone or ((attrs.get("session") or {}).get("timezone") if isinstance(attrs.get("session"), dict)
                        else None) or "UTC"
    schemes = list(scheme_paths)
    walks = find_walks(walk_paths)
    if model_path is not None:
        walks = predicted_walks(walks, model_path)
    fmap = route_map(predictions, scene=scene_path, schemes=schemes, walks=walks,
                     summaries=pd.concat(summaries, ignore_index=True) if summaries else None,
                     timezone=zone, tiles=tiles, attribution=attribution, max_zoom=max_zoom,
                     layers=tuple(k.strip() for k in layers.split(",") if k.strip()), decimals=decimals,
                     simplify_m=simplify_m, error_cell_m=error_cell_m, title=title)
    import warnings

    from walkcomfort.errors import DataQualityWarning

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", DataQualityWarning)
        path = write_map(fmap, out_html, offline=offline, size_budget_bytes=int(budget_mb * 1e6))
    for w in caught:
        if issubclass(w.category, DataQualityWarning):
            click.echo(f"warning: {w.message}", err=True)
        else:  # not ours to reword: pass it on unchanged
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    click.echo(f"wrote {path} ({path.stat().st_size / 1e3:.0f} kB{', offline' if offline else ''})")


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
def report(paths, out, timezone, title, scene_path):
    """Write HTML reports: a session report for each walk, a model report for a model bundle.

    PATHS are walk folders / timeline.parquet from 'walkcomfort ingest' (or 'thermal'), folders
    of walk folders, or model bundle folders from 'walkcomfort fit'.
    """
    from walkcomfort.report.session_report import write_session_report

    jobs: list[tuple[str, Path]] = []
    for p in paths:
        p = Path(p)
        if is_model_bundle(p):
            jobs.append(("model", p))
        else:
            jobs.extend(("session", t) for t in find_walks([p]))
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
                                           title=title, timezone=timezone, scene=scene_path)
        click.echo(f"wrote {written}")
