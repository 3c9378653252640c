"""Indices beside the comfort figures of planned walks: PET (``--index pet``) and WBGT (``--wbgt-limit``).

Both are computed from the per-point table's own environment columns, after the
comparison, so every scheme and departure gets them from the same sun, shade, Tmrt and
weather as its UTCI. The comfort classes do not change: they come from the model (or the
UTCI-band rule) as before; ``--index`` chooses the thermal index shown beside them.
"""

from __future__ import annotations

import click
import numpy as np

from walkcomfort.environment import pet as _pet
from walkcomfort.environment import wbgt as _wbgt
from walkcomfort.environment.indices import wind_from_10m
from walkcomfort.routes.compare import KEYS
from walkcomfort.routes.simulate import STEP_S

INDEX_CHOICES = ("utci", "pet")

INDEX_OPTION = click.option(
    "--index", "index", type=click.Choice(INDEX_CHOICES), default="utci", show_default=True,
    help="Thermal index shown beside the comfort figures: UTCI, or PET of the reference person "
         "(adds pet_c, pet_class per point and mean_pet_c, peak_pet_c per walk).")
WBGT_LIMIT_OPTION = click.option(
    "--wbgt-limit", type=float, default=None,
    help="Also report the minutes of each walk with estimated WBGT above this limit [°C] (e.g. 26 or 28, "
         "field_protocol/safety.md). A planning estimate, not a heat-safety assessment.")


def add_pet(result) -> None:
    """``pet_c``, ``pet_class`` per point; ``mean_pet_c`` (time-weighted), ``peak_pet_c`` per walk."""
    pts = result.points
    pet = _pet.pet_interpolated(pts["t_air_c"], pts["tmrt_c"], wind_from_10m(pts["wind10_ms"], 1.1, 0.01),
                                pts["rh_pct"], pts["pressure_hpa"] if "pressure_hpa" in pts.columns else None)
    pts[_pet.PET_C] = pet.to_numpy()
    pts[_pet.PET_CLASS] = _pet.pet_class(pet).to_numpy()
    frame = pts[KEYS].copy()
    dt = pts[STEP_S].to_numpy(float)
    frame["p_dt"], frame["dt"], frame["p"] = pet.to_numpy() * dt, np.where(pet.isna(), 0.0, dt), pet.to_numpy()
    g = frame.groupby(KEYS, sort=False)
    per_walk = (g["p_dt"].sum() / g["dt"].sum()).rename("mean_pet_c").to_frame()
    per_walk["peak_pet_c"] = g["p"].max()
    result.summary = result.summary.merge(per_walk.reset_index(), on=KEYS, how="left")
    result.notices.append("PET is that of the reference person (Höppe 1999; 0.9 clo, 80 W), interpolated within "
                          f"{_pet.PET_INTERPOLATION_TOLERANCE_K} K of the row-by-row value; classes after "
                          "Matzarakis & Mayer (1996). The comfort classes still come from the model or the UTCI rule.")


def add_wbgt_minutes(result, limit_c: float) -> None:
    """WBGT beside the comfort figures: ``wbgt_c`` per point, minutes above ``limit_c`` per walk, the caution."""
    result.points[_wbgt.WBGT_C] = _wbgt.wbgt_for_points(result.points)[_wbgt.WBGT_C]
    result.summary = result.summary.merge(_wbgt.wbgt_minutes_above(result.points, limit_c, KEYS, STEP_S), on=KEYS,
                                          how="left")
    worst = result.summary["wbgt_min_above_limit"].max()
    result.notices.append(f"estimated WBGT above {limit_c:g} °C for up to {worst:.1f} min of a walk "
                          f"(summary column wbgt_min_above_limit). {_wbgt.PLANNING_CAUTION}")


def index_line(row) -> str:
    """The index part of the terminal line for one walk."""
    text = (f"mean PET {row['mean_pet_c']:.1f} °C" if "mean_pet_c" in row.index
            else f"mean UTCI {row['mean_utci_c']:.1f} °C")
    if "wbgt_limit_c" in row.index:
        text += f"  WBGT > {row['wbgt_limit_c']:g} °C {row['wbgt_min_above_limit']:.1f} min"
    return text
