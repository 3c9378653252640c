"""Seeded, deterministic walk simulator: invented walkers on the invented town, written as devices would.

For each planned session the simulator

1. walks an invented walker along one of the town's loops, second by second, with a
   walking speed that follows Tobler's hiking function on the hill and stops where the
   walker is prompted to vote;
2. computes the *truth* of what the walker met with the environment chain every caller
   uses, :func:`walkcomfort.environment.chain.environment_columns` (sun position and
   clear-sky irradiance, direct-beam shade and sky view from the scene, mean radiant
   temperature from fluxes, UTCI) under an invented summer weather course, plus traffic
   noise, illuminance and crowding;
3. turns the truth into the raw files each device would have written, in that device's own
   units, sampling, clock and format (see :mod:`walkcomfort.demo.devices`), with the
   sensor physics that makes field data hard: a globe thermometer that lags with its time
   constant, GPS noise and multipath jumps;
4. draws the walker's votes from the invented comfort process of :mod:`walkcomfort.demo.latent`.

Every random draw comes from one :class:`numpy.random.Generator` per session seeded from
``(seed, session number)``, so the same seed gives the same bytes.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from walkcomfort.demo import latent
from walkcomfort.demo import town as T
from walkcomfort.environment.chain import environment_columns
from walkcomfort.environment.scene import Scene
from walkcomfort.environment.tmrt import globe_from_tmrt

DEFAULT_SEED = 20260714
DT_S = 1.0
PRE_WALK_S = 60          # logging starts this long before the walker sets off (standing at the start)
POST_WALK_S = 30         # and stops this long after arrival
BODY_HEIGHT_M = 1.1      # height of the globe, the air sensor and the point where shade is evaluated
GLOBE_DIAMETER_M = 0.038
GLOBE_EMISSIVITY = 0.95
TAU_AIR_S = 20.0
TAU_GLOBE_S = 180.0
WIND_HEIGHT_M = 1.1
CAMERA_HFOV_DEG = 100.0

WALKERS = (
    latent.Walker("P01", 1.32, 1.00, 0.00, 0.5, "25-34", True),
    latent.Walker("P02", 1.22, 1.20, 0.25, 0.6, "55-64", False),
    latent.Walker("P03", 1.38, 0.85, -0.20, 0.4, "18-24", True),
    latent.Walker("P04", 1.18, 1.10, 0.35, 0.7, "65-74", False),
    latent.Walker("P05", 1.30, 0.95, -0.10, 0.5, "35-44", True),
    latent.Walker("P06", 1.26, 1.15, 0.10, 0.5, "45-54", False),
    latent.Walker("P07", 1.34, 0.90, 0.15, 0.45, "25-34", True),
    latent.Walker("P08", 1.24, 1.05, -0.25, 0.55, "35-44", False),
)

# walker, loop, local date, local time when logging starts. Times of day spread from morning to evening.
SCHEDULE = (
    ("P01", "loop-a", "2026-07-13", "09:20"), ("P01", "loop-b", "2026-07-15", "16:40"),
    ("P02", "loop-b", "2026-07-13", "11:10"), ("P02", "loop-a", "2026-07-16", "18:30"),
    ("P03", "loop-a", "2026-07-14", "12:40"), ("P03", "loop-b", "2026-07-16", "10:00"),
    ("P04", "loop-b", "2026-07-14", "14:30"), ("P04", "loop-a", "2026-07-17", "08:50"),
    ("P05", "loop-a", "2026-07-15", "15:20"), ("P05", "loop-b", "2026-07-17", "12:10"),
    ("P06", "loop-b", "2026-07-15", "19:05"), ("P06", "loop-a", "2026-07-17", "17:10"),
    ("P07", "loop-a", "2026-07-13", "13:30"), ("P07", "loop-b", "2026-07-16", "15:00"),
    ("P08", "loop-b", "2026-07-14", "17:45"), ("P08", "loop-a", "2026-07-17", "11:00"),
)

#: The day of the design-day weather file and of the planned routes (the hottest invented day).
DESIGN_DAY = "2026-07-15"

# invented day-to-day departures of the daily temperature course [K]
DAY_OFFSET_K = {"2026-07-13": 0.0, "2026-07-14": 1.2, "2026-07-15": 2.0, "2026-07-16": -0.8, "2026-07-17": 0.5}
# invented haze: share of the clear-sky direct beam that gets through
DAY_HAZE = {"2026-07-13": 0.97, "2026-07-14": 0.93, "2026-07-15": 0.95, "2026-07-16": 0.99, "2026-07-17": 0.94}


@dataclass(frozen=True)
class SessionPlan:
    """One walk to simulate."""

    number: int              # 1-based position in the schedule (seeds its generator)
    id: str                  # session id, e.g. "sv-p01-1"
    walker: latent.Walker
    walk_id: str             # town loop
    start_local: pd.Timestamp  # when logging starts (tz-aware, town's zone)


def session_plans(n_walkers: int = 8) -> list[SessionPlan]:
    """The schedule of invented sessions (two walks per walker)."""
    walkers = {w.id: w for w in WALKERS[:n_walkers]}
    plans = []
    count: dict[str, int] = {}
    for number, (wid, loop, day, hhmm) in enumerate(SCHEDULE, start=1):
        if wid not in walkers:
            continue
        count[wid] = count.get(wid, 0) + 1
        start = pd.Timestamp(f"{day} {hhmm}:00").tz_localize(T.TIMEZONE)
        plans.append(SessionPlan(number, f"sv-{wid.lower()}-{count[wid]}", walkers[wid], loop, start))
    return plans


def session_rng(seed: int, number: int) -> np.random.Generator:
    return np.random.default_rng(np.random.SeedSequence([int(seed), int(number)]))


# --- weather ------------------------------------------------------------------------------

def _ar1(rng, n, phi, sigma):
    """Stationary AR(1) series with marginal standard deviation ``sigma``."""
    e = rng.normal(0.0, sigma * np.sqrt(1 - phi ** 2), n)
    out = np.empty(n)
    out[0] = rng.normal(0.0, sigma)
    for i in range(1, n):
        out[i] = phi * out[i - 1] + e[i]
    return out


def diurnal_t_air_c(local_hour, day_offset_k=0.0):
    """Invented summer course of air temperature [°C]: 21.5 °C at 06:00, 32.5 °C at 15:30.

    Cosine rise from the minimum to the maximum and cosine fall to the next minimum
    (a common shape for a clear summer day), shifted by the day's offset.
    """
    h = np.asarray(local_hour, float) % 24.0
    t_min, t_max = 21.5 + day_offset_k, 32.5 + day_offset_k
    rise = (h >= 6.0) & (h <= 15.5)
    f_rise = 0.5 - 0.5 * np.cos(np.pi * (h - 6.0) / 9.5)
    hh = np.where(h < 6.0, h + 24.0, h)
    f_fall = 0.5 + 0.5 * np.cos(np.pi * (hh - 15.5) / 14.5)
    return t_min + (t_max - t_min) * np.where(rise, f_rise, f_fall)


def weather_background(local_hour, day, rng):
    """Invented background weather at 1 s: air temperature, humidity, wind at 1.1 m, pressure."""
    n = len(local_hour)
    off = DAY_OFFSET_K.get(day, 0.0)
    t = diurnal_t_air_c(local_hour, off) + _ar1(rng, n, 0.995, 0.25)
    # dew point nearly constant through the day (a dry summer air mass with a sea-breeze lift)
    td = 16.0 + 1.5 * np.exp(-((np.asarray(local_hour) - 17.0) / 3.0) ** 2) + _ar1(rng, n, 0.995, 0.3)
    rh = 100.0 * np.exp(17.62 * td / (243.12 + td)) / np.exp(17.62 * t / (243.12 + t))  # Magnus (WMO-No. 8)
    breeze = np.exp(-((np.asarray(local_hour) - 16.0) / 3.0) ** 2)
    wind = (0.9 + 1.4 * breeze) * np.exp(_ar1(rng, n, 0.97, 0.35))
    p = 993.0 + 1.2 * np.cos(2 * np.pi * (np.asarray(local_hour) - 10.0) / 12.0)
    return pd.DataFrame({"t_air_bg_c": t, "rh_pct": np.clip(rh, 5, 99), "wind_ms": np.maximum(wind, 0.05),
                         "pressure_hpa": p})


# --- the walk -----------------------------------------------------------------------------

def tobler_ratio(slope_frac):
    """Walking speed relative to the flat by Tobler's hiking function (Tobler 1993).

    W = 6·exp(−3.5·|S + 0.05|) km/h; the ratio W(S)/W(0) scales a walker's own flat speed.
    """
    s = np.asarray(slope_frac, float)
    return np.exp(-3.5 * (np.abs(s + 0.05) - 0.05))


def walk_kinematics(walk: T.Walk, walker: latent.Walker, rng):
    """Second-by-second position along a loop: arrays x, y, s (distance) and a 'stopped' mask."""
    p = T.walk_points(walk, spacing_m=1.0)
    seg = np.hypot(*np.diff(p, axis=0).T)
    s_path = np.concatenate([[0.0], np.cumsum(seg)])
    z = T.elevation_m(p[:, 0], p[:, 1])
    # slope over ±5 m (what a walker's legs feel)
    slope = np.gradient(z, s_path)
    slope = np.convolve(np.pad(slope, 5, mode="edge"), np.ones(11) / 11.0, mode="valid")
    length = s_path[-1]
    stops = [f * length for f in walk.stops]
    stop_len = [int(rng.integers(40, 61)) for _ in stops]
    wobble = _ar1(rng, 4000, 0.98, 0.05)
    ss, stopped, stop_idx = [], [], []
    s = 0.0
    for _ in range(PRE_WALK_S):
        ss.append(s), stopped.append(True), stop_idx.append(-1)
    k = 0
    next_stop = 0
    while s < length:
        if next_stop < len(stops) and s >= stops[next_stop]:
            for _ in range(stop_len[next_stop]):
                ss.append(s), stopped.append(True), stop_idx.append(next_stop)
            next_stop += 1
            continue
        sl = np.interp(s, s_path, slope)
        v = walker.speed_ms * tobler_ratio(sl) * (1.0 + wobble[k % len(wobble)])
        s = min(s + v * DT_S, length)
        k += 1
        ss.append(s), stopped.append(False), stop_idx.append(-1)
    for _ in range(POST_WALK_S):
        ss.append(s), stopped.append(True), stop_idx.append(-1)
    ss = np.asarray(ss)
    x = np.interp(ss, s_path, p[:, 0])
    y = np.interp(ss, s_path, p[:, 1])
    sl = np.interp(ss, s_path, slope) * 100.0
    sl = np.where(np.asarray(stopped), 0.0, sl)
    return {"x": x, "y": y, "s": ss, "slope_pct": sl, "stopped": np.asarray(stopped),
            "stop_idx": np.asarray(stop_idx), "s_path": s_path, "path": p}


# --- physics of truth ------------------------------------------------------------------------

def scene_of(town: T.Town):
    """The town's scene as a :class:`walkcomfort.environment.scene.Scene`."""
    return Scene.from_geojson(T.scene_geojson(town), source="demo town")


