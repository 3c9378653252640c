"""Measured weather as the weather of a planned walk: a logger CSV or an ingested timeline.

Three ways in, one :class:`LoggerSeries`:

* a timeline Parquet written by ``walkcomfort ingest`` (its session states the wind height);
* a CSV already in our columns (``time`` in ISO 8601 with an offset, ``t_air_c``,
  ``rh_pct``, ``wind_ms`` [, ``ghi_wm2``, ``pressure_hpa``]);
* any logger CSV with a column map: a small TOML file holding the keys of a session
  manifest's weather ``[[source]]`` table, read by the session stage's own weather reader
  (so units, time formats, delimiters and bad rows are handled exactly as for a walk).

Values are interpolated linearly in time to the walk's instants; a hole longer than
``max_gap_s`` is refused rather than bridged.
"""

from __future__ import annotations

import os
import tomllib
import warnings
from pathlib import Path

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.errors import DataQualityWarning, InputError, where
from walkcomfort.routes.weathersource import (
    WEATHER_COLUMNS,
    WeatherSource,
    add_irradiance,
    standard_pressure_hpa,
    utc_index,
)

#: The first bytes of a Parquet file.
PARQUET_MAGIC = b"PAR1"
#: Keys of a column-map file besides those of a manifest ``[[source]]`` table.
MAP_EXTRA_KEYS = ("timezone", "wind_height_m")


