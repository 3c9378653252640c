"""Raw device files of a simulated session, written the way each (invented) device writes them.

Each device has its own clock, sampling interval, units and export format, declared in
the session manifest exactly as a field team would declare a real device:

=========  ==========================  ========  ====================================  ==================
device     file                        every     units / format                        clock
=========  ==========================  ========  ====================================  ==================
gps1       ``gps/track.gpx``           2 s       GPX 1.1, WGS84, elevation [m]          UTC (``Z``), reference
logger1    ``logger/weather.csv``      2 s       °F, %, km/h, °F (globe), hPa           local, ``dd/mm/YYYY``
slm1       ``slm/levels.csv``          1 s       LAeq,1s [dB(A)]                        local, ISO with a space
lux1       ``lux/light.csv``           2 s       illuminance [lx]                       epoch seconds (UTC)
cam1       ``camera/IMG_*.jpg``        30 s      160×120 JPEG, EXIF DateTimeOriginal    local, no offset tag
phone1     ``votes/votes.csv``         events    app labels good/ok/bad, −3…+3          ISO 8601 with offset
=========  ==========================  ========  ====================================  ==================

The planted imperfections (a clock offset, a gap, out-of-range rows, duplicated rows)
are applied here and listed by the caller in ``planted.json``.
"""

from __future__ import annotations

import io

import numpy as np
import pandas as pd

from walkcomfort.demo import town as T

GPS_EVERY_S = 2
LOGGER_EVERY_S = 2
LIGHT_EVERY_S = 2
FRAME_EVERY_S = 30
FRAME_SIZE = (160, 120)
APP_LABELS = {"comfortable": "good", "neutral": "ok", "uncomfortable": "bad"}


def c_to_f(t_c):
    return np.asarray(t_c, float) * 9.0 / 5.0 + 32.0


# --- GPS ---------------------------------------------------------------------------------

def gps_fixes(truth: pd.DataFrame, rng, jump: dict | None = None):
    """GPS fixes every 2 s: correlated position noise (urban canyon), noisy elevation, optional jump.

    Position error is an AR(1) process with 2.5 m marginal standard deviation per axis,
    elevation error 2 m around a 3 m bias (common practice magnitudes for consumer GNSS).
    ``jump`` = {"at": fix index, "n": fixes, "dx_m", "dy_m"} shifts a few fixes (multipath).
    """
    idx = np.arange(0, len(truth), GPS_EVERY_S)
    sub = truth.iloc[idx]
    n = len(sub)

    def ar(phi, sd):
        e = rng.normal(0.0, sd * np.sqrt(1 - phi ** 2), n)
        out = np.empty(n)
        out[0] = rng.normal(0.0, sd)
        for i in range(1, n):
            out[i] = phi * out[i - 1] + e[i]
        return out

    ex, ey = ar(0.9, 2.5), ar(0.9, 2.5)
    ez = 3.0 + ar(0.97, 2.0)
    x = sub["x_m"].to_numpy() + ex
    y = sub["y_m"].to_numpy() + ey
    if jump:
        sl = slice(jump["at"], jump["at"] + jump["n"])
        x[sl] += jump["dx_m"]
        y[sl] += jump["dy_m"]
    lon, lat = T.to_lonlat(x, y)
    return pd.DataFrame({"lat": lat, "lon": lon, "ele": sub["elev_m"].to_numpy() + ez}, index=sub.index)


def gpx_text(fixes: pd.DataFrame, name: str) -> str:
    """GPX 1.1 track as a consumer logger writes it (one point per line, UTC times)."""
    lines = ['<?xml version="1.0" encoding="UTF-8"?>',
             '<gpx version="1.1" creator="walkcomfort demo GPS logger (invented)" '
             'xmlns="http://www.topografix.com/GPX/1/1">',
             f"<metadata><time>{fixes.index[0].strftime('%Y-%m-%dT%H:%M:%SZ')}</time></metadata>",
             f"<trk><name>{name}</name><trkseg>"]
    for t, lat, lon, ele in zip(fixes.index, fixes["lat"], fixes["lon"], fixes["ele"], strict=False):
        lines.append(f'<trkpt lat="{lat:.6f}" lon="{lon:.6f}"><ele>{ele:.1f}</ele>'
                     f"<time>{t.strftime('%Y-%m-%dT%H:%M:%SZ')}</time></trkpt>")
    lines.append("</trkseg></trk></gpx>")
    return "\n".join(lines) + "\n"


# --- weather logger ------------------------------------------------------------------------

