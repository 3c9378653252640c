"""Frame quality: flags that keep blurred, badly exposed or blocked frames out of the model.

A chest camera swings, points at the walker's own jacket, faces into the low sun and
films through a raindrop. Cues from such frames describe the camera, not the street, so
each frame gets four flags and ``frame_ok`` is True only when none is raised.

Rules (all on the BT.601 luma of the frame, reduced to :data:`QUALITY_WIDTH` pixels wide
when it is wider, so that the thresholds mean the same thing for every camera; smaller
frames are judged as they are, never enlarged):

blur
    Variance of the Laplacian (Pech-Pacheco et al. 2000) below :data:`BLUR_MIN_LAPVAR`.
    The Laplacian responds to edges; motion or focus blur removes them, so its variance
    falls. The threshold is common practice for 8-bit photographs and depends on the
    scene: a frame of clear sky is "blurred" by this measure, which is why the sky share
    is given to :func:`quality_flags` and frames that are mostly sky are exempted.
overexposed
    More than :data:`OVER_MAX_FRAC` of the frame clipped (luma ≥ 250) outside the sky, or
    more than :data:`OVER_MAX_TOTAL` clipped in all. A white overcast sky often clips and
    is still a fair view (its share is counted as sky); a frame washed out by the low sun
    clips everywhere.
underexposed
    Mean luma below :data:`UNDER_MAX_MEAN` or more than :data:`UNDER_MAX_FRAC` of the
    pixels at luma ≤ 10 (crushed shadows; night or a covered lens).
obstructed
    More than :data:`OBSTRUCTED_MAX_FRAC` of the frame is *featureless and not sky*:
    local standard deviation below :data:`OBSTRUCTED_MAX_STD` grey levels over a 15×15
    window, leaving out the sky mask and any blue-dominant pixel of the upper field
    (a dusk sky is dark and featureless, yet it is a view, not an obstruction). An object a few centimetres from a wide-angle lens (a strap, a hand, a
    sleeve, the inside of a bag) is far out of focus and fills the view with such a
    region; streets, façades and foliage do not. This is our heuristic; thresholds are
    parameters.

References
----------
Pech-Pacheco, J. L., Cristóbal, G., Chamorro-Martínez, J., Fernández-Valdivia, J. (2000).
Diatom autofocusing in brightfield microscopy: a comparative study. Proceedings 15th
International Conference on Pattern Recognition, vol. 3, 314–317.
doi:10.1109/ICPR.2000.903548
"""

from __future__ import annotations

from dataclasses import asdict, dataclass

import cv2
import numpy as np

from walkcomfort import columns as C
from walkcomfort.imagery.cues import SKY_BLUE_MARGIN, SKY_UPPER_FIELD, check_rgb

#: Width [px] the luma is resized to before the quality measures (keeps thresholds comparable).
QUALITY_WIDTH = 640
#: Variance of the Laplacian below which a frame is blurred [grey levels²] (common practice).
BLUR_MIN_LAPVAR = 60.0
#: A frame with more sky than this is not judged for blur (sky has no edges).
BLUR_SKY_EXEMPT = 0.6
#: Share of the frame clipped (luma ≥ 250) outside the sky above which it is overexposed ...
OVER_MAX_FRAC = 0.30
#: ... or clipped anywhere.
OVER_MAX_TOTAL = 0.75
#: Mean luma (0…1) below which a frame is underexposed.
UNDER_MAX_MEAN = 0.08
#: Share of crushed pixels (luma ≤ 10) above which a frame is underexposed.
UNDER_MAX_FRAC = 0.50
#: Local standard deviation [grey levels] below which a pixel is featureless.
OBSTRUCTED_MAX_STD = 2.0
#: Share of featureless non-sky pixels above which the lens is taken as obstructed.
OBSTRUCTED_MAX_FRAC = 0.45


@dataclass(frozen=True)
class QualityParams:
    """Thresholds of the quality flags (defaults: the module constants)."""

    blur_min_lapvar: float = BLUR_MIN_LAPVAR
    blur_sky_exempt: float = BLUR_SKY_EXEMPT
    over_max_frac: float = OVER_MAX_FRAC
    over_max_total: float = OVER_MAX_TOTAL
    under_max_mean: float = UNDER_MAX_MEAN
    under_max_frac: float = UNDER_MAX_FRAC
    obstructed_max_std: float = OBSTRUCTED_MAX_STD
    obstructed_max_frac: float = OBSTRUCTED_MAX_FRAC
    width: int = QUALITY_WIDTH

    def to_dict(self) -> dict:
        return asdict(self)


def _gray_at_width(rgb: np.ndarray, width: int, gray=None) -> np.ndarray:
    gray = cv2.cvtColor(rgb, cv2.COLOR_RGB2GRAY) if gray is None else gray
    h, w = gray.shape
    # only ever reduce: enlarging a small frame would smooth it and fake a blur
    if w > width:
        gray = cv2.resize(gray, (width, max(1, int(round(h * width / w)))), interpolation=cv2.INTER_AREA)
    return gray


def laplacian_variance(gray) -> float:
    """Variance of the Laplacian of a grey image [grey levels²] (Pech-Pacheco et al. 2000).

    Parameters
    ----------
    gray : array_like, shape (H, W)
        Grey image, 8-bit or float grey levels.

    Returns
    -------
    float
        ``var(∇²I)`` with OpenCV's 3×3 aperture (kernel ``[[0,1,0],[1,-4,1],[0,1,0]]``).
    """
    g = np.asarray(gray)
    if g.ndim != 2:
        from walkcomfort.errors import InputError

        raise InputError(f"grey image has shape {g.shape}; a 2-D array is needed",
                         fix="convert the frame to grey first (cv2.cvtColor(..., cv2.COLOR_RGB2GRAY))")
    lap = cv2.Laplacian(g.astype(np.float32), cv2.CV_32F, ksize=1)
    return float(lap.var())


