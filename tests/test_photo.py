"""Decoding, EXIF facts, orientation and input guards."""

import io

import cv2
import numpy as np
import pytest
from numpy.testing import assert_array_equal
from PIL import Image, ImageOps

from beamshot.errors import BeamshotError
from beamshot.photo import apply_orientation, decode_photo, load_photo
from beamshot.synth import SynthCamera, encode_jpeg


def _gradient(h=30, w=40):
    y, x = np.mgrid[0:h, 0:w]
    return np.stack([x * 6, y * 8, (x + y) * 3], axis=-1).astype(np.uint8)


@pytest.mark.parametrize("orientation", range(1, 9))
def test_orientation_matches_pillow(orientation):
    # Exif 2.3 Orientation tag: our transform must equal Pillow's exif_transpose for all 8 values
    stored = _gradient()
    img = Image.fromarray(stored)
    exif = Image.Exif()
    exif[0x0112] = orientation
    buf = io.BytesIO()
    img.save(buf, "PNG", exif=exif)
    upright = np.asarray(ImageOps.exif_transpose(Image.open(io.BytesIO(buf.getvalue()))))
    assert_array_equal(apply_orientation(stored, orientation), upright)


def test_jpeg_exif_facts_and_orientation():
    cam = SynthCamera(width_px=64, height_px=48, exposure_time_s=1 / 125, f_number=2.8, iso=200,
                      focal_35mm_mm=26, orientation=6)
    upright = _gradient(48, 64)
    photo = decode_photo(encode_jpeg(upright, cam, quality=95), "x.jpg")
    assert photo.shape == (48, 64)  # turned upright again
    assert photo.exif.exposure_time_s == pytest.approx(1 / 125)
    assert photo.exif.f_number == pytest.approx(2.8)
    assert photo.exif.iso == 200 and photo.exif.focal_35mm_mm == 26 and photo.exif.orientation == 6
    assert np.abs(photo.pixels.astype(int) - upright).mean() < 8  # JPEG q95 with 4:2:0 chroma


def test_sixteen_bit_png_and_tiff(tmp_path):
    rgb16 = (np.random.default_rng(1).random((20, 30, 3)) * 65535).astype(np.uint16)
    for ext in (".png", ".tif"):
        path = tmp_path / f"a{ext}"
        cv2.imwrite(str(path), cv2.cvtColor(rgb16, cv2.COLOR_RGB2BGR))
        photo = load_photo(path)
        assert photo.max_code == 65535 and photo.pixels.dtype == np.uint16
        assert_array_equal(photo.pixels, rgb16)


@pytest.mark.parametrize("data, msg", [
    (b"", "empty"),
    (b"this is not a picture at all", "not a readable image"),
])
def test_bad_bytes(data, msg):
    with pytest.raises(BeamshotError, match=msg):
        decode_photo(data, "bad.jpg")


def test_truncated_jpeg():
    noise = np.random.default_rng(2).integers(0, 255, (300, 400, 3), dtype=np.uint8)
    data = encode_jpeg(noise, SynthCamera(width_px=400, height_px=300))
    with pytest.raises(BeamshotError, match="truncated"):
        decode_photo(data[: len(data) // 2], "cut.jpg")


def test_pixel_count_guard():
    data = encode_jpeg(_gradient(), SynthCamera(width_px=40, height_px=30))
    with pytest.raises(BeamshotError, match="MP limit"):
        decode_photo(data, "big.jpg", max_megapixels=0.001)


def test_missing_file_and_folder(tmp_path):
    with pytest.raises(BeamshotError, match="no such file"):
        load_photo(tmp_path / "nope.jpg")
    with pytest.raises(BeamshotError, match="folder"):
        load_photo(tmp_path)
