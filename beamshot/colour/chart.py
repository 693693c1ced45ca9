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

__all__ = ["MIN_PATCHES", "fit_chart_matrix", "profile_with_chart_matrix"]

#: Fewest patches for a fit: 3 determine the 3x3 matrix exactly; more give a residual to judge it.
MIN_PATCHES = 4


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


