"""The HTML route map: predicted comfort along planned routes, per scheme and departure.

:func:`route_map` turns the per-point prediction table of :mod:`walkcomfort.routes`
(see DEVELOPERS.md, "Per-point prediction table") into a :class:`folium.Map` with

- one layer per scheme × departure, the route drawn as segments coloured by the
  predicted comfort class (palette in :mod:`walkcomfort.report.palette`),
- optional overlays "Colour routes by UTCI band" and "... by shade": one switch each that
  recolours whichever scheme × departure layers are shown (so the layer list stays short
  with many departures),
- optional scene layers (buildings, trees, canopies as drawn in each scheme; added,
  changed and removed features have their own outlines),
- for recorded walks: the track, the votes as markers and a layer of grid cells showing
  where the model's predictions disagree with the votes,

with popups (local time, class probabilities, UTCI, Tmrt, shade, top reasons) and a
legend. :func:`write_map` writes it as one HTML file, linked to Leaflet on the CDN or
with Leaflet inlined (``offline=True``, see :mod:`walkcomfort.report.offline`).

Safety of user text
-------------------
Participants type vote notes; anyone can name a scheme. No such string is ever
written into the page as HTML: the data travel as JSON (with ``<``, ``>``, ``&`` and the
JavaScript line separators escaped, so nothing can close the ``<script>``), and the
popups, tooltips and legend are built with DOM calls that set ``textContent``. The only
strings Leaflet itself puts into the page as HTML (layer names in the layer control,
the tile attribution, the page title) are HTML-escaped first. On top of that the page
carries a Content-Security-Policy that allows only its own inline scripts (by SHA-256
hash) and, when linked, Leaflet from the CDN, so an injected handler could not run even
if an escape were missed.

Size
----
Coordinates are rounded (``decimals=5``, about 1 m) and each run of points is simplified
(Ramer–Douglas–Peucker in the local metric frame, ``simplify_m``) while every point where
a colour changes is kept; the three colourings of a scheme × departure share one copy of
the data (the UTCI and shade colourings are drawn in the browser only when switched on). :func:`write_map` warns with :class:`MapSizeWarning` above a size budget.
"""

from __future__ import annotations

import base64
import hashlib
import html as html_lib
import json
import math
import os
import re
import warnings
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any
from urllib.parse import urlsplit

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort._io import atomic_write_text
from walkcomfort.errors import DataQualityWarning, InputError
from walkcomfort.report import offline as _offline
from walkcomfort.report import palette as P

# Names of the per-point prediction table (DEVELOPERS.md contract, owner walkcomfort.routes).
ROUTE_ID = "route_id"
SCHEME = "scheme"
DEPARTURE = "departure"
COMFORT_CLASS = "comfort_class"
PREDICTOR = "predictor"
REASONS = "reasons"
PROBA = tuple(f"p_{c}" for c in C.COMFORT_CLASSES)

LAYER_KINDS = ("comfort", "utci", "shade", "scene", "votes", "errors", "network")
# overlays that recolour the shown route layers (one switch each, not one layer per walk)
MODE_LABELS = {"utci": "Colour routes by UTCI band", "shade": "Colour routes by shade"}
DEFAULT_LAYERS = ("comfort", "utci", "shade", "scene", "votes", "errors", "network")
DEFAULT_SIZE_BUDGET_BYTES = 5_000_000
MAX_WALK_LAYERS = 6  # more recorded walks than this share one votes layer
SHADE_BINS = 5

CAUTION = ("Estimates for discussing design options, not a guarantee of heat safety. "
           "Follow local heat-health guidance, occupational-health advice and codes; "
           "design decisions rest with licensed professionals.")


ERRORS_NOTE = ("Cells group the votes of recorded walks; if those walks trained the model, these are "
               "in-sample errors and look smaller than on new walkers.")
ERRORS_NOTE_HELD_OUT = ("Cells group the votes of recorded walks, each predicted by a model that never saw "
                        "that walker (the fit's walker-grouped cross-validation): what to expect on new walkers.")
ERROR_SOURCES = ("in-sample", "held-out")

NETWORK_NOTE = ("Street segments: hours in the batch's time range, each hour a short walk along the "
                "segment with no exposure before it; estimates for comparing schemes, not heat safety.")
NETWORK_BINS = 5
NETWORK_COLOURINGS = ("auto", "hours")
# hours a segment's change must reach to count as a change (the layer files keep 2 decimals)
NETWORK_NO_CHANGE_H = 0.005
NETWORK_MIN_CHANGE_SCALE_H = 1.0  # [h] smallest full scale of the change colouring


class MapSizeWarning(DataQualityWarning):
    """The written map is larger than its size budget (slow to open, heavy to share)."""


# --------------------------------------------------------------------------------------
# tiles
# --------------------------------------------------------------------------------------
# Named tile providers: (URL template, attribution, max zoom). Requests go to the provider
# only when a reader opens the map with tiles chosen; the default is no base map.
TILE_PRESETS: dict[str, tuple[str, str, int]] = {
    "osm": ("https://tile.openstreetmap.org/{z}/{x}/{y}.png", "© OpenStreetMap contributors", 19),
}


@dataclass(frozen=True)
class TileSource:
    """Where the base map comes from.

    ``url`` is a ``{z}/{x}/{y}`` template; for a local folder ``folder`` is set and the
    template is made relative to the written HTML by :func:`write_map`.
    """

    url: str
    attribution: str
    max_zoom: int = 19
    folder: Path | None = None
    ext: str = "png"


def tile_source(tiles=None, attribution: str | None = None, max_zoom: int | None = None) -> TileSource | None:
    """Resolve the ``tiles`` option of :func:`route_map`.

    Parameters
    ----------
    tiles : None, "none", a preset name, a URL template or a folder
        ``None``/``"none"``: no base map (works offline, sends nothing anywhere).
        ``"osm"``: OpenStreetMap's standard tiles. A URL containing ``{z}``, ``{x}`` and
        ``{y}``: any provider (``attribution`` required). An existing folder laid out
        ``<z>/<x>/<y>.png`` (or ``.jpg``/``.webp``): local tiles, referenced relative to the
        HTML so the map and the folder can be copied together.
    attribution : str, optional
        Attribution text shown on the map (plain text; required for URLs and folders).
    max_zoom : int, optional
        Highest zoom level the tiles exist for.

    Returns
    -------
    TileSource or None
    """
    if tiles is None or (isinstance(tiles, str) and tiles.strip().lower() in ("", "none")):
        return None
    if isinstance(tiles, TileSource):
        return tiles
    text = os.fspath(tiles)
    if text.lower() in TILE_PRESETS:
        url, attr, zmax = TILE_PRESETS[text.lower()]
        return TileSource(url, attribution or attr, max_zoom or zmax)
    if all(k in text for k in ("{z}", "{x}", "{y}")):
        if urlsplit(text).scheme not in ("http", "https"):
            raise InputError(f"tile URL {text!r} must start with http:// or https://",
                             where="--tiles", fix="give an http(s) URL template, a tile folder or 'none'")
        if not attribution:
            raise InputError(f"tile URL {text!r} given without an attribution",
                             where="--attribution", fix="state the tile provider's required attribution text")
        return TileSource(text, attribution, max_zoom or 19)
    folder = Path(text)
    if folder.is_dir():
        ext = _tile_extension(folder)
        if not attribution:
            raise InputError(f"local tile folder {text!r} given without an attribution",
                             where="--attribution", fix="state the attribution the tiles' source requires")
        return TileSource("", attribution, max_zoom or 19, folder=folder.resolve(), ext=ext)
    raise InputError(f"tiles {text!r} is neither 'none', a preset ({', '.join(TILE_PRESETS)}), "
                     "a {z}/{x}/{y} URL template nor an existing folder",
                     where="--tiles", fix="pass one of those")


def _tile_extension(folder: Path) -> str:
    for ext in ("png", "jpg", "jpeg", "webp"):
        if next(folder.glob(f"*/*/*.{ext}"), None) is not None:
            return ext
    raise InputError(f"tile folder {folder} has no <z>/<x>/<y>.png (or .jpg/.webp) files",
                     where=folder, fix="point --tiles at the folder that holds the zoom-level folders")


# --------------------------------------------------------------------------------------
# JSON that is safe inside <script>
# --------------------------------------------------------------------------------------
_JS_ESCAPES = {"<": "\\u003c", ">": "\\u003e", "&": "\\u0026", "\u2028": "\\u2028", "\u2029": "\\u2029"}
_JS_ESCAPE_RE = re.compile("[<>&\u2028\u2029]")


def js_json(obj: Any) -> str:
    """JSON text that can be placed inside a ``<script>`` element as a JavaScript value.

    ``<``, ``>`` and ``&`` are written as ``\\u`` escapes (so no string can close the
    script element or open a comment), and so are U+2028/U+2029, which JSON allows in
    strings but older JavaScript parsers treat as line ends. NaN is refused.
    """
    text = json.dumps(obj, ensure_ascii=False, separators=(",", ":"), allow_nan=False)
    return _JS_ESCAPE_RE.sub(lambda m: _JS_ESCAPES[m.group(0)], text)


def _num(values, digits: int) -> list:
    """Rounded floats with NaN as None (JSON null)."""
    arr = np.asarray(values, dtype=float)
    out = np.round(arr, digits).tolist()
    return [None if (v is None or not math.isfinite(v)) else (int(v) if digits == 0 else v) for v in out]


def _text(value) -> str | None:
    if value is None:
        return None
    try:
        if pd.isna(value):
            return None
    except (TypeError, ValueError):
        pass
    return str(value)


# --------------------------------------------------------------------------------------
# geometry helpers
# --------------------------------------------------------------------------------------
def _frame(lon: float, lat: float):
    """The site's local metric frame (UTM zone of the point), owned by environment.geo."""
    from walkcomfort.environment.geo import LocalFrame

    return LocalFrame(float(lon), float(lat))


