"""Radial profile of a BeamMap about the beam axis, and profiles in the two main planes.

The radial profile is the azimuthal mean over valid cells at each polar angle, with the
azimuthal spread (standard deviation, min, max) that shows asymmetry.  Plane profiles are
the map columns in the horizontal (phi = 0 / 180 deg) and vertical (90 / 270 deg) planes,
given as signed angles (right / up positive).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ._quiet import quiet_nan
from .beammap import BeamMap

__all__ = ["RadialProfile", "radial_profile", "plane_profile"]


@dataclass(frozen=True)
class RadialProfile:
    """``theta_deg`` bin centres; ``mean``, ``std``, ``min``, ``max`` in the map unit; ``count`` cells."""

    theta_deg: np.ndarray
    mean: np.ndarray
    std: np.ndarray
    min: np.ndarray
    max: np.ndarray
    count: np.ndarray


def radial_profile(beam: BeamMap, *, min_coverage: float = 0.5) -> RadialProfile:
    """Azimuthal statistics per polar angle; rows covered by less than ``min_coverage`` are NaN."""
    inten = beam.intensity
    count = np.isfinite(inten).sum(axis=1)
    ok = count >= min_coverage * inten.shape[1]
    with quiet_nan():
        mean = np.where(ok, np.nanmean(inten, axis=1), np.nan)
        std = np.where(ok, np.nanstd(inten, axis=1), np.nan)
        lo = np.where(ok, np.nanmin(np.where(np.isfinite(inten), inten, np.inf), axis=1), np.nan)
        hi = np.where(ok, np.nanmax(np.where(np.isfinite(inten), inten, -np.inf), axis=1), np.nan)
    return RadialProfile(np.degrees(beam.theta), mean, std, lo, hi, count)


def plane_profile(beam: BeamMap, phi_deg: float) -> tuple[np.ndarray, np.ndarray]:
    """Signed angle (deg) and intensity along the plane through the axis at ``phi_deg``.

    Negative angles lie on the opposite side (``phi_deg + 180``).
    """
    n = len(beam.phi)
    j = int(np.argmin(np.abs((np.degrees(beam.phi) - phi_deg + 180) % 360 - 180)))
    k = (j + n // 2) % n
    t = np.degrees(beam.theta)
    angles = np.r_[-t[::-1], t]
    values = np.r_[beam.intensity[::-1, k], beam.intensity[:, j]]
    return angles, values

