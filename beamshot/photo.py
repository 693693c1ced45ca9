"""Decoding photos (JPEG, PNG, 8/16-bit TIFF, camera raw through LibRaw) with their EXIF exposure facts.

Pixels are kept as decoded by OpenCV (BGR channel order, ``Photo.bgr``) to avoid a copy of a
large photo; ``Photo.pixels`` is an RGB view of the same memory.  Shape ``(H, W, 3)``, row 0 at
the top, dtype uint8 or uint16, turned upright according to the EXIF Orientation tag (Exif 2.3,
tag 0x0112).

Input guards, each a one-line :class:`BeamshotError`: empty, unreadable, truncated or corrupt
files; photos smaller than ``MIN_SIDE_PX`` on a side or larger than ``MAX_MEGAPIXELS``.  EXIF
values outside a physical range (``EXIF_LIMITS``; e.g. an exposure of 0 s or ISO 1e9) are
ignored as if absent, and ``Photo.notes`` says so.  Pillow's own decompression-bomb limit is
replaced by ours during the header read, and the decoders' C-level messages are kept off the
terminal (corrupt PNG chunks are found by their CRC before OpenCV sees them).
"""

from __future__ import annotations

import contextlib
import hashlib
import io
import os
import sys
import tempfile
import threading
import warnings
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field

import cv2
import numpy as np
from PIL import Image

from .errors import BeamshotError, read_user_file

__all__ = ["MAX_MEGAPIXELS", "MIN_SIDE_PX", "RAW_EXTENSIONS", "EXIF_LIMITS", "READABLE_FORMATS", "ExifFacts", "Photo", "load_photo", "decode_photo", "decode_raw",
           "apply_orientation"]

#: Largest photo accepted, in megapixels (the largest phone sensors are 200 MP: 16320 x 12240).
MAX_MEGAPIXELS = 250.0
#: Smallest photo side accepted, in pixels.  Below it a photo is refused before any decoding; a
#: beam needs far more (the hotspot alone about 10 working pixels across), which the analysis
#: checks on the figures themselves.
MIN_SIDE_PX = 16
#: File endings decoded as raw sensor data through LibRaw (rawpy; LibRaw 0.22 reads all of them).
RAW_EXTENSIONS = frozenset({".dng", ".cr2", ".cr3", ".crw", ".nef", ".nrw", ".arw", ".srf", ".sr2", ".raf",
                            ".orf", ".rw2", ".pef", ".srw", ".3fr", ".iiq", ".rwl", ".kdc", ".dcr", ".mrw",
                            ".erf", ".mef", ".mos", ".x3f"})
#: The formats named in messages about unreadable files.
READABLE_FORMATS = ("JPEG, PNG, TIFF (8 or 16 bit) or a camera raw file read through LibRaw "
                    "(DNG, CR2, CR3, NEF, ARW, RAF, ORF, RW2, PEF, SRW, ...)")
#: Physical range of each EXIF exposure fact (low, high); a value outside is ignored as if absent.
#: Common practice / from memory: shutters run from about 1/64000 s to bulb exposures of minutes,
#: lenses from f/0.7 to f/64 (large-format f/128), ISO from 1 to the few million of the most
#: sensitive cameras, 35 mm-equivalent focal lengths from fisheyes (about 8 mm) to superzooms
#: (about 3000 mm).
EXIF_LIMITS = {
    "exposure_time_s": (1e-6, 3600.0),
    "f_number": (0.5, 128.0),
    "iso": (1.0, 1e7),
    "focal_length_mm": (0.5, 5000.0),
    "focal_35mm_mm": (5.0, 5000.0),
}

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
_TAG_WHITE_BALANCE = 0xA403  # Exif 2.3: 0 = auto, 1 = manual


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
    #: What the decoder ignored or assumed, for the report's warnings (e.g. an absurd EXIF value).
    notes: tuple[str, ...] = ()
    #: Colour facts for beamshot.colour: ``white_balance`` ("auto", "manual" or None: EXIF tag
    #: 0xA403), and for raw files ``camera_matrix`` (True if LibRaw has a camera-to-XYZ matrix for the file:
    #: its own, e.g. a DNG's ColorMatrix, or LibRaw's table for the camera; then its camera -> sRGB is not zero).
    colour_facts: dict = field(default_factory=dict, compare=False)
    #: The file's image format as Pillow names it ("JPEG", "PNG", "TIFF", "MPO"), "raw" for a raw
    #: file, "" if not known (a photo made in memory).  JPEG's lossy coding leaves concentric errors
    #: in an azimuthal mean (beamshot.jpeg_coding).
    file_format: str = ""

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
    """Exposure facts from a Pillow image's EXIF block (missing or damaged tags give ``None``)."""
    try:
        exif = image.getexif()
        return _facts(exif, exif.get_ifd(_TAG_EXIF_IFD))
    except Exception:  # noqa: BLE001 - a damaged EXIF block is as good as none; the pixels may still be fine
        return ExifFacts()


