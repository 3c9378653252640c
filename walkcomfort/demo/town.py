"""Sombraverde, the invented demo town: streets, buildings, trees, canopies, a hill, a noisy road.

Everything in this module is **invented** for the demo. Sombraverde is not a real
place; its coordinates were picked in a warm, dry-summer (Mediterranean-type)
climate so that a July walk meets strong sun, and its layout was drawn to give the
later stages something to find: tree-lined streets next to bare ones, a hill that
slows walkers, a ring road whose noise falls off with distance, a market square.

Geometry is built in local metres (``x`` east, ``y`` north, origin at :data:`SITE`)
and projected to WGS84 through the site's UTM zone (pyproj), which is the CRS the
scene loader uses for its metric work, so distances survive the round trip.
The layout is a function of a seed only: the same seed always gives the same town.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np

TOWN_NAME = "Sombraverde"
# Invented site; the point lies in a dry-summer subtropical (Csa) climate, 180 m above sea level.
SITE = {"lat": 38.80, "lon": -0.75, "elev_m": 180.0}
TIMEZONE = "Europe/Madrid"
UTM_EPSG = 32630  # UTM zone 30 N covers 6° W … 0°, where the site lies

# Street centrelines in local metres. Facades stand FACADE_M from the centreline;
# walkers keep to the sidewalk, WALK_OFFSET_M from it; street trees stand TREE_OFFSET_M.
FACADE_M = 7.5
WALK_OFFSET_M = 5.0
TREE_OFFSET_M = 4.0
RONDA_Y = -180.0          # the ring road with the traffic
RONDA_FACADE_M = 14.0     # dual carriageway: facades further out
RONDA_WALK_OFFSET_M = 11.0
X_LINES = {"estacio": -240.0, "passeig": -80.0, "costa": 80.0, "escola": 240.0}
Y_LINES = {"ronda": RONDA_Y, "forn": -60.0, "major": 60.0, "alt": 180.0}
X_LIMITS = (-300.0, 300.0)
Y_LIMITS = (-180.0, 250.0)
SQUARE = (-62.0, -52.0, 62.0, 52.0)   # Placa del Mercat: open paved square (xmin, ymin, xmax, ymax)

# The road's traffic noise (invented): A-weighted level 10 m from the centreline by day.
ROAD_LAEQ_10M_DB = 72.0
BACKGROUND_LAEQ_DB = 47.0


@dataclass(frozen=True)
class Street:
    """One street centreline (local metres) with its name and kind."""

    id: str
    name: str
    kind: str                 # "street" | "road" | "path"
    points: tuple             # ((x, y), ...)
    width_m: float
    traffic: str              # "heavy" | "light" | "none"


@dataclass(frozen=True)
class Walk:
    """A walking path used by the simulator or offered as a planned route."""

    id: str
    name: str
    nodes: tuple              # centreline corners ((x, y), ...), walked in this order
    offsets: tuple            # per leg: sidewalk offset to the left of the walking direction [m]
    stops: tuple = ()         # fractions of the length where a prompted vote stop happens


@dataclass
class Town:
    """The invented town: everything the scenario files are written from."""

    name: str
    site: dict
    timezone: str
    buildings: list = field(default_factory=list)   # dicts: id, polygon [(x, y)], height_m, use
    trees: list = field(default_factory=list)       # dicts: id, x, y, crown_radius_m, height_m, crown_base_m, transmissivity
    canopies: list = field(default_factory=list)    # dicts: id, polygon, height_m, transmissivity, name
    streets: list = field(default_factory=list)     # Street
    walks: dict = field(default_factory=dict)       # id -> Walk (simulated sessions)
    routes: dict = field(default_factory=dict)      # id -> Walk (planned routes)
    schemes: dict = field(default_factory=dict)     # id -> {"label", "edits": [...]}


# --- coordinates ----------------------------------------------------------------------

@lru_cache(maxsize=1)
def _transformers():
    from pyproj import Transformer

    fwd = Transformer.from_crs("EPSG:4326", f"EPSG:{UTM_EPSG}", always_xy=True)
    inv = Transformer.from_crs(f"EPSG:{UTM_EPSG}", "EPSG:4326", always_xy=True)
    e0, n0 = fwd.transform(SITE["lon"], SITE["lat"])
    return fwd, inv, e0, n0


def to_lonlat(x_m, y_m):
    """Local metres (east, north of :data:`SITE`) -> WGS84 (lon, lat) [°], rounded to 1e-7°."""
    _, inv, e0, n0 = _transformers()
    lon, lat = inv.transform(np.asarray(x_m, float) + e0, np.asarray(y_m, float) + n0)
    return np.round(lon, 7), np.round(lat, 7)


def from_lonlat(lon, lat):
    """WGS84 (lon, lat) [°] -> local metres (x east, y north of :data:`SITE`)."""
    fwd, _, e0, n0 = _transformers()
    e, n = fwd.transform(np.asarray(lon, float), np.asarray(lat, float))
    return np.asarray(e) - e0, np.asarray(n) - n0


# --- terrain, noise and crowding fields (invented) ---------------------------------------

def elevation_m(x_m, y_m):
    """Ground elevation above sea level [m]: a hill rising to the north-east of the square.

    A logistic rise of up to 24 m centred on y = 90 m, strongest around x = 120 m, so the
    north-south streets climb with slopes up to about 11 % and the east-west ones stay flat.
    """
    x = np.asarray(x_m, float)
    y = np.asarray(y_m, float)
    rise = 24.0 / (1.0 + np.exp(-(y - 90.0) / 50.0))
    ridge = 0.55 + 0.45 * np.exp(-(((x - 120.0) / 220.0) ** 2))
    return SITE["elev_m"] + rise * ridge


def road_distance_m(x_m, y_m):
    """Distance to the ring road's centreline [m] (the road runs east-west at y = RONDA_Y)."""
    return np.abs(np.asarray(y_m, float) - RONDA_Y)


