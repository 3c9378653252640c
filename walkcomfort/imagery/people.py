"""People in the frame: a crowding cue from OpenCV's built-in HOG pedestrian detector.

The detector is the linear SVM on histograms of oriented gradients of Dalal & Triggs
(2005), trained on upright full-body pedestrians in a 64×128 window; OpenCV ships its
coefficients (``cv2.HOGDescriptor_getDefaultPeopleDetector``), so nothing is downloaded
and it runs on the CPU. What follows from that training:

* it finds standing or walking people seen whole, roughly 100–300 px tall in a 640×480
  frame (a few metres to about 15 m from a chest camera); people cut by the frame edge,
  seated or very close are missed, so ``people_n`` is a *lower bound* and a relative
  crowding cue, not a head count;
* overlapping windows on one person are merged by non-maximum suppression (boxes whose
  intersection over union exceeds :data:`NMS_IOU` keep only the strongest);
* weak responses (SVM score below :data:`MIN_SCORE`) are dropped.

Frames are resized to :data:`DETECT_WIDTH` px wide first — reduced from high-resolution
cameras, so the cost per frame is bounded, and enlarged from small ones, because the
detector's window is 64×128 px: a person 40 px tall in a 160 px frame is found only
after enlarging. Frames narrower than :data:`MIN_SOURCE_WIDTH` px hold too little to
count anyone; the batch leaves their count unknown.

References
----------
Dalal, N., Triggs, B. (2005). Histograms of oriented gradients for human detection.
IEEE CVPR 2005, vol. 1, 886–893. doi:10.1109/CVPR.2005.177
"""

from __future__ import annotations

from dataclasses import asdict, dataclass

import cv2
import numpy as np

from walkcomfort.imagery.cues import check_rgb

#: Width [px] frames are resized to before detection.
DETECT_WIDTH = 640
#: Frames narrower than this [px] are not searched by the batch (people_n unknown).
MIN_SOURCE_WIDTH = 120
#: Minimum SVM score of a kept detection (our choice; OpenCV's own default keeps all > 0).
MIN_SCORE = 0.3
#: Intersection over union above which two boxes are the same person.
NMS_IOU = 0.3
#: Detection window stride [px] (8 is Dalal & Triggs' cell size).
WIN_STRIDE = 8
#: Scale step of the detection pyramid.
PYRAMID_SCALE = 1.05


@dataclass(frozen=True)
class PeopleParams:
    """Parameters of the people detector (defaults: the module constants)."""

    width: int = DETECT_WIDTH
    min_score: float = MIN_SCORE
    nms_iou: float = NMS_IOU
    win_stride: int = WIN_STRIDE
    scale: float = PYRAMID_SCALE

    def to_dict(self) -> dict:
        return asdict(self)


_HOG = None


def _detector() -> cv2.HOGDescriptor:
    global _HOG
    if _HOG is None:
        if not hasattr(cv2, "HOGDescriptor"):
            from walkcomfort.errors import WalkcomfortError

            raise WalkcomfortError(f"this OpenCV ({cv2.__version__}) has no HOG people detector",
                                   fix="install OpenCV 4: pip install 'opencv-python-headless>=4.9,<5'")
        hog = cv2.HOGDescriptor()
        hog.setSVMDetector(cv2.HOGDescriptor_getDefaultPeopleDetector())
        _HOG = hog
    return _HOG


def non_max_suppression(boxes, scores, iou: float = NMS_IOU) -> np.ndarray:
    """Indices of the boxes kept by greedy non-maximum suppression.

    Parameters
    ----------
    boxes : array_like, shape (N, 4)
        ``x, y, w, h`` [px].
    scores : array_like, shape (N,)
        Higher is stronger.
    iou : float
        Intersection-over-union above which the weaker box is suppressed [-].

    Returns
    -------
    numpy.ndarray of int
        Kept indices, strongest first.
    """
    b = np.asarray(boxes, dtype=np.float64).reshape(-1, 4)
    s = np.asarray(scores, dtype=np.float64).ravel()
    if b.shape[0] == 0:
        return np.zeros(0, dtype=int)
    x1, y1 = b[:, 0], b[:, 1]
    x2, y2 = x1 + b[:, 2], y1 + b[:, 3]
    area = b[:, 2] * b[:, 3]
    order = np.argsort(-s, kind="stable")
    keep = []
    while order.size:
        i = order[0]
        keep.append(i)
        rest = order[1:]
        w = np.clip(np.minimum(x2[i], x2[rest]) - np.maximum(x1[i], x1[rest]), 0, None)
        h = np.clip(np.minimum(y2[i], y2[rest]) - np.maximum(y1[i], y1[rest]), 0, None)
        inter = w * h
        union = area[i] + area[rest] - inter
        order = rest[inter / np.where(union > 0, union, 1.0) <= iou]
    return np.asarray(keep, dtype=int)


def detect_people(rgb, params: PeopleParams | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Pedestrian boxes in one frame.

    Parameters
    ----------
    rgb : array_like, shape (H, W, 3)
        RGB frame, 8-bit.
    params : PeopleParams, optional

    Returns
    -------
    boxes : numpy.ndarray, shape (N, 4), int
        ``x, y, w, h`` in the frame's own pixel coordinates [px].
    scores : numpy.ndarray, shape (N,)
        SVM scores [-], strongest first.
    """
    p = params or PeopleParams()
    img = check_rgb(rgb)
    h, w = img.shape[:2]
    factor = p.width / w
    if w != p.width:
        interp = cv2.INTER_AREA if factor < 1.0 else cv2.INTER_LINEAR
        img = cv2.resize(img, (p.width, max(1, int(round(h * factor)))), interpolation=interp)
    if img.shape[0] < 128 or img.shape[1] < 64:
        return np.zeros((0, 4), dtype=int), np.zeros(0)
    # the detector works on gradients, which do not care about channel order
    rects, weights = _detector().detectMultiScale(img, winStride=(p.win_stride, p.win_stride),
                                                  padding=(8, 8), scale=p.scale)
    rects = np.asarray(rects, dtype=np.float64).reshape(-1, 4)
    weights = np.asarray(weights, dtype=np.float64).ravel()
    strong = weights >= p.min_score
    rects, weights = rects[strong], weights[strong]
    keep = non_max_suppression(rects, weights, p.nms_iou)
    rects, weights = rects[keep], weights[keep]
    boxes = np.round(rects / factor).astype(int)
    return boxes, weights


def count_people(rgb, params: PeopleParams | None = None) -> int:
    """Number of pedestrians detected in a frame [-] (a lower bound; see the module notes)."""
    boxes, _ = detect_people(rgb, params)
    return int(len(boxes))