def _tiff_exif(data: bytes) -> tuple[ExifFacts, dict]:
    """Exposure facts (and the values as stored) from the TIFF structure of a TIFF-based raw file
    (DNG, NEF, CR2, ...).

    Reads IFD0 and its Exif sub-IFD with Pillow's TIFF tag reader (TIFF/EP allows the exposure
    tags in IFD0 too); returns empty facts for other files or damaged tags.
    """
    from PIL import TiffImagePlugin

    if data[:4] not in (b"II*\x00", b"MM\x00*"):
        return ExifFacts(), {}
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # Pillow's warnings about damaged tags
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
            ifd0 = dict(ifd0)
            return _facts(ifd0, sub), _stored_values(ifd0, sub)
    except Exception:  # noqa: BLE001 - damaged tags are as good as none; LibRaw has read the pixels
        return ExifFacts(), {}


def _facts(exif, sub) -> ExifFacts:
    def get(tag):
        return sub.get(tag, exif.get(tag))

    orientation = exif.get(_TAG_ORIENTATION, 1)
    try:
        orientation = int(orientation)
    except (TypeError, ValueError, OverflowError):
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


_EXIF_WORDS = {"exposure_time_s": ("exposure time", " s"), "f_number": ("f-number", ""), "iso": ("ISO", ""),
               "focal_length_mm": ("focal length", " mm"), "focal_35mm_mm": ("35 mm-equivalent focal length", " mm")}


def _plausible(facts: ExifFacts, raw: dict) -> tuple[ExifFacts, tuple[str, ...]]:
    """``facts`` with values outside :data:`EXIF_LIMITS` dropped, and a note for each value dropped.

    ``raw`` holds what the file said for each fact (before :func:`_number` turned a zero,
    negative or unreadable value into None), so those are named too.
    """
    from dataclasses import replace

    notes, changes = [], {}
    for key, (lo, hi) in EXIF_LIMITS.items():
        word, unit = _EXIF_WORDS[key]
        value = getattr(facts, key)
        said = raw.get(key)
        if value is None and said is None:
            continue
        if value is None or not lo <= value <= hi:
            changes[key] = None
            shown = f"{value:g}" if value is not None else repr(said)[:30]
            notes.append(f"EXIF {word} {shown}{unit} is outside {lo:g} to {hi:g}{unit} and was ignored")
    if raw.get("orientation") is not None and facts.orientation == 1 and raw["orientation"] != 1:
        notes.append(f"EXIF orientation {raw['orientation']!r:.30} is not one of 1-8 and was ignored "
                     "(the photo is taken as stored)")
    return (replace(facts, **changes) if changes else facts), tuple(notes)


def _stored_values(exif, sub) -> dict:
    """What the file stores for each exposure fact, before any cleaning (None where absent)."""
    tags = {"exposure_time_s": _TAG_EXPOSURE_TIME, "f_number": _TAG_F_NUMBER, "iso": _TAG_ISO,
            "focal_length_mm": _TAG_FOCAL_LENGTH, "focal_35mm_mm": _TAG_FOCAL_35MM}
    out = {k: sub.get(t, exif.get(t)) for k, t in tags.items()}
    out["orientation"] = exif.get(_TAG_ORIENTATION)
    out["white_balance"] = sub.get(_TAG_WHITE_BALANCE, exif.get(_TAG_WHITE_BALANCE))
    return out


