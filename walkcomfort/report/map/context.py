"""The title block: what a reader needs to know before reading a colour.

Site, date, weather source, design-day rule, walker profile, model (bundle name,
training date, short digest) and the caveat — gathered from what the routes stage stored
with its table (``attrs`` and ``provenance`` of ``points.parquet``) and from the model
bundle's manifest.
"""

from __future__ import annotations

import json
from pathlib import Path

import pandas as pd
import pyarrow.parquet as pq

from walkcomfort.report.map.inputs import as_text

CONTEXT_FIELDS = ("site", "date", "weather", "design_day", "walker", "model", "caveat")
WALKER_WORDS = {"age_band": "age {}", "clo": "clothing {} clo", "acclimatised": "{}", "activity": "{}"}


def walker_text(walker: dict | None) -> str | None:
    """A walker profile in words: ``age 25-34, clothing 0.5 clo, acclimatised``."""
    if not walker:
        return None
    parts = []
    for key, word in WALKER_WORDS.items():
        v = walker.get(key)
        if v is None or (isinstance(v, float) and pd.isna(v)):
            continue
        if key == "acclimatised":
            v = "acclimatised to heat" if bool(v) else "not acclimatised to heat"
        parts.append(word.format(v))
    return ", ".join(parts) or None


def model_text(bundle: str | Path | None, predictor: str | None) -> str | None:
    """Model name: bundle folder, training date (when the manifest records one), short digest."""
    if predictor and "physics" in predictor:
        return "no model: the UTCI-band rule (physics only)"
    digest = (predictor or "").rsplit(":", 1)[-1][:8] or None
    if bundle is None:
        return f"comfort model {digest}" if digest else None
    bundle = Path(bundle)
    name = bundle.name
    trained, votes = None, None
    try:
        manifest = json.loads((bundle / "manifest.json").read_text(encoding="utf-8"))
    except (OSError, ValueError):
        manifest = {}
    for key in ("trained_at", "trained", "created", "fitted_at"):
        if manifest.get(key):
            trained = str(manifest[key])[:10]
            break
    trained = trained or _training_dates(bundle)
    digest = digest or str(manifest.get("model_digest", "")).rsplit(":", 1)[-1][:8] or None
    if manifest.get("n_train_rows"):
        votes = f"{manifest['n_train_rows']} votes from {manifest.get('n_train_groups', '?')} walkers"
    bits = [f"trained on walks of {trained}" if trained else "training date not recorded", votes,
            digest and f"digest {digest}"]
    return f"{name} ({', '.join(b for b in bits if b)})"


def _training_dates(bundle: Path) -> str | None:
    """The days of the walks a bundle was fitted on, from its out-of-fold predictions (one row per vote)."""
    path = bundle / "oof_predictions.parquet"
    try:
        times = pd.DatetimeIndex(pq.read_table(path, columns=["time"]).column("time").to_pandas())
    except (OSError, ValueError, KeyError):
        return None
    if not len(times):
        return None
    first, last = times.min(), times.max()
    if first.date() == last.date():
        return first.strftime("%d %b %Y")
    return f"{first.strftime('%d %b')}–{last.strftime('%d %b %Y')}"


def _site_text(site: str | None, route: str | None) -> str | None:
    # a simulated walk names its site after the route when no site was stated
    if site and site != route:
        return site
    return f"route {route} (no site name given; walkcomfort map --site names it)" if route else None


def _weather_text(params: dict, attrs: dict) -> str | None:
    w = params.get("weather")
    label = w.get("label") if isinstance(w, dict) else as_text(w)
    label = label or as_text(attrs.get("weather"))
    if params.get("conditions"):
        return f"stated conditions: {params['conditions']}"
    if label and label.startswith(("logger ", "epw ", "EPW ")):
        kind, _, path = label.partition(" ")
        return f"{kind} file {Path(path).name}"
    return label


def context_from_table(attrs: dict, provenance: dict | None = None, bundle: str | Path | None = None,
                       dates: list[str] | None = None) -> dict:
    """Title-block fields from a prediction table's stored attrs/provenance and the model bundle."""
    params = (provenance or {}).get("parameters") or {}
    session = attrs.get("session") if isinstance(attrs.get("session"), dict) else {}
    if bundle is None:
        bundle = next((Path(p).parent for p in ((provenance or {}).get("inputs") or {})
                       if Path(p).name == "manifest.json"), None)
    design = params.get("design_day")
    walker = params.get("walker") or {k: session.get(k) for k in WALKER_WORDS if k in session}
    return {
        "site": _site_text(as_text(session.get("site")), as_text(attrs.get("route_id"))),
        "date": ", ".join(dates) if dates else None,
        "weather": _weather_text(params, attrs),
        "design_day": (f"design day: {design}" if design else
                       "the weather series as given (no design-day rule applied)"),
        "walker": walker_text(walker),
        "model": model_text(bundle, as_text(attrs.get("predictor")) or as_text(params.get("predictor"))),
    }
