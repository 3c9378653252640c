"""Write the whole invented scenario folder (``demo_walks/``) from a seed, byte for byte.

``generate_demo(out_dir, seed)`` writes the town (scene, street network, planned routes,
shade schemes), one session folder per simulated walk with its raw device files and
``session.toml``, the truth behind them (``truth/``), the list of planted imperfections
(``planted.json``), ``provenance.json`` with the digest of every file, and the folder's
README. Everything goes through :mod:`walkcomfort._io` (atomic writes); the same seed
gives the same bytes.
"""

from __future__ import annotations

import shutil
from pathlib import Path

import numpy as np
import pandas as pd

from walkcomfort import _io
from walkcomfort.demo import devices as D
from walkcomfort.demo import latent, readme
from walkcomfort.demo import simulator as S
from walkcomfort.demo import town as T

SITE_LABEL = f"{T.TOWN_NAME} (invented demo town)"
MARKER = "planted.json"

# What is planted where (session id -> imperfection). Everything not listed is clean.
CLOCK_OFFSET = {"session": "sv-p03-2", "device": "logger1", "source": "weather", "offset_s": 47.0}
GAP = {"session": "sv-p05-1", "source": "noise", "first_row": 600, "rows": 150}
WEATHER_OUT_OF_RANGE = {"session": "sv-p02-2", "source": "weather", "field": "t_globe", "rows": (220, 415)}
LIGHT_OUT_OF_RANGE = {"session": "sv-p04-1", "source": "light", "field": "illum", "rows": (300,)}
DUPLICATES = {"session": "sv-p06-1", "source": "light", "rows": (120, 121, 500)}
GPS_JUMPS = {"sv-p01-2": {"at": 200, "n": 2, "dx_m": 55.0, "dy_m": -48.0},
             "sv-p04-2": {"at": 450, "n": 2, "dx_m": -62.0, "dy_m": 30.0},
             "sv-p06-2": {"at": 300, "n": 3, "dx_m": 40.0, "dy_m": 66.0}}


def _toml_str(v: str) -> str:
    return '"' + v.replace("\\", "\\\\").replace('"', '\\"') + '"'


def manifest_text(plan: S.SessionPlan, sync: list[tuple[str, str]] | None = None) -> str:
    """The session's ``session.toml`` (schema walkcomfort-session/1, DEVELOPERS.md)."""
    w = plan.walker
    lines = [
        "# Invented demo session: simulated by walkcomfort.demo for the invented town",
        f"# {T.TOWN_NAME}. Not a real walk, not real people, not real measurements.",
        'schema = "walkcomfort-session/1"',
        "",
        "[session]",
        f"id = {_toml_str(plan.id)}",
        f"participant = {_toml_str(w.id)}",
        f"timezone = {_toml_str(T.TIMEZONE)}",
        f"site = {_toml_str(SITE_LABEL)}",
        "",
        "[participant]",
        f"age_band = {_toml_str(w.age_band)}",
        f"clo = {w.clo}",
        f"acclimatised = {'true' if w.acclimatised else 'false'}",
        'activity = "walking"',
        "",
        "[sensors]",
        f"wind_height_m = {S.WIND_HEIGHT_M}",
        f"globe_height_m = {S.BODY_HEIGHT_M}",
        f"globe_diameter_m = {S.GLOBE_DIAMETER_M}",
        f"globe_emissivity = {S.GLOBE_EMISSIVITY}",
        f"tau_air_s = {S.TAU_AIR_S}",
        f"tau_globe_s = {S.TAU_GLOBE_S}",
        f"camera_hfov_deg = {S.CAMERA_HFOV_DEG}",
        "",
        "[devices.gps1]",
        "reference = true",
        "",
    ]
    for dev in ("logger1", "slm1", "lux1", "cam1", "phone1"):
        lines += [f"[devices.{dev}]", "reference = false", ""]
    for device_time, true_time in sync or []:
        lines += ["[[sync]]", f"device = {_toml_str(CLOCK_OFFSET['device'])}",
                  f"device_time = {_toml_str(device_time)}", f"true_time = {_toml_str(true_time)}",
                  'note = "logger display photographed beside the GPS clock"', ""]
    lines += [
        "[[source]]", 'kind = "gps"', 'path = "gps/track.gpx"', 'device = "gps1"', 'format = "gpx"', "",
        "[[source]]", 'kind = "weather"', 'path = "logger/weather.csv"', 'device = "logger1"',
        'time_zone = "local"', 'time_format = "%d/%m/%Y %H:%M:%S"',
        "[source.columns]", 'time = "DateTime"', 't_air = "Temp_F"', 'rh = "RH_pct"', 'wind = "Wind_kmh"',
        't_globe = "Globe_F"', 'pressure = "Press_hPa"',
        "[source.units]", 't_air = "degF"', 'rh = "%"', 'wind = "km/h"', 't_globe = "degF"', 'pressure = "hPa"', "",
        "[[source]]", 'kind = "noise"', 'path = "slm/levels.csv"', 'device = "slm1"', 'time_zone = "local"',
        "[source.columns]", 'time = "Time"', 'laeq = "LAeq_1s"', "[source.units]", 'laeq = "dB(A)"', "",
        "[[source]]", 'kind = "light"', 'path = "lux/light.csv"', 'device = "lux1"', 'time_zone = "UTC"',
        'time_format = "epoch_s"', "[source.columns]", 'time = "epoch"', 'illum = "lux"',
        "[source.units]", 'illum = "lux"', "",
        "[[source]]", 'kind = "frames"', 'path = "camera"', 'device = "cam1"', 'format = "folder"',
        'time_from = "exif"', "",
        "[[source]]", 'kind = "votes"', 'path = "votes/votes.csv"', 'device = "phone1"', 'format = "csv"',
        "[source.columns]", 'time = "timestamp"', 'participant = "walker"', 'comfort = "comfort"',
        'tsv = "sensation"', 'note = "note"', 'kind = "type"',
        "[source.comfort_labels]", 'good = "comfortable"', 'ok = "neutral"', 'bad = "uncomfortable"', "",
    ]
    return "\n".join(lines)


