"""Batch cues: worker processes, the digest cache, quarantine of unreadable frames."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from PIL import Image

from walkcomfort import columns as C
from walkcomfort.errors import InputError
from walkcomfort.imagery import batch
from walkcomfort.imagery.cues import frame_cues


def _write_frames(folder, make_street, n, size=(160, 120)):
    folder.mkdir(parents=True, exist_ok=True)
    rel, truths = [], []
    for i in range(n):
        rgb, truth = make_street(seed=i, h=size[1], w=size[0])
        name = f"camera/IMG_{i:04d}.png"
        Image.fromarray(rgb).save(folder / name.split("/")[1])
        rel.append(name)
        truths.append(truth)
    times = pd.date_range("2026-07-14T08:00:00Z", periods=n, freq="5s", name=C.TIME)
    return pd.DataFrame({C.FRAME_PATH: rel}, index=times), truths


def test_batch_matches_single_frame_and_truth(tmp_path, make_street):
    frames, truths = _write_frames(tmp_path / "camera", make_street, 4, size=(320, 240))
    cues, meta = batch.compute_frame_cues(frames, tmp_path, workers=1, detect_people=False)
    assert list(cues.columns) == list(batch.CUE_COLUMNS)
    assert cues.index.equals(frames.index)
    assert meta["counts"] == {"read": 4, "used": 4, "quarantined": 0, "frame_ok": 4, "cache_hits": 0, "computed": 4}
    for (_t, row), truth in zip(cues.iterrows(), truths, strict=False):
        # PNG is lossless, so the batch must give exactly the single-frame result
        rgb = np.asarray(Image.open(tmp_path / row[C.FRAME_PATH]))
        assert row[C.SKY_FRAC] == frame_cues(rgb)[C.SKY_FRAC]
        assert row[C.GREEN_FRAC] == pytest.approx(truth["green_frac"], abs=0.015)
        assert row[C.SKY_FRAC] == pytest.approx(truth["sky_frac"], abs=0.03)
    assert cues[C.PEOPLE_N].isna().all()


def test_cache_makes_reruns_skip_work_and_survives_damage(tmp_path, make_street):
    frames, _ = _write_frames(tmp_path / "camera", make_street, 6)
    cache = tmp_path / "cache"
    first, m1 = batch.compute_frame_cues(frames, tmp_path, workers=1, cache_dir=cache, detect_people=False)
    second, m2 = batch.compute_frame_cues(frames, tmp_path, workers=1, cache_dir=cache, detect_people=False)
    assert m1["counts"]["computed"] == 6 and m2["counts"]["cache_hits"] == 6 and m2["counts"]["computed"] == 0
    pd.testing.assert_frame_equal(first, second)
    entries = sorted(cache.rglob("*.json"))
    assert all(not p.name.endswith(".pkl") for p in cache.rglob("*"))
    # a damaged entry is recomputed, not trusted
    victim = [p for p in entries if p.name != "parameters.json"][0]
    victim.write_text("{not json")
    third, m3 = batch.compute_frame_cues(frames, tmp_path, workers=1, cache_dir=cache, detect_people=False)
    assert m3["counts"]["computed"] == 1 and m3["counts"]["cache_hits"] == 5
    pd.testing.assert_frame_equal(first, third)
    # other parameters never reuse these entries
    other = batch.AnalysisParams(detect_people=False, width=320)
    _, m4 = batch.compute_frame_cues(frames, tmp_path, workers=1, cache_dir=cache, params=other)
    assert m4["counts"]["cache_hits"] == 0
    params_files = sorted(cache.glob("*/parameters.json"))
    assert len(params_files) == 2 and json.loads(params_files[0].read_text())["version"] == batch.ANALYSIS_VERSION


def test_unreadable_frames_are_quarantined_and_counts_reconcile(tmp_path, make_street):
    frames, _ = _write_frames(tmp_path / "camera", make_street, 3)
    (tmp_path / "camera" / "IMG_0001.png").write_bytes(b"\x89PNG\r\n garbage")
    extra = pd.DataFrame({C.FRAME_PATH: ["camera/missing.jpg"]},
                         index=pd.DatetimeIndex(["2026-07-14T08:01:00Z"], name=C.TIME))
    frames = pd.concat([frames, extra])
    cues, meta = batch.compute_frame_cues(frames, tmp_path, workers=1, detect_people=False)
    q = meta["quarantine"]
    assert meta["counts"]["read"] == 4 and meta["counts"]["used"] == 2 and meta["counts"]["quarantined"] == 2
    assert set(q["file"]) == {"camera/IMG_0001.png", "camera/missing.jpg"}
    assert q.set_index("file").loc["camera/missing.jpg", "reason"] == "frame file not found"
    assert "not a readable image" in q.set_index("file").loc["camera/IMG_0001.png", "reason"]


@pytest.mark.slow
def test_worker_processes_give_the_same_result(tmp_path, make_street):
    # enough frames to use the pool (spawned workers take a couple of seconds to start)
    n = batch.MIN_FRAMES_FOR_POOL + 6
    frames, _ = _write_frames(tmp_path / "camera", make_street, n)
    serial, _ = batch.compute_frame_cues(frames, tmp_path, workers=1, detect_people=False)
    pooled, meta = batch.compute_frame_cues(frames, tmp_path, workers=2, detect_people=False)
    pd.testing.assert_frame_equal(serial, pooled)
    assert meta["counts"]["computed"] == n


def test_large_jpeg_is_analysed_at_the_analysis_width(tmp_path, make_street):
    rgb, truth = make_street(h=960, w=1280)
    Image.fromarray(rgb).save(tmp_path / "big.jpg", quality=92)
    img = batch.load_frame(tmp_path / "big.jpg", max_width=batch.ANALYSIS_WIDTH)
    assert img.shape == (480, 640, 3)
    cues, _ = batch.compute_frame_cues([tmp_path / "big.jpg"], workers=1, detect_people=False)
    assert cues.loc[0, C.GREEN_FRAC] == pytest.approx(truth["green_frac"], abs=0.02)


def test_exif_orientation_is_applied(tmp_path):
    rgb = np.zeros((40, 80, 3), np.uint8)
    rgb[:, :40] = 255
    im = Image.fromarray(rgb)
    exif = im.getexif()
    exif[0x0112] = 6          # "rotate 90° clockwise to display"
    im.save(tmp_path / "rot.jpg", exif=exif.tobytes())
    assert batch.load_frame(tmp_path / "rot.jpg").shape == (80, 40, 3)


def test_bad_frames_table_is_a_clear_error():
    with pytest.raises(InputError, match="frame_path"):
        batch.compute_frame_cues(pd.DataFrame({"x": [1]}))
    naive = pd.DataFrame({C.FRAME_PATH: ["a.jpg"]}, index=pd.DatetimeIndex(["2026-07-14 08:00"]))
    with pytest.raises(InputError, match="naive"):
        batch.compute_frame_cues(naive)


def test_people_are_not_counted_on_bad_frames(tmp_path, make_street):
    import cv2

    rgb, _ = make_street(h=240, w=320)
    Image.fromarray(rgb).save(tmp_path / "sharp.png")
    Image.fromarray(cv2.GaussianBlur(rgb, (0, 0), 4)).save(tmp_path / "blurred.png")
    cues, _ = batch.compute_frame_cues([tmp_path / "sharp.png", tmp_path / "blurred.png"], workers=1)
    assert cues[C.FRAME_OK].tolist() == [True, False]
    assert cues[C.PEOPLE_N].iloc[0] == 0 and pd.isna(cues[C.PEOPLE_N].iloc[1])


@pytest.mark.slow
def test_broken_worker_pool_falls_back_to_this_process(tmp_path, make_street):
    import multiprocessing as mp
    import os
    from concurrent.futures import ProcessPoolExecutor

    n = batch.MIN_FRAMES_FOR_POOL
    frames, _ = _write_frames(tmp_path / "camera", make_street, n)
    dead = ProcessPoolExecutor(max_workers=1, mp_context=mp.get_context("spawn"), initializer=os.abort)
    try:
        with pytest.warns(RuntimeWarning, match="worker processes failed"):
            cues, meta = batch.compute_frame_cues(frames, tmp_path, detect_people=False, pool=dead)
    finally:
        dead.shutdown()
    assert len(cues) == n and meta["counts"]["computed"] == n
