"""Decoding photos (JPEG, PNG, 8/16-bit TIFF) with their EXIF exposure facts.

Pixels are kept as decoded by OpenCV (BGR channel order, ``Photo.bgr``) to avoid a copy of a
large photo; ``Photo.pixels`` is an RGB view of the same memory.  Shape ``(H, W, 3)``, row 0 at
the top, dtype uint8 or uint16, turned upright according to the EXIF Orientation tag (Exif 2.3,
tag 0x0112).
"""

from __future__ import annotations

import hashlib
import io
import os
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field

import cv2
import numpy as np
from PIL import Image, UnidentifiedImageError

from .errors import BeamshotError, read_user_file

__all__ = ["MAX_MEGAPIXELS", "RAW_EXTENSIONS", "ExifFacts", "Photo", "load_photo", "decode_photo", "decode_raw",
           "apply_orientation"]

#: Largest photo accepted, in megapixels (the largest phone sensors are 200 MP).
MAX_MEGAPIXELS = 250.0
#: File endings decoded as raw sensor data through LibRaw (rawpy).
RAW_EXTENSIONS = frozenset({".dng", ".cr2", ".cr3", ".nef", ".nrw", ".arw", ".raf", ".orf", ".rw2", ".pef",
                            ".srw", ".3fr", ".iiq", ".rwl"})

# Exif tag numbers (Exif 2.3 / CIPA DC-008).
_TAG_ORIENTATION = 0x0112
_TAG_MAKE = 0x010F
_TAG_MODEL = 0x0110
_TAG_EXIF_IFD = 0x8769
_TAG_EXPOSURE_TIME = 0x829A
_TAG_F_NUMBER = 0x829D
_TAG_ISO = 0x8827
_TAG_FOCAL_LENGTH = 0x920A
_TAG_FOCAL_35MM = 0xA405


@dataclass(frozen=True)
class ExifFacts:
    """Exposure facts read from EXIF; ``None`` where the file does not say."""

    exposure_time_s: float | None = None
    f_number: float | None = None
    iso: float | None = None
    focal_length_mm: float | None = None
    focal_35mm_mm: float | None = None
    make: str | None = None
    model: str | None = None
    orientation: int = 1

    @property
    def has_exposure(self) -> bool:
        return None not in (self.exposure_time_s, self.f_number, self.iso)

    def exposure_product(self) -> float | None:
        """``t S / N^2``: linear signal scales with this for a fixed scene (s)."""
        if not self.has_exposure:
            return None
        return self.exposure_time_s * self.iso / self.f_number**2


@dataclass(frozen=True)
class Photo:
    """A decoded photo: upright pixels (BGR storage, RGB view) and where they came from."""

    bgr: np.ndarray = field(repr=False)
    exif: ExifFacts
    name: str
    sha256: str
    max_code: int
    linear: bool = False

    @property
    def pixels(self) -> np.ndarray:
        """RGB view ``(H, W, 3)`` of the pixels (no copy)."""
        return self.bgr[..., ::-1]

    @property
    def shape(self) -> tuple[int, int]:
        return self.bgr.shape[:2]


def _number(value) -> float | None:
    if value is None:
        return None
    if isinstance(value, tuple):  # some writers store one-element tuples
        value = value[0] if value else None
        if value is None:
            return None
    try:
        x = float(value)
    except (TypeError, ValueError, ZeroDivisionError):
        return None
    return x if np.isfinite(x) and x > 0 else None


def _text(value) -> str | None:
    if value is None:
        return None
    s = str(value).strip("\x00 ").strip()
    return s or None


def read_exif(image: Image.Image) -> ExifFacts:
    """Exposure facts from a Pillow image's EXIF block (missing tags give ``None``)."""
    exif = image.getexif()
    return _facts(exif, exif.get_ifd(_TAG_EXIF_IFD))


