"""Synthetic frames with known sky and greenery shares (built here, so their truth is exact),
and sessions built from the field-protocol templates."""

from __future__ import annotations

import math
import shutil
import tomllib

import numpy as np
import pandas as pd
import pytest
from PIL import Image


def street_frame(seed: int = 0, sky: str = "clear", h: int = 480, w: int = 640):
    """A street view: sky on top, a textured façade at the right, a tree at the left, a road.

    Returns ``(rgb, truth)`` where ``truth`` holds the exact sky and vegetation shares
    of the frame as drawn.
    """
    rng = np.random.default_rng(seed)
    img = np.zeros((h, w, 3), np.float32)
    sky_rows = int(0.30 * h)            # sky: rows [0, sky_rows) except where the façade rises
    # road and pavement below the horizon: dark grey with fine texture
    img[:] = np.array([92, 91, 94], np.float32) + rng.normal(0, 6, (h, w, 1))
    # sky, a smooth vertical gradient (blue above, paler at the horizon) or an overcast white
    t = np.linspace(0, 1, sky_rows, dtype=np.float32)[:, None, None]
    if sky == "clear":
        top, bottom = np.array([80, 130, 215], np.float32), np.array([150, 185, 235], np.float32)
    else:
        top, bottom = np.array([218, 222, 228], np.float32), np.array([232, 234, 238], np.float32)
    img[:sky_rows] = top + (bottom - top) * t
    # façade on the right: rises to row 60, textured warm grey with a window grid
    fx0, ftop = int(0.70 * w), int(0.125 * h)
    img[ftop:int(0.80 * h), fx0:] = np.array([150, 140, 128], np.float32) + rng.normal(0, 10, (int(0.80 * h) - ftop, w - fx0, 1))
    for y in range(ftop + 15, int(0.78 * h), 45):
        for x in range(fx0 + 12, w - 20, 40):
            img[y:y + 25, x:x + 18] = (40, 45, 55)
    # a tree at the left: a textured green crown reaching into the sky, on a trunk
    yy, xx = np.mgrid[0:h, 0:w]
    crown = ((xx - 0.22 * w) / (0.16 * w)) ** 2 + ((yy - 0.38 * h) / (0.20 * h)) ** 2 <= 1.0
    leaves = np.array([55, 115, 40], np.float32) + rng.normal(0, 14, (h, w, 3))
    img[crown] = leaves[crown]
    # a green hedge along the pavement
    hedge = (yy >= int(0.62 * h)) & (yy < int(0.70 * h)) & (xx >= int(0.40 * w)) & (xx < int(0.68 * w))
    img[hedge] = (np.array([70, 125, 55], np.float32) + rng.normal(0, 12, (h, w, 3)))[hedge]
    rgb = np.clip(np.round(img), 0, 255).astype(np.uint8)

    sky_mask = np.zeros((h, w), bool)
    sky_mask[:sky_rows] = True
    sky_mask[ftop:, fx0:] = False
    sky_mask[crown] = False
    green = crown | hedge
    return rgb, {"sky_frac": float(sky_mask.mean()), "green_frac": float(green.mean())}


@pytest.fixture
def street():
    return street_frame()


@pytest.fixture
def overcast_street():
    return street_frame(seed=1, sky="overcast")


def person_frame(copies: int = 1, scale: float = 0.4):
    """The scikit-image 'camera' photograph (a standing man with a tripod camera) shrunk to
    walking-frame scale and pasted ``copies`` times into a 640×480 frame (a person about
    200 px tall: the size a pedestrian 6–8 m from a chest camera has)."""
    import cv2
    from skimage import data

    man = data.camera()
    small = cv2.resize(man, None, fx=scale, fy=scale, interpolation=cv2.INTER_AREA)
    canvas = np.full((480, 640), int(np.median(man)), np.uint8)
    sh, sw = small.shape
    xs = [200] if copies == 1 else list(np.linspace(10, 640 - sw - 10, copies).astype(int))
    for x in xs:
        canvas[100:100 + sh, x:x + sw] = small
    return np.stack([canvas] * 3, axis=-1), xs, small.shape


@pytest.fixture
def make_street():
    return street_frame


@pytest.fixture
def make_person_frame():
    return person_frame


MINUTES = 12


def _local(ts: pd.Timestamp, tz: str) -> str:
    return ts.tz_convert(tz).strftime("%Y-%m-%dT%H:%M:%S")


def build_template_session(templates, folder, gps_csv: bool = False):
    """Fill the field-protocol templates with readings as field devices would write them.

    With ``gps_csv`` the track is written as a CSV ``time, lat, lon, elev`` instead of GPX.
    """
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
                    for i, (a, o, t) in enumerate(zip(lat, lon, times, strict=False)))
    (folder / "gps").mkdir()
    if gps_csv:
        text = (folder / "session.toml").read_text(encoding="utf-8")
        text = text.replace('path = "gps/track.gpx"', 'path = "gps/track.csv"').replace('format = "gpx"', 'format = "csv"')
        (folder / "session.toml").write_text(text, encoding="utf-8")
        (folder / "gps" / "track.csv").write_text(
            "# exported by the logger, serial 0042\ntime,lat,lon,elev\n" + "\n".join(
                f"{t.strftime('%Y-%m-%dT%H:%M:%SZ')},{a:.7f},{o:.7f},{650 + 0.01 * i:.2f}"
                for i, (a, o, t) in enumerate(zip(lat, lon, times, strict=False))) + "\n", encoding="utf-8")
    else:
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


@pytest.fixture
def make_template_session(templates):
    return lambda folder, **kw: build_template_session(templates, folder, **kw)
