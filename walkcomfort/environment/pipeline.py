"""Add the thermal environment to a timeline: sun, irradiance, shade, sky view, Tmrt, UTCI.

One code path for recorded and planned walks:

* :func:`add_environment` — a recorded timeline (``walkcomfort ingest``): Tmrt from the
  globe thermometer (ISO 7726) where a globe reading is present, otherwise from the
  six-direction fluxes;
* :func:`add_planned_environment` — a simulated timeline (``walkcomfort.routes``):
  weather columns given, no globe, Tmrt always from fluxes.

Both return a new DataFrame (the input is not modified) with the columns of the
environment contract in DEVELOPERS.md and ``attrs["environment"]`` recording every
parameter, the Linke turbidity used, and the QA counts.

Assumptions stated once (see the modules for sources): no scene means open ground
(no shade, sky view 1); the ground is flat; wind measured at the sensor height is
brought to 10 m by the log law with z0 = 0.01 m (the UTCI procedure's value, not
the street's roughness); shade and sky view are for a point at ``z_m`` (1.1 m, the
centre of a standing body).

Caution: Tmrt and UTCI here describe exposure; they are not heat-health advice.
For field work in heat follow local occupational-health guidance and stop walks
when it says so; for design decisions defer to local codes and licensed practice.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.environment import shade as _shade
from walkcomfort.environment import skyview as _skyview
from walkcomfort.environment import sun as _sun
from walkcomfort.environment import tmrt as _tmrt
from walkcomfort.environment import utci as _utci
from walkcomfort.environment.scene import Scene
from walkcomfort.errors import InputError

#: Columns this stage adds (and owns).
ENV_COLUMNS = (C.SUN_ELEV_DEG, C.SUN_ZENITH_DEG, C.SUN_AZIM_DEG, C.GHI_WM2, C.DNI_WM2, C.DHI_WM2,
               C.SHADE_FRAC, C.BEAM_TRANS_FRAC, C.SVF, C.SKY_VIEW_CROWN_FRAC, C.TMRT_C, C.TMRT_SOURCE,
               C.WIND10_MS, C.UTCI_C, C.UTCI_BAND, C.QA_UTCI_RANGE, C.QA_WIND_CLAMPED, C.QA_INSIDE_BUILDING)

#: Default height of the point that must see the sun and the sky [m] (centre of a standing body).
BODY_HEIGHT_M = 1.1
#: Rows in one cell of this grid share one sky-view computation, made at the first row's real
#: position [m]: SVF changes slowly with place (and not with time), and GPS positions are
#: uncertain by several metres anyway.
SVF_GRID_M = 2.0


def _col(df: pd.DataFrame, name: str) -> np.ndarray:
    if name not in df.columns:
        return np.full(len(df), np.nan)
    return pd.to_numeric(df[name], errors="coerce").to_numpy(dtype=float, na_value=np.nan)


def _session_value(df, kwargs_value, key):
    if kwargs_value is not None:
        return kwargs_value
    val = (df.attrs.get("session") or {}).get(key)
    return None if val is None else val


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


def _positions(df: pd.DataFrame, scene: Scene | None):
    """Local x/y of every row: projected from lat/lon into the scene's frame, else x_m/y_m."""
    lat, lon = _col(df, C.LAT), _col(df, C.LON)
    if scene is not None and np.isfinite(lat).any():
        x, y = scene.project(lon, lat)
        return np.asarray(x, float), np.asarray(y, float)
    return _col(df, C.X_M), _col(df, C.Y_M)


