"""Model features from a timeline: current conditions and what the walker just walked through.

One function, :func:`build_features`, turns a timeline (recorded by
``walkcomfort ingest`` + ``thermal`` or simulated by ``walkcomfort.routes``, the
same columns either way) into one feature row per timeline row. History windows
look *back only* and never across walks: the value at a vote uses the vote's own
row and the rows before it in the same walk.

Every feature name is declared in :data:`FEATURES` (the order the model uses);
:data:`FEATURE_INFO` says in words what each one is, with its unit, so that the
explanations (:mod:`walkcomfort.model.explain`) can read a reason out loud.
Missing sources (no sound meter, no camera, no globe) give NaN columns, which
LightGBM routes down its learned "missing" branch instead of failing.

All windows are time-based (the timeline step may be 1 s for a recorded walk or
a few seconds for a simulated one) and time-weighted: each row stands for the
interval since the row before it (capped at :data:`MAX_STEP_S`).
"""

from __future__ import annotations

import re

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.environment.pet import PET_C
from walkcomfort.errors import InputError

#: History windows [min].
WINDOWS_MIN = (1, 3, 5, 10)
#: Heat-dose threshold: the upper edge of the UTCI band "no thermal stress" [°C]
#: (Bröde et al. 2012, doi:10.1007/s00484-011-0454-1).
DOSE_THRESHOLD_C = 26.0
#: A point counts as "in shade" when at least this share of the direct beam is blocked [-].
SHADE_STATE_FRAC = 0.5
#: Longest interval one row may stand for [s]; longer gaps count as this much.
MAX_STEP_S = 60.0
#: Longest walk the exponential windows handle in one piece [s] (exp overflow guard).
MAX_WALK_S = 10 * 3600.0

# participant attribute columns (from the manifest's [participant] table; columns.PARTICIPANT_ATTRS)
CLO = C.CLO                    # [clo] clothing insulation
ACCLIMATISED = C.ACCLIMATISED  # bool
AGE_BAND = C.AGE_BAND          # text such as "25-34" or "65+"
PARTICIPANT_ATTRS = (CLO, ACCLIMATISED, AGE_BAND)

#: Current-condition features (also the only inputs of the logistic baseline).
CURRENT_FEATURES = (C.UTCI_C, C.TMRT_C, C.T_AIR_C, C.RH_PCT, C.WIND_MS, C.SHADE_FRAC, C.SVF)

FEATURE_INFO: dict[str, tuple[str, str]] = {}


def _declare(name: str, text: str, unit: str) -> str:
    FEATURE_INFO[name] = (text, unit)
    return name


