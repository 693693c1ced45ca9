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
    "MAX_REPROJECTION_MM",
    "homography_mapping",
    "parse_wall_points",
    "pose_mapping",
]

#: A marker or four-point mapping whose corners miss their known positions by more than this
#: (RMS, mm on the wall) is refused.
MAX_REPROJECTION_MM = 3.0

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
    #: Lens distortion (``beamshot.camera.distortion.Distortion``); the homography then relates
    #: *undistorted* pixel positions to the wall.
    distortion: object | None = None

    def image_to_wall(self, xy: np.ndarray) -> np.ndarray:
        """Map ``(..., 2)`` pixel coordinates ``(x, y)`` to wall millimetres."""
        if self.distortion is not None:
            xy = self.distortion.undistort(xy)
        return _apply_h(self.homography, xy)

    def wall_to_image(self, xy_mm: np.ndarray) -> np.ndarray:
        """Map ``(..., 2)`` wall millimetres to pixel coordinates ``(x, y)``."""
        xy = _apply_h(np.linalg.inv(self.homography), xy_mm)
        if self.distortion is not None:
            xy = self.distortion.distort(xy)
        return xy


def _apply_h(h: np.ndarray, xy: np.ndarray) -> np.ndarray:
    xy = np.asarray(xy, dtype=np.float64)
    x, y = xy[..., 0], xy[..., 1]
    out = np.empty(xy.shape)
    with np.errstate(divide="ignore", invalid="ignore"):
        w = 1.0 / (h[2, 0] * x + h[2, 1] * y + h[2, 2])
        out[..., 0] = (h[0, 0] * x + h[0, 1] * y + h[0, 2]) * w
        out[..., 1] = (h[1, 0] * x + h[1, 1] * y + h[1, 2]) * w
    return out


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


def homography_mapping(image_xy: np.ndarray, wall_mm: np.ndarray, *, method: str, name: str = "photo",
                       span_mm: float | None = None) -> WallMapping:
    """Homography from image points to known wall points (mm), least squares over all of them.

    A plane seen by a pinhole camera maps to the image by a homography, so four or more points
    of a known wall figure fix the mapping everywhere on the wall.  The RMS re-projection error
    (mm) is reported in ``method``; above ``MAX_REPROJECTION_MM`` the mapping is refused.  The
    relative scale uncertainty is the RMS error over the figure's span, times the square root of
    the ratio of 4 to the number of points.
    """
    import cv2

    src = np.asarray(image_xy, np.float64).reshape(-1, 2)
    dst = np.asarray(wall_mm, np.float64).reshape(-1, 2)
    if len(src) < 4:
        raise BeamshotError(f"{name}: a wall mapping needs at least 4 points, got {len(src)}")
    h, _ = cv2.findHomography(src, dst, 0)
    if h is None or not np.all(np.isfinite(h)):
        raise BeamshotError(f"{name}: the points do not define a wall plane (are three of them on a line?)")
    proj = _apply_h(h, src)
    rms = float(np.sqrt(np.mean(np.sum((proj - dst) ** 2, axis=1))))
    if rms > MAX_REPROJECTION_MM:
        raise BeamshotError(f"{name}: the wall mapping misses its reference points by {rms:.1f} mm (RMS, limit "
                            f"{MAX_REPROJECTION_MM:g} mm); check the points, the print scale and lens distortion")
    span = span_mm or float(np.max(np.ptp(dst, axis=0)))
    rel = max(rms, 0.05) / span * np.sqrt(4.0 / len(src))
    # orientation sanity: a mirrored mapping has a negative determinant of the linear part
    if np.linalg.det(h[:2, :2] / h[2, 2]) > 0:
        raise BeamshotError(f"{name}: the mapping is mirrored; wall coordinates have x to the right and y UP "
                            "(mm), image pixels y down - check the signs of the wall y values, or the photo is flipped")
    return WallMapping(homography=h / h[2, 2], method=f"{method}; re-projection {rms:.2f} mm RMS over {len(src)} points",
                       scale_uncertainty=float(rel))


