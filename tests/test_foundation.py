"""The shared helpers every stage relies on: errors, atomic writes, deterministic outputs, CLI shell."""

from __future__ import annotations

from pathlib import Path

import pandas as pd
import pytest

from walkcomfort import _io
from walkcomfort.cli import VERBS, main
from walkcomfort.columns import UTCI_BANDS
from walkcomfort.errors import InputError


def test_error_is_one_line_with_where_and_fix():
    err = InputError("unit 'furlong' for wind\nis not known", where="a/b.csv row 3", fix="use m/s")
    assert str(err) == "a/b.csv row 3: unit 'furlong' for wind is not known. Fix: use m/s."


def test_atomic_write_leaves_no_partial_file(tmp_path):
    target = tmp_path / "out.json"
    _io.write_json(target, {"b": 1, "a": float("nan")})
    assert target.read_text() == '{\n  "a": null,\n  "b": 1\n}\n'
    assert [p.name for p in tmp_path.iterdir()] == ["out.json"]


def test_parquet_is_byte_stable(tmp_path):
    idx = pd.date_range("2026-07-01", periods=5, freq="s", tz="UTC", name="time")
    df = pd.DataFrame({"t_air_c": [1.0, 2, 3, 4, 5]}, index=idx)
    a = _io.write_parquet(tmp_path / "a.parquet", df, {"k": 1}).read_bytes()
    b = _io.write_parquet(tmp_path / "b.parquet", df, {"k": 1}).read_bytes()
    assert a == b
    assert _io.read_parquet_metadata(tmp_path / "a.parquet") == {"k": 1}
    back = pd.read_parquet(tmp_path / "a.parquet")
    assert str(back.index.tz) == "UTC"


def test_utci_bands_cover_the_line_without_overlap():
    # the ten categories of the UTCI assessment scale (Bröde et al. 2012)
    assert len(UTCI_BANDS) == 10
    for upper, lower in zip(UTCI_BANDS, UTCI_BANDS[1:], strict=False):
        assert upper[0] == lower[1]
    # the published category limits [°C] (Bröde et al. 2012, doi:10.1007/s00484-011-0454-1, table of the
    # assessment scale): 46, 38, 32, 26, 9, 0, -13, -27, -40
    assert [b[0] for b in UTCI_BANDS[:-1]] == [46.0, 38.0, 32.0, 26.0, 9.0, 0.0, -13.0, -27.0, -40.0]
    assert UTCI_BANDS[4][2] == "no thermal stress" and UTCI_BANDS[-1][0] == float("-inf")


def test_cli_help_lists_every_verb(capsys):
    assert main(["--help"]) == 0
    out = capsys.readouterr().out
    for verb in VERBS:
        assert verb in out
    # the usual heat caution and the deferral to local codes / licensed practice (common practice)
    flat = " ".join(out.split())   # click wraps the help text
    assert "Heat caution" in flat and "occupational-health guidance" in flat and "licensed practice" in flat


def test_cli_unknown_verb_is_one_line_exit_2(capsys):
    assert main(["no-such-verb"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("error:") and err.count("\n") == 1


@pytest.mark.parametrize("argv, verb", [(["ingest", "somewhere"], "ingest"),            # a required option left out
                                        (["network", "x.geojson", "--engine", "spark"], "network"),  # bad choice
                                        (["fit", "--no-such-option"], "fit")])
def test_cli_usage_errors_name_the_verb_and_point_to_its_help(capsys, argv, verb):
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1
    assert err.startswith(f"error: walkcomfort {verb}: ") and f"Fix: see `walkcomfort {verb} --help`." in err


def test_an_output_folder_that_cannot_be_made_is_a_one_line_error(tmp_path, capsys):
    # a file where the output folder should be once gave an internal NotADirectoryError (exit 1)
    blocker = tmp_path / "afile"
    blocker.write_text("x")
    session = Path(__file__).resolve().parent / "fixtures" / "sessions" / "walk_ok"
    assert main(["ingest", str(session), "-o", str(blocker / "sub")]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and err.startswith(f"error: {blocker / 'sub'}") and "Not a directory" in err
    assert "Fix: check the path" in err and blocker.read_text() == "x"


def test_verbose_adds_the_traceback_before_the_one_line_error(capsys):
    assert main(["check", "/nonexistent-session-folder"]) == 2
    quiet = capsys.readouterr().err
    assert "Traceback" not in quiet and quiet.count("\n") == 1
    assert main(["--verbose", "check", "/nonexistent-session-folder"]) == 2
    loud = capsys.readouterr().err
    assert loud.startswith("Traceback") and loud.rstrip("\n").splitlines()[-1] == quiet.rstrip("\n")