def _fmt_csv(df: pd.DataFrame, decimals: int = 3) -> str:
    return df.to_csv(index=False, lineterminator="\n", float_format=f"%.{decimals}f")


def write_session(root: Path, town: T.Town, plan: S.SessionPlan, seed: int, context) -> dict:
    """Simulate one walk and write its folder; return what the caller records (truth, planted)."""
    rng = S.session_rng(seed, plan.number)
    truth = S.simulate_truth(town, plan, rng, context)
    votes = S.draw_votes(truth, plan, rng)
    folder = root / "sessions" / plan.id
    tz = T.TIMEZONE
    planted = []

    jump = GPS_JUMPS.get(plan.id)
    fixes = D.gps_fixes(truth, rng, jump)
    _io.atomic_write_text(folder / "gps" / "track.gpx", D.gpx_text(fixes, f"{plan.id} ({SITE_LABEL})"))
    if jump:
        pts = list(range(jump["at"], jump["at"] + jump["n"]))
        planted.append({"session": plan.id, "kind": "gps_jump", "source": "gps", "file": "gps/track.gpx",
                        "points": [i + 1 for i in pts], "times": [fixes.index[i].isoformat() for i in pts],
                        "offset_m": round(float(np.hypot(jump["dx_m"], jump["dy_m"])), 1)})

    offset = CLOCK_OFFSET["offset_s"] if plan.id == CLOCK_OFFSET["session"] else 0.0
    oor = WEATHER_OUT_OF_RANGE["rows"] if plan.id == WEATHER_OUT_OF_RANGE["session"] else ()
    text, true_times, dev_times = D.weather_rows(truth, rng, tz, clock_offset_s=offset, out_of_range=oor)
    _io.atomic_write_text(folder / "logger" / "weather.csv", text)
    sync = None
    if offset:
        picks = (5, len(true_times) - 5)   # photographed at the start and at the end of the walk
        sync = [(dev_times[i].strftime("%Y-%m-%dT%H:%M:%S"),
                 true_times[i].tz_convert(tz).strftime("%Y-%m-%dT%H:%M:%S")) for i in picks]
        planted.append({"session": plan.id, "kind": "clock_offset", "source": "weather",
                        "device": CLOCK_OFFSET["device"], "offset_s": offset, "drift_ppm": 0.0,
                        "sync_events": len(sync)})
    if oor:
        lines = text.splitlines()
        planted.append({"session": plan.id, "kind": "out_of_range", "source": "weather",
                        "file": "logger/weather.csv", "field": WEATHER_OUT_OF_RANGE["field"],
                        "lines": [r + 2 for r in oor], "times": [true_times[r].isoformat() for r in oor],
                        "raw": [lines[r + 1] for r in oor]})

    gap = (GAP["first_row"], GAP["rows"]) if plan.id == GAP["session"] else None
    text, skipped = D.noise_rows(truth, rng, tz, gap=gap)
    _io.atomic_write_text(folder / "slm" / "levels.csv", text)
    if gap:
        planted.append({"session": plan.id, "kind": "gap", "source": "noise", "file": "slm/levels.csv",
                        "after_line": gap[0] + 1, "missing_rows": len(skipped),
                        "first_missing": skipped[0].isoformat(), "last_missing": skipped[-1].isoformat(),
                        "duration_s": len(skipped)})

    l_oor = LIGHT_OUT_OF_RANGE["rows"] if plan.id == LIGHT_OUT_OF_RANGE["session"] else ()
    dups = DUPLICATES["rows"] if plan.id == DUPLICATES["session"] else ()
    text = D.light_rows(truth, rng, out_of_range=l_oor, duplicates=dups)
    _io.atomic_write_text(folder / "lux" / "light.csv", text)
    if l_oor or dups:
        lines = text.splitlines()

        def line_of(row):  # header is line 1; each duplicate before `row` shifts it by one
            return row + 2 + sum(1 for r in dups if r < row)

        if l_oor:
            planted.append({"session": plan.id, "kind": "out_of_range", "source": "light", "file": "lux/light.csv",
                            "field": LIGHT_OUT_OF_RANGE["field"], "lines": [line_of(r) for r in l_oor],
                            "raw": [lines[line_of(r) - 1] for r in l_oor]})
        if dups:
            planted.append({"session": plan.id, "kind": "duplicate", "source": "light", "file": "lux/light.csv",
                            "lines": [line_of(r) + 1 for r in dups],
                            "raw": [lines[line_of(r)] for r in dups]})

    # camera frames
    frames = []
    for k in range(20, len(truth) - 5, D.FRAME_EVERY_S):
        row = truth.iloc[k]
        local = truth.index[k].tz_convert(tz)
        people = int(rng.poisson(row["crowd_n"]))
        img, px = D.render_frame(float(row["svf"]), float(row["sky_frac_crowns"]),
                                 bool(row["beam_trans_frac"] >= 0.5), people, rng)
        name = f"IMG_{local.strftime('%Y%m%d_%H%M%S')}.jpg"
        _io.atomic_write_bytes(folder / "camera" / name, D.jpeg_bytes(img, local))
        frames.append({"session": plan.id, "file": f"camera/{name}", "time": truth.index[k].isoformat(),
                       "sky_frac": px["sky_frac"], "green_frac": px["green_frac"], "people_n": px["people_n"],
                       "svf": float(row["svf"]), "sunlit": bool(row["beam_trans_frac"] >= 0.5)})

    _io.atomic_write_text(folder / "votes" / "votes.csv", D.votes_text(votes, tz))
    _io.atomic_write_text(folder / "session.toml", manifest_text(plan, sync))

    every5 = truth.iloc[::10]
    cols = ["x_m", "y_m", "dist_m", "elev_m", "slope_pct", "sun_elev_deg", "beam_trans_frac", "svf", "t_air_c",
            "rh_pct", "wind_ms", "tmrt_c", "utci_c", "t_globe_steady_c", "laeq_db", "illum_lux", "crowd_n",
            "heat_load_c", "sun_min", "discomfort"]
    tdf = every5[cols].copy()
    tdf.insert(0, "time", [t.isoformat() for t in every5.index])
    _io.atomic_write_text(root / "truth" / f"{plan.id}.csv", _fmt_csv(tdf))
    in_shade = truth["beam_trans_frac"] < latent.SHADE_BELOW
    summary = {
        "session": plan.id, "participant": plan.walker.id, "walk": plan.walk_id,
        "start_local": plan.start_local.isoformat(), "duration_s": len(truth),
        "length_m": round(float(truth["dist_m"].iloc[-1]), 1), "votes": len(votes), "frames": len(frames),
        "gps_points": len(fixes), "mean_utci_c": round(float(truth["utci_c"].mean()), 2),
        "mean_utci_shade_c": round(float(truth["utci_c"][in_shade].mean()), 2) if in_shade.any() else None,
        "mean_utci_sun_c": round(float(truth["utci_c"][~in_shade].mean()), 2) if (~in_shade).any() else None,
        "shade_share": round(float(in_shade.mean()), 3),
        "sound_events": len(truth.attrs["sound_events"]),
    }
    vt = [{"session": plan.id, "time": v["time"].isoformat(), "participant": v["participant"], "kind": v["kind"],
           "comfort": v["comfort"], "tsv": v["tsv"], "latent": v["latent"], "latent_noisy": v["latent_noisy"]}
          for v in votes]
    return {"planted": planted, "summary": summary, "frames": frames, "votes": vt}