def parse_wall_points(text: str) -> tuple[np.ndarray, np.ndarray]:
    """Read ``"x,y=X,Y; ..."`` (image px = wall mm) or a JSON file with such pairs.

    >>> img, wall = parse_wall_points("10,20=0,0; 110,20=500,0; 110,120=500,-500; 10,120=0,-500")
    >>> wall[2].tolist()
    [500.0, -500.0]
    """
    import json
    import os

    if os.path.exists(text):
        try:
            with open(text, encoding="utf-8") as fh:
                data = json.load(fh)
            pairs = [(p["image_px"], p["wall_mm"]) for p in data["points"]]
        except (OSError, ValueError, KeyError, TypeError) as exc:
            raise BeamshotError(f"{text}: cannot read wall points ({exc}); see docs/shooting.md") from None
    else:
        pairs = []
        for item in text.split(";"):
            if not item.strip():
                continue
            try:
                a, b = item.split("=")
                pairs.append(([float(v) for v in a.split(",")], [float(v) for v in b.split(",")]))
            except ValueError:
                raise BeamshotError(f"--wall-points: cannot read {item.strip()!r}; write x,y=X,Y with "
                                    "image pixels left and wall mm right, separated by ';'") from None
    img = np.array([p[0] for p in pairs], float)
    wall = np.array([p[1] for p in pairs], float)
    if img.shape[1:] != (2,) or wall.shape[1:] != (2,) or len(img) < 4:
        raise BeamshotError("--wall-points needs at least 4 points, each x,y=X,Y")
    return img, wall


def pose_mapping(image_xy: np.ndarray, target_mm: np.ndarray, image_shape: tuple[int, int], focal_px: float, *,
                 method: str, name: str = "photo", focal_uncertainty: float = 0.0) -> WallMapping:
    """Wall mapping from the camera's pose, solved from a small planar target (OpenCV solvePnP).

    A homography fitted to a target a few hundred mm across extrapolates poorly to a spill
    metres wide; with the focal length known, the pinhole model ``H = K [r1 r2 t]`` has 6
    degrees of freedom instead of 8 and the perspective follows from the rotation.  The pose
    comes from IPPE (infinitesimal plane-based pose estimation, Collins & Bartoli 2014, in
    OpenCV), refined by Levenberg-Marquardt on the re-projection error.
    """
    import cv2

    img = np.asarray(image_xy, np.float64).reshape(-1, 1, 2)
    obj = np.c_[np.asarray(target_mm, np.float64).reshape(-1, 2), np.zeros(len(img))].reshape(-1, 1, 3)
    h, w = image_shape
    k = np.array([[focal_px, 0, (w - 1) / 2.0], [0, focal_px, (h - 1) / 2.0], [0, 0, 1.0]])
    ok, rvec, tvec = cv2.solvePnP(obj, img, k, None, flags=cv2.SOLVEPNP_IPPE)
    if not ok:
        raise BeamshotError(f"{name}: the camera pose could not be solved from the target")
    ok, rvec, tvec = cv2.solvePnP(obj, img, k, None, rvec, tvec, useExtrinsicGuess=True, flags=cv2.SOLVEPNP_ITERATIVE)
    r, _ = cv2.Rodrigues(rvec)
    h_img_from_wall = k @ np.c_[r[:, 0], r[:, 1], tvec.ravel()]
    h_wall = np.linalg.inv(h_img_from_wall)
    proj = _apply_h(h_wall, img.reshape(-1, 2))
    rms = float(np.sqrt(np.mean(np.sum((proj - obj.reshape(-1, 3)[:, :2]) ** 2, axis=1))))
    if rms > MAX_REPROJECTION_MM:
        raise BeamshotError(f"{name}: the target's corners miss the camera model by {rms:.1f} mm (RMS, limit "
                            f"{MAX_REPROJECTION_MM:g} mm); check the print scale, the focal length and lens distortion")
    if tvec.ravel()[2] <= 0:
        raise BeamshotError(f"{name}: the target appears behind the camera; the photo may be mirrored")
    span = float(np.max(np.ptp(obj.reshape(-1, 3)[:, :2], axis=0)))
    rel = float(np.hypot(max(rms, 0.05) / span * np.sqrt(4.0 / len(img)), focal_uncertainty))
    distance = float(np.linalg.norm(tvec) / 1000.0)
    return WallMapping(homography=h_wall / h_wall[2, 2],
                       method=(f"{method}; camera pose from the target (camera {distance:.2f} m from it); "
                               f"re-projection {rms:.2f} mm RMS over {len(img)} corners"),
                       scale_uncertainty=rel, focal_px=focal_px)
