"""The printable wall target: fiducial markers of known printed size, and finding them in a photo.

Markers are OpenCV ArUco markers (dictionary 4x4_50, ids 20-23, the squares' outer black
edge 85 mm) in a 2 x 2 layout around the aim cross, with a 100 mm scale bar.  Target
coordinates are millimetres from the sheet centre (the aim cross), x to the right and y up,
as on the wall when the sheet is pinned upright.
"""

from __future__ import annotations

import os
from dataclasses import dataclass

import cv2
import numpy as np

from .errors import BeamshotError

__all__ = ["PAPER_MM", "MARKER_MM", "MARKER_IDS", "DICTIONARY", "SCALE_BAR_MM", "marker_corners_mm",
           "target_albedo", "write_target", "MarkerDetection", "detect_markers"]

PAPER_MM = {"a4": (210.0, 297.0), "letter": (215.9, 279.4)}
MARKER_MM = 85.0
MARKER_IDS = (20, 21, 22, 23)
DICTIONARY = cv2.aruco.DICT_4X4_50
SCALE_BAR_MM = 100.0
#: Marker centres (mm from the aim cross): upper left, upper right, lower left, lower right.
_CENTRES = ((-52.5, 60.0), (52.5, 60.0), (-52.5, -60.0), (52.5, -60.0))
_OTHER_DICTIONARIES = (cv2.aruco.DICT_6X6_250, cv2.aruco.DICT_5X5_100, cv2.aruco.DICT_ARUCO_ORIGINAL,
                       cv2.aruco.DICT_7X7_50, cv2.aruco.DICT_APRILTAG_36h11)


def marker_corners_mm(marker_mm: float = MARKER_MM) -> dict[int, np.ndarray]:
    """Outer corners of each marker in target mm, OpenCV order (top-left, top-right, bottom-right,
    bottom-left as printed), shape ``(4, 2)``."""
    h = marker_mm / 2.0
    out = {}
    for mid, (cx, cy) in zip(MARKER_IDS, _CENTRES):
        out[mid] = np.array([[cx - h, cy + h], [cx + h, cy + h], [cx + h, cy - h], [cx - h, cy - h]])
    return out


def _marker_image(mid: int, px: int = 600) -> np.ndarray:
    d = cv2.aruco.getPredefinedDictionary(DICTIONARY)
    return cv2.aruco.generateImageMarker(d, mid, px)


def target_albedo(x_mm: np.ndarray, y_mm: np.ndarray, *, origin_mm=(0.0, 0.0), white: float = 1.0,
                  black: float = 0.04) -> np.ndarray:
    """Relative reflectance of the pinned target at wall points (mm); 1 off the sheet (for synth)."""
    x = np.asarray(x_mm, float) - origin_mm[0]
    y = np.asarray(y_mm, float) - origin_mm[1]
    out = np.ones(np.broadcast(x, y).shape)
    for mid, corners in marker_corners_mm().items():
        img = _marker_image(mid, 600)
        x0, x1 = corners[0, 0], corners[1, 0]
        y1, y0 = corners[0, 1], corners[2, 1]
        inside = (x >= x0) & (x < x1) & (y > y0) & (y <= y1)
        if np.any(inside):
            col = ((x[inside] - x0) / (x1 - x0) * img.shape[1]).astype(int).clip(0, img.shape[1] - 1)
            row = ((y1 - y[inside]) / (y1 - y0) * img.shape[0]).astype(int).clip(0, img.shape[0] - 1)
            out[inside] = np.where(img[row, col] > 127, white, black)
    return out


