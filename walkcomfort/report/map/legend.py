"""What the page's legend and popups say: colours with their plain labels and units."""

from __future__ import annotations

import math

from walkcomfort import columns as C
from walkcomfort.report import palette as P
from walkcomfort.report.map.inputs import SHADE_BINS

CAUTION = ("Estimates for discussing design options, not a guarantee of heat safety. "
           "Follow local heat-health guidance, occupational-health advice and codes; "
           "design decisions rest with licensed professionals.")
ERRORS_NOTE = ("Cells group the votes of recorded walks; if those walks trained the model, these are "
               "in-sample errors and look smaller than on new walkers.")
ERRORS_NOTE_HELD_OUT = ("Cells group the votes of recorded walks, each predicted by a model that never saw "
                        "that walker (the fit's walker-grouped cross-validation): what to expect on new walkers.")
NETWORK_NOTE = ("Each street hour is a short walk along the segment with no exposure before it; "
                "estimates for comparing schemes, not heat safety.")

#: how each difference measure is named, its unit, and what "better" means
MEASURES = {
    "comfort": {"title": "Expected comfortable minutes", "short": "expected comfortable minutes",
                "point": "chance of feeling comfortable",
                "unit": "points", "better": "more comfortable", "worse": "less comfortable",
                "street": "expected comfortable hours", "street_unit": "h"},
    "heat": {"title": "Heat dose", "short": "heat dose", "point": "heat-dose rate, UTCI above 26 °C", "unit": "°C",
             "better": "less heat", "worse": "more heat",
             "street": "hours with UTCI above 32 °C", "street_unit": "h"},
    "utci": {"title": "UTCI", "short": "UTCI", "point": "UTCI", "unit": "°C", "better": "cooler", "worse": "hotter",
             "street": "mean UTCI", "street_unit": "°C"},
}


def _n(v: float) -> str:
    """Two significant figures below 10, whole numbers above (no trailing zeros)."""
    if abs(v) >= 10:
        return f"{v:.0f}"
    return f"{v:.2g}" if abs(v) < 1 else f"{v:.1f}".rstrip("0").rstrip(".")


def change_keys(measure: str, scale: dict, unit: str, none_label: str) -> list[dict]:
    """Five legend keys of a difference colouring, from much worse to much better."""
    m = MEASURES[measure]
    lo, hi = _n(scale["none"]), _n(scale["strong"])
    labels = (f"{m['worse']}: by {hi} {unit} or more", f"{m['worse']}: by {lo}–{hi} {unit}",
              f"{none_label} (under {lo} {unit})",
              f"{m['better']}: by {lo}–{hi} {unit}", f"{m['better']}: by {hi} {unit} or more")
    return [{"label": lab, "colour": P.DIFF_STOPS[i], "none": i == P.DIFF_NONE} for i, lab in enumerate(labels)]


def band_range(low: float, high: float) -> str:
    if math.isinf(high):
        return f"above {low:g} °C"
    if math.isinf(low):
        return f"below {high:g} °C"
    return f"{low:g} to {high:g} °C"


def legend_config(route_scales: dict | None, comfort_from_model: bool, street_scale: dict | None,
                  street_hours: list | None, error_source: str) -> dict:
    """Everything the page's script needs to colour and explain (no user text in here)."""
    diff_routes = {}
    for m, s in (route_scales or {}).items():
        none = "within model error" if (m == "comfort" and comfort_from_model) else "no change"
        diff_routes[m] = change_keys(m, s, MEASURES[m]["unit"], none)
    street_interval = bool((street_scale or {}).get("interval"))
    diff_streets = {m: change_keys(m, s, MEASURES[m]["street_unit"],
                                   "within model error or no change" if (m == "comfort" and street_interval)
                                   else "no change")
                    for m, s in ((street_scale or {}).get("change") or {}).items()}
    return {
        "measures": MEASURES,
        "comfort": [{"name": c, "label": P.COMFORT_LABELS[c], "colour": P.COMFORT_COLOURS[c]}
                    for c in C.COMFORT_CLASSES],
        "utci": [{"name": b[2], "label": b[2][0].upper() + b[2][1:], "range": band_range(b[0], b[1]),
                  "colour": P.UTCI_BAND_COLOURS[b[2]]} for b in C.UTCI_BANDS],
        "shade": [{"label": f"{int(100 * i / SHADE_BINS)}–{int(100 * (i + 1) / SHADE_BINS)} % of the sun blocked",
                   "colour": P.SHADE_STOPS[i]} for i in range(SHADE_BINS)],
        "diff": diff_routes,
        "street_hours": street_hours or [],
        "street_diff": diff_streets,
        "errors": [{"label": f"{int(100 * v)} % of votes disagree", "colour": P.error_colour(v)}
                   for v in (0.0, 0.25, 0.5, 0.75, 1.0)],
        "scene": dict(P.SCENE_COLOURS), "edits": P.EDIT_STYLES, "edit_legend": P.EDIT_LEGEND,
        "missing": P.MISSING_COLOUR, "halo": P.HALO_COLOUR, "none_index": P.DIFF_NONE,
        "tsv": {str(k): v for k, v in C.TSV_SCALE.items()},
        "caution": CAUTION, "network_note": NETWORK_NOTE,
        "errors_note": ERRORS_NOTE_HELD_OUT if error_source == "held-out" else ERRORS_NOTE,
        "errors_title": ("Where the model errs on held-out walkers" if error_source == "held-out"
                         else "Where the model errs (in-sample)"),
    }


def index_config(index: str) -> dict:
    """What changes in the page's configuration when the band colouring follows PET.

    The route bands become the PET classes (Matzarakis & Mayer 1996, boundaries from
    memory; our own ramp, :data:`walkcomfort.environment.pet.PET_CLASS_COLOURS`); the
    streets keep the UTCI bands (``street_utci``), which their layers carry.
    """
    from walkcomfort.environment.pet import PET_CLASS_COLOURS, PET_CLASSES

    if index != "pet":
        return {}
    utci = [{"name": b[2], "label": b[2][0].upper() + b[2][1:], "range": band_range(b[0], b[1]),
             "colour": P.UTCI_BAND_COLOURS[b[2]]} for b in C.UTCI_BANDS]
    pet = [{"name": c[2], "label": f"{c[2][0].upper() + c[2][1:]} ({c[3]})", "range": band_range(c[0], c[1]),
            "colour": PET_CLASS_COLOURS[c[2]]} for c in PET_CLASSES]
    return {"utci": pet, "street_utci": utci,
            "index": {"key": "pet", "name": "PET", "band_label": "PET class",
                      "scale_title": "PET classes of thermal perception (Matzarakis & Mayer 1996)"}}