def road_laeq_db(x_m, y_m, hour):
    """Traffic level [dB(A)] from the ring road at a point and local hour.

    A line source falls by 10·log10(d/10 m) with distance (geometric spreading of an
    incoherent line source, common practice for road traffic); rows of buildings between
    the road and the point screen another 6 dB once the point is behind the first row.
    Traffic (invented) peaks in the morning and evening rush.
    """
    d = np.maximum(road_distance_m(x_m, y_m), 5.0)
    level = ROAD_LAEQ_10M_DB - 10.0 * np.log10(d / 10.0)
    behind = d > (RONDA_FACADE_M + 14.0)
    level = level - 6.0 * behind
    h = np.asarray(hour, float)
    rush = 1.5 * np.exp(-((h - 8.5) / 1.5) ** 2) + 1.5 * np.exp(-((h - 19.0) / 1.8) ** 2)
    return level + rush - 1.0


def crowd_expected_n(x_m, y_m, hour):
    """Expected number of other pedestrians in a chest-camera frame (invented).

    Crowds gather in the market square in the late morning and the evening and along
    Carrer Major; elsewhere a person or two at most.
    """
    x = np.asarray(x_m, float)
    y = np.asarray(y_m, float)
    h = np.asarray(hour, float)
    d_sq = np.hypot(x, y)
    square = np.exp(-d_sq / 70.0)
    main_street = np.exp(-np.abs(y - Y_LINES["major"]) / 12.0) * (np.abs(x) < 240)
    day = 0.6 * np.exp(-((h - 11.5) / 1.8) ** 2) + 0.9 * np.exp(-((h - 19.5) / 1.5) ** 2)
    return 0.3 + (6.0 * square + 2.5 * main_street) * (0.35 + day)


# --- geometry helpers ----------------------------------------------------------------

def _rect(x0, y0, x1, y1):
    return [(x0, y0), (x1, y0), (x1, y1), (x0, y1), (x0, y0)]


