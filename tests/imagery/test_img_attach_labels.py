"""Frame cues onto the timeline (hold time, bad frames, walks) and imported per-frame labels."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from walkcomfort import columns as C
from walkcomfort.errors import InputError
from walkcomfort.imagery.attach import ADDED_COLUMNS, add_frame_cues
from walkcomfort.imagery.labels import combine_cues, read_frame_labels


def _timeline(n=60, walk="w1", start="2026-07-14T08:00:00Z"):
    idx = pd.date_range(start, periods=n, freq="1s", name=C.TIME)
    tl = pd.DataFrame({C.WALK_ID: walk, C.T_AIR_C: 25.0, C.FRAME_PATH: pd.array([None] * n, dtype="str")}, index=idx)
    tl.attrs["session"] = {"walk_id": walk}
    return tl


def _cues(paths, times, sky, ok=None, people=None):
    n = len(paths)
    return pd.DataFrame({C.FRAME_PATH: paths, C.SKY_FRAC: sky, C.GREEN_FRAC: [0.2] * n, C.BRIGHTNESS_FRAC: [0.5] * n,
                         C.PEOPLE_N: people if people is not None else [1] * n,
                         C.FRAME_OK: ok if ok is not None else [True] * n,
                         C.QA_FRAME_BLUR: [not v for v in (ok if ok is not None else [True] * n)]},
                        index=pd.DatetimeIndex(times, name=C.TIME))


def test_cues_hold_forward_then_end():
    tl = _timeline()
    tl.iloc[5, tl.columns.get_loc(C.FRAME_PATH)] = "camera/a.jpg"
    cues = _cues(["camera/a.jpg"], ["2026-07-14T08:00:04Z"], [0.3])   # camera clock 1 s behind
    out = add_frame_cues(tl, cues, hold_s=10)
    # the frame sits on step 5 of the timeline (the ingest put it there after clock correction)
    assert np.isnan(out[C.SKY_FRAC].iloc[4])
    assert (out[C.SKY_FRAC].iloc[5:16] == 0.3).all()
    assert out[C.FRAME_AGE_S].iloc[15] == 10.0
    assert np.isnan(out[C.SKY_FRAC].iloc[16]) and pd.isna(out[C.FRAME_OK].iloc[16])
    assert out.attrs["session"] == {"walk_id": "w1"}
    assert set(ADDED_COLUMNS) <= set(out.columns)
    assert C.SKY_FRAC not in tl.columns       # the input is not modified


def test_bad_frames_do_not_feed_the_model():
    tl = _timeline()
    times = ["2026-07-14T08:00:00Z", "2026-07-14T08:00:10Z", "2026-07-14T08:00:30Z"]
    cues = _cues(["a.jpg", "b.jpg", "c.jpg"], times, [0.1, 0.9, 0.3], ok=[True, False, True])
    out = add_frame_cues(tl, cues, hold_s=15)
    # after the blurred frame b (t = 10 s) the last good frame a still holds until 15 s
    assert out[C.SKY_FRAC].iloc[12] == 0.1 and not out[C.FRAME_OK].iloc[12]
    assert bool(out[C.QA_FRAME_BLUR].iloc[12])
    assert np.isnan(out[C.SKY_FRAC].iloc[20])       # a is too old, b is bad
    assert not out[C.FRAME_OK].iloc[20]             # ... and the step says why: the latest frame failed
    assert (out[C.SKY_FRAC].iloc[30:46] == 0.3).all() and out[C.FRAME_OK].iloc[30]
    assert out[C.PEOPLE_N].dtype == np.float64


def test_walks_are_kept_apart_in_a_campaign_table():
    a, b = _timeline(walk="A"), _timeline(walk="B")
    campaign = pd.concat([a, b])
    campaign.iloc[3, campaign.columns.get_loc(C.FRAME_PATH)] = "camera/x.jpg"
    campaign.iloc[60 + 3, campaign.columns.get_loc(C.FRAME_PATH)] = "camera/x.jpg"
    cues = _cues(["camera/x.jpg", "camera/x.jpg"], ["2026-07-14T08:00:03Z"] * 2, [0.2, 0.7])
    cues[C.WALK_ID] = ["A", "B"]
    out = add_frame_cues(campaign, cues, hold_s=5)
    assert (out[C.SKY_FRAC].iloc[3:9] == 0.2).all()
    assert (out[C.SKY_FRAC].iloc[63:69] == 0.7).all()


def test_existing_columns_need_replace_and_bad_args_are_errors():
    tl = _timeline()
    cues = _cues(["a.jpg"], ["2026-07-14T08:00:00Z"], [0.4])
    once = add_frame_cues(tl, cues)
    with pytest.raises(InputError, match="already has frame-cue columns"):
        add_frame_cues(once, cues)
    again = add_frame_cues(once, _cues(["a.jpg"], ["2026-07-14T08:00:00Z"], [0.6]), replace=True)
    assert again[C.SKY_FRAC].iloc[0] == 0.6
    with pytest.raises(InputError):
        add_frame_cues(tl, cues, hold_s=-1)
    with pytest.raises(InputError, match="UTC time index"):
        add_frame_cues(tl.reset_index(), cues)


# --- labels ------------------------------------------------------------------------------------


@pytest.fixture
def frames_table():
    return pd.DataFrame({C.FRAME_PATH: ["camera/IMG_0001.jpg", "camera/IMG_0002.jpg", "camera/IMG_0003.jpg"]},
                        index=pd.DatetimeIndex(["2026-07-14T08:00:00Z", "2026-07-14T08:00:10Z",
                                                "2026-07-14T08:00:20Z"], name=C.TIME))


def test_labels_by_frame_name_with_quarantine(tmp_path, frames_table):
    p = tmp_path / "labels.csv"
    p.write_text("frame,sky,vegetation,people\n"
                 "IMG_0001.jpg,0.25,0.40,3\n"
                 "camera/IMG_0002.jpg,0.5,,0\n"
                 "IMG_0003.jpg,1.4,0.1,0\n"          # out of range
                 "IMG_0009.jpg,0.1,0.1,0\n"          # not in the session
                 "IMG_0001.jpg,0.2,0.2,1\n"          # duplicate
                 "IMG_0003.jpg,0.1,abc,2\n"          # not a number
                 "IMG_0003.jpg,0.1,0.1,2.5\n", encoding="utf-8")
    labels, meta = read_frame_labels(p, frames_table)
    assert meta["counts"] == {"read": 7, "used": 2, "quarantined": 5}
    assert list(labels[C.FRAME_PATH]) == ["camera/IMG_0001.jpg", "camera/IMG_0002.jpg"]
    assert labels[C.SKY_FRAC].tolist() == [0.25, 0.5]
    assert np.isnan(labels[C.GREEN_FRAC].iloc[1])
    assert labels.index[0] == pd.Timestamp("2026-07-14T08:00:00Z")
    q = meta["quarantine"]
    assert q["row"].tolist() == [4, 5, 6, 7, 8]
    assert "outside 0…1" in q["reason"].iloc[0] and "not in the session" in q["reason"].iloc[1]
    assert "twice" in q["reason"].iloc[2] and "not a number" in q["reason"].iloc[3]
    assert "not a count" in q["reason"].iloc[4]


def test_labels_with_times_percent_and_mapping(tmp_path):
    p = tmp_path / "seg.csv"
    p.write_text("when,SkyPct,TreePct\n2026-07-14T10:00:00+02:00,30,20\n2026-07-14 10:00:05,40,10\n", encoding="utf-8")
    labels, meta = read_frame_labels(p, columns={"time": "when", "sky_frac": "SkyPct", "green_frac": "TreePct"},
                                     scale="percent", tz="Europe/Madrid")
    assert labels[C.SKY_FRAC].tolist() == [0.3, 0.4]
    assert labels.index[1] == pd.Timestamp("2026-07-14T08:00:05Z")
    with pytest.raises(InputError, match="not in the header"):
        read_frame_labels(p, columns={"time": "when", "sky_frac": "Sky"})
    with pytest.raises(InputError, match="no time column and no frames table"):
        q = tmp_path / "noframes.csv"
        q.write_text("frame,sky\na.jpg,0.1\n", encoding="utf-8")
        read_frame_labels(q)


def test_combine_prefers_imported_but_keeps_computed_where_missing(frames_table):
    computed = pd.DataFrame({C.FRAME_PATH: list(frames_table[C.FRAME_PATH]), C.SKY_FRAC: [0.1, 0.2, 0.3],
                             C.GREEN_FRAC: [0.5, 0.5, 0.5], C.PEOPLE_N: pd.array([0, 0, 0], dtype="Int64"),
                             C.FRAME_OK: [True, True, False]}, index=frames_table.index)
    imported = pd.DataFrame({C.FRAME_PATH: ["camera/IMG_0001.jpg", "camera/IMG_0002.jpg"],
                             C.GREEN_FRAC: [0.9, np.nan], C.FRAME_OK: [True, False]}, index=frames_table.index[:2])
    out = combine_cues(computed, imported)
    assert out[C.GREEN_FRAC].tolist() == [0.9, 0.5, 0.5]
    assert out[C.SKY_FRAC].tolist() == [0.1, 0.2, 0.3]
    assert out[C.FRAME_OK].tolist() == [True, False, False]
    assert out["cue_source"].tolist() == ["both", "both", "computed"]
    kept = combine_cues(computed, imported, prefer="computed")
    assert kept[C.GREEN_FRAC].tolist() == [0.5, 0.5, 0.5]


def test_labels_reader_survives_any_text(tmp_path_factory, frames_table):
    # fuzzing: whatever the lines hold, the reader either raises one clear InputError or
    # returns rows whose counts reconcile (read = used + quarantined), never anything else
    from hypothesis import HealthCheck, given, settings
    from hypothesis import strategies as st

    folder = tmp_path_factory.mktemp("fuzz")
    cell = st.one_of(st.sampled_from(["IMG_0001.jpg", "camera/IMG_0002.jpg", "0.5", "-1", "abc", "", "nan", "1e400",
                                      "2026-07-14T08:00:00Z", "3", "true"]), st.text(max_size=6))
    line = st.lists(cell, min_size=1, max_size=5).map(lambda cs: ",".join(c.replace("\n", " ") for c in cs))

    @settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
    @given(st.lists(line, max_size=8))
    def check(lines):
        p = folder / "labels.csv"
        p.write_text("frame,sky,vegetation,people\n" + "\n".join(lines) + "\n", encoding="utf-8")
        try:
            labels, meta = read_frame_labels(p, frames_table)
        except InputError as exc:
            assert "\n" not in str(exc)
            return
        c = meta["counts"]
        assert c["read"] == c["used"] + c["quarantined"] == len(labels) + len(meta["quarantine"])
        assert ((labels[C.SKY_FRAC].dropna() >= 0) & (labels[C.SKY_FRAC].dropna() <= 1)).all()

    check()
