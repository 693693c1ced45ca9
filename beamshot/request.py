"""What an analysis is given, as plain data, validated once: the photos, the setup, the
calibration and the geometry.  The CLI, the Python API and batches all build a :class:`Request`
and hand it to :func:`beamshot.analysis.run`.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

from .errors import BeamshotError

__all__ = ["Photos", "Setup", "Calibration", "Geometry", "Request", "DEFAULT_DISTANCE_UNCERTAINTY_M",
           "MIN_DISTANCE_M", "MAX_DISTANCE_M"]

#: Default standard uncertainty of a tape-measured distance, m (assumption).
DEFAULT_DISTANCE_UNCERTAINTY_M = 0.02
MIN_DISTANCE_M = 0.3
MAX_DISTANCE_M = 100.0


@dataclass(frozen=True)
class Photos:
    """The photos: ``beam`` is one path/Photo or several (a bracket, merged); the others are optional
    companions taken with the same camera and settings (light off, lens capped, evenly lit target)."""

    beam: tuple
    ambient: object = None
    dark: object = None
    flat: object = None


@dataclass(frozen=True)
class Setup:
    """The scene: distances (m), the lux reading (lx, at the peak or at ``lux_point_px``), the light."""

    distance_m: float
    distance_uncertainty_m: float | None = None
    camera_distance_m: float | None = None
    lux_reading_lx: float | None = None
    lux_point_px: tuple[float, float] | None = None
    lux_meter_accuracy: float | None = None
    reflectance: float | None = None
    use_exif_scale: bool = True
    head_diameter_mm: float | None = None
    light_name: str | None = None
    assume_square: bool = False

    @property
    def distance_u_m(self) -> float:
        return DEFAULT_DISTANCE_UNCERTAINTY_M if self.distance_uncertainty_m is None else self.distance_uncertainty_m


@dataclass(frozen=True)
class Calibration:
    """The camera: a profile (name, path or object; default the uncalibrated sRGB one) and a tone
    curve that overrides the profile's (``srgb``, ``linear``, ``s-curve``, ``gamma:G`` or a Response)."""

    camera: object = None
    response: object = None


@dataclass(frozen=True)
class Geometry:
    """How the photo maps to the wall: the printed target's photo, hand-given wall points, or the
    pinhole view from the focal length (``focal_35mm`` mm or ``hfov_deg``, if EXIF lacks it)."""

    geometry_photo: object = None
    wall_points: object = None
    target_scale: float = 1.0
    focal_35mm: float | None = None
    hfov_deg: float | None = None