#: Where the truth comes from (DEVELOPERS.md contract), recorded in provenance.json: the one
#: environment chain every caller uses, the clear sky the day's invented haze dims, and the
#: globe's steady state the logger's lagging globe follows.
PHYSICS = {
    "environment_columns": "walkcomfort.environment.chain.environment_columns",
    "clearsky_irradiance": "walkcomfort.environment.sun.clearsky_irradiance",
    "globe_from_tmrt": "walkcomfort.environment.tmrt.globe_from_tmrt",
}


def environment_context(town: T.Town | None = None) -> dict:
    """What the truth needs once per town: its scene (prepared once) and the sources of the physics."""
    town = town or T.build_town(DEFAULT_SEED)
    return {"scene": scene_of(town), "sources": dict(PHYSICS)}


def environment_at(context: dict, times_utc, lon, lat, weather: pd.DataFrame, sky_view=None) -> pd.DataFrame:
    """The environment a walker meets at ``lon, lat`` and ``times_utc`` in ``weather``: the chain itself.

    The walker's body centre, the globe and the air sensor are at :data:`BODY_HEIGHT_M`, the
    anemometer at :data:`WIND_HEIGHT_M`; the scene is the context's.
    """
    positions = pd.DataFrame({"lon": np.asarray(lon, float), "lat": np.asarray(lat, float)})
    return environment_columns(times_utc, positions, weather, scene=context["scene"], wind_height_m=WIND_HEIGHT_M,
                               z_m=BODY_HEIGHT_M, sky_view=sky_view, warn=False)


