"""Street segments on the map (layers of :func:`walkcomfort.network.summaries.network_layer`).

Streets follow the page's scheme picker and colouring: expected comfortable hours (the
sum over the covered hours of the probability of *comfortable*, never a count of hours
where it is the most likely class), the UTCI band of the mean UTCI, the mean shade, or —
for a scheme other than the base — the change against the base in expected comfortable
hours, hours above 32 °C UTCI, or mean UTCI. Every scheme shares one scale, so switching
schemes compares like with like.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from walkcomfort import columns as C
from walkcomfort.errors import InputError
from walkcomfort.report import palette as P
from walkcomfort.report.map.inputs import as_text, load_geojson, shade_bins
from walkcomfort.report.map.routelayer import change_classes

NETWORK_BINS = 5
NETWORK_VALUES = ("hours_h", "comfortable_h", "expected_comfortable_h", "uncomfortable_h", "heat_stress_h",
                  "mean_utci_c", "max_utci_c", "mean_shade_frac")
NETWORK_CHANGES = ("d_expected_comfortable_h", "d_comfortable_h", "d_heat_stress_h", "d_mean_utci_c")
#: change column per measure, signed so that positive = better for the walker
CHANGE_OF = {"comfort": ("d_expected_comfortable_h", 1.0), "heat": ("d_heat_stress_h", -1.0),
             "utci": ("d_mean_utci_c", -1.0)}
#: a segment's change below this is "no change" [h, h, °C] (the layer files keep 2 decimals)
NO_CHANGE = {"comfort": 0.05, "heat": 0.05, "utci": 0.5}


def network_docs(network) -> list[dict]:
    """The network layer documents, checked."""
    docs = []
    for i, layer in enumerate(network or ()):
        doc, where = load_geojson(layer, "network layer")
        meta = doc.get("walkcomfort") or {}
        if not as_text(meta.get("scheme")) or not isinstance(doc.get("features"), list):
            raise InputError("not a network map layer (no walkcomfort.scheme or no features)", where=where or f"layer {i}",
                             fix="pass network_layer_<scheme>.geojson written by 'walkcomfort network'")
        docs.append(doc)
    return docs


def fmt_h(v: float) -> str:
    """Hours for a legend: one decimal below 10 h, none above; trailing zeros dropped."""
    return f"{v:.1f}".rstrip("0").rstrip(".") if v < 10 else f"{v:.0f}"


def _prop(props: dict, name: str) -> float:
    v = props.get(name)
    try:
        v = float(v)
    except (TypeError, ValueError):
        return math.nan
    return v if math.isfinite(v) else math.nan


def network_scale(docs: Sequence[dict]) -> dict:
    """Shared scale: the longest time range of any segment, and each measure's largest change."""
    hours = [_prop(f.get("properties") or {}, "hours_h") for d in docs for f in d["features"]]
    top = max((h for h in hours if math.isfinite(h)), default=0.0) or 1.0
    out = {"max_hours": float(top), "change": {}, "interval": has_interval(docs)}
    for m, (name, _) in CHANGE_OF.items():
        vals = [abs(_prop(f.get("properties") or {}, name)) for d in docs for f in d["features"]]
        big = max((v for v in vals if math.isfinite(v)), default=0.0)
        out["change"][m] = {"none": NO_CHANGE[m], "strong": max(2 * NO_CHANGE[m], big / 2), "max": round(big, 2)}
    return out


def hours_keys(scale: dict) -> list[dict]:
    """Legend keys of expected comfortable hours (equal bins from 0 to the longest time range)."""
    edges = np.linspace(0.0, scale["max_hours"], NETWORK_BINS + 1)
    return [{"label": f"{fmt_h(edges[i])}–{fmt_h(edges[i + 1])} h expected comfortable",
             "colour": P.NETWORK_HOURS_STOPS[i]} for i in range(NETWORK_BINS)]


def _hours_bin(v: float, top: float) -> int:
    if not math.isfinite(v):
        return -1
    return int(min(NETWORK_BINS - 1, max(0, math.floor(v / top * NETWORK_BINS))))


def _band(v: float) -> int:
    if not math.isfinite(v):
        return -1
    return next(i for i, (lo, hi, _) in enumerate(C.UTCI_BANDS) if lo < v <= hi)


def _within_interval(props: list[dict], name: str) -> np.ndarray | None:
    """Segments whose ``<name>_lo … <name>_hi`` interval includes 0 (None when the layer has no interval)."""
    if not props or f"{name}_lo" not in props[0] or f"{name}_hi" not in props[0]:
        return None
    lo = np.array([_prop(p, f"{name}_lo") for p in props], dtype=float)
    hi = np.array([_prop(p, f"{name}_hi") for p in props], dtype=float)
    return np.isfinite(lo) & np.isfinite(hi) & (lo <= 0) & (hi >= 0)


def has_interval(docs: Sequence[dict], name: str = "d_expected_comfortable_h") -> bool:
    """True when a change layer carries the model's interval of ``name``."""
    return any(f"{name}_lo" in ((d["features"] or [{}])[0].get("properties") or {}) for d in docs)


def network_payload(doc: dict, scale: dict, decimals: int) -> dict:
    """Columnar data of one scheme's street layer: lines, values, and a class per colouring."""
    feats = [f for f in doc["features"] if (f.get("geometry") or {}).get("type") == "LineString"]
    props = [f.get("properties") or {} for f in feats]
    change = bool(props) and "d_comfortable_h" in props[0]
    cols = NETWORK_VALUES + (NETWORK_CHANGES if change else ())
    vals = {c: [_prop(p, c) for p in props] for c in cols}
    shade = np.array(vals["mean_shade_frac"], dtype=float)
    out = {
        "scheme": str(doc["walkcomfort"]["scheme"]), "change": change,
        "id": [as_text(p.get(C.SEGMENT_ID)) or "" for p in props],
        "name": [as_text(p.get("name")) or "" for p in props],
        "c": [[[round(float(b), decimals), round(float(a), decimals)] for a, b, *_ in f["geometry"]["coordinates"]]
              for f in feats],
        "v": {c: [None if not math.isfinite(x) else round(x, 2) for x in v] for c, v in vals.items()},
        "k": {"comfort": [_hours_bin(v, scale["max_hours"]) for v in vals["expected_comfortable_h"]],
              "utci": [_band(v) for v in vals["mean_utci_c"]],
              "shade": shade_bins(shade).tolist()},
        "dk": {},
    }
    if change:
        for m, (name, sign) in CHANGE_OF.items():
            s = scale["change"][m]
            classes = change_classes(sign * np.array(vals[name], dtype=float), s["none"], s["strong"])
            within = _within_interval(props, name)
            if within is not None:  # an interval from the model: a change it cannot resolve is "within model error"
                classes[within & (classes >= 0)] = 2
            out["dk"][m] = classes.tolist()
    return out

