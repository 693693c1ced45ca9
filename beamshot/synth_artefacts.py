"""Synthetic beam patterns with known artefacts: rings, a centre hole, an elliptical or offset
hotspot, a flat top (for tests of beamshot.artefacts and beamshot.shape_iso).

Every class has the interface of :class:`beamshot.synth.HotspotSpillBeam`: called with polar
angle ``theta`` and azimuth ``phi`` (radians, beam frame, azimuth counter-clockwise from the right
as seen from behind the light) it returns the intensity in cd; ``spill_edge_deg`` is the bezel
cut-off.  Angles in the constructors are degrees; relative amplitudes are fractions.
All names and scenarios here are invented.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.special import erfc

from .synth import HotspotSpillBeam

__all__ = ["RingedBeam", "EllipticalHotspotBeam", "OffsetHotspotBeam", "FlatTopBeam", "FWHM_PER_SIGMA"]

#: Full width at half maximum of a Gaussian over its sigma, 2 sqrt(2 ln 2) (textbook).
FWHM_PER_SIGMA = 2.0 * np.sqrt(2.0 * np.log(2.0))


def _cut(tdeg, cutoff_deg: float, edge_width_deg: float):
    """Bezel cut-off, exactly 0.5 at ``cutoff_deg`` (as in HotspotSpillBeam)."""
    return 0.5 * erfc((tdeg - cutoff_deg) / (np.sqrt(2.0) * edge_width_deg))


@dataclass(frozen=True)
class RingedBeam:
    """A base beam with concentric rings that multiply it: ``I = base * (1 + sum a_k R_k)``.

    ``rings`` are ``(angle_deg, fwhm_deg, relative_amplitude)``; ``R_k`` is a Gaussian ring of that
    full width at half maximum about the beam axis.  Because the ring multiplies the base, its
    amplitude relative to the smooth (ring-free) profile is exactly ``relative_amplitude`` at the
    ring's angle: +0.3 is a bright ring 30 % above the profile, -0.15 a dark ring 15 % below it.
    """

    base: object = HotspotSpillBeam()
    rings: tuple[tuple[float, float, float], ...] = ()

    def __call__(self, theta, phi):
        tdeg = np.degrees(np.asarray(theta, float))
        factor = 1.0
        for angle, fwhm, amp in self.rings:
            factor = factor + amp * np.exp(-0.5 * ((tdeg - angle) / (fwhm / FWHM_PER_SIGMA)) ** 2)
        return self.base(theta, phi) * factor

    @property
    def spill_edge_deg(self):
        return self.base.spill_edge_deg


@dataclass(frozen=True)
class EllipticalHotspotBeam:
    """Gaussian hotspot with principal full widths at half maximum ``major_fwhm_deg`` x
    ``minor_fwhm_deg``, its major axis at ``orientation_deg`` (counter-clockwise from the right),
    centred at ``offset_deg`` = (right, up) from the beam axis; spill and cut-off as HotspotSpillBeam.

    ``I = peak * [(1-s) G + s S(theta)] C(theta)`` with G the rotated Gaussian in
    azimuthal-equidistant degrees (x = theta cos phi, y = theta sin phi).
    """

    peak_cd: float = 10000.0
    major_fwhm_deg: float = 10.0
    minor_fwhm_deg: float = 6.0
    orientation_deg: float = 0.0
    offset_deg: tuple[float, float] = (0.0, 0.0)
    spill_fraction: float = 0.02
    spill_falloff: float = 0.3
    cutoff_deg: float = 30.0
    edge_width_deg: float = 0.6

    def __call__(self, theta, phi):
        tdeg = np.degrees(np.asarray(theta, float))
        dx = tdeg * np.cos(phi) - self.offset_deg[0]
        dy = tdeg * np.sin(phi) - self.offset_deg[1]
        a = np.radians(self.orientation_deg)
        u = dx * np.cos(a) + dy * np.sin(a)
        v = -dx * np.sin(a) + dy * np.cos(a)
        su, sv = self.major_fwhm_deg / FWHM_PER_SIGMA, self.minor_fwhm_deg / FWHM_PER_SIGMA
        g = np.exp(-0.5 * ((u / su) ** 2 + (v / sv) ** 2))
        s = np.clip(1.0 - self.spill_falloff * (tdeg / self.cutoff_deg) ** 2, 0.0, None)
        rel = ((1.0 - self.spill_fraction) * g + self.spill_fraction * s) * _cut(tdeg, self.cutoff_deg,
                                                                                   self.edge_width_deg)
        return self.peak_cd * rel

    @property
    def spill_edge_deg(self):
        return self.cutoff_deg


def OffsetHotspotBeam(offset_deg: tuple[float, float], fwhm_deg: float = 8.0, **kw) -> EllipticalHotspotBeam:
    """A round Gaussian hotspot of ``fwhm_deg`` centred ``offset_deg`` = (right, up) off the beam axis."""
    return EllipticalHotspotBeam(major_fwhm_deg=fwhm_deg, minor_fwhm_deg=fwhm_deg, offset_deg=offset_deg, **kw)


@dataclass(frozen=True)
class FlatTopBeam:
    """A flat-topped hotspot (a plateau of radius ``radius_deg`` with an erfc edge of width
    ``plateau_edge_deg``) on a spill, optionally with a centre hole.

    ``I = peak * [(1-s) P(theta) H(theta) + s S(theta)] C(theta)``, ``P = erfc((theta - R)/(sqrt 2 w))/2``,
    ``H = 1 - hole_depth * exp(-theta^2 / (2 sigma_h^2))`` with ``sigma_h = hole_fwhm_deg / 2.3548``.
    With ``sigma_h`` well inside R the hole's depth below the plateau is ``hole_depth`` (relative to
    the plateau, the surrounding maximum) and its full width at half depth is ``hole_fwhm_deg``.
    """

    peak_cd: float = 10000.0
    radius_deg: float = 6.0
    plateau_edge_deg: float = 0.8
    hole_depth: float = 0.0
    hole_fwhm_deg: float = 3.0
    spill_fraction: float = 0.02
    spill_falloff: float = 0.3
    cutoff_deg: float = 30.0
    edge_width_deg: float = 0.6

    def __call__(self, theta, phi):
        tdeg = np.degrees(np.asarray(theta, float)) * np.ones_like(np.asarray(phi, float))
        plateau = 0.5 * erfc((tdeg - self.radius_deg) / (np.sqrt(2.0) * self.plateau_edge_deg))
        hole = 1.0 - self.hole_depth * np.exp(-0.5 * (tdeg / (self.hole_fwhm_deg / FWHM_PER_SIGMA)) ** 2)
        s = np.clip(1.0 - self.spill_falloff * (tdeg / self.cutoff_deg) ** 2, 0.0, None)
        rel = ((1.0 - self.spill_fraction) * plateau * hole + self.spill_fraction * s) * _cut(
            tdeg, self.cutoff_deg, self.edge_width_deg)
        return self.peak_cd * rel

    @property
    def spill_edge_deg(self):
        return self.cutoff_deg
