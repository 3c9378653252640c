"""Frame quality flags, the HOG people detector and the Haar face blurring."""

from __future__ import annotations

import cv2
import numpy as np
import pytest
from skimage import data

from walkcomfort import columns as C
from walkcomfort.imagery import faces, people, quality
from walkcomfort.imagery.cues import sky_mask

# --- quality -----------------------------------------------------------------------


def test_laplacian_variance_from_definition():
    # a checkerboard of 0/255 single pixels: the 4-neighbour Laplacian is ±4·255 inside
    # (from the definition of the kernel [[0,1,0],[1,-4,1],[0,1,0]]), so the variance is
    # (4·255)² on the interior; borders (reflected) keep it the same
    board = (np.indices((64, 64)).sum(axis=0) % 2 * 255).astype(np.uint8)
    assert quality.laplacian_variance(board) == pytest.approx((4 * 255) ** 2, rel=1e-3)
    assert quality.laplacian_variance(np.full((32, 32), 90, np.uint8)) == 0.0


def test_blur_flag_fires_on_blurred_copy(street):
    rgb, _ = street
    sharp = quality.quality_flags(rgb, sky=sky_mask(rgb))
    assert not sharp[C.QA_FRAME_BLUR] and sharp[C.FRAME_OK]
    blurred = cv2.GaussianBlur(rgb, (0, 0), 4)
    soft = quality.quality_flags(blurred, sky=sky_mask(blurred))
    assert soft[C.QA_FRAME_BLUR] and not soft[C.FRAME_OK]
    # a Gaussian blur removes the high frequencies the Laplacian measures (from the definition);
    # the factor 10 is a test threshold
    assert soft[C.FRAME_LAPVAR] < 0.1 * sharp[C.FRAME_LAPVAR]


def test_blur_flag_on_a_photograph():
    # scikit-image's astronaut photograph is sharp; its blurred copy is not
    photo = data.astronaut()
    assert not quality.quality_flags(photo)[C.QA_FRAME_BLUR]
    assert quality.quality_flags(cv2.GaussianBlur(photo, (0, 0), 3))[C.QA_FRAME_BLUR]


def test_sky_frames_are_not_called_blurred():
    sky = np.zeros((240, 320, 3), np.uint8)
    sky[:] = (100, 150, 225)
    flags = quality.quality_flags(sky, sky=sky_mask(sky))
    assert flags[C.FRAME_LAPVAR] < quality.BLUR_MIN_LAPVAR
    # mostly sky (65 % upper field all sky) -> exempt from the blur judgement
    assert not flags[C.QA_FRAME_BLUR]


def test_exposure_flags(street):
    rgb, _ = street
    white = np.full_like(rgb, 255)
    dark = (rgb * 0.03).astype(np.uint8)
    f_white = quality.quality_flags(white)
    f_dark = quality.quality_flags(dark)
    assert f_white[C.QA_FRAME_OVEREXPOSED] and not f_white[C.FRAME_OK]
    assert f_dark[C.QA_FRAME_UNDEREXPOSED] and not f_dark[C.FRAME_OK]
    assert not f_dark[C.QA_FRAME_OBSTRUCTED]        # reported once, as underexposed
    ok = quality.quality_flags(rgb, sky=sky_mask(rgb))
    assert not (ok[C.QA_FRAME_OVEREXPOSED] or ok[C.QA_FRAME_UNDEREXPOSED])


