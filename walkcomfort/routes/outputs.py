"""Files of a route prediction or a scheme comparison: tables, GeoJSON, summary, plot.

Everything goes through :mod:`walkcomfort._io` (atomic, byte-stable) and carries a
provenance record (inputs' digests, parameters), never wall-clock time.

Layout of ``OUT/``::

    points.parquet  points.csv  points.geojson     per-point prediction table
    summary.parquet summary.csv                    one row per route x scheme x departure
    comparison.csv                                 schemes against the base (differences)
    best_departures.csv  cost_effectiveness.csv  along_route.csv (50 m sections vs the base)
    summary.md  summary.html                       the same in words and tables
    comfort_along_route.png                        one panel per scheme
    provenance.json
"""

from __future__ import annotations

import base64
from pathlib import Path

import numpy as np
import pandas as pd

from walkcomfort import _io
from walkcomfort import columns as C
from walkcomfort._html import esc, page
from walkcomfort.labels import format_value, header
from walkcomfort.routes.compare import CAUTION, Comparison
from walkcomfort.routes.predict import PHYSICS_RULE
from walkcomfort.routes.simulate import DEPARTURE

FILES = ("points.parquet", "points.csv", "points.geojson", "summary.parquet", "summary.csv", "comparison.csv",
         "best_departures.csv", "cost_effectiveness.csv", "along_route.csv", "summary.md", "summary.html", "comfort_along_route.png",
         "provenance.json")


def _iso(v):
    if isinstance(v, pd.Timestamp):
        return v.tz_convert("UTC").isoformat() if v.tzinfo else v.isoformat()
    return v


def points_geojson(points: pd.DataFrame, digits: int = 7) -> dict:
    """The per-point table as a GeoJSON FeatureCollection of Points (all columns as properties)."""
    df = points.reset_index()
    feats = []
    cols = list(df.columns)
    for rec in df.itertuples(index=False, name=None):
        props = {}
        for k, v in zip(cols, rec, strict=False):
            if isinstance(v, (float, np.floating)):
                v = None if not np.isfinite(v) else round(float(v), 6)
            elif isinstance(v, (np.integer,)):
                v = int(v)
            elif isinstance(v, (np.bool_,)):
                v = bool(v)
            props[k] = _iso(v)
        feats.append({"type": "Feature", "properties": props,
                      "geometry": {"type": "Point",
                                   "coordinates": [round(float(props[C.LON]), digits), round(float(props[C.LAT]), digits)]}})
    return {"type": "FeatureCollection", "features": feats}


TIME_COLUMNS = (DEPARTURE, "arrival")


def with_local_times(df: pd.DataFrame, timezone: str | None, index_name: str | None = None) -> pd.DataFrame:
    """The table with ``<col>_local`` beside each UTC time column (and ``time_local`` for a time index).

    The UTC columns stay as they are; the local ones are the same instants in the route's zone
    (UTC when no zone is known), so a reader of the CSV or Parquet sees local clock time.
    """
    zone = timezone or "UTC"
    out = df.copy()
    for c in TIME_COLUMNS:
        if c in out.columns:
            at = out.columns.get_loc(c) + 1
            out.insert(at, f"{c}_local", pd.DatetimeIndex(pd.to_datetime(out[c], utc=True)).tz_convert(zone))
    if index_name and isinstance(out.index, pd.DatetimeIndex) and out.index.tz is not None:
        out.insert(0, f"{index_name}_local", out.index.tz_convert(zone))
    return out


def csv_ready(df: pd.DataFrame, index: bool = False) -> pd.DataFrame:
    """Times as ISO 8601 to the second with their offset (no microseconds) for the CSV files."""
    out = df.copy()
    for c in out.columns:
        if isinstance(out[c].dtype, pd.DatetimeTZDtype):
            out[c] = out[c].dt.round("s").map(lambda t: t.isoformat() if pd.notna(t) else "")
    if index and isinstance(out.index, pd.DatetimeIndex):
        name = out.index.name
        out.index = pd.Index([t.isoformat() for t in out.index.round("s")], name=name)
    return out


def markdown_table(df: pd.DataFrame, columns=None, timezone: str | None = None) -> str:
    """A Markdown table with plain labels and units as headers and each kind of number formatted alike."""
    cols = [c for c in list(columns or df.columns) if c in df.columns]
    lines = ["| " + " | ".join(header(c) for c in cols) + " |", "|" + "|".join("---" for _ in cols) + "|"]
    for _, r in df[cols].iterrows():
        lines.append("| " + " | ".join(format_value(c, r[c], timezone).replace("|", "/") for c in cols) + " |")
    return "\n".join(lines)


SUMMARY_COLS = ["scheme", DEPARTURE, "walk_min", "exp_min_comfortable", "exp_min_neutral", "exp_min_uncomfortable",
                "argmax_min_comfortable", "shade_share", "mean_utci_c", "peak_utci_c", "heat_dose_cmin"]
