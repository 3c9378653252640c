"""add_environment / add_planned_environment and the `walkcomfort thermal` verb."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from shapely.geometry import Polygon

from walkcomfort import _io
from walkcomfort import columns as C
from walkcomfort.cli import main
from walkcomfort.environment import shade, sun, tmrt, utci
from walkcomfort.environment.geo import LocalFrame
from walkcomfort.environment.pipeline import ENV_COLUMNS, add_environment, add_planned_environment
from walkcomfort.environment.scene import scene_from_local
from walkcomfort.errors import InputError

LAT, LON = 40.4168, -3.7038
FRAME = LocalFrame(LON, LAT)
X0, Y0 = FRAME.project(LON, LAT)
SESSION = {"walk_id": "w1", "participant": "P01", "timezone": "Europe/Madrid", "site": "test",
           "wind_height_m": 1.1, "globe_height_m": 1.1, "globe_diameter_m": 0.038, "globe_emissivity": 0.95}


def _timeline(n=300, globe=True):
    idx = pd.date_range("2026-07-14 12:00", periods=n, freq="1s", tz="UTC", name=C.TIME)
    rng = np.random.default_rng(1)
    # walk north along x = X0 from 30 m south of the site to 30 m north
    yy = Y0 + np.linspace(-30, 30, n)
    lon, lat = FRAME.unproject(np.full(n, X0), yy)
    df = pd.DataFrame({C.WALK_ID: "w1", C.LAT: lat, C.LON: lon, C.ELEV_M: 650.0,
                       C.T_AIR_C: 30 + rng.normal(0, 0.2, n), C.RH_PCT: 35.0, C.WIND_MS: rng.uniform(0.2, 2.0, n),
                       C.PRESSURE_HPA: 940.0}, index=idx)
    if globe:
        tg = 40 + rng.normal(0, 0.5, n)
        tg[::10] = np.nan  # globe gaps -> Tmrt from fluxes there
        df[C.T_GLOBE_C] = tg
    df.attrs["session"] = dict(SESSION)
    return df


def _wall_scene():
    wall = Polygon([(X0 - 500, Y0 - 1), (X0 + 500, Y0 - 1), (X0 + 500, Y0), (X0 - 500, Y0)])
    return scene_from_local([(wall, {"id": "wall", "kind": "building", "height_m": 60.0})], LAT, LON)


def test_recorded_walk_columns_sources_and_input_untouched():
    df = _timeline()
    cols_before = list(df.columns)
    out = add_environment(df, irradiance="clearsky")
    assert list(df.columns) == cols_before  # the input is not modified
    assert out.index.equals(df.index) and all(c in out.columns for c in ENV_COLUMNS)
    glob = df[C.T_GLOBE_C].notna()
    assert (out.loc[glob, C.TMRT_SOURCE] == "globe").all() and (out.loc[~glob, C.TMRT_SOURCE] == "fluxes").all()
    # Tmrt from the globe is ISO 7726 with the manifest's 38 mm globe (see test_env_tmrt)
    exp = tmrt.tmrt_from_globe(df[C.T_GLOBE_C], df[C.T_AIR_C], df[C.WIND_MS], 0.038, 0.95)
    np.testing.assert_allclose(out.loc[glob, C.TMRT_C], exp[glob])
    # wind to 10 m by the log law from 1.1 m (factor 1.4696) and UTCI of those inputs
    np.testing.assert_allclose(out[C.WIND10_MS], df[C.WIND_MS] * 1.4696, rtol=1e-4)
    u = utci.utci_from_conditions(df[C.T_AIR_C], out[C.TMRT_C], out[C.WIND10_MS], df[C.RH_PCT], warn=False)
    np.testing.assert_allclose(out[C.UTCI_C], u[C.UTCI_C])
    assert out[C.QA_WIND_CLAMPED].sum() == (out[C.WIND10_MS] < 0.5).sum() > 0
    assert set(out[C.UTCI_BAND].dropna()) <= {b[2] for b in C.UTCI_BANDS}
    env = out.attrs["environment"]
    assert env["qa_counts"]["tmrt_globe"] == glob.sum() and env["irradiance"]["linke_turbidity"]["by_month"]
    assert out.attrs["session"]["walk_id"] == "w1"
    # open ground: no shade by day, full sky view
    assert (out[C.BEAM_TRANS_FRAC] == 1).all() and (out[C.SVF] == 1).all()


def test_scene_shade_along_the_walk():
    # From the geometry: a 60 m wall along y = Y0 (north face); at noon in July the sun
    # (~72° elevation, due south) is hidden for points within (60-1.1)/tan(72°) ≈ 19 m north of it.
    df = _timeline(globe=False)
    sc = _wall_scene()
    out = add_environment(df, scene=sc, irradiance="clearsky")
    x, y = sc.project(df[C.LON].to_numpy(), df[C.LAT].to_numpy())
    direct = shade.beam_transmittance(sc, x, y, out[C.SUN_ELEV_DEG].to_numpy(), out[C.SUN_AZIM_DEG].to_numpy())
    np.testing.assert_array_equal(out[C.BEAM_TRANS_FRAC].to_numpy(), direct)
    north = np.asarray(y) - Y0
    e = out[C.SUN_ELEV_DEG].to_numpy()
    lim = 58.9 / np.tan(np.radians(e))
    clear = (north > 0) & (np.abs(north - lim) > 0.5)  # away from the shadow edge
    assert (out[C.SHADE_FRAC].to_numpy()[clear] == (north[clear] < lim[clear]).astype(float)).all()
    assert (out[C.SVF][north > 0] < 1).all() and (out[C.TMRT_SOURCE] == "fluxes").all()
    shaded, sunny = out[C.SHADE_FRAC] == 1, (out[C.SHADE_FRAC] == 0) & (north > 25)
    assert out.loc[shaded, C.TMRT_C].mean() < out.loc[sunny, C.TMRT_C].mean() - 10  # into shade: a large drop


def test_measured_ghi_on_its_own_index_is_interpolated_and_split():
    df = _timeline(globe=False)
    t = pd.date_range("2026-07-14 11:55", "2026-07-14 12:10", freq="1min", tz="UTC")
    meas = pd.DataFrame({C.GHI_WM2: np.linspace(800, 900, t.size)}, index=t)
    out = add_environment(df, irradiance=meas)
    at = df.index[60]  # 12:01:00 falls on a measured minute
    # on a measured minute the measured value is kept; its split is the Erbs et al. (1982) model itself
    assert out.loc[at, C.GHI_WM2] == pytest.approx(meas.loc[at, C.GHI_WM2])
    dec = sun.decompose_ghi(np.array([meas.loc[at, C.GHI_WM2]]), np.array([out.loc[at, C.SUN_ZENITH_DEG]]),
                            pd.DatetimeIndex([at]))
    assert out.loc[at, C.DNI_WM2] == pytest.approx(dec[C.DNI_WM2].iloc[0])
    assert out.attrs["environment"]["irradiance"]["split"].startswith("Erbs")


def test_bad_inputs_raise_one_line_errors():
    df = _timeline()
    no_h = df.copy()
    no_h.attrs = {"session": {k: v for k, v in SESSION.items() if k != "wind_height_m"}}
    with pytest.raises(InputError, match="wind sensor height"):
        add_environment(no_h)
    no_d = df.copy()
    no_d.attrs = {"session": {k: v for k, v in SESSION.items() if k != "globe_diameter_m"}}
    with pytest.raises(InputError, match="diameter"):
        add_environment(no_d)
    out = add_environment(df)
    with pytest.raises(InputError, match="already has environment columns"):
        add_environment(out)
    assert add_environment(out, overwrite=True)[C.UTCI_C].equals(out[C.UTCI_C])
    with pytest.raises(InputError, match="tz-aware"):
        add_environment(df.tz_localize(None))
    with pytest.raises(InputError, match="clearsky"):
        add_environment(df, irradiance="sunny")


def test_planned_walk_from_local_metres_and_own_irradiance():
    df = _timeline(globe=False)
    sc = _wall_scene()
    x, y = sc.project(df[C.LON].to_numpy(), df[C.LAT].to_numpy())
    planned = df.drop(columns=[C.LAT, C.LON]).assign(**{C.X_M: x, C.Y_M: y, C.GHI_WM2: 850.0,
                                                          C.DNI_WM2: 820.0, C.DHI_WM2: 110.0})
    planned.attrs = {"session": {"timezone": "Europe/Madrid", "wind_height_m": 10.0}}
    out = add_planned_environment(planned, scene=sc)
    assert (out[C.DNI_WM2] == 820.0).all() and (out[C.TMRT_SOURCE] == "fluxes").all()
    # a planned walk's weather is a 10 m mast's: no height correction, but it is brought to street
    # level by the urban profile of the scene's buildings (environment.wind, Grimmond & Oke 1999)
    from walkcomfort.environment import wind

    street = wind.street_equivalent_10m(planned[C.WIND_MS].to_numpy(), wind.mean_building_height(sc))
    np.testing.assert_allclose(out[C.WIND10_MS], street)
    assert (out[C.WIND10_MS] < planned[C.WIND_MS]).all()
    assert "Grimmond" in out.attrs["environment"]["wind"]["profile"]
    rec = add_environment(df.assign(**{C.T_GLOBE_C: np.nan}), scene=sc,
                          irradiance=pd.DataFrame({C.GHI_WM2: 850.0, C.DNI_WM2: 820.0, C.DHI_WM2: 110.0},
                                                  index=df.index), wind_height_m=10.0)
    np.testing.assert_allclose(out[C.TMRT_C], rec[C.TMRT_C], atol=1e-6)  # one code path
    with pytest.raises(InputError, match="weather columns"):
        add_planned_environment(planned.drop(columns=[C.RH_PCT]), scene=sc)


def _write_ingested(folder, df):
    data = df.copy()
    data.attrs = {}
    _io.write_parquet(folder / "w1" / "timeline.parquet", data, {"session": df.attrs["session"], "provenance": {}})
    (folder / "w1" / "qa.json").write_text("{}\n")
    return folder / "w1"


def test_thermal_command_writes_atomically_and_reruns(tmp_path, capsys):
    walk = _write_ingested(tmp_path / "ingested", _timeline())
    scene_file = tmp_path / "scene.geojson"
    scene_file.write_text(json.dumps(_wall_scene().to_geojson()))
    code = main(["thermal", str(tmp_path / "ingested"), "--scene", str(scene_file), "-o", str(tmp_path / "out")])
    assert code == 0
    msg = capsys.readouterr().out
    assert "w1: 300 rows" in msg and "Tmrt from globe 270" in msg
    from walkcomfort.session.timeline import read_timeline

    got = read_timeline(tmp_path / "out" / "w1")
    assert all(c in got.columns for c in ENV_COLUMNS) and (tmp_path / "out" / "w1" / "qa.json").is_file()
    meta = _io.read_parquet_metadata(tmp_path / "out" / "w1" / "timeline.parquet")
    assert meta["environment"]["scene"]["features"] == 1 and meta["session"]["walk_id"] == "w1"
    first = (tmp_path / "out" / "w1" / "timeline.parquet").read_bytes()
    # in place, twice: the second run replaces its own columns and gives the same bytes
    assert main(["thermal", str(walk), "--scene", str(scene_file)]) == 0
    assert main(["thermal", str(walk), "--scene", str(scene_file)]) == 0
    assert "replacing environment columns" in capsys.readouterr().out
    assert (walk / "timeline.parquet").read_bytes() != b""
    assert len(list(walk.glob("*.part"))) == 0
    again = read_timeline(walk)
    pd.testing.assert_series_equal(again[C.UTCI_C], got[C.UTCI_C])
    assert first  # output written


def test_thermal_command_errors(tmp_path, capsys):
    assert main(["thermal", str(tmp_path / "nothing")]) == 2
    assert "does not exist" in capsys.readouterr().err
    walk = _write_ingested(tmp_path / "ing", _timeline())
    bad = tmp_path / "irr.csv"
    bad.write_text("time,ghi_wm2\n2026-07-14T12:00:00,800\n")
    assert main(["thermal", str(walk), "--irradiance", str(bad)]) == 2
    assert "no UTC offset" in capsys.readouterr().err
    # a cut or foreign timeline.parquet once surfaced as an internal ArrowInvalid error (exit 1)
    cut = tmp_path / "cut"
    cut.mkdir()
    (cut / "timeline.parquet").write_bytes(b"not parquet at all")
    assert main(["thermal", str(cut)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and err.startswith("error: ") and "cannot read it as Parquet" in err
    assert "Fix:" in err


def test_missing_values_pass_through_as_nan():
    # From the definition (NaN passes through): a GPS gap gives no shade/sky view (the sun is
    # the site's, known without a position), a missing air temperature no Tmrt/UTCI, a
    # missing wind no UTCI; nothing is dropped.
    sc = _wall_scene()
    idx = pd.date_range("2026-07-14 10:00", periods=4, freq="1s", tz="UTC", name=C.TIME)
    df = pd.DataFrame({C.LAT: [LAT, np.nan, LAT, LAT], C.LON: [LON, LON, LON, LON],
                       C.T_AIR_C: [30.0, 30.0, np.nan, 30.0], C.RH_PCT: 40.0, C.WIND_MS: [1.0, 1.0, 1.0, np.nan]},
                      index=idx)
    df.attrs["session"] = {"wind_height_m": 1.1}
    out = add_environment(df, scene=sc)
    assert len(out) == 4
    assert np.isfinite(out[C.SUN_ELEV_DEG]).all() and np.isnan(out[C.SHADE_FRAC].iloc[1])
    assert np.isnan(out[C.SVF].iloc[1]) and np.isfinite(out[C.SVF].iloc[[0, 2, 3]]).all()
    assert np.isnan(out[C.TMRT_C].iloc[2]) and pd.isna(out[C.TMRT_SOURCE].iloc[2])
    assert np.isnan(out[C.UTCI_C].iloc[3]) and pd.isna(out[C.UTCI_BAND].iloc[3])
    assert np.isfinite(out[C.UTCI_C].iloc[0]) and out.attrs["environment"]["qa_counts"]["tmrt_missing"] == 2


def test_points_inside_buildings_are_flagged_or_snapped():
    # A GPS fix 2 m inside a 20 m block (common in street canyons): flagged; with "snap"
    # it is moved 0.5 m outside the nearest wall for shade and sky view (from the geometry).
    block = Polygon([(X0 - 10, Y0 - 10), (X0 + 10, Y0 - 10), (X0 + 10, Y0 + 10), (X0 - 10, Y0 + 10)])
    sc = scene_from_local([(block, {"id": "blk", "kind": "building", "height_m": 15.0})], LAT, LON)
    lon, lat = FRAME.unproject(np.array([X0 + 8.0, X0 + 30.0]), np.array([Y0, Y0]))
    idx = pd.date_range("2026-07-14 10:00", periods=2, freq="1s", tz="UTC", name=C.TIME)
    df = pd.DataFrame({C.LAT: lat, C.LON: lon, C.T_AIR_C: 30.0, C.RH_PCT: 40.0, C.WIND_MS: 1.0}, index=idx)
    df.attrs["session"] = {"wind_height_m": 1.1}
    flagged = add_environment(df, scene=sc)
    assert flagged[C.QA_INSIDE_BUILDING].tolist() == [True, False]
    assert flagged[C.SVF].iloc[0] == 0.0  # inside the solid: no sky
    snapped = add_environment(df, scene=sc, inside_buildings="snap")
    assert snapped[C.QA_INSIDE_BUILDING].tolist() == [True, False]
    x, y, moved = sc.snap_outside([X0 + 8.0], [Y0])
    assert moved.tolist() == [True] and x[0] == pytest.approx(X0 + 10.5) and y[0] == pytest.approx(Y0)
    # at 10.5 m east of a 10 m wide half-block, 15 m tall: sky view well below 1 but not 0
    assert 0.4 < snapped[C.SVF].iloc[0] < 0.9
    assert snapped.attrs["environment"]["qa_counts"]["inside_building"] == 1


def test_thermal_command_with_measured_irradiance(tmp_path, capsys):
    walk = _write_ingested(tmp_path / "ing", _timeline())
    irr = tmp_path / "roof.csv"
    irr.write_text("time,ghi_wm2\n2026-07-14T13:55:00+02:00,850\n2026-07-14T14:10:00+02:00,870\n")
    assert main(["thermal", str(walk), "--irradiance", str(irr), "-o", str(tmp_path / "out")]) == 0
    env = json.loads((tmp_path / "out" / "w1" / "environment.json").read_text())
    assert env["environment"]["irradiance"]["source"] == "table"
    assert env["environment"]["irradiance"]["split"].startswith("Erbs")
    assert env["provenance"]["inputs"]  # digests of the timeline and the irradiance file