def rdp_keep(x: np.ndarray, y: np.ndarray, tolerance_m: float, forced: np.ndarray | None = None) -> np.ndarray:
    """Which points of a polyline to keep (Ramer–Douglas–Peucker).

    Parameters
    ----------
    x, y : array of float
        Vertex coordinates in a metric frame [m].
    tolerance_m : float
        Largest allowed distance of a dropped point from the simplified line [m];
        0 keeps every point.
    forced : array of bool, optional
        Points that must be kept (ends of colour runs); the line is simplified piecewise
        between them.

    Returns
    -------
    ndarray of bool
        True for kept vertices. The first and last are always kept.

    References
    ----------
    Douglas, D. H., Peucker, T. K. (1973). Algorithms for the reduction of the number of
    points required to represent a digitized line or its caricature. Cartographica 10(2),
    112-122, doi:10.3138/FM57-6770-U75U-7727.
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    n = len(x)
    keep = np.zeros(n, dtype=bool)
    if n == 0:
        return keep
    keep[0] = keep[-1] = True
    if forced is not None:
        keep |= np.asarray(forced, dtype=bool)
    if tolerance_m <= 0 or n < 3:
        return np.ones(n, dtype=bool) if tolerance_m <= 0 else keep
    anchors = np.flatnonzero(keep)
    stack = [(int(a), int(b)) for a, b in zip(anchors[:-1], anchors[1:], strict=False) if b - a > 1]
    while stack:
        a, b = stack.pop()
        xs, ys = x[a + 1:b], y[a + 1:b]
        dx, dy = x[b] - x[a], y[b] - y[a]
        length = math.hypot(dx, dy)
        if length == 0.0:
            dist = np.hypot(xs - x[a], ys - y[a])
        else:
            dist = np.abs(dy * (xs - x[a]) - dx * (ys - y[a])) / length
        k = int(np.argmax(dist))
        if dist[k] > tolerance_m:
            m = a + 1 + k
            keep[m] = True
            if m - a > 1:
                stack.append((a, m))
            if b - m > 1:
                stack.append((m, b))
    return keep


# --------------------------------------------------------------------------------------
# inputs
# --------------------------------------------------------------------------------------
def _zone(timezone: str):
    from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

    try:
        return ZoneInfo(str(timezone))
    except (ZoneInfoNotFoundError, ValueError):
        raise InputError(f"time zone {timezone!r} is not an IANA zone name", where="--timezone",
                         fix="use a name such as 'Europe/Madrid' or 'UTC'") from None


def _load_geojson(obj, what: str) -> tuple[dict, str]:
    """(GeoJSON dict, where-label) from a path, a dict or an object with ``to_geojson()``."""
    if hasattr(obj, "to_geojson"):
        return obj.to_geojson(), what
    if isinstance(obj, Mapping):
        return dict(obj), what
    path = Path(obj)
    try:
        text = path.read_text(encoding="utf-8")
    except OSError as exc:
        raise InputError(f"cannot read the {what} file ({exc.strerror})", where=path,
                         fix="check the path") from None
    try:
        data = json.loads(text)
    except json.JSONDecodeError as exc:
        raise InputError(f"the {what} file is not valid JSON ({exc.msg})", where=f"{path}:{exc.lineno}",
                         fix="fix the JSON syntax") from None
    if not isinstance(data, dict) or data.get("type") != "FeatureCollection":
        raise InputError(f"the {what} file is not a GeoJSON FeatureCollection", where=path,
                         fix="write a FeatureCollection in WGS84 lon/lat")
    return data, os.fspath(path)


def _check_predictions(df: pd.DataFrame) -> pd.DataFrame:
    where = "prediction table"
    if not isinstance(df, pd.DataFrame):
        raise InputError(f"predictions must be a DataFrame, got {type(df).__name__}", where=where,
                         fix="pass the table returned by walkcomfort.routes.predict_route")
    need = [C.LAT, C.LON, SCHEME, DEPARTURE]
    missing = [c for c in need if c not in df.columns]
    if COMFORT_CLASS not in df.columns and not all(p in df.columns for p in PROBA):
        missing.append(f"{COMFORT_CLASS} (or {', '.join(PROBA)})")
    if missing:
        raise InputError(f"the prediction table lacks column(s) {', '.join(missing)}", where=where,
                         fix="pass the per-point table described in DEVELOPERS.md")
    if not isinstance(df.index, pd.DatetimeIndex) or df.index.tz is None:
        raise InputError("the prediction table's index is not a tz-aware time index", where=where,
                         fix="index the table by UTC time as predict_route does")
    bad = ~(np.isfinite(df[C.LAT].to_numpy(float)) & np.isfinite(df[C.LON].to_numpy(float)))
    if bad.any():
        row = int(np.flatnonzero(bad)[0])
        raise InputError(f"{int(bad.sum())} prediction row(s) have no lat/lon", where=f"{where} row {row}",
                         fix="drop or repair rows without a position before mapping")
    if COMFORT_CLASS in df.columns:
        bad_cls = df[COMFORT_CLASS].notna() & ~df[COMFORT_CLASS].isin(C.COMFORT_CLASSES)
        if bad_cls.any():
            row = int(np.flatnonzero(bad_cls.to_numpy())[0])
            raise InputError(f"comfort_class {df[COMFORT_CLASS].iloc[row]!r} is not one of "
                             f"{', '.join(C.COMFORT_CLASSES)}", where=f"{where} row {row}",
                             fix="use the glossary's comfort classes")
    return df


def _classes(df: pd.DataFrame) -> np.ndarray:
    """Index into COMFORT_CLASSES per row (-1 = none): the stated class, else argmax of p_*."""
    out = np.full(len(df), -1, dtype=int)
    if COMFORT_CLASS in df.columns:
        lookup = {c: i for i, c in enumerate(C.COMFORT_CLASSES)}
        out = np.array(df[COMFORT_CLASS].map(lookup).fillna(-1).astype(int), dtype=int)
    if all(p in df.columns for p in PROBA):
        probs = df[list(PROBA)].to_numpy(float)
        ok = np.isfinite(probs).all(axis=1) & (out < 0)
        out[ok] = np.argmax(probs[ok], axis=1)
    return out


def _bands(df: pd.DataFrame) -> np.ndarray:
    """Index into UTCI_BANDS per row (-1 = none): the stated band, else the band of utci_c."""
    names = [b[2] for b in C.UTCI_BANDS]
    out = np.full(len(df), -1, dtype=int)
    if C.UTCI_BAND in df.columns:
        out = np.array(df[C.UTCI_BAND].map({n: i for i, n in enumerate(names)}).fillna(-1).astype(int), dtype=int)
    if C.UTCI_C in df.columns:
        utci = df[C.UTCI_C].to_numpy(float)
        for i, (low, high, _) in enumerate(C.UTCI_BANDS):
            out[(out < 0) & (utci > low) & (utci <= high)] = i
    return out


def _shade_bins(shade: np.ndarray) -> np.ndarray:
    out = np.full(len(shade), -1, dtype=int)
    ok = np.isfinite(shade)
    out[ok] = np.clip(np.floor(np.clip(shade[ok], 0, 1) * SHADE_BINS), 0, SHADE_BINS - 1).astype(int)
    return out


def _col(df, name, default=np.nan) -> np.ndarray:
    return df[name].to_numpy(float) if name in df.columns else np.full(len(df), default, dtype=float)


def _local_times(index: pd.DatetimeIndex, zone, fmt: str) -> list[str]:
    return list(index.tz_convert(zone).strftime(fmt))


# --------------------------------------------------------------------------------------
# payloads (plain JSON-able dicts the page's script draws from)
# --------------------------------------------------------------------------------------
def _route_payload(group: pd.DataFrame, label: str, zone, tz_name: str, decimals: int,
                   simplify_m: float) -> dict:
    group = group.copy()
    group.index = group.index.rename(C.TIME)
    codes, uniques = pd.factorize(group[ROUTE_ID].astype(object)) if ROUTE_ID in group.columns \
        else (np.zeros(len(group), dtype=int), np.array([""], dtype=object))
    group["_route"] = codes
    order = ["_route"] + ([C.DIST_M] if C.DIST_M in group.columns else [])
    group = group.reset_index().sort_values(order + [C.TIME], kind="stable").set_index(C.TIME)
    cls = _classes(group)
    band = _bands(group)
    shade = _col(group, C.SHADE_FRAC)
    sbin = _shade_bins(shade)
    route = group["_route"].to_numpy()
    if C.X_M in group.columns and C.Y_M in group.columns and group[[C.X_M, C.Y_M]].notna().all().all():
        x, y = group[C.X_M].to_numpy(float), group[C.Y_M].to_numpy(float)
    else:
        frame = _frame(group[C.LON].mean(), group[C.LAT].mean())
        x, y = frame.project(group[C.LON].to_numpy(float), group[C.LAT].to_numpy(float))
        x, y = np.asarray(x, dtype=float), np.asarray(y, dtype=float)
    n = len(group)
    keep = np.zeros(n, dtype=bool)
    starts = np.r_[0, np.flatnonzero(route[1:] != route[:-1]) + 1, n]
    for a, b in zip(starts[:-1], starts[1:], strict=False):
        seg = slice(a, b)
        forced = np.zeros(b - a, dtype=bool)
        for key in (cls[seg], band[seg], sbin[seg]):
            change = np.flatnonzero(key[1:] != key[:-1])
            forced[change] = True       # last point of a run
            forced[change + 1] = True   # first point of the next
        keep[seg] = rdp_keep(x[seg], y[seg], simplify_m, forced)
    g = group[keep]
    kept_routes, route_ids = pd.factorize(g["_route"].to_numpy())
    route_ids = [("" if pd.isna(uniques[c]) else str(uniques[c])) for c in route_ids]
    probs = [_num(_col(g, p), 2) for p in PROBA]
    if REASONS in g.columns:
        reason_codes, reason_list = pd.factorize(g[REASONS].astype(object), use_na_sentinel=True)
        reason_list = [str(v) for v in reason_list]
        reason_codes = reason_codes.tolist()
    else:
        reason_codes, reason_list = [-1] * len(g), []
    predictors = sorted({str(v) for v in g[PREDICTOR].dropna()}) if PREDICTOR in g.columns else []
    return {
        "label": label,
        "tz": tz_name,
        "routes": route_ids,
        "predictors": predictors,
        "n_points": int(n),
        "lat": _num(g[C.LAT], decimals),
        "lon": _num(g[C.LON], decimals),
        "route": kept_routes.tolist(),
        "t": _local_times(g.index, zone, "%H:%M"),
        "dist": _num(_col(g, C.DIST_M), 0),
        "cls": cls[keep].tolist(),
        "band": band[keep].tolist(),
        "sbin": sbin[keep].tolist(),
        "p": probs,
        "utci": _num(_col(g, C.UTCI_C), 1),
        "tmrt": _num(_col(g, C.TMRT_C), 1),
        "tair": _num(_col(g, C.T_AIR_C), 1),
        "shade": _num(shade[keep], 2),
        "reasons": reason_list,
        "r": reason_codes,
    }


SUMMARY_FIELDS = ("walk_min", "length_m", "exp_share_comfortable", "exp_share_neutral", "exp_share_uncomfortable",
                  "shade_share", "mean_utci_c", "peak_utci_c", "heat_dose_cmin")


def _summary_lookup(summaries: pd.DataFrame | None):
    """(route_id, scheme, departure ns) -> the popup's summary dict, or None."""
    if summaries is None or len(summaries) == 0:
        return lambda route, scheme, dep: None
    need = [ROUTE_ID, SCHEME, DEPARTURE]
    missing = [c for c in need if c not in summaries.columns]
    if missing:
        raise InputError(f"the route summaries lack column(s) {', '.join(missing)}", where="route summaries",
                         fix="pass the summary table of walkcomfort.routes (summary.parquet)")
    deps = pd.to_datetime(summaries[DEPARTURE], utc=True).dt.tz_convert(None).to_numpy("datetime64[ns]")
    table = {}
    for i, (r, sch, dep) in enumerate(zip(summaries[ROUTE_ID].astype(str), summaries[SCHEME].astype(str),
                                          deps.astype("int64"), strict=False)):
        row = summaries.iloc[i]
        table[(r, sch, int(dep))] = {k: (_num([row[k]], 3)[0] if k in summaries.columns else None)
                                     for k in SUMMARY_FIELDS}
    return lambda route, scheme, dep: table.get((str(route), str(scheme), int(dep)))