def environment_truth(town: T.Town, kin: dict, times_utc: pd.DatetimeIndex, day: str, rng, context=None):
    """Everything the walker met, per second: sun, irradiance, shade, sky view, weather, Tmrt, UTCI.

    Two passes of the chain: the first (background weather, clear sky) gives the sun, shade
    and sky view the invented weather responds to — a little warmer over sunlit paving,
    cooler under crowns, less wind where the sky is closed —; the second gives the truth for
    the weather as it then is, with the day's haze on the clear sky.
    """
    context = context or environment_context(town)
    x, y = kin["x"], kin["y"]
    lon, lat = T.to_lonlat(x, y)
    tz = times_utc.tz_convert(town.timezone)
    local_hour = (tz.hour + tz.minute / 60.0 + tz.second / 3600.0).to_numpy()
    wx = weather_background(local_hour, day, rng)
    background = pd.DataFrame({"t_air_c": wx["t_air_bg_c"].to_numpy(), "rh_pct": wx["rh_pct"].to_numpy(),
                               "wind_ms": wx["wind_ms"].to_numpy(), "pressure_hpa": wx["pressure_hpa"].to_numpy()})
    first = environment_at(context, times_utc, lon, lat, background)
    haze = DAY_HAZE.get(day, 0.96)
    el = first["sun_elev_deg"].to_numpy()
    dni = first["dni_wm2"].to_numpy() * haze
    dhi = first["dhi_wm2"].to_numpy() * (1.0 + 0.6 * (1.0 - haze))
    beam = first["beam_trans_frac"].to_numpy()
    svf, sky_crowns = first["svf"].to_numpy(), first["sky_frac_crowns"].to_numpy()
    sun_on_ground = np.clip(beam * dni * np.sin(np.radians(np.maximum(el, 0))) / 800.0, 0, 1.2)
    # a little warmer over sunlit paving, a little cooler under dense crowns (invented, ±1 K)
    weather = pd.DataFrame({
        "t_air_c": background["t_air_c"].to_numpy() + 0.7 * sun_on_ground - 0.5 * (1.0 - sky_crowns),
        "rh_pct": background["rh_pct"].to_numpy(), "wind_ms": background["wind_ms"].to_numpy() * (0.75 + 0.25 * svf),
        "pressure_hpa": background["pressure_hpa"].to_numpy(),
        "ghi_wm2": dni * np.sin(np.radians(np.maximum(el, 0))) + dhi, "dni_wm2": dni, "dhi_wm2": dhi})
    env = environment_at(context, times_utc, lon, lat, weather,
                         sky_view=(svf, sky_crowns, first["sky_diffuse_frac"].to_numpy()))
    cols = ["sun_elev_deg", "sun_azim_deg", "ghi_wm2", "dni_wm2", "dhi_wm2", "beam_trans_frac", "svf",
            "sky_frac_crowns"]
    return pd.DataFrame({
        "x_m": x, "y_m": y, "dist_m": kin["s"], "elev_m": T.elevation_m(x, y), "slope_pct": kin["slope_pct"],
        "stopped": kin["stopped"], "stop_idx": kin["stop_idx"],
        **{c: env[c].to_numpy() for c in cols},
        **{c: weather[c].to_numpy() for c in ("t_air_c", "rh_pct", "wind_ms", "pressure_hpa")},
        "tmrt_c": env["tmrt_c"].to_numpy(), "wind10_ms": env["wind10_ms"].to_numpy(),
        "utci_c": env["utci_c"].to_numpy(), "local_hour": local_hour,
    }, index=pd.DatetimeIndex(times_utc, name="time"))


