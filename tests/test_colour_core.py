"""Colour science core against published values: chromaticity formulas, CCT and Duv, sRGB white, chart fit.

Sources are named beside each check; REFERENCES.md section 5 holds the numbers and their status.
"""

from __future__ import annotations

import numpy as np
import pytest

pytestmark = pytest.mark.filterwarnings("ignore:.*Aligning")  # colour-science notes about aligning spectral data
from numpy.testing import assert_allclose

from beamshot.colour.cct import cct_duv, cct_duv_robertson, cct_duv_with_uncertainty
from beamshot.colour.chart import fit_chart_matrix
from beamshot.colour.chromaticity import (delta_uv_prime, uv1960_of, uv_prime_covariance, uv_prime_from_xy,
                                          uv_prime_of, xy_of)
from beamshot.colour.nominal import nominal_class
from beamshot.colour.transform import D65_XY, SRGB_TO_XYZ
from beamshot.errors import BeamshotError


def _xyz_of_xy(x, y, big_y=1.0):
    return np.array([x / y * big_y, big_y, (1 - x - y) / y * big_y])


def _planck_xyz(temperature_k: float) -> np.ndarray:
    """XYZ of a blackbody: Planck's law (c2 = 1.4388e-2 m K) integrated against the CIE 1931 2-degree
    colour-matching functions, both as shipped by colour-science (CIE 15:2004 data)."""
    import colour

    cmfs = colour.MSDS_CMFS["CIE 1931 2 Degree Standard Observer"]
    return np.asarray(colour.sd_to_XYZ(colour.sd_blackbody(temperature_k, cmfs.shape), cmfs), float)


# ------------------------------------------------------------------------------ chromaticity
def test_uv_formulas_match_the_published_example():
    # colour-science doctest (models/cie_ucs.py): xy (0.54369555, 0.32107941) -> CIE 1960 uv (0.3772021, 0.3341350)
    uv = uv1960_of(_xyz_of_xy(0.54369555, 0.32107941))
    assert_allclose(uv, [0.3772021, 0.3341350], atol=5e-7)
    # CIE 1976: u' = u, v' = 1.5 v (CIE 15:2004)
    assert_allclose(uv_prime_of(_xyz_of_xy(0.54369555, 0.32107941)), [0.3772021, 1.5 * 0.3341350], atol=5e-7)
    assert_allclose(uv_prime_from_xy([0.54369555, 0.32107941]), [0.3772021, 1.5 * 0.3341350], atol=5e-7)


def test_srgb_white_is_d65():
    # IEC 61966-2-1: linear sRGB (1, 1, 1) is the D65 white, (x, y) = (0.3127, 0.3290) (4-decimal matrix)
    assert_allclose(xy_of(SRGB_TO_XYZ @ np.ones(3)), D65_XY, atol=1e-4)
    assert_allclose(D65_XY, (0.3127, 0.3290), atol=0)  # CIE 15:2004 D65 chromaticity
    # and Y of white is 1 (the luminance row sums to 1, BT.709 / IEC 61966-2-1)
    assert_allclose((SRGB_TO_XYZ @ np.ones(3))[1], 1.0, atol=1e-4)


def test_uv_covariance_matches_a_numerical_jacobian():
    # first-order propagation (JCGM 100, 5.2): analytic Jacobian against central differences
    xyz = np.array([0.95, 1.0, 0.6])
    cov = np.diag([1e-6, 2e-6, 3e-6])
    h = 1e-7
    j = np.column_stack([(uv_prime_of(xyz + e) - uv_prime_of(xyz - e)) / (2 * h) for e in np.eye(3) * h])
    assert_allclose(uv_prime_covariance(xyz, cov), j @ cov @ j.T, rtol=1e-5)


# ------------------------------------------------------------------------------ CCT and Duv
def test_illuminant_a_is_2856_k():
    # CIE 15:2004 illuminant A, (x, y) = (0.44757, 0.40745): a Planckian radiator at 2856 K
    t, duv = cct_duv(uv_prime_from_xy([0.44757, 0.40745]))
    assert abs(t - 2856.0) < 1.0
    assert abs(duv) < 0.0002
    t_r, _ = cct_duv_robertson(uv_prime_from_xy([0.44757, 0.40745]))
    assert abs(t_r - 2856.0) < 1.0  # Robertson (1968) cross-check


def test_d65_is_about_6504_k():
    # CIE 15:2004 D65 (0.3127, 0.3290): nominal 6504 K (6500 K x 1.4388/1.4380); REFERENCES.md 5.4: Ohno 6504.3 K,
    # Duv +0.0032 (computed, colour 0.4.6)
    t, duv = cct_duv(uv_prime_from_xy(D65_XY))
    assert abs(t - 6504.0) < 3.0
    assert 0.0027 < duv < 0.0037


