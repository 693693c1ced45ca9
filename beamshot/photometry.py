"""Photometric laws that turn wall illuminance into luminous intensity and flux.

Conventions: distances in metres, illuminance in lux (lx), intensity in candela (cd),
flux in lumen (lm), angles in radians unless the name ends in ``_deg``.

References
----------
- Inverse-square and cosine laws: IES definitions 9.1.1 and 9.1.2; CIE ILV 17-25-104
  (photometric distance law).  On a flat wall at perpendicular distance D from a point
  source on the wall normal, a point at off-axis angle theta receives
  ``E = I(theta) cos^3(theta) / D^2`` (derived from the two laws).
- Lambertian surface: CIE ILV 17-24-063, exitance ``M = pi L``; with reflectance rho,
  ``L = rho E / pi``.
- Beam distance: ANSI/PLATO FL 1 (2009/2016/2019) defines it as the distance at which the
  peak beam intensity gives 0.25 lx: ``d = sqrt(I / 0.25 lx)``.
- Solid angle of a right circular cone of half-angle alpha: ``Omega = 2 pi (1 - cos alpha)``
  (Mazonka 2012, arXiv:1205.1396, eq. 9).  Flux ``Phi = integral I dOmega`` with
  ``dOmega = sin(theta) dtheta dphi`` (textbook).
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "BEAM_DISTANCE_LUX",
    "illuminance_on_wall",
    "intensity_from_wall_illuminance",
    "intensity_from_illuminance",
    "illuminance_from_luminance",
    "beam_distance_m",
    "cone_half_angle_from_solid_angle",
    "polar_cell_solid_angles",
    "equal_cone_full_angle",
]

#: Illuminance that defines beam distance, lx (ANSI/PLATO FL 1).
BEAM_DISTANCE_LUX = 0.25


def illuminance_on_wall(intensity_cd, theta, distance_m):
    """Illuminance (lx) on a flat wall square to the beam axis: ``E = I cos^3(theta) / D^2``.

    >>> round(float(illuminance_on_wall(1000.0, np.radians(30.0), 5.0)), 4)
    25.9808
    """
    return np.asarray(intensity_cd) * np.cos(theta) ** 3 / distance_m**2


def intensity_from_wall_illuminance(illuminance_lx, theta, distance_m):
    """Intensity (cd) from wall illuminance: ``I = E D^2 / cos^3(theta)`` (inverse of the above)."""
    return np.asarray(illuminance_lx) * distance_m**2 / np.cos(theta) ** 3


def intensity_from_illuminance(illuminance_lx, range_m, incidence=0.0):
    """General form ``I = E r^2 / cos(incidence)``; r is the source-to-point distance in m."""
    return np.asarray(illuminance_lx) * np.asarray(range_m) ** 2 / np.cos(incidence)


def illuminance_from_luminance(luminance_cd_m2, reflectance):
    """Illuminance (lx) on a Lambertian surface of luminance L: ``E = pi L / rho``."""
    return np.pi * np.asarray(luminance_cd_m2) / reflectance


def beam_distance_m(peak_intensity_cd):
    """Beam distance in m, FL 1 definition: ``d = sqrt(I / 0.25 lx)``.

    >>> beam_distance_m(10000.0)
    200.0
    """
    return float(np.sqrt(peak_intensity_cd / BEAM_DISTANCE_LUX))


def cone_half_angle_from_solid_angle(solid_angle_sr):
    """Half-angle (rad) of the cone with the given solid angle (inverse of the above)."""
    return np.arccos(np.clip(1.0 - np.asarray(solid_angle_sr) / (2.0 * np.pi), -1.0, 1.0))


def polar_cell_solid_angles(theta_edges, n_phi):
    """Solid angle (sr) of each cell of a regular polar grid, shape ``(len(theta_edges)-1,)``.

    A cell spans ``[theta_k, theta_k+1]`` in polar angle and ``2 pi / n_phi`` in azimuth;
    its solid angle is exactly ``(cos theta_k - cos theta_k+1) * 2 pi / n_phi`` (zonal form).
    """
    theta_edges = np.asarray(theta_edges, dtype=float)
    return (np.cos(theta_edges[:-1]) - np.cos(theta_edges[1:])) * (2.0 * np.pi / n_phi)


def equal_cone_full_angle(alpha, sigma=None):
    """Full angle (rad) of the cone with the same solid angle as a star-shaped region.

    The region reaches ``alpha[b]`` (rad) from its centre on equally spaced bearings, so
    ``Omega = 2 pi (1 - mean(cos alpha))`` and the full angle is ``2 arccos(mean cos alpha)``.
    With per-bearing 1-sigma ``sigma`` (independent), also returns the propagated 1-sigma:
    ``d(mean cos)/d alpha_b = -sin(alpha_b)/n`` and ``d(2 arccos m)/dm = -2/sqrt(1 - m^2)``.

    >>> round(float(np.degrees(equal_cone_full_angle(np.radians([10.0] * 8)))), 9)
    20.0
    """
    alpha = np.asarray(alpha, float)
    full = float(2.0 * np.arccos(np.mean(np.cos(alpha))))
    if sigma is None:
        return full
    dm = np.sqrt(np.sum((np.sin(alpha) * np.asarray(sigma, float) / len(alpha)) ** 2))
    return full, float(2.0 * dm / max(np.sin(full / 2.0), 1e-9))
