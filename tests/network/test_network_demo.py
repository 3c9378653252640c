"""The batch on the demo town's street network: in-process = LocalCluster, tiles = whole scene."""

from __future__ import annotations

import json

import pandas as pd
import pytest

from walkcomfort import _io
from walkcomfort import columns as C
from walkcomfort.cli import main
from walkcomfort.network.commands import plan_from_files
from walkcomfort.network.engines import read_segment_hours, run_job


def _plan(demo_dir, tile_size_m, schemes=("trees-costa",), start="2026-07-15T16:00", end="2026-07-15T18:00"):
    return plan_from_files(demo_dir / "streets.geojson", demo_dir / "scene.geojson",
                           [demo_dir / "schemes" / f"{s}.geojson" for s in schemes], start, end, "1h",
                           "Europe/Madrid", weather_path=demo_dir / "weather" / "design-day.csv",
                           logger_wind_height=1.1, tile_size_m=tile_size_m, time_chunk=3)


def _canonical(out):
    rows = read_segment_hours(out).drop(columns=C.TILE_ID).reset_index()
    return rows.sort_values(["scheme", C.SEGMENT_ID, C.TIME]).reset_index(drop=True)


def test_tiles_give_the_same_rows_as_the_whole_scene(demo_dir, tmp_path):
    net, tiled = _plan(demo_dir, 250.0)
    _, whole = _plan(demo_dir, 10_000.0)
    assert len({p.tile_id for p in tiled.partitions}) >= 4 and len({p.tile_id for p in whole.partitions}) == 1
    # the tiles really carry less than the whole scene
    n_scene = len(whole.partitions[0].scene["features"])
    assert min(len(p.scene["features"]) for p in tiled.partitions) < n_scene
    assert run_job(tiled, tmp_path / "tiled").ok and run_job(whole, tmp_path / "whole").ok
    a, b = _canonical(tmp_path / "tiled"), _canonical(tmp_path / "whole")
    assert len(a) == net.n_segments * 3 * 2
    pd.testing.assert_frame_equal(a, b)
    # the scheme plants trees along one street: in the late afternoon shade goes up there,
    # and nowhere does it go down
    wide = a.pivot_table(index=[C.SEGMENT_ID, C.TIME], columns="scheme", values=C.SHADE_FRAC)
    assert (wide["trees-costa"] >= wide["base"] - 1e-12).all() and (wide["trees-costa"] > wide["base"]).any()


@pytest.mark.slow
def test_in_process_and_local_cluster_write_identical_files(demo_dir, tmp_path):
    _, job = _plan(demo_dir, 300.0, schemes=("canopy-placa",), end="2026-07-15T17:00")
    a = run_job(job, tmp_path / "a", "in-process")
    # real worker processes (the default of the engine), two of them, on loopback
    b = run_job(job, tmp_path / "b", "dask", workers=2, processes=True, timeout_s=60)
    assert a.ok and b.ok and a.written_rows == b.written_rows == job.expected_rows
    files = sorted((tmp_path / "a" / "segment_hours").rglob("*.parquet"))
    assert len(files) == len(job.partitions)
    for f in files:
        assert _io.file_digest(f) == _io.file_digest(tmp_path / "b" / f.relative_to(tmp_path / "a"))


