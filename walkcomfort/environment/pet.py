"""Physiological equivalent temperature (PET) for the standard reference person, and its classes.

PET is the air temperature of a typical indoor room (mean radiant temperature equal to
air temperature, air speed 0.1 m s⁻¹, vapour pressure 12 hPa) in which the reference
person's core and skin temperatures would be those reached outdoors (Höppe 1999; VDI
3787 Part 2). The body's heat balance is solved by ``pythermalcomfort.models.pet_steady``
(the Munich energy-balance model for individuals as corrected by Walther & Goestchel
2018), for the reference person of the definition: 35-year-old man, 1.75 m, 75 kg,
0.9 clo, light activity of 80 W on top of the basal metabolism (1.37 met in the
library's terms), standing (:data:`REFERENCE_PERSON`; Höppe 1999, from memory for the
body figures). PET is therefore a property of the place and weather, not of the walker.

The library solves one row at a time (about 3 ms). :func:`pet_interpolated` computes it
only at the corners of the cells of a coarse grid that the rows occupy
(:data:`PET_GRID`: air temperature every 2 K, Tmrt every 4 K, wind every 0.5 on a
logarithmic scale, relative humidity every 20 %) and interpolates multilinearly between them; the
error against the row-by-row computation is measured in the tests and the benchmark
(``benchmarks/bench_indices.py``) and stated in :data:`PET_INTERPOLATION_TOLERANCE_K`.

Classes: the thermal-perception and physiological-stress classes of Matzarakis & Mayer
(1996) for PET, for people in Western/Central Europe (:data:`PET_CLASSES`; boundaries
from memory). Colours are walkcomfort's own diverging ramp (:data:`PET_CLASS_COLOURS`).

References
----------
.. [1] Höppe, P. (1999). The physiological equivalent temperature — a universal index for
   the biometeorological assessment of the thermal environment. Int. J. Biometeorol.
   43, 71–75. doi:10.1007/s004840050118
.. [2] VDI 3787 Blatt 2 (2008) Environmental meteorology — Methods for the human
   biometeorological evaluation of climate and air quality for urban and regional
   planning at regional level. Part I: Climate.
.. [3] Walther, E., Goestchel, Q. (2018). The P.E.T. comfort index: questioning the model.
   Build. Environ. 137, 1–10. doi:10.1016/j.buildenv.2018.03.054
.. [4] Matzarakis, A., Mayer, H. (1996). Another kind of environmental stress: thermal
   stress. WHO Collaborating Centre for Air Quality Management and Air Pollution Control,
   Newsletter 18, 7–10 (class boundaries, from memory); also Matzarakis, Mayer, Iziomon
   (1999), Int. J. Biometeorol. 43, 76–84. doi:10.1007/s004840050119
"""

from __future__ import annotations

import itertools

import numpy as np
import pandas as pd

from walkcomfort.environment._arrays import first_index

PET_C, PET_CLASS = "pet_c", "pet_class"

#: The PET reference person (Höppe 1999; VDI 3787-2), in ``pet_steady``'s arguments.
REFERENCE_PERSON = {"met": 1.37, "clo": 0.9, "position": "standing", "age": 35, "sex": "male",
                    "weight": 75.0, "height": 1.75}

#: Wind below this is raised to it [m s⁻¹]: the reference room's own air speed; the model's
#: convection correlations are not meant for still air.
MIN_WIND_MS = 0.1

#: PET classes (Matzarakis & Mayer 1996, from memory): (lower bound °C exclusive, upper bound °C
#: inclusive, thermal perception, grade of physiological stress).
PET_CLASSES = (
    (float("-inf"), 4.0, "very cold", "extreme cold stress"),
    (4.0, 8.0, "cold", "strong cold stress"),
    (8.0, 13.0, "cool", "moderate cold stress"),
    (13.0, 18.0, "slightly cool", "slight cold stress"),
    (18.0, 23.0, "comfortable", "no thermal stress"),
    (23.0, 29.0, "slightly warm", "slight heat stress"),
    (29.0, 35.0, "warm", "moderate heat stress"),
    (35.0, 41.0, "hot", "strong heat stress"),
    (41.0, float("inf"), "very hot", "extreme heat stress"),
)

#: walkcomfort's own diverging ramp for the PET classes (cold blues, a pale comfortable class,
#: warm oranges to a dark brown); checked for colour-vision deficiency in the tests.
PET_CLASS_COLOURS = {
    "very cold": "#1b3a6b", "cold": "#2f6aa8", "cool": "#5b9bd1", "slightly cool": "#a6cfe8",
    "comfortable": "#f2f0e6", "slightly warm": "#f7d488", "warm": "#ee9b43", "hot": "#c85a1e",
    "very hot": "#7a2511",
}

#: Interpolation grid: (origin, spacing) per input. Wind is interpolated on ln(v) [ln(m s⁻¹)], where
#: PET is nearly linear (measured: in sun the slope dPET/dln v varies by < 10 % between 0.3 and 3 m s⁻¹,
#: dPET/d√v by a factor 3).
PET_GRID = {"t_air_c": (0.0, 2.0), "tmrt_c": (0.0, 4.0), "log_wind": (0.0, 0.5), "rh_pct": (0.0, 20.0)}
#: Largest |interpolated − row-by-row| PET allowed by the tests on demo-like walks [K].
PET_INTERPOLATION_TOLERANCE_K = 0.5