def offset_path(nodes, offsets):
    """Polyline offset to the left of the walking direction by a per-leg distance [m].

    Corners are where consecutive offset legs meet (lines intersected; a straight
    continuation keeps the shared node shifted).
    """
    pts = [np.asarray(p, float) for p in nodes]
    legs = []
    for (a, b), d in zip(zip(pts[:-1], pts[1:], strict=False), offsets, strict=False):
        t = b - a
        t = t / np.linalg.norm(t)
        n = np.array([-t[1], t[0]])
        legs.append((a + d * n, b + d * n, t))
    out = [legs[0][0]]
    for (a1, b1, t1), (a2, _b2, t2) in zip(legs[:-1], legs[1:], strict=False):
        cross = t1[0] * t2[1] - t1[1] * t2[0]
        if abs(cross) < 1e-9:
            out.append(0.5 * (b1 + a2))
            continue
        # a1 + s t1 = a2 + u t2
        diff = a2 - a1
        s = (diff[0] * t2[1] - diff[1] * t2[0]) / cross
        out.append(a1 + s * t1)
    out.append(legs[-1][1])
    return [(round(float(p[0]), 2), round(float(p[1]), 2)) for p in out]


def path_length_m(points):
    p = np.asarray(points, float)
    return float(np.hypot(*np.diff(p, axis=0).T).sum())


# --- the town -----------------------------------------------------------------------

def _streets():
    x0, x1 = X_LIMITS
    y0, y1 = RONDA_Y, Y_LINES["alt"]
    s = [
        Street("s-ronda-sud", "Ronda Sud", "road", ((x0 - 40, RONDA_Y), (x1 + 40, RONDA_Y)), 22.0, "heavy"),
        Street("s-forn", "Carrer del Forn", "street", ((x0, -60.0), (x1, -60.0)), 15.0, "light"),
        Street("s-major", "Carrer Major", "street", ((x0, 60.0), (x1, 60.0)), 15.0, "light"),
        Street("s-alt", "Carrer Alt", "street", ((x0, 180.0), (x1, 180.0)), 15.0, "light"),
        Street("s-estacio", "Carrer de l'Estacio", "street", ((-240.0, y0), (-240.0, y1)), 15.0, "light"),
        Street("s-passeig", "Passeig Nou", "street", ((-80.0, y0), (-80.0, y1)), 15.0, "none"),
        Street("s-costa", "Carrer de la Costa", "street", ((80.0, y0), (80.0, y1)), 15.0, "light"),
        Street("s-escola", "Carrer de l'Escola", "street", ((240.0, y0), (240.0, y1)), 15.0, "light"),
        Street("s-placa", "Placa del Mercat (walk)", "path", ((0.0, -60.0), (0.0, 60.0)), 6.0, "none"),
    ]
    return s


def _buildings(rng):
    """Rows of buildings along the block frontages, leaving the square open."""
    xs = [X_LIMITS[0] - 30.0, *X_LINES.values(), X_LIMITS[1] + 30.0]
    ys = [RONDA_Y, *list(Y_LINES.values())[1:], Y_LIMITS[1] + 20.0]
    out = []
    heights = np.array([7.0, 10.0, 13.0, 16.0, 19.0])
    weights = np.array([0.2, 0.3, 0.25, 0.15, 0.1])
    for j in range(len(ys) - 1):
        for i in range(len(xs) - 1):
            bx0, bx1 = xs[i] + FACADE_M, xs[i + 1] - FACADE_M
            by0 = ys[j] + (RONDA_FACADE_M if ys[j] == RONDA_Y else FACADE_M)
            by1 = ys[j + 1] - FACADE_M
            central = (xs[i], xs[i + 1]) == (X_LINES["passeig"], X_LINES["costa"])
            if central and ys[j] == Y_LINES["forn"]:
                # the square's block: a church on its north side, a market hall on the south-east
                out.append({"polygon": _rect(-30.0, 54.0, 10.0, by1 - 0.5), "height_m": 21.0, "use": "church"})
                out.append({"polygon": _rect(28.0, -52.5, 66.0, -30.0), "height_m": 9.0, "use": "market hall"})
                continue
            for side in ("south", "north"):
                if side == "north" and ys[j + 1] > Y_LIMITS[1]:
                    continue  # the town ends here: no frontage on the far side
                depth = float(rng.uniform(10.0, 14.0))
                cursor = bx0 + float(rng.uniform(0.0, 6.0))
                while True:
                    width = float(rng.uniform(28.0, 50.0))
                    if cursor + width > bx1:
                        break
                    if side == "south":
                        poly = _rect(cursor, by0, cursor + width, by0 + depth)
                    else:
                        poly = _rect(cursor, by1 - depth, cursor + width, by1)
                    h = float(rng.choice(heights, p=weights)) + float(rng.uniform(-1.0, 1.0))
                    out.append({"polygon": poly, "height_m": round(h, 1), "use": "housing"})
                    cursor += width + float(rng.choice([0.0, 4.0, 9.0, 15.0]))
    for k, b in enumerate(out, start=1):
        b["id"] = f"b{k:03d}"
        b["polygon"] = [(round(x, 2), round(y, 2)) for x, y in b["polygon"]]
    return out


