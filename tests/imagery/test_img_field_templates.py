"""The field-protocol templates: a session made from them passes `walkcomfort check` cleanly."""

from __future__ import annotations

import math
import shutil
import tomllib

import numpy as np
import pandas as pd
import pytest
from PIL import Image

from walkcomfort.cli import main

MINUTES = 12


def _local(ts: pd.Timestamp, tz: str) -> str:
    return ts.tz_convert(tz).strftime("%Y-%m-%dT%H:%M:%S")


def _build_session(templates, folder):
    """Fill the templates with readings as field devices would write them."""
    folder.mkdir(parents=True)
    shutil.copy(templates / "session.toml", folder / "session.toml")
    m = tomllib.loads((folder / "session.toml").read_text(encoding="utf-8"))
    tz = m["session"]["timezone"]
    sync = {ev["device"]: ev for ev in m["sync"]}
    t_true0 = pd.Timestamp(sync["cam1"]["true_time"]).tz_localize(tz).tz_convert("UTC")
    start = t_true0 - pd.Timedelta(seconds=2)
    n = MINUTES * 60
    times = start + pd.to_timedelta(np.arange(n), unit="s")

    # GPS: 1 Hz, walking 1.3 m/s north-east through a street grid (UTC times, as GPX requires)
    lat0, lon0 = 40.4168, -3.7038
    d = 1.3 * np.arange(n)
    lat = lat0 + d * math.cos(math.radians(45)) / 111_195.0
    lon = lon0 + d * math.sin(math.radians(45)) / (111_195.0 * math.cos(math.radians(lat0)))
    pts = "\n".join(f'      <trkpt lat="{a:.7f}" lon="{o:.7f}"><ele>{650 + 0.01 * i:.2f}</ele>'
                    f'<time>{t.strftime("%Y-%m-%dT%H:%M:%SZ")}</time></trkpt>'
                    for i, (a, o, t) in enumerate(zip(lat, lon, times)))
    (folder / "gps").mkdir()
    (folder / "gps" / "track.gpx").write_text(
        '<?xml version="1.0" encoding="UTF-8"?>\n<gpx version="1.1" creator="logger" '
        'xmlns="http://www.topografix.com/GPX/1/1">\n  <trk><trkseg>\n' + pts + "\n  </trkseg></trk>\n</gpx>\n",
        encoding="utf-8")

    # weather logger: every 2 s, local clock 5 s fast (as the template's sync event says)
    w = m["source"][1]["columns"]
    offset = (pd.Timestamp(sync["logger1"]["device_time"]) - pd.Timestamp(sync["logger1"]["true_time"])).total_seconds()
    wt = times[::2] + pd.Timedelta(seconds=offset)
    rows = [f"{_local(t, tz)},{31 + 0.002 * i:.2f},{38 + 0.01 * (i % 7):.1f},{1.2 + 0.1 * (i % 5):.2f},"
            f"{36 + 0.003 * i:.2f}" for i, t in enumerate(wt)]
    (folder / "logger").mkdir()
    (folder / "logger" / "weather.csv").write_text(
        ",".join([w["time"], w["t_air"], w["rh"], w["wind"], w["t_globe"]]) + "\n" + "\n".join(rows) + "\n",
        encoding="utf-8")

    # sound level meter and light meter: 1 s, local time
    (folder / "slm").mkdir()
    (folder / "slm" / "levels.csv").write_text(
        "Time,LAeq\n" + "\n".join(f"{_local(t, tz)},{58 + 6 * math.sin(i / 40):.1f}" for i, t in enumerate(times)) + "\n",
        encoding="utf-8")
    (folder / "lux").mkdir()
    (folder / "lux" / "light.csv").write_text(
        "Time,Lux\n" + "\n".join(f"{_local(t, tz)},{40000 + 20000 * (i // 60 % 2)}" for i, t in enumerate(times[::5]))
        + "\n", encoding="utf-8")

    # chest camera: a frame every 30 s; the camera clock runs 2 s ahead of the GPS, so the
    # first frame (the photo of the GPS clock) reads true_time + 2 s
    cam = pd.Timestamp(sync["cam1"]["true_time"]) + pd.Timedelta(seconds=2)
    (folder / "camera").mkdir()
    rng = np.random.default_rng(0)
    for k in range(MINUTES * 2 - 1):
        img = np.zeros((48, 64, 3), np.uint8)
        img[:20] = (110, 160, 225)
        img[20:] = (rng.normal(100, 8, (28, 64, 1))).clip(0, 255).astype(np.uint8)
        exif = Image.Exif()
        exif.get_ifd(0x8769)[0x9003] = (cam + pd.Timedelta(seconds=30 * k)).strftime("%Y:%m:%d %H:%M:%S")
        Image.fromarray(img).save(folder / "camera" / f"IMG_{k + 1:04d}.jpg", quality=90, exif=exif.tobytes())

    # the vote sheet: the template's header, and the votes of two prompted stops
    (folder / "votes").mkdir()
    sheet = (templates / "votes.csv").read_text(encoding="utf-8")
    t1, t2 = times[200], times[500]
    sheet += f"{_local(t1, tz)},P01,comfortable,1,,prompted\n{_local(t2, tz)},,uncomfortable,2,in the sun,spontaneous\n"
    (folder / "votes" / "votes.csv").write_text(sheet, encoding="utf-8")
    return folder


@pytest.fixture
def templates(repo_root):
    return repo_root / "field_protocol" / "templates"


def test_templates_exist(templates):
    for name in ("session.toml", "votes.csv", "checklist.md"):
        assert (templates / name).is_file(), name
    header = [ln for ln in (templates / "votes.csv").read_text(encoding="utf-8").splitlines()
              if ln and not ln.startswith("#")]
    assert header == ["time,participant,comfort,tsv,note,kind"]


def test_session_from_templates_passes_check(tmp_path, templates, capsys):
    folder = _build_session(templates, tmp_path / "walk")
    assert main(["check", str(folder)]) == 0
    out = capsys.readouterr().out
    assert "check passed" in out and "DOES NOT RECONCILE" not in out


def test_session_from_templates_has_nothing_to_complain_about(tmp_path, templates):
    from walkcomfort.session.timeline import build_timeline

    tl = build_timeline(_build_session(templates, tmp_path / "walk"))
    assert len(tl.quarantine) == 0, tl.quarantine[["source", "reason"]].value_counts().to_dict()
    assert tl.qa["warnings"] == []
    assert tl.qa["summary"]["reconciles"]
    # the two sync events moved the camera and the logger onto the GPS clock exactly
    assert tl.qa["clocks"]["cam1"]["offset_s"] == pytest.approx(2.0)
    assert tl.qa["clocks"]["logger1"]["offset_s"] == pytest.approx(5.0)
    assert tl.data["vote_comfort"].notna().sum() == 2
    assert tl.data["frame_path"].notna().sum() == MINUTES * 2 - 1
