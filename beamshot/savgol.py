"""Savitzky-Golay smoothing and derivatives of evenly spaced samples (Savitzky & Golay 1964).

Each output sample is the value (or derivative) at the window's centre of the least-squares
polynomial of degree ``order`` through the ``window`` samples around it; the coefficients are the
matching row of the pseudo-inverse of the window's Vandermonde matrix.  The ends are padded by
mirroring (the samples reflected about the end sample).  Written here instead of importing
``scipy.signal``, whose import alone takes seconds (it loads ``scipy.stats``).
"""

from __future__ import annotations

from math import factorial

import numpy as np

__all__ = ["savgol"]


def savgol(y: np.ndarray, window: int, order: int, *, deriv: int = 0, delta: float = 1.0, axis: int = -1) -> np.ndarray:
    """Savitzky-Golay filter of ``y`` along ``axis`` (``window`` odd and larger than ``order``)."""
    if window % 2 == 0 or window <= order:
        raise ValueError("window must be odd and larger than the polynomial order")
    half = window // 2
    x = np.arange(-half, half + 1, dtype=float)
    coef = np.linalg.pinv(np.vander(x, order + 1, increasing=True))[deriv] * factorial(deriv) / delta ** deriv
    y = np.moveaxis(np.asarray(y, float), axis, -1)
    pad = [(0, 0)] * (y.ndim - 1) + [(half, half)]
    yp = np.pad(y, pad, mode="reflect")
    windows = np.lib.stride_tricks.sliding_window_view(yp, window, axis=-1)
    out = windows @ coef
    return np.moveaxis(out, -1, axis)
