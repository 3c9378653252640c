"""Shade schemes: named sets of edits to the base scene, stored as GeoJSON.

File format (``walkcomfort-scheme``; the contract in DEVELOPERS.md)::

    {"type": "FeatureCollection",
     "walkcomfort": {"scheme": "elm-row", "label": "A row of elms on Mill Street"},
     "features": [
       {"type": "Feature", "geometry": {"type": "Point", "coordinates": [lon, lat]},
        "properties": {"edit": "add", "id": "elm-1", "kind": "tree", "height_m": 9,
                       "crown_base_m": 3, "crown_radius_m": 3.5, "transmissivity": 0.2}},
       {"type": "Feature", "geometry": null,
        "properties": {"edit": "remove", "target": "tree-017"}},
       {"type": "Feature", "geometry": null,
        "properties": {"edit": "modify", "target": "bldg-04", "height_m": 18}}]}

* ``add`` carries a complete scene feature (its ``kind`` and the properties the scene
  format asks of that kind); ``id`` is optional (default ``<scheme>-<n>``) but must not
  clash with a scene id.
* ``remove`` names the ``target`` scene id; geometry may be null.
* ``modify`` names the ``target`` and carries only what changes: properties, and a
  geometry when the outline changes (null keeps the old one). ``id`` cannot change.

Each target is edited at most once per scheme. Geometry must be valid (shapely's
``is_valid``). A scheme with no edits leaves the scene untouched: :func:`apply_scheme`
returns the very same scene, so "no edits" gives results identical to the base.
"""

from __future__ import annotations

import copy
import json
import os
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from walkcomfort.environment.geo import require_lonlat
from walkcomfort.errors import InputError

EDITS = ("add", "remove", "modify")
KINDS = ("building", "tree", "canopy")
BASE = "base"
_NAME_RE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.-]{0,63}$")


@dataclass(frozen=True)
class Scheme:
    """A named set of scene edits.

    Attributes
    ----------
    name : str
        Short identifier (letters, digits, ``_.-``); ``"base"`` is the unedited scene.
    label : str
        Human-readable title.
    edits : tuple of dict
        GeoJSON features with ``properties.edit``.
    source : str
        File it came from (for messages).
    """

    name: str
    label: str = ""
    edits: tuple = field(default_factory=tuple)
    source: str = ""

    @classmethod
    def base(cls) -> Scheme:
        """The base scene, no edits."""
        return cls(BASE, "base scene (no edits)", (), "")

    @property
    def is_empty(self) -> bool:
        return len(self.edits) == 0

    def to_geojson(self) -> dict:
        return {"type": "FeatureCollection", "walkcomfort": {"scheme": self.name, "label": self.label},
                "features": [copy.deepcopy(e) for e in self.edits]}


def _where(source, i) -> str:
    return f"{source or 'scheme'} feature {i}"


def scheme_from_geojson(obj: dict, source: str = "", name: str | None = None) -> Scheme:
    """Validate a scheme's structure (without a scene) and build a :class:`Scheme`."""
    if not isinstance(obj, dict) or obj.get("type") != "FeatureCollection":
        raise InputError("a scheme must be a GeoJSON FeatureCollection", where=source or "scheme",
                         fix="see the scheme format in docs/formats/scheme.md")
    meta = obj.get("walkcomfort") or {}
    name = _scheme_name(obj, meta, source, name)
    edits = []
    seen_targets: dict[str, int] = {}
    seen_ids: dict[str, int] = {}
    for i, feat in enumerate(obj.get("features") or []):
        loc = _where(source, i)
        props = (feat or {}).get("properties") or {}
        edit = props.get("edit")
        if edit not in EDITS:
            raise InputError(f"edit {edit!r} is not known; allowed {list(EDITS)}", where=loc,
                             fix='set properties.edit to "add", "remove" or "modify"')
        geom = feat.get("geometry")
        if edit in ("remove", "modify"):
            _check_target_edit(edit, props, geom, loc, i, seen_targets)
        else:
            _check_added(props, geom, loc, i, seen_ids)
        if geom is not None:
            _check_geometry(geom, loc)
        edits.append(copy.deepcopy(feat))
    return Scheme(str(name), str(meta.get("label") or name), tuple(edits), source)


def _scheme_name(obj: dict, meta: dict, source: str, name: str | None) -> str:
    name = name or meta.get("scheme") or (Path(source).stem if source else None)
    if not name or not _NAME_RE.match(str(name)):
        raise InputError(f"scheme name {name!r} is not allowed (letters, digits, '_', '.', '-'; up to 64)",
                         where=source or "scheme", fix='set "walkcomfort": {"scheme": "tree-row"}')
    if str(name) == BASE and obj.get("features"):
        raise InputError("the name 'base' is kept for the unedited scene", where=source or "scheme",
                         fix="give the scheme another name")
    return str(name)


