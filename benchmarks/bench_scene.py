"""Benchmark: a scene from an OpenStreetMap extract of ~5,000 buildings.

Size (stated, fixed): an invented town written as an OSM PBF extract — 5,000 buildings
on a 71 x 71 grid of 18 m plots (a third tagged `height`, a third `building:levels`, a
third untagged; one in fifty drawn as a self-intersecting bow tie), 2,000 tree nodes and
40 tree rows of 200 m — clipped to a 150 m buffer around a 2 km route across the town.

Timed (in one process):
  * ours   — walkcomfort.environment.osm.read_osm + osmscene.build_scene (pyosmium,
             shapely vectorised projection per feature, validated Scene);
  * naive  — the plain approach a script would take: parse the same town from its OSM
             XML twin with xml.etree, keep every node in a dict, build each polygon,
             run make_valid on every outline, project each one with its own pyproj call,
             test it against the clip area and validate it alone.
Both must keep the same buildings; the ratio naive / ours is printed. The naive script
stops at the set of kept outlines (it writes no scene, validates no properties), so the
ratio understates the difference.
Memory: the process's peak resident size (resource.getrusage) after both runs.

Run:  python benchmarks/bench_scene.py
Goal: ours under 10 s and the process under 1 GB.
"""

from __future__ import annotations

import resource
import tempfile
import time
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pyproj
import shapely

from walkcomfort.environment import sun  # noqa: F401  (imported before timing: the scene's materials load pvlib once)
from walkcomfort.environment.geo import LocalFrame
from walkcomfort.environment.osm import read_osm
from walkcomfort.environment.osmscene import build_scene, clip_around

LAT, LON = 45.07, 7.68  # an invented town's site
N_SIDE, PLOT_M, SIZE_M = 71, 18.0, 12.0


def _town(frame: LocalFrame):
    """Nodes and ways of the invented town, in lon/lat."""
    rng = np.random.default_rng(5)
    nodes, ways = [], []
    nid, wid = 0, 0

    def node(x, y, tags=None):
        nonlocal nid
        nid += 1
        lon, lat = frame.unproject(x, y)
        nodes.append((nid, float(lon), float(lat), tags or {}))
        return nid

    half = N_SIDE * PLOT_M / 2
    count = 0
    for i in range(N_SIDE):
        for j in range(N_SIDE):
            if count == 5000:
                break
            x0, y0 = -half + i * PLOT_M, -half + j * PLOT_M
            s = SIZE_M
            pts = [(x0, y0), (x0 + s, y0), (x0 + s, y0 + s), (x0, y0 + s)]
            if count % 50 == 0:  # a bow tie
                pts = [(x0, y0), (x0 + s, y0 + s), (x0 + s, y0), (x0, y0 + s)]
            refs = [node(x, y) for x, y in pts]
            tags = {"building": "yes"}
            if count % 3 == 0:
                tags["height"] = f"{rng.uniform(6, 30):.1f}"
            elif count % 3 == 1:
                tags["building:levels"] = str(int(rng.integers(1, 9)))
            wid += 1
            ways.append((wid, [*refs, refs[0]], tags))
            count += 1
    for _ in range(2000):
        node(rng.uniform(-half, half), rng.uniform(-half, half), {"natural": "tree"})
    for _ in range(40):
        x, y = rng.uniform(-half, half - 200), rng.uniform(-half, half)
        wid += 1
        ways.append((wid, [node(x, y), node(x + 200, y)], {"natural": "tree_row"}))
    return nodes, ways


