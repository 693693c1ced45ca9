"""Locating the beam on the wall: the beam axis (spill centre) and sanity checks.

The beam axis is the centre of the spill, found as the centre of an ellipse fitted by least
squares (OpenCV ``fitEllipse``) to the sub-pixel iso-contour (marching squares,
scikit-image ``find_contours``) between the dark wall and the spill.  The contour level is
the lower of two multi-level Otsu thresholds of log luminance (background / spill /
hotspot).  Contour points on the photo border are dropped, so a spill cut by the frame
still gives its centre when enough of its edge is visible; otherwise the axis falls back to
the intensity-weighted centroid of the hotspot and says so.
"""

from __future__ import annotations

from dataclasses import dataclass

import cv2
import numpy as np
from skimage.measure import find_contours

from .errors import BeamshotError
from .otsu import three_class_thresholds
from .wall import WallMapping

__all__ = ["BeamAxis", "find_beam_axis", "MIN_BEAM_CONTRAST", "MIN_EDGE_COVERAGE"]

#: The smoothed maximum must exceed the median by this factor, or no beam is found.
MIN_BEAM_CONTRAST = 4.0
#: Fraction of 10-degree bearings around the spill that must hold visible edge points.
MIN_EDGE_COVERAGE = 0.5
#: Darkest useful maximum (linear, 1 = clipping): below it the frame is treated as black.
_BLACK_FRAME_LEVEL = 2e-3
#: Longest side of the reduced image used to locate the axis, pixels.
AXIS_MAX_SIDE = 640
#: Number of pixels sampled for the multi-level Otsu thresholds (a histogram needs no more).
_OTSU_SAMPLES = 40000
#: Lowest level considered when separating wall, spill and hotspot (fraction of peak).
_LOG_FLOOR_FRACTION = 3e-4


@dataclass(frozen=True)
class BeamAxis:
    """Beam axis on the wall (mm, light frame) with how it was found.

    ``centre_mm`` is the foot of the beam axis; ``uncertainty_mm`` a 1-sigma radius;
    ``edge_coverage`` the fraction of bearings where the spill edge was visible.
    """

    centre_mm: tuple[float, float]
    uncertainty_mm: float
    method: str
    edge_coverage: float
    ellipse_axes_mm: tuple[float, float] | None
    ellipse_angle_deg: float | None
    peak_px: tuple[float, float]
    edge_points_mm: np.ndarray | None = None


