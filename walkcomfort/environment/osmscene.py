"""A scene (buildings, trees, canopies) from OpenStreetMap elements, with a report.

Rules, each documented so a designer can check what the scene assumes:

Buildings (``building=*`` except ``no``, ``roof``): the footprint, extruded to

1. ``height`` (metres; ``"12 m"``, ``"40'"`` and ``"40 ft"`` are understood), else
2. ``building:levels`` × :attr:`SceneRules.storey_height_m` (+ ``roof:levels`` × the
   same), else
3. :attr:`SceneRules.default_height_m`.

Each building records ``height_source`` (``height`` | ``building:levels`` | ``default``)
and the report counts them. Storey height 3 m and the 9 m default (three storeys) are
common practice for a first estimate, not survey values: check them against the town.

Trees: ``natural=tree`` points with ``height`` (else :attr:`SceneRules.tree_height_m`),
crown diameter ``diameter_crown`` (else :attr:`SceneRules.crown_diameter_m`), crown base
at :attr:`SceneRules.crown_base_frac` of the height, leaf-on transmissivity
:attr:`SceneRules.tree_transmissivity` (0.2: a dense deciduous summer crown passes about
a fifth of the beam — from memory). ``natural=tree_row`` lines become trees every
``spacing`` metres when the row is tagged with it (else
:attr:`SceneRules.tree_row_spacing_m`, 8 m, common practice for street trees), starting
half a spacing from the row's first node; a row whose nodes are already mapped as trees
adds none.

Canopies (opaque, transmissivity 0): ``building=roof``, ``amenity=shelter`` (without a
building tag) and ``man_made=canopy`` outlines, their underside at ``min_height`` (else
:attr:`SceneRules.canopy_height_m`); ways tagged ``covered=yes|arcade|colonnade`` (an
arcade or covered walk) buffered to half their ``width`` (else
:attr:`SceneRules.covered_width_m`) on each side.

Invalid polygons are repaired with :func:`shapely.make_valid`, keeping only the polygonal
parts; an outline whose repair leaves no area is dropped and counted. Nothing stops at
the first bad element: every building ends in the scene or in the report with a reason.
"""

from __future__ import annotations

import math
import re
from collections import Counter
from dataclasses import asdict, dataclass, field

import numpy as np
import shapely

from walkcomfort.environment.geo import LocalFrame
from walkcomfort.environment.osm import OsmData, OsmElement
from walkcomfort.environment.scene import Scene, feature_to_geojson
from walkcomfort.errors import InputError


@dataclass(frozen=True)
class SceneRules:
    """Defaults used where OpenStreetMap says nothing (all in metres or fractions)."""

    storey_height_m: float = 3.0
    default_height_m: float = 9.0
    tree_height_m: float = 10.0
    crown_diameter_m: float = 6.0
    crown_base_frac: float = 0.35
    tree_transmissivity: float = 0.2
    tree_row_spacing_m: float = 8.0
    canopy_height_m: float = 3.0
    covered_width_m: float = 3.0


@dataclass
class SceneReport:
    """What became of every element: counts, height sources, repairs and drops."""

    counts: Counter = field(default_factory=Counter)
    height_sources: Counter = field(default_factory=Counter)
    repaired: list = field(default_factory=list)
    dropped: list = field(default_factory=list)

    def drop(self, el: OsmElement, kind: str, reason: str) -> None:
        self.dropped.append({"osm_id": el.osm_id, "kind": kind, "reason": reason})
        self.counts[f"{kind}s_dropped"] += 1

    def as_dict(self, rules: SceneRules) -> dict:
        return {"counts": dict(sorted(self.counts.items())), "height_sources": dict(sorted(self.height_sources.items())),
                "rules": asdict(rules), "repaired": self.repaired, "dropped": self.dropped}


_NUMBER = re.compile(r"^\s*(-?\d+(?:[.,]\d+)?)\s*(m|metres|meters|ft|feet|'|)\s*$", re.I)


