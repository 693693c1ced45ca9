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


def _linear_dng(path, rgb16, exposure=(1 / 100, 2.0, 100)):
    """A minimal LinearRaw DNG (DNG 1.4 tags) written with tifffile; exposure facts in IFD0 (TIFF/EP)."""
    import tifffile

    t, n, iso = exposure
    from fractions import Fraction

    ft, fn = Fraction(t).limit_denominator(100000), Fraction(n).limit_denominator(1000)
    tags = [
        (50706, "B", 4, (1, 4, 0, 0), True),  # DNGVersion
        (50707, "B", 4, (1, 1, 0, 0), True),  # DNGBackwardVersion
        (50708, "s", 0, "beamshot synthetic", True),  # UniqueCameraModel
        (50714, "H", 3, (256, 256, 256), True),  # BlackLevel
        (50717, "H", 3, (16383, 16383, 16383), True),  # WhiteLevel
        (50721, "2i", 9, (1, 1, 0, 1, 0, 1, 0, 1, 1, 1, 0, 1, 0, 1, 0, 1, 1, 1), True),  # ColorMatrix1 = I
        (50778, "H", 1, 21, True),  # CalibrationIlluminant1 = D65
        (33434, "2I", 1, (ft.numerator, ft.denominator), True),  # ExposureTime
        (33437, "2I", 1, (fn.numerator, fn.denominator), True),  # FNumber
        (34855, "H", 1, int(iso), True),  # ISOSpeedRatings
    ]
    tifffile.imwrite(path, rgb16, photometric=34892, planarconfig="contig", extratags=tags)


def test_raw_dng_decodes_linear(tmp_path):
    # LibRaw (rawpy) applies the file's black (256) and white (16383) levels, no gamma:
    # a grey ramp comes out proportional to (code - black)
    x = np.linspace(400, 15000, 96)
    grey = np.repeat(np.tile(x, (64, 1))[..., None], 3, axis=2).astype(np.uint16)
    path = tmp_path / "ramp.dng"
    _linear_dng(path, grey)
    photo = load_photo(path)
    assert photo.linear and photo.max_code == 65535
    assert photo.exif.exposure_time_s == pytest.approx(0.01) and photo.exif.iso == 100
    out = photo.pixels[32].astype(float).mean(axis=1)
    expected = x - 256
    slope, offset = np.polyfit(expected, out, 1)
    assert np.max(np.abs(out - (slope * expected + offset))) / out.max() < 0.005  # linear within 0.5 %
    assert abs(offset) / out.max() < 0.005  # black level removed


def test_corrupt_raw(tmp_path):
    path = tmp_path / "broken.dng"
    path.write_bytes(b"II*\x00" + b"\x00" * 100)
    with pytest.raises(BeamshotError, match="not a readable raw"):
        load_photo(path)


def test_ignored_exif_values_reach_the_report_warnings():
    # an exposure time of -1 s is physically impossible (EXIF 2.32 ExposureTime is a positive
    # rational): photo.py ignores it, and the analysis says so rather than dropping it silently
    import io

    from PIL import Image

    from beamshot import analyze
    from beamshot.synth import HotspotSpillBeam, SynthCamera, encode_jpeg, render_photo, Scene

    cam = SynthCamera(width_px=400, height_px=300, focal_35mm_mm=16, exposure_time_s=1 / 250)
    data = encode_jpeg(render_photo(HotspotSpillBeam(peak_cd=3000.0, hotspot_fwhm_deg=8.0, cutoff_deg=30.0),
                                    Scene(distance_m=5.0), cam), cam)
    im = Image.open(io.BytesIO(data))
    exif = im.getexif()
    exif.get_ifd(0x8769)[0x829A] = -1.0  # ExposureTime
    buf = io.BytesIO()
    im.save(buf, "JPEG", exif=exif, quality=90)
    rep = analyze(decode_photo(buf.getvalue(), "odd.jpg"), distance_m=5.0)
    assert any(w.startswith("odd.jpg: EXIF exposure time") and "ignored" in w for w in rep.warnings), rep.warnings
