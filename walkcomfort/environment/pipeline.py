"""Add the thermal environment to a timeline: sun, irradiance, shade, sky view, Tmrt, UTCI.

One code path for recorded and planned walks:

* :func:`add_environment` — a recorded timeline (``walkcomfort ingest``): Tmrt from the
  globe thermometer (ISO 7726) where a globe reading is present, otherwise from the
  six-direction fluxes;
* :func:`add_planned_environment` — a simulated timeline (``walkcomfort.routes``):
  weather columns given, no globe, Tmrt always from fluxes.

Both arrange the timeline's columns for :func:`walkcomfort.environment.chain.environment_columns`
— the one chain every caller uses, where the physics is put together and its decisions
(where the sun is computed, the trees' month, the wind height, low sun) are documented —
and return a new DataFrame (the input is not modified) with the columns of the
environment contract in DEVELOPERS.md and ``attrs["environment"]`` recording every
parameter, the Linke turbidity used, and the QA counts.

Assumptions stated once (see the modules for sources): no scene means open ground
(no shade, sky view 1); the ground is flat; wind measured at the sensor height is
brought to 10 m by the log law with z0 = 0.01 m (the UTCI procedure's value, not
the street's roughness); shade and sky view are for a point at ``z_m`` (1.1 m, the
centre of a standing body); the sun is computed at the scene's site.

Caution: Tmrt and UTCI here describe exposure; they are not heat-health advice.
For field work in heat follow local occupational-health guidance and stop walks
when it says so; for design decisions defer to local codes and licensed practice.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.environment import utci as _utci
from walkcomfort.environment.chain import BODY_HEIGHT_M, ENV_COLUMNS, environment_columns
from walkcomfort.environment.indices import EXTRA_INDICES, extra_columns
from walkcomfort.environment.scene import Scene
from walkcomfort.errors import InputError

__all__ = ["BODY_HEIGHT_M", "ENV_COLUMNS", "add_environment", "add_planned_environment"]


def _session_value(df, kwargs_value, key):
    if kwargs_value is not None:
        return kwargs_value
    return (df.attrs.get("session") or {}).get(key)


def _align_irradiance(irr: pd.DataFrame, index: pd.DatetimeIndex) -> pd.DataFrame:
    """Measured/weather-file irradiance on the timeline's rows (positional if same index, else by time)."""
    if C.GHI_WM2 not in irr.columns:
        raise InputError(f"irradiance table has no '{C.GHI_WM2}' column (columns: {list(irr.columns)})",
                         where="add_environment(irradiance=...)",
                         fix=f"give a DataFrame with '{C.GHI_WM2}' (and optionally '{C.DNI_WM2}', '{C.DHI_WM2}')")
    cols = [c for c in (C.GHI_WM2, C.DNI_WM2, C.DHI_WM2) if c in irr.columns]
    if len(irr) == len(index) and irr.index.equals(index):
        return irr[cols].apply(pd.to_numeric, errors="coerce").set_axis(index)
    if not isinstance(irr.index, pd.DatetimeIndex) or irr.index.tz is None:
        raise InputError("irradiance table needs a tz-aware time index", where="add_environment(irradiance=...)",
                         fix="index it by UTC time (or give it the timeline's own index)")
    src = irr[cols].apply(pd.to_numeric, errors="coerce")
    src = src[~src.index.duplicated(keep="first")].sort_index()
    t_src = src.index.tz_convert("UTC").as_unit("ns").asi8.astype(float)
    t_dst = index.tz_convert("UTC").as_unit("ns").asi8.astype(float)
    out = {}
    for c in cols:
        v = src[c].to_numpy(dtype=float)
        ok = np.isfinite(v)
        if ok.sum() < 2:
            out[c] = np.full(len(index), np.nan)
            continue
        # linear in time, inside the measured span only (no extrapolation)
        vals = np.interp(t_dst, t_src[ok], v[ok])
        vals[(t_dst < t_src[ok][0]) | (t_dst > t_src[ok][-1])] = np.nan
        out[c] = vals
    return pd.DataFrame(out, index=index)


