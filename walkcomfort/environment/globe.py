"""Mean radiant temperature from a globe thermometer, by the calibration published for its type.

A globe's convective exchange depends on its size and finish, so each globe type is
read with the coefficient published for it (the manifest's ``[sensors] globe_type``):

``black_150mm``
    The standard 150 mm matt-black globe, ISO 7726 (1998) Annex B: forced convection
    :math:`h/\\sigma = 1.1\\cdot10^8 V^{0.6}/D^{0.4}`, natural
    :math:`0.25\\cdot10^8(|t_g-t_a|/D)^{1/4}`, the larger of the two
    (:func:`walkcomfort.environment.tmrt.tmrt_from_globe`).
``grey_38mm``
    The 38 mm flat-grey (table-tennis ball) globe recalibrated outdoors by Thorsson et al.
    (2007): :math:`T_{mrt} = [(T_g+273.15)^4 + 1.335\\cdot10^8 V^{0.71}(T_g-T_a)/(\\varepsilon D^{0.4})]^{1/4} - 273.15`
    with ε = 0.95 and D = 0.038 m. The coefficient and exponent are from memory of the
    paper; two independent public implementations use the same numbers, the paper itself
    was not at hand to check.

A manifest without ``globe_type`` is read by ISO 7726 with its declared diameter, as
before the types existed, and the result records that the type was not declared (a
38–40 mm grey globe read this way gives a Tmrt several kelvin lower than its published
calibration at 1–2 m s⁻¹: declare the type).

References
----------
.. [1] ISO 7726:1998, Annex B.
.. [2] Thorsson, S., Lindberg, F., Eliasson, I., Holmer, B. (2007). Different methods for
   estimating the mean radiant temperature in an outdoor urban setting. Int. J.
   Climatol. 27, 1983–1993. doi:10.1002/joc.1537
"""

from __future__ import annotations

import numpy as np

from walkcomfort.environment import tmrt as _tmrt
from walkcomfort.errors import InputError

#: Published calibrations by globe type: diameter [m], emissivity [-], forced-convection
#: coefficient (h/σ at V = 1 m s⁻¹ and D = 1 m) [K³] and wind exponent, and the source.
GLOBE_TYPES = {
    "black_150mm": {"diameter_m": 0.15, "emissivity": 0.95, "coef": 1.1e8, "exponent": 0.6,
                    "source": "ISO 7726:1998 Annex B (forced and natural convection)"},
    "grey_38mm": {"diameter_m": 0.038, "emissivity": 0.95, "coef": 1.335e8, "exponent": 0.71,
                  "source": "Thorsson et al. (2007) doi:10.1002/joc.1537 (coefficient from memory)"},
}


def resolve_globe(globe_type: str | None, diameter_m: float | None = None, emissivity: float | None = None,
                  where: str = "[sensors] globe_type") -> dict:
    """The calibration to use: the declared type, else the one the diameter points to.

    Returns a dict with ``type, diameter_m, emissivity, coef, exponent, source, declared``.
    """
    if globe_type is None:
        name, declared = "black_150mm", False
    elif globe_type in GLOBE_TYPES:
        name, declared = globe_type, True
    else:
        raise InputError(f"globe type {globe_type!r} is not known", where=where,
                         fix=f"write one of {', '.join(GLOBE_TYPES)}")
    out = dict(GLOBE_TYPES[name])
    out.update(type=name, declared=declared)
    if diameter_m is not None and name == "black_150mm":
        out["diameter_m"] = float(diameter_m)  # ISO's formula holds for any diameter
    if emissivity is not None:
        out["emissivity"] = float(emissivity)
    return out


def tmrt_from_globe_type(t_globe_c, t_air_c, air_speed_ms, globe: dict):
    """Mean radiant temperature [°C] by the calibration ``globe`` (from :func:`resolve_globe`).

    ``air_speed_ms`` is the air speed at the globe relative to it (for a carried globe,
    the reading of an anemometer carried with it).
    """
    if globe["type"] == "black_150mm":
        return _tmrt.tmrt_from_globe(t_globe_c, t_air_c, air_speed_ms, globe["diameter_m"], globe["emissivity"])
    tg, ta, v = (np.asarray(a, dtype=float) for a in (t_globe_c, t_air_c, air_speed_ms))
    with np.errstate(invalid="ignore"):
        f = globe["coef"] * np.power(np.maximum(v, 0.0), globe["exponent"]) / (
            globe["emissivity"] * globe["diameter_m"] ** 0.4)
        t4 = (tg + 273.15) ** 4 + f * (tg - ta)
        out = np.power(np.maximum(t4, 0.0), 0.25) - 273.15
    return out
