"""The checks the demo scenario promises: QA finds exactly what was planted, the physics is sane."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from walkcomfort.demo import latent
from walkcomfort.demo import simulator as S
from walkcomfort.demo import town as T

DEMO = Path(__file__).resolve().parents[2] / "demo_walks"
PLANTED = json.loads((DEMO / "planted.json").read_text())["imperfections"]
SESSIONS = sorted(p.name for p in (DEMO / "sessions").iterdir() if (p / "session.toml").is_file())


@pytest.fixture(scope="module")
def timelines():
    timeline = pytest.importorskip("walkcomfort.session.timeline")
    return {sid: timeline.build_timeline(DEMO / "sessions" / sid) for sid in SESSIONS}


def _found(tl) -> set:
    """Every imperfection QA reports for one walk, as comparable tuples."""
    sid = tl.qa["walk_id"]
    out = set()
    for dev, fit in tl.qa["clocks"].items():
        if abs(fit["offset_s"]) > 0.5 or abs(fit["drift_ppm"]) > 0:
            out.add((sid, "clock_offset", dev, round(fit["offset_s"])))
    for name, e in tl.qa["sources"].items():
        for start in e.get("gap_starts", []):
            out.add((sid, "gap", name, start[:19]))
    q = tl.quarantine
    for _, r in q.iterrows():
        reason = str(r["reason"])
        kind = ("out_of_range" if reason.startswith("out_of_range") else
                "duplicate" if reason.startswith("duplicate") else
                "gps_jump" if reason == "gps_jump" else reason)
        out.add((sid, kind, str(r["source"]), int(r["row"])))
    return out


def _planted() -> set:
    out = set()
    for p in PLANTED:
        k = p["kind"]
        if k == "clock_offset":
            out.add((p["session"], k, p["device"], round(p["offset_s"])))
        elif k == "gap":
            # QA names a gap by the last reading before it: one second before the first missing row
            start = pd.Timestamp(p["first_missing"]) - pd.Timedelta(seconds=1)
            out.add((p["session"], k, p["source"], start.isoformat()[:19]))
        elif k in ("out_of_range", "duplicate"):
            out.update((p["session"], k, p["source"], line) for line in p["lines"])
        elif k == "gps_jump":
            out.update((p["session"], k, p["source"], pt) for pt in p["points"])
    return out


def test_every_kind_of_imperfection_is_planted():
    kinds = {p["kind"] for p in PLANTED}
    assert {"clock_offset", "gap", "out_of_range", "duplicate", "gps_jump"} <= kinds
    clock = next(p for p in PLANTED if p["kind"] == "clock_offset")
    toml = (DEMO / "sessions" / clock["session"] / "session.toml").read_text()
    assert toml.count("[[sync]]") == clock["sync_events"] >= 1


def test_ingest_reconciles_every_source_of_every_session(timelines):
    assert len(timelines) >= 12
    for sid, tl in timelines.items():
        for name, e in tl.qa["sources"].items():
            assert e["reconciles"], (sid, name)
            assert e["rows_read"] == e["rows_used"] + e["rows_quarantined"], (sid, name)


def test_qa_finds_exactly_the_planted_imperfections(timelines):
    found = set().union(*(_found(tl) for tl in timelines.values()))
    assert found == _planted()


def test_the_clock_offset_is_recovered_from_the_sync_events(timelines):
    clock = next(p for p in PLANTED if p["kind"] == "clock_offset")
    fit = timelines[clock["session"]].qa["clocks"][clock["device"]]
    assert fit["offset_s"] == pytest.approx(clock["offset_s"], abs=0.5)
    assert fit["n_events"] == clock["sync_events"]


def test_globe_inversion_round_trips_within_0_1_k():
    tmrt = pytest.importorskip("walkcomfort.environment.tmrt")
    truth = pd.concat([pd.read_csv(p) for p in sorted((DEMO / "truth").glob("sv-*.csv"))])
    ta, tr, v = truth["t_air_c"].to_numpy(), truth["tmrt_c"].to_numpy(), truth["wind_ms"].to_numpy()
    # the steady globe temperature written in the truth files (rounded to 1 mK) back through ISO 7726
    back = np.asarray(tmrt.tmrt_from_globe(truth["t_globe_steady_c"].to_numpy(), ta, v,
                                           diameter_m=S.GLOBE_DIAMETER_M, emissivity=S.GLOBE_EMISSIVITY))
    assert np.max(np.abs(back - tr)) < 0.1
    # and the inversion itself, on the unrounded values
    tg = np.asarray(tmrt.globe_from_tmrt(tr, ta, v, diameter_m=S.GLOBE_DIAMETER_M, emissivity=S.GLOBE_EMISSIVITY))
    again = np.asarray(tmrt.tmrt_from_globe(tg, ta, v, diameter_m=S.GLOBE_DIAMETER_M, emissivity=S.GLOBE_EMISSIVITY))
    assert np.max(np.abs(again - tr)) < 0.1


def test_the_globe_sensor_lags_with_its_time_constant():
    # first-order response to a step: after one time constant 1 - 1/e of the step (from the definition)
    y = S.first_order(np.r_[np.zeros(1), np.full(2000, 10.0)], S.TAU_GLOBE_S, start=0.0)
    assert y[int(S.TAU_GLOBE_S)] == pytest.approx(10.0 * (1 - np.exp(-1.0)), rel=0.01)


@pytest.mark.parametrize("sid", SESSIONS)
def test_mean_utci_in_shade_is_below_mean_utci_in_sun_on_the_same_walk(sid):
    t = pd.read_csv(DEMO / "truth" / f"{sid}.csv")
    shade = t["beam_trans_frac"] < latent.SHADE_BELOW
    if shade.sum() < 3 or (~shade).sum() < 3:
        pytest.skip("walk without both sun and shade")
    assert t.loc[shade, "utci_c"].mean() < t.loc[~shade, "utci_c"].mean() - 2.0


def test_noise_is_higher_near_the_road(timelines):
    near, far = [], []
    for tl in timelines.values():
        d = tl.data.dropna(subset=["lat", "lon", "laeq_db"])
        _, y = T.from_lonlat(d["lon"].to_numpy(), d["lat"].to_numpy())
        dist = T.road_distance_m(0.0, y)
        near.append(d["laeq_db"].to_numpy()[dist < 20])
        far.append(d["laeq_db"].to_numpy()[dist > 100])

    def leq(levels):  # energy average, ISO 1996-1
        return 10 * np.log10(np.mean(10 ** (np.concatenate(levels) / 10)))

    assert leq(near) > leq(far) + 8.0


def test_frames_follow_the_surroundings():
    f = pd.read_csv(DEMO / "truth" / "frames.csv")
    assert np.corrcoef(f["svf"], f["sky_frac"])[0, 1] > 0.8
    shaded = ~f["sunlit"]
    assert f.loc[shaded, "green_frac"].mean() > f.loc[~shaded, "green_frac"].mean()


def test_votes_come_from_the_documented_process():
    v = pd.read_csv(DEMO / "truth" / "votes.csv")
    score = v["latent_noisy"].to_numpy()
    # the truth file keeps 4 decimals: leave out scores within rounding of a threshold
    clear = np.minimum(np.abs(score - latent.COMFORTABLE_BELOW), np.abs(score - latent.UNCOMFORTABLE_ABOVE)) > 1e-3
    assert clear.mean() > 0.95
    assert (latent.comfort_class(score[clear]) == v["comfort"].to_numpy()[clear]).all()
    assert set(v["kind"]) == {"prompted", "spontaneous"}
    counts = v["comfort"].value_counts(normalize=True)
    assert counts.min() > 0.15          # every class is represented
    # the votes in the session files are the same votes, with the app's labels
    n = sum(len(pd.read_csv(DEMO / "sessions" / s / "votes" / "votes.csv")) for s in SESSIONS)
    assert n == len(v)


def test_the_body_state_carries_heat_over_and_cooling_is_felt():
    """The invented process: a first-order body state with a rate term (latent.py docstring)."""
    w = latent.Walker("X", 1.3, 1.0, 0.0, 0.5, "25-34", True)
    n = 2700
    sun_then_shade = np.r_[np.full(900, 38.0), np.full(1800, 30.0)]
    shade_all_along = np.full(n, 30.0)
    zeros = np.zeros(n)
    a = latent.discomfort(w, sun_then_shade, np.r_[np.ones(900), np.zeros(1800)], zeros, zeros + 50, zeros)
    b = latent.discomfort(w, shade_all_along, np.zeros(n), zeros, zeros + 50, zeros)
    tau = latent.body_time_constant_s(w)
    # same UTCI now, different history: the body is still warm from the sun (heat carried over) ...
    assert a["body_c"][1200] > b["body_c"][1200] and a["d"][1200] > b["d"][1200]
    # ... and the excess decays as exp(−t/τ) (first-order response, from the definition)
    excess = a["body_c"][900:] - b["body_c"][900:]
    assert excess[int(tau)] / excess[0] == pytest.approx(np.exp(-1.0), rel=0.01)
    # the rate term: right after stepping into shade, the cooling is felt (the score drops below what the
    # body state alone gives), more strongly than the same warming on the way back
    static = latent.A_STATE * (a["body_c"] - latent.SKIN_NEUTRAL_C) * w.heat_sensitivity + w.bias
    assert a["d"][905] < static[905]
    assert latent.C_COOLING > latent.C_WARMING
    # the no-history variant forgets at once: both histories give the same score in the shade
    a0 = latent.discomfort(w, sun_then_shade, zeros, zeros, zeros + 50, zeros, variant="no-history")
    b0 = latent.discomfort(w, shade_all_along, zeros, zeros, zeros + 50, zeros, variant="no-history")
    np.testing.assert_allclose(a0["d"][901:], b0["d"][901:])


@pytest.mark.parametrize("sid", ["sv-p04-2"])
def test_recorded_walk_through_ingest_and_thermal_recovers_the_truth(sid):
    """End to end: device files -> ingest (lag-corrected) -> thermal (Tmrt from the globe) ≈ the truth."""
    timeline = pytest.importorskip("walkcomfort.session.timeline")
    env = pytest.importorskip("walkcomfort.environment.pipeline")
    from walkcomfort.environment.scene import load_scene

    tl = timeline.build_timeline(DEMO / "sessions" / sid, lag_correction=True)
    out = env.add_environment(tl.data, scene=load_scene(DEMO / "scene.geojson"), warn=False)
    truth = pd.read_csv(DEMO / "truth" / f"{sid}.csv")
    truth.index = pd.DatetimeIndex(pd.to_datetime(truth["time"]), name="time")
    j = out[["utci_c", "shade_frac"]].join(truth[["utci_c"]].rename(columns={"utci_c": "utci_true_c"}),
                                           how="inner").dropna()
    assert len(j) > 100
    # the globe was simulated from the true Tmrt (ISO 7726 inverted) and lags with tau_globe;
    # after the lag correction the recovered UTCI sits on the truth within about a kelvin
    assert abs((j["utci_c"] - j["utci_true_c"]).median()) < 1.0
    assert (j["utci_c"] - j["utci_true_c"]).abs().median() < 1.5
    shade = j["shade_frac"] > 0.5
    assert j.loc[shade, "utci_c"].mean() < j.loc[~shade, "utci_c"].mean()


def test_road_noise_falls_off_as_a_line_source():
    # incoherent line source: −10·log10(d2/d1) dB, i.e. 3.01 dB per doubling of distance (common practice)
    y10, y20 = T.RONDA_Y + 10.0, T.RONDA_Y + 20.0
    assert T.road_laeq_db(0.0, y10, 12.0) - T.road_laeq_db(0.0, y20, 12.0) == pytest.approx(10 * np.log10(2), abs=1e-9)
    # behind the first row of buildings another 6 dB of screening
    far = T.RONDA_Y + T.RONDA_FACADE_M + 20.0
    assert T.road_laeq_db(0.0, far, 12.0) == pytest.approx(
        T.ROAD_LAEQ_10M_DB - 10 * np.log10((far - T.RONDA_Y) / 10) - 6.0 + (T.road_laeq_db(0.0, y10, 12.0) - T.ROAD_LAEQ_10M_DB))


def test_invented_day_has_its_stated_extremes():
    h = np.linspace(0, 24, 24 * 60 + 1)
    t = S.diurnal_t_air_c(h)
    assert h[np.argmin(t)] == pytest.approx(6.0, abs=0.02) and t.min() == pytest.approx(21.5)
    assert h[np.argmax(t)] == pytest.approx(15.5, abs=0.02) and t.max() == pytest.approx(32.5)


def test_image_cues_find_what_was_drawn_into_the_frames():
    """The imagery stage's cues recover the sky, greenery and people drawn from the surroundings."""
    batch = pytest.importorskip("walkcomfort.imagery.batch")
    f = pd.read_csv(DEMO / "truth" / "frames.csv")
    pick = f[f["session"].isin(["sv-p01-1", "sv-p06-1"])].iloc[::5]
    got = pd.DataFrame([batch.analyse_frame(DEMO / "sessions" / r.session / r.file) for r in pick.itertuples()])
    assert np.corrcoef(pick["sky_frac"], got["sky_frac"])[0, 1] > 0.9
    assert np.corrcoef(pick["green_frac"], got["green_frac"])[0, 1] > 0.9
    assert np.corrcoef(pick["people_n"], got["people_n"].astype(float))[0, 1] > 0.8
    assert got["frame_ok"].all()
