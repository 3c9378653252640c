"""What the walker saw: sky, greenery and brightness cues from one camera frame.

Pure functions over an RGB image held as a ``uint8`` array of shape ``(H, W, 3)``
(channel order R, G, B, as Pillow and scikit-image give it; OpenCV's own ``imread``
gives B, G, R — use :func:`walkcomfort.imagery.batch.load_frame`). Nothing here reads
or writes files, and nothing needs a GPU.

The rules, and why
------------------
Greenery
    The Excess Green index of Woebbecke et al. (1995) on chromatic coordinates,
    ``ExG = 2g − r − b`` with ``r = R/(R+G+B)`` and so on. Vegetation has a clearly
    positive ExG; grey, white, sky and most built surfaces sit at or below zero. A pixel
    is green when ExG exceeds a threshold: a fixed value (default 0.10, our choice,
    see :data:`EXG_THRESHOLD`) or Otsu's threshold on the frame's ExG histogram
    (Meyer & Camargo Neto 2008 used ExG with Otsu), never below a floor so that a
    frame without vegetation is not split into two "classes" anyway. Very dark pixels
    (R+G+B below :data:`MIN_CHROMA_SUM`) have meaningless chromatic coordinates and are
    never green. Excess Green alone also rises for yellow and ochre (a solid (255, 210, 0)
    patch has ExG 0.36): so a green pixel must also have green as its strongest channel
    and a hue of at least :data:`GREEN_MIN_HUE_DEG` (65°; pure yellow is 60°, ochre and
    sand 30–50°, sunlit foliage in daylight photographs about 70–160° — from memory,
    common practice in colour segmentation of vegetation). Yellow autumn leaves and
    dry grass are therefore not counted as greenery: the cue is of *green* vegetation.
Green view
    ``green_frac`` is the share of *all* frame pixels that are green — the per-image
    quantity that Li et al. (2015) pool over several views into the Green View Index.
    :func:`green_view_index` does that pooling over several frames.
Sky
    A pixel is sky when it is (1) in the upper field (the top :data:`SKY_UPPER_FIELD`
    of the rows: a chest camera looks roughly at the horizon, so sky below the middle
    of the frame is rare and blue objects there are common), (2) bright (luma ≥
    :data:`SKY_MIN_LUMA`), (3) blue-dominant — blue exceeds red by at least
    :data:`SKY_BLUE_MARGIN` and is not below green by more than the margin — *or*
    near-neutral but very bright (overcast sky, luma ≥ :data:`SKY_OVERCAST_LUMA`),
    (4) low-texture (local mean gradient below :data:`SKY_MAX_TEXTURE`: foliage and
    façades against the sky are textured; the window is 7×7 px at 640 px width and
    scales with the frame), and (5) part of a connected region that starts in the top
    :data:`SKY_TOP_BAND` of the rows or covers at least :data:`SKY_MIN_REGION_FRAC` of
    the frame (a blue car or a shop sign lower in the upper field is not sky; open sky
    between or below tree crowns that fringe the top edge is). The share is over the
    whole frame.
Brightness
    The mean luma ``Y' = 0.299 R' + 0.587 G' + 0.114 B'`` (ITU-R BT.601 weights) of the
    gamma-encoded image, scaled to 0…1. It is a cue of how bright the scene looked to
    the camera after its auto-exposure, not a photometric luminance.

References
----------
Woebbecke, D. M., Meyer, G. E., Von Bargen, K., Mortensen, D. A. (1995). Color indices
for weed identification under various soil, residue, and lighting conditions.
Transactions of the ASAE 38(1), 259–269. doi:10.13031/2013.27838

Meyer, G. E., Camargo Neto, J. (2008). Verification of color vegetation indices for
automated crop imaging applications. Computers and Electronics in Agriculture 63(2),
282–293. doi:10.1016/j.compag.2008.03.009

Li, X., Zhang, C., Li, W., Ricard, R., Meng, Q., Zhang, W. (2015). Assessing street-level
urban greenery using Google Street View and a modified green view index. Urban Forestry
& Urban Greening 14(3), 675–685. doi:10.1016/j.ufug.2015.06.006

Otsu, N. (1979). A threshold selection method from gray-level histograms. IEEE
Transactions on Systems, Man, and Cybernetics 9(1), 62–66. doi:10.1109/TSMC.1979.4310076
"""

