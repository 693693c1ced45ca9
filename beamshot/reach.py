"""What a beam does at distance: illuminance on the beam axis and on flat ground.

On the axis (inverse-square law, IES 9.1.1, far field): ``E(d) = I_peak / d^2``; the distance at
which the axis illuminance falls to ``E`` is ``d = sqrt(I / E)``.  ANSI/PLATO FL 1 defines the
beam distance as the distance at 0.25 lx, ``d = sqrt(I / 0.25 lx) = 2 sqrt(I)``; the 1 lx point
``sqrt(I)`` is added as a brighter, more useful level (project choice).  Uncertainty:
``u_d / d = u_I / (2 I)`` (first-order propagation of ``d = sqrt(I / E)``, GUM 5.1.2).

On flat ground (inverse-square and cosine laws, IES 9.1.1/9.1.2): the light stands at height
``h`` above the ground, looking along +y (ground frame: x right, y forward, z up) and tilted
down by ``tilt``.  For a ground point P at distance ``r`` from the light, the direction from the
light expressed in the beam frame gives ``I(theta, phi)`` from the map, and the ground's normal
(up) meets the ray at incidence ``cos(i) = h / r``, so::

    E(P) = I(theta, phi) cos(i) / r^2 = I(theta, phi) h / r^3

The beam frame is the map's: +z along the beam axis, +x right and +y up as seen from behind the
light (azimuth counter-clockwise from the right), so with ``tilt`` = 0 the axis is horizontal.

>>> round(axis_distance_m(10000.0, 0.25), 6)   # ANSI/PLATO FL 1 worked check: 10 000 cd -> 200 m
200.0
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .beammap import BeamMap
from .figure import Figure, not_measured

__all__ = ["BEAM_DISTANCE_LUX", "BRIGHT_POINT_LUX", "GROUND_LEVELS_LUX", "DEFAULT_HEIGHT_M", "DEFAULT_TILT_DEG",
           "axis_illuminance", "axis_distance_m", "distance_figure", "GroundMap", "ground_illuminance",
           "ground_directions", "lit_extent", "Reach", "reach_of"]

#: ANSI/PLATO FL 1 beam distance level, lx.
BEAM_DISTANCE_LUX = 0.25
#: A brighter level people can read by, lx (project choice).
BRIGHT_POINT_LUX = 1.0
#: Iso-illuminance lines on the ground map, lx (project choice: moonlight to path lighting).
GROUND_LEVELS_LUX = (0.25, 1.0, 5.0, 20.0)
#: Default hand height and downward tilt (common practice for a walk with a light; project choice).
DEFAULT_HEIGHT_M = 1.5
DEFAULT_TILT_DEG = 3.0


def axis_illuminance(intensity_cd, distance_m):
    """``E = I / d^2`` (lx) on the beam axis at ``distance_m`` (inverse-square law).

    >>> axis_illuminance(8000.0, 2.0)   # REFERENCES A3: 2000 lx at 2 m <-> 8000 cd
    2000.0
    """
    e = np.asarray(intensity_cd, float) / np.asarray(distance_m, float) ** 2
    return float(e) if e.ndim == 0 else e


def axis_distance_m(intensity_cd: float, lux: float) -> float:
    """Distance (m) at which ``intensity_cd`` gives ``lux`` on the axis: ``sqrt(I / E)``."""
    return float(np.sqrt(intensity_cd / lux))


def distance_figure(peak: Figure, lux: float) -> Figure:
    """The distance at ``lux`` on the axis as a :class:`Figure` that follows the peak's status.

    ``u_d = d u_I / (2 I)``; a peak that is a bound gives a bound the same way (d rises with I);
    a peak that is not measured or not in cd gives a distance that is not measured.
    """
    method = f"sqrt(I_peak / {lux:g} lx) on the beam axis (inverse-square law)"
    if peak.value is None or peak.unit != "cd" or peak.status == "not_measured":
        why = peak.reason or "no absolute scale"
        return not_measured("m", method, f"the peak intensity is not in cd ({why})")
    d = axis_distance_m(peak.value, lux)
    u = None if peak.uncertainty is None else d * peak.uncertainty / (2.0 * peak.value)
    budget = tuple((k, d * v / (2.0 * peak.value)) for k, v in peak.budget) if peak.budget else ()
    return Figure(d, u, "m", method, status=peak.status, reason=peak.reason, budget=budget)


def ground_directions(x_m: np.ndarray, y_m: np.ndarray, height_m: float, tilt_deg: float):
    """Unit vectors in the beam frame toward ground points ``(x_m, y_m)``, and their distance r (m).

    Ground frame: x right, y forward, z up, light at (0, 0, h).  Beam frame rows in the ground
    frame: e1 = (1, 0, 0) (right), e2 = (0, sin t, cos t) (up, tilted with the light), axis
    a = (0, cos t, -sin t) (tilted down by t).
    """
    t = np.radians(tilt_deg)
    vx, vy, vz = np.broadcast_arrays(np.asarray(x_m, float), np.asarray(y_m, float), -float(height_m))
    r = np.sqrt(vx**2 + vy**2 + vz**2)
    b1 = vx
    b2 = vy * np.sin(t) + vz * np.cos(t)
    b3 = vy * np.cos(t) - vz * np.sin(t)
    return np.stack([b1 / r, b2 / r, b3 / r], axis=-1), r


@dataclass(frozen=True)
class GroundMap:
    """Illuminance on the ground from above: ``illuminance[i, j]`` at ``(x_m[j], y_m[i])``.

    ``unit`` is ``"lx"`` (an absolute map) or ``"relative"`` (a relative map: I h / r^3 in the
    map's units); NaN where the map does not cover the direction.
    """

    x_m: np.ndarray
    y_m: np.ndarray
    illuminance: np.ndarray
    unit: str
    height_m: float
    tilt_deg: float


def ground_illuminance(beam: BeamMap, *, height_m: float = DEFAULT_HEIGHT_M, tilt_deg: float = DEFAULT_TILT_DEG,
                       reach_m: float = 60.0, half_width_m: float | None = None, n: int = 241) -> GroundMap:
    """``E = I(theta, phi) h / r^3`` on a grid of ground points ahead of the light (see module docstring).

    ``reach_m`` is how far forward the grid goes, ``half_width_m`` how far to each side (default
    ``reach_m / 2``); ``n`` points forward, proportionally many across.
    """
    if not height_m > 0:
        raise ValueError("height_m must be above 0 (the light above the ground)")
    half = reach_m / 2.0 if half_width_m is None else half_width_m
    y = np.linspace(0.0, reach_m, n)
    x = np.linspace(-half, half, max(3, int(round(n * 2 * half / reach_m)) | 1))
    xx, yy = np.meshgrid(x, y)
    v, r = ground_directions(xx, yy, height_m, tilt_deg)
    inten = beam.sample(v)
    e = inten * height_m / r**3
    return GroundMap(x, y, e, "lx" if beam.unit == "cd" else "relative", float(height_m), float(tilt_deg))


def lit_extent(beam: BeamMap, *, height_m: float = DEFAULT_HEIGHT_M, tilt_deg: float = DEFAULT_TILT_DEG,
               level: float | None = None, search_m: float = 400.0) -> tuple[float, float]:
    """How far ahead and to each side (m) the ground gets at least ``level`` (default: 0.25 lx for a
    map in cd, 0.1 % of the largest value otherwise), with a margin, for a picture that shows the lit
    ground and little else.  Found on a coarse grid; at least 5 m ahead and 2 m to each side."""
    g = ground_illuminance(beam, height_m=height_m, tilt_deg=tilt_deg, reach_m=search_m, n=321)
    e = g.illuminance
    if level is None:
        level = BEAM_DISTANCE_LUX if g.unit == "lx" else 1e-3 * float(np.nanmax(e)) if np.any(np.isfinite(e)) else 0.0
    lit = np.isfinite(e) & (e >= level)
    if not lit.any():
        return 5.0, 2.0
    yy, xx = np.meshgrid(g.y_m, g.x_m, indexing="ij")
    step = g.y_m[1] - g.y_m[0]
    return max(5.0, 1.15 * float(yy[lit].max()) + step), max(2.0, 1.3 * float(np.abs(xx[lit]).max()) + step)


@dataclass(frozen=True)
class Reach:
    """Axis distances (figures in m) at the FL 1 level and the bright level, and the ground map."""

    beam_distance: Figure
    bright_distance: Figure
    ground: GroundMap
    peak: Figure


def reach_of(beam: BeamMap, peak: Figure, *, height_m: float = DEFAULT_HEIGHT_M,
             tilt_deg: float = DEFAULT_TILT_DEG, reach_m: float | None = None) -> Reach:
    """Distances on the axis and the ground map for one light.

    The ground grid covers the ground lit to 0.25 lx (:func:`lit_extent`) unless ``reach_m`` is given.
    """
    bd = distance_figure(peak, BEAM_DISTANCE_LUX)
    half = None
    if reach_m is None:
        reach_m, half = lit_extent(beam, height_m=height_m, tilt_deg=tilt_deg)
    ground = ground_illuminance(beam, height_m=height_m, tilt_deg=tilt_deg, reach_m=reach_m, half_width_m=half)
    return Reach(bd, distance_figure(peak, BRIGHT_POINT_LUX), ground, peak)