def find_beam_axis(luminance: np.ndarray, mapping: WallMapping, bin_factor: int, *,
                   name: str = "photo") -> BeamAxis:
    """Find the beam axis in a working-resolution luminance image (see module notes)."""
    lum = luminance.astype(np.float32, copy=False)
    # work on a reduced copy: the spill edge spans hundreds of pixels, and the ellipse fit
    # over many edge points still centres it to a small fraction of a reduced pixel
    r = max(1, int(np.ceil(max(lum.shape) / AXIS_MAX_SIDE)))
    if r > 1:
        h0, w0 = (lum.shape[0] // r) * r, (lum.shape[1] // r) * r
        lum = cv2.resize(lum[:h0, :w0], (w0 // r, h0 // r), interpolation=cv2.INTER_AREA)  # NaN spreads to its block
        bin_factor = bin_factor * r
    holes = ~np.isfinite(lum)
    if np.any(holes):
        # masked areas (markers left on the wall) are filled from their surroundings
        valid = (~holes).astype(np.float32)
        filled = np.where(holes, 0.0, lum).astype(np.float32)
        sigma = 0.02 * max(lum.shape)
        num = cv2.GaussianBlur(filled, (0, 0), sigma)
        den = cv2.GaussianBlur(valid, (0, 0), sigma)
        lum = np.where(holes, num / np.maximum(den, 1e-6), lum).astype(np.float32)
    lum = np.nan_to_num(lum, nan=0.0, posinf=0.0, neginf=0.0)
    smooth = cv2.GaussianBlur(lum, (0, 0), 1.5)
    peak = float(smooth.max())
    if not np.isfinite(peak) or peak < _BLACK_FRAME_LEVEL:
        raise BeamshotError(f"{name}: the frame is black; switch the light on or expose longer")
    coarse = smooth[::4, ::4]  # statistics on a subsample: the image is smooth at this scale
    median = float(np.median(coarse))
    if peak < MIN_BEAM_CONTRAST * max(median, 1e-6) or float(np.percentile(coarse, 1)) > 0.97:
        raise BeamshotError(
            f"{name}: no beam found (the brightest area is not clearly brighter than the rest); "
            "aim the light at the wall, darken the room, or fix the exposure"
        )
    pr, pc = np.unravel_index(int(np.argmax(smooth)), smooth.shape)
    # floor the log image above the dark-wall noise, or the noise's wide spread in log
    # units would capture the Otsu thresholds
    resid = lum[::4, ::4] - smooth[::4, ::4]
    noise = 1.4826 * float(np.median(np.abs(resid - np.median(resid)))) / (2.0 * np.sqrt(np.pi) * 1.5)
    floor = max(peak * _LOG_FLOOR_FRACTION, 5.0 * noise)
    # the log image is only sampled (elementwise: the log of the sampled pixels is the same)
    stride = max(1, int(np.sqrt(smooth.size / _OTSU_SAMPLES)))
    sample = np.log(np.maximum(smooth[::stride, ::stride], floor)).ravel()
    try:
        low, _high = three_class_thresholds(sample)
    except ValueError:
        low = float(np.log(peak * 0.05))
    level = float(np.exp(low))
    contours = _contours_around(smooth, level, pr, pc)
    h, w = smooth.shape
    pts = []
    for c in contours:
        if len(c) < 8 or not _encloses(c, pr, pc):
            continue
        pts.append(c)
    ellipse = None
    coverage = 0.0
    if pts:
        c = max(pts, key=len)
        margin = 2.0
        keep = (c[:, 0] > margin) & (c[:, 0] < h - 1 - margin) & (c[:, 1] > margin) & (c[:, 1] < w - 1 - margin)
        rows, cols = c[keep, 0], c[keep, 1]
        full_xy = _working_to_full(np.c_[cols, rows], bin_factor)
        wall = mapping.image_to_wall(full_xy)
        if len(wall) >= 20:
            centre0 = wall.mean(axis=0)
            bearings = np.degrees(np.arctan2(wall[:, 1] - centre0[1], wall[:, 0] - centre0[0]))
            coverage = len(np.unique(np.floor((bearings + 180.0) / 10.0))) / 36.0
            if coverage >= MIN_EDGE_COVERAGE:
                ellipse = cv2.fitEllipse(wall.astype(np.float32))
    if ellipse is not None:
        (ex, ey), (a1, a2), ang = ellipse
        mm_per_px = _mm_per_working_px(mapping, bin_factor, pr, pc)
        residual_px = 0.5  # contour noise on a smoothed image, about half a working pixel
        n_eff = max(4.0, 36.0 * coverage)
        unc = mm_per_px * residual_px * 2.0 / np.sqrt(n_eff) + mm_per_px * (1 - coverage) * 2.0
        return BeamAxis(
            centre_mm=(float(ex), float(ey)),
            uncertainty_mm=float(unc),
            method=f"centre of an ellipse fitted to the spill edge ({coverage:.0%} of it visible)",
            edge_coverage=coverage,
            ellipse_axes_mm=(float(a1), float(a2)),
            ellipse_angle_deg=float(ang),
            peak_px=(float(pc), float(pr)),
            edge_points_mm=wall,
        )
    # Fallback: intensity-weighted centroid of the region at or above half of the peak.
    hot = smooth >= 0.5 * peak
    n, labels = cv2.connectedComponents(hot.astype(np.uint8))
    region = labels == labels[pr, pc]
    rr, cc = np.nonzero(region)
    wts = smooth[rr, cc]
    cxy = _working_to_full(np.array([[np.average(cc, weights=wts), np.average(rr, weights=wts)]]), bin_factor)
    centre = mapping.image_to_wall(cxy)[0]
    mm_per_px = _mm_per_working_px(mapping, bin_factor, pr, pc)
    return BeamAxis(
        centre_mm=(float(centre[0]), float(centre[1])),
        uncertainty_mm=float(mm_per_px * 1.0),
        method="centroid of the hotspot (the spill edge is not visible enough to centre on)",
        edge_coverage=coverage,
        ellipse_axes_mm=None,
        ellipse_angle_deg=None,
        peak_px=(float(pc), float(pr)),
    )


def _contours_around(smooth: np.ndarray, level: float, pr: int, pc: int) -> list[np.ndarray]:
    """Sub-pixel iso-contours at ``level`` (rows, cols) within the bounding box of the region
    above ``level`` that holds the peak ``(pr, pc)`` - noise blobs elsewhere are not traced."""
    above = (smooth >= level).astype(np.uint8)
    _n, labels, stats, _c = cv2.connectedComponentsWithStats(above, connectivity=8)
    label = labels[pr, pc]
    if label == 0:
        return find_contours(smooth, level)
    x, y, w, h = stats[label, :4]
    r0, c0 = max(0, y - 2), max(0, x - 2)
    r1, c1 = min(smooth.shape[0], y + h + 2), min(smooth.shape[1], x + w + 2)
    return [c + (r0, c0) for c in find_contours(smooth[r0:r1, c0:c1], level)]


def _encloses(contour: np.ndarray, r: float, c: float) -> bool:
    """True if the closed (or border-cut) contour winds around the point (row r, col c)."""
    ang = np.unwrap(np.arctan2(contour[:, 0] - r, contour[:, 1] - c))
    closed = np.allclose(contour[0], contour[-1])
    turn = abs(ang[-1] - ang[0])
    return turn > (1.9 * np.pi if closed else 0.5 * np.pi)


def _working_to_full(xy_working: np.ndarray, bin_factor: int) -> np.ndarray:
    """Working-pixel ``(x, y)`` -> full-resolution pixel coordinates (block centres)."""
    return np.asarray(xy_working, float) * bin_factor + (bin_factor - 1) / 2.0


def _mm_per_working_px(mapping: WallMapping, bin_factor: int, r: float, c: float) -> float:
    a = mapping.image_to_wall(_working_to_full(np.array([[c, r], [c + 1, r]]), bin_factor))
    return float(np.hypot(*(a[1] - a[0])))
