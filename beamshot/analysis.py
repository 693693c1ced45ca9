"""analyze(): compose the stages from a beam photo to a BeamReport.

load -> linearise (response, dark, bracket, ambient, flat field: prepare.py) -> map to the wall
(pinhole, target markers or given points: wall_setup.py) -> beam axis
-> BeamMap (I = E D^2 / cos^3 theta) -> shape (peak, contours, spill edge, zone flux)
-> absolute scale -> figures with uncertainties -> BeamReport.
"""

from __future__ import annotations

import datetime as _dt
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, replace

import numpy as np

from . import __version__
from .aim import TILT_SIGNIFICANCE_CHI2, TILT_WARN_DEG, edge_to_wall, fit_light_pose
from .axis import find_beam_axis
from .beammap import build_beam_map
from .camera.linearize import LinearImage
from .camera.profile import CameraProfile, load_profile
from .camera.response import Response, parse_response
from .errors import BeamshotError
from .measure import beam_figures, measure_shape
from .prepare import input_record, load_input, prepare_image, same_size
from .profile import radial_profile
from .report.model import BeamReport
from .scale import (no_scale, scale_from_camera_constant, scale_from_exposure, scale_from_lux_at_point,
                    scale_from_lux_meter)
from .target import detect_markers
from .wall import homography_mapping, parse_wall_points, pinhole_mapping
from .wall_setup import focal_for, grey, markers_left_in, markers_still_there, marker_mapping, mask_quads
from .floor import floor_corrected
from .frames import beam_to_wall
from .measure import shape_values
from .uncertainty import (ASSUMED_RESPONSE_EXPONENT_SIGMA, RATIO_SPAN, SHADING_CORNER_ENVELOPE, absolute_values,
                          build_budget, scale_factor, shading_gain, tone_bent)

__all__ = ["analyze", "DEFAULT_DISTANCE_UNCERTAINTY_M", "MIN_DISTANCE_M", "MAX_DISTANCE_M"]

#: Default standard uncertainty of a tape-measured distance, m (assumption).
DEFAULT_DISTANCE_UNCERTAINTY_M = 0.02
MIN_DISTANCE_M = 0.3
MAX_DISTANCE_M = 100.0
#: IES five-times rule: the inverse-square law is within 1 % at 5x the source's largest dimension.
FAR_FIELD_FACTOR = 5.0
#: The tilt is fitted only to a bezel cut-off seen in at least this fraction of directions (a
#: threshold contour of a smooth beam follows the beam's shape, not the light's aim).
TILT_MIN_SHARP_FRACTION = 0.9
#: A peak below this linear level (of clipping) is noisy; suggest a longer exposure.
_LOW_EXPOSURE_LEVEL = 0.15


def _check_positive(name: str, value, lo=None, hi=None, unit="", fix="", *, shown=None) -> None:
    """Refuse a value that is not a finite positive number within [lo, hi], in one line that says
    what to give instead (``fix``).  ``shown`` formats a value for the message (default ``{:g} unit``)."""
    if value is None:
        return
    show = shown or (lambda v: f"{v:g}{unit}")
    tail = f"; {fix}" if fix else ""
    if not np.isfinite(value) or value <= 0:
        raise BeamshotError(f"{name} must be a positive number, not {show(value)}{tail}")
    if lo is not None and value < lo:
        raise BeamshotError(f"{name} {show(value)} is too small (minimum {show(lo)}){tail}")
    if hi is not None and value > hi:
        raise BeamshotError(f"{name} {show(value)} is too large (maximum {show(hi)}){tail}")