@pytest.mark.parametrize("temperature", [2700.0, 4000.0, 6500.0])
def test_planckian_points_give_their_temperature(temperature):
    # Planck's law x CIE 1931 CMFs (colour-science's CIE data) -> on the locus: CCT within 0.5 %, Duv within 0.0005
    uv = uv_prime_of(_planck_xyz(temperature))
    t, duv = cct_duv(uv)
    assert abs(t / temperature - 1) < 0.005
    assert abs(duv) < 0.0005
    t_r, duv_r = cct_duv_robertson(uv)
    assert abs(t_r / temperature - 1) < 0.005 and abs(duv_r) < 0.0005


def test_published_robertson_row_4000_k():
    # Wyszecki & Stiles Table 1(3.11) (Robertson 1968): 250 MK^-1 = 4000 K at (u, v) = (0.22511, 0.33439)
    t, duv = cct_duv([0.22511, 1.5 * 0.33439])
    assert abs(t / 4000.0 - 1) < 0.005 and abs(duv) < 0.0005


@pytest.mark.parametrize("temperature", [3000.0, 5000.0])
@pytest.mark.parametrize("offset", [0.010, -0.010])
def test_off_locus_duv_sign_and_size(temperature, offset):
    # Ohno (2014, LEUKOS 10(1)) / ANSI C78.377: Duv is the distance from the Planckian locus on CIE 1960 (u, v),
    # positive above it (toward green), negative below; the isotemperature line is the locus's normal.
    # Built analytically: step `offset` along the normal of the locus (Planck's law, colour-science CMFs).
    p = uv1960_of(_planck_xyz(temperature))
    tangent = uv1960_of(_planck_xyz(temperature + 1.0)) - uv1960_of(_planck_xyz(temperature - 1.0))
    normal = np.array([-tangent[1], tangent[0]]) / np.hypot(*tangent)
    if normal[1] < 0:
        normal = -normal  # pointing up (+v)
    q = p + offset * normal
    t, duv = cct_duv([q[0], 1.5 * q[1]])
    assert np.sign(duv) == np.sign(offset)
    assert abs(duv - offset) < 0.0002
    assert abs(t / temperature - 1) < 0.005


def test_ohno_published_test_value():
    # colour-science's test of Ohno (2013): uv (0.1978, 0.3122) -> 6507.4748 K, Duv 0.0032233 (REFERENCES.md 5.3)
    t, duv = cct_duv([0.1978, 1.5 * 0.3122])
    assert abs(t - 6507.4748) < 0.05 and abs(duv - 0.0032233) < 1e-6


def test_robertson_published_test_value():
    # colour-science's doctest of Robertson (1968): uv (0.193741375998230, 0.315221043940594) -> 6500.0162 K, 0.0083333
    t, duv = cct_duv_robertson([0.193741375998230, 1.5 * 0.315221043940594])
    assert abs(t - 6500.0162) < 0.01 and abs(duv - 0.0083333) < 1e-6


def test_duv_uncertainty_of_an_error_across_the_locus():
    # analytic: Duv is the distance along the locus's normal in CIE 1960 (u, v) (Ohno 2014), so an error of
    # sigma along the normal gives sigma in Duv and (to first order) none in CCT
    p = uv1960_of(_planck_xyz(4000.0))
    tangent = uv1960_of(_planck_xyz(4001.0)) - uv1960_of(_planck_xyz(3999.0))
    n = np.array([-tangent[1], tangent[0]]) / np.hypot(*tangent)
    sigma = 1e-3
    d = np.array([n[0], 1.5 * n[1]])  # the same step in (u', v')
    res = cct_duv_with_uncertainty([p[0], 1.5 * p[1]], sigma**2 * np.outer(d, d))
    assert abs(res.duv_sigma / sigma - 1) < 0.01
    assert res.cct_sigma_k < 2.0  # K: along the isotemperature line


def test_far_from_locus_is_not_a_cct():
    # CIE 15:2004: a CCT means something only within 0.05 of the locus in (u, v)
    res = cct_duv_with_uncertainty([0.30, 0.45], np.eye(2) * 1e-8)  # a pink-orange, Duv about -0.058
    assert not res.valid and "0.05" in res.reason