def _tiff_exif(data: bytes) -> ExifFacts:
    """Exposure facts from the TIFF structure of a TIFF-based raw file (DNG, NEF, CR2, ...).

    Reads IFD0 and its Exif sub-IFD with Pillow's TIFF tag reader (TIFF/EP allows the exposure
    tags in IFD0 too); returns empty facts for other files.
    """
    from PIL import TiffImagePlugin

    if data[:4] not in (b"II*\x00", b"MM\x00*"):
        return ExifFacts()
    try:
        fp = io.BytesIO(data)
        ifd0 = TiffImagePlugin.ImageFileDirectory_v2(ifh=data[:8])
        fp.seek(ifd0.next)
        ifd0.load(fp)
        sub = {}
        if _TAG_EXIF_IFD in ifd0:
            sub_ifd = TiffImagePlugin.ImageFileDirectory_v2(ifh=data[:8])
            fp.seek(int(ifd0[_TAG_EXIF_IFD]))
            sub_ifd.load(fp)
            sub = dict(sub_ifd)
        return _facts(dict(ifd0), sub)
    except (OSError, ValueError, KeyError, TypeError, SyntaxError):
        return ExifFacts()


def _facts(exif, sub) -> ExifFacts:
    def get(tag):
        return sub.get(tag, exif.get(tag))

    orientation = exif.get(_TAG_ORIENTATION, 1)
    try:
        orientation = int(orientation)
    except (TypeError, ValueError):
        orientation = 1
    if orientation not in range(1, 9):
        orientation = 1
    return ExifFacts(
        exposure_time_s=_number(get(_TAG_EXPOSURE_TIME)),
        f_number=_number(get(_TAG_F_NUMBER)),
        iso=_number(get(_TAG_ISO)),
        focal_length_mm=_number(get(_TAG_FOCAL_LENGTH)),
        focal_35mm_mm=_number(get(_TAG_FOCAL_35MM)),
        make=_text(exif.get(_TAG_MAKE)),
        model=_text(exif.get(_TAG_MODEL)),
        orientation=orientation,
    )


def apply_orientation(pixels: np.ndarray, orientation: int) -> np.ndarray:
    """Turn pixels upright for an EXIF Orientation value 1-8 (Exif 2.3 tag 0x0112).

    The value says where row 0 / column 0 of the stored image belong: 3 = rotate 180,
    6 = rotate 90 degrees clockwise to view, 8 = rotate 90 counter-clockwise, 2/4 mirror,
    5 = transpose, 7 = transverse.

    >>> a = np.arange(6).reshape(2, 3)
    >>> apply_orientation(a, 6).tolist()
    [[3, 0], [4, 1], [5, 2]]
    """
    if orientation == 2:
        return pixels[:, ::-1]
    if orientation == 3:
        return pixels[::-1, ::-1]
    if orientation == 4:
        return pixels[::-1, :]
    if orientation == 5:
        return np.swapaxes(pixels, 0, 1)
    if orientation == 6:
        return np.rot90(pixels, k=-1)
    if orientation == 7:
        return np.swapaxes(pixels[::-1, ::-1], 0, 1)
    if orientation == 8:
        return np.rot90(pixels, k=1)
    return pixels


def decode_raw(data: bytes, name: str = "<memory>", *, max_megapixels: float | None = None) -> Photo:
    """Decode a raw file (DNG and common camera raws) with LibRaw through rawpy, as linear data.

    Black and white levels come from the file; demosaicing without auto-brightening, gamma
    (1, 1), 16-bit output, the camera's white balance and sRGB primaries.  ``linear`` is set,
    so no response curve is applied; 1.0 is LibRaw's white level.
    """
    import rawpy

    limit = MAX_MEGAPIXELS if max_megapixels is None else max_megapixels
    try:
        with rawpy.imread(io.BytesIO(data)) as raw:
            h, w = raw.sizes.height, raw.sizes.width
            if h * w / 1e6 > limit:
                raise BeamshotError(f"{name}: {w}x{h} is above the {limit:.0f} MP limit")
            rgb = raw.postprocess(gamma=(1, 1), no_auto_bright=True, output_bps=16, use_camera_wb=True,
                                  output_color=rawpy.ColorSpace.sRGB)
    except (rawpy.LibRawError, OSError, ValueError) as exc:
        raise BeamshotError(f"{name}: not a readable raw file ({type(exc).__name__}); copy the file again") from None
    exif = _tiff_exif(data)
    from dataclasses import replace

    exif = replace(exif, orientation=1)  # LibRaw has already turned the image upright
    return Photo(bgr=np.ascontiguousarray(rgb[..., ::-1]), exif=exif, name=name,
                 sha256=hashlib.sha256(data).hexdigest(), max_code=65535, linear=True)


