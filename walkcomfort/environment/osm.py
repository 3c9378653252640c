"""Reading a local OpenStreetMap extract into plain elements (no network access).

Three inputs, recognised from their content:

* ``.osm.pbf`` and ``.osm`` XML (optionally ``.bz2``/``.gz``), read with pyosmium
  (``osmium``, the Python bindings of libosmium). Closed ways become polygons here, from
  their node locations, so that a broken ring is *reported* instead of silently skipped;
  multipolygon relations are assembled by libosmium's area assembler, and a relation it
  cannot assemble is reported too.
* a GeoJSON export of OSM data (tags either flat in ``properties`` or under
  ``properties.tags``; the OSM id in ``@id``, ``id`` or the feature's ``id``).

Only elements that can matter for shade are kept: buildings, trees, tree rows, roofs,
shelters, canopies and covered ways (:func:`relevant`).
"""

from __future__ import annotations

import bz2
import gzip
import json
import os
from dataclasses import dataclass, field
from pathlib import Path

import shapely
from shapely.geometry import shape

from walkcomfort.errors import InputError

#: Tag keys whose presence makes an element worth reading.
KEYS = ("building", "natural", "amenity", "man_made", "covered", "highway", "leisure", "building:part")


@dataclass
class OsmElement:
    """One OSM object: its id (``way/123``), tags and WGS84 geometry (or why it has none)."""

    osm_id: str
    tags: dict
    geometry: object | None = None  # shapely, lon/lat
    problem: str | None = None       # why there is no (usable) geometry
    node_trees: int = 0              # ways: how many of its nodes are tagged natural=tree


@dataclass
class OsmData:
    """Elements read from an extract and what the reader noticed."""

    elements: list[OsmElement] = field(default_factory=list)
    source_format: str = ""
    notes: list[str] = field(default_factory=list)


def relevant(tags: dict) -> bool:
    """Whether an element's tags can describe something that shades a walker."""
    b = tags.get("building")
    if b is not None and b != "no":
        return True
    if tags.get("natural") in ("tree", "tree_row"):
        return True
    if tags.get("amenity") == "shelter" or tags.get("man_made") == "canopy":
        return True
    return tags.get("covered") in ("yes", "arcade", "colonnade")


def sniff_osm(path: str | os.PathLike) -> str:
    """``"pbf"``, ``"xml"`` or ``"geojson"`` from the file's first bytes (compressed XML included)."""
    path = Path(path)
    with open(path, "rb") as fh:
        head = fh.read(64)
    opener = bz2.open if head[:3] == b"BZh" else gzip.open if head[:2] == b"\x1f\x8b" else None
    if opener is not None:
        with opener(path) as fh:
            head = fh.read(64)
    if b"OSMHeader" in head:
        return "pbf"
    text = head.lstrip(b"\xef\xbb\xbf").lstrip()
    if text.startswith(b"<"):
        return "xml"
    if text.startswith(b"{"):
        return "geojson"
    raise InputError("the content is neither OSM PBF, OSM XML nor GeoJSON", where=path,
                     fix="give a .osm.pbf or .osm extract of your area, or a GeoJSON export of OSM data")


def read_osm(path: str | os.PathLike) -> OsmData:
    """Read the shade-relevant elements of an extract (see the module docstring)."""
    path = Path(path)
    if not path.is_file():
        raise InputError("OpenStreetMap extract not found", where=path, fix="give the path of a local extract")
    kind = sniff_osm(path)
    if kind == "geojson":
        return read_osm_geojson(path)
    return read_osm_file(path, kind)


def _ring_polygon(coords: list) -> tuple[object | None, str | None]:
    if len(coords) < 4:
        return None, f"ring of {len(coords)} nodes (a polygon needs at least 4, first = last)"
    return shapely.Polygon(coords), None


