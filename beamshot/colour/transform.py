"""The stated transform from linear camera RGB to CIE 1931 XYZ.

Three sources, in order of preference:

1. a 3x3 matrix fitted from a photo of a reference chart whose XYZ values the user supplied,
   kept in the camera profile (:mod:`beamshot.colour.chart`);
2. a raw file: LibRaw has already applied the file's own camera-to-XYZ matrix and written linear
   sRGB primaries (beamshot.photo.decode_raw), so the sRGB matrix below takes it on to XYZ;
3. a JPEG / PNG / TIFF: the camera is assumed to write sRGB (IEC 61966-2-1:1999), so linear RGB
   goes to XYZ through the sRGB/D65 matrix.

In cases 2 and 3 the camera's white balance has already scaled the channels: RGB = (1, 1, 1) is
the white the camera was balanced for, and it lands on D65 (x, y) = (0.3127, 0.3290).  The
absolute chromaticity is therefore right only if the camera was balanced for D65 daylight (a
fixed "daylight" preset); differences across the beam do not depend on it (a von Kries scaling
moves every point of the beam alike, to first order).

References
----------
IEC 61966-2-1:1999, Multimedia systems - Colour measurement and management - Part 2-1: Default
RGB colour space - sRGB (matrix from the primaries R (0.64, 0.33), G (0.30, 0.60), B (0.15, 0.06)
and white D65 (0.3127, 0.3290)).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["SRGB_TO_XYZ", "D65_XY", "ColourTransform", "srgb_transform", "matrix_transform"]

#: Linear sRGB -> CIE XYZ (Y = 1 for white), IEC 61966-2-1:1999 (4 decimals as published).
SRGB_TO_XYZ = np.array([[0.4124, 0.3576, 0.1805],
                        [0.2126, 0.7152, 0.0722],
                        [0.0193, 0.1192, 0.9505]])
#: CIE 1931 chromaticity of illuminant D65, the sRGB white (IEC 61966-2-1; CIE 15:2004).
D65_XY = (0.3127, 0.3290)


@dataclass(frozen=True)
class ColourTransform:
    """A camera RGB -> XYZ transform and what it rests on.

    ``matrix`` is 3x3, XYZ = matrix @ RGB for linear RGB (any common scale); ``source`` names it;
    ``white_balance`` states the white-balance assumption; ``absolute`` says whether the absolute
    chromaticity is trusted (a fitted matrix) or rests on the white-balance assumption.
    """

    matrix: np.ndarray
    source: str
    white_balance: str
    absolute: bool = False

    def to_xyz(self, rgb: np.ndarray) -> np.ndarray:
        """XYZ ``(..., 3)`` of linear RGB ``(..., 3)``."""
        return np.asarray(rgb, float) @ np.asarray(self.matrix, float).T

    def to_dict(self) -> dict:
        return {"source": self.source, "matrix": [[float(v) for v in row] for row in self.matrix],
                "white_balance": self.white_balance, "absolute": bool(self.absolute)}


def srgb_transform(source: str, white_balance: str) -> ColourTransform:
    """The sRGB/D65 transform (IEC 61966-2-1) with a stated source and white-balance assumption."""
    return ColourTransform(SRGB_TO_XYZ.copy(), source, white_balance, absolute=False)


def matrix_transform(matrix, source: str) -> ColourTransform:
    """A fitted camera RGB -> XYZ matrix (e.g. from a reference chart); refuses a singular one."""
    m = np.asarray(matrix, float)
    if m.shape != (3, 3) or not np.all(np.isfinite(m)) or abs(np.linalg.det(m)) < 1e-9:
        raise ValueError("a colour matrix must be a finite, invertible 3x3 matrix")
    return ColourTransform(m, source, "none needed: the matrix was fitted to the chart's reference values "
                                      "under the same light and camera settings", absolute=True)
