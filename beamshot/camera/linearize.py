"""Linearise a decoded photo: response curve, saturation mask, binning to a working size.

The result is a :class:`LinearImage`: linear RGB normalised to 1 at clipping, its relative
luminance (BT.709 weights on *linear* values), and a mask of pixels that touched clipping.
Binning averages linear values (never encoded ones), so it is photometrically exact.
"""

from __future__ import annotations

from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from functools import cached_property

import cv2
import numpy as np

from ..photo import Photo
from .response import LUMINANCE_WEIGHTS_BT709, Response

__all__ = [
    "WORKING_MAX_SIDE",
    "SATURATION_CODE_FRACTION",
    "LinearImage",
    "linearize",
    "bin_factor_for",
]

#: The longest side of the working image, in pixels (about 0.05 deg per pixel for a 80 deg view).
WORKING_MAX_SIDE = 2000
#: A pixel whose largest channel reaches this fraction of full code is treated as clipped
#: (JPEG ringing spreads clipped areas over the top few codes; common practice).
SATURATION_CODE_FRACTION = 250.0 / 255.0
#: Rows decoded to linear per step, to bound memory on large photos.
_STRIP_ROWS = 128


@dataclass(frozen=True)
class LinearImage:
    """Linear image at working resolution.

    ``rgb`` is ``(h, w, 3)`` float32 linear (1 = clipping), ``luminance`` is ``(h, w)``,
    ``saturated`` is ``(h, w)`` bool.  Working pixel ``(row, col)`` covers full-resolution
    pixels ``[row*b, row*b + b)`` x ``[col*b, col*b + b)`` with ``b = bin_factor``.
    The colour is held either as float values (``rgb_values``) or, straight from an 8-bit
    photo, as 16-bit counts (``rgb_counts``, 65535 = clipping) that become ``rgb`` on first use;
    the luminance is always float.
    """

    luminance: np.ndarray = field(repr=False)
    saturated: np.ndarray = field(repr=False)
    bin_factor: int
    full_shape: tuple[int, int]
    rgb_values: np.ndarray | None = field(default=None, repr=False)
    rgb_counts: np.ndarray | None = field(default=None, repr=False)

    @cached_property
    def rgb(self) -> np.ndarray:
        """``(h, w, 3)`` float32 linear RGB, 1 = clipping."""
        if self.rgb_values is not None:
            return self.rgb_values
        return np.multiply(self.rgb_counts, np.float32(1.0 / 65535.0), dtype=np.float32)

    @property
    def shape(self) -> tuple[int, int]:
        return self.luminance.shape

    def divided_by(self, gain: np.ndarray) -> "LinearImage":
        """Same image with every channel divided by ``gain`` ``(h, w)`` (a flat-field correction)."""
        return LinearImage(rgb_values=self.rgb / gain[..., None], luminance=self.luminance / gain,
                           saturated=self.saturated, bin_factor=self.bin_factor, full_shape=self.full_shape)

    def with_values(self, rgb: np.ndarray) -> "LinearImage":
        """Same geometry and saturation mask, new linear RGB (luminance recomputed)."""
        return LinearImage(
            rgb_values=rgb.astype(np.float32, copy=False),
            luminance=relative_luminance(rgb),
            saturated=self.saturated,
            bin_factor=self.bin_factor,
            full_shape=self.full_shape,
        )


def relative_luminance(rgb: np.ndarray) -> np.ndarray:
    """BT.709 relative luminance of linear RGB ``(..., 3)``."""
    w = np.asarray(LUMINANCE_WEIGHTS_BT709, dtype=np.float32).reshape(1, 3)
    rgb = np.ascontiguousarray(rgb, dtype=np.float32)
    if rgb.ndim == 3 and rgb.shape[2] == 3:
        return cv2.transform(rgb, w)  # weighted channel sum, one SIMD pass
    return (rgb @ w.ravel()).astype(np.float32)


def bin_factor_for(shape: tuple[int, int], max_side: int | None = None) -> int:
    """Integer binning so the longest side is at most ``max_side`` working pixels.

    >>> bin_factor_for((3000, 4000))
    2
    """
    limit = WORKING_MAX_SIDE if max_side is None else max_side
    return max(1, int(np.ceil(max(shape) / limit)))


