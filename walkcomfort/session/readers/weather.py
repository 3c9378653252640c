"""Weather logger CSV: air temperature, humidity, wind, globe temperature, pressure → SI."""

from __future__ import annotations

from walkcomfort.columns import PRESSURE_HPA, RH_PCT, T_AIR_C, T_GLOBE_C, WIND_MS
from walkcomfort.session.readers._common import read_sensor_csv

# canonical field -> (output column, required)
WEATHER_FIELDS = [
    ("t_air", T_AIR_C, True),
    ("rh", RH_PCT, False),
    ("wind", WIND_MS, False),
    ("t_globe", T_GLOBE_C, False),
    ("pressure", PRESSURE_HPA, False),
]


def read_weather(path, source_spec, session_spec):
    """Read a weather-logger CSV.

    Parameters
    ----------
    path : path
        The file (normally ``source_spec.abs_path``).
    source_spec : SourceSpec
        Its ``[[source]]`` table: column mapping and declared units (temperatures
        ``degC | degF | K``, wind ``m/s | km/h | kn | mph``, pressure ``hPa | Pa |
        kPa | mbar | inHg | mmHg``, humidity ``%`` by default). Undeclared
        temperature, wind or pressure units are an error.
    session_spec : SessionSpec

    Returns
    -------
    data : DataFrame
        UTC index ``time`` (device clock, not yet corrected); columns ``t_air_c``
        [°C] and, when present, ``rh_pct`` [%], ``wind_ms`` [m s⁻¹], ``t_globe_c``
        [°C], ``pressure_hpa`` [hPa].
    metadata : dict
        Counts (``rows_read, rows_used, rows_quarantined, duplicates,
        out_of_order``), ``quarantine`` table, declared units, and the wind
        measurement height ``wind_height_m`` [m] from ``[sensors]``.
    """
    df, meta = read_sensor_csv(source_spec, session_spec, WEATHER_FIELDS, "weather", path)
    meta["wind_height_m"] = session_spec.sensors.get("wind_height_m")
    return df, meta
