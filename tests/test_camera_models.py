"""Response curves and exposure relations against IEC 61966-2-1, ISO 2720 and ISO 12232."""

import numpy as np
import pytest
from numpy.testing import assert_allclose

from beamshot.camera import exposure as ex
from beamshot.camera.response import Response, parse_response, srgb_decode, srgb_encode


@pytest.mark.parametrize("v, lin", [(0.02, 0.00154799), (0.04045, 0.00313081), (0.1, 0.0100228),
                                    (118 / 255, 0.181164), (128 / 255, 0.215861), (188 / 255, 0.502886),
                                    (0.8, 0.603827), (1.0, 1.0)])
def test_srgb_decode_table(v, lin):
    # IEC 61966-2-1 sRGB decoding (values from the standard's formula)
    assert_allclose(srgb_decode(v), lin, atol=1e-6)  # table has 6 significant digits


def test_srgb_reference_points():
    # IEC 61966-2-1: decode(0.5) = 0.214041140; encode(0.18) = 0.461356129500 (colour-science test value)
    assert_allclose(srgb_decode(0.5), 0.214041140, atol=1e-9)
    assert_allclose(srgb_encode(0.18), 0.461356129500, atol=1e-12)


def test_srgb_round_trip_whole_range():
    x = np.linspace(0, 1, 10001)
    assert_allclose(srgb_decode(srgb_encode(x)), x, atol=1e-12)
    # shape is preserved: a 2-D input gives the same values as the flat one
    assert_allclose(srgb_decode(x[:10000].reshape(100, 100)).ravel(), srgb_decode(x[:10000]))


def test_gamma_and_linear():
    g = Response("gamma", 2.2)
    assert_allclose(g.decode(0.5), 0.5**2.2, rtol=1e-12)
    assert_allclose(g.encode(g.decode(np.linspace(0, 1, 11))), np.linspace(0, 1, 11), atol=1e-12)
    assert Response("linear").decode(0.3) == pytest.approx(0.3)


def test_lookup_table_matches_formula():
    # IEC 61966-2-1 sRGB decoding as implemented by colour-science (an outside reference)
    colour = pytest.importorskip("colour")
    lut = Response().lookup_table(256)
    assert lut.dtype == np.float32 and lut.shape == (256,)
    assert_allclose(lut, colour.models.eotf_sRGB(np.arange(256) / 255), atol=1e-7)


def test_srgb_against_colour_science_whole_range():
    # IEC 61966-2-1 decoding and encoding, colour-science's implementation as the reference
    colour = pytest.importorskip("colour")
    x = np.linspace(0, 1, 10001)
    assert_allclose(srgb_decode(x), colour.models.eotf_sRGB(x), atol=1e-9)
    assert_allclose(srgb_encode(x), colour.models.eotf_inverse_sRGB(x), atol=1e-9)


@pytest.mark.parametrize("text, msg", [("gamma:x", "cannot read"), ("gamma:9", "outside"), ("log", "unknown curve")])
def test_parse_response_errors(text, msg):
    with pytest.raises(ValueError, match=msg):
        parse_response(text)


def test_iso12232_q_factor():
    # ISO 12232:2006 q = (pi/4) T f_v cos^4(theta), T = 0.9, f_v = 0.98, theta = 10 deg -> 0.651575
    assert ex.q_factor() == pytest.approx(0.651575, abs=1e-6)


def test_iso12232_clip_luminance():
    # ISO 12232 saturation speed 78/H_sat: f/8, 1/250 s, ISO 400 -> L_clip ~ 4788 cd/m^2
    # (colour-hdri Lagarde-2014 scale factor 0.0002088 -> 1/0.0002088 = 4789)
    assert ex.luminance_at_clip(8, 1 / 250, 400) == pytest.approx(4788, rel=5e-4)


def test_clip_luminance_gives_saturation_exposure():
    # ISO 12232: focal-plane exposure H = q L t / N^2 equals 78 / S exactly at the clip luminance
    l_clip = ex.luminance_at_clip(2.8, 1 / 60, 200)
    assert ex.q_factor() * l_clip * (1 / 60) / 2.8**2 == pytest.approx(78 / 200, rel=1e-12)