def _declare_all() -> tuple[str, ...]:
    names = [
        _declare(C.UTCI_C, "UTCI here", "°C"),
        _declare(C.TMRT_C, "mean radiant temperature here", "°C"),
        _declare(C.T_AIR_C, "air temperature", "°C"),
        _declare(C.RH_PCT, "relative humidity", "%"),
        _declare(C.WIND_MS, "wind speed", "m/s"),
        _declare(C.SHADE_FRAC, "share of direct sun blocked here", "-"),
        _declare(C.SVF, "sky view factor here", "-"),
        _declare(C.SPEED_MS, "walking speed", "m/s"),
        _declare(C.SLOPE_PCT, "slope of the path", "%"),
    ]
    for w in WINDOWS_MIN:
        names += [
            _declare(f"utci_mean_{w}min", f"mean UTCI over the last {w} min", "°C"),
            _declare(f"utci_ewm_{w}min", f"UTCI averaged with a {w}-min memory", "°C"),
            _declare(f"utci_max_{w}min", f"highest UTCI in the last {w} min", "°C"),
            _declare(f"utci_contrast_{w}min", f"how much hotter the last {w} min were than here (UTCI)", "°C"),
            _declare(f"tmrt_mean_{w}min", f"mean radiant temperature over the last {w} min", "°C"),
            _declare(f"tmrt_ewm_{w}min", f"mean radiant temperature with a {w}-min memory", "°C"),
            _declare(f"sun_min_{w}min", f"minutes in full sun in the last {w} min", "min"),
            _declare(f"heat_dose_{w}min", f"heat dose above UTCI {DOSE_THRESHOLD_C:g} °C in the last {w} min",
                     "°C·min"),
            _declare(f"elev_gain_{w}min", f"climb in the last {w} min", "m"),
        ]
    names += [
        _declare("in_sun", "in direct sun now (1) or shade (0)", "-"),
        _declare("since_sun_shade_change_s", "time since stepping between sun and shade", "s"),
        _declare("sun_streak_min", "minutes in the sun without a break in shade", "min"),
        _declare("t_air_mean_5min", "mean air temperature over the last 5 min", "°C"),
        _declare("wind_mean_5min", "mean wind speed over the last 5 min", "m/s"),
        _declare(C.LAEQ_DB, "sound level now", "dB(A)"),
        _declare("leq_1min", "sound level (Leq) over the last 1 min", "dB(A)"),
        _declare("leq_5min", "sound level (Leq) over the last 5 min", "dB(A)"),
        _declare("leq_10min", "sound level (Leq) over the last 10 min", "dB(A)"),
        _declare("log_illum", "light level now (log10 lux)", "log10 lx"),
        _declare("log_illum_mean_1min", "light level over the last 1 min (log10 lux)", "log10 lx"),
        _declare("sky_frac_1min", "share of sky in the camera view (last 1 min)", "-"),
        _declare("green_frac_1min", "share of greenery in the camera view (last 1 min)", "-"),
        _declare("people_n_1min", "people in view (mean of the last 1 min)", "-"),
        _declare("walk_elapsed_min", "time since the walk started", "min"),
        _declare(CLO, "clothing insulation", "clo"),
        _declare(ACCLIMATISED, "acclimatised to local heat (1 yes, 0 no)", "-"),
        _declare("age_band_lower", "age band (lower bound)", "years"),
    ]
    # PET of the reference person in place of UTCI (fit --index pet; feature sets "*-pet")
    names += [_declare(PET_C, "PET here", "°C")]
    for w in WINDOWS_MIN:
        names += [
            _declare(f"pet_mean_{w}min", f"mean PET over the last {w} min", "°C"),
            _declare(f"pet_ewm_{w}min", f"PET averaged with a {w}-min memory", "°C"),
            _declare(f"pet_max_{w}min", f"highest PET in the last {w} min", "°C"),
            _declare(f"pet_contrast_{w}min", f"how much hotter the last {w} min were than here (PET)", "°C"),
        ]
    return tuple(names)


#: The declared feature list, in model order.
FEATURES: tuple[str, ...] = _declare_all()
#: PET's features (current, history) and the UTCI ones they replace in the "*-pet" sets (the heat dose
#: counts UTCI above 26 °C, so it goes with UTCI).
PET_FEATURES: tuple[str, ...] = tuple(f for f in FEATURES if f == PET_C or f.startswith("pet_"))
UTCI_FEATURES: tuple[str, ...] = tuple(f for f in FEATURES if f == C.UTCI_C or f.startswith(("utci_", "heat_dose_")))


def uses_pet(model) -> bool:
    """True for a model fitted on PET in place of UTCI (``fit --index pet``): its features have PET, not UTCI."""
    names = {str(c) for c in getattr(model, "feature_names_in_", ())}
    return PET_C in names and C.UTCI_C not in names

#: Features only a recorded walk can have (sound meter, light meter, camera): NaN on every
#: point of a planned (simulated) walk.
SENSOR_ONLY_FEATURES: tuple[str, ...] = (C.LAEQ_DB, "leq_1min", "leq_5min", "leq_10min", "log_illum",
                                         "log_illum_mean_1min", "sky_frac_1min", "green_frac_1min",
                                         "people_n_1min")

#: Features that describe the point and the walker *now* (no look-back window beyond the one-minute
#: smoothing of intermittent camera frames): the inputs of the current-conditions model, the same
#: learner as the history model with the history removed.
NOW_FEATURES: tuple[str, ...] = (*CURRENT_FEATURES, C.SPEED_MS, C.SLOPE_PCT, "in_sun", C.LAEQ_DB, "log_illum",
                                 "sky_frac_1min", "green_frac_1min", "people_n_1min", CLO, ACCLIMATISED,
                                 "age_band_lower")
#: Everything that looks back (heat, shade, sound, light and weather history, walk time).
HISTORY_FEATURES: tuple[str, ...] = tuple(f for f in FEATURES if f not in NOW_FEATURES)

