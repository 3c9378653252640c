"""What the placement advisor writes: a scheme, a ranked table, a curve and a map layer."""

from __future__ import annotations

import io
from pathlib import Path

import pandas as pd

from walkcomfort import _io
from walkcomfort.routes.placement import CAUTION
from walkcomfort.routes.placement.advisor import Advice
from walkcomfort.routes.placement.shadows import option_feature

FILES = ("scheme.geojson", "ranked_sites.csv", "runner_up_sites.csv", "excluded_sites.csv", "sites.geojson",
         "gain_vs_budget.png", "advice.md", "provenance.json")


def scheme_geojson(advice: Advice, scene, name: str) -> dict:
    """The chosen items as a scheme (docs/formats/scheme.md) that ``compare`` and ``map`` read."""
    from shapely.geometry import mapping

    feats = []
    for rank, o in enumerate(advice.selection.chosen, start=1):
        geom, props = option_feature(o, scene, f"{name}-{rank:03d}")
        geom = _to_lonlat(geom, scene)
        feats.append({"type": "Feature", "properties": {"edit": "add", **props, "rank": rank},
                      "geometry": mapping(geom)})
    kinds = sorted({o.intervention.name for o in advice.selection.chosen})
    goal = {"heat-dose": "heat dose", "hours-above": f"time above {advice.threshold_c:g} °C UTCI",
            "comfort": "comfortable minutes"}[advice.objective]
    label = f"Advised: {len(feats)} × {', '.join(kinds) or 'nothing'} for {goal}"
    return {"type": "FeatureCollection", "walkcomfort": {"scheme": name, "label": label}, "features": feats}


def _to_lonlat(geom, scene):
    import numpy as np
    import shapely

    return shapely.transform(geom, lambda xy: np.column_stack(scene.unproject(xy[:, 0], xy[:, 1])))


def sites_geojson(advice: Advice, runners_up: pd.DataFrame) -> dict:
    """Chosen sites numbered in order and the runner-up sites, for the map."""
    feats = []
    for r in advice.ranked().itertuples(index=False):
        feats.append(_point(r.lon, r.lat, {"status": "chosen", "rank": int(r.rank), "site_id": r.site_id,
                                           "intervention": r.intervention,
                                           "marginal_gain": round(float(r.marginal_gain), 3)}))
    for r in runners_up.itertuples(index=False):
        feats.append(_point(r.lon, r.lat, {"status": "runner-up", "site_id": r.site_id,
                                           "intervention": r.intervention,
                                           "marginal_gain": round(float(r.last_marginal_gain), 3)}))
    return {"type": "FeatureCollection", "walkcomfort": {"placement": advice.objective, "unit": advice.unit},
            "features": feats}


def _point(lon, lat, props):
    return {"type": "Feature", "properties": props,
            "geometry": {"type": "Point", "coordinates": [round(float(lon), 7), round(float(lat), 7)]}}


def gain_curve_png(advice: Advice) -> bytes:
    """Cumulative gain against cumulative cost along the greedy path (PNG bytes)."""
    import matplotlib

    matplotlib.use("Agg", force=False)
    from matplotlib.figure import Figure

    ranked = advice.ranked()
    fig = Figure(figsize=(6.4, 3.6), layout="constrained")
    ax = fig.add_subplot()
    x = [0.0, *ranked["cumulative_cost"].tolist()]
    y = [0.0, *ranked["cumulative_gain"].tolist()]
    ax.plot(x, y, marker="o", color="#2f5d8a", lw=1.8, ms=4)
    for r in ranked.itertuples(index=False):
        if r.rank <= 10:
            ax.annotate(str(r.rank), (r.cumulative_cost, r.cumulative_gain), textcoords="offset points",
                        xytext=(3, -10), fontsize=8, color="#333333")
    ax.set_xlabel("budget spent (catalogue cost units)")
    ax.set_ylabel(advice.unit)
    ax.set_title("Gain as the budget grows (each point: one more item, in the order chosen)", fontsize=9)
    ax.set_xlim(left=0)
    ax.set_ylim(bottom=0)
    ax.grid(alpha=0.3)
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=110, metadata={"Software": None})
    return buf.getvalue()


def advice_markdown(advice: Advice, verification: dict | None = None) -> str:
    """A short account for people: what was asked, what was chosen, how sure we are."""
    ranked = advice.ranked()
    budget = []
    if advice.max_count is not None:
        budget.append(f"{advice.max_count} item(s)")
    if advice.max_cost is not None:
        budget.append(f"cost {advice.max_cost:g}")
    lines = ["# Where the shade goes: placement advice", "", f"> {CAUTION}", "",
             f"- Objective: {advice.unit} (objective `{advice.objective}`), summed over routes "
             f"{', '.join(advice.routes)} and {len(advice.departures)} departure(s).",
             f"- Budget: {' and '.join(budget)}; chosen {len(ranked)} item(s), cost {advice.selection.cost:g}.",
             f"- Before any item: {advice.base_total:.1f} "
             f"({'heat dose' if advice.objective == 'heat-dose' else 'value'} of the walks as they are).",
             f"- Total gain: {advice.selection.total:.2f} {advice.unit}.",
             f"- Candidate sites: {len(advice.sites)} usable, {len(advice.excluded)} excluded "
             "(see excluded_sites.csv for each reason).", ""]
    if advice.optimum:
        o = advice.optimum
        lines.append(f"- Greedy vs the best set found by exhaustive search over the {o['candidates_searched']} most "
                     f"useful candidates with budget {o['budget']}: {o['greedy_gain']:.3f} vs {o['optimum_gain']:.3f} "
                     f"(ratio {o['ratio']:.3f}).")
    if verification:
        lines.append(f"- Check by the full comparison (`compare`, with sky view and the whole chain): "
                     f"{verification['text']}")
    for n in advice.notes:
        lines.append(f"- Note: {n}")
    lines += ["", "| rank | site | intervention | marginal gain | cumulative gain | cost |", "|---|---|---|---|---|---|"]
    for r in ranked.itertuples(index=False):
        lines.append(f"| {r.rank} | {r.site_id} | {r.intervention} | {r.marginal_gain:.3f} | "
                     f"{r.cumulative_gain:.3f} | {r.cost:g} |")
    return "\n".join(lines) + "\n"


def write_advice(advice: Advice, scene, out_dir, name: str, provenance: dict,
                 verification: dict | None = None, runners_up_n: int = 10) -> dict[str, Path]:
    """Write every file of :data:`FILES` into ``out_dir`` (atomically, one by one)."""
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    runners = advice.runners_up(runners_up_n)
    written = {
        "scheme.geojson": _io.write_json(out / "scheme.geojson", scheme_geojson(advice, scene, name)),
        "ranked_sites.csv": _io.write_csv(out / "ranked_sites.csv", advice.ranked(), index=False),
        "runner_up_sites.csv": _io.write_csv(out / "runner_up_sites.csv", runners, index=False),
        "excluded_sites.csv": _io.write_csv(out / "excluded_sites.csv", advice.excluded, index=False),
        "sites.geojson": _io.write_json(out / "sites.geojson", sites_geojson(advice, runners)),
        "gain_vs_budget.png": _io.atomic_write_bytes(out / "gain_vs_budget.png", gain_curve_png(advice)),
        "advice.md": _io.atomic_write_text(out / "advice.md", advice_markdown(advice, verification)),
        "provenance.json": _io.write_json(out / "provenance.json", {**provenance, "caution": CAUTION}),
    }
    return written
