"""How the wall is mapped in an analysis: the focal length (option or EXIF), the mapping from the
printed target's markers, and target markers left on the wall in a beam photo (found, then masked).
"""

from __future__ import annotations

import numpy as np

from .camera.linearize import LinearImage
from .photo import Photo
from .target import detect_markers
from .wall import (FOCAL_35MM_CONVENTION_UNCERTAINTY, focal_px_from_35mm, focal_px_from_hfov, homography_mapping,
                   pose_mapping)

__all__ = ["focal_for", "marker_mapping", "markers_still_there", "markers_left_in", "grey", "mask_quads"]


def focal_for(photo: Photo, focal_35mm, hfov_deg) -> tuple[float | None, float, str]:
    """Focal length in pixels, its relative uncertainty, and where it came from (None if unknown)."""
    if hfov_deg is not None:
        return (focal_px_from_hfov(hfov_deg, photo.shape), FOCAL_35MM_CONVENTION_UNCERTAINTY,
                f"horizontal field of view {hfov_deg:g} deg (option)")
    f35 = focal_35mm if focal_35mm is not None else photo.exif.focal_35mm_mm
    if f35 is None:
        return None, 0.0, "unknown"
    src = "option" if focal_35mm is not None else "EXIF FocalLengthIn35mmFilm"
    return (focal_px_from_35mm(f35, photo.shape), float(np.hypot(FOCAL_35MM_CONVENTION_UNCERTAINTY, 0.5 / np.sqrt(3) / f35)),
            f"35 mm-equivalent focal length {f35:g} mm ({src})")


def marker_mapping(det, photo: Photo, focal_35mm, hfov_deg, method: str, warnings: list, lens=None):
    """Pose-based mapping when the focal length is known, else a plain homography (with a warning)."""
    f_px, f_u, _ = focal_for(photo, focal_35mm, hfov_deg)
    if lens is not None:
        from .target import MarkerDetection

        det = MarkerDetection(image_xy=lens.undistort(det.image_xy), target_mm=det.target_mm, ids=det.ids,
                              quads=det.quads)
        f_px, f_u = 0.5 * (lens.fx + lens.fy), 0.002
    if f_px is not None:
        return pose_mapping(det.image_xy, det.target_mm, photo.shape, f_px, method=method, name=photo.name,
                            focal_uncertainty=f_u)
    warnings.append("no focal length known: the wall mapping is a plain homography from the small target, "
                    "which extrapolates less well; give --focal-35mm")
    return homography_mapping(det.image_xy, det.target_mm, method=method, name=photo.name)


def markers_still_there(photo: Photo, geometry_markers, target_scale: float):
    """Markers of the geometry photo still on the wall in a beam photo: checked in crops around
    their known places (same tripod position), which is cheap."""
    grey_image = grey(photo)
    h, w = grey_image.shape
    for quad in geometry_markers.quads:
        c = quad.mean(axis=0)
        r = 1.5 * float(np.max(np.linalg.norm(quad - c, axis=1)))
        x0, y0 = int(max(0, c[0] - r)), int(max(0, c[1] - r))
        x1, y1 = int(min(w, c[0] + r)), int(min(h, c[1] + r))
        crop = np.ascontiguousarray(grey_image[y0:y1, x0:x1])
        found = detect_markers(crop, name=photo.name, target_scale=target_scale, required=False, min_markers=1)
        if found is not None:
            return geometry_markers
    return None


def markers_left_in(photo: Photo, image: LinearImage, target_scale: float):
    """Target markers left on the wall in a beam photo.

    The target is pinned at the aim point, where the hotspot is, so a quick look covers a
    square of the working image around its brightest area; only if markers turn up there is
    the whole photo searched at full resolution.
    """
    import cv2

    lum = image.luminance
    small = np.fmax(lum[2::4, 2::4], 0.0)  # every 4th pixel finds the bright area; fmax: NaN -> 0
    r, c = np.unravel_index(int(np.argmax(cv2.GaussianBlur(small, (0, 0), 1.5))), small.shape)
    r, c = 4 * r + 2, 4 * c + 2
    half = max(128, max(lum.shape) // 6)
    crop = np.fmax(lum[max(0, r - half): r + half, max(0, c - half): c + half], 0.0)
    peak = float(crop.max()) or 1.0
    # square-root coding (roughly perceptual, like the photo's own) on the 0-255 scale, in place
    np.multiply(crop, np.float32(1.0 / peak), out=crop)
    np.sqrt(crop, out=crop)
    codes = (crop * np.float32(255.0)).astype(np.uint8)
    if detect_markers(codes, name=photo.name, target_scale=target_scale, required=False, quick=True,
                      min_markers=1) is None:
        return None
    return detect_markers(grey(photo), name=photo.name, target_scale=target_scale, required=False)


def grey(photo: Photo) -> np.ndarray:
    """8-bit grey version of a photo for marker detection."""
    import cv2

    bgr = photo.bgr if photo.bgr.dtype == np.uint8 else (photo.bgr >> 8).astype(np.uint8)
    return cv2.cvtColor(bgr, cv2.COLOR_BGR2GRAY)


def mask_quads(image: LinearImage, quads, grow: float = 0.15) -> LinearImage:
    """Set working pixels inside (slightly grown) marker quads to NaN: they are not measured."""
    import cv2

    mask = np.zeros(image.shape, np.uint8)
    b = image.bin_factor
    for q in quads:
        c = q.mean(axis=0)
        grown = c + (q - c) * (1.0 + grow)
        pts = ((grown - (b - 1) / 2.0) / b).round().astype(np.int32)
        cv2.fillConvexPoly(mask, pts, 1)
    bad = mask.astype(bool)
    rgb = image.rgb.copy()
    rgb[bad] = np.nan
    lum = image.luminance.copy()
    lum[bad] = np.nan
    return LinearImage(rgb_values=rgb, luminance=lum, saturated=image.saturated, bin_factor=b, full_shape=image.full_shape)