def sound_truth(truth: pd.DataFrame, rng):
    """LAeq over each second [dB(A)]: road traffic by distance, background and crowd, plus events."""
    n = len(truth)
    road = T.road_laeq_db(truth["x_m"], truth["y_m"], truth["local_hour"]) + _ar1(rng, n, 0.9, 2.0)
    crowd = truth["crowd_n"].to_numpy()
    background = T.BACKGROUND_LAEQ_DB + 2.5 * np.log1p(crowd) + _ar1(rng, n, 0.8, 1.0)
    energy = 10 ** (road / 10) + 10 ** (background / 10)
    events = []
    k = 0
    near = truth["y_m"].to_numpy() < T.RONDA_Y + 30.0
    while k < n:
        rate = 1 / 70.0 if near[k] else 1 / 160.0
        if rng.random() < rate:
            dur = int(rng.integers(3, 13))
            level = float(rng.uniform(70.0, 84.0))
            kind = str(rng.choice(["moped passing", "lorry braking", "horn", "dog barking", "church bell"]))
            shape = np.sin(np.linspace(0.2, np.pi - 0.2, dur))
            sl = slice(k, min(k + dur, n))
            energy[sl] += 10 ** ((level + 10 * np.log10(shape[: sl.stop - sl.start])) / 10)
            events.append({"start": truth.index[k], "duration_s": dur, "peak_db": round(level, 1), "kind": kind})
            k += dur + 5
        k += 1
    return 10 * np.log10(energy), events


