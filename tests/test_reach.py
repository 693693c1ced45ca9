"""What a beam does at distance (beamshot.reach): the axis against the inverse-square law and the
FL 1 definition, the ground against the cosine law, on analytic beams with hand-computed answers."""

import json

import numpy as np
import pytest
from click.testing import CliRunner

from beamshot.figure import Figure
from beamshot.reach import (BEAM_DISTANCE_LUX, axis_distance_m, axis_illuminance, distance_figure,
                            ground_directions, ground_illuminance, lit_extent, reach_of)

from conftest import analytic_map


def test_axis_inverse_square_and_fl1_points():
    # REFERENCES appendix A3 (inverse-square law): 8000 cd gives 2000 lx at 2 m
    assert axis_illuminance(8000.0, 2.0) == pytest.approx(2000.0, abs=1e-9)
    # REFERENCES A1 (ANSI/PLATO FL 1 beam distance): 10 000 cd -> 200 m at 0.25 lx; A2: 2500 cd -> 100 m
    assert axis_distance_m(10000.0, BEAM_DISTANCE_LUX) == pytest.approx(200.0, abs=1e-9)
    assert axis_distance_m(2500.0, BEAM_DISTANCE_LUX) == pytest.approx(100.0, abs=1e-9)
    # the 1 lx point: sqrt(I / 1 lx) (inverse-square law)
    assert axis_distance_m(10000.0, 1.0) == pytest.approx(100.0, abs=1e-9)
    d = np.array([1.0, 10.0, 100.0])
    np.testing.assert_allclose(axis_illuminance(10000.0, d), [10000.0, 100.0, 1.0], atol=1e-9)


def test_distance_figure_propagates_uncertainty_and_status():
    # GUM 5.1.2 first order: d = sqrt(I/E) -> u_d = d u_I / (2 I); 10 000 +- 500 cd -> 200 +- 5 m
    f = distance_figure(Figure(10000.0, 500.0, "cd", "test", budget=(("lux meter", 500.0),)), 0.25)
    assert f.value == pytest.approx(200.0, abs=1e-9) and f.uncertainty == pytest.approx(5.0, abs=1e-9)
    assert dict(f.budget)["lux meter"] == pytest.approx(5.0, abs=1e-9)
    bound = distance_figure(Figure(10000.0, None, "cd", "test", status="lower_bound", reason="clipped"), 0.25)
    assert bound.status == "lower_bound" and bound.value == pytest.approx(200.0)
    rel = distance_figure(Figure(None, None, "cd", "test", status="not_measured", reason="no absolute scale"), 0.25)
    assert rel.status == "not_measured" and rel.value is None and "no absolute scale" in rel.reason