def _check_target_edit(edit: str, props: dict, geom, loc: str, i: int, seen_targets: dict[str, int]) -> None:
    target = props.get("target")
    if not isinstance(target, str) or not target:
        raise InputError(f"a '{edit}' edit needs properties.target (a scene id), got {target!r}", where=loc,
                         fix="name the scene feature's id in target")
    if target in seen_targets:
        raise InputError(f"target {target!r} is edited twice (also feature {seen_targets[target]})",
                         where=loc, fix="merge the edits of one feature into one")
    seen_targets[target] = i
    if edit != "modify":
        return
    if "id" in props and props["id"] != target:
        raise InputError(f"a modify edit cannot change the id ({target!r} -> {props['id']!r})", where=loc,
                         fix="remove the old feature and add a new one instead")
    if "kind" in props:
        raise InputError("a modify edit cannot change the kind", where=loc,
                         fix="remove the old feature and add a new one instead")
    if geom is None and len(set(props) - {"edit", "target", "id"}) == 0:
        raise InputError(f"the modify edit of {target!r} changes nothing", where=loc,
                         fix="give the properties or geometry to change, or drop the edit")


def _check_added(props: dict, geom, loc: str, i: int, seen_ids: dict[str, int]) -> None:
    kind = props.get("kind")
    if kind not in KINDS:
        raise InputError(f"added feature kind {kind!r} is not known; allowed {list(KINDS)}", where=loc,
                         fix="set properties.kind")
    if geom is None:
        raise InputError("an added feature needs a geometry", where=loc, fix="give its Point or Polygon")
    fid = props.get("id")
    if fid is not None:
        if fid in seen_ids:
            raise InputError(f"id {fid!r} is added twice (also feature {seen_ids[fid]})", where=loc,
                             fix="give each added feature its own id")
        seen_ids[str(fid)] = i


def _check_geometry(geom: dict, loc: str) -> None:
    from shapely.geometry import shape
    from shapely.validation import explain_validity

    try:
        g = shape(geom)
    except Exception as exc:  # shapely raises several kinds for malformed GeoJSON
        raise InputError(f"geometry is not valid GeoJSON ({' '.join(str(exc).split())})", where=loc,
                         fix="write the geometry as GeoJSON Point/Polygon/MultiPolygon") from None
    if g.is_empty or not g.is_valid:
        raise InputError(f"geometry is invalid ({'empty' if g.is_empty else explain_validity(g)})", where=loc,
                         fix="repair the outline (no self-intersections, closed rings)")
    require_lonlat(g, loc, fix="write coordinates as longitude, latitude in degrees")


def load_scheme(path: str | os.PathLike) -> Scheme:
    """Read and structurally validate a scheme GeoJSON file (see module docs)."""
    path = Path(path)
    if not path.exists():
        raise InputError("scheme file does not exist", where=path, fix="check the path")
    try:
        obj = json.loads(path.read_text(encoding="utf-8"))
    except json.JSONDecodeError as exc:
        raise InputError(f"not valid JSON ({exc.msg})", where=f"{path}:{exc.lineno}",
                         fix="check the file is GeoJSON") from None
    return scheme_from_geojson(obj, source=str(path))


def _scene_geojson(scene) -> dict:
    return scene.to_geojson()  # already a deep copy (Scene.to_geojson)


def validate_scheme(scene, scheme: Scheme) -> None:
    """Check a scheme against a scene: targets exist, added ids are new."""
    ids = set(scene.ids)
    for i, feat in enumerate(scheme.edits):
        props = feat.get("properties") or {}
        loc = _where(scheme.source or scheme.name, i)
        if props["edit"] in ("remove", "modify"):
            if props["target"] not in ids:
                close = sorted(x for x in ids if x and str(x).split("-")[0] == str(props["target"]).split("-")[0])[:5]
                raise InputError(f"target {props['target']!r} is not a feature of the scene"
                                 + (f" (similar ids: {close})" if close else ""), where=loc,
                                 fix="use an id from the scene GeoJSON")
        elif props.get("id") is not None and props["id"] in ids:
            raise InputError(f"added id {props['id']!r} already exists in the scene", where=loc,
                             fix="give the new feature an id of its own")


def apply_scheme(scene, scheme: Scheme):
    """The scene after a scheme's edits, as a new Scene (the input is not changed).

    Parameters
    ----------
    scene : walkcomfort.environment.scene.Scene
        The base scene.
    scheme : Scheme
        The edits. An empty scheme returns ``scene`` itself.

    Returns
    -------
    Scene
    """
    if scheme.is_empty:
        return scene
    validate_scheme(scene, scheme)
    from walkcomfort.environment.scene import Scene

    gj = _scene_geojson(scene)
    feats = gj.get("features", [])
    pos = {(f.get("properties") or {}).get("id"): k for k, f in enumerate(feats)}
    removed = set()
    added = []
    checks: list = []
    n_add = 0
    for i, feat in enumerate(scheme.edits):
        props = dict(feat.get("properties") or {})
        edit = props.pop("edit")
        loc = _where(scheme.source or scheme.name, i)
        if edit == "remove":
            removed.add(pos[props["target"]])
        elif edit == "modify":
            k = pos[props.pop("target")]
            new = copy.deepcopy(feats[k])
            new["properties"].update({kk: v for kk, v in props.items() if kk != "id"})
            if feat.get("geometry") is not None:
                new["geometry"] = copy.deepcopy(feat["geometry"])
            checks.append((new, loc))
            feats[k] = new
        else:
            n_add += 1
            props.setdefault("id", f"{scheme.name}-{n_add}")
            new = {"type": "Feature", "geometry": copy.deepcopy(feat["geometry"]), "properties": props}
            checks.append((new, loc))
            added.append(new)
    _check_features(checks, gj)
    gj["features"] = [f for k, f in enumerate(feats) if k not in removed] + added
    return Scene.from_geojson(gj, source=f"scene + scheme {scheme.name}")