def _white_balance_word(stored: dict) -> str | None:
    """EXIF WhiteBalance (Exif 2.3 tag 0xA403) as a word: 0 -> "auto", 1 -> "manual", else None."""
    value = stored.get("white_balance")
    try:
        return {0: "auto", 1: "manual"}.get(int(value))
    except (TypeError, ValueError, OverflowError):
        return None


def _raw_exif(image: Image.Image) -> dict:
    """:func:`_stored_values` of a Pillow image's EXIF block ({} if it is damaged)."""
    try:
        exif = image.getexif()
        return _stored_values(exif, exif.get_ifd(_TAG_EXIF_IFD))
    except Exception:  # noqa: BLE001 - see read_exif
        return {}


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


def _check_size(name: str, width: int, height: int, limit: float) -> None:
    """Refuse a photo smaller than :data:`MIN_SIDE_PX` on a side or larger than ``limit`` megapixels."""
    if width < MIN_SIDE_PX or height < MIN_SIDE_PX:
        raise BeamshotError(f"{name}: {width}x{height} px is too small to analyse (at least {MIN_SIDE_PX} px on each "
                            "side, and a beam needs far more); give the camera's full-size photo")
    megapixels = width * height / 1e6
    if megapixels > limit:
        raise BeamshotError(
            f"{name}: {width}x{height} is {megapixels:.0f} MP, above the {limit:.0f} MP limit; "
            "downscale the photo or check the file"
        )


_STDERR_LOCK = threading.Lock()
#: What libjpeg prints for a damaged entropy-coded segment (the decoder then fills in grey or garbage):
#: such a photo is refused.  Other libjpeg warnings (e.g. extraneous bytes before a marker, common in
#: camera files whose pixels are intact) are only kept off the terminal.
_JPEG_DAMAGE_WORDS = ("premature end", "huffman")


@contextlib.contextmanager
def _decoder_messages():
    """Collect what C decoders (libjpeg, libpng, LibRaw) print on file descriptor 2 during one call,
    instead of letting it reach the user's terminal; yields a list that holds the text afterwards."""
    box: list[str] = []
    with _STDERR_LOCK:
        try:
            sys.stderr.flush()
            saved = os.dup(2)
        except (OSError, ValueError, AttributeError):  # no real stderr (embedded use): nothing to hide
            yield box
            box.append("")
            return
        with tempfile.TemporaryFile() as sink:
            os.dup2(sink.fileno(), 2)
            try:
                yield box
            finally:
                os.dup2(saved, 2)
                os.close(saved)
                sink.seek(0)
                box.append(sink.read(4096).decode("utf-8", "replace"))


@contextlib.contextmanager
def _quiet_opencv():
    """Keep OpenCV's own log lines (libtiff warnings, decoder errors) off the terminal for one call."""
    logging = getattr(getattr(cv2, "utils", None), "logging", None)
    if logging is None:  # pragma: no cover - OpenCV builds without the logging module
        yield
        return
    level = logging.getLogLevel()
    logging.setLogLevel(logging.LOG_LEVEL_SILENT)
    try:
        yield
    finally:
        logging.setLogLevel(level)


