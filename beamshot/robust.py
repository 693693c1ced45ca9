"""Row-wise robust statistics that ignore NaN (directions outside the photo are NaN by design).

numpy's ``nanmedian`` goes through masked arrays for small rows and is slow in the inner
loops here; a sort with NaN last and a pick of the middle finite element is exact and fast.
"""

from __future__ import annotations

import numpy as np

from .smoothing import gaussian_filter1d

__all__ = ["row_nanmedian", "row_mad_sigma", "nan_smooth_rows", "smoothed_noise_sigma"]

#: Scale from the median absolute deviation to the standard deviation of a normal
#: distribution, 1 / Phi^-1(3/4) (Rousseeuw & Croux 1993).
MAD_TO_SIGMA = 1.4826


def row_nanmedian(a: np.ndarray) -> np.ndarray:
    """Median of each row of a 2-D array, ignoring NaN; NaN for a row of NaN only.  The same values
    as ``np.nanmedian(a, axis=1)`` (the middle element, or the two middle ones added and halved)."""
    a = np.asarray(a, float)
    s = np.sort(a, axis=1)  # NaN sorts last (after +inf)
    n = (~np.isnan(a)).sum(axis=1)
    lo = np.clip((n - 1) // 2, 0, None)
    hi = np.clip(n // 2, 0, None)
    pick_lo = np.take_along_axis(s, lo[:, None], axis=1)[:, 0]
    pick_hi = np.take_along_axis(s, hi[:, None], axis=1)[:, 0]
    return np.where(n > 0, 0.5 * (pick_lo + pick_hi), np.nan)


def row_mad_sigma(a: np.ndarray) -> np.ndarray:
    """Per-row standard deviation estimated as 1.4826 x the median absolute deviation (NaN ignored)."""
    a = np.asarray(a, float)
    dev = np.abs(a - row_nanmedian(a)[:, None])
    return MAD_TO_SIGMA * row_nanmedian(dev)


def nan_smooth_rows(a: np.ndarray, sigma: float) -> np.ndarray:
    """Gaussian smoothing (``sigma`` samples) along each row that ignores NaN samples
    (normalised convolution: smoothed values over smoothed weights); NaN stays NaN."""
    finite = np.isfinite(a)
    num = gaussian_filter1d(np.where(finite, a, 0.0), sigma, axis=1, mode="nearest")
    den = gaussian_filter1d(finite.astype(float), sigma, axis=1, mode="nearest")
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(finite, num / den, np.nan)


def smoothed_noise_sigma(resid: np.ndarray, sigma: float) -> np.ndarray:
    """Per-row 1-sigma noise left after Gaussian smoothing of ``sigma`` samples, from the raw
    residuals: white noise of std s becomes s / sqrt(2 sqrt(pi) sigma) (variance of the
    Gaussian kernel's squared sum).  NaN rows give 0."""
    return np.nan_to_num(row_mad_sigma(resid) / np.sqrt(2.0 * np.sqrt(np.pi) * sigma), nan=0.0)