def write_target(folder: str, paper: str = "a4", *, stem: str = "target") -> list[str]:
    """Write ``<folder>/<stem>.pdf`` and ``<folder>/<stem>.png`` (300 dpi) of the target on A4 or
    Letter; returns their paths.  ``folder`` must exist."""
    import matplotlib

    matplotlib.use("Agg", force=False)
    import matplotlib.pyplot as plt

    if paper not in PAPER_MM:
        raise BeamshotError(f"paper must be one of {', '.join(PAPER_MM)}, not {paper!r}")
    w, h = PAPER_MM[paper]
    fig = plt.figure(figsize=(w / 25.4, h / 25.4))
    ax = fig.add_axes((0, 0, 1, 1))
    ax.set_xlim(-w / 2, w / 2)
    ax.set_ylim(-h / 2, h / 2)
    ax.axis("off")
    for mid, corners in marker_corners_mm().items():
        ax.imshow(_marker_image(mid, 60), cmap="gray", vmin=0, vmax=255, interpolation="nearest",
                  extent=(corners[0, 0], corners[1, 0], corners[2, 1], corners[0, 1]))
    ax.plot([-8, 8], [0, 0], color="black", lw=0.8)
    ax.plot([0, 0], [-8, 8], color="black", lw=0.8)
    y_bar = -h / 2 + 22
    ax.plot([-SCALE_BAR_MM / 2, SCALE_BAR_MM / 2], [y_bar, y_bar], color="black", lw=1.2)
    for t in np.arange(0, SCALE_BAR_MM + 1, 10):
        ax.plot([-SCALE_BAR_MM / 2 + t] * 2, [y_bar, y_bar + (4 if t % 50 == 0 else 2)], color="black", lw=0.8)
    ax.text(0, y_bar - 6, f"scale bar {SCALE_BAR_MM:g} mm - measure it; if it differs, give --scale-bar-mm",
            ha="center", va="center", fontsize=7)
    ax.text(0, h / 2 - 10, "beamshot wall target - print at 100 % (no 'fit to page'); pin upright with the "
            "cross at the aim point", ha="center", va="center", fontsize=6.5)
    ax.text(0, h / 2 - 16, f"markers: ArUco 4x4_50, ids {MARKER_IDS[0]}-{MARKER_IDS[-1]}, {MARKER_MM:g} mm "
            "squares; keep lights away from the paper", ha="center", va="center", fontsize=6.5)
    ax.set_aspect("equal")
    written = []
    for ext, kw in ((".pdf", {"dpi": 1440}), (".png", {"dpi": 300})):
        path = os.path.join(folder, stem + ext)
        # keep each marker a separate image of exact size in the PDF (no compositing)
        with matplotlib.rc_context({"image.composite_image": False}):
            fig.savefig(path, **kw)
        written.append(path)
    plt.close(fig)
    return written


@dataclass(frozen=True)
class MarkerDetection:
    """Found marker corners: image points ``(N, 2)`` (full-resolution x, y) and target mm ``(N, 2)``."""

    image_xy: np.ndarray
    target_mm: np.ndarray
    ids: tuple[int, ...]
    quads: tuple[np.ndarray, ...]


def _detector(dictionary, quick: bool = False) -> cv2.aruco.ArucoDetector:
    params = cv2.aruco.DetectorParameters()
    params.cornerRefinementMethod = cv2.aruco.CORNER_REFINE_SUBPIX
    params.minMarkerPerimeterRate = 0.005
    params.adaptiveThreshWinSizeMax = 23 if quick else 53
    return cv2.aruco.ArucoDetector(cv2.aruco.getPredefinedDictionary(dictionary), params)