#: Feature families for explanations in words (every feature belongs to exactly one).
FAMILIES: dict[str, tuple[str, ...]] = {
    "current heat": (C.UTCI_C, PET_C, C.TMRT_C, C.T_AIR_C, C.RH_PCT, C.WIND_MS, C.SHADE_FRAC, "in_sun"),
    "heat history": tuple(f for f in FEATURES if f.startswith(("utci_", "pet_", "tmrt_", "heat_dose_"))
                          and f not in (C.UTCI_C, PET_C, C.TMRT_C)) + ("t_air_mean_5min", "wind_mean_5min"),
    "shade history": tuple(f for f in FEATURES if f.startswith("sun_min_")) + ("since_sun_shade_change_s",
                                                                              "sun_streak_min"),
    "slope and pace": (C.SPEED_MS, C.SLOPE_PCT, *(f"elev_gain_{w}min" for w in WINDOWS_MIN), "walk_elapsed_min"),
    "sound": (C.LAEQ_DB, "leq_1min", "leq_5min", "leq_10min"),
    "light": ("log_illum", "log_illum_mean_1min"),
    "scene view": (C.SVF, "sky_frac_1min", "green_frac_1min", "people_n_1min"),
    "walker": (CLO, ACCLIMATISED, "age_band_lower"),
}
FAMILY_OF: dict[str, str] = {f: fam for fam, members in FAMILIES.items() for f in members}

#: Named feature sets: "all" for recorded walks; "planned" for a model meant to predict along
#: planned routes (without the sensor-only features, so it never leans on missing branches there).
FEATURE_SETS: dict[str, tuple[str, ...]] = {
    "all": tuple(f for f in FEATURES if f not in PET_FEATURES),
    "planned": tuple(f for f in FEATURES if f not in SENSOR_ONLY_FEATURES and f not in PET_FEATURES),
}
# the same sets with PET in place of UTCI (its current value, history and the UTCI heat dose)
FEATURE_SETS.update({f"{name}-pet": tuple(f for f in FEATURES if (f in PET_FEATURES or f in feats)
                                          and f not in UTCI_FEATURES)
                     for name, feats in list(FEATURE_SETS.items())})