def _tree(rng, x, y, species):
    if species == "plane":      # broad street trees
        r, h, base, tr = rng.uniform(3.0, 4.2), rng.uniform(9.0, 13.0), rng.uniform(2.8, 3.6), rng.uniform(0.08, 0.2)
    elif species == "lime":
        r, h, base, tr = rng.uniform(2.4, 3.4), rng.uniform(7.0, 10.0), rng.uniform(2.4, 3.0), rng.uniform(0.12, 0.25)
    else:                       # young trees in the scheme, smaller and lighter crowns
        r, h, base, tr = rng.uniform(2.0, 2.6), rng.uniform(5.5, 7.0), rng.uniform(2.2, 2.6), rng.uniform(0.25, 0.35)
    return {"x": round(float(x), 2), "y": round(float(y), 2), "crown_radius_m": round(float(r), 2),
            "height_m": round(float(h), 2), "crown_base_m": round(float(base), 2),
            "transmissivity": round(float(tr), 3), "species": species}


def _street_row(rng, fixed, along, start, stop, spacing, species, avoid, axis):
    """Trees every ``spacing`` m along a street, skipping crossings listed in ``avoid``."""
    out = []
    pos = start
    while pos <= stop + 1e-9:
        if all(abs(pos - a) > 11.0 for a in avoid):
            jitter = float(rng.uniform(-1.0, 1.0))
            x, y = (pos + jitter, fixed) if axis == "x" else (fixed, pos + jitter)
            out.append(_tree(rng, x, y, species))
        pos += spacing
    return out


def _trees(rng):
    trees = []
    ys = list(Y_LINES.values())
    xs = list(X_LINES.values())
    # Carrer Major: planes on the north sidewalk, the walker's shade on the way east
    trees += _street_row(rng, Y_LINES["major"] + TREE_OFFSET_M, "x", -232.0, 232.0, 11.0, "plane", xs + [0.0], "x")
    # Passeig Nou: limes on both sides, a shaded avenue
    for side in (-1.0, 1.0):
        trees += _street_row(rng, X_LINES["passeig"] + side * TREE_OFFSET_M, "y", -168.0, 176.0, 14.0,
                             "lime", ys, "y")
    # Carrer Alt by the little park at its west end: a row on the north sidewalk
    trees += _street_row(rng, Y_LINES["alt"] + TREE_OFFSET_M, "x", -290.0, -92.0, 11.0, "plane", xs, "x")
    # a few trees in the square
    for x, y in ((-40.0, -30.0), (-40.0, 30.0), (40.0, 30.0), (45.0, 5.0)):
        trees.append(_tree(rng, x, y, "plane"))
    for k, t in enumerate(trees, start=1):
        t["id"] = f"t{k:03d}"
    return trees


def _canopies():
    return [
        {"id": "c001", "name": "market arcade", "polygon": _rect(-60.0, -40.0, -50.0, 40.0),
         "height_m": 3.5, "transmissivity": 0.2},
        {"id": "c002", "name": "bus shelter", "polygon": _rect(-252.0, RONDA_Y + 9.5, -236.0, RONDA_Y + 12.5),
         "height_m": 2.6, "transmissivity": 0.05},
    ]


