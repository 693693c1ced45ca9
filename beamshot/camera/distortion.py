"""Lens distortion in the OpenCV (Brown-Conrady) model: ``k1, k2, p1, p2, k3``.

Phones correct distortion in processing; other cameras may not.  Coefficients are those of
OpenCV's ``calibrateCamera`` for the camera matrix ``fx, fy, cx, cy`` at ``image_size``; they
are kept in the camera profile and scaled to the photo's size when it differs (same aspect).
"""

from __future__ import annotations

from dataclasses import dataclass

import cv2
import numpy as np

from ..errors import BeamshotError

__all__ = ["Distortion"]


@dataclass(frozen=True)
class Distortion:
    """Camera matrix (pixels at ``image_size`` = (w, h)) and OpenCV distortion coefficients."""

    fx: float
    fy: float
    cx: float
    cy: float
    coefficients: tuple[float, ...]
    image_size: tuple[int, int]

    def for_shape(self, shape: tuple[int, int]) -> "Distortion":
        """The same lens for a photo of ``shape`` (h, w): the camera matrix scales with the size."""
        h, w = shape
        w0, h0 = self.image_size
        if (w, h) == (w0, h0):
            return self
        if abs(w / h - w0 / h0) > 0.01:
            raise BeamshotError(f"the distortion data are for {w0}x{h0} photos, this one is {w}x{h}")
        s = w / w0
        return Distortion(self.fx * s, self.fy * s, (self.cx + 0.5) * s - 0.5, (self.cy + 0.5) * s - 0.5,
                          self.coefficients, (w, h))

    def _k(self) -> np.ndarray:
        return np.array([[self.fx, 0, self.cx], [0, self.fy, self.cy], [0, 0, 1.0]])

    def undistort(self, xy: np.ndarray) -> np.ndarray:
        """Distorted pixel positions ``(..., 2)`` -> where an ideal pinhole would image them."""
        xy = np.asarray(xy, np.float64)
        pts = xy.reshape(-1, 1, 2)
        out = cv2.undistortPoints(pts, self._k(), np.asarray(self.coefficients, float), None, None, self._k(),
                                      (cv2.TERM_CRITERIA_COUNT | cv2.TERM_CRITERIA_EPS, 20, 1e-9))
        return out.reshape(xy.shape)

    def distort(self, xy: np.ndarray) -> np.ndarray:
        """Ideal pinhole pixel positions ``(..., 2)`` -> where the real lens images them."""
        xy = np.asarray(xy, np.float64)
        pts = xy.reshape(-1, 2)
        norm = np.c_[(pts[:, 0] - self.cx) / self.fx, (pts[:, 1] - self.cy) / self.fy, np.ones(len(pts))]
        ok = np.all(np.isfinite(norm), axis=1)
        out = np.full((len(pts), 2), np.nan)
        if np.any(ok):
            proj, _ = cv2.projectPoints(norm[ok].reshape(-1, 1, 3), np.zeros(3), np.zeros(3), self._k(),
                                        np.asarray(self.coefficients, float))
            out[ok] = proj.reshape(-1, 2)
        return out.reshape(xy.shape)

    def to_dict(self) -> dict:
        return {"model": "OpenCV k1 k2 p1 p2 k3", "fx": self.fx, "fy": self.fy, "cx": self.cx, "cy": self.cy,
                "coefficients": list(self.coefficients), "image_size": list(self.image_size)}

    @classmethod
    def from_dict(cls, d: dict) -> "Distortion":
        coeffs = tuple(float(c) for c in d["coefficients"])
        if len(coeffs) not in (4, 5, 8):
            raise ValueError("distortion coefficients must be 4, 5 or 8 numbers (OpenCV order)")
        w, h = (int(v) for v in d["image_size"])
        return cls(float(d["fx"]), float(d["fy"]), float(d["cx"]), float(d["cy"]), coeffs, (w, h))
