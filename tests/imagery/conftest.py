"""Synthetic frames with known sky and greenery shares (built here, so their truth is exact)."""

from __future__ import annotations

import numpy as np
import pytest


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
