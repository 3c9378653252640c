"""Each candidate's shade on each walk point × time, traced once.

A walk table holds every simulated point × time of the walks that matter (routes ×
departures), with the environment of the base scene and a weight per row (departure
weight × the seconds the row stands for). For each option (a site with one
intervention) the direct-beam transmittance of that item *alone* is traced with the
project's shade caster (:func:`walkcomfort.environment.shade.beam_transmittance`) on the
rows its shadow can reach; the result is stored sparse (rows, transmittance).

Combining options is exact for the direct beam: the beam crossing several obstacles is
multiplied by each one's transmittance (Beer–Lambert / per-crossing attenuation
composes multiplicatively), so the walker's beam under a set of new items is
``base × Π τ_item`` row by row, and overlapping shadows are never double-counted. The
rest of what a new crown changes — its shade on the ground and walls the walker sees,
the sky it hides — is left to the environment chain: each option also keeps the rows
within :data:`SURROUNDINGS_M` of its shadow (``wide_rows``), and the selection
(:mod:`.select`) evaluates a pick by running those rows through the chain with the items
built. The quick first ranking of all candidates uses the walker's beam alone.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.environment.chain import leaf_month
from walkcomfort.environment.scene import Scene
from walkcomfort.environment.shade import beam_transmittance
from walkcomfort.errors import InputError
from walkcomfort.routes.placement.catalogue import Intervention

#: Screening margin around the analytic shadow footprint [m] (grid convergence, crown shape).
MARGIN_M = 1.5
#: Radius around a walker within which the chain samples the ground and walls (its outer ground
#: ring at 1.1 m lies at about 22 m) [m]; an item farther than this plus its shadow changes nothing.
SURROUNDINGS_M = 25.0
#: Transmittances above this are treated as "no shade" and not stored [-].
TAU_STORE_MAX = 1.0 - 1e-9


class SceneRef:
    """The base scene carried in a walk table's ``attrs``, shared rather than copied.

    pandas deep-copies ``attrs`` on every derived frame (each column access); a scene
    holds thousands of geometries, so the reference copies as itself.
    """

    def __init__(self, scene: Scene):
        self.scene = scene

    def __deepcopy__(self, memo):
        return self


@dataclass
class Option:
    """One site with one intervention, and the rows its shade reaches."""

    index: int
    site_id: str
    intervention: Intervention
    x_m: float
    y_m: float
    lon: float
    lat: float
    rows: np.ndarray        # indices into the walk table
    tau: np.ndarray         # beam transmittance of this item alone on those rows (< 1)
    wide_rows: np.ndarray = None  # rows whose surroundings (ground, walls, sky) the item can change; ⊇ rows

    @property
    def cost(self) -> float:
        return float(self.intervention.unit_cost)


def walk_table(walks: list[pd.DataFrame], weights: list[float] | None = None) -> pd.DataFrame:
    """Stack simulated walks (with environment columns) into one table with a ``weight`` column.

    Parameters
    ----------
    walks : list of DataFrame
        Simulated timelines with the environment of the base scene (``routes.simulate``).
    weights : list of float, optional
        One weight per walk table (a departure's or a route's importance); default 1.

    Returns
    -------
    DataFrame
        The rows of every walk (index reset), ``weight`` = walk weight × ``step_s`` / 60
        (so sums are weighted minutes), ``walk_key`` an integer per walk.
    """
    weights = [1.0] * len(walks) if weights is None else list(weights)
    heights = {(w.attrs.get("session") or {}).get("wind_height_m") for w in walks}
    if len(heights) > 1:
        raise InputError(f"the walks state different wind heights {sorted(map(str, heights))}",
                         where="walks", fix="simulate every walk with the same weather source")
    parts = []
    for k, (w, wt) in enumerate(zip(walks, weights, strict=True)):
        df = w.reset_index()
        df["walk_key"] = k * 10_000 + pd.factorize(df[C.WALK_ID])[0]
        df["weight"] = float(wt) * df["step_s"].to_numpy(float) / 60.0
        parts.append(df)
    out = pd.concat(parts, ignore_index=True)
    out.attrs["wind_height_m"] = heights.pop() if heights else None
    return out


def reachable_rows(table: pd.DataFrame, x: float, y: float, it: Intervention, z_m: float,
                   around_m: float = 0.0) -> np.ndarray:
    """Rows whose point could lie in the item's shadow (a generous analytic screen).

    With ``around_m`` > 0: rows with any point within ``around_m`` of the walker in the
    shadow (what the walker sees of the ground around can change).
    """
    px, py = table["_x"].to_numpy(), table["_y"].to_numpy()
    elev = table[C.SUN_ELEV_DEG].to_numpy(float)
    az = np.radians(table[C.SUN_AZIM_DEG].to_numpy(float))
    sx, sy = np.sin(az), np.cos(az)
    dx, dy = x - px, y - py
    along = dx * sx + dy * sy
    lateral = np.abs(dx * sy - dy * sx)
    top = it.height_m if it.kind == "tree" else it.height_m + 0.2
    with np.errstate(divide="ignore", invalid="ignore"):
        reach = np.where(elev > 0, np.clip(top - z_m, 0.0, None) / np.tan(np.radians(np.clip(elev, 0.01, 90))), 0.0)
    r = it.reach_m + MARGIN_M + around_m
    ok = (elev > 0) & (lateral <= r) & (along >= -r) & (along <= reach + r)
    return np.flatnonzero(ok)


def trace_options(table: pd.DataFrame, scene: Scene, sites: pd.DataFrame, catalogue: dict[str, Intervention],
                  z_m: float = 1.1) -> list[Option]:
    """Trace every site × intervention alone against the walk table.

    ``table`` must carry the walk points' position in the scene frame as ``_x, _y``
    (see :func:`add_scene_xy`). Options whose shade reaches no row are kept (with no
    rows): the selection never picks them, and the ranked table can say why.
    """
    options = []
    # the month of the leaves as the chain takes it (local mean solar time at the site)
    months = leaf_month(pd.DatetimeIndex(table[C.TIME]), scene.site["lon"])
    for s in sites.itertuples(index=False):
        for it in catalogue.values():
            rows = reachable_rows(table, s.x_m, s.y_m, it, z_m)
            tau = np.ones(0)
            if rows.size:
                one = _single_item_scene(scene, s, it)
                tau = beam_transmittance(one, table["_x"].to_numpy()[rows], table["_y"].to_numpy()[rows],
                                         table[C.SUN_ELEV_DEG].to_numpy(float)[rows],
                                         table[C.SUN_AZIM_DEG].to_numpy(float)[rows], z_m=z_m,
                                         month=months[rows])
                keep = tau < TAU_STORE_MAX
                rows, tau = rows[keep], np.asarray(tau, float)[keep]
            wide = np.union1d(rows, reachable_rows(table, s.x_m, s.y_m, it, z_m, around_m=SURROUNDINGS_M))
            options.append(Option(len(options), s.site_id, it, float(s.x_m), float(s.y_m), float(s.lon),
                                  float(s.lat), rows, tau, wide))
    return options


def _single_item_scene(scene: Scene, site, it: Intervention) -> Scene:
    from shapely.geometry import Point, box

    from walkcomfort.environment.scene import scene_from_local

    if it.kind == "tree":
        geom = Point(site.x_m, site.y_m)
    else:
        h = it.side_m / 2
        geom = box(site.x_m - h, site.y_m - h, site.x_m + h, site.y_m + h)
    return scene_from_local([(geom, it.properties("candidate"))], scene.site["lat"], scene.site["lon"],
                            scene.site.get("elev_m", 0.0))


def add_scene_xy(table: pd.DataFrame, scene: Scene) -> pd.DataFrame:
    """The walk points in the scene's local frame, as ``_x, _y`` [m]."""
    x, y = scene.project(table[C.LON].to_numpy(float), table[C.LAT].to_numpy(float))
    out = table.copy()
    out["_x"], out["_y"] = np.asarray(x, float), np.asarray(y, float)
    out.attrs = {**table.attrs, "scene": SceneRef(scene)}
    return out


def option_geojson(opt: Option, scene: Scene, feature_id: str) -> dict:
    """The option's item as a scene GeoJSON Feature (lon/lat)."""
    import shapely
    from shapely.geometry import mapping

    geom, props = option_feature(opt, scene, feature_id)
    geom = shapely.transform(geom, lambda xy: np.column_stack(scene.unproject(xy[:, 0], xy[:, 1])))
    return {"type": "Feature", "properties": props, "geometry": mapping(geom)}


def option_feature(opt: Option, scene: Scene, feature_id: str) -> tuple[object, dict]:
    """Shapely geometry (local metres) and scene properties of an option, for writing a scheme."""
    from shapely.geometry import Point, box

    it = opt.intervention
    if it.kind == "tree":
        return Point(opt.x_m, opt.y_m), it.properties(feature_id)
    h = it.side_m / 2
    return box(opt.x_m - h, opt.y_m - h, opt.x_m + h, opt.y_m + h), it.properties(feature_id)
