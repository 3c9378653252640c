"""Sound level meter CSV: A-weighted levels per interval, and their energy average.

Levels are averaged on energy, never arithmetically: for N equal intervals,
L_Aeq = 10·log10( (1/N)·Σ 10^(L_i/10) ) (ISO 1996-1:2016, 3.2.1 and the
definition of the equivalent continuous sound pressure level).
"""

from __future__ import annotations

import numpy as np

from walkcomfort.columns import LAEQ_DB
from walkcomfort.session.readers._common import read_sensor_csv


def read_noise(path, source_spec, session_spec):
    """Read a sound-level CSV (``time, laeq`` in dB(A), one level per logging interval).

    Returns ``(data, metadata)``: UTC index ``time`` (device clock), column
    ``laeq_db`` [dB(A)]; metadata as for every reader.
    """
    return read_sensor_csv(source_spec, session_spec, [("laeq", LAEQ_DB, True)], "noise", path)


def energy_average(levels_db, weights=None, axis=None):
    """Energy (equivalent) average of sound levels.

    Parameters
    ----------
    levels_db : array_like
        Levels [dB], NaN ignored.
    weights : array_like, optional
        Durations of the intervals [s] (equal when omitted).
    axis : int, optional

    Returns
    -------
    float or ndarray
        L_eq = 10·log10(Σ w_i 10^(L_i/10) / Σ w_i) [dB]; NaN when no level is finite.

    References
    ----------
    ISO 1996-1:2016, Acoustics — Description, measurement and assessment of
    environmental noise — Part 1, definition of the equivalent continuous level.
    """
    L = np.asarray(levels_db, dtype=float)
    w = np.ones_like(L) if weights is None else np.broadcast_to(np.asarray(weights, dtype=float), L.shape)
    ok = np.isfinite(L)
    # subtract the max before exponentiating so very loud levels do not overflow
    ref = np.nanmax(np.where(ok, L, -np.inf), axis=axis, keepdims=True) if ok.any() else np.zeros(1)
    ref = np.where(np.isfinite(ref), ref, 0.0)
    e = np.where(ok, w * 10.0 ** ((np.where(ok, L, 0.0) - ref) / 10.0), 0.0)
    num = e.sum(axis=axis, keepdims=True)
    den = np.where(ok, w, 0.0).sum(axis=axis, keepdims=True)
    with np.errstate(divide="ignore", invalid="ignore"):
        out = ref + 10.0 * np.log10(num / den)
    out = np.where(den > 0, out, np.nan)
    if axis is None:
        return float(out.reshape(-1)[0])
    return np.squeeze(out, axis=axis)