def read_mapped_logger(path: Path, map_path: str | os.PathLike) -> tuple[pd.DataFrame, float | None]:
    """Read a logger CSV through a column map (see :meth:`LoggerSeries.from_file`).

    Returns
    -------
    (DataFrame, wind height [m] or None)
        UTC index ``time``; columns of the session weather reader (``t_air_c``, ``rh_pct``,
        ``wind_ms``, ``pressure_hpa`` where mapped).
    """
    from walkcomfort.session.manifest import SCHEMA, parse_manifest
    from walkcomfort.session.readers import read_source

    map_path = Path(map_path)
    try:
        spec = tomllib.loads(map_path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise InputError("column map file not found", where=map_path, fix="give the path of a .toml map") from None
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise InputError(f"not valid TOML ({exc})", where=map_path,
                         fix="write the map as TOML, e.g. [columns] time = \"DateTime\"") from None
    tz = spec.pop("timezone", None)
    height = spec.pop("wind_height_m", None)
    if spec.get("time_zone", "local") == "local" and tz is None:
        raise InputError("naive logger times are read in the local zone, but the map names none", where=map_path,
                         fix='add timezone = "Europe/Madrid" (IANA), or time_zone = "UTC" if the logger runs on UTC')
    source = {"kind": "weather", "path": path.name, "device": "logger", "format": "csv", **spec}
    # the manifest validator wants the GPS track a walk is laid along; this one is never read
    track = {"kind": "gps", "path": path.name, "device": "gps", "format": "csv"}
    manifest = {"schema": SCHEMA, "session": {"id": "weather", "participant": "-", "timezone": tz or "UTC"},
                "source": [source, track]}
    if height is not None:
        manifest["sensors"] = {"wind_height_m": height}
    session = parse_manifest(manifest, path.parent, manifest_name=str(map_path))
    df, meta = read_source(session.sources[0], session)
    q = meta.get("quarantine")
    if q is not None and len(q):
        warnings.warn(f"{path}: {len(q)} logger rows were set aside ({', '.join(sorted(set(q['reason'])))[:120]})",
                      DataQualityWarning, stacklevel=3)
    return df, session.sensors.get("wind_height_m") if height is not None else None


def read_timeline_weather(path: Path) -> tuple[pd.DataFrame, float | None]:
    """The weather columns of an ingested timeline Parquet and its session's wind height [m]."""
    from walkcomfort._io import read_parquet_metadata

    try:
        df = pd.read_parquet(path)
    except Exception as exc:  # pyarrow raises several kinds on damaged files
        raise InputError(f"cannot read the Parquet file ({type(exc).__name__})", where=path,
                         fix="give a timeline.parquet written by walkcomfort ingest") from None
    meta = read_parquet_metadata(path)
    sess = meta.get("session", {}) if isinstance(meta, dict) else {}
    return df, sess.get("wind_height_m")


def read_canonical_csv(path: Path) -> pd.DataFrame:
    """A CSV already in our columns: ``time`` (ISO 8601 with offset) and ``t_air_c, rh_pct, wind_ms`` [, …]."""
    try:
        df = pd.read_csv(path)
    except (pd.errors.ParserError, UnicodeDecodeError, pd.errors.EmptyDataError) as exc:
        raise InputError(f"cannot read it as a logger CSV ({' '.join(str(exc).split())[:120]})", where=path,
                         fix="give a CSV with a header line, or name its format with --weather-format") from None
    if C.TIME not in df.columns:
        raise InputError(f"no '{C.TIME}' column (columns: {list(df.columns)[:8]}) and the content is not a known "
                         "weather-file format", where=path,
                         fix="map the logger's columns with --weather-map MAP.toml (see the README), or name the "
                             "file's format with --weather-format")
    t = pd.to_datetime(df[C.TIME], errors="coerce", utc=False, format="ISO8601")
    if t.isna().any():
        row = int(np.flatnonzero(t.isna().to_numpy())[0])
        raise InputError(f"time {df[C.TIME].iloc[row]!r} is not an ISO 8601 date-time", where=where(path, row=row + 2),
                         fix="write times like 2026-07-15T15:00:00+02:00, or map the columns with --weather-map")
    if getattr(t.dt, "tz", None) is None:
        raise InputError("logger times have no UTC offset", where=path,
                         fix="write times with an offset, e.g. 2026-07-15T15:00:00+02:00, or give --weather-map "
                             "with the logger's timezone")
    return df.drop(columns=[C.TIME]).set_index(pd.DatetimeIndex(t).tz_convert("UTC").rename(C.TIME))


class LoggerSeries(WeatherSource):
    """A measured weather series (a logger on site), interpolated to the walk.

    Parameters
    ----------
    data : DataFrame
        tz-aware time index; columns ``t_air_c`` [°C], ``rh_pct`` [%], ``wind_ms``
        [m s⁻¹]; optional ``ghi_wm2`` [W m⁻²] (split by Erbs) and ``pressure_hpa``.
        Without ``ghi_wm2`` the sky is taken as clear (or ``cloud_frac``).
    wind_height_m : float
        Height of the wind sensor [m].
    cloud_frac : float, optional
        Cloud cover 0…1 when the logger has no pyranometer.
    source : str
        Where the series came from (for messages).
    max_gap_s : float, default 900
        Refuse to interpolate across a hole in the series longer than this [s].
    """

    def __init__(self, data: pd.DataFrame, wind_height_m: float, cloud_frac: float | None = None,
                 source: str = "logger series", max_gap_s: float = 900.0):
        if not isinstance(data.index, pd.DatetimeIndex) or data.index.tz is None:
            raise InputError("the logger series needs a tz-aware time index", where=source,
                             fix="give times with a UTC offset")
        need = [C.T_AIR_C, C.RH_PCT, C.WIND_MS]
        missing = [c for c in need if c not in data.columns]
        if missing:
            raise InputError(f"the logger series lacks columns {missing}", where=source,
                             fix=f"give columns {need} (optional ghi_wm2, pressure_hpa)")
        if not wind_height_m or not wind_height_m > 0:
            raise InputError(f"logger wind height {wind_height_m!r} m is not positive", where=source,
                             fix="state the wind sensor height in metres")
        keep = [c for c in (*need, C.GHI_WM2, C.PRESSURE_HPA) if c in data.columns]
        d = data[keep].apply(pd.to_numeric, errors="coerce").sort_index()
        d.index = d.index.tz_convert("UTC")
        self.quarantine = d[d[need].isna().any(axis=1)]
        if len(self.quarantine):
            warnings.warn(f"{source}: {len(self.quarantine)} logger rows lack a value and are not used",
                          DataQualityWarning, stacklevel=2)
        self.data = d.dropna(subset=need)
        if len(self.data) < 2:
            raise InputError(f"the logger series has {len(self.data)} usable rows, at least 2 are needed",
                             where=source, fix="give a longer series")
        self.wind_height_m = float(wind_height_m)
        self.cloud_frac = cloud_frac
        self.source = source
        self.max_gap_s = float(max_gap_s)
        self.label = f"logger {source}"
        self.notices = [] if C.GHI_WM2 in self.data.columns else [
            "the logger series has no global irradiance: the sun is taken from the clear-sky model"
            + (f" scaled for cloud {cloud_frac:g}" if cloud_frac is not None else "")]

    @classmethod
    def from_file(cls, path, wind_height_m: float | None = None, cloud_frac: float | None = None,
                  column_map: str | os.PathLike | None = None) -> LoggerSeries:
        """A logger series from a file.

        Parameters
        ----------
        path : path
            A timeline Parquet (``walkcomfort ingest``), a CSV with a ``time`` column (ISO 8601
            with offset) and canonical columns, or — with ``column_map`` — any logger CSV.
        wind_height_m : float, optional
            Wind sensor height [m]; default from the timeline's session or the map.
        cloud_frac : float, optional
            Cloud cover 0…1 when the series has no pyranometer.
        column_map : path, optional
            A TOML file with the keys of a session manifest's weather ``[[source]]`` table
            (``[columns]``, ``[units]``, ``time_zone``, ``time_format``, ``delimiter``, ``decimal``,
            ``na_values``), plus ``timezone`` (IANA, for naive local times) and ``wind_height_m``.
        """
        path = Path(path)
        if not path.is_file():
            raise InputError("logger file does not exist", where=path, fix="check the path")
        if column_map is not None:
            df, map_height = read_mapped_logger(path, column_map)
            wind_height_m = wind_height_m if wind_height_m is not None else map_height
        elif path.read_bytes()[:4] == PARQUET_MAGIC:
            df, sess_height = read_timeline_weather(path)
            wind_height_m = wind_height_m if wind_height_m is not None else sess_height
        else:
            df = read_canonical_csv(path)
        if wind_height_m is None:
            raise InputError("the wind sensor height is not known", where=path,
                             fix="state it (--logger-wind-height 1.1, or wind_height_m in the --weather-map file)")
        return cls(df, wind_height_m=float(wind_height_m), cloud_frac=cloud_frac, source=str(path))

    def conditions(self, times, lat: float, lon: float, elev_m: float = 0.0) -> pd.DataFrame:
        times = utc_index(times)
        idx_ns = self.data.index.as_unit("ns").asi8
        t_ns = times.as_unit("ns").asi8
        if t_ns.min() < idx_ns[0] or t_ns.max() > idx_ns[-1]:
            raise InputError(f"the walk ({times.min().isoformat()} … {times.max().isoformat()}) is outside the logger "
                             f"series ({self.data.index[0].isoformat()} … {self.data.index[-1].isoformat()})",
                             where=self.source, fix="choose a departure within the logged period")
        gaps = np.diff(idx_ns) / 1e9
        j = np.clip(np.searchsorted(idx_ns, t_ns, side="right") - 1, 0, len(gaps) - 1)
        if len(gaps) and (gaps[j] > self.max_gap_s).any():
            k = int(np.flatnonzero(gaps[j] > self.max_gap_s)[0])
            raise InputError(f"the walk at {times[k].isoformat()} falls in a {gaps[j][k]:.0f} s hole in the logger "
                             f"series (max {self.max_gap_s:g} s)", where=self.source,
                             fix="choose another departure or fill the series")
        out = pd.DataFrame(index=times)
        for c in self.data.columns:
            v = self.data[c].to_numpy(float)
            ok = np.isfinite(v)
            out[c] = np.interp(t_ns, idx_ns[ok], v[ok]) if ok.sum() >= 2 else np.nan
        if C.PRESSURE_HPA not in out.columns or out[C.PRESSURE_HPA].isna().all():
            out[C.PRESSURE_HPA] = standard_pressure_hpa(elev_m)
        if C.GHI_WM2 in out.columns:
            g = np.clip(out.pop(C.GHI_WM2).to_numpy(float), 0.0, None)
            add_irradiance(out, times, lat, lon, elev_m, ghi=g)
        else:
            add_irradiance(out, times, lat, lon, elev_m, cloud_frac=self.cloud_frac)
        out = out[list(WEATHER_COLUMNS)]
        out.attrs["wind_height_m"] = self.wind_height_m
        out.attrs["weather"] = self.label
        return out