def _write(nodes, ways, folder: Path) -> tuple[Path, Path]:
    import osmium

    xml = folder / "town.osm"
    lines = ['<?xml version="1.0" encoding="UTF-8"?>', '<osm version="0.6" generator="bench">']
    for nid, lon, lat, tags in nodes:
        t = "".join(f'<tag k="{k}" v="{v}"/>' for k, v in tags.items())
        lines.append(f'<node id="{nid}" version="1" lat="{lat:.7f}" lon="{lon:.7f}">{t}</node>')
    for wid, refs, tags in ways:
        nd = "".join(f'<nd ref="{r}"/>' for r in refs)
        t = "".join(f'<tag k="{k}" v="{v}"/>' for k, v in tags.items())
        lines.append(f'<way id="{wid}" version="1">{nd}{t}</way>')
    lines.append("</osm>")
    xml.write_text("\n".join(lines))
    pbf = folder / "town.osm.pbf"
    with osmium.SimpleWriter(str(pbf)) as writer:
        for obj in osmium.FileProcessor(str(xml)):
            writer.add(obj)
    return xml, pbf


def naive(xml: Path, clip_lonlat) -> set[str]:
    """The plain per-feature script (see the module docstring)."""
    root = ET.parse(xml).getroot()
    coords = {n.get("id"): (float(n.get("lon")), float(n.get("lat"))) for n in root.iter("node")}
    kept = set()
    for way in root.iter("way"):
        tags = {t.get("k"): t.get("v") for t in way.iter("tag")}
        if "building" not in tags:
            continue
        ring = [coords[nd.get("ref")] for nd in way.iter("nd")]
        poly = shapely.make_valid(shapely.Polygon(ring))
        parts = [p for p in shapely.get_parts(poly) if p.geom_type == "Polygon"]
        if not parts:
            continue
        tr = pyproj.Transformer.from_crs("EPSG:4326", "EPSG:32632", always_xy=True)
        xs, ys = tr.transform(*np.array(parts[0].exterior.coords).T)
        local = shapely.Polygon(np.column_stack([xs, ys]))
        if not shapely.is_valid(local) or not clip_lonlat.intersects(shapely.union_all(parts)):
            continue
        kept.add(f"way/{way.get('id')}")
    return kept


def main() -> None:
    frame = LocalFrame(LON, LAT)
    nodes, ways = _town(frame)
    half = N_SIDE * PLOT_M / 2
    a, b = frame.unproject(np.array([-half, half]), np.array([-half / 3, half / 3]))
    clip = clip_around([shapely.LineString(np.column_stack([a, b]))], 150.0)
    with tempfile.TemporaryDirectory() as d:
        xml, pbf = _write(nodes, ways, Path(d))
        t0 = time.perf_counter()
        osm = read_osm(pbf)
        t_read = time.perf_counter() - t0
        scene, report = build_scene(osm, clip_lonlat=clip, site=(LAT, LON))
        t_ours = time.perf_counter() - t0
        full_t0 = time.perf_counter()
        full, full_report = build_scene(osm, site=(LAT, LON))
        t_full = time.perf_counter() - full_t0 + t_read
        t1 = time.perf_counter()
        kept = naive(xml, clip)
        t_naive = time.perf_counter() - t1
    ours = {f["properties"]["osm_id"] for f in scene.features if f["properties"]["kind"] == "building"}
    c = report["counts"]
    print(f"extract: {c['buildings_read']} buildings, {report['counts'].get('trees_read', 0)} trees, "
          f"{c.get('tree_rows_read', 0)} tree rows; clip: 150 m around a {2 * half:.0f} m route")
    print(f"ours  (read + build, clipped): {t_ours:6.2f} s  -> {len(ours)} buildings "
          f"({len(report['repaired'])} repaired), {c.get('trees', 0) + c.get('tree_row_trees', 0)} trees")
    print(f"ours  (read + build, whole town, {full_report['counts']['buildings']} buildings): {t_full:6.2f} s")
    print(f"naive (etree, per-feature make_valid/pyproj/clip): {t_naive:6.2f} s  -> {len(kept)} buildings")
    print(f"same buildings kept: {ours == kept};  naive / ours = {t_naive / t_ours:.1f} x")
    peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"peak resident memory of the process: {peak_mb:.0f} MB (goal < 1024 MB); ours < 10 s: "
          f"{t_full < 10.0}")


if __name__ == "__main__":
    main()