def add_environment(timeline_df: pd.DataFrame, scene: Scene | None = None, irradiance="clearsky", *,
                    use_globe: bool = True, wind_height_m: float | None = None,
                    globe_diameter_m: float | None = None, globe_emissivity: float | None = None,
                    globe_height_m: float | None = None, z_m: float = BODY_HEIGHT_M, n_sectors: int = 36,
                    svf_radius_m: float = 200.0, z0_m: float = _utci.Z0_UTCI_M, overwrite: bool = False,
                    flux_options: dict | None = None, crown_model: str = "per_crossing",
                    inside_buildings: str = "flag", warn: bool = True, indices=()) -> pd.DataFrame:
    """Sun, irradiance, shade, sky view, Tmrt and UTCI for every row of a timeline.

    Parameters
    ----------
    timeline_df : DataFrame
        A timeline: tz-aware time index; ``lat, lon`` [°] per row (or ``x_m, y_m`` in the
        scene's frame), ``t_air_c, rh_pct, wind_ms`` and optionally ``t_globe_c``,
        ``pressure_hpa``, ``elev_m``. ``attrs["session"]`` supplies ``wind_height_m``,
        ``globe_diameter_m``, ``globe_emissivity`` (and ``timezone`` for the month).
    scene : Scene, optional
        Obstacles for shade and sky view; none means open ground.
    irradiance : "clearsky" or DataFrame
        ``"clearsky"``: Ineichen–Perez clear sky (pvlib) with the site's monthly Linke
        turbidity. A DataFrame of irradiance *in the open* (a rooftop or station
        pyranometer, a weather file — not a sensor carried into the shade): ``ghi_wm2`` (with ``dni_wm2`` and
        ``dhi_wm2`` if known, otherwise split by Erbs), either on the timeline's own index
        or on its own time index (interpolated linearly inside its span).
    use_globe : bool, default True
        Take Tmrt from ``t_globe_c`` where present (ISO 7726).
    wind_height_m : float, optional
        Height of the wind sensor [m]; default ``attrs["session"]["wind_height_m"]``.
    globe_diameter_m, globe_emissivity, globe_height_m : float, optional
        Globe thermometer; default from ``attrs["session"]``. Wind at the globe is taken
        as the wind at the sensor, brought to the globe height by the log law when the
        two heights differ.
    z_m : float, default 1.1
        Height of the point that must see the sun and sky [m].
    n_sectors : int, default 36
        Azimuth sectors of the sky view factor.
    svf_radius_m : float, default 200
        Farthest obstacle considered for the sky view [m].
    z0_m : float, default 0.01
        Roughness length of the 10 m wind conversion [m].
    overwrite : bool, default False
        Replace environment columns already in the input (otherwise an error).
    flux_options : dict, optional
        Keyword arguments for :func:`walkcomfort.environment.tmrt.outdoor_fluxes`
        (albedo, emissivities, surface temperature excess).
    crown_model : {"per_crossing", "path_length"}
        How crowns attenuate the beam (see :func:`walkcomfort.environment.shade.beam_transmittance`).
    inside_buildings : {"flag", "snap"}
        Rows whose position falls inside a building footprint (usually GPS error in a
        street canyon) are always flagged in ``qa_inside_building``; ``"snap"`` also moves
        them 0.5 m outside the nearest wall for shade and sky view (lat/lon are not changed).
    warn : bool, default True
        Warn (ValidityRangeWarning) when rows fall outside the UTCI validity range.
    indices : iterable of str, optional
        Also ``"pet"`` and/or ``"wbgt"`` (see :func:`walkcomfort.environment.chain.environment_columns`).

    Returns
    -------
    DataFrame
        The input's columns plus ``sun_elev_deg, sun_zenith_deg, sun_azim_deg``,
        ``ghi_wm2, dni_wm2, dhi_wm2`` [W m⁻²], ``beam_trans_frac``, ``shade_frac`` (= 1 −
        transmittance; 1 at night), ``svf``, ``sky_frac_crowns``, ``tmrt_c`` [°C],
        ``tmrt_source`` ("globe" | "fluxes"; string dtype, missing = NA), ``wind10_ms``,
        ``utci_c`` [°C], ``utci_band`` (string dtype), ``qa_utci_out_of_range``, ``qa_wind_clamped``,
        ``qa_inside_building``. Same index and
        attrs, plus ``attrs["environment"]``.
    """
    df = timeline_df
    if not isinstance(df.index, pd.DatetimeIndex) or df.index.tz is None:
        raise InputError("the timeline's index is not a tz-aware time index", where="add_environment",
                         fix="index the timeline by UTC time (as `walkcomfort ingest` writes it)")
    # PET/WBGT of an earlier run go too (recomputed only when asked again): never stale next to a new chain
    present = [c for c in (*ENV_COLUMNS, *extra_columns(EXTRA_INDICES)) if c in df.columns]
    if present and not overwrite:
        raise InputError(f"the timeline already has environment columns {present}", where="add_environment",
                         fix="pass overwrite=True to recompute them, or drop them first")
    weather = df.reindex(columns=[C.T_AIR_C, C.RH_PCT, C.WIND_MS, C.PRESSURE_HPA])
    if isinstance(irradiance, pd.DataFrame):
        weather = pd.concat([weather, _align_irradiance(irradiance, df.index)], axis=1)
    elif not (isinstance(irradiance, str) and irradiance == "clearsky"):
        got = repr(irradiance) if isinstance(irradiance, str) else type(irradiance).__name__
        raise InputError(f"irradiance must be 'clearsky' or a DataFrame, got {got}",
                         where="add_environment", fix="pass irradiance='clearsky' or a table of ghi_wm2")
    wind_h = _session_value(df, wind_height_m, "wind_height_m")
    if wind_h is None and C.WIND_MS in df.columns and df[C.WIND_MS].notna().any():
        raise InputError("the wind sensor height is not known", where="add_environment",
                         fix="set [sensors] wind_height_m in session.toml or pass wind_height_m=")
    globe = None
    if use_globe and C.T_GLOBE_C in df.columns and df[C.T_GLOBE_C].notna().any():
        globe = _globe(df, globe_diameter_m, globe_emissivity, globe_height_m)
        weather[C.T_GLOBE_C] = df[C.T_GLOBE_C]
    env = environment_columns(df.index, df.reindex(columns=[C.LON, C.LAT, C.X_M, C.Y_M, C.ELEV_M, C.SPEED_MS]), weather,
                              anemometer=_session_value(df, None, "anemometer"),
                              scene=scene, wind_height_m=wind_h, z_m=z_m, globe=globe, n_sectors=n_sectors,
                              svf_radius_m=svf_radius_m, z0_m=z0_m, crown_model=crown_model,
                              inside_buildings=inside_buildings, flux_options=flux_options, warn=warn,
                              indices=indices)
    out = df.drop(columns=present) if present else df.copy()
    out = pd.concat([out, env.set_axis(df.index)], axis=1)
    out.attrs = dict(df.attrs)
    out.attrs["environment"] = env.attrs["environment"]
    if isinstance(irradiance, pd.DataFrame):
        out.attrs["environment"]["irradiance"]["source"] = "table"
    return out


