"""Assemble the route map's data: routes per scheme × departure, scene, streets, recorded walks."""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass

import numpy as np
import pandas as pd

from walkcomfort.errors import InputError
from walkcomfort.report import palette as P
from walkcomfort.report.map import routelayer as RL
from walkcomfort.report.map import streets as ST
from walkcomfort.report.map.context import CONTEXT_FIELDS
from walkcomfort.report.map.inputs import (
    DEPARTURE,
    SCHEME,
    as_text,
    check_predictions,
    load_geojson,
    walk_frames,
    zone_of,
)
from walkcomfort.report.map.legend import CAUTION, index_config, legend_config
from walkcomfort.report.map.scene import scene_features
from walkcomfort.report.map.sites import sites_payload
from walkcomfort.report.map.tiles import TileSource, tile_source
from walkcomfort.report.map.walks import errors_payload, walk_payload
from walkcomfort.routes.schemes import BASE, Scheme

LAYER_KINDS = ("routes", "scene", "votes", "errors", "network")
DEFAULT_LAYERS = LAYER_KINDS
ERROR_SOURCES = ("in-sample", "held-out")
COLOURINGS = ("comfort", "utci", "shade", "difference")


@dataclass
class RouteMap:
    """The map's data, ready for :func:`walkcomfort.report.map.page.write_map`."""

    title: str
    data: dict
    tiles: TileSource | None


def _check_options(layers, decimals, simplify_m, error_source) -> tuple:
    layers = tuple(layers)
    unknown = [k for k in layers if k not in LAYER_KINDS]
    if unknown:
        raise InputError(f"unknown layer kind(s) {', '.join(map(repr, unknown))}; allowed "
                         f"{', '.join(LAYER_KINDS)}", where="--layers", fix="pick from the allowed kinds")
    if not 0 <= int(decimals) <= 8:
        raise InputError(f"decimals={decimals} out of range 0…8", where="--decimals", fix="use 5 (about 1 m)")
    if simplify_m < 0:
        raise InputError(f"simplify_m={simplify_m} is negative", where="--simplify-m", fix="use 0 or more")
    if error_source not in ERROR_SOURCES:
        raise InputError(f"error_source={error_source!r} is not one of {', '.join(ERROR_SOURCES)}",
                         where="route_map", fix="use 'in-sample' or 'held-out'")
    return layers


def _scheme_docs(schemes) -> dict[str, tuple[dict, str]]:
    out = {}
    for s in schemes or ():
        doc, where = load_geojson(s, "scheme")
        name = as_text((doc.get("walkcomfort") or {}).get("scheme"))
        if not name:
            raise InputError("scheme file has no walkcomfort.scheme name", where=where,
                             fix='add "walkcomfort": {"scheme": "<name>", "label": "..."} at the top level')
        out[name] = (doc, where)
    return out


def _labeller(scheme_docs: dict):
    def label_of(name: str) -> str:
        doc = scheme_docs.get(name)
        if doc is not None:
            return as_text((doc[0].get("walkcomfort") or {}).get("label")) or name
        return Scheme.base().label if name == BASE else name
    return label_of


def _walks(df: pd.DataFrame) -> tuple[list[RL.Walk], list[int]]:
    deps = pd.to_datetime(df[DEPARTURE], utc=True).dt.tz_convert(None).to_numpy("datetime64[ns]").astype("int64")
    names = [str(v) for v in pd.unique(df[SCHEME].astype(object))]
    names.sort(key=lambda s: s != BASE)  # the base first
    out = []
    for name in names:
        in_scheme = (df[SCHEME].astype(str) == name).to_numpy()
        for dep in np.unique(deps[in_scheme]):
            out.append(RL.Walk(name, int(dep), RL.sort_walk(df[in_scheme & (deps == dep)])))
    return out, sorted({int(d) for d in deps})


