"""A one-page brief per route comparison: what each shade scheme changes, for a decision-maker.

One printable page (HTML, and PDF through headless Chromium's print): a map snapshot in
the difference view, the headline table (scheme, its best departure, the change in
expected comfortable minutes with its interval, in heat dose and in peak UTCI — the very
numbers of ``comparison.csv`` at that departure), the date, weather, walker, the model
and how well it did on walkers it never saw, and the caveats. Design decisions defer to
local codes and licensed practice; the brief says so.
"""

from __future__ import annotations

import base64
import json
import math
import os
import shutil
import subprocess
import tempfile
from pathlib import Path

import pandas as pd

from walkcomfort import _io
from walkcomfort._html import esc, page
from walkcomfort.errors import InputError, WalkcomfortError
from walkcomfort.report.map import context_from_table, route_map, write_map
from walkcomfort.report.map.routelayer import BASE
from walkcomfort.report.tables import read_route_tables

CHROMIUM_FLAGS = ("--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
                  "--disable-component-update", "--disable-sync", "--no-first-run", "--disable-extensions",
                  "--disable-default-apps", "--hide-scrollbars", "--mute-audio")
SNAPSHOT_SIZE = (1100, 460)
CAVEATS = (
    "Planning estimates from a comfort model and simulated walks under one weather series; they compare "
    "design options and are not a heat-safety assessment.",
    "A difference whose interval includes zero is within model error: the schemes cannot be told apart there.",
    "Design decisions rest with local codes, heat-health guidance and licensed professional practice.",
)
HEADLINE = (("scheme", "Scheme"), ("departure", "Departure (local)"),
            ("d_comf", "Δ expected comfortable minutes [min] (interval)"),
            ("d_dose", "Δ heat dose [°C·min]"), ("d_peak", "Δ peak UTCI [°C]"))


def chromium_path() -> str:
    """Headless Chromium: ``$WALKCOMFORT_CHROMIUM``, else ``chromium`` on the PATH."""
    path = os.environ.get("WALKCOMFORT_CHROMIUM") or shutil.which("chromium") or shutil.which("chromium-browser")
    if not path or not Path(path).exists():
        raise WalkcomfortError("Chromium is needed to print the brief and was not found",
                               fix="install it (Debian: apt-get install chromium) or set WALKCOMFORT_CHROMIUM; "
                                   "--no-pdf writes the HTML only")
    return path


def _chromium(args: list[str], what: str) -> None:
    with tempfile.TemporaryDirectory(prefix="walkcomfort-chromium-") as profile:
        cmd = [chromium_path(), *CHROMIUM_FLAGS, f"--user-data-dir={profile}", *args]
        try:
            done = subprocess.run(cmd, capture_output=True, timeout=180, check=False)
        except subprocess.TimeoutExpired:
            raise WalkcomfortError(f"Chromium took longer than 3 minutes to {what}", fix="retry, or use --no-pdf") from None
    if done.returncode != 0:
        tail = done.stderr.decode("utf-8", "replace").strip().splitlines()[-1:] or [""]
        raise WalkcomfortError(f"Chromium could not {what} (exit {done.returncode}: {tail[0][:200]})",
                               fix="check the Chromium installation, or use --no-pdf")


def snapshot_png(map_html: Path, fragment: str = "panels=legend") -> bytes:
    """A PNG of a written map page as Chromium draws it (scripts run, no network)."""
    with tempfile.TemporaryDirectory(prefix="walkcomfort-snapshot-") as tmp:
        png = Path(tmp) / "map.png"
        w, h = SNAPSHOT_SIZE
        _chromium([f"--window-size={w},{h}", "--virtual-time-budget=15000", f"--screenshot={png}",
                   map_html.resolve().as_uri() + "#" + fragment], "take the map snapshot")
        if not png.is_file():
            raise WalkcomfortError("Chromium wrote no map snapshot", fix="check the Chromium installation, or use --no-pdf")
        return png.read_bytes()


def print_pdf(html_path: Path, pdf_path: Path) -> Path:
    """Print an HTML file to PDF with headless Chromium (no header or footer), written atomically."""
    with tempfile.TemporaryDirectory(prefix="walkcomfort-print-") as tmp:
        out = Path(tmp) / "brief.pdf"
        _chromium(["--no-pdf-header-footer", "--virtual-time-budget=5000", f"--print-to-pdf={out}",
                   html_path.resolve().as_uri()], "print the brief")
        if not out.is_file():
            raise WalkcomfortError("Chromium wrote no PDF", fix="check the Chromium installation, or use --no-pdf")
        return _io.atomic_write_bytes(pdf_path, out.read_bytes())


def signed(v: float, digits: int) -> str:
    """A change with its sign (− for negative, + for positive), ``–`` when unknown."""
    if v is None or not math.isfinite(v):
        return "–"
    text = f"{abs(v):.{digits}f}"
    if float(text) == 0:
        return f"{0:.{digits}f}"
    return ("+" if v > 0 else "−") + text