@dataclass(frozen=True)
class Request:
    photos: Photos
    setup: Setup
    calibration: Calibration = field(default_factory=Calibration)
    geometry: Geometry = field(default_factory=Geometry)

    @classmethod
    def from_options(cls, photo, *, distance_m, distance_uncertainty_m=None, ambient=None, flat=None,
                     lux_at_peak=None, lux_meter_accuracy=None, reflectance=None, use_exif_scale=True,
                     focal_35mm=None, hfov_deg=None, camera_distance_m=None, response=None, head_diameter_mm=None,
                     camera=None, dark=None, geometry=None, wall_points=None, target_scale=1.0,
                     assume_square=False, light_name=None, lux_point_px=None) -> "Request":
        """A request from the keyword options of :func:`beamshot.analyze` (see its docstring)."""
        beam = tuple(photo) if isinstance(photo, (list, tuple)) else (photo,)
        return cls(
            Photos(beam, ambient=ambient, dark=dark, flat=flat),
            Setup(distance_m, distance_uncertainty_m, camera_distance_m, lux_at_peak,
                  None if lux_point_px is None else tuple(lux_point_px), lux_meter_accuracy, reflectance,
                  use_exif_scale, head_diameter_mm, light_name, assume_square),
            Calibration(camera, response),
            Geometry(geometry, wall_points, target_scale, focal_35mm, hfov_deg),
        )

    def validated(self) -> "Request":
        """The same request, every option checked against its physical range (one line naming the fix
        for the first that fails)."""
        s, g = self.setup, self.geometry
        if not self.photos.beam:
            raise BeamshotError("no beam photo given")
        if s.distance_m is None:
            raise BeamshotError("the light-to-wall distance is required (--distance, in metres)")
        check_positive("distance", s.distance_m, MIN_DISTANCE_M, MAX_DISTANCE_M, " m",
                       "measure from the light's lens to the wall, in metres (e.g. --distance 5)")
        u_d = s.distance_u_m
        if not np.isfinite(u_d) or u_d < 0 or u_d >= s.distance_m:
            raise BeamshotError(f"distance uncertainty {u_d:g} m must be at least 0 and smaller than the distance; "
                                "give how far off the tape measure may be, e.g. --distance-uncertainty 0.02")
        check_positive("camera distance", s.camera_distance_m, MIN_DISTANCE_M, MAX_DISTANCE_M, " m",
                       "measure from the camera's lens to the wall, in metres")
        check_positive("lux reading", s.lux_reading_lx, None, 2e6, " lx",
                       "give the meter's reading in lux, taken on the wall at the hotspot (e.g. --lux 412)")
        check_positive("reflectance", s.reflectance, 0.05, 1.0, "",
                       "give the wall's reflectance as a fraction: about 0.85 for matte white paint (typical 0.8-0.9)")
        check_positive("lux-meter accuracy", s.lux_meter_accuracy, None, 0.5, "",
                       "give the meter's specified accuracy, e.g. 5 (%)", shown=lambda v: f"{100 * v:g} %")
        check_positive("35 mm focal length", g.focal_35mm, 5.0, 800.0, " mm",
                       "give the 35 mm-equivalent focal length in mm, e.g. 26 for a phone's main camera")
        check_positive("horizontal field of view", g.hfov_deg, 1.0, 150.0, " deg",
                       "give the photo's horizontal view in degrees, e.g. 70")
        if g.focal_35mm is not None and g.hfov_deg is not None:
            raise BeamshotError("give either --focal-35mm or --hfov, not both")
        if s.lux_reading_lx is not None and s.reflectance is not None:
            raise BeamshotError("--reflectance is only used without a lux reading; drop one of them")
        check_positive("head diameter", s.head_diameter_mm, None, 2000.0, " mm",
                       "give the diameter of the light's head (bezel) in mm, e.g. 40")
        check_positive("target scale", g.target_scale, 0.2, 5.0, "",
                       "measure the printed 100 mm scale bar with a ruler and give its length (e.g. 99.5 mm)",
                       shown=lambda v: f"{v:g} (scale bar {100 * v:g} mm of 100 mm)")
        if s.lux_point_px is not None:
            if s.lux_reading_lx is None:
                raise BeamshotError("a metered point needs the lux reading taken there (--lux LX with --lux-at X,Y)")
            if len(s.lux_point_px) != 2 or not all(np.isfinite(v) for v in s.lux_point_px):
                raise BeamshotError("the metered point takes two pixel coordinates X,Y, e.g. 2016,1512")
        if g.geometry_photo is not None and g.wall_points is not None:
            raise BeamshotError("give either --geometry or --wall-points, not both")
        return replace(self, setup=replace(s, distance_uncertainty_m=u_d))


def check_positive(name: str, value, lo=None, hi=None, unit="", fix="", *, shown=None) -> None:
    """Refuse a value that is not a finite positive number within [lo, hi], in one line that says
    what to give instead (``fix``).  ``shown`` formats a value for the message (default ``{:g} unit``)."""
    if value is None:
        return
    show = shown or (lambda v: f"{v:g}{unit}")
    tail = f"; {fix}" if fix else ""
    if not np.isfinite(value) or value <= 0:
        raise BeamshotError(f"{name} must be a finite positive number, not {show(value)}{tail}")
    if lo is not None and value < lo:
        raise BeamshotError(f"{name} {show(value)} is too small (minimum {show(lo)}){tail}")
    if hi is not None and value > hi:
        raise BeamshotError(f"{name} {show(value)} is too large (maximum {show(hi)}){tail}")