def _sky_view(scene, x, y, z, n_sectors, radius_m):
    ok = np.isfinite(x) & np.isfinite(y)
    svf = np.full(x.size, np.nan)
    crowns = np.full(x.size, np.nan)
    if not ok.any():
        return svf, crowns
    xs, ys, zs = x[ok], y[ok], z[ok]
    key = np.column_stack([np.floor(xs / SVF_GRID_M), np.floor(ys / SVF_GRID_M), np.round(zs, 2)])
    _, first, inv = np.unique(key, axis=0, return_index=True, return_inverse=True)
    # each grid cell is computed at one real position of the walk (its first row), never at
    # a cell centre, which could fall inside a wall
    res = _skyview.sky_view_factor(scene, xs[first], ys[first], z_m=zs[first], n_sectors=n_sectors,
                                   radius_m=radius_m)
    svf[ok] = res[C.SVF].to_numpy()[inv.reshape(-1)]
    crowns[ok] = res[C.SKY_VIEW_CROWN_FRAC].to_numpy()[inv.reshape(-1)]
    return svf, crowns


def add_environment(timeline_df: pd.DataFrame, scene: Scene | None = None, irradiance="clearsky", *,
                    use_globe: bool = True, wind_height_m: float | None = None,
                    globe_diameter_m: float | None = None, globe_emissivity: float | None = None,
                    globe_height_m: float | None = None, z_m: float = BODY_HEIGHT_M, n_sectors: int = 36,
                    svf_radius_m: float = 200.0, z0_m: float = _utci.Z0_UTCI_M, overwrite: bool = False,
                    flux_options: dict | None = None, crown_model: str = "per_crossing",
                    inside_buildings: str = "flag", warn: bool = True) -> pd.DataFrame:
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
    present = [c for c in ENV_COLUMNS if c in df.columns]
    if present and not overwrite:
        raise InputError(f"the timeline already has environment columns {present}", where="add_environment",
                         fix="pass overwrite=True to recompute them, or drop them first")
    if scene is not None and not isinstance(scene, Scene):
        raise InputError(f"scene must be a Scene (load_scene), got {type(scene).__name__}", where="add_environment",
                         fix="load it with walkcomfort.environment.scene.load_scene(path)")
    n = len(df)
    idx = df.index
    lat, lon = _col(df, C.LAT), _col(df, C.LON)
    x, y = _positions(df, scene)
    if not np.isfinite(lat).any():
        if scene is None or not np.isfinite(x).any():
            raise InputError("rows have neither lat/lon nor x_m/y_m with a scene", where="add_environment",
                             fix="add lat/lon per row (GPS), or x_m/y_m together with the scene they refer to")
        lon, lat = (np.asarray(v, float) for v in scene.unproject(x, y))
    elev = _col(df, C.ELEV_M)
    site_elev = float(np.nanmedian(elev)) if np.isfinite(elev).any() else (
        float(scene.site.get("elev_m", 0.0)) if scene is not None else 0.0)
    elev = np.where(np.isfinite(elev), elev, site_elev)
    t_air, rh, wind = _col(df, C.T_AIR_C), _col(df, C.RH_PCT), _col(df, C.WIND_MS)

    # --- sun -------------------------------------------------------------------------
    pos = _sun.solar_position(idx, lat, lon, elev_m=elev, pressure_hpa=_col(df, C.PRESSURE_HPA), t_air_c=t_air)
    s_elev = pos[C.SUN_ELEV_DEG].to_numpy()
    s_zen = pos[C.SUN_ZENITH_DEG].to_numpy()
    s_az = pos[C.SUN_AZIM_DEG].to_numpy()

    # --- irradiance in the open --------------------------------------------------------
    env_meta: dict = {}
    if isinstance(irradiance, str):
        if irradiance != "clearsky":
            raise InputError(f"irradiance must be 'clearsky' or a DataFrame, got {irradiance!r}",
                             where="add_environment", fix="pass irradiance='clearsky' or a table of ghi_wm2")
        cs = _sun.clearsky_irradiance(idx, lat, lon, elev_m=elev, position=pos)
        ghi, dni, dhi = (cs[c].to_numpy() for c in (C.GHI_WM2, C.DNI_WM2, C.DHI_WM2))
        env_meta["irradiance"] = {"source": "clearsky (Ineichen-Perez, pvlib)",
                                  "linke_turbidity": cs.attrs["linke_turbidity"]}
    elif isinstance(irradiance, pd.DataFrame):
        irr = _align_irradiance(irradiance, idx)
        ghi = irr[C.GHI_WM2].to_numpy(dtype=float)
        if C.DNI_WM2 in irr.columns and C.DHI_WM2 in irr.columns:
            dni, dhi = irr[C.DNI_WM2].to_numpy(float), irr[C.DHI_WM2].to_numpy(float)
            method = "given"
        else:
            dec = _sun.decompose_ghi(ghi, s_zen, idx)
            dni, dhi = dec[C.DNI_WM2].to_numpy(), dec[C.DHI_WM2].to_numpy()
            method = "Erbs et al. (1982) decomposition of GHI"
        up = s_elev > 0
        dni = np.where(up | np.isnan(dni), dni, 0.0)  # no beam below the horizon, whatever the file says
        env_meta["irradiance"] = {"source": "table", "split": method,
                                  "rows_without_irradiance": int((~np.isfinite(ghi)).sum())}
    else:
        raise InputError(f"irradiance must be 'clearsky' or a DataFrame, got {type(irradiance).__name__}",
                         where="add_environment", fix="pass irradiance='clearsky' or a table of ghi_wm2")

    # --- shade and sky view -------------------------------------------------------------------
    month = _local_month(idx, (df.attrs.get("session") or {}).get("timezone"))
    zz = np.full(n, float(z_m))
    if inside_buildings not in ("flag", "snap"):
        raise InputError(f"inside_buildings must be 'flag' or 'snap', got {inside_buildings!r}",
                         where="add_environment", fix="use 'flag' (default) or 'snap'")
    inside = np.zeros(n, dtype=bool)
    if scene is not None:
        if inside_buildings == "snap":
            x, y, inside = scene.snap_outside(x, y)
        else:
            inside = scene.inside_buildings(x, y)
        trans = _shade.beam_transmittance(scene, x, y, s_elev, s_az, z_m=zz, month=month, crown_model=crown_model)
        svf, crowns = _sky_view(scene, x, y, zz, n_sectors, svf_radius_m)
    else:  # open ground
        ok = np.isfinite(s_elev)
        trans = np.where(ok, (s_elev > 0).astype(float), np.nan)
        svf = np.where(np.isfinite(lat), 1.0, np.nan)
        crowns = svf.copy()

    # --- mean radiant temperature --------------------------------------------------------------
    fo = dict(flux_options or {})
    tmrt_flux = np.asarray(_tmrt.tmrt_outdoor(s_elev, dni, dhi, trans, svf, t_air, rh, **fo), dtype=float)
    tmrt = tmrt_flux.copy()
    source = np.where(np.isfinite(tmrt_flux), "fluxes", None).astype(object)
    wind_h = _session_value(df, wind_height_m, "wind_height_m")
    has_wind = np.isfinite(wind).any()
    if has_wind and wind_h is None:
        raise InputError("the wind sensor height is not known", where="add_environment",
                         fix="set [sensors] wind_height_m in session.toml or pass wind_height_m=")
    tg = _col(df, C.T_GLOBE_C)
    n_globe = 0
    if use_globe and np.isfinite(tg).any():
        d = _session_value(df, globe_diameter_m, "globe_diameter_m")
        eps = _session_value(df, globe_emissivity, "globe_emissivity")
        if d is None or eps is None:
            raise InputError("globe temperature is present but the globe's diameter/emissivity are not known",
                             where="add_environment",
                             fix="set [sensors] globe_diameter_m and globe_emissivity in session.toml")
        gh = _session_value(df, globe_height_m, "globe_height_m")
        v_globe = wind.copy()
        if gh is not None and wind_h is not None and abs(float(gh) - float(wind_h)) > 1e-9:
            v_globe = wind * np.log(float(gh) / z0_m) / np.log(float(wind_h) / z0_m)
        tm_g = np.asarray(_tmrt.tmrt_from_globe(tg, t_air, v_globe, float(d), float(eps)), dtype=float)
        use = np.isfinite(tm_g)
        tmrt = np.where(use, tm_g, tmrt)
        source = np.where(use, "globe", source).astype(object)
        n_globe = int(use.sum())
        env_meta["globe"] = {"diameter_m": float(d), "emissivity": float(eps),
                             "height_m": None if gh is None else float(gh), "rows": n_globe}
        # a plausibility figure for the field team: the globe against the flux model on the
        # same rows (large systematic gaps point at a lagging globe, a wrong diameter in the
        # manifest, or a scene that does not match the street)
        both = use & np.isfinite(tmrt_flux)
        if both.any():
            diff = tm_g[both] - tmrt_flux[both]
            q1, q2, q3 = (float(v) for v in np.percentile(diff, [25, 50, 75]))
            env_meta["globe"]["globe_minus_fluxes_k"] = {"q25": round(q1, 3), "median": round(q2, 3),
                                                        "q75": round(q3, 3), "rows": int(both.sum())}

    # --- UTCI ---------------------------------------------------------------------------------------
    wind10 = (np.asarray(_utci.wind_at_10m(wind, float(wind_h), z0_m=z0_m), dtype=float) if has_wind
              else np.full(n, np.nan))
    u = _utci.utci_from_conditions(t_air, tmrt, wind10, rh, warn=warn)
    utci_c = u[C.UTCI_C].to_numpy()

    out = df.drop(columns=present) if present else df.copy()
    new = {
        C.SUN_ELEV_DEG: s_elev, C.SUN_ZENITH_DEG: s_zen, C.SUN_AZIM_DEG: s_az,
        C.GHI_WM2: ghi, C.DNI_WM2: dni, C.DHI_WM2: dhi,
        C.BEAM_TRANS_FRAC: trans, C.SHADE_FRAC: 1.0 - trans, C.SVF: svf, C.SKY_VIEW_CROWN_FRAC: crowns,
        C.TMRT_C: tmrt, C.TMRT_SOURCE: pd.array(source, dtype="string"),
        C.WIND10_MS: wind10, C.UTCI_C: utci_c,
        C.UTCI_BAND: pd.array(np.asarray(_utci.utci_band(utci_c), dtype=object), dtype="string"),
        C.QA_UTCI_RANGE: u[C.QA_UTCI_RANGE].to_numpy(bool), C.QA_WIND_CLAMPED: u[C.QA_WIND_CLAMPED].to_numpy(bool),
        C.QA_INSIDE_BUILDING: inside,
    }
    out = pd.concat([out, pd.DataFrame(new, index=idx)], axis=1)
    out.attrs = dict(df.attrs)
    env_meta.update({
        "scene": None if scene is None else {"features": len(scene), "source": scene.source,
                                             "site": dict(scene.site), "crs": scene.crs.to_string()},
        "assumptions": "open ground (no shade, svf 1)" if scene is None else "flat ground, scene obstacles",
        "z_m": float(z_m), "n_sectors": int(n_sectors), "crown_model": crown_model,
        "svf_radius_m": float(svf_radius_m),
        "wind_height_m": None if wind_h is None else float(wind_h), "z0_m": float(z0_m),
        "flux_options": fo,
        "inside_buildings": inside_buildings,
        "qa_counts": {**u.attrs["qa_counts"], "tmrt_globe": n_globe, "inside_building": int(inside.sum()),
                      "tmrt_fluxes": int((source == "fluxes").sum()),
                      "tmrt_missing": int(np.isnan(tmrt).sum())},
    })
    out.attrs["environment"] = env_meta
    return out


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


def _local_month(idx: pd.DatetimeIndex, tz) -> np.ndarray:
    try:
        local = idx.tz_convert(tz) if tz else idx
    except Exception:  # an unknown zone name: months by UTC (differs at most on the month's edge)
        local = idx
    return np.asarray(local.month, dtype=float)