def illuminance_truth(truth: pd.DataFrame):
    """Horizontal illuminance at the meter [lx] from beam and diffuse light.

    Luminous efficacies of about 100 lm W⁻¹ for the direct beam and 120 lm W⁻¹ for the
    diffuse sky (common practice for clear skies); diffuse light scaled by the sky view.
    """
    el = np.maximum(truth["sun_elev_deg"].to_numpy(), 0.0)
    beam = 100.0 * truth["dni_wm2"].to_numpy() * np.sin(np.radians(el)) * truth["beam_trans_frac"].to_numpy()
    diffuse = 120.0 * truth["dhi_wm2"].to_numpy() * (0.25 + 0.75 * truth["svf"].to_numpy())
    return beam + diffuse


def first_order(values, tau_s, dt_s=DT_S, start=None):
    """Sensor response of a first-order instrument: y[k] = a·y[k−1] + (1 − a)·x[k], a = exp(−Δt/τ)."""
    x = np.asarray(values, float)
    a = np.exp(-dt_s / tau_s)
    y = np.empty_like(x)
    acc = x[0] if start is None else start
    for i, v in enumerate(x):
        acc = a * acc + (1 - a) * v
        y[i] = acc
    return y


def simulate_truth(town: T.Town, plan: SessionPlan, rng, context=None) -> pd.DataFrame:
    """The per-second truth of one session (UTC index), with sensor responses and latent comfort."""
    walk = town.walks[plan.walk_id]
    kin = walk_kinematics(walk, plan.walker, rng)
    n = len(kin["s"])
    times = pd.date_range(plan.start_local.tz_convert("UTC"), periods=n, freq="s", name="time")
    day = plan.start_local.strftime("%Y-%m-%d")
    truth = environment_truth(town, kin, times, day, rng, context)
    crowd = T.crowd_expected_n(truth["x_m"], truth["y_m"], truth["local_hour"])
    truth["crowd_n"] = crowd
    laeq, events = sound_truth(truth, rng)
    truth["laeq_db"] = laeq
    truth["illum_lux"] = illuminance_truth(truth)
    tg_ss = np.asarray(globe_from_tmrt(truth["tmrt_c"].to_numpy(), truth["t_air_c"].to_numpy(),
                                       truth["wind_ms"].to_numpy(), diameter_m=GLOBE_DIAMETER_M,
                                       emissivity=GLOBE_EMISSIVITY), float)
    truth["t_globe_steady_c"] = tg_ss
    truth["t_globe_sensor_c"] = first_order(tg_ss, TAU_GLOBE_S)
    truth["t_air_sensor_c"] = first_order(truth["t_air_c"].to_numpy(), TAU_AIR_S)
    parts = latent.discomfort(plan.walker, truth["utci_c"].to_numpy(), truth["beam_trans_frac"].to_numpy(),
                              truth["slope_pct"].to_numpy(), laeq, crowd)
    truth["discomfort"] = parts["d"]
    truth["thermal_part"] = parts["thermal"]
    truth["heat_load_c"] = parts["heat_load_c"]
    truth["sun_min"] = parts["sun_min"]
    truth.attrs["sound_events"] = events
    return truth