COMPARE_COLS = ["scheme", DEPARTURE, "delta_exp_min_comfortable", "delta_exp_min_comfortable_lo",
                "delta_exp_min_comfortable_hi", "within_model_error", "delta_exp_min_uncomfortable",
                "delta_shade_share", "delta_mean_utci_c", "delta_peak_utci_c", "delta_heat_dose_cmin"]
BEST_COLS = ["scheme", DEPARTURE, "departures_n", "exp_min_comfortable", "exp_share_comfortable", "mean_utci_c",
             "heat_dose_cmin"]
COST_COLS = ["scheme", "trees_added", "trees_removed", "shade_m2_added", "gain_comfortable_min",
             "gain_min_per_tree", "gain_min_per_100m2_shade", "heat_dose_avoided_cmin"]


def summary_markdown(result: Comparison, timezone: str | None = None, title: str | None = None) -> str:
    """The comparison in words and tables (Markdown)."""
    pts = result.points
    rid = pts["route_id"].iloc[0] if len(pts) else ""
    predictor = pts["predictor"].iloc[0] if len(pts) else ""
    lines = [f"# {title or f'Comfort along route {rid}'}", ""]
    if predictor == PHYSICS_RULE:
        lines += ["**Predictor: the physics-only UTCI-band rule (no model bundle given).** Classes come from the "
                  "UTCI band alone; expected and arg-max minutes are then the same.", ""]
    else:
        lines += [f"Predictor: comfort model `{predictor}`; expected minutes come from its class probabilities.", ""]
    attrs = pts.attrs
    lines += [f"- Weather: {attrs.get('weather', '')}", f"- Times shown in {timezone or 'UTC'}", ""]
    for n in result.notices:
        lines.append(f"> Note: {n}")
    lines += ["", f"> Caution: {CAUTION}", "", "## Walks (one row per scheme and departure)", "",
              markdown_table(result.summary, SUMMARY_COLS, timezone), ""]
    if len(result.comparison):
        lines += ["## Schemes against the base (scheme − base)", "",
                  markdown_table(result.comparison, COMPARE_COLS, timezone), ""]
    if len(result.best) and result.best["departures_n"].max() > 1:
        lines += ["## Best departure in the sweep", "",
                  "Most expected comfortable share; ties go to the lower heat dose.", "",
                  markdown_table(result.best, BEST_COLS, timezone), ""]
    if len(result.cost):
        lines += ["## What each scheme adds, and what it buys", "",
                  "Gain = expected comfortable minutes per walk over the base, averaged over departures.", "",
                  markdown_table(result.cost, COST_COLS), ""]
    along = result.along
    if len(along) and "delta_mean_utci_c" in along.columns and along["delta_mean_utci_c"].notna().any():
        lines += ["## Where along the route", "",
                  "The three sections of the route where each scheme lowers mean UTCI most (all departures).", ""]
        others = along[along["scheme"] != "base"].dropna(subset=["delta_mean_utci_c"])
        cooler = others[others["delta_mean_utci_c"] < -0.05]
        top = cooler.sort_values(["scheme", "delta_mean_utci_c"], kind="stable").groupby("scheme").head(3)
        if len(top):
            lines += [markdown_table(top, ["scheme", "from_m", "to_m", "delta_mean_utci_c", "delta_shade_share",
                                           "delta_exp_share_comfortable"]), ""]
        unchanged = sorted(set(others["scheme"]) - set(cooler["scheme"]))
        if unchanged:
            lines += [f"No section of this route is cooler by more than 0.05 °C under: {', '.join(unchanged)} "
                      "(the scheme does not reach this route, or not at these times).", ""]
    lines += [f"Times are local ({timezone or 'UTC'}); shares in %; changes of a share in percentage points; "
              "heat dose = time integral of UTCI above 26 °C [°C·min].", ""]
    return "\n".join(lines)


SUMMARY_STYLE = ("body{font-family:system-ui,sans-serif;max-width:72rem;margin:2rem auto;padding:0 1rem;color:#1f1f1f}"
                 ".wide{overflow-x:auto}table{border-collapse:collapse;margin:1rem 0;font-size:.85rem}"
                 "td,th{border:1px solid #bbb;padding:.25rem .5rem;text-align:right;vertical-align:top}"
                 "th{background:#eee;font-weight:600}td:first-child,th:first-child{text-align:left}"
                 ".note{background:#fff6df;padding:.5rem}img{max-width:100%;border:1px solid #ccc}"
                 "@media print{.wide{overflow:visible}}")


def _html_table(rows: list[str]) -> str:
    head, *rest = rows
    cells = [c.strip() for c in head.strip("|").split("|")]
    out = ['<div class="wide"><table>', "<tr>" + "".join(f"<th>{esc(c)}</th>" for c in cells) + "</tr>"]
    for r in rest[1:]:
        out.append("<tr>" + "".join(f"<td>{esc(c.strip())}</td>" for c in r.strip("|").split("|")) + "</tr>")
    out.append("</table></div>")
    return "\n".join(out)