def decode_raw(data: bytes, name: str = "<memory>", *, max_megapixels: float | None = None) -> Photo:
    """Decode a raw file (DNG and common camera raws) with LibRaw through rawpy, as linear data.

    Black and white levels come from the file; demosaicing without auto-brightening, gamma
    (1, 1), 16-bit output, the camera's white balance and sRGB primaries.  ``linear`` is set,
    so no response curve is applied; 1.0 is LibRaw's white level.
    """
    import rawpy

    limit = MAX_MEGAPIXELS if max_megapixels is None else max_megapixels
    try:
        with _decoder_messages(), rawpy.imread(io.BytesIO(data)) as raw:
            h, w = raw.sizes.height, raw.sizes.width
            _check_size(name, w, h, limit)
            rgb = raw.postprocess(gamma=(1, 1), no_auto_bright=True, output_bps=16, use_camera_wb=True,
                                  output_color=rawpy.ColorSpace.sRGB)
            has_matrix = bool(np.any(np.asarray(raw.color_matrix)[:3, :3] != 0))  # LibRaw's camera -> sRGB
    except BeamshotError:
        raise
    except (rawpy.LibRawError, OSError, ValueError, MemoryError) as exc:
        raise BeamshotError(f"{name}: not a readable raw file ({type(exc).__name__}); copy the file again, or give "
                            f"{READABLE_FORMATS}") from None
    if rgb is None or rgb.ndim != 3 or rgb.shape[2] != 3:
        raise BeamshotError(f"{name}: the raw file holds no colour image beamshot can use; give {READABLE_FORMATS}")
    _check_size(name, rgb.shape[1], rgb.shape[0], limit)
    exif, stored = _tiff_exif(data)
    from dataclasses import replace

    exif = replace(exif, orientation=1)  # LibRaw has already turned the image upright
    stored.pop("orientation", None)
    exif, notes = _plausible(exif, stored)
    return Photo(bgr=np.ascontiguousarray(rgb[..., ::-1]), exif=exif, name=name,
                 sha256=hashlib.sha256(data).hexdigest(), max_code=65535, linear=True, notes=notes,
                 colour_facts={"white_balance": _white_balance_word(stored), "camera_matrix": has_matrix},
                 file_format="raw")


def _jpeg_has_end(data: bytes) -> bool:
    """Whether a JPEG's main image ends with an EOI marker (ITU-T T.81 B.2).

    The marker segments before the first start-of-scan are skipped by their lengths, so the end
    marker of an EXIF thumbnail (inside APP1) does not count; in the entropy-coded data after it
    0xFF is always stuffed or a restart marker, so 0xFFD9 there is the real end (data a phone
    appends after the end, e.g. a depth map, is allowed).
    """
    pos = 2
    n = len(data)
    while pos + 4 <= n:
        if data[pos] != 0xFF:
            return False
        marker = data[pos + 1]
        if marker == 0xFF:  # fill byte
            pos += 1
            continue
        if marker == 0xDA:  # start of scan: the entropy-coded data follow
            return data.find(b"\xff\xd9", pos) >= 0
        if 0xD0 <= marker <= 0xD8 or marker == 0x01:  # markers without a length
            pos += 2
            continue
        pos += 2 + int.from_bytes(data[pos + 2:pos + 4], "big")
    return False


def _probe(data: bytes, name: str, limit: float):
    """``(width, height, format, exif facts, raw EXIF values)`` from the header, without decoding pixels.

    Pillow's decompression-bomb guard (a warning at 89 MP, an error at 179 MP) would refuse a
    200 MP phone photo; during this header read it is set to our own limit (error above twice
    it, which our check below catches first) and its warning is kept from the user.
    """
    saved = Image.MAX_IMAGE_PIXELS
    Image.MAX_IMAGE_PIXELS = int(limit * 1e6)
    try:
        with warnings.catch_warnings():
            # Pillow warns about damaged metadata (and large images): the file is refused below or
            # its pixels are decoded by OpenCV, so these warnings are not for the user
            warnings.simplefilter("ignore")
            with Image.open(io.BytesIO(data)) as probe:
                width, height = probe.size
                fmt = probe.format
                if fmt == "PNG":
                    probe.verify()  # chunk CRCs: a damaged PNG is refused here, before libpng prints to stderr
            if fmt == "PNG" and b"eXIf" not in data:  # Pillow would decode the whole PNG to look for EXIF
                exif, raw = ExifFacts(), {}
            else:
                with Image.open(io.BytesIO(data)) as probe:
                    exif = read_exif(probe)
                    raw = _raw_exif(probe)
    except Image.DecompressionBombError:
        raise BeamshotError(f"{name}: the image claims an absurd size (above {2 * limit:.0f} MP); it is refused; "
                            "check the file") from None
    except Exception:  # noqa: BLE001 - Pillow raises many types on damaged headers; all mean "unreadable"
        raise BeamshotError(f"{name}: not a readable image; give {READABLE_FORMATS}") from None
    finally:
        Image.MAX_IMAGE_PIXELS = saved
    return width, height, fmt, exif, raw


