"""The ``network`` verb end to end on open ground (no scene): real sun, Tmrt, UTCI and the band rule."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from walkcomfort import _io
from walkcomfort import columns as C
from walkcomfort.cli import main
from walkcomfort.network import batch
from walkcomfort.network.engines import read_segment_hours
from walkcomfort.network.synthetic import grid_network

ARGS = ["--conditions", "t_air_c=30,rh_pct=40,wind_ms=2", "--start", "2026-07-14T09:00", "--end",
        "2026-07-14T12:00", "--timezone", "Europe/Madrid", "--time-chunk", "2"]


@pytest.fixture
def streets(tmp_path):
    p = tmp_path / "streets.geojson"
    p.write_text(json.dumps(grid_network(3, 2, block_m=80.0)))
    return p


def test_open_ground_rows_match_the_utci_reference(streets, tmp_path):
    out = tmp_path / "out"
    assert main(["network", str(streets), *ARGS, "--out", str(out)]) == 0
    rows = read_segment_hours(out)
    # 3 streets of 80 m (round(80/50) = 2 pieces) + 2 of 160 m (3 pieces) = 12 segments, 4 hours
    assert len(rows) == 12 * 4
    # open ground: no shade, full sky
    assert (rows[C.SHADE_FRAC] == 0).all() and (rows[C.SVF] == 1).all()
    # UTCI from the row's own air, Tmrt, wind (stated at 10 m) and humidity against the
    # test-only reference pythermalcomfort (Bröde et al. 2012 polynomial); it rounds to 0.1 °C
    from pythermalcomfort.models import utci

    ref = utci(tdb=rows[C.T_AIR_C].to_numpy(), tr=rows[C.TMRT_C].to_numpy(), v=rows[C.WIND_MS].to_numpy(),
               rh=rows[C.RH_PCT].to_numpy()).utci
    assert np.allclose(rows[C.UTCI_C], ref, atol=0.051)
    # the band rule of model.baselines: above 32 °C uncomfortable, 26…32 neutral
    expect = np.where(rows[C.UTCI_C] > 32, "uncomfortable", np.where(rows[C.UTCI_C] > 26, "neutral", "comfortable"))
    assert (rows["comfort_class"].to_numpy() == expect).all()
    assert (rows["predictor"] == "physics-rule").all()
    summary = pd.read_parquet(out / "segment_summary.parquet")
    assert len(summary) == 12 and (summary["hours_h"] == 4.0).all()
    gj = json.loads((out / "segment_summary.geojson").read_text())
    assert len(gj["features"]) == 12
    report = json.loads((out / "job.json").read_text())
    assert report["ok"] and report["rows_expected"] == report["rows_written"] == 48


def test_dask_run_of_the_command_writes_the_same_bytes(streets, tmp_path, monkeypatch):
    from walkcomfort.network import engines

    # threads-in-process workers keep the test light; the processes path is exercised in the demo test
    real = engines.DaskEngine.__init__

    def threads(self, *a, **kw):
        real(self, *a, **{**kw, "processes": False, "timeout_s": 20})

    monkeypatch.setattr(engines.DaskEngine, "__init__", threads)
    a, b = tmp_path / "a", tmp_path / "b"
    assert main(["network", str(streets), *ARGS, "--out", str(a)]) == 0
    assert main(["network", str(streets), *ARGS, "--engine", "dask", "--workers", "1", "--out", str(b)]) == 0
    for f in sorted((a / "segment_hours").rglob("*.parquet")):
        assert _io.file_digest(f) == _io.file_digest(b / f.relative_to(a))
    assert (a / "segment_summary.geojson").read_bytes() == (b / "segment_summary.geojson").read_bytes()


def test_failed_partition_exits_non_zero_and_names_it(streets, tmp_path, monkeypatch, capsys):
    real = batch.compute_partition
    broken = {"now": True}

    def fails_on_one(part):
        if broken["now"] and part.partition_id == "base/t000_000/c0001":
            raise OSError("disk on fire")
        return real(part)

    monkeypatch.setattr(batch, "compute_partition", fails_on_one)
    out = tmp_path / "out"
    rc = main(["network", str(streets), *ARGS, "--retries", "1", "--out", str(out)])
    assert rc == 3
    err = capsys.readouterr().err
    assert "1 partitions failed after 1 retries: base/t000_000/c0001" in err
    report = json.loads((out / "job.json").read_text())
    assert report["failed"] == ["base/t000_000/c0001"]
    assert report["rows_written"] < report["rows_expected"]
    assert not (out / "segment_summary.parquet").exists()  # no summary over missing rows
    # the cause goes away; the same job resumed: only the missing partition runs again
    broken["now"] = False
    assert main(["network", str(streets), *ARGS, "--resume", "--out", str(out)]) == 0
    statuses = {o["partition_id"]: o["status"] for o in json.loads((out / "job.json").read_text())["outcomes"]}
    assert statuses.pop("base/t000_000/c0001") == "written" and set(statuses.values()) == {"kept"}


def test_option_errors_are_one_line(streets, tmp_path, capsys):
    out = str(tmp_path / "o")
    assert main(["network", str(streets), "--conditions", "t_air_c=30,rh_pct=40,wind_ms=2", "--start",
                 "2026-07-14T09:00", "--end", "2026-07-14T10:00", "--out", out]) == 2
    assert "no --timezone" in capsys.readouterr().err
    assert main(["network", str(streets), *ARGS, "--scheduler", "tcp://127.0.0.1:1", "--out", out]) == 2
    assert "--engine dask" in capsys.readouterr().err
    assert main(["network", str(streets), *ARGS[2:], "--conditions", "t_air_c:30", "--out", out]) == 2
    err = capsys.readouterr().err
    assert "name=number" in err and err.startswith("error: --conditions: ")
    assert main(["network", str(streets), "--conditions", "t_air_c=30,rh_pct=40,wind_ms=2", "--start",
                 "2026-07-14T10:00", "--end", "2026-07-14T09:00", "--timezone", "UTC", "--out", out]) == 2
    err = capsys.readouterr().err
    assert err.startswith("error: --start/--end: ") and "before it starts" in err and err.count("\n") == 1
    # an unknown name once reached StatedConditions(**) as an internal TypeError; the shared parser names it
    assert main(["network", str(streets), *ARGS[2:], "--conditions", "t_air_c=30,rh_pct=40,wind_ms=2,foo=1",
                 "--out", out]) == 2
    err = capsys.readouterr().err
    assert err.startswith("error: --conditions: ") and "'foo=1'" in err and err.count("\n") == 1


def test_daytime_keeps_the_hours_with_the_sun_up(streets, tmp_path):
    out = tmp_path / "out"
    assert main(["network", str(streets), "--conditions", "t_air_c=30,rh_pct=40,wind_ms=2", "--start",
                 "2026-07-14T00:00", "--end", "2026-07-15T23:00", "--timezone", "Europe/Madrid", "--daytime",
                 "--out", str(out)]) == 0
    rows = read_segment_hours(out)
    per_day = rows.index.unique().tz_convert("Europe/Madrid").normalize().value_counts()
    # day length at 40.4° N in mid-July is about 14.9 h (from memory), so 14 or 15 hourly samples a day
    assert set(per_day) <= {14, 15} and len(per_day) == 2
    assert (rows[C.SUN_ELEV_DEG] > 0).all()


def test_rerun_with_another_tile_size_is_refused_then_replaced(streets, tmp_path, capsys):
    out = tmp_path / "out"
    assert main(["network", str(streets), *ARGS, "--tile-size", "60", "--out", str(out)]) == 0
    first = read_segment_hours(out)
    capsys.readouterr()
    assert main(["network", str(streets), *ARGS, "--tile-size", "500", "--out", str(out)]) == 2
    err = [line for line in capsys.readouterr().err.splitlines() if line.startswith("error")]
    assert len(err) == 1 and "another job" in err[0] and "--overwrite" in err[0]
    assert main(["network", str(streets), *ARGS, "--tile-size", "500", "--out", str(out), "--overwrite"]) == 0
    again = read_segment_hours(out)
    assert len(again) == len(first) == 48  # not 96: the first job's files are gone, not mixed in
    summary = pd.read_parquet(out / "segment_summary.parquet")
    assert len(summary) == 12 and not summary.index.has_duplicates