def _route_data(predictions, summaries, comparison, zone, decimals, simplify_m, label_of, index="utci") -> dict:
    df = check_predictions(predictions)
    walks, dep_list = _walks(df)
    base = {w.dep_ns: w for w in walks if w.scheme == BASE}
    for w in walks:
        if w.scheme != BASE and w.dep_ns in base:
            w.diff = RL.point_changes(w.frame, base[w.dep_ns].frame)
    comfort_thr, from_model = RL.comfort_threshold(comparison, summaries)
    scales = RL.classify_changes([w for w in walks if w.diff], comfort_thr) if any(w.diff for w in walks) else {}
    summary_of = RL.summary_lookup(summaries, comparison)
    schemes = list(dict.fromkeys(w.scheme for w in walks))
    combos: dict[str, list] = {s: [None] * len(dep_list) for s in schemes}
    predictors: set = set()
    for w in walks:
        data = RL.route_payload(w, zone, int(decimals), float(simplify_m), index)
        data["summ"] = [summary_of(r, w.scheme, w.dep_ns) for r in data["routes"]]
        predictors.update(data["predictors"])
        combos[w.scheme][dep_list.index(w.dep_ns)] = data
    stamps = [pd.Timestamp(d, tz="UTC").tz_convert(zone) for d in dep_list]
    many_days = len({s.date() for s in stamps}) > 1
    opening = RL.opening_view(walks)
    return {
        "schemes": [{"name": s, "label": label_of(s)} for s in schemes],
        "deps": [{"label": s.strftime("%d %b %H:%M" if many_days else "%H:%M"), "date": s.strftime("%a %d %b %Y"),
                  "iso": s.isoformat()} for s in stamps],
        "combos": combos, "scales": scales, "comfort_from_model": from_model,
        "open": {**opening, "dep": dep_list.index(opening["dep"]) if opening["dep"] in dep_list else 0},
        "predictors": sorted(predictors),
        "dates": sorted({s.strftime("%a %d %b %Y") for s in stamps}),
    }


def _opening_text(routes: dict, label_of) -> str:
    o = routes["open"]
    dep = routes["deps"][o["dep"]]["label"] if routes["deps"] else ""
    if o["colouring"] == "difference":
        gain = o.get("gain_min")
        sign = "+" if gain is not None and gain >= 0 else ""
        return (f"Opened on the hottest departure ({dep}), the scheme that adds most expected comfortable "
                f"time there ({label_of(o['scheme'])}, {sign}{gain:.1f} min per walk), coloured by the "
                "difference from the base.")
    return f"Opened on the hottest departure ({dep}), coloured by predicted comfort."


def _scene_data(scene, scheme_docs, shown, decimals, simplify_m) -> dict:
    scene_doc = load_geojson(scene, "scene")[0]
    out = {}
    for name in shown or [""]:
        doc, where = scheme_docs.get(name, (None, ""))
        out[name] = scene_features(scene_doc, doc, where, int(decimals), float(simplify_m))
    return out


def _points_of(data: dict) -> tuple[list, list]:
    """Every drawn coordinate (for the opening bounds)."""
    pts: list = []
    for combos in (data.get("routes") or {}).get("combos", {}).values():
        for d in combos:
            if d:
                pts += [(a, b) for a, b in zip(d["lat"], d["lon"], strict=True) if a is not None and b is not None]
    for feats in (data.get("scenes") or {}).values():
        for f in feats:
            pts += [tuple(f["c"])] if f["g"] == "c" else [tuple(p) for poly in f["c"] for p in poly[0]]
    for s in (data.get("streets") or {}).values():
        pts += [tuple(p) for line in s["c"] for p in line]
    for w in data.get("walks") or []:
        pts += [tuple(p) for p in w["track"]]
    pts += [tuple(site["c"]) for site in data.get("sites") or []]
    return [p[0] for p in pts], [p[1] for p in pts]