def parse_length_m(text) -> float | None:
    """An OSM length (``"12"``, ``"12.5 m"``, ``"40 ft"``, ``"40'"``) in metres, or None when unreadable."""
    if text is None:
        return None
    m = _NUMBER.match(str(text))
    if not m:
        return None
    v = float(m.group(1).replace(",", "."))
    if m.group(2).lower() in ("ft", "feet", "'"):
        v *= 0.3048
    return v if math.isfinite(v) and v > 0 else None


def parse_levels(text) -> float | None:
    """``building:levels`` (``"4"``, ``"3;5"`` -> the largest) as a number of storeys, or None."""
    if text is None:
        return None
    vals = []
    for part in str(text).replace(",", ";").split(";"):
        try:
            vals.append(float(part))
        except ValueError:
            continue
    v = max(vals) if vals else None
    return v if v is not None and v > 0 else None


def building_height(tags: dict, rules: SceneRules) -> tuple[float, str]:
    """Height [m] and where it came from (``height`` | ``building:levels`` | ``default``)."""
    h = parse_length_m(tags.get("height"))
    if h is not None:
        return h, "height"
    levels = parse_levels(tags.get("building:levels"))
    if levels is not None:
        roof = parse_levels(tags.get("roof:levels")) or 0.0
        return (levels + roof) * rules.storey_height_m, "building:levels"
    return rules.default_height_m, "default"


def _polygonal(geom) -> tuple[object | None, str | None]:
    """A valid polygonal geometry from ``geom`` (make_valid, polygonal parts only) and what was done."""
    if geom.geom_type not in ("Polygon", "MultiPolygon"):
        return None, f"a {geom.geom_type} where an outline was expected"
    if shapely.is_valid(geom):
        return (geom, None) if not geom.is_empty and geom.area > 0 else (None, "outline has no area")
    reason = shapely.is_valid_reason(geom)
    fixed = shapely.make_valid(geom)
    parts = [p for p in shapely.get_parts(fixed) if p.geom_type in ("Polygon", "MultiPolygon") and p.area > 0]
    if not parts:
        return None, f"repair of '{reason}' left no area"
    out = shapely.union_all(parts) if len(parts) > 1 else parts[0]
    return out, f"repaired: {reason}"


def _kind(tags: dict) -> str | None:
    b = tags.get("building")
    if b is not None and b not in ("no", "roof"):
        return "building"  # a walled shelter (building=shed + amenity=shelter) is a building
    if b == "roof" or tags.get("amenity") == "shelter" or tags.get("man_made") == "canopy":
        return "canopy"
    if tags.get("natural") == "tree":
        return "tree"
    if tags.get("natural") == "tree_row":
        return "tree_row"
    if tags.get("covered") in ("yes", "arcade", "colonnade"):
        return "covered"
    return None