def build_features(timeline: pd.DataFrame, participants: dict | None = None) -> pd.DataFrame:
    """One feature row per timeline row, from current conditions and look-back windows.

    Parameters
    ----------
    timeline : pandas.DataFrame
        A timeline (one walk or a stacked campaign): tz-aware UTC ``DatetimeIndex``
        named ``time``; columns from :mod:`walkcomfort.columns` (``walk_id``,
        environment columns such as ``utci_c`` [°C], ``tmrt_c`` [°C],
        ``shade_frac`` [-], ``svf`` [-], sensors such as ``laeq_db`` [dB(A)]).
        Any column may be missing; its features are then NaN. Without ``walk_id``
        the frame is one walk. Participant attributes (``clo`` [clo],
        ``acclimatised``, ``age_band``) are read from columns, else from
        ``timeline.attrs["session"]``, else from ``participants``.
    participants : dict, optional
        ``{walk_id or participant: {"clo": .., "acclimatised": .., "age_band": ..}}``
        for stacked campaigns whose attributes are not columns.

    Returns
    -------
    pandas.DataFrame
        Same index and row order as ``timeline``; columns exactly :data:`FEATURES`
        (float64). Units as in :data:`FEATURE_INFO`.

    Raises
    ------
    InputError
        Index not a tz-aware DatetimeIndex, non-numeric sensor values, or a walk
        longer than :data:`MAX_WALK_S`.
    """
    if not isinstance(timeline, pd.DataFrame):
        raise InputError(f"build_features needs a DataFrame, got {type(timeline).__name__}",
                         fix="pass a timeline DataFrame (walkcomfort.session.timeline)")
    idx = timeline.index
    if not isinstance(idx, pd.DatetimeIndex) or idx.tz is None:
        raise InputError("timeline index must be a tz-aware DatetimeIndex (UTC) named 'time'",
                         where="timeline index",
                         fix="build timelines with walkcomfort ingest or set_index on a UTC time column")
    n = len(timeline)
    out = pd.DataFrame(np.nan, index=idx, columns=list(FEATURES), dtype="float64")
    if n == 0:
        return out

    # Work in (walk, time) order; results are put back in the caller's order at the end.
    if C.WALK_ID in timeline.columns:
        walk_codes, _walks = pd.factorize(timeline[C.WALK_ID].astype("string").fillna("<none>"), sort=False)
    else:
        walk_codes = np.zeros(n, dtype=np.int64)
    t_ns = idx.as_unit("ns").asi8
    order = np.lexsort((t_ns, walk_codes))
    code = walk_codes[order]
    t_ns = t_ns[order]
    starts = np.r_[True, code[1:] != code[:-1]]
    walk_first = np.maximum.accumulate(np.where(starts, np.arange(n), 0))
    rel_s = (t_ns - t_ns[walk_first]) / 1e9
    if rel_s.max() > MAX_WALK_S:
        bad = int(np.argmax(rel_s))
        raise InputError(f"a walk lasts {rel_s[bad] / 3600:.1f} h, longer than the {MAX_WALK_S / 3600:g} h "
                         "the history features handle", where=f"timeline row {int(order[bad])}",
                         fix="split the walk into sessions shorter than that")
    step = np.diff(rel_s, prepend=0.0)
    step[starts] = 0.0
    # the first row of a walk stands for one typical step (the walk's median, 1 s if unknown)
    med = pd.Series(np.where(starts, np.nan, step)).groupby(code).transform("median").to_numpy()
    dt = np.clip(np.where(starts, np.nan_to_num(med, nan=1.0), step), 0.0, MAX_STEP_S)

    # A monotonic stand-in time axis: walks laid end to end with a gap longer than any
    # window, so pandas' time-based rolling windows never reach into the previous walk.
    gap_s = float(rel_s.max()) + 2 * 60.0 * max(WINDOWS_MIN) + 1.0
    if (code.max() + 1) * gap_s * 1e9 > 9e18:
        raise InputError(f"{code.max() + 1} walks are too many for one call", where="timeline",
                         fix="call build_features on smaller batches of walks")
    fake = pd.DatetimeIndex((code * np.int64(round(gap_s * 1e9)) + np.round(rel_s * 1e9).astype(np.int64))
                            .astype("datetime64[ns]"))
    ctx = _Context(code, starts, rel_s, dt, fake)

    def col(name: str) -> np.ndarray:
        if name not in timeline.columns:
            return np.full(n, np.nan)
        s = timeline[name]
        try:
            v = pd.to_numeric(s, errors="raise").to_numpy(dtype="float64", na_value=np.nan)
        except (ValueError, TypeError):
            bad = pd.to_numeric(s, errors="coerce").isna() & s.notna()
            row = int(np.flatnonzero(bad.to_numpy())[0])
            raise InputError(f"column '{name}' holds a non-numeric value {s.iloc[row]!r}",
                             where=f"timeline row {row}", fix="fix or quarantine that row upstream") from None
        return v[order]

    f: dict[str, np.ndarray] = {}
    utci = col(C.UTCI_C)
    tmrt = col(C.TMRT_C)
    shade = col(C.SHADE_FRAC)
    for name in (C.T_AIR_C, C.RH_PCT, C.WIND_MS, C.SVF, C.SPEED_MS, C.SLOPE_PCT, C.LAEQ_DB):
        f[name] = col(name)
    f[C.UTCI_C], f[C.TMRT_C], f[C.SHADE_FRAC] = utci, tmrt, shade

    sun = 1.0 - shade  # share of the direct beam reaching the walker
    dose_rate = np.where(np.isnan(utci), np.nan, np.maximum(utci - DOSE_THRESHOLD_C, 0.0))
    elev = col(C.ELEV_M)
    climb = np.diff(elev, prepend=np.nan)
    climb[starts] = np.nan
    climb = np.where(np.isnan(climb), np.nan, np.maximum(climb, 0.0))
    for w in WINDOWS_MIN:
        ws = 60.0 * w
        f[f"utci_mean_{w}min"] = ctx.mean(utci, ws)
        f[f"utci_ewm_{w}min"] = ctx.ewm(utci, ws)
        f[f"utci_max_{w}min"] = ctx.max(utci, ws)
        # contrast with the recent past: a tree cannot form a difference of two features itself
        f[f"utci_contrast_{w}min"] = f[f"utci_ewm_{w}min"] - utci
        f[f"tmrt_mean_{w}min"] = ctx.mean(tmrt, ws)
        f[f"tmrt_ewm_{w}min"] = ctx.ewm(tmrt, ws)
        f[f"sun_min_{w}min"] = ctx.time_sum(sun, ws) / 60.0
        f[f"heat_dose_{w}min"] = ctx.time_sum(dose_rate, ws) / 60.0
        f[f"elev_gain_{w}min"] = ctx.plain_sum(climb, ws)
    pet = col(PET_C)  # NaN unless the timeline carries PET (thermal --extra-index pet, fit --index pet)
    f[PET_C] = pet
    for w in WINDOWS_MIN:
        nan = np.isnan(pet).all()
        f[f"pet_mean_{w}min"] = pet if nan else ctx.mean(pet, 60.0 * w)
        f[f"pet_ewm_{w}min"] = pet if nan else ctx.ewm(pet, 60.0 * w)
        f[f"pet_max_{w}min"] = pet if nan else ctx.max(pet, 60.0 * w)
        f[f"pet_contrast_{w}min"] = f[f"pet_ewm_{w}min"] - pet

    f["in_sun"] = np.where(np.isnan(shade), np.nan, (shade < SHADE_STATE_FRAC).astype(float))
    f["since_sun_shade_change_s"] = ctx.since_change(f["in_sun"])
    f["sun_streak_min"] = f["in_sun"] * f["since_sun_shade_change_s"] / 60.0
    f["t_air_mean_5min"] = ctx.mean(col(C.T_AIR_C), 300.0)
    f["wind_mean_5min"] = ctx.mean(col(C.WIND_MS), 300.0)
    # sound: energy averages, Leq = 10 log10(mean 10^(L/10)) (IEC 61672-1 definition of Leq)
    energy = 10.0 ** (f[C.LAEQ_DB] / 10.0)
    for w in (1, 5, 10):
        with np.errstate(divide="ignore"):
            f[f"leq_{w}min"] = 10.0 * np.log10(ctx.mean(energy, 60.0 * w))
    illum = col(C.ILLUM_LUX)
    log_illum = np.log10(np.clip(illum, 0.0, None) + 1.0)
    f["log_illum"] = log_illum
    f["log_illum_mean_1min"] = ctx.mean(log_illum, 60.0)
    f["sky_frac_1min"] = ctx.mean(col(C.SKY_FRAC), 60.0)
    f["green_frac_1min"] = ctx.mean(col(C.GREEN_FRAC), 60.0)
    f["people_n_1min"] = ctx.mean(col(C.PEOPLE_N), 60.0)
    f["walk_elapsed_min"] = rel_s / 60.0
    attrs = participant_attributes(timeline, participants)
    f[CLO] = attrs[CLO].to_numpy(dtype=float)[order]
    f[ACCLIMATISED] = attrs[ACCLIMATISED].to_numpy(dtype=float)[order]
    f["age_band_lower"] = attrs["age_band_lower"].to_numpy(dtype=float)[order]

    values = np.empty((n, len(FEATURES)))
    inverse = np.empty(n, dtype=np.int64)
    inverse[order] = np.arange(n)
    for j, name in enumerate(FEATURES):
        values[:, j] = f[name][inverse]
    return pd.DataFrame(values, index=idx, columns=list(FEATURES))


