"""Benchmark: camera-frame cues on the CPU at 640×480.

Size: ``--frames`` (default 200) synthetic street frames of 640×480 (sky, a textured
façade, a tree, a hedge, a road), JPEG-encoded to a temporary folder. Prints, for one
process with OpenCV held to one thread (so "per core"):

1. scene cues + quality flags on decoded frames (the vectorised rules) — goal ≥ 40 frames/s;
2. the same through ``compute_frame_cues`` from JPEG files (decode included), no people;
3. the HOG people detector alone, on ``--people-frames`` frames (it is the slow part);
4. ``compute_frame_cues`` with the worker pool over all cores (throughput, not per core);
5. a re-run over the digest cache;

CPU time of this process is reported beside wall time: on a shared machine, frames per
second *per core* is frames over CPU seconds. Then the ratio against a naive baseline run
in the same process: the same ExG and sky
rules written as per-pixel Python loops, timed on a small crop (``--crop``, default 80×60)
and scaled to a full frame by pixel count (the loops are linear in pixels). Run:

    python benchmarks/bench_frames.py [--frames 200] [--people-frames 20] [--crop 80]
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))


def street(seed: int, h: int = 480, w: int = 640) -> np.ndarray:
    rng = np.random.default_rng(seed)
    img = np.array([92, 91, 94], np.float32) + rng.normal(0, 6, (h, w, 1))
    sky_rows = int((0.25 + 0.1 * rng.random()) * h)
    t = np.linspace(0, 1, sky_rows, dtype=np.float32)[:, None, None]
    img[:sky_rows] = np.array([80, 130, 215], np.float32) + np.array([70, 55, 20], np.float32) * t
    fx0 = int((0.6 + 0.2 * rng.random()) * w)
    img[int(0.12 * h):int(0.8 * h), fx0:] = np.array([150, 140, 128], np.float32) + \
        rng.normal(0, 10, (int(0.8 * h) - int(0.12 * h), w - fx0, 1))
    yy, xx = np.mgrid[0:h, 0:w]
    crown = ((xx - (0.15 + 0.2 * rng.random()) * w) / (0.16 * w)) ** 2 + ((yy - 0.38 * h) / (0.2 * h)) ** 2 <= 1
    img[crown] = (np.array([55, 115, 40], np.float32) + rng.normal(0, 14, (h, w, 3)))[crown]
    return np.clip(np.round(img), 0, 255).astype(np.uint8)


def naive_cues(rgb: np.ndarray) -> tuple[float, float]:
    """ExG greenery and the sky rule, one pixel at a time in pure Python (the baseline)."""
    from walkcomfort.imagery.cues import (
        EXG_THRESHOLD,
        MIN_CHROMA_SUM,
        SKY_BLUE_MARGIN,
        SKY_MAX_TEXTURE,
        SKY_MIN_LUMA,
        SKY_OVERCAST_LUMA,
        SKY_UPPER_FIELD,
    )

    h, w, _ = rgb.shape
    px = rgb.tolist()
    gray = [[0.299 * p[0] + 0.587 * p[1] + 0.114 * p[2] for p in row] for row in px]
    green = sky = 0
    rows = int(round(SKY_UPPER_FIELD * h))
    for y in range(h):
        for x in range(w):
            r, g, b = px[y][x]
            s = r + g + b
            if s >= MIN_CHROMA_SUM and (2 * g - r - b) / s > EXG_THRESHOLD:
                green += 1
            if y < rows:
                # mean absolute Sobel gradient over a 7x7 box, per pixel (as texture_map)
                acc, n = 0.0, 0
                for yy in range(max(1, y - 3), min(h - 1, y + 4)):
                    for xx in range(max(1, x - 3), min(w - 1, x + 4)):
                        gx = (gray[yy - 1][xx + 1] + 2 * gray[yy][xx + 1] + gray[yy + 1][xx + 1]
                              - gray[yy - 1][xx - 1] - 2 * gray[yy][xx - 1] - gray[yy + 1][xx - 1]) / 8
                        gy = (gray[yy + 1][xx - 1] + 2 * gray[yy + 1][xx] + gray[yy + 1][xx + 1]
                              - gray[yy - 1][xx - 1] - 2 * gray[yy - 1][xx] - gray[yy - 1][xx + 1]) / 8
                        acc += abs(gx) + abs(gy)
                        n += 1
                lum = gray[y][x] / 255
                blue = (b - r >= SKY_BLUE_MARGIN) and (b - g >= -SKY_BLUE_MARGIN)
                neutral = abs(b - r) < SKY_BLUE_MARGIN and abs(b - g) < SKY_BLUE_MARGIN and b >= r - 3
                if lum >= SKY_MIN_LUMA and (blue or (neutral and lum >= SKY_OVERCAST_LUMA)) \
                        and acc / max(n, 1) <= SKY_MAX_TEXTURE:
                    sky += 1
    return sky / (h * w), green / (h * w)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--frames", type=int, default=200)
    ap.add_argument("--people-frames", type=int, default=20)
    ap.add_argument("--crop", type=int, default=80, help="width of the naive baseline's crop [px] (4:3)")
    args = ap.parse_args(argv)

    import cv2
    from PIL import Image

    from walkcomfort.imagery import batch
    from walkcomfort.imagery.people import count_people

    cv2.setNumThreads(1)
    os.environ["WALKCOMFORT_NO_PROGRESS"] = "1"
    n = args.frames
    frames = [street(i) for i in range(n)]
    print(f"frames: {n} synthetic street frames of 640x480; OpenCV {cv2.__version__}, 1 thread; "
          f"{batch.default_workers()} usable cores")

    params = batch.AnalysisParams(detect_people=False)
    batch.analyse_image(frames[0], params)  # warm-up
    t, c = time.perf_counter(), time.process_time()
    for f in frames:
        batch.analyse_image(f, params)
    wall, dt = time.perf_counter() - t, time.process_time() - c
    print(f"1. cues + quality on decoded frames:      {wall:7.3f} s wall, {dt:7.3f} s CPU  {n / dt:7.1f} frames/s "
          f"per core ({1000 * dt / n:.1f} ms CPU/frame; goal >= 40 frames/s)")

    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        (tmp / "camera").mkdir()
        paths = []
        for i, f in enumerate(frames):
            p = tmp / "camera" / f"IMG_{i:05d}.jpg"
            Image.fromarray(f).save(p, quality=90)
            paths.append(p)

        t, c = time.perf_counter(), time.process_time()
        cues, _ = batch.compute_frame_cues(paths, workers=1, detect_people=False)
        wall2, dt2 = time.perf_counter() - t, time.process_time() - c
        print(f"2. compute_frame_cues from JPEG, 1 proc:  {wall2:7.3f} s wall, {dt2:7.3f} s CPU  {n / dt2:7.1f} "
              f"frames/s per core (decode + digest included)")

        k = min(args.people_frames, n)
        count_people(frames[0])
        t, c = time.perf_counter(), time.process_time()
        for f in frames[:k]:
            count_people(f)
        wall3, dt3 = time.perf_counter() - t, time.process_time() - c
        print(f"3. HOG people detector, {k} frames:        {wall3:7.3f} s wall, {dt3:7.3f} s CPU  {k / dt3:7.1f} "
              f"frames/s per core")

        workers = batch.default_workers()
        t = time.perf_counter()
        batch.compute_frame_cues(paths, workers=workers, detect_people=False)
        dt4 = time.perf_counter() - t
        print(f"4. compute_frame_cues, {workers} workers:      {dt4:7.3f} s  {n / dt4:7.1f} frames/s in all "
              f"(process start-up included)")

        cache = tmp / "cache"
        batch.compute_frame_cues(paths, workers=1, detect_people=False, cache_dir=cache)
        t = time.perf_counter()
        _, meta = batch.compute_frame_cues(paths, workers=1, detect_people=False, cache_dir=cache)
        dt5 = time.perf_counter() - t
        print(f"5. re-run over the digest cache:          {dt5:7.3f} s  {n / dt5:7.1f} frames/s "
              f"({meta['counts']['cache_hits']} hits)")

    cw = args.crop
    ch = cw * 3 // 4
    crop = np.ascontiguousarray(frames[0][:ch * 4:4, :cw * 4:4])   # a small 4:3 view of the frame
    c = time.process_time()
    naive_cues(crop)
    dtn = time.process_time() - c
    per_frame_naive = dtn * (640 * 480) / (cw * ch)
    per_frame_fast = dt / n
    print(f"naive per-pixel Python baseline on a {cw}x{ch} crop: {dtn:.3f} s CPU -> "
          f"{per_frame_naive:.1f} s per 640x480 frame (scaled by pixels)")
    print(f"ratio naive / vectorised: {per_frame_naive / per_frame_fast:,.0f}x  "
          f"(vectorised {1000 * per_frame_fast:.1f} ms CPU per frame for cues + quality; the baseline does "
          f"the sky and ExG rules only)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