def weather_rows(truth: pd.DataFrame, rng, tz: str, clock_offset_s: float = 0.0,
                 out_of_range: tuple = ()):
    """Logger rows every 2 s from the lagged sensor values, in °F and km/h, local device time.

    ``out_of_range`` lists row numbers (0-based data rows) whose globe reading is a fault
    spike (a loose globe probe reads ~110 °C), planted for QA.
    Returns (text, list of true sample times, list of written device times).
    """
    start = 8  # the logger was switched on a few seconds after the GPS
    idx = np.arange(start, len(truth) - 6, LOGGER_EVERY_S)
    sub = truth.iloc[idx]
    n = len(sub)
    t_air = c_to_f(sub["t_air_sensor_c"].to_numpy() + rng.normal(0, 0.05, n))
    rh = sub["rh_pct"].to_numpy() + rng.normal(0, 0.4, n)
    wind = sub["wind_ms"].to_numpy() * 3.6 * np.exp(rng.normal(0, 0.08, n))
    globe = c_to_f(sub["t_globe_sensor_c"].to_numpy() + rng.normal(0, 0.05, n))
    press = sub["pressure_hpa"].to_numpy() + rng.normal(0, 0.1, n)
    device_times = (sub.index + pd.Timedelta(seconds=clock_offset_s)).tz_convert(tz)
    lines = ["DateTime,Temp_F,RH_pct,Wind_kmh,Globe_F,Press_hPa"]
    for i in range(n):
        g = globe[i]
        if i in out_of_range:
            g = float(np.round(229.0 + 4.0 * rng.random(), 1))
        lines.append(f"{device_times[i].strftime('%d/%m/%Y %H:%M:%S')},{t_air[i]:.1f},{rh[i]:.1f},"
                     f"{wind[i]:.1f},{g:.1f},{press[i]:.1f}")
    return "\n".join(lines) + "\n", list(sub.index), list(device_times)


# --- sound level meter ------------------------------------------------------------------------

def noise_rows(truth: pd.DataFrame, rng, tz: str, gap: tuple | None = None):
    """One LAeq,1s row per second from 5 s after the GPS start; ``gap`` = (first row, n rows) left out."""
    idx = np.arange(5, len(truth) - 3)
    sub = truth.iloc[idx]
    level = sub["laeq_db"].to_numpy() + rng.normal(0, 0.3, len(sub))
    times = sub.index.tz_convert(tz)
    lines = ["Time,LAeq_1s"]
    skipped = []
    for i in range(len(sub)):
        if gap and gap[0] <= i < gap[0] + gap[1]:
            skipped.append(sub.index[i])
            continue
        lines.append(f"{times[i].strftime('%Y-%m-%d %H:%M:%S')},{level[i]:.1f}")
    return "\n".join(lines) + "\n", skipped


# --- light meter ---------------------------------------------------------------------------------

def light_rows(truth: pd.DataFrame, rng, out_of_range: tuple = (), duplicates: tuple = ()):
    """Illuminance rows every 2 s, epoch seconds (UTC). Planted: a negative reading, repeated lines."""
    idx = np.arange(3, len(truth) - 4, LIGHT_EVERY_S)
    sub = truth.iloc[idx]
    lux = sub["illum_lux"].to_numpy() * np.exp(rng.normal(0, 0.02, len(sub)))
    epoch = (sub.index - pd.Timestamp("1970-01-01", tz="UTC")) // pd.Timedelta(seconds=1)
    lines = ["epoch,lux"]
    for i in range(len(sub)):
        value = int(round(lux[i]))
        if i in out_of_range:
            value = -int(rng.integers(30, 60))   # a zeroing fault after the meter was covered
        line = f"{int(epoch[i])},{value}"
        lines.append(line)
        if i in duplicates:
            lines.append(line)   # the logger's buffer flushed the same line twice
    return "\n".join(lines) + "\n"


# --- camera --------------------------------------------------------------------------------------

