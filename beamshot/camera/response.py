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

from dataclasses import dataclass, field

import numpy as np

__all__ = [
    "LUMINANCE_WEIGHTS_BT709",
    "Response",
    "srgb_decode",
    "srgb_encode",
    "parse_response",
    "S_CURVE_A",
    "S_CURVE_C",
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


#: Parameters of the film-like S-curve ``V = (1 + c) x^a / (x^a + c)`` (a Naka-Rushton form;
#: S-shaped against log exposure, V(0) = 0, V(1) = 1).  Used to test response recovery.
S_CURVE_A, S_CURVE_C = 1.6, 0.35


@dataclass(frozen=True)
class Response:
    """A response curve: ``kind`` is ``'srgb'``, ``'gamma'``, ``'linear'``, ``'s-curve'`` or ``'table'``.

    ``gamma`` is the exponent of a pure power law (decode ``V**gamma``).  ``table`` holds a
    measured decode table per channel, shape ``(3, N)`` as nested tuples (R, G, B rows;
    entry k is the linear value of code k/(N-1)), normalised to 1 at the top code.
    """

    kind: str = "srgb"
    gamma: float = 2.2
    table: tuple | None = None
    #: Where a measured table came from, for :meth:`describe` (None: a camera profile).
    label: str | None = field(default=None, repr=False, compare=False)

    def decode(self, v):
        """Encoded value(s) in [0, 1] -> linear value(s) in [0, 1] (a table: per channel on the last axis)."""
        v = np.asarray(v, dtype=np.float64)
        if self.kind == "srgb":
            return srgb_decode(v)
        if self.kind == "gamma":
            return np.clip(v, 0.0, None) ** self.gamma
        if self.kind == "s-curve":
            vc = np.clip(v, 0.0, 1.0 - 1e-12)
            return (S_CURVE_C * vc / (1.0 + S_CURVE_C - vc)) ** (1.0 / S_CURVE_A)
        if self.kind == "table":
            t = np.asarray(self.table, float)
            x = np.linspace(0.0, 1.0, t.shape[1])
            if v.ndim and v.shape[-1] == 3:
                return np.stack([np.interp(v[..., c], x, t[c]) for c in range(3)], axis=-1)
            return np.interp(v, x, t.mean(axis=0))
        return v

    def encode(self, x):
        """Linear value(s) in [0, 1] -> encoded value(s) in [0, 1]."""
        x = np.asarray(x, dtype=np.float64)
        if self.kind == "srgb":
            return srgb_encode(x)
        if self.kind == "gamma":
            return np.clip(x, 0.0, None) ** (1.0 / self.gamma)
        if self.kind == "s-curve":
            xa = np.clip(x, 0.0, None) ** S_CURVE_A
            return (1.0 + S_CURVE_C) * xa / (xa + S_CURVE_C)
        if self.kind == "table":
            t = np.asarray(self.table, float).mean(axis=0)
            return np.interp(x, t, np.linspace(0.0, 1.0, len(t)))
        return x

    def lookup_table(self, levels):
        """Decode table, float32: shape ``(levels,)``, or ``(levels, 3)`` (R, G, B) for a measured table."""
        codes = np.arange(levels, dtype=np.float64) / (levels - 1)
        if self.kind == "table":
            return self.decode(np.repeat(codes[:, None], 3, axis=1)).astype(np.float32)
        return self.decode(codes).astype(np.float32)

    def describe(self) -> str:
        if self.kind == "gamma":
            return f"pure gamma {self.gamma:g}"
        if self.kind == "srgb":
            return "sRGB transfer function (IEC 61966-2-1)"
        if self.kind == "s-curve":
            return f"film-like S-curve (a = {S_CURVE_A}, c = {S_CURVE_C})"
        if self.kind == "table":
            return self.label or "measured response table (camera profile)"
        return "linear (no curve)"


def parse_response(text: str) -> Response:
    """Parse ``'srgb'``, ``'linear'`` or ``'gamma:2.2'`` into a :class:`Response`.

    >>> parse_response("gamma:2.4")
    Response(kind='gamma', gamma=2.4, table=None)
    """
    t = text.strip().lower()
    if t in ("srgb", "linear", "s-curve"):
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
    raise ValueError(f"response: unknown curve {text!r}; use srgb, linear, s-curve or gamma:<exponent>")