DESIGN_DAY = S.DESIGN_DAY


def design_day_csv(day: str = DESIGN_DAY) -> str:
    """The invented weather course of one day as a logger series (every 10 min, 06:00–22:00 local).

    Same invented course the walks were simulated under, without the random part: a
    logger CSV with a ``time`` column in ISO 8601 with offset and canonical columns (wind at 1.1 m).
    """
    local = pd.date_range(f"{day} 06:00", f"{day} 22:00", freq="10min", tz=T.TIMEZONE)
    hour = (local.hour + local.minute / 60.0).to_numpy()
    t = S.diurnal_t_air_c(hour, S.DAY_OFFSET_K.get(day, 0.0))
    td = 16.0 + 1.5 * np.exp(-((hour - 17.0) / 3.0) ** 2)
    rh = 100.0 * np.exp(17.62 * td / (243.12 + td)) / np.exp(17.62 * t / (243.12 + t))
    wind = 0.9 + 1.4 * np.exp(-((hour - 16.0) / 3.0) ** 2)
    p = 993.0 + 1.2 * np.cos(2 * np.pi * (hour - 10.0) / 12.0)
    df = pd.DataFrame({"time": [x.isoformat() for x in local], "t_air_c": t, "rh_pct": rh, "wind_ms": wind,
                       "pressure_hpa": p})
    return _fmt_csv(df, 2)


