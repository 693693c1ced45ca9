"""The camera's absolute-scale constant from one photo of a lit wall and a lux-meter reading.

Wall illuminance and linear pixel value are related by ``E = K v N^2 / (t S)`` (ISO 12232:
focal-plane exposure ``H = q L t / N^2``, Lambertian wall ``L = rho E / pi``, signal
``v = H S / 78``; hence ``K = 78 pi / (q rho)`` for an ideal camera).  Measuring ``K`` once with
a lux meter folds the lens factor, the camera's true sensitivity and the wall's reflectance
into one number; later photos at other exposure settings then give lux without a meter.
"""

from __future__ import annotations

import numpy as np

from ..errors import BeamshotError
from ..photo import ExifFacts
from .linearize import LinearImage

__all__ = ["PATCH_FRACTION", "UNIFORMITY_LIMIT", "camera_constant"]

#: Radius of the metered patch as a fraction of the image diagonal.
PATCH_FRACTION = 0.01
#: Relative spread within the patch above which the wall is too uneven at the meter.
UNIFORMITY_LIMIT = 0.05


#: The largest lux reading accepted (the same limit as ``analyze``; direct sunlight is ~1e5 lx).
MAX_LUX = 2e6


def camera_constant(image: LinearImage, exif: ExifFacts, lux: float, at_xy: tuple[float, float] | None, *,
                    meter_accuracy: float, name: str = "photo") -> tuple[float, float, dict]:
    """``(K, relative 1-sigma, notes)`` from a lux reading at full-resolution pixel ``at_xy``."""
    if not exif.has_exposure:
        raise BeamshotError(f"{name}: the EXIF lacks exposure time, f-number or ISO, which the constant needs")
    if not np.isfinite(lux) or lux <= 0 or lux > MAX_LUX:
        raise BeamshotError(f"the lux reading must be a positive number up to {MAX_LUX:g} lx (full sunlight is about "
                            f"1e5 lx), not {lux:g}; give the meter's reading on the lit wall")
    h_full, w_full = image.full_shape
    x, y = at_xy if at_xy is not None else ((w_full - 1) / 2.0, (h_full - 1) / 2.0)
    if not (0 <= x < w_full and 0 <= y < h_full):
        raise BeamshotError(f"--at {x:g},{y:g} is outside the {w_full}x{h_full} photo")
    b = image.bin_factor
    cx, cy = (x - (b - 1) / 2) / b, (y - (b - 1) / 2) / b
    r = max(2.0, PATCH_FRACTION * np.hypot(*image.shape))
    yy, xx = np.ogrid[: image.shape[0], : image.shape[1]]
    patch = (xx - cx) ** 2 + (yy - cy) ** 2 <= r * r
    if np.any(image.saturated[patch]):
        raise BeamshotError(f"{name}: the metered patch is clipped; lower the exposure")
    vals = image.luminance[patch]
    v = float(np.mean(vals))
    if v <= 1e-4:
        raise BeamshotError(f"{name}: the metered patch is black; light the wall and expose it well")
    spread = float(np.std(vals) / v)
    notes = {"lux_reading": lux, "at_px": [float(x), float(y)], "patch_mean_linear": v,
             "patch_relative_spread": spread, "meter_accuracy": meter_accuracy,
             "exposure": {"t_s": exif.exposure_time_s, "f_number": exif.f_number, "iso": exif.iso}}
    if spread > UNIFORMITY_LIMIT:
        notes["warning"] = (f"the wall varies by {spread:.0%} across the metered patch; "
                            "meter an evenly lit area")
    k = lux * exif.exposure_time_s * exif.iso / (v * exif.f_number**2)
    rel = float(np.hypot(meter_accuracy, spread / np.sqrt(max(1, patch.sum()))))
    return float(k), rel, notes
