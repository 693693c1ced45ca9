"""Pinhole wall mapping, the polar BeamMap and its integrals on analytic cases."""

import numpy as np
import pytest
from numpy.testing import assert_allclose

from beamshot.beammap import directions
from beamshot.hotspot import find_peak, trace_contour
from beamshot.flux import zone_flux
from beamshot.spill import find_spill_edge
from beamshot.wall import focal_px_from_35mm, focal_px_from_hfov, pinhole_mapping, rotation_yaw_pitch

from conftest import analytic_map


def test_pinhole_square_camera_scale():
    # pinhole: a pixel offset dx at focal f (px) and distance D maps to dx * D / f on the wall
    m = pinhole_mapping((3000, 4000), 5000.0, 5.0)
    centre = np.array([1999.5, 1499.5])
    wall = m.image_to_wall(np.array([centre, centre + [1000, 0], centre + [0, 1000]]))
    assert_allclose(wall[0], [0, 0], atol=1e-9)
    assert_allclose(wall[1], [1000.0, 0], atol=1e-9)  # 1000 px * 5000 mm / 5000 px
    assert_allclose(wall[2], [0, -1000.0], atol=1e-9)  # rows go down the wall


def test_pinhole_round_trip_with_pose():
    m = pinhole_mapping((900, 1200), 1100.0, 4.0, rotation=rotation_yaw_pitch(18.0, -7.0), camera_position_m=(-1.0, 0.3))
    pts = np.random.default_rng(0).uniform([0, 0], [1199, 899], size=(50, 2))
    assert_allclose(m.wall_to_image(m.image_to_wall(pts)), pts, atol=1e-8)


def test_focal_conversions():
    # 35 mm-equivalent by the diagonal (43.27 mm): an image diagonal of 5000 px at 43.27 mm eq. is f = 5000 px
    assert focal_px_from_35mm(np.hypot(36, 24), (3000, 4000)) == pytest.approx(5000.0)
    # a 90 deg horizontal view of a 4000 px wide image has f = 2000 px
    assert focal_px_from_hfov(90.0, (3000, 4000)) == pytest.approx(2000.0)


def test_isotropic_flux_on_map():
    # derived: isotropic 1000 cd inside 53.13 deg (cos = 0.6) is 1000 * 2 pi (1 - 0.6) = 2513.27 lm
    beam = analytic_map(lambda t, p: np.where(t <= np.arccos(0.6), 1000.0, 0.0), d_theta_deg=0.05)
    d_omega = np.broadcast_to(beam.cell_solid_angles(), beam.intensity.shape)
    assert_allclose((beam.intensity * d_omega).sum(), 2513.27, rtol=2e-3)  # edge cells are half in


def _gauss(sigma_deg, peak=1000.0, floor=0.0):
    s = np.radians(sigma_deg)
    return lambda t, p: peak * np.exp(-0.5 * (t / s) ** 2) + floor


def test_gaussian_fwhm_and_fw10():
    # a Gaussian exp(-theta^2 / 2 sigma^2) has FWHM = 2 sqrt(2 ln 2) sigma = 2.35482 sigma and
    # full width at 10 % = 2 sqrt(2 ln 10) sigma = 4.29193 sigma (analytic)
    sigma = 3.0
    beam = analytic_map(_gauss(sigma), theta_max_deg=40)
    pk = find_peak(beam)
    assert pk.value == pytest.approx(1000.0, rel=5e-4)  # quadratic fit to a Gaussian top
    hot = trace_contour(beam, pk.vector, 0.5 * pk.value, 0.5)
    fld = trace_contour(beam, pk.vector, 0.1 * pk.value, 0.1)
    assert np.degrees(hot.full_angle()) == pytest.approx(2.35482 * sigma, rel=2e-3)
    assert np.degrees(fld.full_angle()) == pytest.approx(4.29193 * sigma, rel=2e-3)
    assert np.degrees(hot.width_along(0)) == pytest.approx(2.35482 * sigma, rel=2e-3)


