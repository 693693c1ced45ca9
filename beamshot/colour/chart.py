"""A camera RGB -> XYZ matrix fitted from a photo of a reference chart.

Given the linear camera RGB of N >= 3 chart patches (``(N, 3)``, measured under the light, with
fixed white balance) and their reference CIE XYZ under that light (``(N, 3)``, supplied by the
user, e.g. from the chart maker's spectral data or a spectrometer), the matrix M minimising
``sum_i |M rgb_i - XYZ_i|^2`` is the linear least-squares solution ``M^T = lstsq(RGB, XYZ)``
(common practice in camera characterisation; a 3x3 linear model, no offsets).  The fit's
quality is stated as the RMS of the patches' residuals in (u', v').

The result is kept in the camera profile (``CameraProfile.colour_matrix``), like the rest of
the calibration.
"""

from __future__ import annotations


import numpy as np

from ..errors import BeamshotError
from .chromaticity import delta_uv_prime, uv_prime_of

__all__ = ["MIN_PATCHES", "CHART_COLUMNS", "read_chart_table", "patch_rgb", "fit_chart_matrix",
           "profile_with_chart_matrix"]

#: Columns of the chart table (CSV): a patch's centre and box side in pixels of the photo as shown
#: (x right, y down), and its reference CIE XYZ under the light (any common scale).
CHART_COLUMNS = ("x", "y", "size", "X", "Y", "Z")

#: Fewest patches for a fit: 3 determine the 3x3 matrix exactly; more give a residual to judge it.
MIN_PATCHES = 4


def read_chart_table(path) -> tuple[np.ndarray, np.ndarray]:
    """Patch boxes ``(N, 3)`` (x, y, size in px) and reference XYZ ``(N, 3)`` from a CSV with the
    header :data:`CHART_COLUMNS`; a one-line :class:`BeamshotError` for anything else."""
    import csv
    import io

    from ..errors import read_user_file

    text = read_user_file(path, "give the chart's CSV table").decode("utf-8", "replace")
    try:
        rows = list(csv.DictReader(io.StringIO(text)))
    except csv.Error:  # e.g. a photo given instead of the table
        rows = []
    if not rows or any(c not in rows[0] for c in CHART_COLUMNS):
        raise BeamshotError(f"{path}: the chart table needs the columns {','.join(CHART_COLUMNS)} (patch centre and "
                            "box side in pixels, reference X, Y, Z); add that header line")
    try:
        vals = np.array([[float(r[c]) for c in CHART_COLUMNS] for r in rows])
    except (TypeError, ValueError):
        raise BeamshotError(f"{path}: every cell of the chart table must be a number") from None
    if not np.all(np.isfinite(vals)) or np.any(vals[:, 2] < 1):
        raise BeamshotError(f"{path}: the chart table has a non-finite number or a box side below 1 px")
    return vals[:, :3], vals[:, 3:]


def patch_rgb(image, boxes) -> np.ndarray:
    """Mean linear RGB ``(N, 3)`` of each box (x, y, size in full-resolution pixels) of a
    :class:`~beamshot.camera.linearize.LinearImage`; refuses a box off the photo or with clipping."""
    b = image.bin_factor
    h, w = image.shape
    out = []
    for i, (x, y, size) in enumerate(np.asarray(boxes, float)):
        half = max(0.5, size / b / 2.0)
        cx, cy = (x - (b - 1) / 2) / b, (y - (b - 1) / 2) / b
        r0, r1 = int(np.floor(cy - half + 0.5)), int(np.floor(cy + half + 0.5))
        c0, c1 = int(np.floor(cx - half + 0.5)), int(np.floor(cx + half + 0.5))
        if r0 < 0 or c0 < 0 or r1 > h or c1 > w or r1 <= r0 or c1 <= c0:
            raise BeamshotError(f"chart patch {i + 1} at ({x:g}, {y:g}) is not inside the photo; give the patch "
                                "centres in pixels of the photo as shown (x right, y down)")
        if np.any(image.saturated[r0:r1, c0:c1]):
            raise BeamshotError(f"chart patch {i + 1} at ({x:g}, {y:g}) is clipped; lower the exposure")
        out.append(image.rgb[r0:r1, c0:c1].reshape(-1, 3).astype(float).mean(axis=0))
    return np.array(out)


def fit_chart_matrix(rgb, xyz_reference) -> dict:
    """Least-squares 3x3 matrix from patch RGB ``(N, 3)`` to reference XYZ ``(N, 3)``, with its residual.

    >>> rgb = np.eye(3).tolist() + [[1.0, 1.0, 1.0]]
    >>> fit = fit_chart_matrix(rgb, np.asarray(rgb) @ np.diag([2.0, 3.0, 4.0]))
    >>> (np.round(fit["matrix"], 6) + 0.0).tolist(), fit["residual_rms_uv"] < 1e-9
    ([[2.0, 0.0, 0.0], [0.0, 3.0, 0.0], [0.0, 0.0, 4.0]], True)
    """
    a = np.asarray(rgb, float)
    b = np.asarray(xyz_reference, float)
    if a.ndim != 2 or a.shape[1] != 3 or b.shape != a.shape:
        raise BeamshotError("the chart needs one RGB triple and one reference XYZ triple per patch; give equal lists "
                            "of 3 numbers")
    if len(a) < MIN_PATCHES:
        raise BeamshotError(f"the chart fit needs at least {MIN_PATCHES} patches; give more patches")
    if not (np.all(np.isfinite(a)) and np.all(np.isfinite(b))) or np.linalg.matrix_rank(a) < 3:
        raise BeamshotError("the chart's patch colours do not span three colour directions; include coloured "
                            "patches (red, green, blue), not only greys")
    mt, *_ = np.linalg.lstsq(a, b, rcond=None)
    m = mt.T
    resid = delta_uv_prime(uv_prime_of(a @ m.T), uv_prime_of(b))
    return {"matrix": m.tolist(), "residual_rms_uv": float(np.sqrt(np.nanmean(resid**2))), "patches": int(len(a)),
            "method": "3x3 least squares, camera RGB -> XYZ, from a reference-chart photo (reference values given "
                      "by the user)"}


def profile_with_chart_matrix(profile, rgb, xyz_reference, files: list[dict] | None = None):
    """A copy of a camera profile keeping the fitted matrix, with a provenance entry."""
    fit = fit_chart_matrix(rgb, xyz_reference)
    return profile.with_step("colour chart", files or [], details={"residual_rms_uv": fit["residual_rms_uv"]},
                             colour_matrix=fit)