def test_ground_of_a_uniform_cone_is_i_h_over_r_cubed():
    # cosine law on a horizontal plane (IES 9.1.2): E = I cos(i) / r^2 with cos(i) = h / r, so E = I h / r^3
    intensity, h = 1000.0, 1.5
    beam = analytic_map(lambda t, p: np.where(t < np.radians(40.0), intensity, 0.0))
    g = ground_illuminance(beam, height_m=h, tilt_deg=0.0, reach_m=30.0, half_width_m=6.0, n=121)
    xx, yy = np.meshgrid(g.x_m, g.y_m)
    r = np.sqrt(xx**2 + yy**2 + h**2)
    inside = np.degrees(np.arccos(yy / r)) < 38.0  # angle from the horizontal axis, clear of the cone's edge
    assert inside.sum() > 1000
    np.testing.assert_allclose(g.illuminance[inside], intensity * h / r[inside] ** 3, rtol=1e-9)
    outside = np.degrees(np.arccos(yy / r)) > 42.0
    assert np.all(g.illuminance[outside & np.isfinite(g.illuminance)] == 0.0)
    # a hand-computed point: 10 m ahead, 1.5 m below -> r^2 = 102.25, E = 1000 * 1.5 / 102.25^1.5 = 1.4507 lx
    e = ground_illuminance(beam, height_m=h, tilt_deg=0.0, reach_m=10.0, half_width_m=1.0, n=11)
    assert e.illuminance[-1, e.x_m.size // 2] == pytest.approx(1000 * 1.5 / 102.25**1.5, rel=1e-9)


def test_ground_directions_follow_the_tilt_and_the_azimuth():
    # the axis, tilted down by t from height h, meets the ground at y = h / tan t with r = h / sin t
    h, t = 1.5, 5.0
    y0 = h / np.tan(np.radians(t))
    v, r = ground_directions(np.array([0.0]), np.array([y0]), h, t)
    np.testing.assert_allclose(v[0], [0.0, 0.0, 1.0], atol=1e-12)
    assert r[0] == pytest.approx(h / np.sin(np.radians(t)), rel=1e-12)
    # a Gaussian beam, brighter to the right (phi = 0) than to the left: I = I0 exp(-th^2/2s^2)(1 + 0.5 cos phi)
    s = np.radians(6.0)
    beam = analytic_map(lambda th, ph: 5000.0 * np.exp(-th**2 / (2 * s**2)) * (1 + 0.5 * np.cos(ph)), theta_max_deg=40)
    g = ground_illuminance(beam, height_m=h, tilt_deg=t, reach_m=2 * y0, half_width_m=4.0, n=201)
    i = int(np.argmin(np.abs(g.y_m - y0)))
    for x in (-3.0, 3.0):
        j = int(np.argmin(np.abs(g.x_m - x)))
        vx, vy = g.x_m[j], g.y_m[i]
        # the ground point at the axis' foot distance: v . a = r0 (the axis' own length), so cos(theta) = r0 / r
        r0 = np.hypot(vy, h)
        rr = np.sqrt(vx**2 + vy**2 + h**2)
        th = np.arccos((vy * np.cos(np.radians(t)) + h * np.sin(np.radians(t))) / rr)
        phi = 0.0 if vx > 0 else np.pi
        expect = 5000.0 * np.exp(-th**2 / (2 * s**2)) * (1 + 0.5 * np.cos(phi)) * h / rr**3
        assert g.illuminance[i, j] == pytest.approx(expect, rel=2e-3), (x, r0)
    right = g.illuminance[i, np.argmin(np.abs(g.x_m - 3.0))]
    left = g.illuminance[i, np.argmin(np.abs(g.x_m + 3.0))]
    assert right / left == pytest.approx(3.0, rel=3e-3)  # (1 + 0.5) / (1 - 0.5)


def test_lit_extent_and_reach_of():
    # uniform 1000 cd cone to 40 deg, level 0.25 lx: I h / r^3 = 0.25 -> r = (1000 * 1.5 / 0.25)^(1/3) = 18.17 m
    beam = analytic_map(lambda t, p: np.where(t < np.radians(40.0), 1000.0, 0.0))
    beam = beam.scaled(1.0, "cd")
    ahead, _ = lit_extent(beam, height_m=1.5, tilt_deg=0.0)
    r = (1000 * 1.5 / 0.25) ** (1 / 3)
    far = np.sqrt(r**2 - 1.5**2)
    assert 1.15 * far <= ahead <= 1.15 * far + 2 * 400 / 320 + 1e-9
    rep = reach_of(beam, Figure(1000.0, 50.0, "cd", "test"), height_m=1.5, tilt_deg=0.0)
    assert rep.beam_distance.value == pytest.approx(np.sqrt(1000 / 0.25), rel=1e-12)
    assert rep.bright_distance.value == pytest.approx(np.sqrt(1000.0), rel=1e-12)
    assert rep.ground.unit == "lx" and rep.ground.y_m[-1] == pytest.approx(ahead)


def test_reach_command(tmp_path):
    from beamshot.cli import cli
    from beamshot.report.intensity_map import write_intensity_map

    # a report folder holding an analytic Gaussian beam of 10 000 cd (FL 1: beam distance 200 m)
    s = np.radians(5.0)
    beam = analytic_map(lambda th, ph: 10000.0 * np.exp(-th**2 / (2 * s**2)), theta_max_deg=30).scaled(1.0, "cd")
    folder = tmp_path / "light"
    folder.mkdir()
    write_intensity_map(beam, folder / "intensity-map.npz")
    report = {"schema": "beamshot.report", "schema_version": "1.1", "settings": {"distance_m": 5.0,
              "light_name": "gaussian 10 kcd"}, "calibration": {"absolute_scale": {"kind": "lux_meter"}},
              "figures": {"peak_intensity": {"value": 10000.0, "uncertainty": 400.0, "unit": "cd",
                                             "status": "measured", "method": "test", "reason": None, "budget": None}}}
    (folder / "report.json").write_text(json.dumps(report))
    out = tmp_path / "pics" / "reach.png"
    res = CliRunner().invoke(cli, ["reach", str(folder), "--height", "1.2", "--tilt", "2", "--out", str(out)])
    assert res.exit_code == 0, res.output
    assert "200.0 ± 4.0 m" in res.output and "100.0 ± 2.0 m" in res.output  # u_d = d u_I / (2 I)
    from PIL import Image

    with Image.open(out) as im:
        assert im.size[0] >= 1000
    bad = CliRunner().invoke(cli, ["reach", str(folder), "--height", "0"])
    assert bad.exit_code == 2 and len(bad.output.strip().splitlines()) == 1