def _as_arrays(*args):
    arrays = [np.atleast_1d(np.asarray(a.to_numpy(dtype=float, na_value=np.nan) if isinstance(a, pd.Series) else a,
                                       dtype=float)) for a in args]
    return np.broadcast_arrays(*arrays)


def _wrap(values, index, scalar_input):
    if index is not None:
        return pd.Series(values, index=index, name=PET_C)
    return float(values[0]) if scalar_input else values


def pet_c(t_air_c, tmrt_c, wind_ms, rh_pct, pressure_hpa=1013.25):
    """PET of the reference person, row by row [°C] (``pythermalcomfort.models.pet_steady``).

    Parameters
    ----------
    t_air_c, tmrt_c : float, array or Series
        Air and mean radiant temperature [°C].
    wind_ms : float, array or Series
        Wind speed at body height (1.1 m) [m s⁻¹]; raised to 0.1 m s⁻¹.
    rh_pct : float, array or Series
        Relative humidity [%].
    pressure_hpa : float, array or Series
        Air pressure [hPa].

    Returns
    -------
    float, array or Series
        PET [°C]; NaN where an input is NaN.
    """
    args = (t_air_c, tmrt_c, wind_ms, rh_pct, pressure_hpa)
    index = first_index(*args)
    scalar = all(np.ndim(a) == 0 for a in args)
    ta, tr, v, rh, p = _as_arrays(*args)
    out = np.full(ta.shape, np.nan)
    ok = np.isfinite(ta) & np.isfinite(tr) & np.isfinite(v) & np.isfinite(rh) & np.isfinite(p)
    if ok.any():
        # imported here: pythermalcomfort.models takes seconds to import (it loads every model of the
        # library), which every verb importing this module would otherwise pay
        from pythermalcomfort.models import pet_steady

        res = pet_steady(tdb=ta[ok], tr=tr[ok], v=np.maximum(v[ok], MIN_WIND_MS), rh=np.clip(rh[ok], 0.0, 100.0),
                         p_atm=p[ok], **REFERENCE_PERSON)
        out[ok] = np.asarray(getattr(res, "pet", res), dtype=float)  # a dataclass since pythermalcomfort 3
    return _wrap(out, index, scalar)


def pet_interpolated(t_air_c, tmrt_c, wind_ms, rh_pct, pressure_hpa=None, grid: dict | None = None,
                     return_evaluations: bool = False):
    """PET [°C] by multilinear interpolation between row-by-row values at grid corners.

    Every row lies in a cell of :data:`PET_GRID` (four inputs); PET is computed by
    :func:`pet_c` once for each distinct corner of the occupied cells and interpolated
    multilinearly (wind on a square-root scale). Pressure is taken as the median of the
    rows (it changes PET by well under 0.1 K over a walk's range); ``None`` -> 1013.25 hPa.

    Returns
    -------
    float, array or Series (and the number of row-by-row evaluations with ``return_evaluations``)
    """
    grid = grid or PET_GRID
    args = (t_air_c, tmrt_c, wind_ms, rh_pct)
    index = first_index(*args)
    scalar = all(np.ndim(a) == 0 for a in args)
    ta, tr, v, rh = _as_arrays(*args)
    p = 1013.25 if pressure_hpa is None else float(np.nanmedian(np.asarray(pressure_hpa, dtype=float)))
    p = 1013.25 if not np.isfinite(p) else p
    coords = np.stack([ta, tr, np.log(np.maximum(v, MIN_WIND_MS)), np.clip(rh, 0.0, 100.0)], axis=1)
    origin = np.array([grid[k][0] for k in ("t_air_c", "tmrt_c", "log_wind", "rh_pct")])
    step = np.array([grid[k][1] for k in ("t_air_c", "tmrt_c", "log_wind", "rh_pct")])
    ok = np.isfinite(coords).all(axis=1)
    out = np.full(len(coords), np.nan)
    n_eval = 0
    if ok.any():
        pos = (coords[ok] - origin) / step
        low = np.floor(pos).astype(np.int64)
        frac = pos - low
        offsets = np.array(list(itertools.product((0, 1), repeat=4)), dtype=np.int64)    # (16, 4)
        corners = low[:, None, :] + offsets[None, :, :]                                  # (n, 16, 4)
        uniq, inverse = np.unique(corners.reshape(-1, 4), axis=0, return_inverse=True)
        at = origin + uniq * step
        values = np.asarray(pet_c(at[:, 0], at[:, 1], np.exp(at[:, 2]), at[:, 3], p), dtype=float)
        n_eval = len(uniq)
        weights = np.prod(np.where(offsets[None, :, :] == 1, frac[:, None, :], 1.0 - frac[:, None, :]), axis=2)
        out[ok] = np.sum(weights * values[inverse.reshape(-1, 16)], axis=1)
    result = _wrap(out, index, scalar)
    return (result, n_eval) if return_evaluations else result


def pet_class(pet):
    """Thermal-perception class of PET values (:data:`PET_CLASSES`; lower bound exclusive); None/NaN -> None."""
    def one(x):
        if x is None or not np.isfinite(x):
            return None
        return next(name for lo, hi, name, _ in PET_CLASSES if lo < x <= hi)

    if isinstance(pet, pd.Series):
        return pet.map(one).rename(PET_CLASS)
    if np.ndim(pet) == 0:
        return one(float(pet))
    return np.array([one(float(x)) for x in np.asarray(pet, dtype=float)], dtype=object)
