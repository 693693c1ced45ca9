"""CIE chromaticity coordinates from XYZ, with the covariance carried through.

Formulas (CIE 15:2004; as in colour-science ``models/cie_ucs.py`` and ``models/cie_luv.py``):

- CIE 1931:  x = X / (X + Y + Z),  y = Y / (X + Y + Z)
- CIE 1960 UCS:  u = 4X / (X + 15Y + 3Z),  v = 6Y / (X + 15Y + 3Z)
- CIE 1976 UCS:  u' = 4X / (X + 15Y + 3Z),  v' = 9Y / (X + 15Y + 3Z)   (u' = u, v' = 1.5 v)

A covariance of X, Y, Z propagates to (u', v') by the first-order law (JCGM 100, 5.2):
``C_uv = J C_XYZ J^T`` with J the Jacobian below (derived by hand from the formulas above).

>>> [round(float(c), 4) for c in xy_of([0.9505, 1.0, 1.089])]
[0.3127, 0.329]
"""

from __future__ import annotations

import numpy as np

__all__ = ["xy_of", "uv_prime_of", "uv1960_of", "uv_prime_jacobian", "uv_prime_covariance", "delta_uv_prime",
           "uv_prime_from_xy"]


def xy_of(xyz) -> np.ndarray:
    """CIE 1931 (x, y) of XYZ ``(..., 3)``; NaN where X + Y + Z is not positive."""
    xyz = np.asarray(xyz, float)
    s = xyz.sum(axis=-1, keepdims=True)
    with np.errstate(invalid="ignore", divide="ignore"):
        out = xyz[..., :2] / np.where(s > 0, s, np.nan)
    return out


def _den(xyz: np.ndarray) -> np.ndarray:
    d = xyz[..., 0] + 15.0 * xyz[..., 1] + 3.0 * xyz[..., 2]
    return np.where(d > 0, d, np.nan)


def uv_prime_of(xyz) -> np.ndarray:
    """CIE 1976 (u', v') of XYZ ``(..., 3)``."""
    xyz = np.asarray(xyz, float)
    with np.errstate(invalid="ignore", divide="ignore"):
        d = _den(xyz)
        return np.stack([4.0 * xyz[..., 0] / d, 9.0 * xyz[..., 1] / d], axis=-1)


def uv1960_of(xyz) -> np.ndarray:
    """CIE 1960 (u, v) of XYZ ``(..., 3)`` (the plane CCT and Duv are defined on)."""
    up = uv_prime_of(xyz)
    return np.stack([up[..., 0], up[..., 1] / 1.5], axis=-1)


def uv_prime_from_xy(xy) -> np.ndarray:
    """(u', v') of CIE 1931 (x, y): u' = 4x / (-2x + 12y + 3), v' = 9y / (-2x + 12y + 3)."""
    xy = np.asarray(xy, float)
    d = -2.0 * xy[..., 0] + 12.0 * xy[..., 1] + 3.0
    return np.stack([4.0 * xy[..., 0] / d, 9.0 * xy[..., 1] / d], axis=-1)


def uv_prime_jacobian(xyz) -> np.ndarray:
    """d(u', v') / d(X, Y, Z), shape ``(2, 3)`` for one XYZ.

    With D = X + 15Y + 3Z: du'/dX = 4(D - X)/D^2, du'/dY = -60X/D^2, du'/dZ = -12X/D^2;
    dv'/dX = -9Y/D^2, dv'/dY = 9(D - 15Y)/D^2, dv'/dZ = -27Y/D^2.
    """
    x, y, z = (float(v) for v in np.asarray(xyz, float))
    d = x + 15.0 * y + 3.0 * z
    d2 = d * d
    return np.array([[4.0 * (d - x) / d2, -60.0 * x / d2, -12.0 * x / d2],
                     [-9.0 * y / d2, 9.0 * (d - 15.0 * y) / d2, -27.0 * y / d2]])


def uv_prime_covariance(xyz, cov_xyz) -> np.ndarray:
    """2x2 covariance of (u', v') from the 3x3 covariance of XYZ (first order, JCGM 100 5.2)."""
    j = uv_prime_jacobian(xyz)
    return j @ np.asarray(cov_xyz, float) @ j.T


def delta_uv_prime(a, b) -> np.ndarray:
    """Euclidean distance between two (u', v') points ``(..., 2)``: the usual tint difference."""
    a, b = np.asarray(a, float), np.asarray(b, float)
    return np.hypot(a[..., 0] - b[..., 0], a[..., 1] - b[..., 1])