def render_frame(svf: float, sky_crowns: float, sunlit: bool, people_n: int, rng) -> tuple[bytes, dict]:
    """A small chest-camera frame whose sky and greenery shares follow the surroundings.

    The upper half is the view above eye level: sky where the sky view factor says there is
    sky, tree crowns where the crown-blocked share says, building facades for the rest; the
    lower half is paving (bright in sun, dark in shade). Returns (PIL image, pixel truth:
    sky, green and people shares as drawn).
    """
    from PIL import Image, ImageDraw

    w, h = FRAME_SIZE
    horizon = h // 2
    green_up = float(np.clip(1.0 - sky_crowns, 0.0, 1.0 - svf))
    build_up = float(np.clip(1.0 - svf - green_up, 0.0, 1.0))
    img = Image.new("RGB", (w, h))
    d = ImageDraw.Draw(img)
    # sky: a vertical gradient of clear blue
    for r in range(horizon):
        f = r / horizon
        d.line([(0, r), (w, r)], fill=(int(95 + 70 * f), int(150 + 55 * f), int(225 + 20 * f)))
    label = np.zeros((h, w), np.uint8)  # 1 sky, 2 green, 3 building, 4 ground, 5 person
    label[:horizon] = 1
    label[horizon:] = 4
    # facades on both sides, their width set by the building share of the upper view
    wall = int(round(build_up * w / 2))
    for x0, x1 in ((0, wall), (w - wall, w)):
        if x1 > x0:
            tone = (int(rng.integers(175, 215)), int(rng.integers(150, 185)), int(rng.integers(120, 150)))
            d.rectangle([x0, 0, x1 - 1, horizon + 12], fill=tone)
            label[: horizon + 13, x0:x1] = 3
            for wy in range(6, horizon, 14):
                for wx in range(x0 + 3, x1 - 4, 10):
                    d.rectangle([wx, wy, wx + 4, wy + 6], fill=(70, 60, 55))
    # crowns: a band hanging from the top between the facades, with a ragged lower edge
    inner = max(w - 2 * wall, 1)
    band = green_up * w * horizon / inner
    if band > 0.5:
        # separate crowns: the depth swings around its mean so sky shows between them
        period = float(rng.uniform(28.0, 44.0))
        phase = float(rng.uniform(0.0, 2 * np.pi))
        swing = min(0.9, (horizon - band) / max(band, 1e-6)) if band < horizon else 0.0
        for col in range(wall, w - wall):
            depth = int(np.clip(band * (1 + swing * np.sin(2 * np.pi * col / period + phase))
                                + rng.normal(0, 2.0), 0, horizon))
            if depth > 0:
                g = int(rng.integers(95, 135))
                d.line([(col, 0), (col, depth - 1)], fill=(int(g * 0.45), g, int(g * 0.3)))
                label[:depth, col] = 2
    # paving and its light
    pave = (172, 168, 160) if sunlit else (98, 97, 94)
    d.rectangle([0, horizon + 13 if wall else horizon, w - 1, h - 1], fill=pave)
    if wall:
        d.rectangle([wall, horizon, w - wall - 1, horizon + 12], fill=pave)
    # paving joints: the texture a real pavement shows (and a focus check looks for)
    joint = tuple(int(c * 0.8) for c in pave)
    for r in range(horizon + 16, h, 9):
        d.line([(0, r), (w, r)], fill=joint)
    for cx in range(int(rng.integers(0, 14)), w, 14):
        d.line([(cx, horizon + 16), (cx + (cx - w // 2) // 3, h)], fill=joint)
    # other pedestrians: standing silhouettes (head, torso, arms, legs) spread over the view,
    # each in its own slot so they do not overlap
    slots = rng.permutation(max(1, (w - 2 * wall - 16) // 18))[:people_n]
    for slot in sorted(int(v) for v in slots):
        px = wall + 12 + 18 * slot
        ph = int(rng.integers(28, 41))
        top = horizon + 8 - ph // 2
        _person(d, px, top, ph, rng)
        label[max(top, 0): top + ph + 1, max(px - ph // 4, 0): px + ph // 4 + 1] = 5
    people_n = len(slots)
    arr = np.asarray(img, np.int16) + rng.normal(0, 4.0, (h, w, 3)).astype(np.int16)
    img = Image.fromarray(np.clip(arr, 0, 255).astype(np.uint8))
    truth = {"sky_frac": float((label == 1).mean()), "green_frac": float((label == 2).mean()),
             "people_n": int(people_n)}
    return img, truth


def _person(d, cx: int, top: int, height: int, rng) -> None:
    """A standing pedestrian seen from a few metres: head, torso, arms and two legs."""
    head = height * 0.13
    half = height * 0.13
    arm = height * 0.06
    coat = tuple(int(v) for v in rng.integers(25, 90, 3))
    trousers = tuple(int(v) for v in rng.integers(20, 70, 3))
    d.ellipse([cx - head / 2, top, cx + head / 2, top + head], fill=(170, 125, 95))
    d.rectangle([cx - half, top + head, cx + half, top + height * 0.55], fill=coat)
    d.rectangle([cx - half - arm, top + head + 1, cx - half, top + height * 0.5], fill=coat)
    d.rectangle([cx + half, top + head + 1, cx + half + arm, top + height * 0.5], fill=coat)
    d.rectangle([cx - half, top + height * 0.55, cx - 1, top + height], fill=trousers)
    d.rectangle([cx + 1, top + height * 0.55, cx + half, top + height], fill=trousers)


def jpeg_bytes(img, local_time: pd.Timestamp) -> bytes:
    """JPEG with EXIF DateTime and DateTimeOriginal in the camera's local clock (no offset tag)."""
    from PIL import Image

    stamp = local_time.strftime("%Y:%m:%d %H:%M:%S")
    exif = Image.Exif()
    exif[0x010F] = "walkcomfort-demo"        # Make
    exif[0x0110] = "chest camera (invented)"  # Model
    exif[0x0132] = stamp                      # DateTime
    exif.get_ifd(0x8769)[0x9003] = stamp      # DateTimeOriginal
    buf = io.BytesIO()
    img.save(buf, "JPEG", quality=60, exif=exif.tobytes(), optimize=False, progressive=False)
    return buf.getvalue()


# --- votes -----------------------------------------------------------------------------------------

def votes_text(votes: list[dict], tz: str) -> str:
    """The vote app's CSV export (ISO 8601 local time with offset; app labels good/ok/bad)."""
    import csv

    buf = io.StringIO()
    wr = csv.writer(buf, lineterminator="\n")
    wr.writerow(["timestamp", "walker", "comfort", "sensation", "note", "type"])
    for v in votes:
        t = v["time"].tz_convert(tz).isoformat()
        wr.writerow([t, v["participant"], APP_LABELS[v["comfort"]], int(v["tsv"]), v["note"], v["kind"]])
    return buf.getvalue()
