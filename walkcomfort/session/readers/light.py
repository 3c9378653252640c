"""Light meter CSV: illuminance [lx]."""

from __future__ import annotations

from walkcomfort.columns import ILLUM_LUX
from walkcomfort.session.readers._common import read_sensor_csv


def read_light(path, source_spec, session_spec):
    """Read a light-meter CSV (``time, illum``; unit ``lux`` by default, ``klux`` or ``fc`` if declared).

    Returns ``(data, metadata)``: UTC index ``time`` (device clock), column
    ``illum_lux`` [lx]; metadata as for every reader (counts, ``quarantine``).
    """
    return read_sensor_csv(source_spec, session_spec, [("illum", ILLUM_LUX, True)], "light", path)