from __future__ import annotations

from dataclasses import asdict, dataclass

import cv2
import numpy as np

from walkcomfort import columns as C
from walkcomfort.errors import InputError

#: Default ExG threshold for "green" (our choice: vegetation in daylight street photos
#: sits well above 0.1 while grey, white and sky sit near or below 0).
EXG_THRESHOLD = 0.10
#: Lowest threshold Otsu may return (a frame without vegetation must not be split).
EXG_OTSU_FLOOR = 0.08
#: Lowest HSV hue of a green pixel [°] (pure yellow is 60°; see the module notes).
GREEN_MIN_HUE_DEG = 65.0
#: Pixels with R+G+B below this (of 765) are too dark for chromatic coordinates.
MIN_CHROMA_SUM = 60
#: Share of rows, from the top, in which sky is looked for.
SKY_UPPER_FIELD = 0.65
#: Minimum luma (0…1) of a sky pixel.
SKY_MIN_LUMA = 0.35
#: Blue must exceed red by this many grey levels (and may trail green by at most this).
SKY_BLUE_MARGIN = 12
#: Near-neutral pixels count as (overcast) sky only above this luma (0…1).
SKY_OVERCAST_LUMA = 0.72
#: Maximum local texture (mean absolute Sobel gradient over a 7×7 box, grey levels per pixel).
SKY_MAX_TEXTURE = 6.0
#: A sky region must start within this share of rows from the top ...
SKY_TOP_BAND = 0.15
#: ... or cover at least this share of the frame.
SKY_MIN_REGION_FRAC = 0.08

# BT.601 luma weights, in R, G, B order
_LUMA = np.array([0.299, 0.587, 0.114], dtype=np.float32)


@dataclass(frozen=True)
class CueParams:
    """Parameters of the frame cues (defaults are the module constants).

    Kept in one frozen object so that the batch cache can key results on them: a
    change of any parameter invalidates cached cues.
    """

    exg_threshold: float | str = EXG_THRESHOLD   # a number, or "otsu"
    exg_otsu_floor: float = EXG_OTSU_FLOOR
    sky_upper_field: float = SKY_UPPER_FIELD
    sky_min_luma: float = SKY_MIN_LUMA
    sky_blue_margin: float = SKY_BLUE_MARGIN
    sky_overcast_luma: float = SKY_OVERCAST_LUMA
    sky_max_texture: float = SKY_MAX_TEXTURE
    sky_touch_top: bool = True
    sky_min_region_frac: float = SKY_MIN_REGION_FRAC
    sky_top_band: float = SKY_TOP_BAND

    def __post_init__(self):
        t = self.exg_threshold
        if isinstance(t, str):
            if t != "otsu":
                raise InputError(f"exg_threshold {t!r} is not allowed; use a number in (-1, 2) or 'otsu'",
                                 fix="pass e.g. exg_threshold=0.1 or exg_threshold='otsu'")
        elif not (-1.0 < float(t) < 2.0):
            raise InputError(f"exg_threshold {t!r} is outside the range of ExG (-1, 2)",
                             fix="pass a threshold such as 0.1, or 'otsu'")
        if not (0.0 < self.sky_upper_field <= 1.0):
            raise InputError(f"sky_upper_field {self.sky_upper_field!r} must be in (0, 1]",
                             fix="give the share of rows from the top in which sky may appear, e.g. 0.65")

    def to_dict(self) -> dict:
        return asdict(self)


