"""Blurring faces (and, on request, licence plates) in frames before they are shared.

Detection uses the Haar cascades that ship inside the OpenCV wheel
(``cv2.data.haarcascades``; Viola & Jones 2001, frontal-face cascade of Lienhart &
Maydt 2002) — nothing is downloaded. Frontal and profile cascades both run, the profile
one also on the mirrored frame (it is trained on one side only).

What this does and does not promise
-----------------------------------
A cascade misses faces that are small (below :data:`MIN_FACE_PX`), turned away, in
deep shadow or partly covered. Blurring lowers the risk of identifying passers-by; it
does not remove it. Before frames leave the research team, a person should look at
them (the share record lists every frame and its detections, so that review can be
targeted), and the study's ethics approval decides whether frames may be shared at all.

Each detected box is enlarged by :data:`BOX_MARGIN` on every side (cascades box the
inner face; hair, ears and chin identify too) and replaced by a strong Gaussian blur of
itself, pixelated first so that no detail survives deblurring.

References
----------
Viola, P., Jones, M. (2001). Rapid object detection using a boosted cascade of simple
features. IEEE CVPR 2001, vol. 1, I-511–I-518. doi:10.1109/CVPR.2001.990517

Lienhart, R., Maydt, J. (2002). An extended set of Haar-like features for rapid object
detection. IEEE ICIP 2002, vol. 1, I-900–I-903. doi:10.1109/ICIP.2002.1038171
"""

from __future__ import annotations

import os
from dataclasses import asdict, dataclass

import cv2
import numpy as np

from walkcomfort.errors import WalkcomfortError
from walkcomfort.imagery.cues import check_rgb

#: Smallest face side searched for [px] at the detection width.
MIN_FACE_PX = 20
#: Each box grows by this share of its side on every side before blurring.
BOX_MARGIN = 0.25
#: Width [px] frames are resized to for detection (boxes are mapped back).
DETECT_WIDTH = 960

_CASCADE_FILES = {
    "frontal": "haarcascade_frontalface_default.xml",
    "frontal_alt2": "haarcascade_frontalface_alt2.xml",
    "profile": "haarcascade_profileface.xml",
    "plate": "haarcascade_russian_plate_number.xml",
}
_CASCADES: dict[str, cv2.CascadeClassifier] = {}


@dataclass(frozen=True)
class FaceParams:
    """Detection parameters of :func:`detect_faces` (defaults: the module constants)."""

    min_face_px: int = MIN_FACE_PX
    scale_factor: float = 1.1
    min_neighbors: int = 4
    width: int = DETECT_WIDTH
    plates: bool = False

    def to_dict(self) -> dict:
        return asdict(self)


def _cascade(name: str) -> cv2.CascadeClassifier:
    if name not in _CASCADES:
        folder = getattr(getattr(cv2, "data", None), "haarcascades", "")
        path = os.path.join(folder, _CASCADE_FILES[name])
        clf = cv2.CascadeClassifier(path) if hasattr(cv2, "CascadeClassifier") else None
        if clf is None or clf.empty():
            raise WalkcomfortError(f"OpenCV {cv2.__version__} does not ship the Haar cascade {_CASCADE_FILES[name]}",
                                   fix="install OpenCV 4: pip install 'opencv-python-headless>=4.9,<5'")
        _CASCADES[name] = clf
    return _CASCADES[name]