class _Context:
    """Window arithmetic over walks laid end to end on a stand-in time axis."""

    def __init__(self, code, starts, rel_s, dt, fake):
        self.code, self.starts, self.rel_s, self.dt, self.fake = code, starts, rel_s, dt, fake

    def _roll(self, values: np.ndarray, window_s: float):
        return pd.Series(values, index=self.fake).rolling(pd.Timedelta(seconds=window_s), min_periods=1)

    def time_sum(self, x: np.ndarray, window_s: float) -> np.ndarray:
        """Σ x·dt over (t − window, t] [x·s]; NaN where no value in the window."""
        return self._roll(x * self.dt, window_s).sum().to_numpy()

    def plain_sum(self, x: np.ndarray, window_s: float) -> np.ndarray:
        return self._roll(x, window_s).sum().to_numpy()

    def mean(self, x: np.ndarray, window_s: float) -> np.ndarray:
        """Time-weighted mean over (t − window, t]; NaN where no value in the window."""
        num = self._roll(x * self.dt, window_s).sum().to_numpy()
        den = self._roll(np.where(np.isnan(x), np.nan, self.dt), window_s).sum().to_numpy()
        with np.errstate(invalid="ignore", divide="ignore"):
            out = num / den
        # a window holding only zero-length steps (duplicate times) falls back to its plain mean
        plain = self._roll(x, window_s).mean().to_numpy()
        return np.where(den > 0, out, plain)

    def max(self, x: np.ndarray, window_s: float) -> np.ndarray:
        return self._roll(x, window_s).max().to_numpy()

    def ewm(self, x: np.ndarray, tau_s: float) -> np.ndarray:
        """Exponentially weighted mean, weight ∝ dt·exp(−age/τ), per walk, looking back only.

        Uses the identity Σ_j w_j x_j e^{(t_j − t_i)/τ} = e^{−t_i/τ} Σ_j w_j x_j e^{t_j/τ}
        with times relative to each walk's start (bounded by MAX_WALK_S, so no overflow).
        """
        grow = np.exp(self.rel_s / tau_s)
        valid = ~np.isnan(x)
        w = np.where(valid, self.dt, 0.0)
        # a walk starting with zero-length steps still needs weight on its first value
        w = np.where(valid & (w == 0), 1e-9, w)
        zx = pd.Series(np.where(valid, x, 0.0) * w * grow).groupby(self.code).cumsum().to_numpy()
        zw = pd.Series(w * grow).groupby(self.code).cumsum().to_numpy()
        with np.errstate(invalid="ignore", divide="ignore"):
            return np.where(zw > 0, zx / zw, np.nan)

    def since_change(self, state: np.ndarray) -> np.ndarray:
        """Seconds since the state last changed (or since the walk start), per walk."""
        s = pd.Series(state).groupby(self.code).ffill().to_numpy()
        prev = np.r_[np.nan, s[:-1]]
        changed = (s != prev) & ~np.isnan(s) & ~np.isnan(prev) & ~self.starts
        mark = np.where(changed | self.starts, self.rel_s, np.nan)
        last = pd.Series(mark).groupby(self.code).ffill().to_numpy()
        return self.rel_s - last