def refine_corners(grey: np.ndarray, quad: np.ndarray) -> np.ndarray:
    """Sharpen a marker's corners by fitting a line to each side of its black square.

    Along each side, 24 normals (away from the corners) are sampled over +-half a module; the
    edge is where the profile crosses the mid level between the black inside and the white
    outside.  A least-squares line through those points per side, intersected with its
    neighbours, gives corners far steadier than corner detectors on small markers (which pull
    corners inward by a few tenths of a pixel).
    """
    from scipy.ndimage import map_coordinates

    q = np.asarray(quad, float)
    side = float(np.mean(np.linalg.norm(np.roll(q, -1, axis=0) - q, axis=1)))
    half = max(1.5, 0.5 * side / 6.0)  # half a module of a 4x4 marker with its border (6 modules)
    centre = q.mean(axis=0)
    lines = []
    for k in range(4):
        a, b = q[k], q[(k + 1) % 4]
        t = np.linspace(0.15, 0.85, 24)
        pts = a[None] + t[:, None] * (b - a)[None]
        d = (b - a) / np.linalg.norm(b - a)
        n = np.array([-d[1], d[0]])
        if np.dot(n, pts.mean(axis=0) - centre) < 0:
            n = -n  # outward normal
        s = np.linspace(-half, half, 15)
        xy = pts[:, None, :] + s[None, :, None] * n[None, None, :]
        prof = map_coordinates(grey, [xy[..., 1].ravel(), xy[..., 0].ravel()], order=1, mode="nearest").reshape(xy.shape[:2])
        edge_pts = []
        for i in range(len(pts)):
            p = prof[i]
            lo, hi = p[: 4].mean(), p[-4:].mean()
            if hi - lo < 20:
                continue
            level = 0.5 * (lo + hi)
            j = np.nonzero((p[:-1] < level) & (p[1:] >= level))[0]
            if len(j) != 1:
                continue
            j = j[0]
            frac = (level - p[j]) / (p[j + 1] - p[j])
            edge_pts.append(pts[i] + (s[j] + frac * (s[1] - s[0])) * n)
        if len(edge_pts) < 6:
            return q
        e = np.array(edge_pts)
        c0 = e.mean(axis=0)
        _, _, vt = np.linalg.svd(e - c0)
        lines.append((c0, vt[0]))
    out = np.empty_like(q)
    for k in range(4):
        (p1, d1), (p2, d2) = lines[k - 1], lines[k]
        m = np.array([d1, -d2]).T
        try:
            t1, _ = np.linalg.solve(m, p2 - p1)
        except np.linalg.LinAlgError:
            return q
        out[k] = p1 + t1 * d1
    if np.max(np.abs(out - q)) > 0.25 * side:
        return q
    return out


def detect_markers(grey: np.ndarray, *, name: str = "photo", target_scale: float = 1.0,
                   required: bool = True, min_markers: int = 2, quick: bool = False) -> MarkerDetection | None:
    """Find the target's markers in an 8-bit grey photo; explain clearly when they are not there.

    ``quick`` uses fewer threshold windows (a first look before a full-resolution search).
    """
    corners, ids, _ = _detector(DICTIONARY, quick).detectMarkers(grey)
    found = {}
    if ids is not None:
        for c, i in zip(corners, ids.ravel()):
            if int(i) in MARKER_IDS:
                found[int(i)] = c.reshape(4, 2).astype(np.float64)
    if len(found) < min_markers:
        if not required:
            return None
        flipped, fids, _ = _detector(DICTIONARY).detectMarkers(np.ascontiguousarray(grey[:, ::-1]))
        if fids is not None and any(int(i) in MARKER_IDS for i in fids.ravel()):
            raise BeamshotError(f"{name}: the target's markers appear mirrored - the photo is flipped "
                                "(a selfie camera or an editing app); use the unmirrored photo")
        for d in _OTHER_DICTIONARIES:
            c2, i2, _ = _detector(d).detectMarkers(grey)
            if i2 is not None and len(i2):
                raise BeamshotError(f"{name}: found markers of another kind than beamshot's target; "
                                    "print the target with 'beamshot target' and pin that one")
        raise BeamshotError(f"{name}: the target's markers were not found ({len(found)} of 4, at least "
                            f"{min_markers} needed); light the "
                            "room, make the target larger in the frame, and keep it sharp and unobstructed")
    grey_f = grey.astype(np.float32)
    for mid in found:
        found[mid] = refine_corners(grey_f, found[mid])
    ref = marker_corners_mm()  # as printed at 100 %; a measured scale bar rescales the whole sheet
    img_pts, mm_pts, quads = [], [], []
    for mid in sorted(found):
        img_pts.append(found[mid])
        mm_pts.append(ref[mid] * target_scale)
        quads.append(found[mid])
    return MarkerDetection(image_xy=np.vstack(img_pts), target_mm=np.vstack(mm_pts),
                           ids=tuple(sorted(found)), quads=tuple(quads))