def decode_photo(data: bytes, name: str = "<memory>", *, max_megapixels: float | None = None) -> Photo:
    """Decode image bytes into a :class:`Photo`; raises :class:`BeamshotError` on bad input.

    Raw files (by their ending, see ``RAW_EXTENSIONS``) go to :func:`decode_raw`.
    """
    limit = MAX_MEGAPIXELS if max_megapixels is None else max_megapixels
    if len(data) == 0:
        raise BeamshotError(f"{name}: the file is empty; give {READABLE_FORMATS}")
    if os.path.splitext(name)[1].lower() in RAW_EXTENSIONS:
        return decode_raw(data, name, max_megapixels=max_megapixels)
    width, height, fmt, exif, raw = _probe(data, name, limit)
    if fmt not in ("JPEG", "PNG", "TIFF", "MPO"):
        raise BeamshotError(f"{name}: {fmt} images are not supported; give {READABLE_FORMATS}")
    _check_size(name, width, height, limit)
    if fmt in ("JPEG", "MPO") and not _jpeg_has_end(data):
        raise BeamshotError(f"{name}: the JPEG is truncated (no end marker); copy the file again")
    exif, notes = _plausible(exif, raw)
    flags = cv2.IMREAD_COLOR | cv2.IMREAD_ANYDEPTH | cv2.IMREAD_IGNORE_ORIENTATION
    with ThreadPoolExecutor(max_workers=1) as pool:  # hash on the other core while decoding
        digest = pool.submit(lambda: hashlib.sha256(data).hexdigest())
        with _quiet_opencv(), _decoder_messages() as said:
            try:
                bgr = cv2.imdecode(np.frombuffer(data, np.uint8), flags)
            except cv2.error:
                bgr = None
    if bgr is None or bgr.size == 0:
        raise BeamshotError(f"{name}: the image data is corrupt; copy the file again")
    message = said[0].strip() if said else ""
    if fmt in ("JPEG", "MPO") and any(w in message.lower() for w in _JPEG_DAMAGE_WORDS):
        raise BeamshotError(f"{name}: the JPEG data are damaged (the decoder says: {message.splitlines()[0][:80]}); "
                            "copy the file again")
    if bgr.dtype not in (np.uint8, np.uint16):
        raise BeamshotError(f"{name}: {bgr.dtype} pixels are not supported; give 8- or 16-bit images")
    if bgr.ndim == 2:
        bgr = cv2.cvtColor(bgr, cv2.COLOR_GRAY2BGR)
    elif bgr.shape[2] == 4:
        bgr = cv2.cvtColor(bgr, cv2.COLOR_BGRA2BGR)
    if bgr.shape[:2] != (height, width):
        raise BeamshotError(f"{name}: the image data ({bgr.shape[1]}x{bgr.shape[0]}) do not match the header "
                            f"({width}x{height}); copy the file again")
    bgr = np.ascontiguousarray(apply_orientation(bgr, exif.orientation))
    max_code = 255 if bgr.dtype == np.uint8 else 65535
    return Photo(
        bgr=bgr,
        exif=exif,
        name=name,
        sha256=digest.result(),
        max_code=max_code,
        notes=notes,
        colour_facts={"white_balance": _white_balance_word(raw)},
        file_format=fmt,
    )


def load_photo(path: str | os.PathLike, *, max_megapixels: float | None = None) -> Photo:
    """Read and decode a photo file (see :func:`decode_photo`)."""
    name = os.path.basename(os.fsdecode(path))
    # a name with bytes that are not UTF-8 (lone surrogates, PEP 383) is shown with U+FFFD: reports,
    # pictures and pages cannot hold the raw bytes
    name = name.encode("utf-8", "surrogateescape").decode("utf-8", "replace")
    data = read_user_file(path, "not a photo")
    return decode_photo(data, name, max_megapixels=max_megapixels)