def check_rgb(image, name: str = "image") -> np.ndarray:
    """Return ``image`` as a C-contiguous ``uint8`` (H, W, 3) array or raise :class:`InputError`."""
    arr = np.asarray(image)
    if arr.ndim == 3 and arr.shape[2] == 4:
        arr = arr[..., :3]
    if arr.ndim != 3 or arr.shape[2] != 3 or arr.shape[0] < 8 or arr.shape[1] < 8:
        raise InputError(f"{name} has shape {arr.shape}; an RGB frame of shape (H, W, 3) with H, W >= 8 is needed",
                         fix="pass an RGB image array (load it with walkcomfort.imagery.batch.load_frame)")
    if arr.dtype != np.uint8:
        if np.issubdtype(arr.dtype, np.floating) and np.nanmax(arr) <= 1.0:
            arr = np.clip(np.round(arr * 255.0), 0, 255)
        arr = np.clip(arr, 0, 255).astype(np.uint8)
    return np.ascontiguousarray(arr)


def chromatic_coordinates(rgb) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Chromatic coordinates ``r, g, b`` (each channel over the sum of the three).

    Parameters
    ----------
    rgb : array_like, shape (..., 3)
        Red, green, blue values (any non-negative scale; 8-bit images as they come).

    Returns
    -------
    r, g, b : numpy.ndarray
        Shares of each channel [-], summing to 1 where R+G+B > 0 and all 0 where the
        pixel is black.

    References
    ----------
    Woebbecke et al. (1995), doi:10.13031/2013.27838.
    """
    arr = _rgb_float(rgb)
    total = arr.sum(axis=-1)
    safe = np.where(total > 0, total, 1.0)
    out = arr / safe[..., None]
    out[total <= 0] = 0.0
    return out[..., 0], out[..., 1], out[..., 2]


def _rgb_float(rgb) -> np.ndarray:
    """``rgb`` as float32 with a last axis of 3 channels, or a one-line InputError."""
    arr = np.asarray(rgb, dtype=np.float32)
    if arr.shape[-1] != 3:
        raise InputError(f"colour array has last dimension {arr.shape[-1]}; 3 channels (R, G, B) are needed",
                         fix="pass an RGB array of shape (..., 3)")
    return arr


def excess_green(rgb) -> np.ndarray:
    """Excess Green index ``ExG = 2g − r − b`` on chromatic coordinates.

    Parameters
    ----------
    rgb : array_like, shape (..., 3)
        Red, green, blue values.

    Returns
    -------
    numpy.ndarray
        ExG [-], in [-1, 2]; 0 for any grey (R = G = B) and for black.

    References
    ----------
    Woebbecke et al. (1995), doi:10.13031/2013.27838.
    """
    arr = _rgb_float(rgb)
    total = arr.sum(axis=-1)
    # 2g - r - b = (2G - R - B) / (R + G + B): one division instead of three
    num = 2.0 * arr[..., 1] - arr[..., 0] - arr[..., 2]
    return np.where(total > 0, num / np.where(total > 0, total, 1.0), 0.0).astype(np.float32)


def _exg_u8(rgb: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """ExG of an (H, W, 3) uint8 frame via OpenCV (fast path), plus the channel sum."""
    f = rgb.astype(np.float32)
    r, g, b = cv2.split(f)
    total = r + g + b
    num = 2.0 * g - r - b
    exg = cv2.divide(num, np.maximum(total, 1.0))
    return exg, total


def green_hue(rgb) -> np.ndarray:
    """Whether each pixel's hue is that of green vegetation (see the module notes).

    Green is the strongest channel (hue above 60°, at most 180°) and the hue is at least
    :data:`GREEN_MIN_HUE_DEG`. In HSV, with green the maximum,
    ``H = 60° · (2 + (B − R) / (G − min(R, B)))``, so ``H ≥ 65°`` is
    ``12 (B − R) + 11 (G − min(R, B)) ≥ 0`` for the default: integers, no division.
    """
    i = np.asarray(rgb).astype(np.int32)
    r, g, b = i[..., 0], i[..., 1], i[..., 2]
    span = g - np.minimum(r, b)
    k = (GREEN_MIN_HUE_DEG - 60.0) / 60.0  # (B - R)/span >= k - 1
    return (g > r) & (g >= b) & ((b - r) >= (k - 1.0) * span)


def otsu_threshold(values, bins: int = 256, value_range: tuple[float, float] | None = None) -> float:
    """Otsu's threshold on a set of values (maximises the between-class variance).

    Parameters
    ----------
    values : array_like
        Sample (NaN ignored).
    bins : int
        Histogram bins.
    value_range : (float, float), optional
        Histogram range; default the sample's min and max.

    Returns
    -------
    float
        The threshold: values ``> t`` form the upper class. NaN for an empty or constant sample.

    References
    ----------
    Otsu (1979), doi:10.1109/TSMC.1979.4310076.
    """
    v = np.asarray(values, dtype=np.float64).ravel()
    v = v[np.isfinite(v)]
    if v.size == 0:
        return float("nan")
    lo, hi = value_range if value_range is not None else (float(v.min()), float(v.max()))
    if not hi > lo:
        return float("nan")
    hist, edges = np.histogram(v, bins=bins, range=(lo, hi))
    p = hist.astype(np.float64) / hist.sum()
    centres = 0.5 * (edges[:-1] + edges[1:])
    w0 = np.cumsum(p)
    mu = np.cumsum(p * centres)
    mu_t = mu[-1]
    w1 = 1.0 - w0
    with np.errstate(divide="ignore", invalid="ignore"):
        between = (mu_t * w0 - mu) ** 2 / (w0 * w1)
    between[~np.isfinite(between)] = -1.0
    k = int(np.argmax(between))
    # between separated modes the criterion is flat over the empty bins: take the middle
    # of that plateau rather than its first bin, so the cut sits in the gap
    top = between[k]
    end = k
    while end + 1 < between.size and between[end + 1] >= top - 1e-12 * abs(top):
        end += 1
    return float(edges[(k + end) // 2 + 1])


def green_mask(rgb, threshold: float | str = EXG_THRESHOLD, otsu_floor: float = EXG_OTSU_FLOOR) -> np.ndarray:
    """Boolean mask of vegetation pixels by Excess Green.

    Parameters
    ----------
    rgb : array_like, shape (H, W, 3)
        RGB frame, 8-bit.
    threshold : float or "otsu"
        ExG above which a pixel is green [-]; ``"otsu"`` picks it per frame
        (Otsu 1979) but never below ``otsu_floor``.
    otsu_floor : float
        Lowest threshold Otsu may return [-].

    Returns
    -------
    numpy.ndarray of bool, shape (H, W)
    """
    img = check_rgb(rgb)
    exg, total = _exg_u8(img)
    t = _resolve_exg_threshold(exg, total, threshold, otsu_floor)
    return (exg > t) & (total >= MIN_CHROMA_SUM) & green_hue(img)


def _resolve_exg_threshold(exg, total, threshold, otsu_floor) -> float:
    if isinstance(threshold, str):
        if threshold != "otsu":
            raise InputError(f"threshold {threshold!r} is not allowed; use a number or 'otsu'",
                             fix="pass threshold=0.1 or threshold='otsu'")
        usable = exg[total >= MIN_CHROMA_SUM]
        t = otsu_threshold(usable, bins=256, value_range=(-1.0, 2.0))
        return max(t, otsu_floor) if np.isfinite(t) else float("inf")
    return float(threshold)


def green_fraction(rgb, threshold: float | str = EXG_THRESHOLD, otsu_floor: float = EXG_OTSU_FLOOR) -> float:
    """Share of all frame pixels that are vegetation by Excess Green [-] (0…1).

    This is the per-view share of Li et al. (2015, doi:10.1016/j.ufug.2015.06.006):
    green pixels over all pixels of the image. See :func:`green_mask` for the rule.
    """
    return float(green_mask(rgb, threshold, otsu_floor).mean())


def green_view_index(green_pixels, total_pixels) -> float:
    """Green View Index pooled over several views, in percent.

    ``GVI = 100 · Σ green pixels / Σ pixels`` over the images taken at one place
    (Li et al. 2015 pool 18 views per site; for a chest camera, pool the frames of a
    street segment or a time window).

    Parameters
    ----------
    green_pixels : array_like
        Green pixel count per view [-].
    total_pixels : array_like
        Pixel count per view [-] (same length).

    Returns
    -------
    float
        GVI [%]; NaN when there are no pixels.

    References
    ----------
    Li et al. (2015), doi:10.1016/j.ufug.2015.06.006.
    """
    g = np.asarray(green_pixels, dtype=np.float64)
    n = np.asarray(total_pixels, dtype=np.float64)
    if g.shape != n.shape:
        raise InputError(f"green_pixels has shape {g.shape} but total_pixels has {n.shape}",
                         fix="pass one green count and one pixel count per view")
    if np.any(g < 0) or np.any(g > n):
        raise InputError("a green pixel count is negative or exceeds its view's pixel count",
                         fix="check the counts: 0 <= green <= total for every view")
    total = n.sum()
    return float(100.0 * g.sum() / total) if total > 0 else float("nan")


def luma(rgb) -> np.ndarray:
    """BT.601 luma of an 8-bit RGB frame, as float32 grey levels 0…255."""
    img = check_rgb(rgb)
    return _luma_u8(img).astype(np.float32)


def _luma_u8(img: np.ndarray) -> np.ndarray:
    # cv2 uses the same BT.601 weights; RGB2GRAY expects R, G, B order here
    return cv2.cvtColor(img, cv2.COLOR_RGB2GRAY)


def brightness_fraction(rgb) -> float:
    """Mean BT.601 luma of the gamma-encoded frame, scaled to 0…1 [-]."""
    img = check_rgb(rgb)
    return float(_luma_u8(img).mean() / 255.0)


def _texture_box(width: int) -> int:
    """The texture window for a frame ``width`` px wide: 7 px at 640 px, odd, at least 3."""
    return max(3, int(round(7 * width / 640)) | 1)


def texture_map(gray_u8: np.ndarray, box: int = 7) -> np.ndarray:
    """Local texture: mean absolute Sobel gradient over a ``box``×``box`` window.

    Parameters
    ----------
    gray_u8 : numpy.ndarray, shape (H, W), uint8
        Grey image.
    box : int
        Window side [px].

    Returns
    -------
    numpy.ndarray, float32
        |∂I/∂x| + |∂I/∂y| averaged over the window [grey levels px⁻¹]; a ramp of one
        grey level per pixel gives 1.
    """
    g = gray_u8.astype(np.float32)
    # the 3x3 Sobel kernel answers 8 to a ramp of 1 level/px (weights 1+2+1, distance 2)
    gx = cv2.Sobel(g, cv2.CV_32F, 1, 0, ksize=3) / 8.0
    gy = cv2.Sobel(g, cv2.CV_32F, 0, 1, ksize=3) / 8.0
    mag = np.abs(gx) + np.abs(gy)
    return cv2.blur(mag, (box, box))


def sky_mask(rgb, params: CueParams | None = None, *, _gray=None, _texture=None) -> np.ndarray:
    """Boolean mask of sky pixels by the rule in the module docstring.

    Parameters
    ----------
    rgb : array_like, shape (H, W, 3)
        RGB frame, 8-bit.
    params : CueParams, optional
        Thresholds (defaults: the module constants).

    Returns
    -------
    numpy.ndarray of bool, shape (H, W)
    """
    p = params or CueParams()
    img = check_rgb(rgb)
    h = img.shape[0]
    rows = max(1, int(round(p.sky_upper_field * h)))
    top = img[:rows]
    gray = _gray[:rows] if _gray is not None else _luma_u8(top)
    tex = _texture[:rows] if _texture is not None else texture_map(gray, _texture_box(img.shape[1]))
    r = top[..., 0].astype(np.int16)
    g = top[..., 1].astype(np.int16)
    b = top[..., 2].astype(np.int16)
    y = gray.astype(np.float32) / 255.0
    margin = p.sky_blue_margin
    blue = (b - r >= margin) & (b - g >= -margin)
    neutral = (np.abs(b - r) < margin) & (np.abs(b - g) < margin) & (b >= r - 3)
    candidate = (y >= p.sky_min_luma) & (blue | (neutral & (y >= p.sky_overcast_luma))) & (tex <= p.sky_max_texture)
    if p.sky_touch_top and candidate.any():
        n, labels, stats, _ = cv2.connectedComponentsWithStats(candidate.astype(np.uint8), connectivity=4)
        keep = (stats[:, cv2.CC_STAT_AREA] >= p.sky_min_region_frac * img.shape[0] * img.shape[1]) | \
            (stats[:, cv2.CC_STAT_TOP] <= p.sky_top_band * img.shape[0])
        keep[0] = False
        candidate = keep[labels]
    out = np.zeros(img.shape[:2], dtype=bool)
    out[:rows] = candidate
    return out


def sky_fraction(rgb, params: CueParams | None = None) -> float:
    """Share of all frame pixels classified as sky [-] (0…1); see :func:`sky_mask`."""
    return float(sky_mask(rgb, params).mean())


def frame_cues(rgb, params: CueParams | None = None, return_masks: bool = False):
    """All scene cues of one frame in one pass.

    Parameters
    ----------
    rgb : array_like, shape (H, W, 3)
        RGB frame, 8-bit.
    params : CueParams, optional
    return_masks : bool
        Also return the masks and the luma (for the quality checks, without recomputing).

    Returns
    -------
    dict
        ``sky_frac`` [-], ``green_frac`` [-], ``brightness_frac`` [-] (glossary names
        from :mod:`walkcomfort.columns`), and ``green_px``, ``total_px`` (counts, for
        :func:`green_view_index`).
    masks : dict, only with ``return_masks``
        ``sky`` and ``green`` (bool, H×W) and ``gray`` (uint8 luma, H×W).
    """
    p = params or CueParams()
    img = check_rgb(rgb)
    gray = _luma_u8(img)
    rows = max(1, int(round(p.sky_upper_field * img.shape[0])))
    tex = texture_map(gray[:rows], _texture_box(img.shape[1]))
    sky = sky_mask(img, p, _gray=gray, _texture=tex)
    if isinstance(p.exg_threshold, str):
        exg, total = _exg_u8(img)
        t = _resolve_exg_threshold(exg, total, p.exg_threshold, p.exg_otsu_floor)
        green = (exg > t) & (total >= MIN_CHROMA_SUM) & green_hue(img)
    else:
        # ExG > t  <=>  2G - R - B > t·(R+G+B) where the sum is positive: integers, no division
        i = img.astype(np.int16)
        num = 2 * i[..., 1] - i[..., 0] - i[..., 2]
        total = i[..., 0] + i[..., 1] + i[..., 2]
        green = (num > float(p.exg_threshold) * total) & (total >= MIN_CHROMA_SUM) & green_hue(img)
    n = img.shape[0] * img.shape[1]
    green_px = int(np.count_nonzero(green))
    out = {
        C.SKY_FRAC: float(np.count_nonzero(sky) / n),
        C.GREEN_FRAC: float(green_px / n),
        C.BRIGHTNESS_FRAC: float(gray.mean() / 255.0),
        "green_px": green_px,
        "total_px": int(n),
    }
    if return_masks:
        return out, {"sky": sky, "green": green, "gray": gray}
    return out
