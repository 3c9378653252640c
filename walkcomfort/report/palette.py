"""Colours used by the maps and reports: walkcomfort's own ramps, chosen to stay apart for colour-blind readers.

Every ramp is ours and follows no published chart's colours. Each was laid out in
CIECAM02 lightness/chroma/hue (``JCh``) so that neighbouring classes differ in lightness
as well as hue, and checked with the Machado et al. (2009) simulation of deuteranopia,
protanopia and tritanopia: ``tests/report/test_report_palette.py`` requires a minimum
CAM02-UCS colour difference between adjacent classes of every ramp (and between all
three comfort classes) under each simulation.

- comfort: a mid blue for *comfortable*, a warm sand for *neutral*, a dark plum for
  *uncomfortable* (lightness J ≈ 51, 75, 19: also apart in greyscale print);
- UTCI bands: a diverging ramp whose lightest class is *no thermal stress* (a pale warm
  white), darkening through ochre, brick and maroon towards heat and through ice blue,
  slate and indigo towards cold;
- shade (full sun pale straw … full shade dark slate), comfortable hours of a street,
  model error rate: sequential, monotone in lightness, so they read without colour;
- difference from the base: diverging, worse (rust) … no change (light grey, drawn dashed)
  … better (slate blue).

References
----------
Machado, G. M., Oliveira, M. M., Fernandes, L. A. F. (2009). A physiologically-based
model for simulation of color vision deficiency. IEEE TVCG 15(6), 1291-1298,
doi:10.1109/TVCG.2009.113.
"""

from __future__ import annotations

import math

from walkcomfort import columns as C

# --- comfort classes (our own palette) ---------------------------------------------------
# (defined in the glossary, walkcomfort.columns, so that lower layers — the route plot — draw
# the same colours without importing the report)
COMFORT_COLOURS: dict[str, str] = C.COMFORT_COLOURS
COMFORT_LABELS: dict[str, str] = C.COMFORT_LABELS
# drawn under every route line so the light colours stay visible on a white page or on tiles
HALO_COLOUR = "#1f1f1f"
MISSING_COLOUR = "#9b9b9b"

assert tuple(COMFORT_COLOURS) == C.COMFORT_CLASSES  # one colour per glossary class, same order

# --- UTCI assessment-scale bands (our own diverging ramp, lightest at "no thermal stress") -----
UTCI_BAND_COLOURS: dict[str, str] = {
    "extreme heat stress": "#61242c",
    "very strong heat stress": "#b24249",
    "strong heat stress": "#eb753d",
    "moderate heat stress": "#ffbd55",
    "no thermal stress": "#f8f2e4",
    "slight cold stress": "#b7e3ee",
    "moderate cold stress": "#89c0de",
    "strong cold stress": "#7793c7",
    "very strong cold stress": "#6b659c",
    "extreme cold stress": "#4d3764",
}
assert set(UTCI_BAND_COLOURS) == {band[2] for band in C.UTCI_BANDS}

# --- sequential scales ----------------------------------------------------------------------
# shade fraction: 0 = full sun (pale straw) ... 1 = full shade (dark slate)
SHADE_STOPS = ("#fff08e", "#c1d594", "#81b39e", "#5e8592", "#47516a")
# model error rate in a map cell: 0 = always right (pale) ... 1 = always wrong (deep plum)
ERROR_STOPS = ("#fbf1fd", "#dec8e9", "#bf9acf", "#9a6aa8", "#6a3e71")
# expected comfortable hours of a street segment: few (pale straw) ... many (deep indigo)
NETWORK_HOURS_STOPS = ("#ffedad", "#a0dcc3", "#78b0b4", "#5d809e", "#474b71")
# difference from the base, by what it means for the walker: much worse ... no change ... much better
DIFF_STOPS = ("#8e462d", "#d98f59", "#ebe5de", "#8fb3d2", "#566294")
DIFF_NONE = 2  # index of "no change / within model error" (drawn dashed as well as grey)

#: Every ordered ramp, for the colour-vision checks: adjacent classes must stay apart.
RAMPS: dict[str, tuple[str, ...]] = {
    "utci": tuple(UTCI_BAND_COLOURS.values()),
    "shade": SHADE_STOPS,
    "errors": ERROR_STOPS,
    "network_hours": NETWORK_HOURS_STOPS,
    "difference": DIFF_STOPS,
}