def read_osm_file(path: Path, kind: str) -> OsmData:
    """PBF or XML through pyosmium (imported lazily: only this verb needs it)."""
    try:
        import osmium
    except ImportError:  # pragma: no cover - osmium is a declared dependency
        raise InputError("reading OSM extracts needs pyosmium", where=path, fix="pip install osmium") from None
    suffixes = "".join(path.suffixes).lower()
    fmt = ("osm.bz2" if suffixes.endswith(".bz2") else "osm.gz" if suffixes.endswith(".gz") else "osm") \
        if kind == "xml" else "pbf"
    data = OsmData(source_format=f"OSM {kind.upper()}")
    tree_nodes: set[int] = set()
    building_relations: dict[int, dict] = {}
    assembled: set[int] = set()
    wkb = osmium.geom.WKBFactory()
    try:
        processor = (osmium.FileProcessor(osmium.io.File(str(path), fmt)).with_locations()
                     .with_areas(osmium.filter.KeyFilter(*KEYS)).with_filter(osmium.filter.KeyFilter(*KEYS)))
        for obj in processor:
            tags = dict(obj.tags)
            if not relevant(tags):
                continue
            if obj.is_node():
                if tags.get("natural") == "tree":
                    tree_nodes.add(obj.id)
                loc = obj.location
                geom = shapely.Point(loc.lon, loc.lat) if loc.valid() else None
                data.elements.append(OsmElement(f"node/{obj.id}", tags, geom,
                                                None if geom is not None else "node without a location"))
            elif obj.is_way():
                data.elements.append(_way_element(obj, tags, tree_nodes))
            elif obj.is_relation():
                if tags.get("type") == "multipolygon":
                    building_relations[obj.id] = tags
            elif obj.is_area() and not obj.from_way():
                rid = obj.orig_id()
                assembled.add(rid)
                geom = shapely.from_wkb(wkb.create_multipolygon(obj))
                data.elements.append(OsmElement(f"relation/{rid}", tags, geom))
    except RuntimeError as exc:  # libosmium reports damaged input this way
        raise InputError(f"cannot read the extract ({exc})", where=path,
                         fix="check the file is a complete .osm.pbf / .osm download") from None
    for rid, tags in building_relations.items():
        if rid not in assembled:
            data.elements.append(OsmElement(f"relation/{rid}", tags, None,
                                            "multipolygon could not be assembled (members missing from the "
                                            "extract or rings that do not close)"))
    return data


def _way_element(way, tags: dict, tree_nodes: set[int]) -> OsmElement:
    coords, missing = [], 0
    node_trees = 0
    for n in way.nodes:
        if n.ref in tree_nodes:
            node_trees += 1
        if n.location.valid():
            coords.append((n.location.lon, n.location.lat))
        else:
            missing += 1
    oid = f"way/{way.id}"
    if missing:
        return OsmElement(oid, tags, None, f"{missing} of its nodes are missing from the extract (cut at its edge?)")
    linear = tags.get("natural") == "tree_row" or (tags.get("covered") and "highway" in tags
                                                   and tags.get("area") != "yes")
    if linear:
        if len(coords) < 2:
            return OsmElement(oid, tags, None, "line with fewer than 2 nodes")
        return OsmElement(oid, tags, shapely.LineString(coords), node_trees=node_trees)
    if not way.is_closed():
        return OsmElement(oid, tags, None, "outline is not closed (first node != last node)")
    geom, problem = _ring_polygon(coords)
    return OsmElement(oid, tags, geom, problem)


def read_osm_geojson(path: Path) -> OsmData:
    """A GeoJSON export of OSM data (e.g. from an OSM query tool) in WGS84 lon/lat."""
    try:
        obj = json.loads(path.read_text(encoding="utf-8"))
    except (json.JSONDecodeError, UnicodeDecodeError) as exc:
        raise InputError(f"not valid JSON ({exc})", where=path, fix="give a GeoJSON export") from None
    feats = obj.get("features") if isinstance(obj, dict) else None
    if not isinstance(feats, list):
        raise InputError("not a GeoJSON FeatureCollection", where=path, fix="export the OSM data as GeoJSON")
    data = OsmData(source_format="GeoJSON")
    for i, f in enumerate(feats):
        props = (f or {}).get("properties") or {}
        tags = props.get("tags") if isinstance(props.get("tags"), dict) else props
        tags = {str(k): str(v) for k, v in tags.items() if v is not None and not isinstance(v, (dict, list))}
        if not relevant(tags):
            continue
        oid = str(props.get("@id") or props.get("id") or f.get("id") or f"feature/{i}")
        try:
            geom = shape(f.get("geometry")) if f.get("geometry") else None
        except Exception as exc:  # shapely raises several types for malformed GeoJSON
            data.elements.append(OsmElement(oid, tags, None, f"geometry cannot be read ({exc})"))
            continue
        data.elements.append(OsmElement(oid, tags, geom, None if geom is not None else "no geometry"))
    return data