def _ring(coords, decimals: int) -> list:
    return [[round(float(c[1]), decimals), round(float(c[0]), decimals)] for c in coords]


def _simplify_geometry(geom: dict, simplify_m: float) -> dict:
    if simplify_m <= 0 or geom.get("type") not in ("Polygon", "MultiPolygon", "LineString"):
        return geom
    from shapely.geometry import mapping, shape

    shp = shape(geom)
    # degrees per metre of latitude: good enough for a display tolerance
    simple = shp.simplify(simplify_m / 111_320.0, preserve_topology=True)
    return mapping(simple) if not simple.is_empty else geom


def _scene_features(scene_gj: dict, scheme_gj: dict | None, where: str, decimals: int,
                    simplify_m: float) -> list[dict]:
    """Display list of scene features as drawn under one scheme (edit marks kept)."""
    base = {}
    for i, feat in enumerate(scene_gj.get("features", [])):
        props = dict(feat.get("properties") or {})
        fid = _text(props.get("id")) or f"feature {i}"
        base[fid] = {"geometry": feat.get("geometry"), "props": props, "edit": "existing"}
    if scheme_gj is not None:
        for i, feat in enumerate(scheme_gj.get("features", [])):
            props = dict(feat.get("properties") or {})
            edit = props.get("edit")
            if edit not in ("add", "remove", "modify"):
                raise InputError(f"scheme feature {i} has edit={edit!r}; allowed add, remove, modify",
                                 where=f"{where} feature {i}", fix="set properties.edit")
            if edit == "add":
                fid = _text(props.get("id")) or f"added {i}"
                base[f"+{fid}"] = {"geometry": feat.get("geometry"), "props": props, "edit": "add"}
                continue
            target = _text(props.get("target"))
            if target not in base:
                raise InputError(f"scheme feature {i} targets {target!r}, which is not in the scene",
                                 where=f"{where} feature {i}", fix="use an id from the scene file")
            entry = base[target]
            if edit == "remove":
                entry["edit"] = "remove"
            else:
                merged = dict(entry["props"])
                merged.update({k: v for k, v in props.items() if k not in ("edit", "target")})
                entry["props"] = merged
                entry["edit"] = "modify"
                if feat.get("geometry"):
                    entry["geometry"] = feat["geometry"]
    out = []
    for entry in base.values():
        geom = entry["geometry"] or {}
        props = entry["props"]
        kind = _text(props.get("kind")) or "building"
        item = {
            "k": kind if kind in P.SCENE_COLOURS else "building",
            "e": entry["edit"],
            "id": _text(props.get("id")) or "",
            "h": _num([props.get("height_m", np.nan)], 1)[0],
            "tr": _num([props.get("transmissivity", np.nan)], 2)[0],
        }
        gtype = geom.get("type")
        if gtype == "Point":
            lon, lat = geom["coordinates"][:2]
            item.update(g="c", c=[round(float(lat), decimals), round(float(lon), decimals)],
                        rad=_num([props.get("crown_radius_m", 2.0)], 1)[0] or 2.0)
        elif gtype in ("Polygon", "MultiPolygon"):
            geom = _simplify_geometry(geom, simplify_m)
            polys = [geom["coordinates"]] if geom["type"] == "Polygon" else list(geom["coordinates"])
            item.update(g="p", c=[[_ring(r, decimals) for r in poly] for poly in polys])
        else:
            continue  # lines and other kinds are not drawn in the scene layer
        out.append(item)
    return out


def _walk_frames(walks) -> list[pd.DataFrame]:
    out = []
    for i, w in enumerate(walks or ()):
        if isinstance(w, (str, os.PathLike)):
            path = Path(w)
            try:
                from walkcomfort.session.timeline import read_timeline  # the owner's reader
            except ImportError:  # pragma: no cover - the session stage is not installed yet
                read_timeline = None
            try:
                w = read_timeline(path) if read_timeline is not None else pd.read_parquet(path)
            except (OSError, ValueError) as exc:
                raise InputError(f"cannot read the timeline ({exc})", where=path,
                                 fix="pass a timeline.parquet written by 'walkcomfort ingest'") from None
            if hasattr(w, "data"):
                w = w.data
        elif hasattr(w, "data") and isinstance(w.data, pd.DataFrame):
            w = w.data
        if not isinstance(w, pd.DataFrame):
            raise InputError(f"walk {i} is a {type(w).__name__}, not a timeline", where=f"walk {i}",
                             fix="pass timeline DataFrames or timeline.parquet paths")
        for need in (C.LAT, C.LON):
            if need not in w.columns:
                raise InputError(f"walk {i} has no {need!r} column", where=f"walk {i}",
                                 fix="pass a timeline with GPS positions")
        if not isinstance(w.index, pd.DatetimeIndex) or w.index.tz is None:
            raise InputError(f"walk {i}'s index is not a tz-aware time index", where=f"walk {i}",
                             fix="pass the timeline as written by 'walkcomfort ingest'")
        out.append(w)
    return out


def _walk_payload(w: pd.DataFrame, i: int, default_tz: str, decimals: int, simplify_m: float) -> dict:
    session = (w.attrs or {}).get("session") or {}
    tz_name = str(session.get("timezone") or default_tz)
    zone = _zone(tz_name)
    walk_id = _text(session.get("walk_id")) or (
        _text(w[C.WALK_ID].dropna().iloc[0]) if C.WALK_ID in w.columns and w[C.WALK_ID].notna().any()
        else f"walk {i + 1}")
    ok = np.isfinite(w[C.LAT].to_numpy(float)) & np.isfinite(w[C.LON].to_numpy(float))
    track = w[ok]
    frame = _frame(track[C.LON].mean(), track[C.LAT].mean())
    x, y = frame.project(track[C.LON].to_numpy(float), track[C.LAT].to_numpy(float))
    keep = rdp_keep(np.asarray(x, dtype=float), np.asarray(y, dtype=float), max(simplify_m, 0.5))
    tr = track[keep]
    votes = _vote_rows(track)
    pred = _classes(votes) if _has_prediction(votes) else np.full(len(votes), -1)
    lookup = {c: i for i, c in enumerate(C.COMFORT_CLASSES)}
    vote_cls = votes[C.VOTE_COMFORT].map(lookup).fillna(-1).astype(int).tolist() \
        if C.VOTE_COMFORT in votes.columns else [-1] * len(votes)
    probs = [_num(_col(votes, p), 2) for p in PROBA]
    return {
        "walk": walk_id,
        "participant": _text(w[C.PARTICIPANT].dropna().iloc[0]) if C.PARTICIPANT in w.columns
        and w[C.PARTICIPANT].notna().any() else None,
        "tz": tz_name,
        "track": [[a, b] for a, b in zip(_num(tr[C.LAT], decimals), _num(tr[C.LON], decimals), strict=False)],
        "votes": {
            "lat": _num(votes[C.LAT], decimals),
            "lon": _num(votes[C.LON], decimals),
            "t": _local_times(votes.index, zone, "%Y-%m-%d %H:%M:%S"),
            "vote": vote_cls,
            "tsv": _num(_col(votes, C.VOTE_TSV), 0),
            "kind": [_text(v) for v in votes[C.VOTE_KIND]] if C.VOTE_KIND in votes.columns else [None] * len(votes),
            "note": [_text(v) for v in votes[C.VOTE_NOTE]] if C.VOTE_NOTE in votes.columns else [None] * len(votes),
            "pred": [int(v) for v in pred],
            "p": probs,
            "utci": _num(_col(votes, C.UTCI_C), 1),
        },
    }


def _vote_rows(w: pd.DataFrame) -> pd.DataFrame:
    mask = np.zeros(len(w), dtype=bool)
    for col in (C.VOTE_COMFORT, C.VOTE_TSV):
        if col in w.columns:
            mask |= w[col].notna().to_numpy()
    return w[mask]


def _has_prediction(df: pd.DataFrame) -> bool:
    return COMFORT_CLASS in df.columns or all(p in df.columns for p in PROBA)


def model_error_cells(walks: Sequence[pd.DataFrame], cell_m: float = 50.0) -> pd.DataFrame:
    """Where the model's predicted class disagrees with the votes, on a square grid.

    Parameters
    ----------
    walks : sequence of DataFrame
        Timelines with ``lat``, ``lon``, ``vote_comfort`` and a prediction
        (``comfort_class`` or ``p_comfortable``/``p_neutral``/``p_uncomfortable``).
    cell_m : float
        Side of a grid cell in the UTM zone of the votes' centroid [m].

    Returns
    -------
    DataFrame
        One row per cell with at least one voted and predicted row: ``ix, iy`` (cell
        indices), ``n_votes``, ``n_wrong``, ``error_rate`` [-], ``corners`` (list of
        four (lat, lon) pairs) and ``top_confusion`` (``"vote → predicted"`` most often seen
        among the wrong ones, or None).
    """
    if cell_m <= 0:
        raise InputError(f"error cell size {cell_m} m must be positive", where="--error-cell-m",
                         fix="give a size such as 50")
    rows = []
    for w in walks:
        if C.VOTE_COMFORT not in w.columns or not _has_prediction(w):
            continue
        v = w[w[C.VOTE_COMFORT].isin(C.COMFORT_CLASSES)]
        v = v[np.isfinite(v[C.LAT].to_numpy(float)) & np.isfinite(v[C.LON].to_numpy(float))]
        pred = _classes(v)
        v = v[pred >= 0]
        pred = pred[pred >= 0]
        if len(v):
            rows.append(pd.DataFrame({"lat": v[C.LAT].to_numpy(float), "lon": v[C.LON].to_numpy(float),
                                      "vote": v[C.VOTE_COMFORT].to_numpy(object),
                                      "pred": np.asarray(C.COMFORT_CLASSES, dtype=object)[pred]}))
    cols = ["ix", "iy", "n_votes", "n_wrong", "error_rate", "corners", "top_confusion"]
    if not rows:
        return pd.DataFrame(columns=cols)
    pts = pd.concat(rows, ignore_index=True)
    frame = _frame(pts["lon"].mean(), pts["lat"].mean())
    x, y = frame.project(pts["lon"].to_numpy(float), pts["lat"].to_numpy(float))
    pts["ix"] = np.floor(np.asarray(x) / cell_m).astype(int)
    pts["iy"] = np.floor(np.asarray(y) / cell_m).astype(int)
    pts["wrong"] = pts["vote"] != pts["pred"]
    out = []
    for (ix, iy), cell in pts.groupby(["ix", "iy"], sort=True):
        xs = np.array([ix, ix + 1, ix + 1, ix]) * cell_m
        ys = np.array([iy, iy, iy + 1, iy + 1]) * cell_m
        lon, lat = frame.unproject(xs.astype(float), ys.astype(float))
        wrong = cell[cell["wrong"]]
        top = None
        if len(wrong):
            pair = (wrong["vote"] + " → " + wrong["pred"]).value_counts()
            top = str(pair.index[0])
        out.append({"ix": int(ix), "iy": int(iy), "n_votes": int(len(cell)), "n_wrong": int(len(wrong)),
                    "error_rate": float(len(wrong) / len(cell)),
                    "corners": [[float(a), float(b)] for a, b in zip(lat, lon, strict=False)], "top_confusion": top})
    return pd.DataFrame(out, columns=cols)