def _check_features(checks: list, gj: dict) -> None:
    """Validate the edited features through the scene's own rules, naming the scheme feature.

    All at once first (fast); only when that fails, one by one to find the culprit.
    """
    from walkcomfort.environment.scene import Scene

    if not checks:
        return
    head = {k: v for k, v in gj.items() if k != "features"}
    try:
        Scene.from_geojson({**head, "features": [f for f, _ in checks]})
        return
    except InputError:
        pass
    for feat, loc in checks:
        try:
            Scene.from_geojson({**head, "features": [feat]})
        except InputError as exc:
            raise InputError(f"the edited feature is not a valid scene feature ({exc.what})", where=loc,
                             fix=exc.fix or "give the properties the scene format asks for") from None


# --------------------------------------------------------------------------- inventory
def _area_m2(geom: dict, transformer) -> float:
    from shapely.geometry import shape
    from shapely.ops import transform

    g = shape(geom)
    return float(transform(transformer.transform, g).area)


def scheme_inventory(scene, scheme: Scheme) -> dict:
    """What a scheme adds and removes, for cost-effectiveness.

    Returns
    -------
    dict
        ``trees_added``, ``trees_removed`` (counts), ``crown_m2_added`` (net crown plan
        area of trees: π r² for point trees, polygon area otherwise) [m²],
        ``canopy_m2_added`` (net canopy plan area) [m²], ``shade_m2_added`` (their sum)
        [m²], ``buildings_changed`` (added + removed + modified), ``edits_n`` and its split
        ``added_n, modified_n, removed_n``.
    """
    from pyproj import Transformer

    gj = _scene_geojson(scene)
    by_id = {(f.get("properties") or {}).get("id"): f for f in gj.get("features", [])}
    crs = getattr(scene, "crs", None)
    if crs is None:
        from walkcomfort.routes.geometry import utm_crs_for

        site = (gj.get("walkcomfort") or {}).get("site") or {}
        crs = utm_crs_for(site.get("lon", 0.0), site.get("lat", 0.0))
    tr = Transformer.from_crs("EPSG:4326", crs, always_xy=True)

    def plan_area(feat) -> float:
        p = feat.get("properties") or {}
        g = feat.get("geometry") or {}
        if g.get("type") == "Point":
            r = float(p.get("crown_radius_m", 0.0) or 0.0)
            return float(np.pi * r * r)
        return _area_m2(g, tr)

    out = {"trees_added": 0, "trees_removed": 0, "crown_m2_added": 0.0, "canopy_m2_added": 0.0,
           "buildings_changed": 0, "edits_n": len(scheme.edits),
           "added_n": sum(1 for e in scheme.edits if e["properties"]["edit"] == "add"),
           "modified_n": sum(1 for e in scheme.edits if e["properties"]["edit"] == "modify"),
           "removed_n": sum(1 for e in scheme.edits if e["properties"]["edit"] == "remove")}
    for feat in scheme.edits:
        props = feat.get("properties") or {}
        edit = props["edit"]
        if edit == "add":
            kind = props.get("kind")
            a = plan_area(feat)
            if kind == "tree":
                out["trees_added"] += 1
                out["crown_m2_added"] += a
            elif kind == "canopy":
                out["canopy_m2_added"] += a
            else:
                out["buildings_changed"] += 1
            continue
        old = by_id.get(props.get("target"))
        if old is None:
            continue
        kind = (old.get("properties") or {}).get("kind")
        a_old = plan_area(old)
        if edit == "remove":
            if kind == "tree":
                out["trees_removed"] += 1
                out["crown_m2_added"] -= a_old
            elif kind == "canopy":
                out["canopy_m2_added"] -= a_old
            else:
                out["buildings_changed"] += 1
        else:
            new = copy.deepcopy(old)
            new["properties"].update({k: v for k, v in props.items() if k not in ("edit", "target")})
            if feat.get("geometry") is not None:
                new["geometry"] = feat["geometry"]
            delta = plan_area(new) - a_old
            if kind == "tree":
                out["crown_m2_added"] += delta
            elif kind == "canopy":
                out["canopy_m2_added"] += delta
            else:
                out["buildings_changed"] += 1
    out["crown_m2_added"] = round(out["crown_m2_added"], 2)
    out["canopy_m2_added"] = round(out["canopy_m2_added"], 2)
    out["shade_m2_added"] = round(out["crown_m2_added"] + out["canopy_m2_added"], 2)
    return out
