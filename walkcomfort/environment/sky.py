"""Sky conditions from sparse weather data: cloud cover and the clear-sky index.

Pure functions over numbers or numpy arrays; no I/O. Used by the weather sources
(``walkcomfort.routes.weather``) to turn a stated cloud cover or a file's hourly
irradiance into irradiance at a walk's instants.
"""

from __future__ import annotations

import numpy as np

#: Upper bound of a clear-sky index [-]: around sunrise and sunset the clear-sky value is
#: tiny and the ratio unstable; broken-cloud enhancement rarely exceeds this (common practice).
CLEARSKY_INDEX_MAX = 1.5
#: Clear-sky irradiance below which the index is not computed [W m⁻²].
CLEARSKY_INDEX_MIN_WM2 = 1.0


def cloud_scaled_ghi(ghi_clear_wm2, cloud_frac):
    """Global irradiance under a cloud cover, Kasten & Czeplak (1980) [W m⁻²].

    GHI = GHI_clear · (1 − 0.75 · N^3.4), N the cloud cover fraction 0…1.

    Parameters
    ----------
    ghi_clear_wm2 : float or array-like
        Clear-sky global horizontal irradiance [W m⁻²].
    cloud_frac : float or array-like
        Cloud cover [-], 0 (clear) … 1 (overcast); values outside are clipped.

    Returns
    -------
    ndarray
        Global horizontal irradiance [W m⁻²].

    References
    ----------
    Kasten, F. & Czeplak, G. (1980). Solar and terrestrial radiation dependent on
    the amount and type of cloud. Solar Energy 24, 177–189,
    doi:10.1016/0038-092X(80)90391-6.
    """
    n = np.clip(np.asarray(cloud_frac, float), 0.0, 1.0)
    return np.asarray(ghi_clear_wm2, float) * (1.0 - 0.75 * n ** 3.4)


def clearsky_index(measured_wm2, clear_wm2, fill_night: bool = True) -> np.ndarray:
    """Measured over clear-sky irradiance, bounded to 0…:data:`CLEARSKY_INDEX_MAX` [-].

    Parameters
    ----------
    measured_wm2, clear_wm2 : array-like
        Irradiance measured (or from a file) and its clear-sky counterpart for the same
        instants or intervals [W m⁻²].
    fill_night : bool, default True
        Where the clear-sky value is below :data:`CLEARSKY_INDEX_MIN_WM2` (night, sun at the
        horizon) the index is undefined; fill it from the nearest defined value (or 0 when
        none is), so it can be interpolated in time.

    Returns
    -------
    ndarray
        Clear-sky index per element.
    """
    m = np.asarray(measured_wm2, float)
    c = np.asarray(clear_wm2, float)
    with np.errstate(divide="ignore", invalid="ignore"):
        k = np.where(c > CLEARSKY_INDEX_MIN_WM2, m / c, np.nan)
    k = np.clip(k, 0.0, CLEARSKY_INDEX_MAX)
    if not fill_night:
        return k
    ok = np.isfinite(k)
    if not ok.any():
        return np.zeros_like(k)
    idx = np.arange(k.size)
    # nearest defined neighbour: backward fill then forward fill (as pandas bfill().ffill())
    nxt = np.where(ok, idx, k.size)
    nxt = np.minimum.accumulate(nxt[::-1])[::-1]
    prv = np.where(ok, idx, -1)
    prv = np.maximum.accumulate(prv)
    src = np.where(nxt < k.size, nxt, prv)
    return k[src]
