"""The scene under the routes as each scheme draws it: buildings, tree crowns, canopies; edits marked."""

from __future__ import annotations

import numpy as np

from walkcomfort.errors import InputError
from walkcomfort.report import palette as P
from walkcomfort.report.map.geometry import ring, simplify_geometry
from walkcomfort.report.map.inputs import as_text, num


def scene_features(scene_gj: dict, scheme_gj: dict | None, where: str, decimals: int,
                    simplify_m: float) -> list[dict]:
    """Display list of scene features as drawn under one scheme (edit marks kept)."""
    base = {}
    for i, feat in enumerate(scene_gj.get("features", [])):
        props = dict(feat.get("properties") or {})
        fid = as_text(props.get("id")) or f"feature {i}"
        base[fid] = {"geometry": feat.get("geometry"), "props": props, "edit": "existing"}
    if scheme_gj is not None:
        for i, feat in enumerate(scheme_gj.get("features", [])):
            props = dict(feat.get("properties") or {})
            edit = props.get("edit")
            if edit not in ("add", "remove", "modify"):
                raise InputError(f"scheme feature {i} has edit={edit!r}; allowed add, remove, modify",
                                 where=f"{where} feature {i}", fix="set properties.edit")
            if edit == "add":
                fid = as_text(props.get("id")) or f"added {i}"
                base[f"+{fid}"] = {"geometry": feat.get("geometry"), "props": props, "edit": "add"}
                continue
            target = as_text(props.get("target"))
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
        kind = as_text(props.get("kind")) or "building"
        item = {
            "k": kind if kind in P.SCENE_COLOURS else "building",
            "e": entry["edit"],
            "id": as_text(props.get("id")) or "",
            "h": num([props.get("height_m", np.nan)], 1)[0],
            "tr": num([props.get("transmissivity", np.nan)], 2)[0],
        }
        gtype = geom.get("type")
        if gtype == "Point":
            lon, lat = geom["coordinates"][:2]
            item.update(g="c", c=[round(float(lat), decimals), round(float(lon), decimals)],
                        rad=num([props.get("crown_radius_m", 2.0)], 1)[0] or 2.0)
        elif gtype in ("Polygon", "MultiPolygon"):
            geom = simplify_geometry(geom, simplify_m)
            polys = [geom["coordinates"]] if geom["type"] == "Polygon" else list(geom["coordinates"])
            item.update(g="p", c=[[ring(r, decimals) for r in poly] for poly in polys])
        else:
            continue  # lines and other kinds are not drawn in the scene layer
        out.append(item)
    return out
