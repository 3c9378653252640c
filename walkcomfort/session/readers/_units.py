"""Declared units → SI, by exact definitions. An unknown unit is an error, never a guess.

Conversion factors are exact by definition unless noted:
international foot = 0.3048 m, statute mile = 1609.344 m, nautical mile = 1852 m
(BIPM SI Brochure, 9th ed., Table 8 / NIST SP 811 appendix B); T[°C] = T[K] − 273.15;
T[°C] = (T[°F] − 32)·5/9; 1 hPa = 100 Pa; 1 inHg = 3386.389 Pa and 1 mmHg =
133.322387415 Pa (NIST SP 811, B.8; conventional, at 0 °C); 1 foot-candle = 1 lm ft⁻²
= 1/0.09290304 lx.
"""

from __future__ import annotations

import numpy as np

from walkcomfort.errors import InputError

# quantity -> {normalised unit name: (scale, offset)} so that SI = value·scale + offset
_TEMPERATURE = {
    "degc": (1.0, 0.0), "°c": (1.0, 0.0), "c": (1.0, 0.0), "celsius": (1.0, 0.0),
    "degf": (5.0 / 9.0, -32.0 * 5.0 / 9.0), "°f": (5.0 / 9.0, -32.0 * 5.0 / 9.0), "f": (5.0 / 9.0, -32.0 * 5.0 / 9.0),
    "fahrenheit": (5.0 / 9.0, -32.0 * 5.0 / 9.0),
    "k": (1.0, -273.15), "kelvin": (1.0, -273.15),
}
_SPEED = {
    "m/s": (1.0, 0.0), "ms-1": (1.0, 0.0), "m s-1": (1.0, 0.0), "mps": (1.0, 0.0),
    "km/h": (1.0 / 3.6, 0.0), "kmh": (1.0 / 3.6, 0.0), "kph": (1.0 / 3.6, 0.0), "km h-1": (1.0 / 3.6, 0.0),
    "kn": (1852.0 / 3600.0, 0.0), "kt": (1852.0 / 3600.0, 0.0), "knot": (1852.0 / 3600.0, 0.0),
    "knots": (1852.0 / 3600.0, 0.0),
    "mph": (1609.344 / 3600.0, 0.0),
}
_PRESSURE = {  # to hPa
    "hpa": (1.0, 0.0), "mbar": (1.0, 0.0), "mb": (1.0, 0.0), "pa": (0.01, 0.0), "kpa": (10.0, 0.0),
    "inhg": (33.86389, 0.0), "mmhg": (1.33322387415, 0.0),
}
_HUMIDITY = {"%": (1.0, 0.0), "pct": (1.0, 0.0), "percent": (1.0, 0.0), "%rh": (1.0, 0.0),
             "fraction": (100.0, 0.0), "1": (100.0, 0.0)}
_LEVEL = {"db": (1.0, 0.0), "db(a)": (1.0, 0.0), "dba": (1.0, 0.0)}
_ILLUMINANCE = {"lux": (1.0, 0.0), "lx": (1.0, 0.0), "klux": (1000.0, 0.0), "klx": (1000.0, 0.0),
                "fc": (1.0 / 0.09290304, 0.0), "foot-candle": (1.0 / 0.09290304, 0.0)}
_LENGTH = {"m": (1.0, 0.0), "ft": (0.3048, 0.0), "feet": (0.3048, 0.0)}
_DEGREES = {"deg": (1.0, 0.0), "degrees": (1.0, 0.0), "°": (1.0, 0.0)}

# field -> (unit table, default when undeclared or None = must be declared, SI name)
FIELD_UNITS = {
    "t_air": (_TEMPERATURE, None, "degC"),
    "t_globe": (_TEMPERATURE, None, "degC"),
    "wind": (_SPEED, None, "m/s"),
    "pressure": (_PRESSURE, None, "hPa"),
    "rh": (_HUMIDITY, "%", "%"),
    "laeq": (_LEVEL, "dB(A)", "dB(A)"),
    "illum": (_ILLUMINANCE, "lux", "lux"),
    "elev": (_LENGTH, "m", "m"),
    "lat": (_DEGREES, "deg", "deg"),
    "lon": (_DEGREES, "deg", "deg"),
}


def _norm(unit: str) -> str:
    return " ".join(unit.strip().lower().replace("º", "°").split())


def unit_factor(field: str, unit: str | None, where: str = "") -> tuple[float, float]:
    """``(scale, offset)`` turning values of ``field`` in ``unit`` into SI (``SI = v·scale + offset``).

    Raises
    ------
    InputError
        The unit is missing for a field that has more than one common unit, or not known.
    """
    table, default, si = FIELD_UNITS[field]
    if unit is None:
        if default is None:
            allowed = ", ".join(sorted({k for k in table if k.isascii()}))
            raise InputError(f"no unit declared for '{field}' (it has several common units: {allowed})",
                             where=f"{where} units.{field}" if where else None,
                             fix=f'declare it in [source.units], e.g. {field} = "{si}"')
        unit = default
    key = _norm(unit)
    if key not in table:
        allowed = ", ".join(sorted({k for k in table if k.isascii()}))
        raise InputError(f"unit '{unit}' for '{field}' is not known; allowed: {allowed}",
                         where=f"{where} units.{field}" if where else None,
                         fix="declare one of the allowed units (or convert the file)")
    return table[key]


def to_si(values, field: str, unit: str | None, where: str = "") -> np.ndarray:
    """Convert ``values`` [declared ``unit``] of ``field`` to SI [°C, m s⁻¹, hPa, %, dB, lx, m]."""
    scale, offset = unit_factor(field, unit, where)
    arr = np.asarray(values, dtype=float)
    if scale == 1.0 and offset == 0.0:
        return arr
    return arr * scale + offset