# --------------------------------------------------------------------------------------
# street network (layers of walkcomfort.network.summaries.network_layer)
# --------------------------------------------------------------------------------------
NETWORK_VALUES = ("hours_h", "comfortable_h", "expected_comfortable_h", "uncomfortable_h", "heat_stress_h",
                  "mean_utci_c", "max_utci_c", "mean_shade_frac")
NETWORK_CHANGES = ("d_comfortable_h", "gained_comfortable_h", "lost_comfortable_h", "d_heat_stress_h",
                   "d_mean_utci_c")


def _network_docs(network) -> list[dict]:
    docs = []
    for i, layer in enumerate(network or ()):
        doc, where = _load_geojson(layer, "network layer")
        meta = doc.get("walkcomfort") or {}
        if not _text(meta.get("scheme")) or not isinstance(doc.get("features"), list):
            raise InputError("not a network map layer (no walkcomfort.scheme or no features)", where=where or f"layer {i}",
                             fix="pass network_layer_<scheme>.geojson written by 'walkcomfort network'")
        docs.append(doc)
    return docs


def _is_change(doc: dict) -> bool:
    """A layer of a scheme other than the base carries the change columns."""
    feats = doc.get("features") or []
    return bool(feats) and "d_comfortable_h" in (feats[0].get("properties") or {})


def _fmt_h(v: float) -> str:
    return f"{v:.1f}".rstrip("0").rstrip(".") if v < 10 else f"{v:.0f}"


def network_keys(docs: Sequence[dict], colour: str = "auto") -> dict:
    """Colour bins of the network layers, shared by every layer so switching schemes compares like with like.

    ``hours``: comfortable hours in :data:`NETWORK_BINS` equal bins from 0 to the
    longest time range of any segment. ``change`` (colour ``auto``, schemes other than the base):
    comfortable hours gained or lost against the base, split at half the largest change, with
    "no change" in the middle.

    Returns
    -------
    dict
        ``{"hours": [{"label", "colour", "hi"}...], "change": [...], "max_hours": H, "max_change": D}``.
    """
    if colour not in NETWORK_COLOURINGS:
        raise InputError(f"network colouring {colour!r} is not one of {', '.join(NETWORK_COLOURINGS)}",
                         where="--network-colour", fix="use 'auto' or 'hours'")
    hours = [float(f["properties"].get("hours_h") or 0.0) for d in docs for f in d["features"]]
    top = max(hours, default=0.0) or 1.0
    edges = np.linspace(0.0, top, NETWORK_BINS + 1)
    keys = {"hours": [{"label": f"{_fmt_h(edges[i])}–{_fmt_h(edges[i + 1])} h comfortable",
                       "colour": P.ramp(P.NETWORK_HOURS_STOPS, i / (NETWORK_BINS - 1))}
                      for i in range(NETWORK_BINS)], "max_hours": float(top), "change": [], "max_change": 0.0}
    if colour == "auto" and any(_is_change(d) for d in docs):
        d = [abs(float(f["properties"].get("d_comfortable_h") or 0.0)) for doc in docs if _is_change(doc)
             for f in doc["features"]]
        # with no change anywhere the scale still spans an hour, so the legend reads sensibly
        big = max(max(d, default=0.0), NETWORK_MIN_CHANGE_SCALE_H)
        half = _fmt_h(big / 2)
        labels = (f"more than {half} h fewer comfortable", f"up to {half} h fewer", "no change",
                  f"up to {half} h more", f"more than {half} h more comfortable")
        keys["change"] = [{"label": lab, "colour": P.NETWORK_CHANGE_STOPS[i]} for i, lab in enumerate(labels)]
        keys["max_change"] = float(big)
    return keys


def _network_bin(props: dict, change: bool, keys: dict) -> int:
    if change:
        v = float(props.get("d_comfortable_h") or 0.0)
        if abs(v) < NETWORK_NO_CHANGE_H:
            return 2
        half = keys["max_change"] / 2
        return (4 if v > half else 3) if v > 0 else (0 if -v > half else 1)
    v = float(props.get("comfortable_h") or 0.0)
    return int(min(NETWORK_BINS - 1, max(0, math.floor(v / keys["max_hours"] * NETWORK_BINS))))


def _network_payload(doc: dict, label: str, change: bool, keys: dict, decimals: int) -> dict:
    """Columnar data of one network layer (coordinates as [lat, lon], values to 2 decimals)."""
    feats = [f for f in doc["features"] if (f.get("geometry") or {}).get("type") == "LineString"]
    cols = NETWORK_VALUES + (NETWORK_CHANGES if change else ())
    out = {"label": label, "change": bool(change), "id": [], "name": [], "k": [], "c": [],
           "v": {c: [] for c in cols}}
    for f in feats:
        props = f.get("properties") or {}
        out["id"].append(_text(props.get(C.SEGMENT_ID)) or "")
        out["name"].append(_text(props.get("name")) or "")
        out["k"].append(_network_bin(props, change, keys))
        out["c"].append([[round(float(b), decimals), round(float(a), decimals)] for a, b, *_ in
                         f["geometry"]["coordinates"]])
        for c in cols:
            v = props.get(c)
            out["v"][c].append(None if v is None or not math.isfinite(float(v)) else round(float(v), 2))
    return out


# --------------------------------------------------------------------------------------
# folium elements
# --------------------------------------------------------------------------------------
def _folium():
    import folium
    from folium.map import Layer
    from folium.template import Template

    return folium, Layer, Template


def _legend_config(network_keys: dict | None = None, error_source: str = "in-sample") -> dict:
    return {
        "network": (network_keys or {}).get("hours", []),
        "network_change": (network_keys or {}).get("change", []),
        "network_note": NETWORK_NOTE,
        "comfort": [{"name": c, "label": P.COMFORT_LABELS[c], "colour": P.COMFORT_COLOURS[c]}
                    for c in C.COMFORT_CLASSES],
        "utci": [{"name": b[2], "label": b[2][0].upper() + b[2][1:],
                  "range": _band_range(b[0], b[1]), "colour": P.UTCI_BAND_COLOURS[b[2]]} for b in C.UTCI_BANDS],
        "shade": [{"label": f"{int(100 * i / SHADE_BINS)}–{int(100 * (i + 1) / SHADE_BINS)} % shade",
                   "colour": P.shade_colour((i + 0.5) / SHADE_BINS)} for i in range(SHADE_BINS)],
        "errors": [{"label": f"{int(100 * v)} % of votes disagree", "colour": P.error_colour(v)}
                   for v in (0.0, 0.25, 0.5, 0.75, 1.0)],
        "scene": {k: v for k, v in P.SCENE_COLOURS.items()},
        "edits": P.EDIT_STYLES,
        "edit_legend": P.EDIT_LEGEND,
        "missing": P.MISSING_COLOUR,
        "halo": P.HALO_COLOUR,
        "tsv": {str(k): v for k, v in C.TSV_SCALE.items()},
        "caution": CAUTION,
        "errors_note": ERRORS_NOTE_HELD_OUT if error_source == "held-out" else ERRORS_NOTE,
        "errors_title": ("Where the model errs on held-out walkers" if error_source == "held-out"
                         else "Where the model errs (in-sample)"),
    }


def _band_range(low: float, high: float) -> str:
    if math.isinf(high):
        return f"above {low:g} °C"
    if math.isinf(low):
        return f"below {high:g} °C"
    return f"{low:g} to {high:g} °C"


def _runtime_js() -> str:
    return _RUNTIME_JS


class _Elements:
    """folium element classes, built lazily so importing this module stays light."""

    _cache: dict = {}

    @classmethod
    def get(cls) -> dict:
        if cls._cache:
            return cls._cache
        folium, Layer, Template = _folium()
        from branca.element import MacroElement

        class ComfortMap(folium.Map):
            """folium.Map without jQuery, Bootstrap, icon fonts or awesome-markers."""

            default_js: list = []
            default_css: list = []

        class Runtime(MacroElement):
            _template = Template("""
                {% macro header(this, kwargs) %}
                <style>{{ this.css }}</style>
                {% endmacro %}
                {% macro script(this, kwargs) %}
                {{ this.js }}
                WC.init({{ this._parent.get_name() }}, {{ this.config }});
                {% endmacro %}
            """)

            def __init__(self, config: dict):
                super().__init__()
                self._name = "WalkcomfortRuntime"
                self.js = _runtime_js()
                self.css = _RUNTIME_CSS
                self.config = js_json(config)

        class Payload(MacroElement):
            _template = Template("""
                {% macro script(this, kwargs) %}
                var {{ this.get_name() }} = {{ this.data }};
                {% endmacro %}
            """)

            def __init__(self, data: dict):
                super().__init__()
                self._name = "WalkcomfortData"
                self.data = js_json(data)

        class DataLayer(Layer):
            _template = Template("""
                {% macro script(this, kwargs) %}
                var {{ this.get_name() }} = WC.layer({{ this.kind_json }},
                    {{ this.payload.get_name() if this.payload is not none else "null" }}, {{ this.label_json }});
                {% endmacro %}
            """)

            def __init__(self, kind: str, payload, label: str, show: bool):
                # the layer control writes names as HTML: escape, then folium writes JSON
                super().__init__(name=html_lib.escape(label, quote=True), overlay=True, control=True, show=show)
                self._name = "WalkcomfortLayer"
                self.kind = kind
                self.kind_json = js_json(kind)
                self.label_json = js_json(label)
                self.payload = payload

        class Tiles(MacroElement):
            _template = Template("""
                {% macro script(this, kwargs) %}
                L.tileLayer({{ this.url_json }}, {{ this.options }}).addTo({{ this._parent.get_name() }});
                {% endmacro %}
            """)

            def __init__(self, source: TileSource):
                super().__init__()
                self._name = "WalkcomfortTiles"
                self.source = source
                self.out_dir: Path | None = None

            def render(self, **kwargs):
                src = self.source
                if src.folder is not None:
                    base = self.out_dir or Path.cwd()
                    rel = Path(os.path.relpath(src.folder, base)).as_posix()
                    url = f"{rel}/{{z}}/{{x}}/{{y}}.{src.ext}"
                else:
                    url = src.url
                self.url_json = js_json(url)
                self.options = js_json({"attribution": html_lib.escape(src.attribution, quote=True),
                                        "maxZoom": int(src.max_zoom)})
                super().render(**kwargs)

        class Finish(MacroElement):
            _template = Template("""
                {% macro script(this, kwargs) %}
                WC.finish({{ this.bounds }}, {{ this.info }});
                {% endmacro %}
            """)

            def __init__(self, bounds, info: dict):
                super().__init__()
                self._name = "WalkcomfortFinish"
                self.bounds = js_json(bounds)
                self.info = js_json(info)

        cls._cache = {"ComfortMap": ComfortMap, "Runtime": Runtime, "Payload": Payload,
                      "DataLayer": DataLayer, "Tiles": Tiles, "Finish": Finish}
        return cls._cache


