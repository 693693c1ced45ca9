"""Pixel noise of a BeamMap: a noise model sigma(I) of one map cell, and the noise of row means.

Noise of a camera signal has a constant part (read noise, quantisation) and a part growing with
the signal (shot noise), ``sigma^2 = a + b I`` (the photon-transfer model; EMVA 1288 sec. 2).
Both are fitted to the map itself: in each row whose cells are at least ``INDEPENDENT_PIXELS``
working pixels apart along the azimuth, the second difference across three neighbouring cells,
``r_j = I_j - (I_{j-1} + I_{j+1}) / 2``, has variance ``1.5 sigma^2`` for independent cells (and
cancels a smooth azimuthal variation); its robust spread (1.4826 MAD, Huber 1981) against the
row's mean gives ``(I, sigma^2)`` pairs, fitted by least squares.

Cells closer than a working pixel repeat the same pixels, so a row mean of ``n`` valid cells has
only ``n_eff = min(n, 2 pi theta / pixel)`` independent samples: ``sigma_mean = sigma / sqrt(n_eff)``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ._quiet import quiet_nan
from .beammap import BeamMap
from .robust import row_nanmedian

__all__ = ["NoiseModel", "noise_model", "row_mean_sigma"]

#: Cells of a row used for the noise fit must be this many working pixels apart (project choice).
INDEPENDENT_PIXELS = 1.5
#: Every this many rows are used for the fit (the model has two parameters; the rows are many).
ROW_STRIDE = 3
#: 1.4826 MAD is the standard deviation of a normal distribution (Huber 1981).
MAD_TO_SIGMA = 1.4826


@dataclass(frozen=True)
class NoiseModel:
    """``sigma(I)^2 = a + b I`` for one map cell (map units)."""

    a: float
    b: float

    def sigma(self, intensity) -> np.ndarray:
        i = np.nan_to_num(np.asarray(intensity, float), nan=0.0)
        return np.sqrt(np.maximum(self.a + self.b * np.maximum(i, 0.0), 0.0))


def noise_model(beam: BeamMap, pixel_deg: float = 0.0) -> NoiseModel:
    """Fit the noise model to the rows of ``beam`` whose cells are independent (see module doc)."""
    arc_deg = np.degrees(beam.theta) * np.degrees(beam.d_phi) * np.pi / 180.0  # cell spacing along the row, deg
    rows = np.flatnonzero(arc_deg >= INDEPENDENT_PIXELS * pixel_deg)
    if rows.size < 5:
        rows = np.arange(len(beam.theta))
    rows = rows[::ROW_STRIDE] if rows.size >= 15 * ROW_STRIDE else rows
    inten = beam.intensity[rows]
    # the neighbours on either side, wrapping in azimuth (np.roll's values)
    left = np.concatenate([inten[:, -1:], inten[:, :-1]], axis=1)
    right = np.concatenate([inten[:, 1:], inten[:, :1]], axis=1)
    resid = inten - 0.5 * (left + right)
    with quiet_nan():  # row_nanmedian: np.nanmedian's values, without its masked arrays
        med = row_nanmedian(resid)[:, None]
        mad = row_nanmedian(np.abs(resid - med))
        level = row_nanmedian(inten)
    var = (MAD_TO_SIGMA * mad) ** 2 / 1.5
    ok = np.isfinite(var) & np.isfinite(level) & (np.sum(np.isfinite(inten), axis=1) >= 20)
    if ok.sum() < 3:
        return NoiseModel(0.0, 0.0)
    x, y = level[ok], var[ok]
    # least squares for (a, b) with a, b >= 0 (a negative part of a variance has no meaning)
    A = np.stack([np.ones_like(x), np.maximum(x, 0.0)], axis=1)
    (a, b), *_ = np.linalg.lstsq(A, y, rcond=None)
    if b < 0:
        a, b = float(np.median(y)), 0.0
    if a < 0:
        a = 0.0
        b = float(np.sum(x * y) / max(np.sum(x * x), 1e-300))
    return NoiseModel(float(a), float(max(b, 0.0)))


def row_mean_sigma(beam: BeamMap, model: NoiseModel, mean: np.ndarray, count: np.ndarray,
                   pixel_deg: float = 0.0) -> np.ndarray:
    """1-sigma noise of the azimuthal mean of the first ``len(mean)`` rows (``mean`` and valid
    ``count`` per row)."""
    circumference = 2.0 * np.pi * np.degrees(beam.theta[:len(mean)])
    n_eff = np.minimum(count, circumference / pixel_deg) if pixel_deg > 0 else count.astype(float)
    return model.sigma(mean) / np.sqrt(np.maximum(n_eff, 1.0))
