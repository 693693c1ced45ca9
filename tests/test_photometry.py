"""Photometric laws against published definitions and derived check values."""

import numpy as np
import pytest
from numpy.testing import assert_allclose

from beamshot import photometry as pm


@pytest.mark.parametrize("intensity, distance", [
    (100.0, 20.0), (1000.0, 63.2456), (2500.0, 100.0), (10000.0, 200.0), (62500.0, 500.0), (1e6, 2000.0),
])
def test_beam_distance_fl1(intensity, distance):
    # ANSI/PLATO FL 1: beam distance is where the peak intensity gives 0.25 lx, d = sqrt(I / 0.25)
    assert_allclose(pm.beam_distance_m(intensity), distance, rtol=1e-6)
    assert_allclose(0.25 * distance**2, intensity, rtol=1e-5)  # the definition read backwards


def test_inverse_square_on_axis():
    # IES 9.1.1 inverse-square law: 2000 lx at 2 m on axis is 8000 cd
    assert_allclose(pm.intensity_from_illuminance(2000.0, 2.0), 8000.0, rtol=0, atol=1e-9)


@pytest.mark.parametrize("theta_deg, cos3", [(0, 1.0), (10, 0.955112), (20, 0.829769), (30, 0.649519),
                                             (45, 0.353553), (60, 0.125)])
def test_cos_cubed_law(theta_deg, cos3):
    # IES 9.1.1 + 9.1.2 on a flat wall: E = I cos^3(theta) / D^2 (derived check values)
    e = pm.illuminance_on_wall(1.0, np.radians(theta_deg), 1.0)
    assert_allclose(e, cos3, atol=1e-6)
    assert_allclose(pm.intensity_from_wall_illuminance(e, np.radians(theta_deg), 1.0), 1.0, rtol=1e-12)


def test_cos_cubed_worked_example():
    # derived from IES 9.1.1/9.1.2: 1000 cd, D = 5 m, theta = 30 deg -> 25.9808 lx
    assert_allclose(pm.illuminance_on_wall(1000.0, np.radians(30.0), 5.0), 25.9808, atol=1e-4)


def test_general_form_matches_flat_wall():
    # I = E r^2 / cos(incidence) with r = D / cos(theta), incidence = theta reduces to E D^2 / cos^3
    theta, d, e = np.radians(37.0), 4.0, 12.5
    r = d / np.cos(theta)
    assert_allclose(pm.intensity_from_illuminance(e, r, theta), pm.intensity_from_wall_illuminance(e, theta, d), rtol=1e-12)


def test_lambertian_luminance():
    # CIE ILV 17-24-063, M = pi L; with M = rho E: E = 100 lx, rho = 0.9 -> L = 28.6479 cd/m^2
    assert_allclose(pm.illuminance_from_luminance(28.6479, 0.9), 100.0, atol=1e-4)


@pytest.mark.parametrize("half_deg, omega", [(5, 0.023909), (10, 0.095456), (30, 0.841787), (45, 1.840302),
                                             (60, np.pi), (90, 2 * np.pi), (180, 4 * np.pi)])
def test_cone_solid_angle(half_deg, omega):
    # Mazonka 2012 (arXiv:1205.1396) eq. 9: Omega = 2 pi (1 - cos a)
    assert_allclose(np.degrees(pm.cone_half_angle_from_solid_angle(omega)), half_deg, atol=1e-4)


def test_polar_cells_sum_to_sphere():
    # zonal form of Phi = integral sin(theta) dtheta dphi: the cells of a full sphere sum to 4 pi
    edges = np.linspace(0, np.pi, 181)
    assert_allclose(pm.polar_cell_solid_angles(edges, 360).sum() * 360, 4 * np.pi, rtol=1e-12)


def test_uniform_cone_flux():
    # derived: uniform 1000 cd inside a 10 deg half-angle cone -> 1000 * 2 pi (1 - cos 10 deg) = 95.4557 lm
    edges = np.radians(np.linspace(0, 10, 201))
    flux = 1000.0 * pm.polar_cell_solid_angles(edges, 360).sum() * 360
    assert_allclose(flux, 95.4557, atol=1e-4)
