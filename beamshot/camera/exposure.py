"""Exposure and sensitivity relations between scene luminance and camera signal.

References
----------
- ISO 2720:1974 reflected-light meter equation ``N^2 / t = L S / K``, so
  ``L = K N^2 / (t S)``; K = 12.5 is a common calibration constant.
- ISO 12232:2006 focal-plane exposure ``H = q L t / N^2`` with
  ``q = (pi/4) T f_v cos^4(theta)``; T = 0.9, f_v = 0.98, theta = 10 deg give q = 0.651575.
  Saturation-based speed ``S_sat = 78 / H_sat``: a linear value normalised to 1 at clipping
  corresponds to ``H = 78 / S``, hence ``L = v * 78 N^2 / (q S t)``.
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "REFLECTED_METER_CONSTANT_K",
    "ISO12232_SATURATION_CONSTANT",
    "q_factor",
    "luminance_at_clip",
]

#: Reflected-light meter calibration constant K (cd s / m^2), common value (ISO 2720 range 10.6-13.4).
REFLECTED_METER_CONSTANT_K = 12.5
#: ISO 12232 saturation-based speed constant (lx s): S_sat = 78 / H_sat.
ISO12232_SATURATION_CONSTANT = 78.0


def q_factor(transmission=0.9, vignetting=0.98, angle_deg=10.0):
    """ISO 12232 lens factor ``q = (pi/4) T f_v cos^4(theta)``.

    >>> round(q_factor(), 6)
    0.651575
    """
    return float(np.pi / 4.0 * transmission * vignetting * np.cos(np.radians(angle_deg)) ** 4)


def luminance_at_clip(f_number, exposure_time_s, iso, q=None):
    """Scene luminance (cd/m^2) that just clips a camera of saturation-based speed ``iso``.

    ``L_clip = 78 N^2 / (q S t)``; f/8, 1/250 s, ISO 400 give about 4788 cd/m^2.
    """
    q = q_factor() if q is None else q
    return ISO12232_SATURATION_CONSTANT * f_number**2 / (q * iso * exposure_time_s)