def _clear(root: Path) -> None:
    """Remove the generated parts of an earlier scenario in ``root`` (only if it is one)."""
    if not root.exists():
        return
    if any(root.iterdir()) and not (root / MARKER).is_file():
        from walkcomfort.errors import InputError

        raise InputError(f"'{root}' is not empty and holds no {MARKER}", where=root,
                         fix="give an empty or new folder, or the demo_walks folder itself")
    for sub in ("sessions", "truth", "routes", "schemes", "weather"):
        if (root / sub).is_dir():
            shutil.rmtree(root / sub)


def generate_demo(out_dir, seed: int = S.DEFAULT_SEED, n_walkers: int = 8) -> dict:
    """Write the invented scenario into ``out_dir`` and return its summary.

    Parameters
    ----------
    out_dir : path
        Target folder (created; an earlier scenario there is replaced).
    seed : int
        Seed of the town layout and of every session's generator.
    n_walkers : int
        Number of invented walkers (two walks each), at most 8.

    Returns
    -------
    dict
        ``sessions`` (per-session summary), ``planted`` (imperfections), ``physics`` (which
        implementation produced each quantity of truth).
    """
    root = Path(out_dir)
    _clear(root)
    town = T.build_town(seed)
    _io.write_json(root / "scene.geojson", T.scene_geojson(town))
    _io.write_json(root / "streets.geojson", T.streets_geojson(town))
    for rid, walk in town.routes.items():
        _io.write_json(root / "routes" / f"{rid}.geojson", T.route_geojson(walk))
    _io.atomic_write_text(root / "routes" / "estacio-escola.gpx", T.route_gpx(town.routes["estacio-escola"]))
    for sid in town.schemes:
        _io.write_json(root / "schemes" / f"{sid}.geojson", T.scheme_geojson(town, sid))

    _io.atomic_write_text(root / "weather" / "design-day.csv", design_day_csv())
    context = S.environment_context(town)
    results = []
    from walkcomfort._progress import track

    plans = S.session_plans(n_walkers)
    for plan in track(plans, "simulating demo walks"):
        results.append(write_session(root, town, plan, seed, context))
    planted = [p for r in results for p in r["planted"]]
    summaries = [r["summary"] for r in results]
    _io.atomic_write_text(root / "truth" / "frames.csv", _fmt_csv(pd.DataFrame([f for r in results for f in r["frames"]]), 4))
    _io.atomic_write_text(root / "truth" / "votes.csv", _fmt_csv(pd.DataFrame([v for r in results for v in r["votes"]]), 4))
    _io.write_json(root / "truth" / "sessions.json", summaries)
    doc = {
        "note": ("Imperfections planted on purpose in the invented demo sessions. QA should find exactly these: "
                 "every source not listed here has no clock offset, gap, duplicate or out-of-range row. "
                 "Lines are 1-based file lines (the header is line 1); GPS points are 1-based track point numbers; "
                 "times are UTC."),
        "imperfections": planted,
    }
    _io.write_json(root / MARKER, doc)
    physics = context["sources"]
    schemes = {sid: {"label": town.schemes[sid]["label"], **T.scheme_summary(town, sid)} for sid in town.schemes}
    _io.atomic_write_text(root / "README.md", readme.readme_text(town, summaries, planted, schemes, physics, seed))
    files = sorted(p for p in root.rglob("*") if p.is_file() and p.name != "provenance.json")
    prov = {"generator": "walkcomfort.demo.scenario.generate_demo", "seed": int(seed), "n_walkers": int(n_walkers),
            "physics": physics, "invented": True,
            "files": {p.relative_to(root).as_posix(): _io.file_digest(p) for p in files}}
    _io.write_json(root / "provenance.json", prov)
    return {"sessions": summaries, "planted": planted, "physics": physics, "root": root}