def _html_line(line: str) -> str:
    for prefix, tag in (("## ", "h2"), ("# ", "h1")):
        if line.startswith(prefix):
            return f"<{tag}>{esc(line[len(prefix):])}</{tag}>"
    if line.startswith("> "):
        return f'<p class="note">{esc(line[2:])}</p>'
    if line.startswith("- "):
        return f"<p>{esc(line[2:])}</p>"
    return f"<p>{esc(line).replace('**', '')}</p>" if line.strip() else ""


def summary_html(markdown: str, images: tuple = ()) -> str:
    """A self-contained HTML page from :func:`summary_markdown` (all text escaped, the shared policy).

    ``images`` are ``(alt text, PNG bytes)`` pairs embedded after the first heading's block.
    """
    body: list[str] = []
    rows: list[str] = []
    for line in markdown.splitlines() + [""]:
        if line.startswith("|"):
            rows.append(line)
            continue
        if rows:
            body.append(_html_table(rows))
            rows = []
        if line.startswith("## ") and images:
            body += [f'<p><img alt="{esc(alt)}" src="data:image/png;base64,{base64.b64encode(png).decode()}"></p>'
                     for alt, png in images]
            images = ()
        body.append(_html_line(line))
    title = next((ln[2:] for ln in markdown.splitlines() if ln.startswith("# ")), "Route comfort")
    return page(title, "\n".join(b for b in body if b), style=SUMMARY_STYLE)


def _telling_departure(result: Comparison):
    """The departure where the schemes differ most from the base (mean UTCI), else the best base one."""
    c = result.comparison
    if len(c) and np.isfinite(c["delta_mean_utci_c"]).any():
        score = c.groupby(DEPARTURE)["delta_mean_utci_c"].apply(lambda v: float(np.nanmax(np.abs(v))))
        if score.max() > 0:
            return score.idxmax()
    if len(result.best):
        base = result.best[result.best["scheme"] == "base"]
        return (base if len(base) else result.best)[DEPARTURE].iloc[0]
    return None


def write_outputs(result: Comparison, out_dir, provenance: dict, timezone: str | None = None,
                  plot_departure=None) -> dict[str, Path]:
    """Write every output of a comparison (or of a single-scheme route run) into ``out_dir``.

    Returns
    -------
    dict
        File name -> path written.
    """
    from walkcomfort.routes.plots import plot_comfort_along_route, save_figure

    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    written = {}
    pts = result.points
    meta = {"provenance": provenance, "caution": CAUTION, "attrs": {k: v for k, v in pts.attrs.items()
                                                                    if isinstance(v, (str, int, float, list, dict))}}
    local = {name: with_local_times(df, timezone) for name, df in (
        ("summary", result.summary), ("comparison", result.comparison), ("best", result.best))}
    points_local = with_local_times(pts, timezone, index_name=pts.index.name or C.TIME)
    points_local.attrs = pts.attrs
    written["points.parquet"] = _io.write_parquet(out / "points.parquet", points_local, meta)
    written["points.csv"] = _io.write_csv(out / "points.csv", csv_ready(points_local, index=True))
    written["points.geojson"] = _io.write_json(out / "points.geojson", points_geojson(pts))
    written["summary.parquet"] = _io.write_parquet(out / "summary.parquet", local["summary"], meta)
    written["summary.csv"] = _io.write_csv(out / "summary.csv", csv_ready(local["summary"]), index=False)
    written["comparison.csv"] = _io.write_csv(out / "comparison.csv", csv_ready(local["comparison"]), index=False)
    written["best_departures.csv"] = _io.write_csv(out / "best_departures.csv", csv_ready(local["best"]), index=False)
    written["cost_effectiveness.csv"] = _io.write_csv(out / "cost_effectiveness.csv", result.cost, index=False)
    written["along_route.csv"] = _io.write_csv(out / "along_route.csv", result.along, index=False)
    if plot_departure is None:
        plot_departure = _telling_departure(result)
    fig = plot_comfort_along_route(pts, departure=plot_departure, timezone=timezone)
    save_figure(fig, out / "comfort_along_route.png")
    written["comfort_along_route.png"] = out / "comfort_along_route.png"
    md = summary_markdown(result, timezone=timezone)
    written["summary.md"] = _io.atomic_write_text(out / "summary.md", md)
    plot = ("Comfort and UTCI along the route, one panel per scheme", (out / "comfort_along_route.png").read_bytes())
    written["summary.html"] = _io.atomic_write_text(out / "summary.html", summary_html(md, images=(plot,)))
    written["provenance.json"] = _io.write_json(out / "provenance.json", provenance)
    return written