def headline_rows(comparison: pd.DataFrame, best: pd.DataFrame, timezone: str, labels: dict) -> list[dict]:
    """One row per scheme: its best departure (``best``: scheme, departure) and the comparison's changes there."""
    rows = []
    comp = comparison.assign(_dep=pd.to_datetime(comparison["departure"], utc=True))
    for _, b in best[best["scheme"] != BASE].iterrows():
        dep = pd.Timestamp(b["departure"])
        dep = dep.tz_convert("UTC") if dep.tzinfo else dep.tz_localize("UTC")
        hit = comp[(comp["scheme"] == b["scheme"]) & (comp["_dep"] == dep)]
        if hit.empty:
            continue
        c = hit.iloc[0]
        lo, hi = c.get("delta_exp_min_comfortable_lo"), c.get("delta_exp_min_comfortable_hi")
        interval = (f" ({signed(lo, 1)} to {signed(hi, 1)})" if lo is not None and pd.notna(lo) else " (no interval)")
        within = bool(c["within_model_error"]) if "within_model_error" in c and pd.notna(c["within_model_error"]) else None
        rows.append({"scheme": labels.get(b["scheme"], b["scheme"]), "name": str(b["scheme"]),
                     "departure": dep.tz_convert(timezone).strftime("%H:%M"),
                     "d_comf": signed(c["delta_exp_min_comfortable"], 1) + interval
                     + (" — within model error" if within else ""),
                     "d_dose": signed(c["delta_heat_dose_cmin"], 0), "d_peak": signed(c["delta_peak_utci_c"], 1)})
    return rows