def _base_label(name: str) -> str:
    """The routes stage's label for its unedited scene, or the name itself."""
    try:
        from walkcomfort.routes.schemes import BASE, Scheme
    except ImportError:  # pragma: no cover - routes stage not installed
        return name
    return Scheme.base().label if name == BASE else name


def _unique(label: str, seen: set) -> str:
    out, k = label, 2
    while out in seen:
        out = f"{label} ({k})"
        k += 1
    seen.add(out)
    return out


def route_map(predictions: pd.DataFrame | None = None, *, scene=None, schemes: Iterable = (),
              walks: Iterable = (), summaries: pd.DataFrame | None = None, timezone: str = "UTC",
              tiles=None, attribution: str | None = None,
              max_zoom: int | None = None, layers: Iterable[str] = DEFAULT_LAYERS, decimals: int = 5,
              simplify_m: float = 1.0, error_cell_m: float = 50.0, title: str | None = None,
              error_source: str = "in-sample", network: Iterable = (), network_colour: str = "auto"):
    """Build the interactive route map.

    Parameters
    ----------
    predictions : DataFrame, optional
        Per-point prediction table (index ``time`` UTC; ``route_id, scheme, departure,
        lat, lon``, ``comfort_class`` and/or ``p_*``; optionally ``x_m, y_m, dist_m,
        utci_c, utci_band, tmrt_c, t_air_c, shade_frac, predictor, reasons``).
    scene : path, dict or Scene, optional
        The scene GeoJSON (buildings, trees, canopies).
    schemes : iterable of path or dict
        Scheme GeoJSONs; matched to the table's ``scheme`` values by their
        ``walkcomfort.scheme`` name. Their ``label`` names the layers.
    walks : iterable of DataFrame or path
        Recorded timelines (with votes and, for the error layer, predictions).
    summaries : DataFrame, optional
        Route summaries (one row per ``route_id, scheme, departure``, as from
        :func:`walkcomfort.routes.compare.summarise`); shown in the route popups.
    timezone : str
        IANA zone for the times shown in route popups (walk popups use each walk's own
        zone from its session attributes when present).
    tiles, attribution, max_zoom
        Base map, see :func:`tile_source`. Default: none.
    layers : iterable of str
        Which kinds of layer to draw, among ``comfort, utci, shade, scene, votes, errors``.
    decimals : int
        Decimal places kept in coordinates (5 ≈ 1.1 m).
    simplify_m : float
        Simplification tolerance for lines and outlines [m]; 0 keeps every vertex.
    error_cell_m : float
        Grid size of the model-error layer [m].
    title : str, optional
        Title shown on the map and in the page title (default: "Predicted walking
        comfort", or "Recorded walks" for a map without predictions).
    error_source : {"in-sample", "held-out"}
        Where the walks' predictions come from: ``"held-out"`` when every vote was predicted
        by a model that never saw its walker (the fit's out-of-fold predictions), which
        names the error layer and its legend accordingly.
    network : iterable of path or dict
        Street-network layers (``network_layer_<scheme>.geojson`` of ``walkcomfort network``,
        or :func:`walkcomfort.network.summaries.network_layer` dicts): one switchable layer
        each, segments coloured by comfortable hours.
    network_colour : {"auto", "hours"}
        ``auto``: the base by comfortable hours, other schemes by the change against the
        base; ``hours``: every scheme by comfortable hours.

    Returns
    -------
    folium.Map
        Write it with :func:`write_map`.
    """
    layers = tuple(layers)
    unknown = [k for k in layers if k not in LAYER_KINDS]
    if unknown:
        raise InputError(f"unknown layer kind(s) {', '.join(map(repr, unknown))}; allowed "
                         f"{', '.join(LAYER_KINDS)}", where="--layers", fix="pick from the allowed kinds")
    if not 0 <= int(decimals) <= 8:
        raise InputError(f"decimals={decimals} out of range 0…8", where="--decimals", fix="use 5 (about 1 m)")
    if simplify_m < 0:
        raise InputError(f"simplify_m={simplify_m} is negative", where="--simplify-m", fix="use 0 or more")
    zone = _zone(timezone)
    walk_frames = _walk_frames(walks)
    if error_source not in ERROR_SOURCES:
        raise InputError(f"error_source={error_source!r} is not one of {', '.join(ERROR_SOURCES)}",
                         where="route_map", fix="use 'in-sample' or 'held-out'")
    net_docs = _network_docs(network)
    net_keys = network_keys(net_docs, network_colour) if net_docs else None
    if predictions is None and not walk_frames and scene is None and not net_docs:
        raise InputError("nothing to map: no predictions, walks or scene given", where="route_map",
                         fix="pass a prediction table, recorded walks or a scene")
    if title is None:
        title = "Predicted walking comfort" if predictions is not None else "Recorded walks"
    E = _Elements.get()
    fmap = E["ComfortMap"](location=None, tiles=None, zoom_start=16, control_scale=True, prefer_canvas=False)
    fmap.get_root().title = html_lib.escape(title, quote=True)
    fmap.add_child(E["Runtime"](_legend_config(net_keys, error_source)), name="walkcomfort_runtime")
    source = tile_source(tiles, attribution, max_zoom)
    if source is not None:
        fmap.add_child(E["Tiles"](source), name="walkcomfort_tiles")

    seen: set = set()
    lat_all: list = []
    lon_all: list = []
    predictors: set = set()
    bands_used: set = set()
    scheme_docs: dict[str, tuple[dict, str]] = {}
    for s in schemes or ():
        doc, where = _load_geojson(s, "scheme")
        meta = doc.get("walkcomfort") or {}
        name = _text(meta.get("scheme"))
        if not name:
            raise InputError("scheme file has no walkcomfort.scheme name", where=where,
                             fix='add "walkcomfort": {"scheme": "<name>", "label": "..."} at the top level')
        scheme_docs[name] = (doc, where)
    scene_doc = _load_geojson(scene, "scene")[0] if scene is not None else None

    def label_of(name: str) -> str:
        doc = scheme_docs.get(name)
        if doc is not None:
            return _text((doc[0].get("walkcomfort") or {}).get("label")) or name
        return _base_label(name)

    summary_of = _summary_lookup(summaries)
    first = True
    n_route_layers = 0
    shown_schemes: list[str] = []
    if predictions is not None:
        df = _check_predictions(predictions)
        deps = pd.to_datetime(df[DEPARTURE], utc=True)
        deps_ns = deps.dt.tz_convert(None).to_numpy("datetime64[ns]").astype("int64")
        many_days = deps.dt.tz_convert(zone).dt.date.nunique() > 1
        fmt = "%Y-%m-%d %H:%M" if many_days else "%H:%M"
        scheme_codes, schemes_order = pd.factorize(df[SCHEME].astype(object))
        for code, scheme_name in enumerate(str(v) for v in schemes_order):
            shown_schemes.append(scheme_name)
            in_scheme = scheme_codes == code
            sub = df[in_scheme]
            sub_deps = deps_ns[in_scheme]
            for dep in np.unique(sub_deps):
                group = sub[sub_deps == dep]
                dep_label = pd.Timestamp(int(dep), tz="UTC").tz_convert(zone).strftime(fmt)
                label = f"{label_of(scheme_name)} · departing {dep_label}"
                data = _route_payload(group, label, zone, str(timezone), int(decimals), float(simplify_m))
                data["summ"] = [summary_of(r, scheme_name, int(dep)) for r in data["routes"]]
                predictors.update(data["predictors"])
                bands_used.update(b for b in data["band"] if b >= 0)
                lat_all += [v for v in data["lat"] if v is not None]
                lon_all += [v for v in data["lon"] if v is not None]
                payload = E["Payload"](data)
                fmap.add_child(payload)
                if "comfort" in layers:
                    fmap.add_child(E["DataLayer"]("comfort", payload, _unique(label, seen), show=first))
                    n_route_layers += 1
                first = False
        # the other colourings are one switch each: they recolour whichever route layers are shown
        for kind, lab in (("utci", MODE_LABELS["utci"]), ("shade", MODE_LABELS["shade"])):
            if kind in layers and n_route_layers:
                fmap.add_child(E["DataLayer"](f"{kind}-mode", None, _unique(lab, seen), show=False))

    if scene_doc is not None and "scene" in layers:
        targets = shown_schemes or [None]
        for j, scheme_name in enumerate(targets):
            doc, where = scheme_docs.get(scheme_name, (None, "")) if scheme_name is not None else (None, "")
            feats = _scene_features(scene_doc, doc, where, int(decimals), float(simplify_m))
            for f in feats:
                if f["g"] == "c":
                    lat_all.append(f["c"][0])
                    lon_all.append(f["c"][1])
                else:
                    for poly in f["c"]:
                        lat_all += [p[0] for p in poly[0]]
                        lon_all += [p[1] for p in poly[0]]
            label = "Scene" if scheme_name is None else f"Scene · {label_of(scheme_name)}"
            payload = E["Payload"]({"label": label, "features": feats})
            fmap.add_child(payload)
            fmap.add_child(E["DataLayer"]("scene", payload, _unique(label, seen), show=(j == 0)))

    if net_docs and "network" in layers:
        for j, doc in enumerate(net_docs):
            name = str(doc["walkcomfort"]["scheme"])
            change = network_colour == "auto" and _is_change(doc)
            label = f"Streets · {label_of(name)} · " + ("change in comfortable hours" if change
                                                        else "comfortable hours")
            data = _network_payload(doc, label, change, net_keys, int(decimals))
            for line in data["c"]:
                lat_all += [p[0] for p in line]
                lon_all += [p[1] for p in line]
            payload = E["Payload"](data)
            fmap.add_child(payload)
            fmap.add_child(E["DataLayer"]("network-change" if change else "network", payload,
                                          _unique(label, seen), show=(j == 0 and predictions is None)))

    if walk_frames and ("votes" in layers or "errors" in layers):
        walk_data = [_walk_payload(w, i, str(timezone), int(decimals), float(simplify_m))
                     for i, w in enumerate(walk_frames)]
        for data in walk_data:
            lat_all += [p[0] for p in data["track"]]
            lon_all += [p[1] for p in data["track"]]
        if "votes" in layers:
            # one layer per walk while the list stays short; beyond that one layer for all walks
            groups = [[d] for d in walk_data] if len(walk_data) <= MAX_WALK_LAYERS else [walk_data]
            for i, group in enumerate(groups):
                payload = E["Payload"]({"walks": group})
                fmap.add_child(payload)
                label = f"Votes · {group[0]['walk']}" if len(group) == 1 else f"Votes · all {len(group)} walks"
                # over predicted routes only a single walk's votes are on at first (less clutter)
                fmap.add_child(E["DataLayer"]("votes", payload, _unique(label, seen),
                                              show=predictions is None or (i == 0 and len(group) == 1)))
        if "errors" in layers:
            cells = model_error_cells(walk_frames, error_cell_m)
            if len(cells):
                payload = E["Payload"]({
                    "cell_m": float(error_cell_m),
                    "cells": [{"c": [[round(a, decimals), round(b, decimals)] for a, b in r.corners],
                               "n": int(r.n_votes), "w": int(r.n_wrong),
                               "rate": round(float(r.error_rate), 3), "top": _text(r.top_confusion)} for r in cells.itertuples()]})
                fmap.add_child(payload)
                err_label = (f"Model errors, held-out walkers ({error_cell_m:g} m cells)" if error_source == "held-out"
                             else f"Model errors ({error_cell_m:g} m cells)")
                fmap.add_child(E["DataLayer"]("errors", payload, _unique(err_label, seen),
                                              show=predictions is None))

    folium, _, _ = _folium()
    n_overlays = sum(1 for ch in fmap._children.values() if getattr(ch, "overlay", False))
    folium.LayerControl(collapsed=n_overlays > 14, position="topright").add_to(fmap)
    if lat_all:
        bounds = [[min(lat_all), min(lon_all)], [max(lat_all), max(lon_all)]]
    else:
        bounds = None
    info = {"title": title, "predictors": sorted(predictors), "tiles": source is not None,
            "bands": sorted(bands_used)}
    fmap.add_child(E["Finish"](bounds, info), name="walkcomfort_finish")
    fmap._walkcomfort = True
    return fmap