# --- votes --------------------------------------------------------------------------------------

def _note(row, rng) -> str:
    """A short invented remark a walker might type, chosen from what is going on (often none)."""
    options = []
    if row["sun_min"] > 5 and row["utci_c"] > 32:
        options += ["sun on my back for a while now", "no shade on this stretch, getting hot"]
    if row["beam_trans_frac"] < 0.5 and row["heat_load_c"] - row["utci_c"] > 3:
        options += ["lovely shade after that stretch", "relief under the trees"]
    if row["laeq_db"] > 68:
        options += ["traffic very loud here", "can't hear myself think, the road"]
    if row["slope_pct"] > 6:
        options += ["steep bit, out of breath", "uphill & warm"]
    if row["crowd_n"] > 3.5:
        options += ['busy by the market, "excuse me" every few steps']
    if not options or rng.random() < 0.55:
        return ""
    return str(options[int(rng.integers(0, len(options)))])


#: Spontaneous votes: base rate while walking, extra rate once the state has moved since the
#: last vote, and the shortest time between two votes.
SPONTANEOUS_PER_S = 1 / 45.0
CHANGE_PER_S = 1 / 20.0
CHANGE_BY = 0.9
MIN_GAP_S = 25


def draw_votes(truth: pd.DataFrame, plan: SessionPlan, rng) -> list[dict]:
    """Prompted votes at the stops and spontaneous ones on the way, from the latent process.

    Spontaneous votes come with a base rate of one per ~45 s of walking and are much more
    likely when the walker's state has moved since the last vote (people report changes);
    no two votes within :data:`MIN_GAP_S`.
    """
    votes = []
    d = truth["discomfort"].to_numpy()
    stop_idx = truth["stop_idx"].to_numpy()
    stopped = truth["stopped"].to_numpy()
    last_t = -10 ** 9
    last_d = d[PRE_WALK_S]
    prompted_done = set()
    noise_c = rng.normal(0.0, latent.VOTE_NOISE, len(truth))
    noise_t = rng.normal(0.0, 0.4, len(truth))
    stop_started: dict[int, int] = {}
    for k in range(PRE_WALK_S, len(truth) - POST_WALK_S):
        kind = None
        si = int(stop_idx[k])
        if si >= 0:
            stop_started.setdefault(si, k)
            if si not in prompted_done and k - stop_started[si] >= 12 + (plan.number + si) % 7:
                kind = "prompted"
                prompted_done.add(si)
        elif not stopped[k] and k - last_t >= MIN_GAP_S:
            rate = SPONTANEOUS_PER_S + (CHANGE_PER_S if abs(d[k] - last_d) > CHANGE_BY else 0.0)
            if rng.random() < rate:
                kind = "spontaneous"
        if kind is None:
            continue
        row = truth.iloc[k]
        score = d[k] + noise_c[k]
        votes.append({
            "time": truth.index[k], "participant": plan.walker.id,
            "comfort": str(latent.comfort_class(score)),
            "tsv": int(latent.sensation_vote(plan.walker, row["thermal_part"], noise_t[k])),
            "note": _note(row, rng), "kind": kind, "latent": float(d[k]), "latent_noisy": float(score),
        })
        last_t, last_d = k, d[k]
    return votes