class SceneBuilder:
    """Turns OSM elements into scene features in a local metric frame, recording everything."""

    def __init__(self, rules: SceneRules, frame: LocalFrame, clip_local=None):
        self.rules = rules
        self.frame = frame
        self.clip = clip_local  # shapely polygon in local metres, or None
        self.items: list[tuple[object, dict]] = []
        self._pre: dict = {}  # id(element) -> (local geometry, valid with area, inside the clip)
        self.report = SceneReport()

    # --- geometry helpers
    def _local(self, geom):
        return shapely.transform(geom, lambda xy: np.column_stack(self.frame.project(xy[:, 0], xy[:, 1])))

    def prepare(self, elements) -> None:
        """Project, validate and clip-test every element's geometry at once (one pyproj call, vectorised GEOS)."""
        els = [e for e in elements if e.geometry is not None]
        if not els:
            return
        geoms = np.empty(len(els), dtype=object)
        geoms[:] = [e.geometry for e in els]
        local = self._local(geoms)
        usable = shapely.is_valid(geoms) & (shapely.area(geoms) > 0)
        inside = np.ones(len(els), bool) if self.clip is None else shapely.intersects(self.clip, local)
        self._pre = {id(e): (loc, ok, ins) for e, loc, ok, ins in zip(els, local, usable, inside, strict=True)}

    def _prepared_outline(self, el: OsmElement):
        """(local geometry, inside) of a valid polygonal element prepared in :meth:`prepare`, or None."""
        pre = self._pre.get(id(el))
        if pre is None or not pre[1] or el.geometry.geom_type not in ("Polygon", "MultiPolygon"):
            return None
        return pre[0], pre[2]

    def _inside(self, geom_local) -> bool:
        return self.clip is None or self.clip.intersects(geom_local)

    def add(self, el: OsmElement) -> None:
        kind = _kind(el.tags)
        if kind is None:
            return
        self.report.counts[f"{kind}s_read"] += 1
        if el.geometry is None:
            self.report.drop(el, kind, el.problem or "no geometry")
            return
        getattr(self, f"_add_{kind}")(el)

    def _outline(self, el: OsmElement, kind: str):
        pre = self._prepared_outline(el)
        if pre is not None:
            if not pre[1]:
                self.report.drop(el, kind, "outside the clip area")
                return None
            return pre[0]
        geom, note = _polygonal(el.geometry)
        if geom is None:
            self.report.drop(el, kind, note)
            return None
        if note:
            self.report.repaired.append({"osm_id": el.osm_id, "kind": kind, "action": note})
            self.report.counts[f"{kind}s_repaired"] += 1
        local = self._local(geom)
        if not self._inside(local):
            self.report.drop(el, kind, "outside the clip area")
            return None
        return local

    def _add_building(self, el: OsmElement) -> None:
        local = self._outline(el, "building")
        if local is None:
            return
        h, src = building_height(el.tags, self.rules)
        self.report.height_sources[src] += 1
        self.report.counts["buildings"] += 1
        self.items.append((local, {"id": f"b-{_slug(el.osm_id)}", "kind": "building", "height_m": round(h, 2),
                                   "height_source": src, "osm_id": el.osm_id}))

    def _add_canopy(self, el: OsmElement) -> None:
        local = self._outline(el, "canopy")
        if local is None:
            return
        self._canopy(local, el)

    def _canopy(self, local, el: OsmElement) -> None:
        under = parse_length_m(el.tags.get("min_height"))
        src = "min_height"
        if under is None:
            under, src = self.rules.canopy_height_m, "default"
        self.report.counts["canopies"] += 1
        self.items.append((local, {"id": f"c-{_slug(el.osm_id)}", "kind": "canopy", "height_m": round(under, 2),
                                   "transmissivity": 0.0, "height_source": src, "osm_id": el.osm_id}))

    def _add_covered(self, el: OsmElement) -> None:
        if el.geometry.geom_type in ("Polygon", "MultiPolygon"):
            self._add_canopy(el)
            return
        if el.geometry.geom_type not in ("LineString", "MultiLineString"):
            self.report.drop(el, "covered", f"a {el.geometry.geom_type} has no outline to cover")
            return
        width = parse_length_m(el.tags.get("width")) or self.rules.covered_width_m
        local = shapely.buffer(self._local(el.geometry), width / 2.0, cap_style="flat")
        if not self._inside(local):
            self.report.drop(el, "covered", "outside the clip area")
            return
        self._canopy(local, el)

    def _tree_props(self, tags: dict, ident: str, osm_id: str) -> dict:
        r = self.rules
        h = parse_length_m(tags.get("height")) or r.tree_height_m
        d = parse_length_m(tags.get("diameter_crown")) or r.crown_diameter_m
        return {"id": ident, "kind": "tree", "height_m": round(h, 2), "crown_radius_m": round(d / 2.0, 2),
                "crown_base_m": round(r.crown_base_frac * h, 2), "transmissivity": r.tree_transmissivity,
                "osm_id": osm_id, "crown_source": "diameter_crown" if tags.get("diameter_crown") else "default"}

    def _add_tree(self, el: OsmElement) -> None:
        if el.geometry.geom_type != "Point":
            geom, _ = _polygonal(el.geometry)
            if geom is None:
                self.report.drop(el, "tree", f"a {el.geometry.geom_type} tree is not understood")
                return
            el = OsmElement(el.osm_id, el.tags, geom.centroid)
        pre = self._pre.get(id(el))
        if pre is not None:
            local, inside = pre[0], bool(pre[2])
        else:
            local = self._local(el.geometry)
            inside = self._inside(local)
        if not inside:
            self.report.drop(el, "tree", "outside the clip area")
            return
        self.report.counts["trees"] += 1
        self.items.append((local, self._tree_props(el.tags, f"t-{_slug(el.osm_id)}", el.osm_id)))

    def _add_tree_row(self, el: OsmElement) -> None:
        if el.node_trees >= 2:
            self.report.counts["tree_rows_mapped_as_trees"] += 1
            return
        line = self._local(el.geometry)
        if line.geom_type != "LineString":
            self.report.drop(el, "tree_row", f"a {line.geom_type} tree row is not understood")
            return
        spacing = parse_length_m(el.tags.get("spacing")) or self.rules.tree_row_spacing_m
        n = max(int(line.length // spacing), 1)
        added = 0
        for k in range(n):
            p = line.interpolate(min((k + 0.5) * spacing, line.length))
            if not self._inside(p):
                continue
            added += 1
            self.items.append((p, self._tree_props(el.tags, f"t-{_slug(el.osm_id)}-{k + 1}", el.osm_id)))
        self.report.counts["tree_row_trees"] += added
        if added == 0:
            self.report.drop(el, "tree_row", "outside the clip area")


def _slug(osm_id: str) -> str:
    return osm_id.replace("/", "")


def build_scene(osm: OsmData, rules: SceneRules | None = None, clip_lonlat=None,
                site: tuple[float, float] | None = None) -> tuple[Scene, dict]:
    """The scene and its report from read OSM elements.

    Parameters
    ----------
    osm : OsmData
        From :func:`walkcomfort.environment.osm.read_osm`.
    rules : SceneRules, optional
        Defaults where OSM is silent.
    clip_lonlat : shapely Polygon, optional
        Keep only features that touch this area (WGS84 lon/lat); features are kept whole.
    site : (lat, lon), optional
        The local frame's origin; default the centre of the clip area or of the elements.

    Returns
    -------
    (Scene, dict)
        The validated scene (site recorded) and the report (``counts``, ``height_sources``,
        ``rules``, ``repaired``, ``dropped``).
    """
    rules = rules or SceneRules()
    if site is None:
        site = _centre(osm, clip_lonlat)
    frame = LocalFrame(site[1], site[0])
    clip_local = None
    if clip_lonlat is not None:
        clip_local = shapely.transform(clip_lonlat, lambda xy: np.column_stack(frame.project(xy[:, 0], xy[:, 1])))
    builder = SceneBuilder(rules, frame, clip_local)
    builder.prepare(osm.elements)
    for el in osm.elements:
        builder.add(el)
    scene = _to_scene(builder, frame, site)
    report = builder.report.as_dict(rules)
    report["source_format"] = osm.source_format
    report["site"] = {"lat": site[0], "lon": site[1]}
    return scene, report


def _centre(osm: OsmData, clip) -> tuple[float, float]:
    if clip is not None:
        c = clip.centroid
        return float(c.y), float(c.x)
    geoms = [e.geometry for e in osm.elements if e.geometry is not None]
    if not geoms:
        raise InputError("the extract holds no buildings, trees or canopies", fix="check the extract covers the area")
    b = shapely.total_bounds(np.array(geoms, dtype=object))
    return float((b[1] + b[3]) / 2), float((b[0] + b[2]) / 2)


def _to_scene(builder: SceneBuilder, frame: LocalFrame, site: tuple[float, float]) -> Scene:
    """Local items -> a validated lon/lat scene; an outline made invalid by the round trip is repaired again."""
    items = builder.items
    geoms = np.empty(len(items), dtype=object)
    geoms[:] = [g for g, _ in items]
    if len(items):
        geoms = shapely.transform(geoms, lambda xy: np.column_stack(frame.unproject(xy[:, 0], xy[:, 1])))
    feats = []
    for g, (_, props) in zip(geoms, items, strict=True):
        if g.geom_type != "Point" and not shapely.is_valid(g):
            g, _note = _polygonal(g)
            if g is None:
                el = OsmElement(props["osm_id"], {}, None)
                builder.report.drop(el, props["kind"], "outline degenerate after projection")
                continue
        feats.append(feature_to_geojson(g, props))
    return Scene(feats, site={"lat": float(site[0]), "lon": float(site[1]), "elev_m": 0.0})


def parse_bbox(text: str) -> shapely.Polygon:
    """``"W,S,E,N"`` in degrees -> a lon/lat box (refused when not a WGS84 box)."""
    try:
        w, s, e, n = (float(v) for v in str(text).split(","))
    except ValueError:
        raise InputError(f"bounding box {text!r} is not four numbers", where="--bbox",
                         fix="write --bbox WEST,SOUTH,EAST,NORTH in degrees, e.g. 24.93,60.16,24.96,60.18") from None
    if not (-180 <= w < e <= 180 and -90 <= s < n <= 90):
        raise InputError(f"bounding box {text!r} is not west < east, south < north in WGS84 degrees", where="--bbox",
                         fix="write --bbox WEST,SOUTH,EAST,NORTH (longitudes first)")
    return shapely.box(w, s, e, n)


def read_lines_lonlat(path) -> list:
    """Route lines (GeoJSON LineString/MultiLineString features, or GPX tracks and routes) as lon/lat lines."""
    from pathlib import Path

    path = Path(path)
    if not path.is_file():
        raise InputError("route file not found", where=path, fix="give a GeoJSON or GPX route")
    text = path.read_text(encoding="utf-8-sig")
    if text.lstrip().startswith("<"):
        import gpxpy

        try:
            gpx = gpxpy.parse(text)
        except Exception as exc:  # gpxpy raises several kinds on malformed XML
            raise InputError(f"not a readable GPX file ({exc})", where=path, fix="give a GPX or GeoJSON route") from None
        runs = [[(p.longitude, p.latitude) for p in seg.points] for t in gpx.tracks for seg in t.segments]
        runs += [[(p.longitude, p.latitude) for p in r.points] for r in gpx.routes]
        lines = [shapely.LineString(r) for r in runs if len(r) >= 2]
    else:
        import json

        from shapely.geometry import shape

        try:
            obj = json.loads(text)
        except json.JSONDecodeError as exc:
            raise InputError(f"not valid JSON ({exc.msg})", where=f"{path}:{exc.lineno}", fix="give GeoJSON") from None
        feats = obj.get("features", [obj]) if isinstance(obj, dict) else []
        geoms = [shape(f["geometry"]) for f in feats if isinstance(f, dict) and f.get("geometry")]
        lines = [g for g in geoms if g.geom_type in ("LineString", "MultiLineString")]
    if not lines:
        raise InputError("no line to buffer (no LineString feature or GPX track)", where=path,
                         fix="give the route as a GeoJSON LineString or a GPX track")
    return lines


def clip_around(lines, buffer_m: float) -> shapely.Polygon:
    """A lon/lat area within ``buffer_m`` metres of route lines (buffered in the local UTM frame)."""
    if not buffer_m > 0:
        raise InputError(f"buffer {buffer_m!r} m is not positive", where="--buffer", fix="give e.g. --buffer 150")
    merged = shapely.union_all(np.array(lines, dtype=object))
    c = merged.centroid
    frame = LocalFrame(c.x, c.y)
    local = shapely.transform(merged, lambda xy: np.column_stack(frame.project(xy[:, 0], xy[:, 1])))
    area = shapely.buffer(local, buffer_m)
    return shapely.transform(area, lambda xy: np.column_stack(frame.unproject(xy[:, 0], xy[:, 1])))