# --------------------------------------------------------------------------------------
# writing
# --------------------------------------------------------------------------------------
def _numbered_elements(figure, fmap) -> list:
    """The figure, the map and everything under the map, in a fixed order.

    Rendered fragments (children of the figure's header/html/script, and the
    ``addTo`` helpers folium creates while rendering) are left out, so numbering the
    same map again gives the same ids and re-rendering replaces, never duplicates.
    """
    from folium.map import ElementAddToElement

    out, stack = [figure], [fmap]
    while stack:
        el = stack.pop()
        out.append(el)
        kids = [k for k in getattr(el, "_children", {}).values() if not isinstance(k, ElementAddToElement)]
        stack.extend(reversed(kids))
    return out


_INLINE_SCRIPT = re.compile(r"<script>(.*?)</script>", re.S)


def _csp(page: str, offline: bool, source: TileSource | None) -> str:
    hashes = sorted({"'sha256-" + base64.b64encode(hashlib.sha256(m.group(1).encode("utf-8")).digest()).decode()
                     + "'" for m in _INLINE_SCRIPT.finditer(page)})
    script_src = " ".join(hashes + ([] if offline else [_offline.CDN_BASE]))
    style_src = "'unsafe-inline'" + ("" if offline else " " + _offline.CDN_BASE)
    img = ["data:"]
    if source is not None:
        if source.folder is not None:
            img += ["'self'", "file:"]
        else:
            parts = urlsplit(source.url)
            host = parts.netloc.replace("{s}", "*")
            img.append(f"{parts.scheme}://{host}")
    if not offline:
        img.append(_offline.CDN_BASE)
    return ("default-src 'none'; "
            f"script-src {script_src}; style-src {style_src}; img-src {' '.join(img)}; "
            "font-src 'none'; connect-src 'none'; object-src 'none'; base-uri 'none'; form-action 'none'")


def render_map_html(fmap, *, offline: bool = False, out_dir: str | os.PathLike | None = None,
                    csp: bool = True) -> str:
    """The map as one HTML page (deterministic: element ids are numbered, not random).

    Parameters
    ----------
    fmap : folium.Map
        From :func:`route_map`.
    offline : bool
        Inline Leaflet instead of linking it from the CDN.
    out_dir : path, optional
        Folder the HTML will be written to (local tile folders are referenced relative to it).
    csp : bool
        Add the Content-Security-Policy meta element (default True).
    """
    if not getattr(fmap, "_walkcomfort", False):
        raise InputError("this is not a map built by walkcomfort.report.routemap.route_map",
                         where="write_map", fix="build the map with route_map(...)")
    figure = fmap.get_root()
    # the figure's header/html/script hold what the last render produced: start them afresh
    for part in (figure.header, figure.html, figure.script):
        for key in [k for k in part._children if k != "meta_http"]:
            del part._children[key]
    for i, el in enumerate(_numbered_elements(figure, fmap)):
        el._id = f"{i:04d}"
    source = None
    for child in fmap._children.values():
        if hasattr(child, "source") and hasattr(child, "out_dir"):
            child.out_dir = Path(out_dir).resolve() if out_dir is not None else None
            source = child.source
    figure.header.add_child(_branca_element(_offline.asset_tags(offline)), name="walkcomfort_leaflet")
    page = figure.render()
    # folium's viewport meta forbids zooming the page on phones; field readers need it
    page = page.replace(", maximum-scale=1.0, user-scalable=no", "")
    page = page.replace("<html>", '<html lang="en">', 1)
    if csp:
        policy = _csp(page, offline, source)
        page = page.replace("<head>", f'<head>\n<meta http-equiv="Content-Security-Policy" '
                                      f'content="{html_lib.escape(policy, quote=True)}">', 1)
    return page


def _branca_element(text: str):
    from branca.element import Element

    return Element(text)


def write_map(fmap, path: str | os.PathLike, *, offline: bool = False,
              size_budget_bytes: int | None = DEFAULT_SIZE_BUDGET_BYTES, csp: bool = True) -> Path:
    """Write the map atomically as one HTML file.

    Parameters
    ----------
    fmap : folium.Map
        From :func:`route_map`.
    path : path
        Output ``.html``.
    offline : bool
        True writes a self-contained file (Leaflet inlined; with no base map or a local
        tile folder it needs no network at all).
    size_budget_bytes : int or None
        Warn with :class:`MapSizeWarning` when the file is larger; None never warns.
    csp : bool
        Add the Content-Security-Policy meta element.

    Returns
    -------
    Path
        The written file.
    """
    path = Path(path)
    page = render_map_html(fmap, offline=offline, out_dir=path.parent, csp=csp)
    data = page.encode("utf-8")
    if size_budget_bytes is not None and len(data) > size_budget_bytes:
        warnings.warn(f"{path.name} is {len(data) / 1e6:.1f} MB, above the {size_budget_bytes / 1e6:.1f} MB "
                      "budget; raise simplify_m, lower decimals, or map fewer schemes/departures",
                      MapSizeWarning, stacklevel=2)
    atomic_write_text(path, page)
    return path


# --------------------------------------------------------------------------------------
# the page's own script and style (no user text in here; data come as JSON payloads)
# --------------------------------------------------------------------------------------
_RUNTIME_CSS = """
.wc-box{background:rgba(255,255,255,.94);padding:6px 9px;border-radius:4px;box-shadow:0 1px 4px rgba(0,0,0,.35);
 font:12px/1.35 system-ui,-apple-system,"Segoe UI",Roboto,"DejaVu Sans",sans-serif;color:#1b1b1b;max-width:290px}
.wc-box h3{font-size:13px;margin:0 0 3px}
.wc-legend .wc-sec{margin:4px 0 2px}
.wc-legend .wc-sec h4{font-size:12px;margin:4px 0 2px}
.wc-key{display:flex;align-items:center;gap:6px;margin:1px 0}
.wc-swatch{display:inline-block;width:22px;height:8px;border:1px solid #1f1f1f;border-radius:2px;flex:none}
.wc-swatch.wc-dot{width:10px;height:10px;border-radius:50%}
.wc-caution{font-size:10.5px;color:#444;margin-top:5px;border-top:1px solid #ccc;padding-top:4px}
.wc-popup{font:12px/1.35 system-ui,-apple-system,"Segoe UI",Roboto,"DejaVu Sans",sans-serif;min-width:190px}
.wc-popup .wc-title{font-weight:600;margin-bottom:3px}
.wc-popup .wc-sub{font-weight:600;margin-top:4px}
.wc-popup table{border-collapse:collapse}
.wc-popup th{text-align:left;font-weight:500;padding:1px 8px 1px 0;color:#444;vertical-align:top}
.wc-popup td{padding:1px 0}
.wc-popup ul{margin:2px 0 0 16px;padding:0}
.wc-note{white-space:pre-wrap;word-break:break-word;background:#f4f4f4;padding:3px 5px;margin-top:3px;border-radius:3px}
"""

