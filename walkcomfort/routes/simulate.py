"""A simulated walk: a timeline like a recorded one, for a planned route.

Positions and times come from the walking-speed model (:mod:`.timing`), weather
from a :class:`~walkcomfort.routes.weather.WeatherSource`, and the thermal
environment (sun, shade, sky view, Tmrt from fluxes, UTCI) from the one environment
chain every caller uses, :func:`walkcomfort.environment.chain.environment_columns`,
through :func:`~walkcomfort.environment.pipeline.add_planned_environment` — the
timeline path of recorded walks with the globe switched off — so the model sees the
same columns either way, and a scheme along a route gives the same environment as in
the city-wide batch.

Many departures are simulated in one batch (one ``walk_id`` per departure) so the
environment stage is called once per scene, not once per departure.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.errors import InputError
from walkcomfort.routes.geometry import Route
from walkcomfort.routes.timing import DEFAULT_FLAT_SPEED_MS, DEFAULT_STOP_STEP_S, walk_schedule
from walkcomfort.routes.weather import WeatherSource

#: Participant label of simulated walks (never a real person).
SIMULATED = "simulated"
ROUTE_ID = "route_id"
SCHEME = "scheme"
DEPARTURE = "departure"
STEP_S = "step_s"       # [s] the duration a row stands for (sums to the walk time)
STOP = "stop"           # label of the stop the walker waits at, "" while walking


def walk_id_for(route_id: str, departure: pd.Timestamp) -> str:
    """The ``walk_id`` of a simulated walk: ``<route>@<departure UTC ISO>``."""
    return f"{route_id}@{pd.Timestamp(departure).tz_convert('UTC').strftime('%Y-%m-%dT%H:%M:%SZ')}"


def simulate_timeline(route: Route, departures, weather: WeatherSource,
                      flat_speed_ms: float = DEFAULT_FLAT_SPEED_MS, stop_step_s: float = DEFAULT_STOP_STEP_S,
                      timezone: str | None = None, walker: dict | None = None) -> pd.DataFrame:
    """Positions, times and weather for one route and one or many departures (no environment yet).

    Parameters
    ----------
    route : Route
        From :func:`~walkcomfort.routes.geometry.load_route`.
    departures : DatetimeIndex or Timestamp
        tz-aware departure instants.
    weather : WeatherSource
        Where the weather comes from.
    flat_speed_ms : float
        Walking speed on flat ground [m s⁻¹].
    stop_step_s : float
        Row spacing during waits [s].
    timezone : str, optional
        IANA zone recorded for reports (local times at the edges).
    walker : dict, optional
        Walker attributes the model may use (``clo``, ``acclimatised``, ``age_band``).

    Returns
    -------
    DataFrame
        Index ``time`` (UTC, one row per route point per departure, walks stacked in
        departure order); the recorded-timeline columns that apply (``walk_id,
        participant, lat, lon, elev_m, dist_m, speed_ms, heading_deg, slope_pct,
        t_air_c, rh_pct, wind_ms, pressure_hpa``), the open-sky irradiance
        ``ghi_wm2, dni_wm2, dhi_wm2`` [W m⁻²], and ``route_id, departure, x_m, y_m,
        step_s, stop``. ``attrs["session"]`` carries ``timezone, site, wind_height_m``
        and the walker attributes.
    """
    deps = pd.DatetimeIndex([departures] if isinstance(departures, pd.Timestamp) else departures)
    if len(deps) == 0:
        raise InputError("no departure time given", fix="give at least one departure")
    if deps.tz is None:
        raise InputError("departure times have no time zone", fix="give tz-aware departures (UTC or with offset)")
    deps = deps.tz_convert("UTC")
    if deps.has_duplicates:
        raise InputError(f"departure {deps[deps.duplicated()][0].isoformat()} is given twice",
                         fix="give each departure once")
    sched = walk_schedule(route.points, route.stops, flat_speed_ms=flat_speed_ms, stop_step_s=stop_step_s)
    n = len(sched)
    offs = pd.to_timedelta(sched["t_s"].to_numpy(), unit="s")
    times = pd.DatetimeIndex(np.concatenate([(d + offs).as_unit("ns").asi8 for d in deps.as_unit("ns")])
                             .astype("datetime64[ns]")).tz_localize("UTC").rename(C.TIME)
    rep = np.tile(np.arange(n), len(deps))
    df = sched.iloc[rep].reset_index(drop=True)
    df.index = times
    df.insert(0, C.WALK_ID, np.repeat([walk_id_for(route.route_id, d) for d in deps], n))
    df.insert(1, C.PARTICIPANT, SIMULATED)
    df.insert(2, ROUTE_ID, route.route_id)
    df.insert(3, DEPARTURE, np.repeat(deps, n))
    df = df.drop(columns=["t_s"])
    lat0, lon0 = float(route.points[C.LAT].mean()), float(route.points[C.LON].mean())
    elev0 = float(route.points[C.ELEV_M].mean())
    wx = weather.conditions(times, lat0, lon0, elev0)
    for col in (C.T_AIR_C, C.RH_PCT, C.WIND_MS, C.PRESSURE_HPA, C.GHI_WM2, C.DNI_WM2, C.DHI_WM2):
        df[col] = wx[col].to_numpy(float)
    session = {"timezone": timezone or "UTC", "site": route.route_id,
               "wind_height_m": float(wx.attrs.get("wind_height_m", weather.wind_height_m)),
               "weather": wx.attrs.get("weather", weather.label), "simulated": True}
    for k, v in (walker or {}).items():
        session[k] = v
    df.attrs["session"] = session
    return df


def add_simulated_environment(timeline: pd.DataFrame, scene=None, **env_kw) -> pd.DataFrame:
    """Sun, shade, sky view, Tmrt (from fluxes) and UTCI for a simulated timeline.

    Calls :func:`walkcomfort.environment.pipeline.add_planned_environment` — the code
    path of recorded walks with the globe switched off, on the one environment chain
    (:func:`walkcomfort.environment.chain.environment_columns`) — with the timeline's own
    open-sky irradiance and its stated wind height (both from the weather source).
    """
    from walkcomfort.environment.pipeline import add_planned_environment

    env_kw.setdefault("warn", False)  # out-of-range rows are flagged per row (qa_utci_out_of_range)
    out = add_planned_environment(timeline, scene=scene, **env_kw)
    out.attrs = {**timeline.attrs, **{k: v for k, v in out.attrs.items() if k == "environment"}}
    return out


def simulate_walk(route: Route, departure, weather: WeatherSource, scene=None, **kw) -> pd.DataFrame:
    """A simulated timeline with its thermal environment (see :func:`simulate_timeline`).

    Parameters
    ----------
    route, departure, weather
        As :func:`simulate_timeline` (``departure`` may be many).
    scene : Scene, optional
        Obstacles (already with a scheme applied); none means open ground.
    **kw
        ``flat_speed_ms, stop_step_s, timezone, walker`` for the timeline; anything
        else goes to the environment stage.

    Returns
    -------
    DataFrame
        The timeline plus the environment columns (``sun_*``, ``ghi/dni/dhi_wm2``,
        ``shade_frac``, ``beam_trans_frac``, ``svf``, ``tmrt_c``, ``wind10_ms``,
        ``utci_c``, ``utci_band``, flags).
    """
    tl_keys = ("flat_speed_ms", "stop_step_s", "timezone", "walker")
    tl = simulate_timeline(route, departure, weather, **{k: v for k, v in kw.items() if k in tl_keys})
    return add_simulated_environment(tl, scene=scene, **{k: v for k, v in kw.items() if k not in tl_keys})