def _walks():
    """The two loops the invented walkers walk, with prompted-vote stops."""
    a = Walk(
        "loop-a", "Lower loop: Ronda Sud, up Carrer de la Costa, Passeig Nou, across the square",
        nodes=((-240.0, RONDA_Y), (80.0, RONDA_Y), (80.0, 180.0), (-80.0, 180.0), (-80.0, 60.0),
               (0.0, 60.0), (0.0, -60.0), (-240.0, -60.0), (-240.0, RONDA_Y + 1.0)),
        offsets=(RONDA_WALK_OFFSET_M, WALK_OFFSET_M, WALK_OFFSET_M, WALK_OFFSET_M, WALK_OFFSET_M,
                 2.0, WALK_OFFSET_M, WALK_OFFSET_M),
        stops=(0.16, 0.36, 0.55, 0.72, 0.93),
    )
    b = Walk(
        "loop-b", "Upper loop: down Carrer de l'Escola, Ronda Sud, up the Costa, Carrer Major, Carrer Alt",
        nodes=((240.0, 180.0), (240.0, RONDA_Y), (80.0, RONDA_Y), (80.0, 60.0), (-80.0, 60.0),
               (-80.0, 180.0), (239.0, 180.0)),
        offsets=(WALK_OFFSET_M, RONDA_WALK_OFFSET_M - 22.0, WALK_OFFSET_M, -WALK_OFFSET_M, WALK_OFFSET_M,
                 WALK_OFFSET_M),
        stops=(0.14, 0.33, 0.52, 0.7, 0.9),
    )
    return {a.id: a, b.id: b}


def _routes():
    """Planned routes a designer asks about (offered to the route stage)."""
    r1 = Walk("estacio-escola", "From the station to the school",
              nodes=((-240.0, RONDA_Y + 14.0), (-240.0, -60.0), (80.0, -60.0), (80.0, 180.0), (240.0, 180.0),
                     (240.0, 190.0)),
              offsets=(-WALK_OFFSET_M, WALK_OFFSET_M, WALK_OFFSET_M, -WALK_OFFSET_M, -WALK_OFFSET_M))
    r2 = Walk("mercat-parc", "From the market square along Passeig Nou up to the park on Carrer Alt",
              nodes=((0.0, -50.0), (0.0, 60.0), (-80.0, 60.0), (-80.0, 180.0), (-200.0, 180.0)),
              offsets=(2.0, -WALK_OFFSET_M, -WALK_OFFSET_M, -WALK_OFFSET_M))
    r3 = Walk("ronda-sud", "Along the ring road's north sidewalk",
              nodes=((-290.0, RONDA_Y), (290.0, RONDA_Y)), offsets=(RONDA_WALK_OFFSET_M,))
    return {r.id: r for r in (r1, r2, r3)}


