"""How scheme differences move when uncertain scene parameters span their ranges.

A scheme comparison rests on parameters nobody measured at the site: how dense the
crowns are (their beam transmissivity, or leaf area) and what the ground is made of
(its albedo and heat storage). :func:`scheme_sensitivity` re-runs the same comparison
with each parameter set to the ends of its documented range and reports, per scheme
and departure, the spread of the differences and whether the ranking of the schemes
holds in every variant. A ranking that flips inside these ranges is not a basis for a
decision without site data.

Variants (each changes the base scene and the schemes alike):

* crowns denser / sparser: every tree's and canopy's ``transmissivity`` × 0.5 / × 2
  (capped at 0.6); summer street-tree crowns span roughly 0.05–0.3 (from memory), so
  halving and doubling a typical 0.15 covers that span;
* ground asphalt / concrete: the scene's default ground material at the dark and light
  ends of common paving (albedo 0.10 and 0.25, :data:`walkcomfort.environment.surfaces.MATERIALS`).
"""

from __future__ import annotations

import copy

import numpy as np
import pandas as pd

from walkcomfort.routes.compare import BASE

#: name -> what changes (documented in the module docstring)
VARIANTS = {
    "as given": {},
    "crowns denser (transmissivity x0.5)": {"tau": 0.5},
    "crowns sparser (transmissivity x2, at most 0.6)": {"tau": 2.0},
    "ground asphalt (albedo 0.10)": {"ground": "asphalt"},
    "ground concrete (albedo 0.25)": {"ground": "concrete"},
}
#: the differences reported, with the direction that is better
MEASURES = {"delta_heat_dose_cmin": -1.0, "delta_mean_utci_c": -1.0, "delta_exp_min_comfortable": 1.0}
TAU_CAP = 0.6


def _vary_props(props: dict, tau: float | None) -> dict:
    out = dict(props)
    if tau is not None and out.get("transmissivity") is not None and out.get("kind", "tree") in ("tree", "canopy"):
        out["transmissivity"] = float(min(TAU_CAP, max(0.0, float(out["transmissivity"]) * tau)))
        by_month = out.get("transmissivity_by_month")
        if isinstance(by_month, dict):
            out["transmissivity_by_month"] = {k: float(min(TAU_CAP, float(v) * tau)) for k, v in by_month.items()}
    return out


def vary(scene, schemes, variant: dict):
    """The scene and the schemes with one variant applied (copies; the inputs are not changed)."""
    from walkcomfort.environment.scene import Scene
    from walkcomfort.routes.schemes import Scheme

    tau = variant.get("tau")
    feats = []
    for f in scene.features:
        g = copy.deepcopy(f)
        g["properties"] = _vary_props(g["properties"], tau)
        feats.append(g)
    new_scene = Scene(feats, site=dict(scene.site), source=scene.source,
                      ground_material=variant.get("ground", scene.ground_material))
    new_schemes = []
    for s in schemes:
        edits = []
        for e in s.edits:
            g = copy.deepcopy(e)
            if g["properties"].get("edit") in ("add", "modify"):
                g["properties"] = _vary_props(g["properties"], tau)
            edits.append(g)
        new_schemes.append(Scheme(s.name, s.label, tuple(edits), s.source))
    return new_scene, new_schemes


def scheme_sensitivity(route, schemes, departures, weather, scene, predictor=None, **compare_kw) -> pd.DataFrame:
    """The comparison's differences under every variant, and their spread.

    Returns
    -------
    DataFrame
        One row per scheme × departure: for each measure in :data:`MEASURES` its value as
        given, its lowest and highest over the variants (``<measure>_min``,
        ``<measure>_max``), the variant that gives each end, and ``ranking_holds``: the
        scheme's rank among the schemes at that departure (by heat dose avoided, and by
        expected comfortable minutes with a model) is the same in every variant.
    """
    from walkcomfort.routes.compare import compare_schemes

    frames = []
    for name, variant in VARIANTS.items():
        sc, sch = vary(scene, schemes, variant)
        cmp_ = compare_schemes(route, sch, departures, weather, scene=sc, predictor=predictor, explain=False,
                               **compare_kw).comparison
        cols = ["route_id", "scheme", "departure", *[m for m in MEASURES if m in cmp_.columns]]
        part = cmp_[cols].copy()
        part["variant"] = name
        frames.append(part)
    allv = pd.concat(frames, ignore_index=True)
    allv = allv[allv["scheme"] != BASE]
    key = ["route_id", "scheme", "departure"]
    rank_by = "delta_exp_min_comfortable" if predictor is not None and getattr(predictor, "is_model", False) \
        else "delta_heat_dose_cmin"
    allv["rank"] = allv.groupby(["route_id", "departure", "variant"])[rank_by].rank(
        ascending=MEASURES[rank_by] < 0, method="min")
    rows = []
    for k, g in allv.groupby(key, sort=True):
        given = g[g["variant"] == "as given"].iloc[0]
        row = dict(zip(key, k, strict=True))
        for m in MEASURES:
            if m not in g.columns:
                continue
            vals = g[m].to_numpy(float)
            row[m] = float(given[m])
            row[f"{m}_min"], row[f"{m}_max"] = float(np.nanmin(vals)), float(np.nanmax(vals))
            row[f"{m}_min_variant"] = g["variant"].iloc[int(np.nanargmin(vals))]
            row[f"{m}_max_variant"] = g["variant"].iloc[int(np.nanargmax(vals))]
        row["ranking_holds"] = bool(g["rank"].nunique() == 1)
        rows.append(row)
    return pd.DataFrame(rows)


def sensitivity_line(table: pd.DataFrame) -> str:
    """One sentence for people: does the ranking hold, and how far does the heat-dose gain move."""
    if table.empty:
        return "sensitivity: no scheme to compare"
    holds = bool(table["ranking_holds"].all())
    lo, hi = table["delta_heat_dose_cmin_min"].min(), table["delta_heat_dose_cmin_max"].max()
    verdict = ("the schemes keep their ranking in every variant" if holds else
               "the ranking of the schemes changes within these ranges at "
               f"{int((~table['ranking_holds']).sum())} of {len(table)} scheme × departure rows: do not decide on "
               "it without site data")
    return (f"sensitivity (crown density ×0.5…×2, ground asphalt…concrete): {verdict}; the change in heat dose "
            f"spans {lo:+.1f} … {hi:+.1f} °C·min across variants")