def _age_lower(value) -> float:
    if value is None or (isinstance(value, float) and np.isnan(value)) or value is pd.NA:
        return np.nan
    m = re.search(r"\d+", str(value))
    return float(m.group()) if m else np.nan


def _truthy(value) -> float:
    if value is None or value is pd.NA or (isinstance(value, float) and np.isnan(value)):
        return np.nan
    if isinstance(value, (bool, np.bool_, int, float, np.integer, np.floating)):
        return float(bool(value))
    text = str(value).strip().lower()
    if text in ("true", "yes", "y", "1"):
        return 1.0
    if text in ("false", "no", "n", "0"):
        return 0.0
    return np.nan


def _per_unique(values: np.ndarray, func) -> np.ndarray:
    """``func`` applied once per distinct value (attributes repeat on every row of a walk)."""
    codes, uniques = pd.factorize(pd.Series(values, dtype=object), use_na_sentinel=True)
    mapped = np.array([func(u) for u in uniques] + [np.nan], dtype=float)
    return mapped[codes]  # code -1 (missing) picks the trailing NaN


def participant_attributes(timeline: pd.DataFrame, participants: dict | None = None) -> pd.DataFrame:
    """Per-row participant attributes: ``clo`` [clo], ``acclimatised`` (0/1), ``age_band``, ``age_band_lower``.

    Looked up, in order, from columns of ``timeline``, from ``participants``
    (keyed by ``walk_id`` or ``participant``), from ``timeline.attrs["session"]``.
    """
    n = len(timeline)
    session = timeline.attrs.get("session", {}) if isinstance(timeline.attrs, dict) else {}
    if isinstance(session.get("participant"), dict):  # nested [participant] table
        session = {**session, **session["participant"]}
    out = {}
    for name in PARTICIPANT_ATTRS:
        if name in timeline.columns:
            out[name] = timeline[name].to_numpy(dtype=object)
            continue
        vals = np.full(n, session.get(name), dtype=object)
        if participants:
            # walk_id first (most specific), then participant; None leaves the value as is
            for key_col in (C.PARTICIPANT, C.WALK_ID):
                if key_col not in timeline.columns:
                    continue
                keys = timeline[key_col].astype("string").fillna("")
                lut = {k: (participants.get(k) or {}).get(name) for k in keys.unique()}
                looked = keys.map(lut).to_numpy(dtype=object)
                vals = np.where(pd.isna(looked), vals, looked)
        out[name] = vals
    clo = pd.to_numeric(pd.Series(out[CLO], index=timeline.index), errors="coerce").astype(float)
    accl = pd.Series(_per_unique(out[ACCLIMATISED], _truthy), index=timeline.index, dtype=float)
    band = pd.Series(out[AGE_BAND], index=timeline.index, dtype=object)
    lower = pd.Series(_per_unique(out[AGE_BAND], _age_lower), index=timeline.index, dtype=float)
    return pd.DataFrame({CLO: clo, ACCLIMATISED: accl, AGE_BAND: band, "age_band_lower": lower})