def model_validity(bundle: Path | None, peak_utci: float | None) -> str:
    """How the model did on walkers it never saw, and whether the route stays in its training range."""
    if bundle is None:
        return "No model bundle recorded: classes come from the UTCI-band rule (physics only)."
    try:
        metrics = json.loads((bundle / "metrics.json").read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return f"Model {bundle.name}: its validation metrics were not found beside it."
    cv = metrics.get("cv") or {}
    m = ((cv.get("metrics") or {}).get("history") or {})
    walkers = len(cv.get("folds") or [])
    text = (f"On {walkers} walkers it never saw (walker-grouped cross-validation), the model's balanced accuracy "
            f"was {m['balanced_accuracy']:.2f} (chance: 0.33)." if "balanced_accuracy" in m
            else "Walker-grouped validation metrics were not found.")
    bins = (metrics.get("calibration") or {}).get("bins") or []
    if bins and peak_utci is not None:
        lo, hi = min(b["utci_lo"] for b in bins), max(b["utci_hi"] for b in bins)
        text += f" Its votes span UTCI {lo:g}–{hi:g} °C"
        text += (f"; this route peaks at {peak_utci:.1f} °C, outside that range: read its numbers with care."
                 if peak_utci > hi else ".")
    return text


STYLE = """
@page { size: A4 portrait; margin: 10mm; }
body { font: 9.5pt/1.3 system-ui, -apple-system, "Segoe UI", Roboto, "DejaVu Sans", sans-serif; color: #1b1b1b;
  max-width: 190mm; margin: 0 auto; }
h1 { font-size: 14pt; margin: 0 0 2mm; } h2 { font-size: 10.5pt; margin: 2mm 0 1mm; }
.ctx { display: grid; grid-template-columns: auto 1fr; gap: 0.3mm 4mm; margin: 0 0 2mm; }
.ctx dt { color: #444; } .ctx dd { margin: 0; }
figure { margin: 0 0 2mm; } figure img { width: 100%; max-height: 66mm; object-fit: contain; border: 1px solid #999; }
figcaption { font-size: 8pt; color: #444; }
table { border-collapse: collapse; width: 100%; margin: 0 0 1.5mm; font-size: 8.5pt; }
th, td { border: 1px solid #bbb; padding: 0.4mm 1.5mm; text-align: right; vertical-align: top; }
th:first-child, td:first-child { text-align: left; } th { background: #eee; }
.note { font-size: 8pt; color: #333; margin: 1mm 0; }
ul.caveats { font-size: 8pt; margin: 1mm 0 0 5mm; padding: 0; }
"""


def _headline_table(rows: list[dict]) -> str:
    head = "".join(f"<th>{esc(label)}</th>" for _, label in HEADLINE)
    body = "".join("<tr>" + "".join(f"<td>{esc(r[k])}</td>" for k, _ in HEADLINE) + "</tr>" for r in rows)
    return f"<table><tr>{head}</tr>{body or '<tr><td colspan=5>no scheme to compare</td></tr>'}</table>"


def brief_html(title: str, context: dict, rows: list[dict], snapshot: bytes | None, caption: str,
               validity: str, notes: list[str], hottest: tuple[str, list[dict]] | None = None) -> str:
    """The brief page (all text escaped; the snapshot as a data URI)."""
    ctx = "".join(f"<dt>{esc(k)}</dt><dd>{esc(v)}</dd>" for k, v in (
        ("Site", context.get("site")), ("Date", context.get("date")), ("Weather", context.get("weather")),
        ("Design day", context.get("design_day")), ("Walker", context.get("walker")),
        ("Model", context.get("model"))) if v)
    img = (f'<figure><img alt="Map: each scheme minus the base along the route" '
           f'src="data:image/png;base64,{base64.b64encode(snapshot).decode()}">'
           f"<figcaption>{esc(caption)}</figcaption></figure>") if snapshot else ""
    parts = [f"<h1>{esc(title)}</h1>", f'<dl class="ctx">{ctx}</dl>', img,
             "<h2>At each scheme's best departure</h2>", _headline_table(rows),
             *([f"<h2>At the hottest departure ({esc(hottest[0])})</h2>", _headline_table(hottest[1])]
               if hottest and hottest[1] else []),
             '<p class="note">Δ = scheme − base on the same simulated walk. Expected comfortable minutes add up the '
             "model's chance of feeling comfortable over the walk; heat dose adds up UTCI above 26 °C over time. "
             "Negative heat dose and peak UTCI are improvements.</p>",
             f'<p class="note"><b>Model validity.</b> {esc(validity)}</p>',
             *(f'<p class="note">Note: {esc(n)}</p>' for n in notes),
             '<ul class="caveats">' + "".join(f"<li>{esc(c)}</li>" for c in CAVEATS) + "</ul>"]
    return page(title, "\n".join(parts), style=STYLE)


def _bundle_of(provenance: dict) -> Path | None:
    for p in (provenance.get("inputs") or {}):
        if Path(p).name == "manifest.json" and Path(p).parent.is_dir():
            return Path(p).parent
    return None


def write_brief(folder: Path, out_dir: Path, *, scene=None, schemes=(), pdf: bool = True,
                title: str | None = None) -> list[Path]:
    """Write ``brief_<route>.html`` (and ``.pdf``) for the comparison in ``folder``.

    ``folder`` is an output folder of ``walkcomfort compare`` (points.parquet, summary.parquet,
    comparison.csv, best_departures.csv).
    """

    need = [folder / n for n in ("points.parquet", "comparison.csv", "best_departures.csv")]
    missing = [p.name for p in need if not p.is_file()]
    if missing:
        raise InputError(f"no {', '.join(missing)} here", where=folder,
                         fix="pass an output folder of 'walkcomfort compare' (a comparison with the base)")
    t = read_route_tables([folder])
    session = t["attrs"].get("session") if isinstance(t["attrs"].get("session"), dict) else {}
    zone = session.get("timezone") or "UTC"
    comparison = t["comparison"]
    best = pd.read_csv(folder / "best_departures.csv")
    route = str(t["predictions"]["route_id"].iloc[0]) if "route_id" in t["predictions"] else folder.name
    context = context_from_table(t["attrs"], t["provenance"])
    fmap = route_map(t["predictions"], scene=scene, schemes=list(schemes), summaries=t["summaries"],
                     comparison=comparison, context=context, timezone=zone)
    labels = {s["name"]: s["label"] for s in fmap.data["schemes"]}
    out_dir.mkdir(parents=True, exist_ok=True)
    snapshot = None
    if pdf:
        with tempfile.TemporaryDirectory(prefix="walkcomfort-brief-") as tmp:
            snapshot = snapshot_png(write_map(fmap, Path(tmp) / "map.html", size_budget_bytes=None))
    peak = float(t["predictions"]["utci_c"].max()) if "utci_c" in t["predictions"] else None
    routes = fmap.data["routes"]
    hot_iso = routes["deps"][routes["open"]["dep"]]["iso"] if routes and routes["deps"] else None
    hottest = None
    if hot_iso is not None:
        at_hot = pd.DataFrame({"scheme": sorted(set(comparison["scheme"])), "departure": pd.Timestamp(hot_iso)})
        hottest = (routes["deps"][routes["open"]["dep"]]["label"], headline_rows(comparison, at_hot, zone, labels))
    html_text = brief_html(title or f"Shade schemes on route {route}: one-page brief", fmap.data["context"],
                           headline_rows(comparison, best, zone, labels), snapshot,
                           "Map: " + (fmap.data["context"].get("opened") or ""),
                           model_validity(_bundle_of(t["provenance"]), peak), list(t["attrs"].get("notices") or []),
                           hottest=hottest)
    html_path = _io.atomic_write_text(out_dir / f"brief_{route}.html", html_text)
    written = [html_path]
    if pdf:
        written.append(print_pdf(html_path, out_dir / f"brief_{route}.pdf"))
    return written