def route_map(predictions: pd.DataFrame | None = None, *, scene=None, schemes: Iterable = (),
              walks: Iterable = (), summaries: pd.DataFrame | None = None, comparison: pd.DataFrame | None = None,
              context: dict | None = None, timezone: str = "UTC", tiles=None, attribution: str | None = None,
              max_zoom: int | None = None, layers: Iterable[str] = DEFAULT_LAYERS, decimals: int = 5,
              simplify_m: float = 1.0, error_cell_m: float = 50.0, title: str | None = None,
              error_source: str = "in-sample", network: Iterable = (), network_times: str | None = None,
              sites=None, index: str = "utci") -> RouteMap:
    """Build the interactive route map.

    Parameters
    ----------
    predictions : DataFrame, optional
        Per-point prediction table (index ``time`` UTC; ``route_id, scheme, departure,
        lat, lon``, ``comfort_class`` and/or ``p_*``; optionally ``x_m, y_m, dist_m, step_s,
        utci_c, utci_band, tmrt_c, t_air_c, shade_frac, predictor, reasons``).
    scene : path, dict or Scene, optional
        The scene GeoJSON (buildings, trees, canopies), drawn as the picked scheme edits it.
    schemes : iterable of path or dict
        Scheme GeoJSONs; matched to the table's ``scheme`` by ``walkcomfort.scheme``; their
        ``label`` names them in the scheme picker.
    walks : iterable of DataFrame or path
        Recorded timelines (votes and, for the error layer, predictions).
    summaries, comparison : DataFrame, optional
        Route summaries and the comparison with the base (``summary.parquet``,
        ``comparison.csv``): whole-walk figures in popups and the legend; the comparison's
        ``delta_<col>_lo/_hi`` and ``within_model_error`` set the "within model error" class.
    context : dict, optional
        Title-block fields (:data:`~walkcomfort.report.map.context.CONTEXT_FIELDS`), e.g. from
        :func:`~walkcomfort.report.map.context.context_from_table`.
    timezone : str
        IANA zone for the times shown.
    tiles, attribution, max_zoom
        Base map, see :func:`~walkcomfort.report.map.tiles.tile_source`. Default: none.
    layers : iterable of str
        Kinds drawn, among :data:`LAYER_KINDS`.
    decimals, simplify_m
        Coordinate decimals (5 ≈ 1 m) and line simplification tolerance [m].
    error_cell_m : float
        Grid size of the model-error layer [m].
    title : str, optional
        Title on the page.
    error_source : {"in-sample", "held-out"}
        Where the walks' predictions come from (names the error layer).
    network : iterable of path or dict
        Street layers (``network_layer_<scheme>.geojson`` of ``walkcomfort network``).
    network_times : str, optional
        The hours and days the street layers cover, in words (legend and popups).
    sites : path or dict, optional
        ``sites.geojson`` of ``walkcomfort advise``: chosen sites numbered, runner-ups faded.
    index : {"utci", "pet"}
        The thermal index of the band colouring and the popups' index value; ``"pet"``
        needs ``pet_c`` in the table (``compare --index pet``). Streets stay on UTCI.

    Returns
    -------
    RouteMap
    """
    layers = _check_options(layers, decimals, simplify_m, error_source)
    zone = zone_of(timezone)
    frames = walk_frames(walks)
    net_docs = ST.network_docs(network) if "network" in layers else []
    if predictions is None and not frames and scene is None and not net_docs and sites is None:
        raise InputError("nothing to map: no predictions, walks or scene given", where="route_map",
                         fix="pass a prediction table, recorded walks or a scene")
    scheme_docs = _scheme_docs(schemes)
    label_of = _labeller(scheme_docs)
    data: dict = {"tz": str(timezone), "routes": None, "scenes": None, "streets": None, "walks": [], "errors": None,
                  "sites": sites_payload(sites, int(decimals)) if sites is not None else None}
    if predictions is not None:
        _check_index(index, predictions)
        data["routes"] = _route_data(predictions, summaries, comparison, zone, decimals, simplify_m, label_of, index)
    shown = [s["name"] for s in data["routes"]["schemes"]] if data["routes"] else []
    if scene is not None and "scene" in layers:
        data["scenes"] = _scene_data(scene, scheme_docs, shown, decimals, simplify_m)
    street_scale = _add_streets(data, net_docs, network_times, shown, decimals)
    if frames and ("votes" in layers or "errors" in layers):
        data["walks"] = ([walk_payload(w, i, str(timezone), int(decimals), float(simplify_m))
                          for i, w in enumerate(frames)] if "votes" in layers else [])
        data["errors"] = errors_payload(frames, error_cell_m, int(decimals)) if "errors" in layers else None
    routes = data["routes"]
    data["schemes"] = routes["schemes"] if routes else [{"name": s, "label": label_of(s)} for s in shown]
    data["cfg"] = legend_config(routes["scales"] if routes else None, bool(routes and routes["comfort_from_model"]),
                                street_scale, ST.hours_keys(street_scale) if street_scale else None, error_source)
    data["cfg"]["sites"] = dict(P.SITE_COLOURS)
    if index == "pet":
        data["cfg"].update(index_config("pet"))
    data["context"] = _context(context, routes, label_of)
    data["title"] = title or ("Predicted walking comfort" if predictions is not None else
                              "Predicted comfort on the street network" if net_docs else "Recorded walks")
    lat, lon = _points_of(data)
    data["bounds"] = [[min(lat), min(lon)], [max(lat), max(lon)]] if lat else None
    data["overlays"] = _overlays(data, alone=predictions is None, streets=bool(net_docs))
    return RouteMap(data["title"], data, tile_source(tiles, attribution, max_zoom))


