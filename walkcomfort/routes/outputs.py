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

import html
from pathlib import Path

import numpy as np
import pandas as pd

from walkcomfort import _io
from walkcomfort import columns as C
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


def _fmt(v) -> str:
    if isinstance(v, pd.Timestamp):
        return v.strftime("%Y-%m-%d %H:%M %Z")
    if isinstance(v, (float, np.floating)):
        if not np.isfinite(v):
            return "–"
        a = abs(float(v))
        if a >= 100:
            return f"{v:.0f}"
        if a < 5e-4:
            return "0"  # rounding noise of a difference, not a value
        return f"{v:.3g}"
    return str(v)


def _local(df: pd.DataFrame, timezone: str | None) -> pd.DataFrame:
    out = df.copy()
    for c in (DEPARTURE, "arrival"):
        if c in out.columns and timezone:
            out[c] = pd.DatetimeIndex(out[c]).tz_convert(timezone)
    return out


def markdown_table(df: pd.DataFrame, columns=None) -> str:
    cols = list(columns or df.columns)
    cols = [c for c in cols if c in df.columns]
    lines = ["| " + " | ".join(cols) + " |", "|" + "|".join("---" for _ in cols) + "|"]
    for _, r in df[cols].iterrows():
        lines.append("| " + " | ".join(_fmt(r[c]).replace("|", "/") for c in cols) + " |")
    return "\n".join(lines)


SUMMARY_COLS = ["scheme", DEPARTURE, "walk_min", "exp_min_comfortable", "exp_min_neutral", "exp_min_uncomfortable",
                "argmax_min_comfortable", "shade_share", "mean_utci_c", "peak_utci_c", "heat_dose_cmin"]
COMPARE_COLS = ["scheme", DEPARTURE, "delta_exp_min_comfortable", "delta_exp_min_uncomfortable",
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
              markdown_table(_local(result.summary, timezone), SUMMARY_COLS), ""]
    if len(result.comparison):
        lines += ["## Schemes against the base (scheme − base)", "",
                  markdown_table(_local(result.comparison, timezone), COMPARE_COLS), ""]
    if len(result.best) and result.best["departures_n"].max() > 1:
        lines += ["## Best departure in the sweep", "",
                  "Most expected comfortable share; ties go to the lower heat dose.", "",
                  markdown_table(_local(result.best, timezone), BEST_COLS), ""]
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
    lines += ["Minutes [min]; shares 0…1; UTCI [°C]; heat dose = time integral of UTCI above 26 °C [°C·min].", ""]
    return "\n".join(lines)


def summary_html(markdown: str) -> str:
    """A self-contained HTML page from :func:`summary_markdown` (tables, headings, notes; all text escaped)."""
    body = []
    rows: list[str] = []

    def flush():
        if rows:
            head, *rest = rows
            cells = [c.strip() for c in head.strip("|").split("|")]
            out = ["<table>", "<tr>" + "".join(f"<th>{html.escape(c)}</th>" for c in cells) + "</tr>"]
            for r in rest[1:]:
                out.append("<tr>" + "".join(f"<td>{html.escape(c.strip())}</td>" for c in r.strip("|").split("|"))
                           + "</tr>")
            out.append("</table>")
            body.append("\n".join(out))
            rows.clear()

    for line in markdown.splitlines():
        if line.startswith("|"):
            rows.append(line)
            continue
        flush()
        if line.startswith("## "):
            body.append(f"<h2>{html.escape(line[3:])}</h2>")
        elif line.startswith("# "):
            body.append(f"<h1>{html.escape(line[2:])}</h1>")
        elif line.startswith("> "):
            body.append(f"<p class=\"note\">{html.escape(line[2:])}</p>")
        elif line.startswith("- "):
            body.append(f"<p>{html.escape(line[2:])}</p>")
        elif line.strip():
            text = html.escape(line).replace("**", "")
            body.append(f"<p>{text}</p>")
    flush()
    style = ("body{font-family:system-ui,sans-serif;max-width:70rem;margin:2rem auto;padding:0 1rem;color:#1f1f1f}"
             "table{border-collapse:collapse;margin:1rem 0;font-size:.85rem}td,th{border:1px solid #bbb;"
             "padding:.25rem .5rem;text-align:right}th{background:#eee}.note{background:#fff6df;padding:.5rem}")
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\"><title>Route comfort</title>"
            f"<style>{style}</style></head><body>\n" + "\n".join(body) + "\n</body></html>\n")


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
    written["points.parquet"] = _io.write_parquet(out / "points.parquet", pts, meta)
    written["points.csv"] = _io.write_csv(out / "points.csv", pts)
    written["points.geojson"] = _io.write_json(out / "points.geojson", points_geojson(pts))
    written["summary.parquet"] = _io.write_parquet(out / "summary.parquet", result.summary, meta)
    written["summary.csv"] = _io.write_csv(out / "summary.csv", result.summary, index=False)
    written["comparison.csv"] = _io.write_csv(out / "comparison.csv", result.comparison, index=False)
    written["best_departures.csv"] = _io.write_csv(out / "best_departures.csv", result.best, index=False)
    written["cost_effectiveness.csv"] = _io.write_csv(out / "cost_effectiveness.csv", result.cost, index=False)
    written["along_route.csv"] = _io.write_csv(out / "along_route.csv", result.along, index=False)
    md = summary_markdown(result, timezone=timezone)
    written["summary.md"] = _io.atomic_write_text(out / "summary.md", md)
    written["summary.html"] = _io.atomic_write_text(out / "summary.html", summary_html(md))
    if plot_departure is None:
        plot_departure = _telling_departure(result)
    fig = plot_comfort_along_route(pts, departure=plot_departure, timezone=timezone)
    save_figure(fig, out / "comfort_along_route.png")
    written["comfort_along_route.png"] = out / "comfort_along_route.png"
    written["provenance.json"] = _io.write_json(out / "provenance.json", provenance)
    return written