_RUNTIME_JS = r"""
var WC = (function () {
  "use strict";
  var api = {cfg: null, map: null, registry: [], legend: null, modes: [], twins: [], syncing: false};

  function el(tag, cls, text) {
    var e = document.createElement(tag);
    if (cls) { e.className = cls; }
    if (text !== undefined && text !== null) { e.textContent = String(text); }
    return e;
  }
  function row(table, label, value) {
    var tr = el("tr");
    tr.appendChild(el("th", null, label));
    tr.appendChild(el("td", null, value));
    table.appendChild(tr);
  }
  function num(v, d, unit) {
    if (v === null || v === undefined) { return "\u2013"; }
    return v.toFixed(d) + (unit ? "\u00a0" + unit : "");
  }
  function pct(v) { return (v === null || v === undefined) ? "\u2013" : Math.round(100 * v) + "\u00a0%"; }
  function className(i) { return i >= 0 ? api.cfg.comfort[i].label : "no prediction"; }

  function keyOf(d, mode, i) {
    if (mode === "comfort") { return d.cls[i]; }
    if (mode === "utci") { return d.band[i]; }
    return d.sbin[i];
  }
  function colourOf(mode, key) {
    if (key === null || key === undefined || key < 0) { return api.cfg.missing; }
    if (mode === "comfort") { return api.cfg.comfort[key].colour; }
    if (mode === "utci") { return api.cfg.utci[key].colour; }
    return api.cfg.shade[key].colour;
  }
  function keyLabel(mode, key) {
    if (key === null || key === undefined || key < 0) { return "no value"; }
    if (mode === "comfort") { return api.cfg.comfort[key].label; }
    if (mode === "utci") { return api.cfg.utci[key].label; }
    return api.cfg.shade[key].label;
  }

  function nearestIndex(latlng, d, idx) {
    var best = idx[0], bestD = Infinity, k, dy, dx, c = Math.cos(latlng.lat * Math.PI / 180);
    for (k = 0; k < idx.length; k++) {
      dy = d.lat[idx[k]] - latlng.lat; dx = (d.lon[idx[k]] - latlng.lng) * c;
      if (dy * dy + dx * dx < bestD) { bestD = dy * dy + dx * dx; best = idx[k]; }
    }
    return best;
  }

  function routePopup(d, i) {
    var box = el("div", "wc-popup"), t = el("table"), k, r, ul, parts;
    box.appendChild(el("div", "wc-title", d.label));
    if (d.routes.length > 1 || d.routes[0]) { row(t, "Route", d.routes[d.route[i]]); }
    row(t, "Local time", d.t[i] + " (" + d.tz + ")");
    var s = d.summ ? d.summ[d.route[i]] : null;
    if (d.dist[i] !== null) { row(t, "Distance", num(d.dist[i], 0, "m")); }
    row(t, "Predicted", className(d.cls[i]));
    for (k = 0; k < api.cfg.comfort.length; k++) {
      if (d.p[k][i] !== null) { row(t, "\u2003p(" + api.cfg.comfort[k].label.toLowerCase() + ")", pct(d.p[k][i])); }
    }
    row(t, "UTCI", num(d.utci[i], 1, "\u00b0C") + (d.band[i] >= 0 ? " (" + api.cfg.utci[d.band[i]].name + ")" : ""));
    row(t, "Tmrt", num(d.tmrt[i], 1, "\u00b0C"));
    if (d.tair[i] !== null) { row(t, "Air temperature", num(d.tair[i], 1, "\u00b0C")); }
    row(t, "Shade", pct(d.shade[i]));
    box.appendChild(t);
    r = d.r[i];
    if (r !== undefined && r >= 0) {
      box.appendChild(el("div", null, "Top reasons:"));
      ul = el("ul");
      parts = d.reasons[r].split("; ");
      for (k = 0; k < parts.length; k++) { ul.appendChild(el("li", null, parts[k])); }
      box.appendChild(ul);
    }
    if (s) {
      var st = el("table");
      box.appendChild(el("div", "wc-sub", "Whole walk:"));
      if (s.walk_min !== null) { row(st, "Duration", num(s.walk_min, 0, "min") + (s.length_m !== null ? ", " + num(s.length_m, 0, "m") : "")); }
      row(st, "Expected time", pct(s.exp_share_comfortable) + " comfortable, " + pct(s.exp_share_neutral) + " neutral, " +
          pct(s.exp_share_uncomfortable) + " uncomfortable");
      if (s.shade_share !== null) { row(st, "In shade", pct(s.shade_share)); }
      if (s.peak_utci_c !== null) { row(st, "UTCI mean / peak", num(s.mean_utci_c, 1) + " / " + num(s.peak_utci_c, 1, "\u00b0C")); }
      if (s.heat_dose_cmin !== null) { row(st, "Heat dose", num(s.heat_dose_cmin, 0, "\u00b0C\u00b7min")); }
      box.appendChild(st);
    }
    return box;
  }

  // thinner lines when zoomed out, so a city-wide view stays readable
  function lineWeight() {
    var z = api.map ? api.map.getZoom() : 17;
    return z >= 17 ? 6 : (z >= 15 ? 4 : (z >= 13 ? 2.5 : 1.5));
  }
  function haloWeight(w) { return w >= 4 ? w + 3 : w + 1.5; }
  function restyleLines() {
    var w = lineWeight();
    api.registry.concat(api.twins).forEach(function (r) {
      if (!r.layer.wcLines) { return; }
      r.layer.wcLines.forEach(function (l) { l.setStyle({weight: w}); });
      r.layer.wcHalos.forEach(function (l) { l.setStyle({weight: haloWeight(w)}); });
    });
  }

  function routeLayer(d, mode, label) {
    var group = L.featureGroup(), n = d.lat.length, runs = [], cur = null, k, key;
    group.wcLines = [];
    group.wcHalos = [];
    for (k = 0; k + 1 < n; k++) {
      if (d.route[k + 1] !== d.route[k]) { cur = null; continue; }
      key = keyOf(d, mode, k);
      if (cur && cur.key === key && cur.idx[cur.idx.length - 1] === k) { cur.idx.push(k + 1); }
      else { cur = {key: key, idx: [k, k + 1]}; runs.push(cur); }
    }
    for (k = 0; k < n; k++) {   // a route of a single point still shows
      if ((k === 0 || d.route[k - 1] !== d.route[k]) && (k + 1 === n || d.route[k + 1] !== d.route[k])) {
        runs.push({key: keyOf(d, mode, k), idx: [k], single: true});
      }
    }
    runs.forEach(function (run) {
      var pts = run.idx.map(function (i) { return [d.lat[i], d.lon[i]]; });
      var colour = colourOf(mode, run.key), line;
      if (run.single) {
        line = L.circleMarker(pts[0], {radius: 6, color: api.cfg.halo, weight: 2, fillColor: colour, fillOpacity: 1});
      } else {
        var w = lineWeight();
        group.wcHalos.push(L.polyline(pts, {color: api.cfg.halo, weight: haloWeight(w), opacity: 0.55, interactive: false,
                                            lineCap: "round", lineJoin: "round"}).addTo(group));
        line = L.polyline(pts, {color: colour, weight: w, opacity: 1, lineCap: "round", lineJoin: "round",
                                className: "wc-seg wc-seg-" + mode});
        group.wcLines.push(line);
      }
      line.bindTooltip(el("span", null, label + " \u2014 " + keyLabel(mode, run.key)), {sticky: true});
      line.on("click", function (e) {
        var i = nearestIndex(e.latlng, d, run.idx);
        L.popup({maxWidth: 320}).setLatLng([d.lat[i], d.lon[i]]).setContent(routePopup(d, i)).openOn(api.map);
      });
      line.addTo(group);
    });
    group.wcRuns = runs.length;
    return group;
  }

  function scenePopup(f) {
    var box = el("div", "wc-popup"), t = el("table");
    var edits = {existing: "as in the scene", add: "added by the scheme", modify: "changed by the scheme",
                 remove: "removed by the scheme"};
    box.appendChild(el("div", "wc-title", f.k.charAt(0).toUpperCase() + f.k.slice(1)));
    row(t, "Id", f.id || "\u2013");
    row(t, "Edit", edits[f.e] || f.e);
    if (f.h !== null) { row(t, f.k === "canopy" ? "Underside" : "Height", num(f.h, 1, "m")); }
    if (f.tr !== null) { row(t, "Transmissivity", num(f.tr, 2)); }
    box.appendChild(t);
    return box;
  }

  function sceneLayer(d) {
    var group = L.featureGroup();
    d.features.forEach(function (f) {
      var edit = api.cfg.edits[f.e] || api.cfg.edits.existing, colour = api.cfg.scene[f.k] || api.cfg.missing;
      var style = {color: edit.outline, weight: edit.weight, dashArray: edit.dashArray, fillColor: colour,
                   fillOpacity: edit.fillOpacity, opacity: f.e === "remove" ? 0.7 : 1, pane: "wcScene",
                   className: "wc-scene wc-scene-" + f.e};
      var shape = f.g === "c" ? L.circle(f.c, Object.assign({radius: f.rad}, style)) : L.polygon(f.c, style);
      shape.bindPopup(scenePopup(f));
      shape.addTo(group);
    });
    return group;
  }

  function votePopup(d, i) {
    var v = d.votes, box = el("div", "wc-popup"), t = el("table"), k, note;
    box.appendChild(el("div", "wc-title", "Vote \u00b7 " + d.walk));
    if (d.participant) { row(t, "Participant", d.participant); }
    row(t, "Local time", v.t[i] + " (" + d.tz + ")");
    row(t, "Comfort vote", v.vote[i] >= 0 ? api.cfg.comfort[v.vote[i]].label : "\u2013");
    if (v.tsv[i] !== null) {
      row(t, "Thermal sensation", (v.tsv[i] > 0 ? "+" : "") + v.tsv[i] + " (" + (api.cfg.tsv[String(v.tsv[i])] || "?") + ")");
    }
    if (v.kind[i]) { row(t, "Kind", v.kind[i]); }
    if (v.pred[i] >= 0) {
      row(t, "Model", className(v.pred[i]) + (v.pred[i] === v.vote[i] ? " (agrees)" : " (disagrees)"));
      for (k = 0; k < api.cfg.comfort.length; k++) {
        if (v.p[k][i] !== null) { row(t, "\u2003p(" + api.cfg.comfort[k].label.toLowerCase() + ")", pct(v.p[k][i])); }
      }
    }
    if (v.utci[i] !== null) { row(t, "UTCI", num(v.utci[i], 1, "\u00b0C")); }
    box.appendChild(t);
    if (v.note[i]) {
      box.appendChild(el("div", null, "Note:"));
      note = el("div", "wc-note", v.note[i]);
      box.appendChild(note);
    }
    return box;
  }

  function votesLayer(all) {
    var group = L.featureGroup();
    all.walks.forEach(function (d) { addWalk(group, d); });
    return group;
  }

  function addWalk(group, d) {
    var v = d.votes, i;
    if (d.track.length > 1) {
      L.polyline(d.track, {color: "#555555", weight: 3, opacity: 0.8, dashArray: "4 4", className: "wc-track",
                           pane: "wcVotes"})
        .bindTooltip(el("span", null, "Track \u00b7 " + d.walk), {sticky: true}).addTo(group);
    }
    for (i = 0; i < v.lat.length; i++) {
      (function (i) {
        var fill = v.vote[i] >= 0 ? api.cfg.comfort[v.vote[i]].colour : api.cfg.missing;
        var ring = v.pred[i] >= 0 ? api.cfg.comfort[v.pred[i]].colour : api.cfg.halo;
        var m = L.circleMarker([v.lat[i], v.lon[i]], {radius: 7, color: ring, weight: 3, fillColor: fill,
                                                      fillOpacity: 1, className: "wc-vote", pane: "wcVotes"});
        var tip = el("span", null, "Vote: " + (v.vote[i] >= 0 ? api.cfg.comfort[v.vote[i]].label : "TSV only") +
                     (v.pred[i] >= 0 ? " \u00b7 model: " + className(v.pred[i]) : ""));
        m.bindTooltip(tip);
        m.bindPopup(function () { return votePopup(d, i); }, {maxWidth: 320});
        m.addTo(group);
      })(i);
    }
    return group;
  }

  function errorColour(rate) {
    var stops = api.cfg.errors, pos = Math.max(0, Math.min(1, rate)) * (stops.length - 1);
    return stops[Math.round(pos)].colour;
  }

  function errorsLayer(d) {
    var group = L.featureGroup();
    d.cells.forEach(function (c) {
      var box = el("div", "wc-popup"), t = el("table");
      box.appendChild(el("div", "wc-title", "Model vs votes (" + d.cell_m + " m cell)"));
      row(t, "Votes", String(c.n));
      row(t, "Model disagrees", c.w + " (" + pct(c.rate) + ")");
      if (c.top) { row(t, "Most common", c.top); }
      box.appendChild(t);
      L.polygon(c.c, {color: "#2b1846", weight: 1, fillColor: errorColour(c.rate),
                       fillOpacity: Math.min(0.85, 0.3 + 0.1 * c.n), className: "wc-error-cell", pane: "wcErrors"})
        .bindPopup(box).addTo(group);
    });
    return group;
  }

  function networkPopup(d, i) {
    var box = el("div", "wc-popup"), t = el("table"), v = d.v, h = function (c) { return num(v[c][i], 1, "h"); };
    box.appendChild(el("div", "wc-title", d.name[i] || d.id[i]));
    box.appendChild(el("div", null, d.label));
    row(t, "Segment", d.id[i]);
    row(t, "Hours counted", h("hours_h"));
    row(t, "Comfortable", h("comfortable_h") + " (expected " + h("expected_comfortable_h") + ")");
    row(t, "Uncomfortable", h("uncomfortable_h"));
    row(t, "UTCI above 32 \u00b0C", h("heat_stress_h"));
    row(t, "UTCI mean / max", num(v.mean_utci_c[i], 1) + " / " + num(v.max_utci_c[i], 1, "\u00b0C"));
    row(t, "Shade (mean)", pct(v.mean_shade_frac[i]));
    box.appendChild(t);
    if (d.change) {
      var ct = el("table"), sign = function (x, unit) { return (x > 0 ? "+" : "") + num(x, 1, unit); };
      box.appendChild(el("div", "wc-sub", "Against the base:"));
      row(ct, "Comfortable", sign(v.d_comfortable_h[i], "h"));
      row(ct, "Hours turned comfortable", h("gained_comfortable_h"));
      row(ct, "Hours no longer comfortable", h("lost_comfortable_h"));
      row(ct, "UTCI above 32 \u00b0C", sign(v.d_heat_stress_h[i], "h"));
      row(ct, "Mean UTCI", sign(v.d_mean_utci_c[i], "\u00b0C"));
      box.appendChild(ct);
    }
    return box;
  }

  function networkLayer(d) {
    var group = L.featureGroup(), keys = d.change ? api.cfg.network_change : api.cfg.network;
    group.wcLines = [];
    group.wcHalos = [];
    d.c.forEach(function (pts, i) {
      var w = lineWeight();
      // a dark casing keeps pale colours readable on a light base map
      group.wcHalos.push(L.polyline(pts, {color: api.cfg.halo, weight: haloWeight(w), opacity: 0.55, interactive: false,
                                          lineCap: "round", pane: "wcNetwork"}).addTo(group));
      var line = L.polyline(pts, {color: keys[d.k[i]].colour, weight: w, opacity: 1,
                                  lineCap: "round", className: "wc-street wc-street-k" + d.k[i], pane: "wcNetwork"});
      line.bindTooltip(el("span", null, (d.name[i] || d.id[i]) + " \u2014 " + keys[d.k[i]].label), {sticky: true});
      line.bindPopup(function () { return networkPopup(d, i); }, {maxWidth: 320});
      group.wcLines.push(line);
      line.addTo(group);
    });
    return group;
  }

  function key(colour, text, dot) {
    var k = el("div", "wc-key"), s = el("span", "wc-swatch" + (dot ? " wc-dot" : ""));
    s.style.background = colour;
    k.appendChild(s);
    k.appendChild(el("span", null, text));
    return k;
  }

  function section(kind, title, items) {
    var s = el("div", "wc-sec");
    s.setAttribute("data-kind", kind);
    s.appendChild(el("h4", null, title));
    items.forEach(function (it) { s.appendChild(it); });
    return s;
  }

  function buildLegend(info) {
    var box = el("div", "wc-box wc-legend"), c = api.cfg;
    var bands = c.utci.filter(function (x, i) { return !info.bands || info.bands.indexOf(i) >= 0; });
    box.appendChild(el("h3", null, "Legend"));
    box.appendChild(section("comfort", "Predicted comfort", c.comfort.map(function (x) { return key(x.colour, x.label); })));
    box.appendChild(section("utci", "UTCI assessment scale (bands on the map)", bands.map(function (x) {
      return key(x.colour, x.label + " (" + x.range + ")"); })));
    box.appendChild(section("shade", "Direct-sun shade", c.shade.map(function (x) { return key(x.colour, x.label); })));
    box.appendChild(section("votes", "Comfort votes", c.comfort.map(function (x) {
      return key(x.colour, x.label, true); }).concat([el("div", null, "fill = vote, ring = model's class")])));
    if (c.network.length) {
      box.appendChild(section("network", "Streets: comfortable hours", c.network.map(function (x) {
        return key(x.colour, x.label); }).concat([el("div", "wc-caution", c.network_note)])));
    }
    if (c.network_change.length) {
      box.appendChild(section("network-change", "Streets: change against the base", c.network_change.map(function (x) {
        return key(x.colour, x.label); }).concat([el("div", "wc-caution", c.network_note)])));
    }
    box.appendChild(section("errors", c.errors_title, c.errors.map(function (x) { return key(x.colour, x.label); })
      .concat([el("div", "wc-caution", c.errors_note)])));
    box.appendChild(section("scene", "Scene", [key(c.scene.building, "building"), key(c.scene.tree, "tree crown"),
      key(c.scene.canopy, "canopy"), el("div", null, c.edit_legend)]));
    box.appendChild(el("div", "wc-caution", c.caution));
    return box;
  }

  // a colouring switch that is on shows a recoloured twin of every route layer that is on
  function syncModes() {
    if (api.syncing) { return; }
    api.syncing = true;
    api.registry.forEach(function (r) {
      if (r.kind !== "comfort") { return; }
      api.modes.forEach(function (m) {
        var want = api.map.hasLayer(r.layer) && api.map.hasLayer(m), twin = r.layer.wcTwins[m.wcMode];
        if (want && !twin) {
          twin = r.layer.wcTwins[m.wcMode] = routeLayer(r.layer.wcData, m.wcMode, r.layer.wcData.label);
          twin.wcTop = true;
          api.twins.push({kind: m.wcMode, label: r.label, layer: twin});
        }
        if (want && !api.map.hasLayer(twin)) { twin.addTo(api.map); restyleLines(); }
        if (!want && twin && api.map.hasLayer(twin)) { api.map.removeLayer(twin); }
      });
    });
    api.syncing = false;
  }

  function refreshLegend() {
    if (!api.legend) { return; }
    var on = {}, secs, i;
    api.registry.concat(api.twins).forEach(function (r) { if (api.map.hasLayer(r.layer)) { on[r.kind] = true; } });
    if (on.utci || on.shade) { on.comfort = false; }  // the routes show the other colouring now
    secs = api.legend.querySelectorAll(".wc-sec");
    for (i = 0; i < secs.length; i++) {
      secs[i].style.display = on[secs[i].getAttribute("data-kind")] ? "" : "none";
    }
  }

  api.init = function (map, cfg) {
    api.map = map;
    api.cfg = cfg;
    // fixed drawing order whatever is switched on when: scene < streets < error cells < routes < votes
    map.createPane("wcScene").style.zIndex = 350;
    map.createPane("wcNetwork").style.zIndex = 360;
    map.createPane("wcErrors").style.zIndex = 380;
    map.createPane("wcVotes").style.zIndex = 450;
    window.walkcomfortMap = map;
    window.walkcomfortRegistry = api.registry;
  };

  api.layer = function (kind, data, label) {
    var layer;
    if (kind === "utci-mode" || kind === "shade-mode") {
      layer = L.layerGroup();
      layer.wcMode = kind.split("-")[0];
      api.modes.push(layer);
    }
    else if (kind === "comfort") {
      layer = routeLayer(data, kind, data.label);
      layer.wcData = data;
      layer.wcTwins = {};
    }
    else if (kind === "scene") { layer = sceneLayer(data); }
    else if (kind === "votes") { layer = votesLayer(data); }
    else if (kind === "network" || kind === "network-change") { layer = networkLayer(data); }
    else { layer = errorsLayer(data); }
    layer.wcTop = true;
    api.registry.push({kind: kind, label: label, layer: layer});
    return layer;
  };

  api.finish = function (bounds, info) {
    var map = api.map, Legend, Title;
    Legend = L.Control.extend({options: {position: "bottomleft"}, onAdd: function () {
      var box = buildLegend(info);
      L.DomEvent.disableClickPropagation(box);
      L.DomEvent.disableScrollPropagation(box);
      api.legend = box;
      return box;
    }});
    Title = L.Control.extend({options: {position: "topleft"}, onAdd: function () {
      var box = el("div", "wc-box wc-title-box");
      box.appendChild(el("h3", null, info.title));
      if (info.predictors.length) { box.appendChild(el("div", null, "Predicted by: " + info.predictors.join(", "))); }
      box.appendChild(el("div", null, "Click a route, vote or feature for details."));
      L.DomEvent.disableClickPropagation(box);
      return box;
    }});
    new Title().addTo(map);
    new Legend().addTo(map);
    // react once per whole layer (its parts fire layeradd first, while it is still being drawn)
    map.on("layeradd layerremove", function (e) { if (e.layer.wcTop) { syncModes(); refreshLegend(); } });
    map.on("zoomend", restyleLines);
    refreshLegend();
    if (bounds) {
      // keep the data clear of the legend on the left, where the map is wide enough for both
      var lw = api.legend ? api.legend.offsetWidth : 0, mw = map.getSize().x;
      var left = lw && mw > 2.2 * lw ? lw + 24 : 24;
      map.fitBounds(bounds, {paddingTopLeft: [left, 24], paddingBottomRight: [24, 24], maxZoom: 18});
    }
    else { map.setView([0, 0], 2); }
    restyleLines();
    map.attributionControl.setPrefix("Leaflet");
    document.documentElement.setAttribute("data-walkcomfort-ready", "1");
  };

  return api;
})();
"""