def detect_faces(rgb, params: FaceParams | None = None) -> np.ndarray:
    """Face (and optionally licence-plate) boxes in a frame.

    Parameters
    ----------
    rgb : array_like, shape (H, W, 3)
        RGB frame, 8-bit.
    params : FaceParams, optional

    Returns
    -------
    numpy.ndarray, shape (N, 4), int
        ``x, y, w, h`` in the frame's pixel coordinates [px], before any margin.
    """
    p = params or FaceParams()
    img = check_rgb(rgb)
    h, w = img.shape[:2]
    factor = min(1.0, p.width / w)
    gray = cv2.cvtColor(img, cv2.COLOR_RGB2GRAY)
    if factor < 1.0:
        gray = cv2.resize(gray, (int(round(w * factor)), int(round(h * factor))), interpolation=cv2.INTER_AREA)
    # histogram equalisation: cascades were trained on normalised patches, and faces in
    # the shade of a street are otherwise missed
    gray = cv2.equalizeHist(gray)
    gw = gray.shape[1]
    found = []
    kw = dict(scaleFactor=p.scale_factor, minNeighbors=p.min_neighbors, minSize=(p.min_face_px, p.min_face_px))
    for name in ("frontal", "frontal_alt2", "profile"):
        found.extend(np.asarray(_cascade(name).detectMultiScale(gray, **kw)).reshape(-1, 4).tolist())
    mirrored = np.ascontiguousarray(gray[:, ::-1])
    for x, y, bw, bh in np.asarray(_cascade("profile").detectMultiScale(mirrored, **kw)).reshape(-1, 4).tolist():
        found.append([gw - x - bw, y, bw, bh])
    if p.plates:
        found.extend(np.asarray(_cascade("plate").detectMultiScale(gray, scaleFactor=p.scale_factor,
                                                                   minNeighbors=p.min_neighbors,
                                                                   minSize=(2 * p.min_face_px, p.min_face_px // 2)))
                     .reshape(-1, 4).tolist())
    if not found:
        return np.zeros((0, 4), dtype=int)
    boxes = merge_overlapping(np.asarray(found, dtype=np.float64)) / factor
    return np.round(boxes).astype(int)


def merge_overlapping(boxes, min_overlap: float = 0.3) -> np.ndarray:
    """Merge boxes that overlap into their bounding box (several cascades fire on one face).

    Two boxes are merged when their intersection covers more than ``min_overlap`` of the
    smaller one; merging repeats until no pair overlaps. Taking the union (not the
    strongest box) keeps every pixel any cascade found.
    """
    b = [list(map(float, r)) for r in np.asarray(boxes, dtype=np.float64).reshape(-1, 4)]
    merged = True
    while merged:
        merged = False
        for i in range(len(b)):
            for j in range(i + 1, len(b)):
                xi, yi, wi, hi = b[i]
                xj, yj, wj, hj = b[j]
                iw = min(xi + wi, xj + wj) - max(xi, xj)
                ih = min(yi + hi, yj + hj) - max(yi, yj)
                if iw > 0 and ih > 0 and iw * ih > min_overlap * min(wi * hi, wj * hj):
                    x0, y0 = min(xi, xj), min(yi, yj)
                    x1, y1 = max(xi + wi, xj + wj), max(yi + hi, yj + hj)
                    b[i] = [x0, y0, x1 - x0, y1 - y0]
                    del b[j]
                    merged = True
                    break
            if merged:
                break
    return np.asarray(b, dtype=np.float64).reshape(-1, 4)


def blur_regions(rgb, boxes, margin: float = BOX_MARGIN) -> np.ndarray:
    """Return a copy of the frame with each box (grown by ``margin``) made unrecognisable.

    Parameters
    ----------
    rgb : array_like, shape (H, W, 3)
        RGB frame, 8-bit (not modified).
    boxes : array_like, shape (N, 4)
        ``x, y, w, h`` [px].
    margin : float
        Growth of each box on every side, as a share of its width/height [-].

    Returns
    -------
    numpy.ndarray, shape (H, W, 3), uint8
        The blurred copy; pixels outside the grown boxes are unchanged.
    """
    img = check_rgb(rgb).copy()
    H, W = img.shape[:2]
    for x, y, w, h in np.asarray(boxes, dtype=np.float64).reshape(-1, 4):
        x0 = int(max(0, np.floor(x - margin * w)))
        y0 = int(max(0, np.floor(y - margin * h)))
        x1 = int(min(W, np.ceil(x + w + margin * w)))
        y1 = int(min(H, np.ceil(y + h + margin * h)))
        if x1 - x0 < 2 or y1 - y0 < 2:
            continue
        patch = img[y0:y1, x0:x1]
        ph, pw = patch.shape[:2]
        # pixelate to about 6 blocks across, then blur the blocks: no facial detail is left
        small = cv2.resize(patch, (max(1, pw // max(1, pw // 6)), max(1, ph // max(1, ph // 6))),
                           interpolation=cv2.INTER_AREA)
        coarse = cv2.resize(small, (pw, ph), interpolation=cv2.INTER_NEAREST)
        sigma = max(2.0, 0.15 * max(pw, ph))
        img[y0:y1, x0:x1] = cv2.GaussianBlur(coarse, (0, 0), sigma)
    return img


def blur_faces(rgb, params: FaceParams | None = None, margin: float = BOX_MARGIN) -> tuple[np.ndarray, np.ndarray]:
    """Detect faces (and plates if asked) and blur them.

    Returns
    -------
    image : numpy.ndarray, uint8
        Blurred copy of the frame.
    boxes : numpy.ndarray, shape (N, 4), int
        The detections that were blurred (``x, y, w, h`` before the margin) [px].
    """
    boxes = detect_faces(rgb, params)
    return blur_regions(rgb, boxes, margin), boxes