def analyze(
    photo,
    *,
    distance_m: float,
    distance_uncertainty_m: float | None = None,
    ambient=None,
    flat=None,
    lux_at_peak: float | None = None,
    lux_meter_accuracy: float | None = None,
    reflectance: float | None = None,
    use_exif_scale: bool = True,
    focal_35mm: float | None = None,
    hfov_deg: float | None = None,
    camera_distance_m: float | None = None,
    response: str | Response | None = None,
    head_diameter_mm: float | None = None,
    camera: str | CameraProfile | None = None,
    dark=None,
    geometry=None,
    wall_points=None,
    target_scale: float = 1.0,
    assume_square: bool = False,
    light_name: str | None = None,
    lux_point_px: tuple[float, float] | None = None,
) -> BeamReport:
    """Analyse a beam photo (or a bracket of them) taken square to the wall; returns a :class:`BeamReport`.

    ``photo`` is a path or :class:`~beamshot.photo.Photo`, or a list of them (a bracket, merged
    into one linear image); ``ambient``/``flat``/``dark`` are paths or Photos.  ``camera`` is a
    camera profile (name, path or object; default: the uncalibrated sRGB profile).
    ``distance_m`` is the light-to-wall distance (m); the camera is assumed beside the
    light unless ``camera_distance_m`` (camera-to-wall, m) says otherwise.  ``lux_at_peak`` is
    a lux-meter reading on the wall, taken at the peak or, with ``lux_point_px`` = (x, y), at
    that pixel of the (first) beam photo.  ``light_name`` names the light in titles and reports.
    """
    # ---- validate options before any work
    if distance_m is None:
        raise BeamshotError("the light-to-wall distance is required (--distance, in metres)")
    _check_positive("distance", distance_m, MIN_DISTANCE_M, MAX_DISTANCE_M, " m",
                    "measure from the light's lens to the wall, in metres (e.g. --distance 5)")
    u_d = DEFAULT_DISTANCE_UNCERTAINTY_M if distance_uncertainty_m is None else distance_uncertainty_m
    if not np.isfinite(u_d) or u_d < 0 or u_d >= distance_m:
        raise BeamshotError(f"distance uncertainty {u_d:g} m must be at least 0 and smaller than the distance; "
                            "give how far off the tape measure may be, e.g. --distance-uncertainty 0.02")
    _check_positive("camera distance", camera_distance_m, MIN_DISTANCE_M, MAX_DISTANCE_M, " m",
                    "measure from the camera's lens to the wall, in metres")
    _check_positive("lux reading", lux_at_peak, None, 2e6, " lx",
                    "give the meter's reading in lux, taken on the wall at the hotspot (e.g. --lux-at-peak 412)")
    _check_positive("reflectance", reflectance, 0.05, 1.0, "",
                    "give the wall's reflectance as a fraction: about 0.85 for matte white paint (typical 0.8-0.9)")
    _check_positive("lux-meter accuracy", lux_meter_accuracy, None, 0.5, "",
                    "give the meter's specified accuracy, e.g. 5 (%)", shown=lambda v: f"{100 * v:g} %")
    _check_positive("35 mm focal length", focal_35mm, 5.0, 800.0, " mm",
                    "give the 35 mm-equivalent focal length in mm, e.g. 26 for a phone's main camera")
    _check_positive("horizontal field of view", hfov_deg, 1.0, 150.0, " deg",
                    "give the photo's horizontal view in degrees, e.g. 70")
    if focal_35mm is not None and hfov_deg is not None:
        raise BeamshotError("give either --focal-35mm or --hfov, not both")
    if lux_at_peak is not None and reflectance is not None:
        raise BeamshotError("--reflectance is only used without a lux reading; drop one of them")
    _check_positive("head diameter", head_diameter_mm, None, 2000.0, " mm",
                    "give the diameter of the light's head (bezel) in mm, e.g. 40")
    _check_positive("target scale", target_scale, 0.2, 5.0, "",
                    "measure the printed 100 mm scale bar with a ruler and give its length (e.g. 99.5 mm)",
                    shown=lambda v: f"{v:g} (scale bar {100 * v:g} mm of 100 mm)")
    if lux_point_px is not None:
        if lux_at_peak is None:
            raise BeamshotError("a metered point needs the lux reading taken there (--lux LX with --lux-at X,Y)")
        if len(lux_point_px) != 2 or not all(np.isfinite(v) for v in lux_point_px):
            raise BeamshotError("the metered point takes two pixel coordinates X,Y, e.g. 2016,1512")
    if geometry is not None and wall_points is not None:
        raise BeamshotError("give either --geometry or --wall-points, not both")
    profile = camera if isinstance(camera, CameraProfile) else load_profile(camera)
    if response is not None and profile.response.kind == "table":
        raise BeamshotError(f"camera profile '{profile.name}' has a measured response; drop --response")
    try:
        resp = parse_response(response) if isinstance(response, str) else (response or profile.response)
    except ValueError as exc:
        raise BeamshotError(str(exc)) from None

    prep = prepare_image(photo, ambient=ambient, flat=flat, dark=dark, profile=profile, resp=resp,
                         response_given=response is not None)
    image, beam_photos, beam_photo, inputs, resp = prep.image, prep.beam_photos, prep.beam_photo, prep.inputs, prep.resp
    warnings = list(prep.warnings)
    hdr_note, dark_note, amb_note, flat_note = prep.hdr_note, prep.dark_note, prep.ambient_note, prep.flat_note

    wall_points_used = None

    # ---- wall mapping: target markers, given points, or the pinhole model
    shape = beam_photo.shape
    geometry_note = None
    lens = None if profile.distortion is None else profile.distortion.for_shape(shape)
    # the focal length in pixels (camera profile's lens, option or EXIF; None if unknown), for the
    # natural fall-off of raw and linear photos, which it fixes (cos^4 law), and the shading term
    focal_shading = 0.5 * (lens.fx + lens.fy) if lens is not None else focal_for(beam_photo, focal_35mm, hfov_deg)[0]
    falloff_note = None
    if prep.resp.kind == "linear" and flat_note is None:
        if focal_shading is not None:
            image, falloff_note = _natural_falloff_removed(image, focal_shading), "natural cos^4 fall-off divided out"
        else:
            warnings.append("a linear photo keeps the lens's natural cos^4 fall-off, but no focal length is known to "
                            "remove it; give --focal-35mm, or a flat field")
    beam_markers = None
    mapping = None
    if geometry is not None:
        geo = same_size(load_input(geometry, "geometry"), beam_photos[0], "geometry photo",
                        "take it from the same tripod position with the same camera")
        inputs.append(input_record("geometry", geo))
        det = detect_markers(grey(geo), name=geo.name, target_scale=target_scale)
        beam_markers = markers_still_there(beam_photos[0], det, target_scale)
        mapping = marker_mapping(det, geo, focal_35mm, hfov_deg, "target markers in the geometry photo", warnings, lens)
        geometry_note = {"file": geo.name, "markers": list(det.ids), "target_scale": target_scale}
    elif wall_points is not None:
        img_pts, wall_pts = parse_wall_points(wall_points) if isinstance(wall_points, str) else wall_points
        if lens is not None:
            img_pts = lens.undistort(img_pts)
        mapping = homography_mapping(img_pts, wall_pts, method="wall points given by the user")
        geometry_note = {"points": len(img_pts)}
        wall_points_used = (np.asarray(img_pts, float), np.asarray(wall_pts, float))
    measured = None
    if mapping is None:
        f_px, f_u, f_src = focal_for(beam_photo, focal_35mm, hfov_deg)
        if lens is not None:
            f_px, f_src = 0.5 * (lens.fx + lens.fy), f"camera profile '{profile.name}' (calibrated camera matrix)"
        cam_d = distance_m if camera_distance_m is None else camera_distance_m
        if f_px is not None:
            mapping = _with_lens(pinhole_mapping(shape, f_px, cam_d, scale_uncertainty=f_u), lens)
        # the quick look for target markers left on the wall runs on the second core beside the
        # usual measurement with the pinhole mapping; if markers turn up, that measurement is dropped
        with ThreadPoolExecutor(max_workers=1) as pool:
            look = pool.submit(markers_left_in, beam_photos[0], image, target_scale)
            failure = None
            if mapping is not None:
                try:
                    measured = _measure_beam(image, mapping, distance_m, f_u, beam_photo.name,
                                             assume_square=assume_square, target_based=False)
                except BeamshotError as exc:
                    failure = exc
            beam_markers = look.result()
        if beam_markers is not None:
            mapping = marker_mapping(beam_markers, beam_photos[0], focal_35mm, hfov_deg,
                                     "target markers in the beam photo", warnings, lens)
            geometry_note = {"file": beam_photos[0].name, "markers": list(beam_markers.ids),
                             "target_scale": target_scale}
            measured = None
        elif failure is not None:
            raise failure
        elif mapping is None:
            raise BeamshotError(f"{beam_photo.name}: the photo's EXIF has no 35 mm-equivalent focal length; "
                                "give --focal-35mm (mm) or --hfov (degrees), or use the wall target (--geometry)")
    if geometry_note is not None:  # mapped from markers or given points
        mapping = _with_lens(mapping, lens)
        f_u = mapping.scale_uncertainty
        f_px, f_src = None, "not needed (homography)"
        cam_d = None
    if beam_markers is not None:
        image = mask_quads(image, beam_markers.quads)
        warnings.append(f"target markers found in {beam_photos[0].name} were masked out; remove the target "
                        "before the beam photos")
    if measured is None:
        measured = _measure_beam(image, mapping, distance_m, f_u, beam_photo.name, assume_square=assume_square,
                                 target_based=geometry_note is not None)
    axis, beam, shape_, pose = measured.axis, measured.beam, measured.shape, measured.pose
    warnings.extend(measured.warnings)
    pk = shape_.peak

    # ---- absolute scale
    if lux_at_peak is not None and lux_point_px is not None:
        value, noise = _metered_value(image, beam_photos[0], lux_point_px)
        scale = scale_from_lux_at_point(lux_at_peak, value, noise, tuple(lux_point_px),
                                        meter_accuracy=lux_meter_accuracy)
    elif lux_at_peak is not None:
        cos_inc = measured.cos_incidence(pk)
        scale = scale_from_lux_meter(lux_at_peak, pk.value, float(np.arccos(cos_inc)), distance_m,
                                     meter_accuracy=lux_meter_accuracy)
        if pk.clipped:
            warnings.append("the hotspot is clipped: the lux reading still gives the peak, but it scales the clipped "
                            "level, so the fluxes are upper bounds - lower the exposure, or meter a wall point that is "
                            "not clipped (--lux LX --lux-at X,Y)")
    elif profile.scale_constant is not None and reflectance is None:
        scale = scale_from_camera_constant(beam_photo.exif, profile.scale_constant,
                                           profile.scale_uncertainty or 0.0, profile.name)
    elif use_exif_scale:
        scale = scale_from_exposure(beam_photo.exif, reflectance=reflectance)
        if scale.kind == "none":
            scale = no_scale(scale.description.removeprefix("no absolute scale: ") +
                             "; give a lux reading (--lux) for absolute figures")
    else:
        scale = no_scale("no lux reading given and the exposure-metadata estimate is switched off")
    if lux_at_peak is not None and profile.scale_constant is not None and not (pk.clipped and lux_point_px is None):
        _check_constant_against_meter(scale, profile, beam_photo.exif, warnings)
    if scale.absolute:
        beam_out = beam.scaled(scale.lux_per_unit, "cd")
    else:
        beam_out = beam

    # ---- uncertainty: every known source, propagated by re-measuring (beamshot.uncertainty)
    ratio_delta, ratio_source = _ratio_error(prep, resp, profile)
    shading = _shading_plan(prep, flat_note)
    values = measured.values(scale, lux_at_peak)
    pixel_deg = _pixel_deg(measured)
    budget = build_budget(measured, values, scale=scale, lux_at_peak=lux_at_peak, distance_m=distance_m, distance_u_m=u_d,
                          camera_distance_m=camera_distance_m if geometry_note is None else None,
                          camera_beside=geometry_note is None and camera_distance_m is None,
                          wall_scale_u=f_u, wall_points=wall_points_used, ratio_delta=ratio_delta,
                          ratio_assumed=ratio_source == "assumed", shading=shading, focal_px=focal_shading,
                          pixel_deg=pixel_deg, block_deg=_block_deg(pixel_deg, image, beam_photos))
    keys = [k for k in values if k != "peak_rel" and not k.endswith("_rel")]
    estimates = budget.estimates(keys)
    if scale.kind == "exposure_metadata":
        estimates |= {"peak_intensity", "beam_distance", "hotspot_flux", "spill_flux", "beam_flux"}
    figures = beam_figures(shape_, beam, scale, values, budget.sigmas(keys), estimates,
                           axis_uncertainty_rad=axis.uncertainty_mm / (distance_m * 1000.0), pixel_deg=pixel_deg)
    figures = {k: (replace(f, budget=tuple(budget.of(k).items())) if f.value is not None and f.uncertainty else f)
               for k, f in figures.items()}
    figures["light_tilt"] = _tilt_figure(pose, assume_square, shape_.edge)
    cal_u = ratio_delta
    if shading["kind"] == "envelope":
        warnings.append("no flat field: lens shading may be left in the photo, and its possible effect is carried "
                        "in the uncertainties; shoot a flat field (beamshot camera flat), turn the camera between two "
                        "beam photos (beamshot camera flat-from-turns), or use a camera profile that has one")
    if ratio_source == "assumed":
        warnings.append(f"the tone curve ({resp.describe()}) is assumed, not measured; its possible error is carried in "
                        "the uncertainties - calibrate the camera's response (beamshot camera response), or give "
                        "a bracket (several exposures of the beam on one analyze command line)")

    # ---- warnings a user should act on
    if pk.clipped:
        warnings.append("the hotspot is clipped: peak, hotspot and field figures are bounds or not measured; "
                        "lower the exposure or bracket")
    with np.errstate(invalid="ignore"):
        peak_level = float(np.nanmax(image.luminance))
    if not pk.clipped and peak_level < _LOW_EXPOSURE_LEVEL:
        warnings.append(f"the brightest point is only {peak_level:.0%} of full scale; a longer exposure gives less noise")
    if not shape_.edge.complete:
        warnings.append(figures["spill_angle"].reason)
    if ambient is None:
        outside = _outside_level(beam, shape_)
        if outside is not None and outside > 0.002 * pk.value:
            warnings.append(f"the wall outside the beam is at {outside / pk.value:.1%} of the peak; "
                            "room light adds to every figure - darken the room or give a light-off photo (--ambient)")
    if not pk.clipped and np.degrees(pk.theta) > 3.0:
        warnings.append(f"the hotspot is {np.degrees(pk.theta):.1f} deg off the spill centre")
    if head_diameter_mm is not None and distance_m * 1000.0 < FAR_FIELD_FACTOR * head_diameter_mm:
        warnings.append(f"the wall is closer than {FAR_FIELD_FACTOR:g}x the head diameter; the inverse-square "
                        "law may not hold yet (IES five-times rule) - measure farther away")
    if scale.kind == "exposure_metadata":
        warnings.append("absolute figures are an estimate from exposure metadata "
                        f"(±{scale.rel_uncertainty:.0%}); a lux-meter reading (--lux-at-peak) is far better")

    settings = {
        "light_name": light_name,
        "distance_m": distance_m,
        "distance_uncertainty_m": u_d,
        "camera_distance_m": cam_d,
        "camera_position": ("anywhere (wall mapped by homography)" if geometry_note is not None else
                            "beside the light, square to the wall" if camera_distance_m is None else "square to the wall"),
        "focal_length": f_src,
        "focal_px": f_px,
        "focal_relative_uncertainty": f_u,
        "response": resp.describe(),
        "lux_at_peak": lux_at_peak,
        "lux_point_px": None if lux_point_px is None else [float(v) for v in lux_point_px],
        "reflectance": reflectance,
        "use_exif_scale": use_exif_scale,
        "head_diameter_mm": head_diameter_mm,
        "working_bin_factor": image.bin_factor,
        "theta_step_deg": float(np.degrees(beam.d_theta)),
        "phi_step_deg": float(np.degrees(beam.d_phi)),
    }
    calibration = {
        "camera_profile": {"name": profile.name, "calibrated": profile.calibrated,
                           "provenance": list(profile.provenance)},
        "response_quality": profile.response_quality,
        "hdr_merge": hdr_note or "single photo",
        "calibration_relative_uncertainty": cal_u,
        "dark_frame": dark_note or "none",
        "response": resp.describe(),
        "response_source": ratio_source,
        "flat_field": flat_note or falloff_note or "none: lens shading not corrected; its possible effect is in the "
                                                   "uncertainties",
        "uncertainty_terms": [t.to_dict() for t in budget.terms],
        "ambient": amb_note or "none: no light-off photo subtracted",
        "absolute_scale": scale.to_dict(),
        "wall_mapping": {"method": mapping.method if mapping.method != "pinhole" else
                         "pinhole camera square to the wall", "focal_px": f_px,
                         "relative_scale_uncertainty": f_u, "geometry": geometry_note},
    }
    beam_axis = {
        "light_foot_mm": list(pose.foot_mm) if pose is not None and pose.significant else list(axis.centre_mm),
        "centre_mm": list(axis.centre_mm),
        "uncertainty_mm": axis.uncertainty_mm,
        "method": axis.method,
        "spill_ellipse_axes_mm": list(axis.ellipse_axes_mm) if axis.ellipse_axes_mm else None,
        "peak_direction_deg": {"theta": float(np.degrees(pk.theta)), "phi": float(np.degrees(pk.phi))},
        "light_tilt_components": None if pose is None else {
            "yaw_deg": pose.yaw_deg, "pitch_deg": pose.pitch_deg,
            "covariance_deg2": [[float(x) for x in row] for row in pose.cov_deg2], "chi2": pose.chi2,
            "applied": bool(pose.significant)},
    }
    return BeamReport(
        figures=figures,
        inputs=inputs,
        settings=settings,
        calibration=calibration,
        beam_axis=beam_axis,
        warnings=warnings,
        profile=radial_profile(beam_out),
        beam=beam_out,
        contours={"hotspot": shape_.hotspot, "field": shape_.field, "edge": shape_.edge, "peak": pk},
        created_utc=_dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
        tool_version=__version__,
    )


