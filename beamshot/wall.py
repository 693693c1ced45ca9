"""Wall geometry: camera pixels <-> wall millimetres, and the pinhole camera model.

Frames and conventions
----------------------
- Light frame: the light at the origin, ``+z`` along the wall normal toward the wall, ``+x``
  to the right and ``+y`` up as seen from behind the light.  The wall is the plane
  ``z = D`` (metres).  Wall coordinates are ``(x_mm, y_mm)`` in that plane.
- Camera frame: ``+x`` right, ``+y`` down, ``+z`` forward (OpenCV convention).
- Image pixels: ``(x, y) = (col, row)`` of a full-resolution, upright photo; the centre of
  pixel ``(row, col)`` is at ``(x, y) = (col, row)`` and the principal point is the image
  centre ``((W-1)/2, (H-1)/2)``.
- 35 mm-equivalent focal length is taken by the diagonal of the 36 x 24 mm frame
  (43.27 mm), the convention most camera makers use for Exif tag FocalLengthIn35mmFilm
  (common practice; the Exif standard does not fix it).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .errors import BeamshotError

__all__ = [
    "FULL_FRAME_DIAGONAL_MM",
    "FOCAL_35MM_CONVENTION_UNCERTAINTY",
    "WallMapping",
    "focal_px_from_35mm",
    "focal_px_from_hfov",
    "rotation_yaw_pitch",
    "pinhole_mapping",
]

#: Diagonal of the 36 x 24 mm frame, mm.
FULL_FRAME_DIAGONAL_MM = float(np.hypot(36.0, 24.0))
#: Relative uncertainty of a 35 mm-equivalent focal length beyond its rounding
#: (diagonal vs width conventions, phone crops); an assumption, stated in reports.
FOCAL_35MM_CONVENTION_UNCERTAINTY = 0.01


def focal_px_from_35mm(focal_35mm_mm: float, image_shape: tuple[int, int]) -> float:
    """Focal length in pixels from a 35 mm-equivalent focal length (diagonal convention).

    >>> round(focal_px_from_35mm(43.2666, (3000, 4000)), 1)
    5000.0
    """
    height, width = image_shape
    return focal_35mm_mm * float(np.hypot(width, height)) / FULL_FRAME_DIAGONAL_MM


def focal_px_from_hfov(hfov_deg: float, image_shape: tuple[int, int]) -> float:
    """Focal length in pixels from the horizontal field of view (degrees, full angle)."""
    width = image_shape[1]
    return (width / 2.0) / np.tan(np.radians(hfov_deg) / 2.0)


def rotation_yaw_pitch(yaw_deg: float = 0.0, pitch_deg: float = 0.0) -> np.ndarray:
    """Camera-to-light-frame rotation for a camera looking at the wall.

    Yaw turns the camera toward ``+x`` (right), pitch tilts it toward ``+y`` (up), both in
    degrees; ``(0, 0)`` looks straight along ``+z`` with image rows going down the wall.
    """
    base = np.array([[1.0, 0.0, 0.0], [0.0, -1.0, 0.0], [0.0, 0.0, 1.0]])  # cam -> light, square
    ay, ap = np.radians(yaw_deg), np.radians(pitch_deg)
    yaw = np.array([[np.cos(ay), 0.0, np.sin(ay)], [0.0, 1.0, 0.0], [-np.sin(ay), 0.0, np.cos(ay)]])
    pitch = np.array([[1.0, 0.0, 0.0], [0.0, np.cos(ap), np.sin(ap)], [0.0, -np.sin(ap), np.cos(ap)]])
    return yaw @ pitch @ base


@dataclass(frozen=True)
class WallMapping:
    """A homography from full-resolution image pixels ``(x, y)`` to wall ``(x_mm, y_mm)``.

    ``scale_uncertainty`` is the relative standard uncertainty of wall lengths derived
    from this mapping; ``method`` says how it was obtained.
    """

    homography: np.ndarray = field(repr=False)
    method: str
    scale_uncertainty: float
    focal_px: float | None = None

    def image_to_wall(self, xy: np.ndarray) -> np.ndarray:
        """Map ``(..., 2)`` pixel coordinates ``(x, y)`` to wall millimetres."""
        return _apply_h(self.homography, xy)

    def wall_to_image(self, xy_mm: np.ndarray) -> np.ndarray:
        """Map ``(..., 2)`` wall millimetres to pixel coordinates ``(x, y)``."""
        return _apply_h(np.linalg.inv(self.homography), xy_mm)


def _apply_h(h: np.ndarray, xy: np.ndarray) -> np.ndarray:
    xy = np.asarray(xy, dtype=np.float64)
    pts = xy.reshape(-1, 2)
    hom = np.c_[pts, np.ones(len(pts))] @ h.T
    with np.errstate(divide="ignore", invalid="ignore"):
        out = hom[:, :2] / hom[:, 2:3]
    return out.reshape(xy.shape)


def pinhole_mapping(
    image_shape: tuple[int, int],
    focal_px: float,
    camera_wall_distance_m: float,
    *,
    rotation: np.ndarray | None = None,
    camera_position_m: tuple[float, float] = (0.0, 0.0),
    scale_uncertainty: float = 0.0,
) -> WallMapping:
    """Homography of a pinhole camera at ``camera_wall_distance_m`` from the wall.

    The camera sits at ``(x, y) = camera_position_m`` in the light frame, at
    ``z = D - camera_wall_distance_m``; ``rotation`` is camera -> light frame (default:
    square to the wall).  Pixels map to wall mm by ray-plane intersection.
    """
    if focal_px <= 0 or not np.isfinite(focal_px):
        raise BeamshotError("focal length must be positive; check --focal-35mm or --hfov")
    if camera_wall_distance_m <= 0:
        raise BeamshotError("camera-to-wall distance must be positive")
    height, width = image_shape
    cx, cy = (width - 1) / 2.0, (height - 1) / 2.0
    r = rotation_yaw_pitch() if rotation is None else np.asarray(rotation, float)
    k_inv = np.array([[1 / focal_px, 0, -cx / focal_px], [0, 1 / focal_px, -cy / focal_px], [0, 0, 1]])
    # Ray-plane intersection, with the camera at c = (cx_m, cy_m, -Dc) relative to the wall
    # plane z = 0: P = c + t * d, t = Dc / d_z, d = r @ K^-1 @ [x, y, 1].  In homogeneous
    # form, P_xy * d_z = c_xy * d_z + Dc * d_xy, all linear in d.
    dc = camera_wall_distance_m * 1000.0
    cam_x, cam_y = (v * 1000.0 for v in camera_position_m)
    m = np.array([[dc, 0.0, cam_x], [0.0, dc, cam_y], [0.0, 0.0, 1.0]])
    h = m @ r @ k_inv
    return WallMapping(homography=h / h[2, 2], method="pinhole", scale_uncertainty=scale_uncertainty, focal_px=focal_px)