def _schemes(rng, trees):
    # 1. a row of young street trees on the bare, climbing Carrer de la Costa (west sidewalk)
    costa = _street_row(rng, X_LINES["costa"] - TREE_OFFSET_M, "y", -170.0, 172.0, 10.0, "young",
                        list(Y_LINES.values()), "y")
    for k, t in enumerate(costa, start=1):
        t["id"] = f"t-costa-{k:02d}"
    # 2. a shade sail over the middle of the square
    sail = {"id": "c-placa", "name": "shade sail over the square", "polygon": _rect(-26.0, -22.0, 26.0, 22.0),
            "height_m": 4.5, "transmissivity": 0.15}
    # 3. a counter-scheme: the limes of Passeig Nou between Carrer Major and Carrer Alt pruned
    #    hard, two of them removed
    passeig = [t for t in trees if t["species"] == "lime" and Y_LINES["major"] < t["y"] < Y_LINES["alt"]]
    gone = {passeig[2]["id"], passeig[len(passeig) // 2 + 2]["id"]}
    pruned = [{"target": t["id"], "transmissivity": 0.5} for t in passeig if t["id"] not in gone]
    removed = [{"target": i} for i in sorted(gone)]
    return {
        "trees-costa": {"label": "A row of street trees on Carrer de la Costa",
                        "edits": [("add", "tree", t) for t in costa]},
        "canopy-placa": {"label": "A canopy over Placa del Mercat",
                         "edits": [("add", "canopy", sail)]},
        "pruned-passeig": {"label": "Passeig Nou limes pruned hard above Carrer Major, two removed",
                           "edits": [("modify", None, e) for e in pruned] + [("remove", None, e) for e in removed]},
    }


def build_town(seed: int = 20260714) -> Town:
    """Build the invented town deterministically from ``seed``.

    Parameters
    ----------
    seed : int
        Seed of the layout generator (building widths and heights, tree sizes).

    Returns
    -------
    Town
    """
    rng = np.random.default_rng(seed)
    town = Town(name=TOWN_NAME, site=dict(SITE), timezone=TIMEZONE)
    town.streets = _streets()
    town.buildings = _buildings(rng)
    town.trees = _trees(rng)
    town.canopies = _canopies()
    town.walks = _walks()
    town.routes = _routes()
    town.schemes = _schemes(rng, town.trees)
    return town


# --- GeoJSON ------------------------------------------------------------------------------

def _ring_lonlat(poly):
    lon, lat = to_lonlat([p[0] for p in poly], [p[1] for p in poly])
    return [[float(a), float(b)] for a, b in zip(lon, lat, strict=False)]


def _tree_feature(t):
    lon, lat = to_lonlat(t["x"], t["y"])
    props = {"id": t["id"], "kind": "tree", "crown_radius_m": t["crown_radius_m"], "height_m": t["height_m"],
             "crown_base_m": t["crown_base_m"], "transmissivity": t["transmissivity"]}
    return {"type": "Feature", "geometry": {"type": "Point", "coordinates": [float(lon), float(lat)]},
            "properties": props}


def _canopy_feature(c):
    props = {"id": c["id"], "kind": "canopy", "height_m": c["height_m"], "transmissivity": c["transmissivity"],
             "name": c["name"]}
    return {"type": "Feature", "geometry": {"type": "Polygon", "coordinates": [_ring_lonlat(c["polygon"])]},
            "properties": props}


def _building_feature(b):
    props = {"id": b["id"], "kind": "building", "height_m": b["height_m"], "use": b["use"]}
    return {"type": "Feature", "geometry": {"type": "Polygon", "coordinates": [_ring_lonlat(b["polygon"])]},
            "properties": props}


def scene_geojson(town: Town) -> dict:
    """The town's scene as a Scene GeoJSON FeatureCollection (DEVELOPERS.md contract)."""
    feats = [_building_feature(b) for b in town.buildings]
    feats += [_tree_feature(t) for t in town.trees]
    feats += [_canopy_feature(c) for c in town.canopies]
    return {"type": "FeatureCollection",
            "walkcomfort": {"site": {"lat": town.site["lat"], "lon": town.site["lon"],
                                     "elev_m": town.site["elev_m"]}},
            "features": feats}


def streets_geojson(town: Town) -> dict:
    """The street network as GeoJSON LineStrings (centrelines, with ground elevation as z)."""
    feats = []
    for s in town.streets:
        xs = np.array([p[0] for p in s.points])
        ys = np.array([p[1] for p in s.points])
        # densify so the hill shows in the z coordinate
        n = max(2, int(path_length_m(s.points) // 20) + 1)
        t = np.linspace(0.0, 1.0, n)
        dx = np.interp(t, np.linspace(0, 1, len(xs)), xs)
        dy = np.interp(t, np.linspace(0, 1, len(ys)), ys)
        lon, lat = to_lonlat(dx, dy)
        z = np.round(elevation_m(dx, dy), 1)
        coords = [[float(a), float(b), float(c)] for a, b, c in zip(lon, lat, z, strict=False)]
        feats.append({"type": "Feature", "geometry": {"type": "LineString", "coordinates": coords},
                      "properties": {"id": s.id, "name": s.name, "kind": s.kind, "width_m": s.width_m,
                                     "traffic": s.traffic}})
    return {"type": "FeatureCollection", "features": feats}


def walk_points(walk: Walk, spacing_m: float | None = None):
    """The sidewalk polyline of a walk in local metres, optionally resampled every ``spacing_m``."""
    pts = offset_path(walk.nodes, walk.offsets)
    if spacing_m is None:
        return np.asarray(pts, float)
    p = np.asarray(pts, float)
    seg = np.hypot(*np.diff(p, axis=0).T)
    s = np.concatenate([[0.0], np.cumsum(seg)])
    d = np.arange(0.0, s[-1], spacing_m)
    d = np.append(d, s[-1])
    return np.column_stack([np.interp(d, s, p[:, 0]), np.interp(d, s, p[:, 1])])


def route_geojson(walk: Walk) -> dict:
    """A planned route as a GeoJSON FeatureCollection with one LineString (lon, lat, elevation)."""
    p = walk_points(walk, spacing_m=10.0)
    lon, lat = to_lonlat(p[:, 0], p[:, 1])
    z = np.round(elevation_m(p[:, 0], p[:, 1]), 1)
    coords = [[float(a), float(b), float(c)] for a, b, c in zip(lon, lat, z, strict=False)]
    return {"type": "FeatureCollection",
            "features": [{"type": "Feature", "geometry": {"type": "LineString", "coordinates": coords},
                          "properties": {"id": walk.id, "name": walk.name,
                                         "length_m": round(path_length_m(p), 1)}}]}


def route_gpx(walk: Walk) -> str:
    """A planned route as a GPX 1.1 ``<rte>`` (route points with elevation, no times)."""
    from xml.sax.saxutils import escape

    p = walk_points(walk, spacing_m=10.0)
    lon, lat = to_lonlat(p[:, 0], p[:, 1])
    z = elevation_m(p[:, 0], p[:, 1])
    lines = ['<?xml version="1.0" encoding="UTF-8"?>',
             '<gpx version="1.1" creator="walkcomfort demo (invented town)" xmlns="http://www.topografix.com/GPX/1/1">',
             f"<rte><name>{escape(walk.name)}</name>"]
    for a, b, c in zip(lon, lat, z, strict=False):
        lines.append(f'<rtept lat="{b:.7f}" lon="{a:.7f}"><ele>{c:.1f}</ele></rtept>')
    lines.append("</rte></gpx>")
    return "\n".join(lines) + "\n"


def scheme_geojson(town: Town, scheme_id: str) -> dict:
    """A shade scheme as a Scheme GeoJSON FeatureCollection (DEVELOPERS.md contract)."""
    scheme = town.schemes[scheme_id]
    feats = []
    by_id = {t["id"]: t for t in town.trees}
    for edit, kind, obj in scheme["edits"]:
        if edit == "add":
            f = _tree_feature(obj) if kind == "tree" else _canopy_feature(obj)
            f["properties"]["edit"] = "add"
        elif edit == "modify":
            t = by_id[obj["target"]]
            lon, lat = to_lonlat(t["x"], t["y"])
            f = {"type": "Feature", "geometry": {"type": "Point", "coordinates": [float(lon), float(lat)]},
                 "properties": {"edit": "modify", "target": obj["target"],
                                "transmissivity": obj["transmissivity"]}}
        else:
            t = by_id[obj["target"]]
            lon, lat = to_lonlat(t["x"], t["y"])
            f = {"type": "Feature", "geometry": {"type": "Point", "coordinates": [float(lon), float(lat)]},
                 "properties": {"edit": "remove", "target": obj["target"]}}
        feats.append(f)
    return {"type": "FeatureCollection",
            "walkcomfort": {"scheme": scheme_id, "label": scheme["label"]},
            "features": feats}


def scheme_summary(town: Town, scheme_id: str) -> dict:
    """What a scheme adds: number of trees, m² of canopy, edits by kind (for cost-effectiveness)."""
    from shapely.geometry import Polygon

    edits = town.schemes[scheme_id]["edits"]
    trees = sum(1 for e, k, _ in edits if e == "add" and k == "tree")
    canopy = sum(Polygon(o["polygon"]).area for e, k, o in edits if e == "add" and k == "canopy")
    return {"trees_added": trees, "canopy_m2_added": round(canopy, 1),
            "modified": sum(1 for e, _, _ in edits if e == "modify"),
            "removed": sum(1 for e, _, _ in edits if e == "remove")}

