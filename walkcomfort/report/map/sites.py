"""Placement sites on the map: the advisor's chosen sites numbered in order, runner-ups faded."""

from __future__ import annotations

import json
from pathlib import Path

from walkcomfort.errors import InputError
from walkcomfort.report.map.inputs import as_text, num


def sites_payload(sites, decimals: int) -> list[dict]:
    """Display list of the ``sites.geojson`` that ``walkcomfort advise`` writes.

    Parameters
    ----------
    sites : path or dict
        FeatureCollection of Points with ``status`` (``chosen`` | ``runner-up``), ``rank``
        (chosen), ``site_id``, ``intervention``, ``marginal_gain``; top-level
        ``walkcomfort.unit`` names the gain.
    decimals : int
        Coordinate decimals kept.

    Returns
    -------
    list of dict
        ``c`` [lat, lon], ``r`` rank or None, ``s`` status, ``id``, ``iv``, ``g`` gain, ``u`` unit.
    """
    where = "sites"
    if not isinstance(sites, dict):
        where = str(sites)
        try:
            sites = json.loads(Path(sites).read_text(encoding="utf-8"))
        except FileNotFoundError:
            raise InputError("placement-site file does not exist", where=where, fix="check the path") from None
        except json.JSONDecodeError as exc:
            raise InputError(f"not valid JSON ({exc.msg})", where=where,
                             fix="give the sites.geojson that walkcomfort advise wrote") from None
    unit = as_text((sites.get("walkcomfort") or {}).get("unit")) or "gain"
    out = []
    for i, feat in enumerate(sites.get("features") or []):
        geom = (feat or {}).get("geometry") or {}
        props = (feat or {}).get("properties") or {}
        status = props.get("status")
        if geom.get("type") != "Point" or status not in ("chosen", "runner-up"):
            raise InputError(f"feature {i} is not a placement site (a Point with status chosen or runner-up)",
                             where=f"{where} feature {i}", fix="give the sites.geojson that walkcomfort advise wrote")
        lon, lat = geom["coordinates"][:2]
        rank = props.get("rank")
        out.append({"c": [round(float(lat), decimals), round(float(lon), decimals)],
                    "r": int(rank) if status == "chosen" and rank is not None else None, "s": status,
                    "id": as_text(props.get("site_id")) or "", "iv": as_text(props.get("intervention")) or "",
                    "g": num([props.get("marginal_gain")], 2)[0], "u": unit})
    return out