def _globe(df, diameter_m, emissivity, height_m) -> dict:
    """The globe thermometer of the manifest (or the arguments); never guessed."""
    d = _session_value(df, diameter_m, "globe_diameter_m")
    eps = _session_value(df, emissivity, "globe_emissivity")
    if d is None or eps is None:
        raise InputError("globe temperature is present but the globe's diameter/emissivity are not known",
                         where="add_environment",
                         fix="set [sensors] globe_diameter_m and globe_emissivity in session.toml")
    return {"diameter_m": float(d), "emissivity": float(eps),
            "height_m": _session_value(df, height_m, "globe_height_m"),
            "type": _session_value(df, None, "globe_type")}


def add_planned_environment(timeline_df: pd.DataFrame, scene: Scene | None = None, irradiance=None,
                            **kwargs) -> pd.DataFrame:
    """The environment of a simulated (planned) walk: weather given, Tmrt from fluxes.

    Same code path as :func:`add_environment` with ``use_globe=False``. Irradiance:
    ``irradiance`` if given, else the timeline's own ``ghi_wm2`` (with ``dni_wm2``,
    ``dhi_wm2`` if present; those columns are moved out of the input), else clear sky.
    Positions come from ``lat``/``lon`` projected into the scene's frame, or from
    ``x_m``/``y_m`` when there is no lat/lon.

    Parameters
    ----------
    timeline_df : DataFrame
        Rows with time index, positions and ``t_air_c, rh_pct, wind_ms``;
        ``attrs["session"]["wind_height_m"]`` or ``wind_height_m=`` for the wind.
    scene : Scene, optional
        Obstacles (with a scheme already applied).
    irradiance : "clearsky", DataFrame, optional
        See :func:`add_environment`.
    **kwargs
        Passed to :func:`add_environment`.

    Returns
    -------
    DataFrame
        As :func:`add_environment`.
    """
    missing = [c for c in (C.T_AIR_C, C.RH_PCT, C.WIND_MS) if c not in timeline_df.columns]
    if missing:
        raise InputError(f"a planned walk needs weather columns; missing {missing}", where="add_planned_environment",
                         fix="attach weather to the simulated timeline first (routes.weather)")
    base = timeline_df
    if irradiance is None:
        own = [c for c in (C.GHI_WM2, C.DNI_WM2, C.DHI_WM2) if c in timeline_df.columns]
        if C.GHI_WM2 in own:
            irradiance = timeline_df[own]
            base = timeline_df.drop(columns=own)
            base.attrs = dict(timeline_df.attrs)
        else:
            irradiance = "clearsky"
    kwargs.setdefault("use_globe", False)
    return add_environment(base, scene=scene, irradiance=irradiance, **kwargs)