def local_std(gray_u8: np.ndarray, box: int = 15) -> np.ndarray:
    """Standard deviation of the grey level in a ``box``×``box`` window [grey levels]."""
    g = gray_u8.astype(np.float32)
    mean = cv2.blur(g, (box, box))
    mean_sq = cv2.sqrBoxFilter(g, cv2.CV_32F, (box, box))
    return cv2.sqrt(np.maximum(mean_sq - mean * mean, 0.0))


def quality_measures(rgb, params: QualityParams | None = None, sky=None, gray=None) -> dict:
    """The raw measures behind the flags.

    Parameters
    ----------
    rgb : array_like, shape (H, W, 3)
        RGB frame, 8-bit.
    params : QualityParams, optional
    sky : numpy.ndarray of bool, shape (H, W), optional
        Sky mask of the frame (from :func:`walkcomfort.imagery.cues.sky_mask`); sky is
        not counted as featureless obstruction.
    gray : numpy.ndarray, uint8, shape (H, W), optional
        The frame's BT.601 luma when already computed.

    Returns
    -------
    dict
        ``frame_lapvar`` [grey levels²], ``clipped_frac`` [-] (clipped and not sky),
        ``clipped_total_frac`` [-], ``crushed_frac`` [-],
        ``mean_luma_frac`` [-], ``featureless_frac`` [-] (featureless, non-sky share).
    """
    p = params or QualityParams()
    img = check_rgb(rgb)
    gray = _gray_at_width(img, p.width, gray)
    n = gray.size
    clipped = gray >= 250
    std = local_std(gray)
    featureless = std < p.obstructed_max_std
    # a dusk or deep-blue sky is featureless but not an obstruction: blue-dominant pixels
    # in the upper field are left out whatever their brightness
    small = img if img.shape[:2] == gray.shape else cv2.resize(img, gray.shape[::-1], interpolation=cv2.INTER_AREA)
    upper = int(round(SKY_UPPER_FIELD * small.shape[0]))
    skylike = np.zeros(gray.shape, dtype=bool)
    skylike[:upper] = (small[:upper, :, 2].astype(np.int16) - small[:upper, :, 0]) >= SKY_BLUE_MARGIN
    featureless &= ~skylike
    if sky is not None:
        sky = np.asarray(sky, dtype=bool)
        if sky.shape != gray.shape:
            sky = cv2.resize(sky.astype(np.uint8), gray.shape[::-1], interpolation=cv2.INTER_NEAREST).astype(bool)
        featureless &= ~sky
    return {
        C.FRAME_LAPVAR: laplacian_variance(gray),
        "clipped_frac": float(np.count_nonzero(clipped & ~sky) / n) if sky is not None
        else float(np.count_nonzero(clipped) / n),
        "clipped_total_frac": float(np.count_nonzero(clipped) / n),
        "crushed_frac": float(np.count_nonzero(gray <= 10) / n),
        "mean_luma_frac": float(gray.mean() / 255.0),
        "featureless_frac": float(np.count_nonzero(featureless) / n),
    }


def flags_from_measures(measures: dict, sky_frac: float = 0.0, params: QualityParams | None = None) -> dict:
    """Turn :func:`quality_measures` into the four ``qa_frame_*`` flags and ``frame_ok``."""
    p = params or QualityParams()
    blur = bool(measures[C.FRAME_LAPVAR] < p.blur_min_lapvar and not (sky_frac > p.blur_sky_exempt))
    over = bool(measures["clipped_frac"] > p.over_max_frac or measures["clipped_total_frac"] > p.over_max_total)
    under = bool(measures["mean_luma_frac"] < p.under_max_mean or measures["crushed_frac"] > p.under_max_frac)
    # a dark, featureless frame is reported as underexposed, not as obstructed as well
    blocked = bool(measures["featureless_frac"] > p.obstructed_max_frac and not under)
    return {
        C.QA_FRAME_BLUR: blur,
        C.QA_FRAME_OVEREXPOSED: over,
        C.QA_FRAME_UNDEREXPOSED: under,
        C.QA_FRAME_OBSTRUCTED: blocked,
        C.FRAME_OK: not (blur or over or under or blocked),
    }


def quality_flags(rgb, params: QualityParams | None = None, sky=None, sky_frac: float | None = None,
                  gray=None) -> dict:
    """Quality flags of one frame.

    Parameters
    ----------
    rgb : array_like, shape (H, W, 3)
        RGB frame, 8-bit.
    params : QualityParams, optional
    sky : numpy.ndarray of bool, optional
        Sky mask (see :func:`quality_measures`).
    sky_frac : float, optional
        Sky share [-]; default the mean of ``sky`` (0 without it).

    Returns
    -------
    dict
        ``qa_frame_blur``, ``qa_frame_overexposed``, ``qa_frame_underexposed``,
        ``qa_frame_obstructed``, ``frame_ok`` (bools) and ``frame_lapvar`` [grey levels²].
    """
    m = quality_measures(rgb, params, sky=sky, gray=gray)
    if sky_frac is None:
        sky_frac = float(np.mean(sky)) if sky is not None else 0.0
    out = flags_from_measures(m, sky_frac, params)
    out[C.FRAME_LAPVAR] = m[C.FRAME_LAPVAR]
    return out
