"""Flat field: a smooth vignetting model fitted to a photo of an evenly lit white target.

Model (radially symmetric about the image centre, r normalised to the half-diagonal): the
gain that undoes the fall-off, ``G(r) = 1 / V(r) = 1 + b1 r^2 + b2 r^4 + b3 r^6``, fitted by
weighted least squares to block means of the linear luminance and normalised to 1 on the
optical axis.  A polynomial in r^2 for 1/V represents natural vignetting exactly:
``1 / cos^4(alpha) = (1 + tan^2 alpha)^2`` with ``tan alpha`` proportional to r (pinhole).  Dividing a linear image by V
removes natural cos^4 fall-off and lens/processing vignetting (flat-field correction as in
EMVA 1288 terminology: the gain non-uniformity part).

The same model can also be fitted without a flat photo, from two or more beam photos with the
camera turned between them: :mod:`beamshot.camera.turned_flat`.  ``method`` says which, and
``max_radius`` how far out (fraction of the half-diagonal) the data reached; beyond it the
polynomial is extrapolated.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["FlatField", "fit_flat_field"]

_BLOCKS = 48
#: A flat whose blocks depart from the smooth radial model by more than this (RMS, relative) holds
#: structure - a beam, a shadow, uneven lighting - and is refused.
FLAT_MAX_RESIDUAL = 0.05
#: The model may rise above its centre value by at most this much anywhere in the frame: lens
#: shading falls off from the centre; a flat brighter at its edges was lit unevenly.
FLAT_MAX_RISE = 0.05
#: A fall-off below this fraction of the centre anywhere in the frame is not a lens's shading (an ultra-wide
#: lens of 13 mm equivalent has cos^4 = 0.07 at its corners by the cos^4 law alone).
FLAT_MIN_FALLOFF = 0.02


@dataclass(frozen=True)
class FlatField:
    """Coefficients ``(b1, b2, b3)`` of G(r) = 1/V(r) and the RMS residual of the fit (relative).

    ``shape`` is the full photo size ``(h, w)``; ``method`` how the model was found ("flat photo"
    or "turned camera"); ``max_radius`` the largest radius the data covered.
    """

    coefficients: tuple[float, float, float]
    residual_rms: float
    shape: tuple[int, int]
    method: str = "flat photo"
    max_radius: float = 1.0

    def evaluate(self, shape: tuple[int, int]) -> np.ndarray:
        """V at the centres of an image of ``shape`` (same aspect as the flat), float32."""
        h, w = shape
        y, x = np.mgrid[0:h, 0:w].astype(np.float64)
        r2 = ((x - (w - 1) / 2) ** 2 + (y - (h - 1) / 2) ** 2) / (((w - 1) / 2) ** 2 + ((h - 1) / 2) ** 2)
        b1, b2, b3 = self.coefficients
        return (1.0 / (1 + b1 * r2 + b2 * r2**2 + b3 * r2**3)).astype(np.float32)


def fit_flat_field(luminance: np.ndarray) -> FlatField:
    """Fit V(r) to a linear luminance image of a flat target, shape ``(h, w)``."""
    h, w = luminance.shape
    bh, bw = max(1, h // _BLOCKS), max(1, w // _BLOCKS)
    nh, nw = h // bh, w // bw
    blocks = luminance[: nh * bh, : nw * bw].reshape(nh, bh, nw, bw).mean(axis=(1, 3)).astype(np.float64)
    y = (np.arange(nh) + 0.5) * bh - 0.5
    x = (np.arange(nw) + 0.5) * bw - 0.5
    yy, xx = np.meshgrid(y, x, indexing="ij")
    r2 = ((xx - (w - 1) / 2) ** 2 + (yy - (h - 1) / 2) ** 2) / (((w - 1) / 2) ** 2 + ((h - 1) / 2) ** 2)
    b = blocks.ravel()
    if not np.all(b > 0):
        from ..errors import BeamshotError

        raise BeamshotError("flat field: parts of the flat photo are black; light the target evenly and expose it well")
    a = np.c_[np.ones(r2.size), r2.ravel(), r2.ravel() ** 2, r2.ravel() ** 3]
    # fit 1/b ~ G/k, weighting by b so that every block counts by its relative error
    coef, *_ = np.linalg.lstsq(a * b[:, None], np.ones_like(b), rcond=None)
    c0 = coef[0]
    model = 1.0 / (a @ coef)
    resid = float(np.sqrt(np.mean((b / model - 1) ** 2)))
    ff = FlatField(coefficients=tuple(float(c / c0) for c in coef[1:]), residual_rms=resid, shape=(h, w))
    check_flat(ff, blocks)
    return ff


def check_flat(ff: FlatField, blocks: np.ndarray) -> None:
    """Refuse a flat that is not a lens's smooth radial fall-off (one line saying why)."""
    from ..errors import BeamshotError

    fix = "photograph an evenly lit white target (or a white screen) that fills the view, light off the beam"
    peak_block = float(np.max(blocks) / np.median(blocks))
    if ff.residual_rms > FLAT_MAX_RESIDUAL:
        why = ("a bright spot - a beam? - is in it" if peak_block > 2.0 else "it has strong structure (a shadow, "
               "an edge or uneven lighting)")
        raise BeamshotError(f"flat field: the photo departs from a smooth radial fall-off by {ff.residual_rms:.0%} "
                            f"RMS (at most {FLAT_MAX_RESIDUAL:.0%} expected); {why}; {fix}")
    r2 = np.linspace(0.0, 1.0, 101)
    b1, b2, b3 = ff.coefficients
    v = 1.0 / (1 + b1 * r2 + b2 * r2**2 + b3 * r2**3)
    if not np.all(np.isfinite(v)) or np.any(v <= 0) or v.max() > 1 + FLAT_MAX_RISE:
        raise BeamshotError(f"flat field: the photo is brighter toward its edges than at its centre (by "
                            f"{max(v.max() - 1, 0):.0%}); lens shading falls off from the centre, so the target was "
                            f"lit unevenly; {fix}")
    if v.min() < FLAT_MIN_FALLOFF:
        raise BeamshotError(f"flat field: the photo falls to {v.min():.0%} of its centre toward the corners, far more "
                            f"than a lens's shading; {fix}")
