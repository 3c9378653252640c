"""Plain labels for the columns people read in tables, with units and one number format per kind.

One table maps every column a report or summary shows to a label and a unit; one rule
formats each kind of number: counts as integers, shares as per cent, and each quantity
with a fixed number of decimals suited to its precision (temperatures to 0.1 °C, minutes
to 0.1 min, heat dose to whole °C·min, distances to whole metres). Changes against the
base (``delta_<col>``) carry a sign; changes of a share are in percentage points.
Machine files (CSV, Parquet) keep the column names of :mod:`walkcomfort.columns`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import pandas as pd

from walkcomfort import columns as C


@dataclass(frozen=True)
class Label:
    """How a column is shown: ``text [unit]`` and its number format."""

    text: str
    unit: str = ""
    kind: str = "num"    # num | int | share | time | text | bool
    decimals: int = 1

    @property
    def header(self) -> str:
        return f"{self.text} [{self.unit}]" if self.unit else self.text


_CLASS_WORDS = {"comfortable": "comfortable", "neutral": "neutral", "uncomfortable": "uncomfortable"}

LABELS: dict[str, Label] = {
    "route_id": Label("Route", kind="text"),
    "scheme": Label("Scheme", kind="text"),
    "departure": Label("Departure", "local", "time"),
    "arrival": Label("Arrival", "local", "time"),
    "departure_local": Label("Departure", "local", "text"),
    "walk_min": Label("Walk time", "min"),
    "length_m": Label("Length", "m", decimals=0),
    "predictor": Label("Predicted by", kind="text"),
    "sun_up_share": Label("Time with the sun up", "%", "share"),
    "shade_share": Label("Sunlit time in shade", "%", "share"),
    "mean_utci_c": Label("Mean UTCI", "°C"),
    "peak_utci_c": Label("Peak UTCI", "°C"),
    "mean_tmrt_c": Label("Mean radiant temperature", "°C"),
    "mean_pet_c": Label("Mean PET", "°C"),
    "peak_pet_c": Label("Peak PET", "°C"),
    "heat_dose_cmin": Label("Heat dose (UTCI above 26 °C × time)", "°C·min", decimals=0),
    "points_n": Label("Points", kind="int"),
    "departures_n": Label("Departures compared", kind="int"),
    "within_model_error": Label("Within model error", kind="bool"),
    "trees_added": Label("Trees added", kind="int"),
    "trees_removed": Label("Trees removed", kind="int"),
    "shade_m2_added": Label("Crown and canopy area added", "m²", decimals=0),
    "gain_comfortable_min": Label("Expected comfortable time gained per walk", "min", decimals=2),
    "gain_min_per_tree": Label("Gain per tree added", "min", decimals=2),
    "gain_min_per_100m2_shade": Label("Gain per 100 m² of shade added", "min", decimals=2),
    "heat_dose_avoided_cmin": Label("Heat dose avoided per walk", "°C·min", decimals=0),
    "modified_n": Label("Features changed", kind="int"),
    "removed_n": Label("Features removed", kind="int"),
    "crown_m2_added": Label("Tree crown area added", "m²", decimals=0),
    "canopy_m2_added": Label("Canopy area added", "m²", decimals=0),
    "wbgt_limit_c": Label("WBGT limit", "°C"),
    "wbgt_min_above_limit": Label("Time with WBGT above the limit", "min"),
    "wbgt_peak_c": Label("Peak WBGT (estimated)", "°C"),
    "wbgt_mean_c": Label("Mean WBGT (estimated)", "°C"),
    "wbgt_c": Label("WBGT (estimated)", "°C"),
    "pet_c": Label("PET", "°C"),
    "pet_class": Label("PET class", kind="text"),
    "from_m": Label("From", "m", decimals=0),
    "to_m": Label("To", "m", decimals=0),
    C.DIST_M: Label("Distance walked", "m", decimals=0),
    C.UTCI_C: Label("UTCI", "°C"),
    C.TMRT_C: Label("Mean radiant temperature", "°C"),
    C.T_AIR_C: Label("Air temperature", "°C"),
    C.SHADE_FRAC: Label("Direct sun blocked", "%", "share"),
}
for _c, _w in _CLASS_WORDS.items():
    LABELS[f"exp_min_{_c}"] = Label(f"Expected {_w} time", "min")
    LABELS[f"exp_share_{_c}"] = Label(f"Expected {_w} share", "%", "share")
    LABELS[f"argmax_min_{_c}"] = Label(f"Time with {_w} most likely", "min")
    LABELS[f"argmax_share_{_c}"] = Label(f"Share with {_w} most likely", "%", "share")
    LABELS[f"p_{_c}"] = Label(f"Chance {_w}", "%", "share")


def label_of(col: str) -> Label:
    """The label of a column; ``base_<col>`` and ``delta_<col>[_lo|_hi]`` derive from ``<col>``.

    Raises
    ------
    KeyError
        For a column without a label (every shown column must have one; tests check it).
    """
    if col in LABELS:
        return LABELS[col]
    for suffix, words in (("_lo", "lower bound"), ("_hi", "upper bound")):
        if col.startswith("delta_") and col.endswith(suffix):
            inner = label_of(col[: -len(suffix)])
            return Label(f"{inner.text}, {words}", inner.unit, inner.kind, inner.decimals)
    if col.startswith("delta_"):
        inner = LABELS[col[len("delta_"):]]
        unit = "points" if inner.kind == "share" else inner.unit
        return Label(f"Change in {inner.text[0].lower()}{inner.text[1:]}", unit,
                     "dshare" if inner.kind == "share" else "delta", inner.decimals)
    if col.startswith("base_"):
        inner = LABELS[col[len("base_"):]]
        return Label(f"Base: {inner.text[0].lower()}{inner.text[1:]}", inner.unit, inner.kind, inner.decimals)
    raise KeyError(col)


def header(col: str) -> str:
    """``Label [unit]`` of a column (the column name itself when it has no label)."""
    try:
        return label_of(col).header
    except KeyError:
        return col


def _missing(v) -> bool:
    try:
        return v is None or bool(pd.isna(v))
    except (TypeError, ValueError):
        return False


def format_value(col: str, v, timezone: str | None = None) -> str:
    """A value as the tables show it (``–`` when missing)."""
    if _missing(v):
        return "–"
    try:
        lab = label_of(col)
    except KeyError:
        lab = Label(col, kind="text")
    return _FORMATS[lab.kind](v, lab.decimals, timezone)


def _num(v, d, tz):
    v = float(v)
    if not math.isfinite(v):
        return "–"
    text = f"{v:.{d}f}"
    return text if float(text) != 0 else f"{0:.{d}f}"  # no "-0.0"


def _delta(v, d, tz):
    text = _num(v, d, tz)
    return text if text.startswith("-") or float(text) == 0 else "+" + text


def _time(v, d, tz):
    t = pd.Timestamp(v)
    if t.tzinfo is not None and tz:
        t = t.tz_convert(tz)
    return t.strftime("%Y-%m-%d %H:%M")


_FORMATS = {
    "num": _num,
    "int": lambda v, d, tz: f"{int(round(float(v)))}",
    "share": lambda v, d, tz: f"{100 * float(v):.0f} %",
    "dshare": lambda v, d, tz: _delta(100 * float(v), 0, tz),
    "delta": _delta,
    "time": _time,
    "bool": lambda v, d, tz: "yes" if bool(v) else "no",
    "text": lambda v, d, tz: str(v),
}
