"""Manifest validation messages and the check / ingest verbs through the real entry point."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pandas as pd
import pytest

from walkcomfort.cli import main
from walkcomfort.errors import InputError
from walkcomfort.session.manifest import SCHEMA, load_manifest, parse_manifest

SESSIONS = Path(__file__).resolve().parents[1] / "fixtures" / "sessions"
WALK_OK = SESSIONS / "walk_ok"


def test_manifest_fields():
    spec = load_manifest(WALK_OK)
    assert spec.id == "fixture-p01-am" and spec.participant == "P01" and spec.timezone == "Europe/Madrid"
    assert spec.attributes == {"age_band": "25-34", "clo": 0.5, "acclimatised": True, "activity": "walking"}
    assert spec.sensors["globe_diameter_m"] == 0.038 and spec.sensors["tau_globe_s"] == 60.0
    assert spec.reference_device == "gps1"
    assert [s.kind for s in spec.sources] == ["gps", "weather", "noise", "light", "frames", "votes"]
    ev = spec.sync[0]
    assert ev.time_a == pd.Timestamp("2026-07-14T08:00:07Z") and ev.time_b == pd.Timestamp("2026-07-14T08:00:00Z")
    w = spec.sources_of("weather")[0]
    assert w.column("t_air") == "Temp_F" and w.units["wind"] == "km/h"


def _base():
    return {"schema": SCHEMA, "session": {"id": "a", "participant": "P", "timezone": "UTC"},
            "source": [{"kind": "gps", "path": "gps/track.gpx"}]}


@pytest.mark.parametrize("edit, where, words", [
    (lambda m: m.pop("session"), "session.toml", "missing [session]"),
    (lambda m: m["session"].pop("timezone"), "[session]", "missing key 'timezone'"),
    (lambda m: m["session"].update(id="a b"), "[session] id", "letters, digits"),
    (lambda m: m["session"].update(start="10:00"), "[session] start", "not an ISO 8601"),
    (lambda m: m.update(schema="other/2"), "schema", "this version reads"),
    (lambda m: m.update(sensors={"globe_diameter_m": 15}), "[sensors] globe_diameter_m", "plausible range"),
    (lambda m: m.update(sensors={"tau_air_s": "20"}), "[sensors] tau_air_s", "expected a number"),
    (lambda m: m.update(participant={"acclimatised": "yes"}), "[participant] acclimatised", "true or false"),
    (lambda m: m["source"][0].update(kind="gpss"), "kind", "use 'gps'"),
    (lambda m: m["source"][0].update(format="fit"), "format", "not readable"),
    (lambda m: m["source"].append({"kind": "gps", "path": "gps/track.gpx"}), "#2 (gps)", "a second 'gps'"),
    (lambda m: m.update(source=[{"kind": "votes", "path": "votes.csv"}]), "[[source]]", "no gps source"),
    (lambda m: m["source"][0].update(columns={"speed": "v"}), "columns.speed", "not a field"),
    (lambda m: m.update(devices={"a": {"reference": True}, "b": {"reference": True}}), "[devices]", "exactly one"),
    (lambda m: m.update(sync=[{"device": "nobody", "device_time": "2026-07-14T10:00:00",
                               "true_time": "2026-07-14T10:00:00"}]), "[[sync]] #1 device", "not used by any source"),
    (lambda m: m["source"][0].update(path="C:\\data\\track.gpx"), "path", "absolute"),
])
def test_manifest_errors_name_the_key(edit, where, words):
    m = _base()
    edit(m)
    with pytest.raises(InputError) as info:
        parse_manifest(m, WALK_OK)
    msg = str(info.value)
    assert where in msg and words in msg and "Fix:" in msg and "\n" not in msg, msg


def test_ambiguous_manifest_time(tmp_path):
    m = _base()
    m["session"].update(timezone="Europe/Madrid", start="2026-10-25T02:30:00")
    with pytest.raises(InputError, match="ambiguous"):
        parse_manifest(m, WALK_OK)


# --- CLI ---------------------------------------------------------------------------------------------
def test_check_writes_nothing(tmp_path, capsys):
    d = tmp_path / "w"
    shutil.copytree(WALK_OK, d)
    before = sorted(p.relative_to(tmp_path) for p in tmp_path.rglob("*"))
    assert main(["check", str(d)]) == 0
    out = capsys.readouterr().out
    assert "gps      600 read = 599 used + 1 quarantined (ok)" in out
    assert "nothing was written" in out
    assert sorted(p.relative_to(tmp_path) for p in tmp_path.rglob("*")) == before


def test_ingest_writes_outputs_and_is_byte_stable(tmp_path, capsys):
    out = tmp_path / "out"
    assert main(["ingest", str(WALK_OK), "-o", str(out), "--csv"]) == 0
    folder = out / "fixture-p01-am"
    names = sorted(p.name for p in folder.iterdir())
    assert names == ["qa.json", "quarantine.csv", "timeline.csv", "timeline.parquet"]
    first = {n: (folder / n).read_bytes() for n in names}
    assert main(["ingest", str(WALK_OK), "-o", str(out), "--csv"]) == 0
    assert first == {n: (folder / n).read_bytes() for n in names}
    qa = json.loads(first["qa.json"])
    q = pd.read_csv(folder / "quarantine.csv")
    assert len(q) == qa["summary"]["rows_quarantined"]
    assert list(q.columns) == ["source", "file", "row", "reason", "raw"]


def test_ingest_many_sessions_and_campaign(tmp_path, capsys):
    root = tmp_path / "sessions"
    for i in (1, 2):
        d = root / f"s{i}"
        shutil.copytree(WALK_OK, d)
        p = d / "session.toml"
        p.write_text(p.read_text().replace('id = "fixture-p01-am"', f'id = "walk-{i}"'))
    out = tmp_path / "out"
    assert main(["ingest", str(root), "-o", str(out), "--campaign"]) == 0
    assert (out / "walk-1" / "timeline.parquet").is_file() and (out / "walk-2" / "qa.json").is_file()
    camp = pd.read_parquet(out / "campaign.parquet")
    assert set(camp["walk_id"]) == {"walk-1", "walk-2"} and "clo" in camp.columns
    assert "campaign: 2 walks" in capsys.readouterr().out


def test_ingest_same_walk_id_twice_is_an_error(tmp_path, capsys):
    for i in (1, 2):
        shutil.copytree(WALK_OK, tmp_path / "in" / f"s{i}")
    assert main(["ingest", str(tmp_path / "in"), "-o", str(tmp_path / "out")]) == 2
    assert "used by two sessions" in capsys.readouterr().err


def test_keep_going_reports_each_failure(tmp_path, capsys):
    shutil.copytree(WALK_OK, tmp_path / "in" / "a")
    shutil.copytree(SESSIONS / "broken" / "unknown_unit", tmp_path / "in" / "b")
    assert main(["ingest", str(tmp_path / "in"), "-o", str(tmp_path / "out"), "--keep-going"]) == 2
    err = capsys.readouterr().err
    assert "furlong" in err and "1 of 2 sessions failed" in err
    assert (tmp_path / "out" / "fixture-p01-am" / "qa.json").is_file()


def test_cli_error_messages_and_exit_codes(tmp_path, capsys):
    assert main(["check", str(tmp_path / "nowhere")]) == 2
    err = capsys.readouterr().err
    assert err.startswith("error: ") and "does not exist" in err and err.count("\n") == 1
    assert main(["check", str(tmp_path)]) == 2
    assert "no session.toml" in capsys.readouterr().err
    assert main(["ingest", str(WALK_OK)]) == 2          # -o is required
    assert "--out" in capsys.readouterr().err
    assert main(["check", "--step", "0", str(WALK_OK)]) == 2
    assert "step_s" in capsys.readouterr().err


def test_verbose_shows_traceback(capsys):
    assert main(["--verbose", "check", str(SESSIONS / "broken" / "unknown_unit")]) == 2
    err = capsys.readouterr().err
    assert "Traceback" in err and err.strip().splitlines()[-1].startswith("error: ")
