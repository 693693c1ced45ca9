"""Camera response curves: encoded pixel value <-> linear relative exposure.

A response maps an encoded value V in [0, 1] to a linear value in [0, 1] (1 = clipping).

References
----------
- IEC 61966-2-1:1999 (sRGB).  Decode: ``L = V/12.92`` for ``V <= 0.04045``, else
  ``((V + 0.055)/1.055)^2.4``; encode is the inverse with threshold 0.0031308.
- ITU-R BT.709-6 / sRGB relative luminance from *linear* RGB:
  ``Y = 0.2126 R + 0.7152 G + 0.0722 B``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = [
    "LUMINANCE_WEIGHTS_BT709",
    "Response",
    "srgb_decode",
    "srgb_encode",
    "parse_response",
]

#: Relative luminance weights for linear sRGB / BT.709 primaries (R, G, B).
LUMINANCE_WEIGHTS_BT709 = (0.2126, 0.7152, 0.0722)

_SRGB_DECODE_THRESHOLD = 0.04045
_SRGB_ENCODE_THRESHOLD = 0.0031308


def srgb_decode(v):
    """IEC 61966-2-1 sRGB decoding, encoded ``v`` in [0, 1] -> linear.

    >>> round(float(srgb_decode(0.5)), 9)
    0.21404114
    """
    v = np.asarray(v, dtype=np.float64)
    return np.where(v <= _SRGB_DECODE_THRESHOLD, v / 12.92, ((v + 0.055) / 1.055) ** 2.4)


def srgb_encode(x):
    """IEC 61966-2-1 sRGB encoding, linear ``x`` in [0, 1] -> encoded."""
    x = np.asarray(x, dtype=np.float64)
    xc = np.clip(x, 0.0, None)
    return np.where(xc <= _SRGB_ENCODE_THRESHOLD, 12.92 * xc, 1.055 * xc ** (1 / 2.4) - 0.055)


@dataclass(frozen=True)
class Response:
    """A parametric response: ``kind`` is ``'srgb'``, ``'gamma'`` or ``'linear'``.

    ``gamma`` is the exponent of a pure power law (decode ``V**gamma``); ignored otherwise.
    """

    kind: str = "srgb"
    gamma: float = 2.2

    def decode(self, v):
        """Encoded value(s) in [0, 1] -> linear value(s) in [0, 1]."""
        v = np.asarray(v, dtype=np.float64)
        if self.kind == "srgb":
            return srgb_decode(v)
        if self.kind == "gamma":
            return np.clip(v, 0.0, None) ** self.gamma
        return v

    def encode(self, x):
        """Linear value(s) in [0, 1] -> encoded value(s) in [0, 1]."""
        x = np.asarray(x, dtype=np.float64)
        if self.kind == "srgb":
            return srgb_encode(x)
        if self.kind == "gamma":
            return np.clip(x, 0.0, None) ** (1.0 / self.gamma)
        return x

    def lookup_table(self, levels):
        """Decode table of ``levels`` entries (index = integer code), float32."""
        codes = np.arange(levels, dtype=np.float64) / (levels - 1)
        return self.decode(codes).astype(np.float32)

    def describe(self) -> str:
        if self.kind == "gamma":
            return f"pure gamma {self.gamma:g}"
        if self.kind == "srgb":
            return "sRGB transfer function (IEC 61966-2-1)"
        return "linear (no curve)"


def parse_response(text: str) -> Response:
    """Parse ``'srgb'``, ``'linear'`` or ``'gamma:2.2'`` into a :class:`Response`.

    >>> parse_response("gamma:2.4")
    Response(kind='gamma', gamma=2.4)
    """
    t = text.strip().lower()
    if t in ("srgb", "linear"):
        return Response(kind=t)
    if t.startswith("gamma"):
        _, _, value = t.partition(":")
        try:
            g = float(value) if value else 2.2
        except ValueError:
            raise ValueError(f"response: cannot read the gamma in {text!r}; write e.g. gamma:2.2") from None
        if not 1.0 <= g <= 3.5:
            raise ValueError(f"response: gamma {g:g} is outside 1.0-3.5")
        return Response(kind="gamma", gamma=g)
    raise ValueError(f"response: unknown curve {text!r}; use srgb, linear or gamma:<exponent>")