# ------------------------------------------------------------------------------ ANSI class and chart
def test_ansi_class_targets():
    # ANSI C78.377 nominal classes at their target (CCT, Duv) - table from memory (REFERENCES.md 5.7)
    assert nominal_class(2725.0, 0.0) == 2700
    assert nominal_class(6530.0, 0.003) == 6500
    assert nominal_class(3045.0, 0.010) is None  # beyond the +-0.006 Duv tolerance
    assert nominal_class(1800.0, 0.0) is None


def test_chart_fit_recovers_a_known_matrix():
    # least squares (analytic case): noise-free patches through a known matrix come back exactly
    rng = np.random.default_rng(1)
    rgb = rng.uniform(0.05, 1.0, (24, 3))
    fit = fit_chart_matrix(rgb, rgb @ SRGB_TO_XYZ.T)
    assert_allclose(fit["matrix"], SRGB_TO_XYZ, atol=1e-9)
    assert fit["residual_rms_uv"] < 1e-9 and fit["patches"] == 24
    with pytest.raises(BeamshotError, match="colour directions"):
        fit_chart_matrix(np.ones((5, 3)) * np.arange(1, 6)[:, None], np.ones((5, 3)))


def test_chart_matrix_kept_in_the_camera_profile():
    from beamshot.camera.profile import CameraProfile, default_profile
    from beamshot.colour.chart import profile_with_chart_matrix

    rng = np.random.default_rng(2)
    rgb = rng.uniform(0.05, 1.0, (12, 3))
    prof = profile_with_chart_matrix(default_profile(), rgb, rgb @ SRGB_TO_XYZ.T)
    back = CameraProfile.from_dict(prof.to_dict(), "test")
    assert_allclose(back.colour_matrix["matrix"], SRGB_TO_XYZ, atol=1e-9)
    assert back.provenance[-1]["step"] == "colour chart"
    bad = prof.to_dict()
    bad["colour_matrix"]["matrix"] = [[1, 2, 3], [2, 4, 6], [0, 0, 1]]  # singular
    with pytest.raises(BeamshotError, match="colour_matrix.matrix"):
        CameraProfile.from_dict(bad, "test")


def test_delta_uv_is_euclidean():
    # common practice: the tint difference is the Euclidean distance in CIE 1976 (u', v')
    assert_allclose(delta_uv_prime([0.20, 0.46], [0.203, 0.464]), 0.005, atol=1e-12)


def test_colour_chart_command_recovers_the_srgb_matrix(tmp_path):
    # a chart of linear sRGB patches, written as a linear 16-bit PNG with reference XYZ = IEC 61966-2-1 matrix x RGB:
    # the fitted matrix is that matrix (within the 16-bit quantisation), kept in the profile
    import cv2
    from click.testing import CliRunner

    from beamshot.camera.profile import load_profile
    from beamshot.cli import cli

    rng = np.random.default_rng(3)
    rgb = rng.uniform(0.05, 0.9, (12, 3))
    img = np.zeros((300, 400, 3))
    rows = ["x,y,size,X,Y,Z"]
    for i, c in enumerate(rgb):
        y0, x0 = 25 + (i // 4) * 90, 25 + (i % 4) * 95
        img[y0:y0 + 60, x0:x0 + 60] = c
        xyz = SRGB_TO_XYZ @ c
        rows.append(f"{x0 + 29.5},{y0 + 29.5},40,{xyz[0]},{xyz[1]},{xyz[2]}")
    cv2.imwrite(str(tmp_path / "chart.png"), cv2.cvtColor(np.round(img * 65535).astype(np.uint16), cv2.COLOR_RGB2BGR))
    (tmp_path / "chart.csv").write_text("\n".join(rows) + "\n")
    prof = tmp_path / "cam.json"
    from beamshot.camera.profile import default_profile, save_profile
    from beamshot.camera.response import Response
    from dataclasses import replace

    save_profile(replace(default_profile(), name="chart-test", response=Response("linear")), str(prof))
    res = CliRunner().invoke(cli, ["camera", "colour-chart", str(tmp_path / "chart.png"), "--patches",
                                   str(tmp_path / "chart.csv"), "--name", "chart-test", "--out", str(prof)])
    assert res.exit_code == 0, res.output
    got = load_profile(str(prof)).colour_matrix
    assert_allclose(got["matrix"], SRGB_TO_XYZ, atol=2e-4)
    assert got["residual_rms_uv"] < 1e-4
    bad = CliRunner().invoke(cli, ["camera", "colour-chart", str(tmp_path / "chart.png"), "--patches",
                                   str(tmp_path / "chart.png"), "--name", "chart-test", "--out", str(prof)])
    assert bad.exit_code == 2 and "x,y,size,X,Y,Z" in bad.output