def _check_constant_against_meter(scale, profile, exif, warnings: list[str]) -> None:
    """Warn when a lux reading and the profile's kept camera constant disagree by more than twice
    their combined standard uncertainty (k = 2, about 95 %; JCGM 100 sec. 6)."""
    kept = scale_from_camera_constant(exif, profile.scale_constant, profile.scale_uncertainty or 0.0, profile.name)
    if not kept.absolute:
        return
    ratio = scale.lux_per_unit / kept.lux_per_unit
    combined = float(np.hypot(scale.rel_uncertainty or 0.0, kept.rel_uncertainty or 0.0))
    if combined > 0 and abs(np.log(ratio)) > 2 * combined:
        warnings.append(f"the lux reading gives a scale {ratio - 1:+.0%} from the camera constant kept in profile "
                        f"'{profile.name}' (more than twice their combined uncertainty of {combined:.1%}); the reading "
                        "is used - check the meter and where it was held, or re-measure the constant (camera scale)")


#: Half-width (working pixels) of the patch averaged around a metered point: about a lux meter's
#: sensor on a typical photo (common practice: the meter's window is 1-2 cm across).
_METER_PATCH_HALF = 2


def _metered_value(image: LinearImage, photo, xy) -> tuple[float, float]:
    """Linear value and its relative 1-sigma noise at pixel ``xy`` = (x, y) of the photo (as shown, y down)."""
    x, y = float(xy[0]), float(xy[1])
    full_h, full_w = image.full_shape
    if not (0 <= x < full_w and 0 <= y < full_h):
        raise BeamshotError(f"the metered point ({x:g}, {y:g}) is outside {photo.name} ({full_w}x{full_h} pixels); "
                            "give X,Y in pixels of the photo as shown, x right and y down from the top-left corner")
    b = image.bin_factor
    r, c = int(y // b), int(x // b)
    h = _METER_PATCH_HALF
    rows = slice(max(r - h, 0), r + h + 1)
    cols = slice(max(c - h, 0), c + h + 1)
    if np.any(image.saturated[rows, cols]):
        raise BeamshotError(f"the metered point ({x:g}, {y:g}) is clipped in {photo.name}; meter a point that is not "
                            "overexposed, or lower the exposure")
    patch = image.luminance[rows, cols].astype(float)
    patch = patch[np.isfinite(patch)]
    value = float(np.mean(patch)) if patch.size else float("nan")
    noise = float(np.std(patch) / np.sqrt(patch.size)) if patch.size > 1 else float("nan")
    if not (value > 0 and np.isfinite(noise)) or noise > 0.2 * value:
        raise BeamshotError(f"the metered point ({x:g}, {y:g}) is too dark in {photo.name} to scale the photo; meter "
                            "a brighter point of the beam, such as the hotspot (--lux-at-peak)")
    return value, noise / value


def _with_lens(mapping, lens):
    """The mapping with the camera profile's lens distortion attached (pixels are undistorted first)."""
    if lens is None:
        return mapping
    return replace(mapping, distortion=lens, method=mapping.method + "; lens distortion corrected")


def _beam_map(image: LinearImage, mapping, foot_mm, distance_m: float, **kw):
    """The intensity map (beammap.py) with the black floor of clipped noise removed (floor.py)."""
    return floor_corrected(build_beam_map(image, mapping, foot_mm, distance_m, **kw), bin_factor=image.bin_factor)[0]


@dataclass(frozen=True)
class _Measured:
    """What the wall-to-intensity chain gives: beam axis, intensity map, its shape, light pose, and
    what it was built from (so that it can be re-measured with one input moved)."""

    axis: object
    beam: object
    shape: object
    pose: object
    warnings: list
    image: LinearImage
    mapping: object
    distance_m: float
    foot_mm: tuple
    axis_dir: object

    def cos_incidence(self, peak) -> float:
        """Cosine of the angle between the ray to the peak's wall point and the wall's normal."""
        w = beam_to_wall(peak.vector, self.axis_dir)
        return float(w[2] / np.linalg.norm(w))

    def remeasure(self, *, image=None, mapping=None, distance_m=None, tone: float = 0.0):
        """Shape of the map rebuilt with any of the inputs replaced, and optionally a tone error."""
        beam = _beam_map(self.image if image is None else image, self.mapping if mapping is None else mapping,
                              self.foot_mm, self.distance_m if distance_m is None else distance_m,
                              axis_dir=self.axis_dir)
        if tone:
            beam = tone_bent(beam, self.shape.peak.value, tone)
        return measure_shape(beam, boundary_noise=False)

    def values(self, scale, lux_at_peak, shape=None, distance_m=None) -> dict:
        """Scale-free and absolute values of a shape (default: this one)."""
        shape = self.shape if shape is None else shape
        d = self.distance_m if distance_m is None else distance_m
        rel = shape_values(shape)
        k = scale_factor(scale, rel["peak_rel"], self.cos_incidence(shape.peak), d, lux_at_peak)
        return absolute_values(rel, k)


def _measure_beam(image: LinearImage, mapping, distance_m: float, f_u: float, name: str, *,
                  assume_square: bool, target_based: bool) -> _Measured:
    """Beam axis -> intensity map -> shape, then the light's tilt: a cone fitted to the spill edge,
    re-fitted on the re-mapped edge, and applied to the map if significant."""
    warnings = []
    axis = find_beam_axis(image.luminance, mapping, image.bin_factor, name=name)
    if axis.ellipse_axes_mm is None:
        warnings.append("the spill edge is not visible enough to centre on; the beam axis is the hotspot centre")
    beam = _beam_map(image, mapping, axis.centre_mm, distance_m)
    shape_ = measure_shape(beam)
    pose = None
    if assume_square is False and shape_.edge.complete and shape_.edge.sharp_fraction >= TILT_MIN_SHARP_FRACTION:
        edge = shape_.edge
        pts = edge_to_wall(edge.theta, edge.phi, axis.centre_mm, None, distance_m)
        peak_mm = tuple(edge_to_wall(np.array([shape_.peak.theta]), np.array([shape_.peak.phi]), axis.centre_mm,
                                     None, distance_m)[0])
        # a square pinhole view scales both wall axes alike; a homography from a target may not
        aniso = mapping.scale_uncertainty if target_based else 0.0
        pose = fit_light_pose(pts, distance_m, axis.centre_mm, peak_mm, anisotropy=aniso)
        rebuilt = False
        for _ in range(2):
            if pose is None or not pose.significant:
                break
            rebuilt = True
            beam = _beam_map(image, mapping, pose.foot_mm, distance_m, axis_dir=pose.axis)
            shape_ = measure_shape(beam)
            if not shape_.edge.complete:
                break
            pts = edge_to_wall(shape_.edge.theta, shape_.edge.phi, pose.foot_mm, pose.axis, distance_m)
            peak_mm = tuple(edge_to_wall(np.array([shape_.peak.theta]), np.array([shape_.peak.phi]), pose.foot_mm,
                                         pose.axis, distance_m)[0])
            pose = fit_light_pose(pts, distance_m, tuple(np.mean(pts, axis=0)), peak_mm, anisotropy=aniso)
        if pose is not None and pose.significant:
            beam = _beam_map(image, mapping, pose.foot_mm, distance_m, axis_dir=pose.axis)
            shape_ = measure_shape(beam)
        elif rebuilt:
            beam = _beam_map(image, mapping, axis.centre_mm, distance_m)
            shape_ = measure_shape(beam)
        if pose is not None and pose.significant and pose.tilt_deg > TILT_WARN_DEG:
            warnings.append(f"the light is tilted {pose.tilt_deg:.1f} deg against the wall's normal; the "
                            "figures are corrected for it, but aim the light square to the wall for best results")
    applied = pose is not None and pose.significant
    return _Measured(axis, beam, shape_, pose, warnings, image, mapping, distance_m,
                     tuple(pose.foot_mm) if applied else tuple(axis.centre_mm), pose.axis if applied else None)


def _tilt_figure(pose, assume_square: bool, edge=None):
    from .figure import Figure, not_measured

    method = ("right circular cone fitted to the spill edge (least squares on angular residuals); "
              "applied to the map when yaw and pitch are jointly significant (chi-square, 2 degrees of freedom, "
              "99.73 %) and the tilt exceeds 1.5 deg")
    if assume_square:
        return not_measured("deg", method, "the light was declared square to the wall (--square)")
    if pose is None:
        if edge is not None and edge.complete:
            return not_measured("deg", method, "the spill has no sharp cut-off all around to fit (a smooth or "
                                "out-of-round beam); the light is assumed square to the wall")
        return not_measured("deg", method, "the spill edge is not complete in the photo")
    comps = (f"yaw {pose.yaw_deg:+.1f} ± {np.sqrt(pose.cov_deg2[0, 0]):.1f} deg (right), pitch {pose.pitch_deg:+.1f} "
             f"± {np.sqrt(pose.cov_deg2[1, 1]):.1f} deg (up); chi-square {pose.chi2:.1f} against "
             f"{TILT_SIGNIFICANCE_CHI2:.1f} for significance")
    if pose.significant:
        return Figure(pose.tilt_unbiased_deg, pose.tilt_sigma_deg, "deg",
                      method + f"; toward {pose.tilt_direction_deg:.0f} deg (0 = right, 90 = up); {comps}; applied")
    if pose.large and pose.peak_miss_deg is not None:
        verdict = (f"not applied: the fitted axis misses the hotspot by {pose.peak_miss_deg:.1f} deg, so the "
                   "spill is out of round rather than tilted")
    else:
        verdict = "not significant, not applied"
    return Figure(pose.tilt_bound_deg, None, "deg", method + f"; {comps}; {verdict}", "upper_bound",
                  "the tilt is not distinguishable from zero; the value is an upper bound (about 95 %)"
                  if not pose.large else "the spill is out of round; the value is an upper bound on a tilt")


def _outside_level(beam, shape) -> float | None:
    """Median relative intensity beyond the spill edge (None if the edge is not complete)."""
    edge = shape.edge
    if not edge.complete:
        return None
    out = (beam.theta[:, None] > edge.at(beam.phi)[None, :] + np.radians(3.0)) & beam.valid
    if out.sum() < 50:
        return None
    return float(np.median(beam.intensity[out]))


def _natural_falloff_removed(image: LinearImage, focal_px: float) -> LinearImage:
    """Divide out natural vignetting, cos^4 of the field angle (tan = r / f; the cos^4 law, as in ISO 12232's q)."""
    gain = shading_gain(image.shape, image.bin_factor, image.full_shape, focal_px, natural=True, corner_depth=0.0)
    return image.divided_by(gain)


def _ratio_error(prep, resp, profile) -> tuple[float, str]:
    """Relative error of intensity ratios left by the linearisation, and where it comes from."""
    source = getattr(prep, "response_source", None)
    lin = getattr(prep, "linearity_rel", None)
    if source is None:  # until prepare reports it: infer
        source = ("linear (raw or linear file)" if resp.kind == "linear" else
                  "camera profile" if resp.kind == "table" else "assumed")
    terms = []
    if lin is not None:
        terms.append(float(lin))
    if source == "camera profile" and profile.response_quality:
        terms.append(float(profile.response_quality.get("consistency_rms", 0.0)))
    if source == "assumed" and lin is None:
        return float(ASSUMED_RESPONSE_EXPONENT_SIGMA * np.log(RATIO_SPAN)), "assumed"
    return float(np.sqrt(np.sum(np.square(terms)))) if terms else 0.0, source


def _shading_plan(prep, flat_note) -> dict:
    """How lens shading enters the uncertainty: a flat's residual, or the envelope of what may be left in."""
    if isinstance(flat_note, dict):
        res = float(flat_note.get("residual_rms", 0.0) or 0.0)
        # a flat whose data stopped short of the corner is extrapolated there: add the envelope's
        # depth in proportion to the radius not covered (project choice)
        reach = float(flat_note.get("data_to_radius", 1.0) or 1.0)
        depth = 2.0 * res + SHADING_CORNER_ENVELOPE * max(0.0, 1.0 - reach)
        return {"kind": "flat", "natural": False, "corner_depth": depth, "factor": 1.0,
                "acts": ("a residual shading of twice the flat fit's RMS residual at the corner (plus the envelope "
                         "in proportion to the radius the flat's data did not reach), divided out"),
                "size": f"{depth:.2%} at the corner"}
    linear = prep.resp.kind == "linear"
    return {"kind": "envelope", "natural": not linear, "corner_depth": SHADING_CORNER_ENVELOPE,
            "factor": 1.0 / np.sqrt(3.0),
            "acts": ("the change when the envelope of uncorrected shading is divided out, over sqrt(3): the RMS "
                     "of an uncorrected error spread evenly between none and all of it (GUM 4.3.7)"),
            "size": (f"{SHADING_CORNER_ENVELOPE:.0%} lens shading at the corner beyond cos^4" if linear else
                     f"cos^4 fall-off plus {SHADING_CORNER_ENVELOPE:.0%} at the corner")}


#: JPEG codes 8x8 blocks of luma (ITU-T T.81, sec. A.2): errors are correlated within a block.
JPEG_BLOCK_PX = 8


def _block_deg(pixel_deg: float, image: LinearImage, photos) -> float:
    """The angle over which the photo's errors are correlated: a JPEG block or a working pixel."""
    if any(p.max_code == 255 and not p.linear for p in photos):  # 8-bit encoded: JPEG (or PNG, conservatively)
        return max(pixel_deg, pixel_deg * JPEG_BLOCK_PX / image.bin_factor)
    return pixel_deg


def _pixel_deg(measured) -> float:
    """Angular size (deg) of one working pixel on the wall at the beam's foot, seen from the light."""
    foot = np.asarray(measured.foot_mm, float)
    px = measured.mapping.wall_to_image(foot[None, :])[0]
    step = measured.image.bin_factor
    mm = measured.mapping.image_to_wall(np.array([px + (step, 0.0), px + (0.0, step)]))
    d = np.linalg.norm(mm - foot[None, :], axis=1)
    if not np.all(np.isfinite(d)):
        return 0.0
    return float(np.degrees(np.mean(d) / (measured.distance_m * 1000.0)))