# --- scene (buildings, trees, canopies) ----------------------------------------------------
SCENE_COLOURS: dict[str, str] = {
    "building": "#7d7d86",
    "tree": "#3f7f4c",
    "canopy": "#b38a5a",
}
# edits of a shade scheme are told apart by the outline, not by colour alone
EDIT_STYLES: dict[str, dict] = {
    "existing": {"dashArray": None, "weight": 1, "outline": "#4a4a4a", "fillOpacity": 0.45},
    "add": {"dashArray": None, "weight": 2.5, "outline": "#000000", "fillOpacity": 0.9},
    "modify": {"dashArray": "3 3", "weight": 2.5, "outline": "#000000", "fillOpacity": 0.7},
    "remove": {"dashArray": "1 4", "weight": 1.5, "outline": "#8a8a8a", "fillOpacity": 0.06},
}
EDIT_LEGEND = "bold outline: added · dashed: changed · faint dotted: removed"


def _hex_to_rgb(colour: str) -> tuple[int, int, int]:
    colour = colour.lstrip("#")
    return int(colour[0:2], 16), int(colour[2:4], 16), int(colour[4:6], 16)


def _rgb_to_hex(rgb) -> str:
    return "#" + "".join(f"{max(0, min(255, int(round(v)))):02x}" for v in rgb)


def ramp(stops: tuple[str, ...], value: float) -> str:
    """Colour at ``value`` (0…1) on a piecewise-linear ramp through ``stops``.

    Parameters
    ----------
    stops : tuple of str
        Hex colours at evenly spaced positions 0, 1/(n-1), …, 1.
    value : float
        Position [-]; clipped to 0…1. NaN gives :data:`MISSING_COLOUR`.

    Returns
    -------
    str
        ``#rrggbb``.
    """
    if value is None or not math.isfinite(value):
        return MISSING_COLOUR
    value = min(1.0, max(0.0, float(value)))
    pos = value * (len(stops) - 1)
    i = min(int(pos), len(stops) - 2)
    t = pos - i
    a, b = _hex_to_rgb(stops[i]), _hex_to_rgb(stops[i + 1])
    return _rgb_to_hex([x + (y - x) * t for x, y in zip(a, b, strict=False)])


def comfort_colour(comfort_class) -> str:
    """Map colour of a comfort class name (grey for a missing or unknown class)."""
    return COMFORT_COLOURS.get(comfort_class, MISSING_COLOUR)


def utci_band_colour(band) -> str:
    """Colour of a UTCI assessment-scale band name (grey for missing)."""
    return UTCI_BAND_COLOURS.get(band, MISSING_COLOUR)


def utci_band_name(utci_c: float):
    """Band name of a UTCI value [°C] on the assessment scale (None for NaN).

    Bounds are those of :data:`walkcomfort.columns.UTCI_BANDS` (lower bound exclusive,
    upper inclusive).
    """
    if utci_c is None or not math.isfinite(utci_c):
        return None
    for low, high, name in C.UTCI_BANDS:
        if low < utci_c <= high:
            return name
    return None  # pragma: no cover - the bands cover the whole real line


def shade_colour(shade_frac: float) -> str:
    """Colour of a shade fraction [-] (0 full sun … 1 full shade)."""
    return ramp(SHADE_STOPS, shade_frac)


def error_colour(rate: float) -> str:
    """Colour of a model error rate [-] in a map cell."""
    return ramp(ERROR_STOPS, rate)


def relative_luminance(colour: str) -> float:
    """WCAG 2.x relative luminance of an sRGB hex colour [-] (0 black … 1 white)."""
    out = []
    for v in _hex_to_rgb(colour):
        c = v / 255.0
        out.append(c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4)
    r, g, b = out
    return 0.2126 * r + 0.7152 * g + 0.0722 * b


def contrast_ratio(a: str, b: str) -> float:
    """WCAG 2.x contrast ratio between two hex colours (1 … 21)."""
    la, lb = sorted((relative_luminance(a), relative_luminance(b)), reverse=True)
    return (la + 0.05) / (lb + 0.05)


def text_colour_on(background: str) -> str:
    """Black or white, whichever contrasts more with ``background``."""
    return "#000000" if contrast_ratio(background, "#000000") >= contrast_ratio(background, "#ffffff") else "#ffffff"


#: Placement sites on the map (``walkcomfort advise``): chosen sites carry their rank in a
#: dark marker, runner-ups are pale; both stay apart from the scene's building and crown fills.
SITE_COLOURS = {"chosen": "#173f5f", "chosen_text": "#ffffff", "runner_up": "#b8c2cc"}
