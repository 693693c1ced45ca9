"""Shared fixtures: synthetic beam photos with known truth (rendered once per session)."""

from __future__ import annotations

import numpy as np
import pytest

from beamshot.beammap import BeamMap
from beamshot.synth import HotspotSpillBeam, Scene, SynthCamera, exposure_time_for_peak, truth_figures

#: Project-wide tolerance for results that are exact up to floating point.
TOLERANCE_ABSOLUTE = 1e-9


def analytic_map(func, *, theta_max_deg=80.0, d_theta_deg=0.05, d_phi_deg=1.0, distance_m=5.0) -> BeamMap:
    """A BeamMap sampled from ``func(theta, phi)`` (radians) on the analyser's grid."""
    d_t = np.radians(d_theta_deg)
    n_t = int(round(np.radians(theta_max_deg) / d_t))
    n_p = int(round(360.0 / d_phi_deg))
    theta = (np.arange(n_t) + 0.5) * d_t
    phi = (np.arange(n_p) + 0.5) * 2 * np.pi / n_p
    tt, pp = np.meshgrid(theta, phi, indexing="ij")
    inten = np.asarray(func(tt, pp), float) * np.ones_like(tt)
    return BeamMap(theta=theta, phi=phi, intensity=inten, saturated=np.zeros_like(tt, bool), distance_m=distance_m)


def make_shot(pattern, *, distance_m=5.0, target=0.8, camera=None, scene=None, **cam_kw):
    """Scene, camera (exposed for ``target`` at the peak) and truth for a pattern."""
    scene = scene or Scene(distance_m=distance_m)
    base = dict(width_px=1000, height_px=750, focal_35mm_mm=16, supersample=2)
    base.update(cam_kw)
    cam = camera or SynthCamera(**base)
    truth = truth_figures(pattern, scene.distance_m)
    t = exposure_time_for_peak(pattern, scene, cam, target=target, peak_lux=truth["peak_lux_on_wall"])
    from dataclasses import replace

    return scene, replace(cam, exposure_time_s=t), truth


@pytest.fixture(scope="session")
def reflector_beam():
    """A typical reflector beam: 8 deg hotspot, 2 % spill, cut-off at 30 deg."""
    return HotspotSpillBeam(peak_cd=12000.0, hotspot_fwhm_deg=8.0, spill_fraction=0.02, cutoff_deg=30.0,
                            edge_width_deg=0.6)