def _check_index(index: str, predictions: pd.DataFrame) -> None:
    if index not in ("utci", "pet"):
        raise InputError(f"index {index!r} is not known; allowed: utci, pet", where="--index",
                         fix="choose utci or pet")
    if index == "pet" and "pet_c" not in predictions.columns:
        raise InputError("the prediction table has no pet_c column to colour by PET", where="--index pet",
                         fix="run 'walkcomfort compare' (or 'route') with --index pet first")


def _overlays(data: dict, alone: bool, streets: bool) -> dict:
    """Which extra layers start switched on: over predicted routes only the scene and the sites."""
    return {"scene": data["scenes"] is not None, "streets": streets and alone, "votes": bool(data["walks"]) and alone,
            "errors": data["errors"] is not None and alone, "sites": bool(data["sites"])}


def _add_streets(data: dict, net_docs: list, times: str | None, shown: list, decimals: int) -> dict | None:
    if not net_docs:
        return None
    scale = ST.network_scale(net_docs)
    data["streets"] = {str(d["walkcomfort"]["scheme"]): ST.network_payload(d, scale, int(decimals)) for d in net_docs}
    data["street_times"] = times or "the network batch's hours"
    shown.extend(s for s in data["streets"] if s not in shown)
    if data["routes"] is None:
        data["open"] = _street_opening(data["streets"])
    return scale


def _street_opening(streets: dict) -> dict:
    """Without routes: the scheme whose streets gain most expected comfortable hours, in the difference view."""
    gains = {name: sum(v or 0.0 for v in s["v"]["d_expected_comfortable_h"]) for name, s in streets.items()
             if s["change"]}
    if not gains:
        return {"scheme": next(iter(streets)), "colouring": "comfort", "metric": "comfort"}
    return {"scheme": max(gains, key=lambda k: (gains[k], k)), "colouring": "difference", "metric": "comfort"}


def _context(context: dict | None, routes: dict | None, label_of) -> dict:
    ctx = {k: as_text((context or {}).get(k)) for k in CONTEXT_FIELDS}
    ctx["caveat"] = ctx["caveat"] or CAUTION
    if routes:
        ctx["date"] = ctx["date"] or ", ".join(routes["dates"])
        ctx["model"] = ctx["model"] or (", ".join(routes["predictors"]) or None)
        ctx["opened"] = _opening_text(routes, label_of)
    return ctx
