"""The invented comfort process behind the demo walkers' votes.

**This process is invented for the demo.** It is not a finding, not fitted to any
data and not a model of real people; it exists so that the comfort model has
something with a history in it to learn, and so that a rule that looks only at
the current UTCI band does measurably worse than a model that also looks back.

At every second of a walk the walker carries a latent *discomfort* score ``D``
(dimensionless; higher is worse), built from what the walker is meeting now and
what they met in the minutes before:

``D = k_w · [ a·(U − U₀) + b·(H − U₀) + c·min(t_sun, 12) − r·max(H − U − 1, 0) ]``
``    + s·max(slope, 0) + n·max(L − 62, 0) + p·min(crowd, 8) + bias_w``

- ``U`` — UTCI now [°C]; ``U₀`` = :data:`UTCI_REF_C` (27 °C, an invented acclimatised
  population's reference); ``H`` — heat load, the exponentially weighted mean of UTCI
  with a time constant of :data:`TAU_HEAT_S` (10 min), so it remembers the last minutes;
- ``t_sun`` — minutes since the walker was last in shade (beam transmittance below 0.5),
  capped at 12: a long stretch in the sun keeps adding discomfort;
- ``max(H − U − 1, 0)`` — *relief*: stepping into shade after a hot stretch feels better
  than the same shade felt all along (r > b, so after sun, shade beats shade-all-along);
  the relief fades as ``H`` catches up with ``U``;
- ``slope`` [%] uphill effort, ``L`` the sound level [dB(A)], ``crowd`` the number of
  people around (both invented sensitivities);
- ``k_w`` a walker's heat sensitivity and ``bias_w`` a walker's offset (pseudonymous
  walkers differ, as real people do).

A vote reports ``D + ε`` (ε ~ N(0, :data:`VOTE_NOISE`)) as ``comfortable`` below
:data:`COMFORTABLE_BELOW`, ``uncomfortable`` above :data:`UNCOMFORTABLE_ABOVE`,
``neutral`` between; the seven-point thermal sensation vote (ASHRAE 55 scale) is the
thermal part alone, rounded and clipped to −3…+3.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

TAU_HEAT_S = 600.0          # time constant of the remembered heat load [s]
SHADE_BELOW = 0.5           # beam transmittance below which a walker counts as in shade [-]
A_NOW = 0.05                # per K of UTCI now
B_LOAD = 0.10               # per K of remembered heat load
C_SUN = 0.12                # per minute since the last shade (capped at 12 min)
R_RELIEF = 0.35             # per K of relief (heat load above UTCI now)
S_SLOPE = 0.12              # per % of uphill slope
N_NOISE = 0.12              # per dB(A) above 62
P_CROWD = 0.15              # per person around (capped at 8)
VOTE_NOISE = 0.25           # standard deviation of a vote's noise
UTCI_REF_C = 27.0          # reference UTCI of the invented population [°C]
COMFORTABLE_BELOW = 1.4
UNCOMFORTABLE_ABOVE = 2.5


@dataclass(frozen=True)
class Walker:
    """An invented, pseudonymous walker."""

    id: str                  # pseudonym, e.g. "P01"
    speed_ms: float          # walking speed on the flat [m s⁻¹]
    heat_sensitivity: float  # k_w [-]
    bias: float              # bias_w [-]
    clo: float               # clothing insulation [clo]
    age_band: str
    acclimatised: bool


def heat_load(utci_c, dt_s: float = 1.0, tau_s: float = TAU_HEAT_S):
    """Exponentially weighted mean of UTCI over the past (time constant ``tau_s``) [°C].

    Starts at the first value (the walker stood outside before setting off).
    """
    u = np.asarray(utci_c, float)
    a = np.exp(-dt_s / tau_s)
    out = np.empty_like(u)
    acc = u[0]
    for i, v in enumerate(u):
        acc = a * acc + (1 - a) * v
        out[i] = acc
    return out


def minutes_since_shade(beam_trans, dt_s: float = 1.0, start_min: float = 0.0):
    """Minutes since the walker was last in shade (transmittance below :data:`SHADE_BELOW`)."""
    tr = np.asarray(beam_trans, float)
    out = np.empty_like(tr)
    acc = start_min
    for i, v in enumerate(tr):
        acc = 0.0 if v < SHADE_BELOW else acc + dt_s / 60.0
        out[i] = acc
    return out


def thermal_part(utci_c, load_c, sun_min):
    """The thermal bracket of ``D`` (before the walker's sensitivity) [-]."""
    u = np.asarray(utci_c, float)
    h = np.asarray(load_c, float)
    return (A_NOW * (u - UTCI_REF_C) + B_LOAD * (h - UTCI_REF_C) + C_SUN * np.minimum(sun_min, 12.0)
            - R_RELIEF * np.maximum(h - u - 1.0, 0.0))


def discomfort(walker: Walker, utci_c, beam_trans, slope_pct, laeq_db, crowd_n, dt_s: float = 1.0):
    """Latent discomfort ``D`` per second of a walk, and its parts.

    Returns
    -------
    dict of ndarray
        ``d`` (the score), ``thermal``, ``heat_load_c``, ``sun_min``.
    """
    h = heat_load(utci_c, dt_s)
    sun = minutes_since_shade(beam_trans, dt_s)
    th = thermal_part(utci_c, h, sun)
    d = (walker.heat_sensitivity * th + S_SLOPE * np.maximum(np.asarray(slope_pct, float), 0.0)
         + N_NOISE * np.maximum(np.asarray(laeq_db, float) - 62.0, 0.0)
         + P_CROWD * np.minimum(np.asarray(crowd_n, float), 8.0) + walker.bias)
    return {"d": d, "thermal": th, "heat_load_c": h, "sun_min": sun}


def comfort_class(d_noisy):
    """Class name per noisy score (see the thresholds in the module docstring)."""
    d = np.asarray(d_noisy, float)
    return np.where(d < COMFORTABLE_BELOW, "comfortable", np.where(d > UNCOMFORTABLE_ABOVE, "uncomfortable", "neutral"))


def sensation_vote(walker: Walker, thermal, noise):
    """Seven-point thermal sensation (−3 cold … +3 hot, ASHRAE 55 scale) from the thermal part."""
    v = 0.9 * walker.heat_sensitivity * np.asarray(thermal, float) + 0.5 * walker.bias + np.asarray(noise, float)
    return np.clip(np.rint(v), -3, 3).astype(int)
