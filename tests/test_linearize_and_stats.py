"""Working-image construction and the row statistics used by the edge finders."""

import cv2
import numpy as np
import pytest
from numpy.testing import assert_allclose, assert_array_equal

from beamshot.camera.linearize import linearize
from beamshot.camera.response import parse_response, srgb_decode
from beamshot.photo import Photo, decode_photo
from beamshot.robust import row_mad_sigma, row_nanmedian


def _photo(bgr: np.ndarray) -> Photo:
    ok, buf = cv2.imencode(".png", bgr)
    return decode_photo(buf.tobytes(), name="t.png")


@pytest.mark.parametrize("bits", [8, 16])
@pytest.mark.parametrize("b", [1, 2, 3])
def test_binning_averages_linear_values_and_marks_any_clipped_pixel(b, bits):
    rng = np.random.default_rng(3)
    h, w = 6 * b * 10, 8 * b * 10
    top = 2**bits - 1
    dtype = np.uint8 if bits == 8 else np.uint16
    bgr = rng.integers(0, int(0.94 * top), (h, w, 3)).astype(dtype)
    # scattered clipped values, one channel at a time
    for _ in range(40):
        r, c, ch = rng.integers(0, h), rng.integers(0, w), rng.integers(0, 3)
        bgr[r, c, ch] = top
    # one extra row and two extra columns: the working image covers whole blocks only
    bgr = np.pad(bgr, ((0, 1), (0, 2), (0, 0)), mode="edge")
    img = linearize(_photo(bgr), parse_response("srgb"), max_side=-(-(w + 2) // b))
    h, w = (h + 1) // b * b, (w + 2) // b * b
    assert img.bin_factor == b and img.shape == (h // b, w // b)
    bgr = bgr[:h, :w]
    # reference: decode each code with the IEC 61966-2-1 formula, then average b x b blocks
    lin = srgb_decode(bgr[..., ::-1].astype(float) / top)
    ref = lin.reshape(h // b, b, w // b, b, 3).mean(axis=(1, 3))
    assert_allclose(img.rgb, ref, atol=1.0 / 65535)  # 16-bit lookup table
    clipped = (bgr >= np.ceil(250 / 255 * top)).any(axis=2).reshape(h // b, b, w // b, b).any(axis=(1, 3))
    assert_array_equal(img.saturated, clipped)
    # BT.709 relative luminance of linear RGB
    assert_allclose(img.luminance, ref @ np.array([0.2126, 0.7152, 0.0722]), atol=2.0 / 65535)


def test_row_nanmedian_matches_numpy():
    rng = np.random.default_rng(4)
    a = rng.normal(size=(50, 21))
    a[rng.random(a.shape) < 0.3] = np.nan
    a[7] = np.nan
    with np.errstate(invalid="ignore"), pytest.warns(RuntimeWarning):
        ref = np.nanmedian(a, axis=1)  # numpy's reference implementation
    assert_allclose(row_nanmedian(a), ref, equal_nan=True)


def test_row_mad_sigma_of_normal_noise():
    # for normal data 1.4826 MAD estimates sigma (Rousseeuw & Croux 1993)
    rng = np.random.default_rng(5)
    a = rng.normal(scale=2.0, size=(4, 20000))
    assert_allclose(row_mad_sigma(a), 2.0, rtol=0.03)
