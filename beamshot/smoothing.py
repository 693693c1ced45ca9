"""Gaussian smoothing along one axis, without SciPy on the import path of an analysis.

The same filter as ``scipy.ndimage.gaussian_filter1d`` (order 0, ``truncate=4``): weights
``exp(-x^2 / 2 sigma^2)`` for integer ``x`` within ``int(4 sigma + 0.5)`` of the centre, normalised to
sum 1, with the array extended at its ends by ``mode`` (``"reflect"``: mirrored about the edge,
the edge value repeated; ``"nearest"``: the edge value; ``"wrap"``: periodic).  The convolution runs
in OpenCV (``cv2.sepFilter2D``, float64 accumulation); tests/test_numerics.py checks it against
SciPy's.  SciPy's ndimage is kept out of the analysis because importing it takes about 0.3 s, a
third of a whole ``beamshot analyze`` process (measured, benchmarks/bench_analysis.py).
"""

from __future__ import annotations

from functools import lru_cache

import cv2
import numpy as np

__all__ = ["gaussian_filter1d", "gaussian_kernel"]

#: numpy.pad modes of the boundary extensions, by SciPy's names
_PAD_MODES = {"reflect": "symmetric", "nearest": "edge", "wrap": "wrap"}


def gaussian_kernel(sigma: float, truncate: float = 4.0) -> np.ndarray:
    """The normalised sampled Gaussian of standard deviation ``sigma`` (samples), odd length."""
    return _kernel(float(sigma), float(truncate)).copy()


@lru_cache(maxsize=32)
def _kernel(sigma: float, truncate: float) -> np.ndarray:
    """:func:`gaussian_kernel`, kept (read-only) for the next call with the same width."""
    w = _new_kernel(sigma, truncate)
    w.flags.writeable = False
    return w


def _new_kernel(sigma: float, truncate: float) -> np.ndarray:
    radius = int(truncate * float(sigma) + 0.5)
    x = np.arange(-radius, radius + 1)
    w = np.exp(-0.5 / (float(sigma) * float(sigma)) * x * x)
    return w / w.sum()


def gaussian_filter1d(a, sigma: float, axis: int = -1, mode: str = "reflect") -> np.ndarray:
    """``a`` smoothed along ``axis`` by a Gaussian of ``sigma`` samples (see the module docstring).

    >>> gaussian_filter1d(np.array([0.0, 0.0, 1.0, 0.0, 0.0]), 1.0).round(4).tolist()
    [0.0584, 0.2421, 0.3989, 0.2421, 0.0584]
    """
    if mode not in _PAD_MODES:
        raise ValueError(f"mode must be one of {sorted(_PAD_MODES)}")
    a = np.asarray(a)
    out_dtype = a.dtype if a.dtype in (np.float32, np.float64) else np.float64
    w = _kernel(float(sigma), 4.0)
    r = (w.size - 1) // 2
    moved = np.moveaxis(np.asarray(a, np.float64), axis, -1)
    shape = moved.shape
    rows = moved.reshape(-1, shape[-1])
    if rows.size == 0:
        return np.asarray(a, out_dtype).copy()
    padded = _padded(rows, r, mode)
    # a 1 x (2r+1) correlation per row; the padding already holds the extension, so the border
    # type only fills columns that are cut away below
    done = cv2.sepFilter2D(padded, cv2.CV_64F, w, np.ones(1), borderType=cv2.BORDER_CONSTANT)
    done = done.reshape(padded.shape)[:, r:r + shape[-1]]
    return np.moveaxis(done.reshape(shape), -1, axis).astype(out_dtype, copy=False)


def _padded(rows: np.ndarray, r: int, mode: str) -> np.ndarray:
    """``np.pad(rows, ((0, 0), (r, r)), mode=_PAD_MODES[mode])``: the same values, copied into place
    directly (numpy's general padding costs more than the copies for the maps' short rows); a
    padding longer than the rows (mirrored or wrapped more than once) is left to numpy."""
    m, n = rows.shape
    if r == 0 or (mode != "nearest" and r > n):
        return np.pad(rows, ((0, 0), (r, r)), mode=_PAD_MODES[mode])
    out = np.empty((m, n + 2 * r))
    out[:, r:r + n] = rows
    if mode == "nearest":
        out[:, :r] = rows[:, :1]
        out[:, r + n:] = rows[:, -1:]
    elif mode == "wrap":
        out[:, :r] = rows[:, n - r:]
        out[:, r + n:] = rows[:, :r]
    else:  # reflect: mirrored about the edge, the edge value repeated (numpy's "symmetric")
        out[:, :r] = rows[:, r - 1::-1]
        out[:, r + n:] = rows[:, :n - r - 1:-1] if n - r - 1 >= 0 else rows[:, ::-1]
    return out
