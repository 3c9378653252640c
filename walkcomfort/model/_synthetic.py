"""Synthetic labelled timelines with a known history effect, for tests and benchmarks only.

Not a model of people and not the demo town (that is :mod:`walkcomfort.demo`): walks
alternate between sun and shade, and each vote follows a latent thermal load that
depends on the current UTCI *and* on the last minutes: a heat dose raises it, and
stepping from sun into shade lowers it for a while (the contrast the comfort model
is meant to learn). The latent process is computed with a plain per-row loop,
independent of :mod:`walkcomfort.model.features`.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from walkcomfort import columns as C


def synthetic_walk(rng: np.random.Generator, walk_id: str, participant: str, start: pd.Timestamp,
                   duration_s: int = 2400, vote_every_s: float = 120.0, bias: float = 0.0,
                   with_noise_meter: bool = True) -> pd.DataFrame:
    """One synthetic walk at 1 s; votes every ``vote_every_s`` on average (1 → every row)."""
    n = int(duration_s)
    # sun/shade segments of 30 s … 6 min
    shade = np.empty(n)
    svf = np.empty(n)
    i = 0
    state = rng.random() < 0.5
    while i < n:
        length = int(rng.integers(30, 360))
        shade[i:i + length] = (0.9 if state else 0.05) + rng.normal(0, 0.03)
        svf[i:i + length] = (0.35 if state else 0.8) + rng.normal(0, 0.05)
        state = not state
        i += length
    shade = np.clip(shade, 0, 1)
    svf = np.clip(svf, 0.05, 1)
    t_air = 25.0 + 8.0 * rng.random() + np.cumsum(rng.normal(0, 0.01, n))
    rh = np.clip(45 + rng.normal(0, 2, n), 5, 100)
    wind = np.clip(1.2 + rng.normal(0, 0.4, n), 0.1, None)
    tmrt = t_air + (1 - shade) * 28.0 + rng.normal(0, 1.0, n)
    # a rough stand-in for UTCI (synthetic data only): air plus a share of the radiant excess, minus wind
    utci = t_air + 0.35 * (tmrt - t_air) - 1.2 * (wind - 1.0)

    # latent load: current UTCI, 10-min heat dose, and relief after leaving the sun
    ewm5 = np.empty(n)
    dose = np.empty(n)
    acc = utci[0]
    a = 1.0 - np.exp(-1.0 / 300.0)
    window = np.maximum(utci - 26.0, 0.0) / 60.0
    csum = np.cumsum(window)
    for k in range(n):
        acc += a * (utci[k] - acc)
        ewm5[k] = acc
        dose[k] = csum[k] - (csum[k - 600] if k >= 600 else 0.0)
    relief = np.maximum(ewm5 - utci, 0.0)
    load = (utci - 33.5) / 3.0 + 0.03 * (dose - 40.0) - 0.6 * relief + bias + rng.logistic(0, 0.25, n)
    comfort = np.where(load < -0.9, "comfortable", np.where(load < 0.9, "neutral", "uncomfortable"))
    tsv = np.clip(np.round(0.8 * load + 0.8 + rng.normal(0, 0.3, n)), -3, 3)

    if vote_every_s <= 1:
        voted = np.ones(n, dtype=bool)
    else:
        voted = np.zeros(n, dtype=bool)
        k = int(rng.integers(30, 90))
        while k < n:
            voted[k] = True
            k += int(rng.integers(int(vote_every_s * 0.6), int(vote_every_s * 1.4) + 1))
    idx = pd.date_range(start, periods=n, freq="s", tz="UTC", name=C.TIME)
    elev = 40 + np.cumsum(rng.normal(0, 0.02, n))
    df = pd.DataFrame({
        C.WALK_ID: walk_id, C.PARTICIPANT: participant,
        C.ELEV_M: elev, C.SPEED_MS: np.clip(1.3 + rng.normal(0, 0.1, n), 0, None),
        C.SLOPE_PCT: np.r_[0.0, np.diff(elev)] / 1.3 * 100,
        C.T_AIR_C: t_air, C.RH_PCT: rh, C.WIND_MS: wind,
        C.SHADE_FRAC: shade, C.SVF: svf, C.TMRT_C: tmrt, C.UTCI_C: utci,
        C.VOTE_COMFORT: pd.Series(np.where(voted, comfort, None), index=idx, dtype="string"),
        C.VOTE_TSV: np.where(voted, tsv, np.nan),
    }, index=idx)
    if with_noise_meter:
        df[C.LAEQ_DB] = 58 + 8 * rng.random(n)
    return df


def synthetic_campaign(n_participants: int = 8, walks_per_participant: int = 2, duration_s: int = 2400,
                       vote_every_s: float = 120.0, seed: int = 0) -> pd.DataFrame:
    """A stacked campaign of synthetic walks (see module docstring); participant attributes as columns."""
    rng = np.random.default_rng(seed)
    frames = []
    t0 = pd.Timestamp("2026-07-14 07:00", tz="UTC")
    bands = ("18-24", "25-34", "35-49", "50-64", "65+")
    for p in range(n_participants):
        pid = f"P{p + 1:02d}"
        bias = rng.normal(0, 0.2)
        clo = float(np.round(rng.choice([0.4, 0.5, 0.6]), 2))
        accl = bool(rng.random() < 0.5)
        band = bands[p % len(bands)]
        for w in range(walks_per_participant):
            start = t0 + pd.Timedelta(days=p) + pd.Timedelta(hours=3 * w)
            df = synthetic_walk(rng, f"{pid}-w{w + 1}", pid, start, duration_s, vote_every_s, bias,
                                with_noise_meter=(p % 3 != 2))
            df["clo"], df["acclimatised"], df["age_band"] = clo, accl, band
            frames.append(df)
    return pd.concat(frames)
