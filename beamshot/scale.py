"""Absolute scale: from linear camera units on the wall to lux (and so to cd and lm).

Two sources, in order of preference:

1. A lux-meter reading ``E_m`` at the peak on the wall.  The map's relative peak
   ``I_rel`` toward polar angle ``theta_p`` corresponds to wall illuminance
   ``I_rel cos^3(theta_p) / D^2`` (inverse-square and cosine laws), so
   ``lux_per_unit = E_m / (I_rel cos^3(theta_p) / D^2)`` and ``I_peak = E_m D^2 / cos^3(theta_p)``.
2. Exposure metadata (an estimate): a linear value ``v`` (1 = clipping) is wall luminance
   ``L = v 78 N^2 / (q S t)`` (ISO 12232 saturation-based speed and focal-plane exposure,
   q = 0.651575), and for a Lambertian wall ``E = pi L / rho`` (CIE ILV 17-24-063).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .camera.exposure import luminance_at_clip, q_factor
from .photometry import illuminance_from_luminance, illuminance_on_wall
from .photo import ExifFacts

__all__ = [
    "DEFAULT_WALL_REFLECTANCE",
    "DEFAULT_REFLECTANCE_UNCERTAINTY",
    "DEFAULT_LUX_METER_ACCURACY",
    "ISO_SPEED_UNCERTAINTY",
    "Q_FACTOR_UNCERTAINTY",
    "AbsoluteScale",
    "scale_from_lux_meter",
    "scale_from_lux_at_point",
    "scale_from_exposure",
    "no_scale",
    "scale_from_camera_constant",
]

#: Assumed reflectance of a matte white wall (assumption; white emulsion paints are ~0.8-0.9).
DEFAULT_WALL_REFLECTANCE = 0.85
#: Standard uncertainty of that assumption (absolute).
DEFAULT_REFLECTANCE_UNCERTAINTY = 0.05
#: Relative standard uncertainty of a hand-held lux meter (typical data-sheet accuracy, from memory).
DEFAULT_LUX_METER_ACCURACY = 0.05
#: Relative uncertainty of the ISO number as saturation-based speed: cameras publish SOS or
#: REI, not S_sat, typically within a third of a stop (from memory).
ISO_SPEED_UNCERTAINTY = 0.26
#: Relative uncertainty of the lens factor q (transmission and vignetting vary by lens; assumption).
Q_FACTOR_UNCERTAINTY = 0.08


@dataclass(frozen=True)
class AbsoluteScale:
    """``lux_per_unit`` converts linear camera units to lux; ``None`` when there is no scale.

    ``rel_uncertainty`` is the relative 1-sigma uncertainty of the factor; ``kind`` is
    ``'lux_meter'``, ``'camera_constant'``, ``'exposure_metadata'`` or ``'none'``.
    """

    lux_per_unit: float | None
    rel_uncertainty: float | None
    kind: str
    description: str
    assumptions: tuple[str, ...] = ()

    @property
    def absolute(self) -> bool:
        return self.lux_per_unit is not None

    def to_dict(self) -> dict:
        return {
            "kind": self.kind,
            "lux_per_linear_unit": self.lux_per_unit,
            "relative_uncertainty": self.rel_uncertainty,
            "description": self.description,
            "assumptions": list(self.assumptions),
        }


def scale_from_lux_meter(lux: float, peak_relative: float, peak_theta: float, distance_m: float,
                         *, meter_accuracy: float | None = None) -> AbsoluteScale:
    """Scale from a lux-meter reading at the peak; ``peak_relative`` is the map's peak (rel. cd) and
    ``peak_theta`` the angle of incidence (rad) at the peak's wall point: the angle between the ray
    from the light and the wall's normal, not the angle from a tilted light's axis."""
    acc = DEFAULT_LUX_METER_ACCURACY if meter_accuracy is None else meter_accuracy
    e_rel = illuminance_on_wall(peak_relative, peak_theta, distance_m)
    return AbsoluteScale(
        lux_per_unit=float(lux / e_rel),
        rel_uncertainty=float(acc),
        kind="lux_meter",
        description=f"lux-meter reading of {lux:g} lx at the peak on the wall (I = E D^2 / cos^3 theta)",
        assumptions=(f"lux meter accurate to {acc:.0%} (1 sigma)",),
    )


def scale_from_lux_at_point(lux: float, value: float, value_rel_noise: float, xy: tuple[float, float],
                            *, meter_accuracy: float | None = None, extra: dict | None = None) -> AbsoluteScale:
    """Scale from a lux-meter reading at a wall point whose linear pixel value is ``value``.

    A matte (Lambertian) wall's luminance is proportional to its illuminance, so the photo's
    linear value there gives ``lux_per_unit = E / value`` for the whole photo (the camera-constant
    relation, E = K v, with K measured on the spot).  ``value_rel_noise`` is the relative 1-sigma
    noise of the sampled patch.
    """
    acc = DEFAULT_LUX_METER_ACCURACY if meter_accuracy is None else meter_accuracy
    extra = dict(extra or {})
    rel = float(np.sqrt(acc**2 + value_rel_noise**2 + sum(v**2 for v in extra.values())))
    return AbsoluteScale(
        lux_per_unit=float(lux / value),
        rel_uncertainty=rel,
        kind="lux_meter_point",
        description=(f"lux-meter reading of {lux:g} lx on the wall at pixel ({xy[0]:g}, {xy[1]:g}) of the photo "
                     "(E proportional to the linear pixel value on a matte wall)"),
        assumptions=(f"lux meter accurate to {acc:.0%} (1 sigma)", "the wall is equally matte and white at the "
                     "metered point and in the beam",
                     *(f"{name}: {v:.1%} (1 sigma)" for name, v in extra.items())),
    )


def scale_from_exposure(exif: ExifFacts, *, reflectance: float | None = None,
                        reflectance_uncertainty: float | None = None) -> AbsoluteScale:
    """Estimated scale from EXIF exposure time, f-number and ISO; ``none`` if any is missing."""
    if not exif.has_exposure:
        missing = [n for n, v in (("exposure time", exif.exposure_time_s), ("f-number", exif.f_number),
                                  ("ISO", exif.iso)) if v is None]
        return no_scale(f"the photo's EXIF lacks {', '.join(missing)}")
    rho = DEFAULT_WALL_REFLECTANCE if reflectance is None else reflectance
    u_rho = DEFAULT_REFLECTANCE_UNCERTAINTY if reflectance_uncertainty is None else reflectance_uncertainty
    q = q_factor()
    lum_per_unit = luminance_at_clip(exif.f_number, exif.exposure_time_s, exif.iso, q)
    rel = float(np.sqrt(ISO_SPEED_UNCERTAINTY**2 + Q_FACTOR_UNCERTAINTY**2 + (u_rho / rho) ** 2))
    return AbsoluteScale(
        lux_per_unit=float(illuminance_from_luminance(lum_per_unit, rho)),
        rel_uncertainty=rel,
        kind="exposure_metadata",
        description=(f"estimate from exposure metadata (t = {exif.exposure_time_s:.4g} s, "
                     f"f/{exif.f_number:g}, ISO {exif.iso:g}) via ISO 12232, wall reflectance {rho:g}"),
        assumptions=(
            f"wall reflectance {rho:g} ± {u_rho:g} (Lambertian)",
            f"ISO number equals saturation-based speed within {ISO_SPEED_UNCERTAINTY:.0%}",
            f"lens factor q = {q:.4f} ± {Q_FACTOR_UNCERTAINTY:.0%} (ISO 12232 typical lens)",
            "the response curve maps clipping to 1.0",
        ),
    )


def scale_from_camera_constant(exif: ExifFacts, constant_lx: float, rel_uncertainty: float,
                               profile_name: str) -> AbsoluteScale:
    """Scale from a camera profile's kept constant: ``lux_per_unit = K N^2 / (t S)``."""
    if not exif.has_exposure:
        return no_scale("the photo's EXIF lacks exposure time, f-number or ISO, which the camera constant needs")
    return AbsoluteScale(
        lux_per_unit=float(constant_lx * exif.f_number**2 / (exif.exposure_time_s * exif.iso)),
        rel_uncertainty=float(rel_uncertainty),
        kind="camera_constant",
        description=(f"camera constant K = {constant_lx:.5g} lx of profile '{profile_name}' at t = "
                     f"{exif.exposure_time_s:.4g} s, f/{exif.f_number:g}, ISO {exif.iso:g} (E = K v N^2 / (t S))"),
        assumptions=("the wall has the reflectance of the wall used for the calibration",
                     "the ISO and aperture behave as at calibration"),
    )


def no_scale(reason: str) -> AbsoluteScale:
    """No absolute scale: figures stay relative."""
    return AbsoluteScale(lux_per_unit=None, rel_uncertainty=None, kind="none",
                         description=f"no absolute scale: {reason}")
