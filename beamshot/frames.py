"""Directions about an axis: the one basis every stage uses, and the turn from the beam frame to the wall.

A unit axis ``a`` (in the wall frame: +x right, +y up, +z toward the wall) gets the basis
``e1 = normalise(x - (x . a) a)``, ``e2 = a x e1``: ``e1`` is the wall's horizontal tilted to be
perpendicular to ``a``, so azimuth 0 points right and 90 deg up, as seen from behind the light.
A direction at polar angle ``theta`` and azimuth ``phi`` about ``a`` is
``sin(theta) (cos(phi) e1 + sin(phi) e2) + cos(theta) a`` (textbook spherical coordinates).
"""

from __future__ import annotations

import numpy as np

__all__ = ["local_basis", "beam_frame", "beam_to_wall", "opposite_index"]


def local_basis(centre: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Unit vectors ``(e_right, e_up)`` perpendicular to ``centre``, aligned with the wall axes.

    >>> e1, e2 = local_basis(np.array([0.0, 0.0, 1.0]))
    >>> e1.tolist(), e2.tolist()
    ([1.0, 0.0, 0.0], [0.0, 1.0, 0.0])
    """
    c = np.asarray(centre, float) / np.linalg.norm(centre)
    x = np.array([1.0, 0.0, 0.0])
    e1 = x - np.dot(x, c) * c
    e1 /= np.linalg.norm(e1)
    # c x e1, written out as np.cross computes it (the same products and differences)
    e2 = np.array([c[1] * e1[2] - c[2] * e1[1], c[2] * e1[0] - c[0] * e1[2], c[0] * e1[1] - c[1] * e1[0]])
    return e1, e2


def beam_frame(axis: np.ndarray | None = None) -> np.ndarray:
    """Rows ``(e1, e2, a)`` of the beam frame in the wall frame (identity for a square light)."""
    if axis is None:
        return np.eye(3)
    a = np.asarray(axis, float) / np.linalg.norm(axis)
    e1, e2 = local_basis(a)
    return np.stack([e1, e2, a])


def beam_to_wall(vectors: np.ndarray, axis: np.ndarray | None = None) -> np.ndarray:
    """Beam-frame unit vectors ``(..., 3)`` expressed in the wall frame."""
    return np.asarray(vectors, float) @ beam_frame(axis)


def opposite_index(bearings_deg: np.ndarray, bearing_deg: float) -> tuple[int, int]:
    """Indices of the bearing nearest ``bearing_deg`` and of the one nearest its opposite.

    >>> opposite_index(np.arange(0.0, 360.0, 10.0), 90.0)
    (9, 27)
    """
    b = np.asarray(bearings_deg, float)
    i = int(np.argmin(np.abs((b - bearing_deg + 180.0) % 360.0 - 180.0)))
    j = int(np.argmin(np.abs((b - bearing_deg) % 360.0 - 180.0)))
    return i, j