def decode_photo(data: bytes, name: str = "<memory>", *, max_megapixels: float | None = None) -> Photo:
    """Decode image bytes into a :class:`Photo`; raises :class:`BeamshotError` on bad input.

    Raw files (by their ending, see ``RAW_EXTENSIONS``) go to :func:`decode_raw`.
    """
    limit = MAX_MEGAPIXELS if max_megapixels is None else max_megapixels
    if len(data) == 0:
        raise BeamshotError(f"{name}: the file is empty; give a JPEG, PNG or TIFF photo")
    if os.path.splitext(name)[1].lower() in RAW_EXTENSIONS:
        return decode_raw(data, name, max_megapixels=max_megapixels)
    try:
        with Image.open(io.BytesIO(data)) as probe:
            width, height = probe.size
            fmt = probe.format
            exif = read_exif(probe)
    except (UnidentifiedImageError, OSError, SyntaxError, ValueError):
        raise BeamshotError(f"{name}: not a readable image; give a JPEG, PNG or TIFF photo") from None
    except Image.DecompressionBombError:
        raise BeamshotError(f"{name}: the image claims an absurd size; it is refused") from None
    if fmt not in ("JPEG", "PNG", "TIFF", "MPO"):
        raise BeamshotError(f"{name}: {fmt} images are not supported; give a JPEG, PNG or TIFF photo")
    megapixels = width * height / 1e6
    if megapixels > limit:
        raise BeamshotError(
            f"{name}: {width}x{height} is {megapixels:.0f} MP, above the {limit:.0f} MP limit; "
            "downscale the photo or check the file"
        )
    if fmt in ("JPEG", "MPO") and b"\xff\xd9" not in data[-4096:]:
        raise BeamshotError(f"{name}: the JPEG is truncated (no end marker); copy the file again")
    flags = cv2.IMREAD_COLOR | cv2.IMREAD_ANYDEPTH | cv2.IMREAD_IGNORE_ORIENTATION
    with ThreadPoolExecutor(max_workers=1) as pool:  # hash on the other core while decoding
        digest = pool.submit(lambda: hashlib.sha256(data).hexdigest())
        bgr = cv2.imdecode(np.frombuffer(data, np.uint8), flags)
    if bgr is None or bgr.size == 0:
        raise BeamshotError(f"{name}: the image data is corrupt; copy the file again")
    if bgr.dtype not in (np.uint8, np.uint16):
        raise BeamshotError(f"{name}: {bgr.dtype} pixels are not supported; give 8- or 16-bit images")
    if bgr.ndim == 2:
        bgr = cv2.cvtColor(bgr, cv2.COLOR_GRAY2BGR)
    elif bgr.shape[2] == 4:
        bgr = cv2.cvtColor(bgr, cv2.COLOR_BGRA2BGR)
    bgr = np.ascontiguousarray(apply_orientation(bgr, exif.orientation))
    max_code = 255 if bgr.dtype == np.uint8 else 65535
    return Photo(
        bgr=bgr,
        exif=exif,
        name=name,
        sha256=digest.result(),
        max_code=max_code,
    )


def load_photo(path: str | os.PathLike, *, max_megapixels: float | None = None) -> Photo:
    """Read and decode a photo file (see :func:`decode_photo`)."""
    name = os.path.basename(os.fspath(path))
    data = read_user_file(path, "not a photo")
    return decode_photo(data, name, max_megapixels=max_megapixels)