def test_off_axis_peak_contour():
    # an off-axis Gaussian: the contour around its own peak has the analytic FWHM
    c = directions(np.radians(6.0), np.radians(30.0))
    s = np.radians(1.5)
    beam = analytic_map(lambda t, p: 500 * np.exp(-0.5 * (np.arccos(np.clip(directions(t, p) @ c, -1, 1)) / s) ** 2),
                        theta_max_deg=30)
    pk = find_peak(beam)
    assert np.degrees(pk.theta) == pytest.approx(6.0, abs=0.02)
    hot = trace_contour(beam, pk.vector, 0.5 * pk.value, 0.5)
    assert np.degrees(hot.full_angle()) == pytest.approx(2.35482 * 1.5, rel=5e-3)


def test_spill_edge_sharp_and_zone_flux():
    # hotspot + flat spill cut at 25 deg: edge found at 25 deg; zone fluxes match the analytic
    # integrals 2 pi * integral I sin(theta) dtheta
    s = np.radians(2.0)
    cut = np.radians(25.0)

    def f(t, p):
        return np.where(t <= cut, 1000 * np.exp(-0.5 * (t / s) ** 2) + 20.0, 0.0)

    beam = analytic_map(f, theta_max_deg=40)
    pk = find_peak(beam)
    edge = find_spill_edge(beam, pk.value)
    assert edge.complete and edge.sharp_fraction == 1.0
    assert np.degrees(edge.full_angle()) == pytest.approx(50.0, abs=0.06)
    hot = trace_contour(beam, pk.vector, 0.5 * pk.value, 0.5)
    zf = zone_flux(beam, hot, pk.vector, edge)
    t = np.linspace(0, cut, 200001)
    i = f(t, 0)
    a_half = np.radians(hot.full_angle() / 2 * 180 / np.pi)
    total = 2 * np.pi * np.trapezoid(i * np.sin(t), t)
    inner = t <= a_half
    hot_exact = 2 * np.pi * np.trapezoid(i[inner] * np.sin(t[inner]), t[inner])
    assert zf.hotspot == pytest.approx(hot_exact, rel=5e-3)
    assert zf.hotspot + zf.spill == pytest.approx(total, rel=5e-3)


def test_no_sharp_edge_falls_back_to_threshold():
    # a pure Gaussian has no cut-off: the edge is where it falls to 0.5 % of peak,
    # theta = sigma sqrt(2 ln 200) (analytic)
    sigma = 4.0
    beam = analytic_map(_gauss(sigma), theta_max_deg=40)
    edge = find_spill_edge(beam, 1000.0)
    assert set(edge.kind) == {"threshold"}
    assert np.degrees(edge.full_angle()) / 2 == pytest.approx(sigma * np.sqrt(2 * np.log(200)), rel=5e-3)


def test_edge_outside_coverage():
    beam = analytic_map(lambda t, p: np.where(t < np.radians(30), 100.0, 0.0), theta_max_deg=20)
    edge = find_spill_edge(beam, 100.0)
    assert not edge.complete and set(edge.kind) == {"outside"}


def test_footprint_is_the_photo_border_seen_from_the_light():
    # camera beside the light, square to the wall: a photo corner at (dx, dy) px from the centre
    # lies at (dx, dy) D / f on the wall, i.e. at theta = atan(hypot(dx, dy) / f) from the axis
    from beamshot.beammap import build_beam_map
    from beamshot.camera.linearize import LinearImage

    h, w, f, d = 600, 800, 700.0, 3.0
    m = pinhole_mapping((h, w), f, d)
    img = LinearImage(luminance=np.ones((h, w), np.float32), saturated=np.zeros((h, w), bool), bin_factor=1,
                      full_shape=(h, w), rgb_values=np.ones((h, w, 3), np.float32))
    fp = build_beam_map(img, m, (0.0, 0.0), d).footprint_deg
    r = np.hypot(fp[:, 0], fp[:, 1])
    assert r.max() == pytest.approx(np.degrees(np.arctan(np.hypot(399.5, 299.5) / f)), rel=1e-9)
    assert np.abs(fp[:, 0]).max() == pytest.approx(np.degrees(np.arctan(399.5 / f)), rel=1e-9)  # on the x axis
    top = fp[np.argmax(fp[:, 1])]
    assert top[1] == pytest.approx(np.degrees(np.arctan(299.5 / f)), rel=1e-3)  # middle of the top edge