def test_clipped_overcast_sky_is_not_overexposure(overcast_street):
    rgb, _ = overcast_street
    h, w = rgb.shape[:2]
    washed = rgb.copy()
    # the camera clipped a wide white overcast sky left of the façade (half the rows, 35 % of the frame)
    washed[:h // 2, :int(0.7 * w)] = 255
    sky = sky_mask(washed)
    m = quality.quality_measures(washed, sky=sky)
    assert m["clipped_total_frac"] > quality.OVER_MAX_FRAC > m["clipped_frac"]
    assert not quality.quality_flags(washed, sky=sky)[C.QA_FRAME_OVEREXPOSED]
    # without the sky mask the same frame counts as overexposed
    assert quality.quality_flags(washed)[C.QA_FRAME_OVEREXPOSED] is (m["clipped_total_frac"] > quality.OVER_MAX_FRAC)


def test_obstruction_flag(street):
    rgb, _ = street
    blocked = rgb.copy()
    # a sleeve a few cm from the lens: the lower 60 % is a smooth, out-of-focus brown
    h = rgb.shape[0]
    ramp = np.linspace(70, 95, rgb.shape[1], dtype=np.float32)[None, :, None]
    sleeve = np.concatenate([ramp * 1.0, ramp * 0.8, ramp * 0.6], axis=2)
    blocked[int(0.4 * h):] = sleeve.astype(np.uint8)
    f = quality.quality_flags(blocked, sky=sky_mask(blocked))
    assert f[C.QA_FRAME_OBSTRUCTED] and not f[C.FRAME_OK]
    assert not quality.quality_flags(rgb, sky=sky_mask(rgb))[C.QA_FRAME_OBSTRUCTED]


@pytest.mark.parametrize("name", ["astronaut", "coffee", "chelsea", "camera"])
def test_ordinary_photographs_pass(name):
    # scikit-image's sample photographs are well exposed, sharp and unobstructed
    img = getattr(data, name)()
    img = np.stack([img] * 3, axis=-1) if img.ndim == 2 else img
    assert quality.quality_flags(img, sky=sky_mask(img))[C.FRAME_OK]


def test_night_sky_photograph_is_underexposed():
    # scikit-image's Hubble deep field: almost all of it is black sky
    img = (data.hubble_deep_field()).astype(np.uint8)
    assert quality.quality_flags(img)[C.QA_FRAME_UNDEREXPOSED]


def test_dusk_sky_is_not_an_obstruction():
    # scikit-image's rocket photograph: a launch pad under a dark blue dusk sky
    f = quality.quality_flags(data.rocket())
    assert not f[C.QA_FRAME_OBSTRUCTED]


# --- people (HOG, Dalal & Triggs 2005) ------------------------------------------------


def test_hog_finds_the_standing_man(make_person_frame):
    # scikit-image's 'camera' photograph shows one standing man; shrunk to pedestrian
    # size in a 640×480 frame the HOG detector must find exactly one person, on him
    frame, xs, (sh, sw) = make_person_frame(1)
    boxes, scores = people.detect_people(frame)
    assert len(boxes) == 1
    x, y, w, h = boxes[0]
    cx, cy = x + w / 2, y + h / 2
    assert xs[0] <= cx <= xs[0] + sw and 100 <= cy <= 100 + sh


def test_hog_counts_two_people(make_person_frame):
    frame, xs, _ = make_person_frame(2)
    assert people.count_people(frame) == 2


@pytest.mark.parametrize("name", ["coffee", "chelsea"])
def test_hog_finds_nobody_in_photos_without_people(name):
    # scikit-image's coffee cup and cat photographs contain no person
    img = getattr(data, name)()
    assert people.count_people(img) == 0


def test_non_max_suppression():
    boxes = [[0, 0, 10, 20], [1, 1, 10, 20], [50, 50, 10, 20]]
    keep = people.non_max_suppression(boxes, [0.5, 0.9, 0.4], iou=0.3)
    assert keep.tolist() == [1, 2]


# --- faces (Haar cascades shipped with OpenCV) ----------------------------------------


@pytest.fixture(scope="module")
def astronaut_blurred():
    photo = data.astronaut()
    out, boxes = faces.blur_faces(photo)
    return photo, out, boxes


def test_face_found_on_astronaut(astronaut_blurred):
    # scikit-image's astronaut portrait: one face, at about x 175–275, y 60–165 px
    # (read off the image by eye)
    _, _, boxes = astronaut_blurred
    assert len(boxes) == 1
    x, y, w, h = boxes[0]
    assert 175 <= x + w / 2 <= 275 and 60 <= y + h / 2 <= 165
    assert 60 <= w <= 160


@pytest.mark.parametrize("name", ["coffee", "chelsea"])
def test_no_face_where_there_is_none(name):
    # scikit-image's coffee cup and cat photographs: no human face
    assert len(faces.detect_faces(getattr(data, name)())) == 0


def test_blurred_face_is_no_longer_found_and_rest_is_untouched(astronaut_blurred):
    photo, out, boxes = astronaut_blurred
    assert len(boxes) == 1
    assert len(faces.detect_faces(out)) == 0
    x, y, w, h = boxes[0]
    m = faces.BOX_MARGIN
    changed = np.any(out != photo, axis=2)
    ys, xs = np.nonzero(changed)
    assert xs.min() >= x - m * w - 1 and xs.max() <= x + w + m * w + 1
    assert ys.min() >= y - m * h - 1 and ys.max() <= y + h + m * h + 1
    # inside the box the detail is gone: the Laplacian variance collapses
    inner = cv2.cvtColor(out[y:y + h, x:x + w], cv2.COLOR_RGB2GRAY)
    before = cv2.cvtColor(photo[y:y + h, x:x + w], cv2.COLOR_RGB2GRAY)
    assert quality.laplacian_variance(inner) < 0.05 * quality.laplacian_variance(before)


def test_merge_overlapping_boxes():
    merged = faces.merge_overlapping([[10, 10, 20, 20], [12, 12, 20, 20], [100, 100, 5, 5]])
    assert sorted(merged.tolist()) == [[10, 10, 22, 22], [100, 100, 5, 5]]
