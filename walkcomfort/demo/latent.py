"""The invented comfort process behind the demo walkers' votes.

**This process is invented for the demo.** It is not a finding, not fitted to any
data and not a model of real people. It exists so that the comfort model is tested
fairly: the truth is *not* built from the model's features (no exponentially weighted
UTCI at the model's windows, no "minutes since shade" at the model's threshold, no
UTCI contrast term). Whether the model's look-back features help must then be found
out, not rediscovered.

**Body state.** Each walker carries a skin-temperature-like state ``T`` [°C] that
follows a first-order response to the UTCI met at each second, with the walker's own
time constant ``τ_w``:

``dT/dt = (T_ss(U) − T) / τ_w``,  ``T_ss(U) = T_N + g·(U − U₀)``

(``U`` UTCI now [°C], ``U₀`` = :data:`UTCI_REF_C`, ``T_N`` = :data:`SKIN_NEUTRAL_C`,
``g`` = :data:`SKIN_GAIN` K per K of UTCI; ``τ_w`` = :data:`TAU_BODY_S` scaled by the
walker's clothing, :func:`body_time_constant_s`). Warm-up from the first second: the walker
stood outside before setting off, so ``T`` starts at ``T_ss`` of the first UTCI.

**Sensation from the state and its rate of change.** The thermal part of the score is

``S = a·(T − T_N) + c·dT/dt``  (``dT/dt`` in K/min; ``c`` = :data:`C_WARMING` while
warming, :data:`C_COOLING` while cooling)

— the structure of the transient thermal-sensation models in which sensation follows a
static term in skin temperature plus a dynamic term in its rate of change, with cooling
felt more strongly than warming (Zhang, Arens, Huizenga & Han 2010, "Thermal sensation and
comfort models for non-uniform and transient environments, Part I: local sensation of
individual body parts", Building and Environment 45(2):380–388,
doi:10.1016/j.buildenv.2009.06.018 — DOI from memory; the overshoot on sudden cooling:
de Dear, Ring & Fanger 1993, "Thermal sensations resulting from sudden ambient temperature
changes", Indoor Air 3(3):181–192). We follow only that structure (one whole-body state,
one static and one dynamic term); every number here is invented.

**Score and votes.** ``D = k_w·S + s·max(slope, 0) + n·max(LAeq − 62, 0) + p·min(crowd, 8)
+ bias_w`` (``k_w`` a walker's heat sensitivity, ``bias_w`` a walker's offset). A vote
reports ``D + ε`` (ε ~ N(0, :data:`VOTE_NOISE`)) as ``comfortable`` below
:data:`COMFORTABLE_BELOW`, ``uncomfortable`` above :data:`UNCOMFORTABLE_ABOVE`, ``neutral``
between; the seven-point thermal sensation vote (ASHRAE 55 scale) is the thermal part alone,
rounded and clipped to −3…+3.

**No-history variant** (``variant="no-history"``, for tests): the state follows the UTCI
instantly (``T = T_ss(U)``, no rate term), so the votes depend on the current conditions
only; a model's history gain must then come out within its error.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

UTCI_REF_C = 27.0          # reference UTCI of the invented population [°C]
SKIN_NEUTRAL_C = 33.5      # body state at the reference UTCI [°C] (invented)
SKIN_GAIN = 0.12           # K of body state per K of UTCI in steady state (invented)
TAU_BODY_S = 900.0         # time constant of the body state for a 0.5 clo walker [s] (invented)
A_STATE = 1.7              # per K of body state above neutral
C_WARMING = 1.5            # per K/min while the state rises
C_COOLING = 3.0            # per K/min while the state falls (cooling is felt more strongly)
S_SLOPE = 0.12             # per % of uphill slope
N_NOISE = 0.12             # per dB(A) above 62
P_CROWD = 0.15             # per person around (capped at 8)
VOTE_NOISE = 0.25          # standard deviation of a vote's noise
COMFORTABLE_BELOW = 1.9
UNCOMFORTABLE_ABOVE = 2.7
SHADE_BELOW = 0.5          # beam transmittance below which a walker counts as in shade (notes only) [-]
VARIANTS = ("body", "no-history")


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


def body_time_constant_s(walker: Walker) -> float:
    """τ_w [s]: :data:`TAU_BODY_S` for 0.5 clo, slower for more clothing (invented: +40 % per clo)."""
    return TAU_BODY_S * (1.0 + 0.4 * (walker.clo - 0.5))


def body_state(utci_c, tau_s: float, dt_s: float = 1.0, variant: str = "body"):
    """Body state T [°C] and its rate of change [K/min] per step (first-order response to UTCI).

    The exact discrete solution of a first-order lag for an input held over each step:
    ``T[i] = T_ss[i] + (T[i−1] − T_ss[i])·exp(−Δt/τ)``.
    """
    if variant not in VARIANTS:
        raise ValueError(f"variant {variant!r} is not one of {VARIANTS}")
    u = np.asarray(utci_c, float)
    ss = SKIN_NEUTRAL_C + SKIN_GAIN * (u - UTCI_REF_C)
    if variant == "no-history":
        return ss.copy(), np.zeros_like(ss)
    decay = np.exp(-dt_s / tau_s)
    t = np.empty_like(ss)
    acc = ss[0]
    for i, target in enumerate(ss):
        acc = target + (acc - target) * decay
        t[i] = acc
    rate = np.diff(t, prepend=t[0]) / dt_s * 60.0
    return t, rate


def minutes_since_shade(beam_trans, dt_s: float = 1.0, start_min: float = 0.0):
    """Minutes since the walker was last in shade (used for the walkers' typed notes only)."""
    tr = np.asarray(beam_trans, float)
    out = np.empty_like(tr)
    acc = start_min
    for i, v in enumerate(tr):
        acc = 0.0 if v < SHADE_BELOW else acc + dt_s / 60.0
        out[i] = acc
    return out


def thermal_part(state_c, rate_k_per_min):
    """The thermal part ``S`` of the score (before the walker's sensitivity) [-]."""
    t = np.asarray(state_c, float)
    r = np.asarray(rate_k_per_min, float)
    return A_STATE * (t - SKIN_NEUTRAL_C) + np.where(r >= 0, C_WARMING, C_COOLING) * r


def discomfort(walker: Walker, utci_c, beam_trans, slope_pct, laeq_db, crowd_n, dt_s: float = 1.0,
               variant: str = "body"):
    """Latent discomfort ``D`` per second of a walk, and its parts.

    Returns
    -------
    dict of ndarray
        ``d`` (the score), ``thermal`` (S), ``body_c`` (T), ``heat_load_c`` (the UTCI whose
        steady state equals T: what the body has adjusted to [°C]), ``sun_min`` (minutes since
        the last shade, for notes only).
    """
    state, rate = body_state(utci_c, body_time_constant_s(walker), dt_s, variant)
    th = thermal_part(state, rate)
    d = (walker.heat_sensitivity * th + S_SLOPE * np.maximum(np.asarray(slope_pct, float), 0.0)
         + N_NOISE * np.maximum(np.asarray(laeq_db, float) - 62.0, 0.0)
         + P_CROWD * np.minimum(np.asarray(crowd_n, float), 8.0) + walker.bias)
    load = UTCI_REF_C + (state - SKIN_NEUTRAL_C) / SKIN_GAIN
    return {"d": d, "thermal": th, "body_c": state, "heat_load_c": load,
            "sun_min": minutes_since_shade(beam_trans, dt_s)}


def comfort_class(d_noisy):
    """Class name per noisy score (see the thresholds in the module docstring)."""
    d = np.asarray(d_noisy, float)
    return np.where(d < COMFORTABLE_BELOW, "comfortable", np.where(d > UNCOMFORTABLE_ABOVE, "uncomfortable", "neutral"))


def sensation_vote(walker: Walker, thermal, noise):
    """Seven-point thermal sensation (−3 cold … +3 hot, ASHRAE 55 scale) from the thermal part."""
    v = 0.9 * walker.heat_sensitivity * np.asarray(thermal, float) + 0.5 * walker.bias + np.asarray(noise, float)
    return np.clip(np.rint(v), -3, 3).astype(int)
