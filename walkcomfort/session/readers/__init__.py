"""One reader per source kind; each returns ``(data, metadata)``.

``data`` has a tz-aware UTC index named ``time`` (the device's clock, corrected
later by :mod:`walkcomfort.session.clocks`) and SI columns named by
:mod:`walkcomfort.columns`; ``metadata`` holds the counts (``rows_read``,
``rows_used``, ``rows_quarantined``, ``duplicates``, ``out_of_order``), the
``quarantine`` table (``source, file, row, reason, raw``) and what the file said
about itself. Counts always reconcile: rows_read = rows_used + rows_quarantined.
"""

from walkcomfort.session.readers._common import QUARANTINE_COLUMNS, quarantine_frame
from walkcomfort.session.readers._units import to_si, unit_factor
from walkcomfort.session.readers.frames import read_frames
from walkcomfort.session.readers.gps import read_gps
from walkcomfort.session.readers.light import read_light
from walkcomfort.session.readers.noise import energy_average, read_noise
from walkcomfort.session.readers.votes import read_votes
from walkcomfort.session.readers.weather import read_weather

READERS = {
    "gps": read_gps,
    "weather": read_weather,
    "noise": read_noise,
    "light": read_light,
    "frames": read_frames,
    "votes": read_votes,
}


def read_source(source_spec, session_spec):
    """Read one declared source with the reader of its kind."""
    return READERS[source_spec.kind](source_spec.abs_path, source_spec, session_spec)


__all__ = ["READERS", "QUARANTINE_COLUMNS", "energy_average", "quarantine_frame", "read_frames", "read_gps",
           "read_light", "read_noise", "read_source", "read_votes", "read_weather", "to_si", "unit_factor"]