def _any_clipped(strip: np.ndarray, clip_code: int, b: int) -> np.ndarray:
    """``(rows/b, cols/b)`` bool: True where any channel of any pixel in a ``b`` x ``b`` block reaches ``clip_code``.

    One threshold pass marks clipped channel values; an area resize by ``b`` keeps a block's
    mark above zero if any of its pixels was marked; a block is clear when all three channels are 0.
    """
    rows, cols = strip.shape[0] // b, strip.shape[1] // b
    if strip.max() < clip_code:  # most strips of a well-exposed photo: one fast reduction
        return np.zeros((rows, cols), bool)
    if strip.dtype == np.uint8:
        hit = cv2.threshold(strip, clip_code - 1, 255, cv2.THRESH_BINARY)[1]
    else:
        hit = (strip >= clip_code).astype(np.uint8) * np.uint8(255)
    if b > 1:
        hit = cv2.resize(hit, (cols, rows), interpolation=cv2.INTER_AREA)  # mean > 0 iff any pixel hit
    return cv2.inRange(hit, (0, 0, 0), (0, 0, 0)) == 0


def linearize(photo: Photo, response: Response, *, max_side: int | None = None) -> LinearImage:
    """Decode the response curve and bin ``photo`` to the working resolution.

    8-bit photos go through a 16-bit linear lookup table (absolute error at most 0.5/65535 of
    the clip level, far below one 8-bit code) so that binning runs on integers; strips are
    processed on all cores (OpenCV releases the GIL).
    """
    pixels = photo.bgr  # BGR storage; channels are put in RGB order at working size
    height, width = pixels.shape[:2]
    b = bin_factor_for((height, width), max_side)
    h, w = height // b, width // b
    lut = response.lookup_table(photo.max_code + 1)
    if lut.ndim == 2:
        lut = lut[:, ::-1]  # per-channel table, R G B -> the photo's B G R storage order
    eight_bit = pixels.dtype == np.uint8
    lut16 = None
    if eight_bit:
        lut16 = np.round(np.clip(lut, 0.0, 1.0) * 65535.0).astype(np.uint16)
        lut16 = lut16.reshape(1, 256, 3) if lut16.ndim == 2 else lut16.reshape(1, -1)
    lut = lut.astype(np.float32)  # 24-bit mantissa: far finer than any 16-bit code step
    clip_code = int(np.ceil(SATURATION_CODE_FRACTION * photo.max_code))
    counts = np.empty((h, w, 3), np.uint16) if eight_bit else None
    values = None if eight_bit else np.empty((h, w, 3), np.float32)
    saturated = np.empty((h, w), bool)
    luminance = np.empty((h, w), np.float32)
    step = max(b, (_STRIP_ROWS // b) * b)
    weights = np.asarray(LUMINANCE_WEIGHTS_BT709, np.float32).reshape(1, 3)
    if eight_bit:
        weights = weights / np.float32(65535.0)

    def work(top: int) -> None:
        bottom = min(top + step, h * b)
        strip = pixels[top:bottom, : w * b]
        rows = (bottom - top) // b
        out_rows = slice(top // b, top // b + rows)
        if eight_bit:
            lin = cv2.LUT(strip, lut16)
        elif lut.ndim == 2:
            lin = np.stack([lut[strip[..., c], c] for c in range(3)], axis=-1)
        else:
            lin = lut[strip]
        if b > 1:
            lin = cv2.resize(lin, (w, rows), interpolation=cv2.INTER_AREA)
        saturated[out_rows] = _any_clipped(strip, clip_code, b)
        out = (counts if eight_bit else values)[out_rows]
        cv2.cvtColor(lin, cv2.COLOR_BGR2RGB, dst=out)
        # BT.709 weighted channel sum (cv2.transform keeps the input depth, so go through float)
        luminance[out_rows] = cv2.transform(out.astype(np.float32, copy=False), weights)

    from ..threads import pool_size

    with ThreadPoolExecutor(max_workers=pool_size(4)) as pool:
        list(pool.map(work, range(0, h * b, step)))
    return LinearImage(luminance=luminance, saturated=saturated, bin_factor=b, full_shape=(height, width),
                       rgb_values=values, rgb_counts=counts)