def test_network_command_on_the_demo_town(demo_dir, tmp_path):
    out = tmp_path / "out"
    rc = main(["network", str(demo_dir / "streets.geojson"), "--scene", str(demo_dir / "scene.geojson"),
               "--scheme", str(demo_dir / "schemes" / "trees-costa.geojson"),
               "--weather", str(demo_dir / "weather" / "design-day.csv"), "--logger-wind-height", "1.1",
               "--start", "2026-07-15T17:00", "--end", "2026-07-15T18:00", "--timezone", "Europe/Madrid",
               "--out", str(out)])
    assert rc == 0
    report = json.loads((out / "job.json").read_text())
    assert report["ok"] and report["rows_expected"] == report["rows_written"]
    for scheme in ("base", "trees-costa"):
        layer = json.loads((out / f"network_layer_{scheme}.geojson").read_text())
        assert len(layer["features"]) == 80 and layer["walkcomfort"]["scheme"] == scheme
    assert (out / "network_layer_base.geojson").stat().st_size < (out / "segment_summary.geojson").stat().st_size / 3
    gj = json.loads((out / "segment_summary.geojson").read_text())
    costa = [f for f in gj["features"] if f["properties"]["street_id"] == "s-costa"]
    assert costa and all("trees-costa" in f["properties"]["schemes"] for f in costa)
    # the new trees shade Costa in the late afternoon: its UTCI goes down somewhere, up nowhere
    d = [f["properties"]["schemes"]["trees-costa"]["d_mean_utci_c"] for f in costa]
    assert min(d) < -0.5 and max(d) <= 0.0


def test_network_physics_matches_the_timeline_path(demo_dir):
    # the same points and times through environment.pipeline.add_environment, the path recorded and
    # simulated walks take: the network batch must give the model the same environment
    import numpy as np

    from walkcomfort.environment.pipeline import add_environment
    from walkcomfort.environment.scene import Scene
    from walkcomfort.network import _physics

    _, job = plan_from_files(demo_dir / "streets.geojson", demo_dir / "scene.geojson", [], "2026-07-15T08:00",
                             "2026-07-15T18:00", "2h", "Europe/Madrid",
                             weather_path=demo_dir / "weather" / "design-day.csv", logger_wind_height=1.1,
                             tile_size_m=250.0)
    part = max(job.partitions, key=lambda p: len(p.scene["features"]))
    env = _physics.point_environment(part)
    pts, w = part.points, part.weather
    n, t = len(pts), len(part.times)
    idx = pd.DatetimeIndex(np.tile(part.times.to_numpy(), n), tz="UTC", name=C.TIME)
    tl = pd.DataFrame({C.LAT: np.repeat(pts[C.LAT].to_numpy(), t), C.LON: np.repeat(pts[C.LON].to_numpy(), t),
                       C.X_M: np.repeat(pts[C.X_M].to_numpy(), t), C.Y_M: np.repeat(pts[C.Y_M].to_numpy(), t),
                       **{c: np.tile(w[c].to_numpy(), n) for c in (C.T_AIR_C, C.RH_PCT, C.WIND_MS, C.PRESSURE_HPA)}},
                      index=idx)
    tl.attrs["session"] = {"timezone": "Europe/Madrid", "wind_height_m": 1.1}
    ref = add_environment(tl, scene=Scene.from_geojson(part.scene),
                          irradiance=w[[C.GHI_WM2, C.DNI_WM2, C.DHI_WM2]], warn=False)

    def grid(name):
        v = np.asarray(env[name], dtype=float)
        return np.broadcast_to(v if v.ndim == 2 else v[None, :], (n, t)).ravel()

    assert (grid(C.SHADE_FRAC) < 1).any() and (grid(C.SHADE_FRAC) > 0).any()
    # the batch takes the sun at the site, the timeline at each point: < 0.01° apart within the town
    np.testing.assert_allclose(grid(C.SUN_ELEV_DEG), ref[C.SUN_ELEV_DEG], atol=0.01)
    np.testing.assert_allclose(grid(C.SHADE_FRAC), ref[C.SHADE_FRAC], atol=1e-9)
    np.testing.assert_allclose(grid(C.SVF), ref[C.SVF], atol=1e-9)
    np.testing.assert_allclose(grid(C.TMRT_C), ref[C.TMRT_C], atol=0.01)
    np.testing.assert_allclose(grid(C.UTCI_C), ref[C.UTCI_C], atol=0.01)
    np.testing.assert_array_equal(grid(C.QA_INSIDE_BUILDING) > 0, ref[C.QA_INSIDE_BUILDING].to_numpy(bool))
