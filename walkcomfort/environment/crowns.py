"""Tree crowns as leaf area: beam extinction after Campbell & Norman (1998).

The direct beam crossing a crown of leaf area index LAI (leaf area per unit ground
area under the crown) is transmitted as

.. math:: \\tau_b = \\exp\\left(-\\frac{G\\,\\Omega\\,\\mathrm{LAI}}{\\sin\\beta}\\right)

with :math:`G = 0.5` the mean projection of a spherical leaf-angle distribution,
:math:`\\Omega` the clumping index (1 for randomly placed leaves) and :math:`\\beta` the
sun elevation (Campbell & Norman 1998, ch. 15, eq. 15.1 with K_b = G/sin β). Outside the
leafy season the crown keeps its woody area (:data:`WOODY_AREA_INDEX`).

References
----------
.. [1] Campbell, G. S., Norman, J. M. (1998). An Introduction to Environmental Biophysics,
   2nd ed. Springer. doi:10.1007/978-1-4612-1626-1 (ch. 15; from memory).
.. [2] Bréda, N. J. J. (2003). Ground-based measurements of leaf area index: a review of
   methods, instruments and current controversies. J. Exp. Bot. 54, 2403–2417.
   doi:10.1093/jxb/erg263 (typical LAI of broadleaf crowns 3–7; from memory).
"""

from __future__ import annotations

import numpy as np

from walkcomfort.errors import InputError

#: Mean leaf projection of a spherical leaf-angle distribution (Campbell & Norman 1998).
G_SPHERICAL = 0.5
#: Documented default leaf area index by crown type [-] (Bréda 2003, ranges 3–7 for
#: broadleaf crowns; from memory). ``(default, low, high)`` — the range for sensitivity runs.
LAI_DEFAULTS = {
    "broadleaf_dense": (5.0, 4.0, 7.0),   # e.g. lime, plane, horse-chestnut in full leaf
    "broadleaf_open": (3.0, 2.0, 4.0),    # e.g. pagoda tree, young street trees, honey locust
    "conifer": (4.0, 3.0, 6.0),
    "palm": (2.0, 1.0, 3.0),
}
#: Clumping index of a crown (leaves grouped on shoots; 0.7–0.9 for broadleaf crowns,
#: Campbell & Norman 1998; from memory).
CLUMPING = 0.8
#: Woody (branch and stem) area index left on a deciduous crown outside the leafy season
#: (common practice: 0.5–1.0).
WOODY_AREA_INDEX = 0.7
#: Months without leaves for deciduous crowns in the northern hemisphere (common practice
#: for temperate climates; shifted by six months south of the equator).
LEAF_OFF_MONTHS_NORTH = (11, 12, 1, 2, 3)


def beam_transmissivity(lai, sun_elev_deg, clumping: float = CLUMPING, g: float = G_SPHERICAL):
    """Direct-beam transmissivity of a crown, exp(−G·Ω·LAI / sin β) [-]; 0 with the sun down."""
    lai = np.asarray(lai, float)
    e = np.asarray(sun_elev_deg, float)
    s = np.sin(np.radians(np.clip(e, 0.0, 90.0)))
    with np.errstate(divide="ignore", over="ignore", invalid="ignore"):
        tau = np.exp(-g * clumping * np.maximum(lai, 0.0) / s)
    return np.where(e > 0, tau, np.where(np.isnan(e), np.nan, 0.0))


def diffuse_transmissivity(lai, clumping: float = CLUMPING, g: float = G_SPHERICAL, n: int = 90):
    """Transmissivity of a crown to isotropic diffuse sky light [-].

    The beam transmissivity integrated over the sky hemisphere weighted by
    2 sin β cos β dβ (Campbell & Norman 1998, eq. 15.5; from memory).
    """
    beta = (np.arange(n) + 0.5) * (np.pi / 2) / n
    w = np.sin(2 * beta)
    w = w / w.sum()  # the weights integrate to 1 exactly
    tau = beam_transmissivity(np.asarray(lai, float)[..., None], np.degrees(beta), clumping, g)
    return (tau * w).sum(axis=-1)


def crown_lai(crown_type: str | None = None, lai: float | None = None, where: str = "tree") -> float:
    """The LAI of a crown: its own value if given, else the default of its type."""
    if lai is not None:
        if not np.isfinite(lai) or lai < 0 or lai > 15:
            raise InputError(f"leaf area index {lai!r} is outside 0…15", where=where, fix="give the crown's LAI")
        return float(lai)
    key = crown_type or "broadleaf_dense"
    if key not in LAI_DEFAULTS:
        raise InputError(f"crown type {key!r} is not known", where=where, fix=f"use one of {', '.join(LAI_DEFAULTS)}")
    return LAI_DEFAULTS[key][0]


def seasonal_area_index(lai: float, month, lat: float, deciduous: bool = True):
    """Leaf (or, outside the leafy season, woody) area index of a crown in ``month``."""
    m = np.asarray(month, int)
    shifted = m if lat >= 0 else ((m + 5) % 12) + 1
    off = np.isin(shifted, LEAF_OFF_MONTHS_NORTH) & bool(deciduous)
    return np.where(off, WOODY_AREA_INDEX, float(lai))
