"""The environment chain: sun -> irradiance -> beam shade and sky view -> Tmrt -> wind at 10 m -> UTCI.

One function, :func:`environment_columns`, puts the physics of the environment modules
together for any set of points and times. Every caller goes through it — recorded walks
and planned walks (:mod:`walkcomfort.environment.pipeline`, :mod:`walkcomfort.routes.simulate`),
the city-wide batch (:mod:`walkcomfort.network`) and the demo's truth
(:mod:`walkcomfort.demo.simulator`) — so the same points, times, scene and weather give
the same columns, bit for bit, whichever caller asks.

The steps, each in one place below (the formulas stay in their modules):

1. sun position at the site (:func:`~walkcomfort.environment.sun.solar_position`);
2. irradiance in the open: the weather's own ``ghi_wm2`` (split by Erbs when the
   direct/diffuse parts are not given) or the clear sky
   (:mod:`walkcomfort.environment.sun`);
3. direct-beam transmittance through the scene (:mod:`~walkcomfort.environment.shade`);
4. sky view factor (:mod:`~walkcomfort.environment.skyview`);
5. mean radiant temperature: the globe thermometer where one was read (by its type's
   published calibration, :mod:`~walkcomfort.environment.globe`), otherwise the
   six-direction fluxes from the sunlit and shaded ground and walls in view
   (:mod:`~walkcomfort.environment.surroundings`, :mod:`~walkcomfort.environment.surfaces`);
6. wind brought to 10 m by the log law (:func:`~walkcomfort.environment.utci.wind_at_10m`),
   the walker's own motion removed from a carried anemometer and a mast's wind brought to
   street level (:mod:`~walkcomfort.environment.wind`) — computed before step 5, whose
   surfaces need it;
7. UTCI and its stress band (:mod:`~walkcomfort.environment.utci`).

Decisions taken once for every caller
-------------------------------------
* **Where the sun is computed.** At the site (the scene's ``site``, or the centre of the
  points when there is no scene), per time. The scene's local frame already treats the
  site as one place (one meridian convergence for all azimuths), and across a town the
  sun's direction changes by about 0.01° per kilometre (1° of latitude is 111 km; from the
  geometry), far below the shade kernels' resolution of the obstacles. Refraction uses
  the weather's own ``pressure_hpa`` and ``t_air_c`` where given.
* **Month of the trees' leaf state** (``transmissivity_by_month``): the month of the
  local mean solar time at the site, UTC + longitude/15 h. Leaf phenology follows the
  local seasons — day length and temperature (Körner, C., Basler, D. (2010).
  Phenology under global warming. Science 327, 1461–1462. doi:10.1126/science.1186473;
  from memory) —, never the UTC calendar. Civil local time differs from solar time by
  at most a few hours, so the two give another month only around local midnight, when
  the sun is below the horizon and the beam is zero anyway (outside polar summer);
  solar time needs no time zone, so every caller gets the same month from the same
  position.
* **Wind sensor height.** Never guessed: when the weather has wind, ``wind_height_m``
  must be given, else an :class:`~walkcomfort.errors.InputError`. A weather file or
  station states its height (10 m for EPW and synoptic stations); a recorded walk
  states the logger's height in its manifest.
* **Low sun.** No elevation cut: the beam is traced for every sun position above the
  (refraction-corrected) horizon. Near the horizon the direct normal irradiance already
  falls to zero with the air mass in the clear-sky model (Ineichen & Perez 2002) and
  Erbs' split of a measured GHI sets it to zero above 87° zenith (Erbs et al. 1982);
  a hard cut would add a step in Tmrt that no sensor sees. The city-wide batch, whose
  tiles carry only obstacles whose shadows reach them above its lowest elevation
  considered, flags the lower sun (``qa_low_sun``) rather than changing the physics.

Caution: Tmrt and UTCI describe exposure; they are not heat-health advice. For field
work in heat follow local occupational-health guidance; for design decisions defer to
local codes and licensed practice.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.environment import globe as _globe
from walkcomfort.environment import indices as _indices
from walkcomfort.environment import shade as _shade
from walkcomfort.environment import skyview as _skyview
from walkcomfort.environment import sun as _sun
from walkcomfort.environment import surroundings as _surroundings
from walkcomfort.environment import tmrt as _tmrt
from walkcomfort.environment import utci as _utci
from walkcomfort.environment import wind as _wind
from walkcomfort.environment.geo import LocalFrame
from walkcomfort.environment.scene import Scene
from walkcomfort.errors import InputError

#: Columns the chain returns (and the environment stage owns), in this order.
ENV_COLUMNS = (C.SUN_ELEV_DEG, C.SUN_ZENITH_DEG, C.SUN_AZIM_DEG, C.GHI_WM2, C.DNI_WM2, C.DHI_WM2,
               C.SHADE_FRAC, C.BEAM_TRANS_FRAC, C.SVF, C.SKY_VIEW_CROWN_FRAC, C.SKY_DIFFUSE_FRAC, C.TMRT_C,
               C.TMRT_SOURCE,
               C.WIND10_MS, C.UTCI_C, C.UTCI_BAND, C.QA_UTCI_RANGE, C.QA_WIND_CLAMPED, C.QA_INSIDE_BUILDING)

#: Default height of the point that must see the sun and the sky [m] (centre of a standing body).
BODY_HEIGHT_M = 1.1
#: Points in one cell of this grid share one sky-view computation [m], made at a real
#: position in the cell (the lowest x, then y, of those given), never at the cell's centre,
#: which could fall inside a wall: the sky view changes slowly with place (and not with
#: time), and GPS positions are uncertain by several metres anyway.
SVF_CELL_M = 2.0
#: Search radius of the sky view [m] (see :func:`walkcomfort.environment.skyview.sky_view_factor`).
SVF_RADIUS_M = 200.0

#: Weather columns the chain reads (``t_air_c, rh_pct`` required; the rest optional).
WEATHER_COLUMNS = (C.T_AIR_C, C.RH_PCT, C.WIND_MS, C.PRESSURE_HPA, C.GHI_WM2, C.DNI_WM2, C.DHI_WM2, C.T_GLOBE_C)

_WHERE = "environment chain"

#: The decisions every caller shares (module docstring), recorded with each result.
DECISIONS = {
    "chain": "walkcomfort.environment.chain.environment_columns",
    "sun_at": "the site (per time)",
    "leaf_month": "local mean solar time at the site (UTC + lon/15 h)",
    "missing_wind_height": "refused",
    "low_sun": "no elevation cut",
}


def environment_columns(times, positions: pd.DataFrame, weather: pd.DataFrame, *, scene: Scene | None = None,
                        wind_height_m: float | None = None, grid: bool = False, site: dict | None = None,
                        z_m: float = BODY_HEIGHT_M, globe: dict | None = None, sky_view=None,
                        n_sectors: int = 36, svf_radius_m: float = SVF_RADIUS_M, svf_cell_m: float = SVF_CELL_M,
                        z0_m: float = _utci.Z0_UTCI_M, crown_model: str = "per_crossing",
                        inside_buildings: str = "flag", flux_options: dict | None = None,
                        warn: bool = True, indices=(), beam_trans=None, radiation: str = "surroundings",
                        anemometer: str | None = None, wind_profile: str | None = None) -> pd.DataFrame:
    """Sun, irradiance, shade, sky view, Tmrt, wind at 10 m and UTCI for points at times.

    Parameters
    ----------
    times : DatetimeIndex
        tz-aware instants. One per position (``grid=False``: row *i* is position *i* at
        time *i*, as along a walk) or the times of a grid (``grid=True``).
    positions : DataFrame
        ``lon, lat`` [°] (WGS84) and/or ``x_m, y_m`` [m] in the scene's frame (used only
        without lon/lat); optional ``elev_m`` [m] (for the site's elevation without a scene).
        Its index is ignored.
    weather : DataFrame
        One row per time (``grid=True``) or per row, in the same order (its index is
        ignored): ``t_air_c`` [°C], ``rh_pct`` [%], ``wind_ms`` [m s⁻¹] at ``wind_height_m``;
        optional ``pressure_hpa`` [hPa], ``ghi_wm2`` (with ``dni_wm2, dhi_wm2``) [W m⁻²]
        measured in the open (none: clear sky), ``t_globe_c`` [°C] (with ``globe``).
    scene : Scene, optional
        Obstacles for shade and sky view; none means open ground.
    wind_height_m : float, optional
        Height of the wind sensor above ground [m]; required when there is any wind.
    grid : bool, default False
        Every position at every time: rows are position-major (row ``i * T + j`` is
        position *i* at time *j*).
    site : dict, optional
        ``lat, lon, elev_m`` where the sun is computed; default the scene's site, else the
        centre of the positions' bounding box (elevation: median ``elev_m``, else 0).
    z_m : float, default 1.1
        Height of the point that must see the sun and the sky [m] (the walker's body centre).
    globe : dict, optional
        ``diameter_m, emissivity`` [-] and optionally ``height_m`` of the globe
        thermometer: Tmrt from ``t_globe_c`` wherever it is given (ISO 7726).
    sky_view : tuple of arrays, optional
        ``(svf, sky_frac_crowns)`` per position, as :func:`sky_view` gives for the same
        positions and options (a cache of the caller's; it does not change with time).
    n_sectors, svf_radius_m, svf_cell_m : optional
        Sky view: azimuth sectors, search radius [m], sharing cell [m].
    z0_m : float, default 0.01
        Roughness length of the 10 m wind conversion [m] (the UTCI procedure's value).
    crown_model : {"per_crossing", "path_length", "leaf_area"}
        How crowns attenuate the beam (:func:`walkcomfort.environment.shade.beam_transmittance`).
    inside_buildings : {"flag", "snap"}
        Positions inside a building footprint are flagged (``qa_inside_building``);
        ``"snap"`` also moves them 0.5 m outside the nearest wall for shade and sky view.
    flux_options : dict, optional
        Keyword arguments of :func:`walkcomfort.environment.tmrt.outdoor_fluxes`.
    warn : bool, default True
        Warn (ValidityRangeWarning) when rows fall outside the UTCI validity range.
    indices : iterable of str, optional
        Indices beside UTCI to add: ``"pet"`` (``pet_c, pet_class``) and/or ``"wbgt"``
        (``wbgt_c``), by :func:`walkcomfort.environment.indices.extra_index_columns`.
    beam_trans : array-like, optional
        Direct-beam transmittance per row [-], when the caller already knows it (the
        placement advisor's trials of new crowns on top of the scene's); step 3 then
        uses it instead of tracing the scene. Everything else is computed as usual.
    radiation : {"surroundings", "point"}
        ``"surroundings"`` (default): long and reflected short wave from the sunlit and
        shaded ground and walls in view, surface temperatures from their energy balance
        (:mod:`~walkcomfort.environment.surroundings`, :mod:`~walkcomfort.environment.surfaces`).
        ``"point"``: the former model, ground at the walker's own point only
        (:func:`~walkcomfort.environment.tmrt.outdoor_fluxes` with ``flux_options``), kept
        for comparison.
    anemometer : {"carried", "fixed"}, optional
        How the wind was measured on a recorded walk. ``"carried"``: the readings are air
        speed relative to the walker; UTCI gets the ambient speed with the walker's own
        motion removed (``speed_ms`` of ``positions``;
        :func:`~walkcomfort.environment.wind.ambient_from_carried`), the globe keeps the
        relative speed. Not stated: the readings are taken as ambient (recorded).
    wind_profile : {"street", "as_measured"}, optional
        ``"street"``: the wind is a station's over open terrain, brought to street level
        by :func:`~walkcomfort.environment.wind.street_equivalent_10m` from the scene's
        mean building height. Default: ``"street"`` when ``wind_height_m`` ≥ 5 m (a mast)
        and the scene has buildings, else ``"as_measured"`` (a walker's sensor is in the street).

    Returns
    -------
    DataFrame
        Index: the row times (``time``); columns :data:`ENV_COLUMNS` — ``sun_elev_deg,
        sun_zenith_deg, sun_azim_deg`` [°], ``ghi_wm2, dni_wm2, dhi_wm2`` [W m⁻²],
        ``shade_frac`` (= 1 − ``beam_trans_frac``; 1 at night), ``beam_trans_frac``,
        ``svf``, ``sky_frac_crowns`` [-], ``tmrt_c`` [°C], ``tmrt_source`` ("globe" |
        "fluxes"), ``wind10_ms`` [m s⁻¹], ``utci_c`` [°C], ``utci_band`` and the QA flags.
        ``attrs["environment"]`` records every parameter, the irradiance source and QA counts.
    """
    idx, pos, wx, at = _rows(times, positions, weather, grid)
    _check_options(scene, inside_buildings, wx[C.WIND_MS], wind_height_m)
    _check_choice(radiation, RADIATION_NOTES, "radiation")
    _check_choice(anemometer, ("carried", "fixed", None), "anemometer")
    _check_choice(wind_profile, ("street", "as_measured", None), "wind_profile")
    site = _site(site, scene, pos)
    x, y = _local_xy(pos, scene, site)
    n = len(idx)

    # 1. sun position at the site --------------------------------------------------------------
    s_elev, s_zen, s_az = _sun_position(idx, site, wx[C.PRESSURE_HPA], wx[C.T_AIR_C])
    # 2. irradiance in the open ----------------------------------------------------------------
    ghi, dni, dhi, irr_meta = _irradiance(idx, site, wx, s_elev, s_zen)
    # 3. direct-beam transmittance through the scene (positions: once each; ``at``: row -> position)
    x, y, inside = _inside_buildings(scene, x, y, inside_buildings)
    month = leaf_month(idx, site["lon"])
    if beam_trans is None:
        trans = _beam(scene, x[at], y[at], np.full(n, float(z_m)), s_elev, s_az, month, crown_model)
    else:
        trans = np.broadcast_to(np.asarray(beam_trans, dtype=float), (n,)).copy()
    # 4. sky view factor (per position; it does not change with time) -------------------------
    if sky_view is None:
        svf, crowns, diffuse = _sky_view_rows(scene, x, y, np.full(x.size, float(z_m)), n_sectors, svf_radius_m,
                                              svf_cell_m)
    else:
        svf, crowns, diffuse = _given_sky_view(sky_view, x.size)
    svf, crowns, diffuse, inside = svf[at], crowns[at], diffuse[at], inside[at]
    # 6. wind at 10 m, as UTCI expects it (ambient, street level) ---------------------------------
    wind10, wind_meta = _wind10(wx, wind_height_m, z0_m, scene, anemometer, wind_profile,
                                _num_pos(positions, C.SPEED_MS)[at] if len(positions) else None, idx)
    # 5. mean radiant temperature --------------------------------------------------------------
    if radiation == "point":
        tmrt_flux = np.asarray(_tmrt.tmrt_outdoor(s_elev, dni, dhi, trans, svf, wx[C.T_AIR_C], wx[C.RH_PCT],
                                                  **dict(flux_options or {})), dtype=float)
    else:
        tmrt_flux = _tmrt_surroundings(scene, x[at], y[at], idx, site, s_elev, s_az, ghi, dni, dhi, trans, svf,
                                       diffuse, wx, wind10, month, z_m, crown_model, n_sectors)
    tmrt, source, globe_meta = _tmrt_with_globe(tmrt_flux, wx, globe, wind_height_m, z0_m)
    # 7. UTCI and its stress band --------------------------------------------------------------
    u = _utci.utci_from_conditions(wx[C.T_AIR_C], tmrt, wind10, wx[C.RH_PCT], warn=warn)
    utci_c = u[C.UTCI_C].to_numpy()

    out = pd.DataFrame({
        C.SUN_ELEV_DEG: s_elev, C.SUN_ZENITH_DEG: s_zen, C.SUN_AZIM_DEG: s_az,
        C.GHI_WM2: ghi, C.DNI_WM2: dni, C.DHI_WM2: dhi,
        C.SHADE_FRAC: 1.0 - trans, C.BEAM_TRANS_FRAC: trans, C.SVF: svf, C.SKY_VIEW_CROWN_FRAC: crowns,
        C.SKY_DIFFUSE_FRAC: diffuse,
        C.TMRT_C: tmrt, C.TMRT_SOURCE: pd.array(source, dtype="string"),
        C.WIND10_MS: wind10, C.UTCI_C: utci_c,
        C.UTCI_BAND: pd.array(np.asarray(_utci.utci_band(utci_c), dtype=object), dtype="string"),
        C.QA_UTCI_RANGE: u[C.QA_UTCI_RANGE].to_numpy(bool), C.QA_WIND_CLAMPED: u[C.QA_WIND_CLAMPED].to_numpy(bool),
        C.QA_INSIDE_BUILDING: inside,
    }, index=idx)
    # 8. indices beside UTCI, when asked (PET, WBGT) -------------------------------------------
    for name, values in _indices.extra_index_columns(
            indices, t_air_c=wx[C.T_AIR_C], rh_pct=wx[C.RH_PCT], tmrt_c=tmrt, wind10_ms=wind10,
            pressure_hpa=wx[C.PRESSURE_HPA], sun_elev_deg=s_elev, dni_wm2=dni, dhi_wm2=dhi, beam_trans_frac=trans,
            svf=svf, t_globe_c=wx[C.T_GLOBE_C], globe=globe, z0_m=z0_m, flux_options=flux_options).items():
        out[name] = values
    meta = {**irr_meta, **({"globe": globe_meta} if globe_meta else {}), "sun_site": site, "wind": wind_meta,
            "radiation": RADIATION_NOTES.get(radiation, radiation),
            "scene": None if scene is None else {"features": len(scene), "source": scene.source,
                                                 "site": dict(scene.site), "crs": scene.crs.to_string()},
            "assumptions": "open ground (no shade, svf 1)" if scene is None else "flat ground, scene obstacles",
            "z_m": float(z_m), "n_sectors": int(n_sectors), "crown_model": crown_model,
            "svf_radius_m": float(svf_radius_m), "svf_cell_m": float(svf_cell_m),
            "wind_height_m": None if wind_height_m is None else float(wind_height_m), "z0_m": float(z0_m),
            "flux_options": dict(flux_options or {}), "inside_buildings": inside_buildings,
            "indices": list(_indices.check_indices(indices)),
            "qa_counts": {**u.attrs["qa_counts"], "tmrt_globe": int((source == "globe").sum()),
                          "inside_building": int(inside.sum()), "tmrt_fluxes": int((source == "fluxes").sum()),
                          "tmrt_missing": int(np.isnan(tmrt).sum())},
            **DECISIONS}
    out.attrs["environment"] = meta
    return out


# --- inputs -------------------------------------------------------------------------------------

def _num(frame: pd.DataFrame, name: str, n: int) -> np.ndarray:
    if name not in frame.columns:
        return np.full(n, np.nan)
    return pd.to_numeric(frame[name], errors="coerce").to_numpy(dtype=float, na_value=np.nan)


def _rows(times, positions: pd.DataFrame, weather: pd.DataFrame, grid: bool):
    """Row times and weather as flat arrays, the positions once each, and each row's position.

    A grid is spread position-major: row ``i * T + j`` is position *i* at time *j*.
    """
    idx = times if isinstance(times, pd.DatetimeIndex) else pd.DatetimeIndex(times)
    if idx.tz is None:
        raise InputError("times have no time zone", where=_WHERE,
                         fix="give tz-aware times (UTC, or localised to the site's zone)")
    idx = idx.tz_convert("UTC")
    n_pos, n_t = len(positions), len(idx)
    if len(weather) != n_t:
        raise InputError(f"weather has {len(weather)} rows for {n_t} times", where=_WHERE,
                         fix="give one weather row per time, in the same order")
    missing = [c for c in (C.T_AIR_C, C.RH_PCT) if c not in weather.columns]
    if missing:
        raise InputError(f"weather has no column {missing} (columns: {list(weather.columns)})", where=_WHERE,
                         fix=f"give at least {C.T_AIR_C}, {C.RH_PCT} (and {C.WIND_MS}) in SI units")
    pos = {c: _num(positions, c, n_pos) for c in (C.LON, C.LAT, C.X_M, C.Y_M, C.ELEV_M)}
    wx = {c: _num(weather, c, n_t) for c in WEATHER_COLUMNS}
    if C.GHI_WM2 not in weather.columns:
        wx[C.GHI_WM2] = None  # no measured irradiance: the clear sky
    if not grid:
        if n_pos != n_t:
            raise InputError(f"{n_pos} positions for {n_t} times", where=_WHERE,
                             fix="give one position per time, or grid=True for every position at every time")
        return idx.rename(C.TIME), pos, wx, np.arange(n_t)
    wx = {c: None if v is None else np.tile(v, n_pos) for c, v in wx.items()}
    idx = pd.DatetimeIndex(np.tile(idx.as_unit("ns").asi8, n_pos).astype("datetime64[ns]")).tz_localize("UTC")
    return idx.rename(C.TIME), pos, wx, np.repeat(np.arange(n_pos), n_t)


def _check_options(scene, inside_buildings: str, wind: np.ndarray, wind_height_m) -> None:
    if inside_buildings not in ("flag", "snap"):
        raise InputError(f"inside_buildings must be 'flag' or 'snap', got {inside_buildings!r}",
                         where=_WHERE, fix="use 'flag' (default) or 'snap'")
    if scene is not None and not isinstance(scene, Scene):
        raise InputError(f"scene must be a Scene (load_scene), got {type(scene).__name__}", where=_WHERE,
                         fix="load it with walkcomfort.environment.scene.load_scene(path)")
    if np.isfinite(wind).any() and wind_height_m is None:  # decision: never guessed (module docstring)
        raise InputError("the wind sensor height is not known", where=_WHERE,
                         fix="state it: [sensors] wind_height_m in session.toml for a recorded walk, "
                             "the weather source's height (10 m for a weather file) for a planned one")


def _local_xy(pos: dict, scene: Scene | None, site: dict):
    """Local x/y of every position: lon/lat projected into the scene's frame (or, on open ground,
    a frame at the site), else the given x_m/y_m."""
    has_ll = bool(np.isfinite(pos[C.LAT]).any())
    if has_ll:
        frame = scene if scene is not None else LocalFrame(site["lon"], site["lat"])
        x, y = frame.project(pos[C.LON], pos[C.LAT])
        return np.asarray(x, float), np.asarray(y, float)
    if scene is None or not np.isfinite(pos[C.X_M]).any():
        raise InputError("positions have neither lon/lat nor x_m/y_m with a scene", where=_WHERE,
                         fix="give lon/lat per row (GPS), or x_m/y_m together with the scene they refer to")
    return pos[C.X_M], pos[C.Y_M]


def _site(site: dict | None, scene: Scene | None, pos: dict) -> dict:
    """Where the sun is computed: given, the scene's site, or the centre of the positions."""
    if site is not None:
        return {"lat": float(site["lat"]), "lon": float(site["lon"]), "elev_m": float(site.get("elev_m", 0.0))}
    if scene is not None:
        return {"lat": float(scene.site["lat"]), "lon": float(scene.site["lon"]),
                "elev_m": float(scene.site.get("elev_m", 0.0))}
    lon, lat, elev = pos[C.LON], pos[C.LAT], pos[C.ELEV_M]
    ok = np.isfinite(lon) & np.isfinite(lat)
    if not ok.any():
        raise InputError("positions have neither lon/lat nor x_m/y_m with a scene", where=_WHERE,
                         fix="give lon/lat per row (GPS), or x_m/y_m together with the scene they refer to")
    return {"lat": float((lat[ok].min() + lat[ok].max()) / 2), "lon": float((lon[ok].min() + lon[ok].max()) / 2),
            "elev_m": float(np.median(elev[np.isfinite(elev)])) if np.isfinite(elev).any() else 0.0}


# --- 1. sun ---------------------------------------------------------------------------------------

def _distinct(idx: pd.DatetimeIndex, *columns: np.ndarray):
    """First row of each distinct (time, columns...) and every row's group (NaN equal to NaN)."""
    keys = pd.DataFrame({"t": idx.as_unit("ns").asi8, **{f"c{i}": c for i, c in enumerate(columns)}})
    codes = keys.groupby(list(keys.columns), sort=False, dropna=False).ngroup().to_numpy()
    first = np.flatnonzero(~keys.duplicated().to_numpy())
    return first, codes


def _sun_position(idx, site, pressure, t_air):
    """Apparent sun elevation, zenith, azimuth at the site, once per distinct time and weather."""
    first, codes = _distinct(idx, pressure, t_air)
    sp = _sun.solar_position(idx[first], site["lat"], site["lon"], site["elev_m"],
                             pressure_hpa=pressure[first], t_air_c=t_air[first])
    return tuple(sp[c].to_numpy(float)[codes] for c in (C.SUN_ELEV_DEG, C.SUN_ZENITH_DEG, C.SUN_AZIM_DEG))


# --- 2. irradiance in the open --------------------------------------------------------------------

def _irradiance(idx, site, wx, s_elev, s_zen):
    """GHI, DNI, DHI in the open: the weather's own (Erbs split if needed), else the clear sky."""
    if wx[C.GHI_WM2] is None:
        first, codes = _distinct(idx)
        pos = pd.DataFrame({C.SUN_ZENITH_DEG: s_zen[first]}, index=idx[first])
        cs = _sun.clearsky_irradiance(idx[first], site["lat"], site["lon"], site["elev_m"], position=pos)
        ghi, dni, dhi = (cs[c].to_numpy(float)[codes] for c in (C.GHI_WM2, C.DNI_WM2, C.DHI_WM2))
        return ghi, dni, dhi, {"irradiance": {"source": "clearsky (Ineichen-Perez, pvlib)",
                                              "linke_turbidity": cs.attrs["linke_turbidity"]}}
    ghi, dni, dhi = wx[C.GHI_WM2], wx[C.DNI_WM2], wx[C.DHI_WM2]
    if np.isfinite(dni).any() and np.isfinite(dhi).any():
        method = "given (direct normal bounded by the clear-sky limit)"
        dni = np.minimum(dni, _sun.max_dni(s_zen, idx))
    else:
        dec = _sun.decompose_ghi(ghi, s_zen, idx)
        dni, dhi = dec[C.DNI_WM2].to_numpy(float), dec[C.DHI_WM2].to_numpy(float)
        method = "Erbs et al. (1982) decomposition of GHI"
    dni = np.where((s_elev > 0) | np.isnan(dni), dni, 0.0)  # no beam below the horizon, whatever the file says
    return ghi, dni, dhi, {"irradiance": {"source": "weather", "split": method,
                                          "rows_without_irradiance": int((~np.isfinite(ghi)).sum())}}


# --- 3. direct beam -------------------------------------------------------------------------------

def leaf_month(times, lon_deg: float) -> np.ndarray:
    """Month 1…12 of the local mean solar time at longitude ``lon_deg`` [°] (see the module docstring)."""
    idx = pd.DatetimeIndex(times).tz_convert("UTC")
    solar = idx + pd.to_timedelta(float(lon_deg) / 15.0, unit="h")
    return np.asarray(solar.month, dtype=float)


def _inside_buildings(scene, x, y, how: str):
    if scene is None:
        return x, y, np.zeros(x.size, dtype=bool)
    if how == "snap":
        x, y, inside = scene.snap_outside(x, y)
        return np.asarray(x, float), np.asarray(y, float), np.asarray(inside, bool)
    return x, y, np.asarray(scene.inside_buildings(x, y), dtype=bool)


def _beam(scene, x, y, z, s_elev, s_az, month, crown_model):
    """Direct-beam transmittance per row: 0 at night, 1 in the open by day, NaN without a position."""
    return np.asarray(_shade.beam_transmittance(scene, x, y, s_elev, s_az, z_m=z, month=month,
                                                crown_model=crown_model), dtype=float)


# --- 4. sky view ----------------------------------------------------------------------------------

def sky_view(scene: Scene | None, x_m, y_m, z_m=BODY_HEIGHT_M, n_sectors: int = 36,
             radius_m: float = SVF_RADIUS_M, cell_m: float = SVF_CELL_M):
    """Sky view factor and crown-free sky fraction at positions, as the chain computes them.

    Positions in one ``cell_m`` cell (at one height) share the value computed at the
    cell's lowest-x (then y) position among those given, so the result depends only on
    the set of positions, never on their order.

    Parameters
    ----------
    scene : Scene or None
        Obstacles; ``None`` gives 1 wherever the position is known.
    x_m, y_m : array-like
        Positions in the scene's frame [m].
    z_m : float or array-like
        Viewpoint height [m].
    n_sectors, radius_m, cell_m :
        Azimuth sectors, search radius [m], sharing cell [m].

    Returns
    -------
    tuple of ndarray
        ``(svf, sky_frac_crowns, sky_diffuse_frac)`` [-], NaN where the position is missing.
    """
    x = np.asarray(x_m, dtype=float).reshape(-1)
    y = np.asarray(y_m, dtype=float).reshape(-1)
    z = np.broadcast_to(np.asarray(z_m, dtype=float), x.shape)
    return _sky_view_rows(scene, x, y, z, n_sectors, radius_m, cell_m)


def _sky_view_rows(scene, x, y, z, n_sectors, radius_m, cell_m):
    """:func:`sky_view` on flat arrays (the chain's own step)."""
    svf = np.full(x.size, np.nan)
    crowns = np.full(x.size, np.nan)
    diffuse = np.full(x.size, np.nan)
    ok = np.isfinite(x) & np.isfinite(y) & np.isfinite(z)
    if not ok.any():
        return svf, crowns, diffuse
    if scene is None:
        svf[ok], crowns[ok], diffuse[ok] = 1.0, 1.0, 1.0
        return svf, crowns, diffuse
    # distinct positions, sorted (x, then y, then z): the cells' representatives do not depend on order
    upos, inv_pos = np.unique(np.column_stack([x[ok], y[ok], z[ok]]), axis=0, return_inverse=True)
    cell = np.column_stack([np.floor(upos[:, 0] / cell_m), np.floor(upos[:, 1] / cell_m), np.round(upos[:, 2], 2)])
    _, rep, inv_cell = np.unique(cell, axis=0, return_index=True, return_inverse=True)
    res = _skyview.sky_view_factor(scene, upos[rep, 0], upos[rep, 1], z_m=upos[rep, 2], n_sectors=n_sectors,
                                   radius_m=radius_m)
    per_row = inv_cell.reshape(-1)[inv_pos.reshape(-1)]
    svf[ok] = res[C.SVF].to_numpy(float)[per_row]
    crowns[ok] = res[C.SKY_VIEW_CROWN_FRAC].to_numpy(float)[per_row]
    diffuse[ok] = res[C.SKY_DIFFUSE_FRAC].to_numpy(float)[per_row]
    return svf, crowns, diffuse


def _given_sky_view(sky_view, n_pos: int):
    """A caller's cached sky view: ``(svf, sky_frac_crowns, sky_diffuse_frac)`` per position."""
    parts = [np.asarray(v, dtype=float).reshape(-1) for v in sky_view]
    if len(parts) != 3 or any(p.size != n_pos for p in parts):
        raise InputError(f"sky_view has {len(parts)} arrays of {[p.size for p in parts]} values for {n_pos} "
                         "positions", where=_WHERE,
                         fix="give (svf, sky_frac_crowns, sky_diffuse_frac) per position, as chain.sky_view "
                             "returns them")
    return tuple(parts)


# --- 5. mean radiant temperature ------------------------------------------------------------------

def _tmrt_with_globe(tmrt_flux, wx, globe, wind_height_m, z0_m):
    """Tmrt from the globe (its type's published calibration) where read, else from the fluxes."""
    source = np.where(np.isfinite(tmrt_flux), "fluxes", None).astype(object)
    tg = wx[C.T_GLOBE_C]
    if globe is None or not np.isfinite(tg).any():
        return tmrt_flux, source, None
    wind = wx[C.WIND_MS]
    gh = globe.get("height_m")
    v_globe = wind
    # the wind at the globe: the sensor's, brought to the globe's height by the log law when they differ
    if gh is not None and wind_height_m is not None and abs(float(gh) - float(wind_height_m)) > 1e-9:
        v_globe = wind * np.log(float(gh) / z0_m) / np.log(float(wind_height_m) / z0_m)
    cal = _globe.resolve_globe(globe.get("type"), globe["diameter_m"], globe["emissivity"])
    d, eps = float(cal["diameter_m"]), float(cal["emissivity"])
    tm_g = np.asarray(_globe.tmrt_from_globe_type(tg, wx[C.T_AIR_C], v_globe, cal), dtype=float)
    use = np.isfinite(tm_g)
    meta = {"diameter_m": d, "emissivity": eps, "height_m": None if gh is None else float(gh),
            "rows": int(use.sum()), "type": cal["type"], "type_declared": cal["declared"],
            "calibration": cal["source"]}
    # a plausibility figure for the field team: the globe against the flux model on the same rows
    # (large systematic gaps point at a lagging globe, a wrong diameter, or a scene that does not
    # match the street)
    both = use & np.isfinite(tmrt_flux)
    if both.any():
        q1, q2, q3 = (float(v) for v in np.percentile(tm_g[both] - tmrt_flux[both], [25, 50, 75]))
        meta["globe_minus_fluxes_k"] = {"q25": round(q1, 3), "median": round(q2, 3), "q75": round(q3, 3),
                                        "rows": int(both.sum())}
    return np.where(use, tm_g, tmrt_flux), np.where(use, "globe", source).astype(object), meta


# --- options and the added physics ------------------------------------------------------------

#: Radiation models of step 5, as recorded in each result.
RADIATION_NOTES = {
    "surroundings": "six-direction fluxes from the sunlit and shaded ground and walls in view, surface "
                    "temperatures by a force-restore energy balance per material (environment.surroundings, "
                    "environment.surfaces); crowns and canopies pass diffuse sky by their transmissivity, "
                    "circumsolar diffuse treated as isotropic",
    "point": "six-direction fluxes with the ground at the walker's own point (tmrt.outdoor_fluxes)",
}
#: A wind sensor at or above this height is a mast over open terrain, not a walker's [m].
MAST_HEIGHT_M = 5.0


def _check_choice(value, choices, name: str) -> None:
    if value not in choices:
        shown = ", ".join(repr(c) for c in choices if c is not None)
        raise InputError(f"{name} = {value!r} is not known", where=_WHERE, fix=f"use one of {shown}")


def _num_pos(positions: pd.DataFrame, name: str) -> np.ndarray:
    return _num(positions, name, len(positions))


def _wind10(wx, wind_height_m, z0_m, scene, anemometer, wind_profile, walk_speed, idx):
    """Wind at 10 m for UTCI: ambient (a carried sensor's own motion removed), at street level."""
    wind = wx[C.WIND_MS]
    n = wind.size
    if wind_height_m is None:
        return np.full(n, np.nan), {"source": "no wind"}
    meta: dict = {}
    if anemometer == "carried" and walk_speed is not None and np.isfinite(walk_speed).any():
        wind = _wind.ambient_from_carried(wind, walk_speed, idx)
        meta["carried"] = (f"ambient = sqrt(mean(v_rel^2) - mean(v_walk^2)) over {_wind.CARRIED_WINDOW_S:.0f} s; "
                           "the globe keeps the relative speed")
    elif anemometer is None:
        meta["carried"] = "anemometer mount not stated: readings taken as ambient wind"
    wind10 = np.asarray(_utci.wind_at_10m(wind, float(wind_height_m), z0_m=z0_m), dtype=float)
    zh = _wind.mean_building_height(scene)
    profile = wind_profile or ("street" if float(wind_height_m) >= MAST_HEIGHT_M and zh > 1.0 else "as_measured")
    if profile == "street":
        wind10 = np.asarray(_wind.street_equivalent_10m(wind10, zh), dtype=float)
        meta["profile"] = _wind.describe_street_profile(zh)
    else:
        meta["profile"] = "as measured (the sensor was in the street)"
    return wind10, meta


def _tmrt_surroundings(scene, x, y, idx, site, s_elev, s_az, ghi, dni, dhi, trans, svf, diffuse, wx, wind10,
                       month, z_m, crown_model, n_sectors):
    """Tmrt from the walker's surroundings (the default radiation model of step 5)."""
    ta = wx[C.T_AIR_C]
    clear = np.ones(idx.size)
    if wx[C.GHI_WM2] is not None:
        first, codes = _distinct(idx)
        cs = _sun.clearsky_irradiance(idx[first], site["lat"], site["lon"], site["elev_m"])
        g_cs = cs[C.GHI_WM2].to_numpy(float)[codes]
        clear = np.where(g_cs > 20.0, ghi / np.where(g_cs > 20.0, g_cs, 1.0), 1.0)
        clear = np.where(np.isfinite(clear), np.clip(clear, 0.0, _sun.MAX_CLEAR_INDEX), 1.0)
    # the surfaces' own wind: the UTCI log law brought down to the walker's height
    u_low = np.where(np.isfinite(wind10), wind10 * np.log(z_m / _utci.Z0_UTCI_M) / np.log(10.0 / _utci.Z0_UTCI_M),
                     1.0)
    f = _surroundings.walker_fluxes(scene, x, y, idx, s_elev, s_az, dni, dhi, trans, svf, ta, wx[C.RH_PCT],
                                    u_low, site["lat"], site["lon"], site["elev_m"], clear_index=clear,
                                    month=month, z_m=z_m, sky_diffuse_frac=diffuse, n_sectors=n_sectors,
                                    crown_model=crown_model)
    return np.asarray(_tmrt.tmrt_from_fluxes(f["k_down"], f["k_up"], f["k_side"], f["l_down"], f["l_up"],
                                             f["l_side"], f["beam_normal_wm2"], s_elev), dtype=float)
