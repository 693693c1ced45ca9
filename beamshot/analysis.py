"""The analysis as named stages, from a :class:`~beamshot.request.Request` to a BeamReport.

load (beam photos, camera profile) -> linear image (response, dark, bracket, ambient, flat field:
prepare.py) -> wall mapping (pinhole, target markers or given points: wall_setup.py) -> beam map
(axis, I = E D^2 / cos^3 theta, shape: peak, contours, spill edge, zone flux; the light's tilt)
-> scale (lux reading, camera constant or exposure metadata) -> uncertainty (uncertainty.py)
-> figures (measure.py) -> report.  Each stage takes and returns plain data; :func:`run` times them.
"""

from __future__ import annotations

import datetime as _dt
import time
from concurrent.futures import ThreadPoolExecutor
from contextlib import contextmanager
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
from .figure import not_measured
from .measure import _clipped_edge_reason, beam_figures, measure_shape
from .prepare import PreparedImage, input_record, load_input, prepare_image, same_size
from .request import DEFAULT_DISTANCE_UNCERTAINTY_M, MAX_DISTANCE_M, MIN_DISTANCE_M, Request
from .profile import radial_profile
from .report.model import BeamReport
from .scale import (AbsoluteScale, no_scale, scale_from_camera_constant, scale_from_exposure, scale_from_lux_at_point,
                    scale_from_lux_meter)
from .target import detect_markers
from .wall import homography_mapping, parse_wall_points, pinhole_mapping
from .wall_setup import focal_for, grey, markers_left_in, markers_still_there, marker_mapping, mask_quads
from .floor import floor_corrected
from .frames import beam_to_wall
from .measure import shape_values
from .uncertainty import (ASSUMED_RESPONSE_EXPONENT_SIGMA, RATIO_SPAN, SHADING_CORNER_ENVELOPE, absolute_values,
                          build_budget, scale_factor, shading_gain, tone_bent)

__all__ = ["analyze", "run", "STAGES", "DEFAULT_DISTANCE_UNCERTAINTY_M", "MIN_DISTANCE_M", "MAX_DISTANCE_M"]

#: IES five-times rule: the inverse-square law is within 1 % at 5x the source's largest dimension.
FAR_FIELD_FACTOR = 5.0
#: The tilt is fitted only to a bezel cut-off seen in at least this fraction of directions (a
#: threshold contour of a smooth beam follows the beam's shape, not the light's aim).
TILT_MIN_SHARP_FRACTION = 0.9
#: A peak below this linear level (of clipping) is noisy; suggest a longer exposure.
_LOW_EXPOSURE_LEVEL = 0.15
#: The stages of an analysis, in order; each one's time is recorded in the report (``stage_seconds``).
STAGES = ("load", "linear image", "wall mapping", "beam map", "scale", "uncertainty", "figures", "shape", "colour", "report")
#: Whether colour across the beam is measured by default (beamshot.colour; see docs/colour.md for its cost).
COLOUR_BY_DEFAULT = False


def analyze(photo, *, distance_m: float, distance_uncertainty_m: float | None = None, ambient=None, flat=None,
            lux_at_peak: float | None = None, lux_meter_accuracy: float | None = None,
            reflectance: float | None = None, use_exif_scale: bool = True, focal_35mm: float | None = None,
            hfov_deg: float | None = None, camera_distance_m: float | None = None,
            response: str | Response | None = None, head_diameter_mm: float | None = None,
            camera: str | CameraProfile | None = None, dark=None, geometry=None, wall_points=None,
            target_scale: float = 1.0, assume_square: bool = False, light_name: str | None = None,
            lux_point_px: tuple[float, float] | None = None, colour: bool | None = None) -> BeamReport:
    """Analyse a beam photo (or a bracket of them); returns a :class:`BeamReport`.

    ``photo`` is a path or :class:`~beamshot.photo.Photo`, or a list of them (a bracket, merged
    into one linear image); ``ambient``/``flat``/``dark`` are paths or Photos.  ``camera`` is a
    camera profile (name, path or object; default: the uncalibrated sRGB profile).
    ``distance_m`` is the light-to-wall distance (m); the camera is assumed beside the
    light unless ``camera_distance_m`` (camera-to-wall, m) says otherwise.  ``lux_at_peak`` is
    a lux-meter reading on the wall, taken at the peak or, with ``lux_point_px`` = (x, y), at
    that pixel of the (first) beam photo.  ``light_name`` names the light in titles and reports.
    ``colour`` measures colour across the beam (default :data:`COLOUR_BY_DEFAULT`).
    The keywords build a :class:`~beamshot.request.Request` run by :func:`run`.
    """
    return run(Request.from_options(
        photo, distance_m=distance_m, distance_uncertainty_m=distance_uncertainty_m, ambient=ambient, flat=flat,
        lux_at_peak=lux_at_peak, lux_meter_accuracy=lux_meter_accuracy, reflectance=reflectance,
        use_exif_scale=use_exif_scale, focal_35mm=focal_35mm, hfov_deg=hfov_deg, camera_distance_m=camera_distance_m,
        response=response, head_diameter_mm=head_diameter_mm, camera=camera, dark=dark, geometry=geometry,
        wall_points=wall_points, target_scale=target_scale, assume_square=assume_square, light_name=light_name,
        lux_point_px=lux_point_px), colour=colour)


#: Stages run with BLAS on one thread (beamshot.threads.one_blas_thread): their small matrix products
#: give the same numbers on any number of threads, and spare threads only spin.
ONE_BLAS_THREAD_STAGES = ("wall mapping", "beam map", "scale", "uncertainty", "figures", "shape", "colour")


class _StageClock:
    """Wall-clock seconds spent in each named stage (and BLAS on one thread where it gains nothing)."""

    def __init__(self):
        self.seconds: dict[str, float] = {}

    @contextmanager
    def __call__(self, name: str):
        from .threads import one_blas_thread

        t0 = time.perf_counter()
        try:
            if name in ONE_BLAS_THREAD_STAGES:
                with one_blas_thread():
                    yield
            else:
                yield
        finally:
            self.seconds[name] = round(time.perf_counter() - t0, 4)


def run(request: Request, *, colour: bool | None = None) -> BeamReport:
    """The analysis as a sequence of named stages (``STAGES``), each taking and returning plain data.
    ``colour`` switches the colour stage (default :data:`COLOUR_BY_DEFAULT`)."""
    req = request.validated()
    clock = _StageClock()
    with clock("load"):
        loaded = load(req)
    with clock("linear image"):
        linear = linear_image(req, loaded)
    with clock("wall mapping"):
        mapped = wall_mapping(req, loaded, linear)
    with clock("beam map"):
        mapped, measured = beam_map(req, loaded, linear, mapped)
    with clock("scale"):
        scaled = absolute_scale(req, loaded, linear, mapped, measured)
    with clock("uncertainty"):
        unc = uncertainty(req, loaded, linear, mapped, measured, scaled)
    with clock("figures"):
        figures = figures_of(req, measured, scaled, unc)
    with clock("shape"):
        shape = shape_of(req, linear, mapped, measured, unc, figures)
    colour_result = None
    if COLOUR_BY_DEFAULT if colour is None else colour:
        with clock("colour"):
            colour_result = colour_of(req, loaded, linear, mapped, measured, figures)
    with clock("report"):
        report = assemble(req, loaded, linear, mapped, measured, scaled, unc, figures)
    if colour_result is not None:
        report = replace(report, colour=colour_result.to_dict(), colour_result=colour_result,
                         warnings=list(report.warnings) + colour_warnings(colour_result))
    return replace(report, shape_figures=shape, stage_seconds=dict(clock.seconds))


# ---- stage 1: load the beam photo(s) and the camera profile ------------------------------------

@dataclass(frozen=True)
class Loaded:
    profile: CameraProfile
    resp: Response
    response_given: bool
    beam: list


def load(req: Request) -> Loaded:
    """The camera profile, the tone curve to use, and the beam photo(s) decoded."""
    cal = req.calibration
    profile = cal.camera if isinstance(cal.camera, CameraProfile) else load_profile(cal.camera)
    if cal.response is not None and profile.response.kind == "table":
        raise BeamshotError(f"camera profile '{profile.name}' has a measured response; drop --response")
    try:
        resp = parse_response(cal.response) if isinstance(cal.response, str) else (cal.response or profile.response)
    except ValueError as exc:
        raise BeamshotError(str(exc)) from None
    return Loaded(profile, resp, cal.response is not None, [load_input(p, "photo") for p in req.photos.beam])


# ---- stage 2: the linear working image (prepare.py), with raw photos' natural fall-off removed ----

@dataclass(frozen=True)
class Linear:
    prep: PreparedImage
    image: LinearImage
    lens: object
    focal_shading: float | None
    falloff_note: str | None
    warnings: list


def linear_image(req: Request, loaded: Loaded) -> Linear:
    """Linearise, subtract dark and ambient, merge a bracket, divide by the flat (prepare.py); for a
    raw or linear photo without a flat, divide out the natural cos^4 fall-off (the cos^4 law)."""
    ph = req.photos
    prep = prepare_image(loaded.beam, ambient=ph.ambient, flat=ph.flat, dark=ph.dark, profile=loaded.profile,
                         resp=loaded.resp, response_given=loaded.response_given)
    warnings = list(prep.warnings)
    profile, g = loaded.profile, req.geometry
    lens = None if profile.distortion is None else profile.distortion.for_shape(prep.beam_photo.shape)
    # the focal length in pixels (camera profile's lens, option or EXIF; None if unknown), for the
    # natural fall-off of raw and linear photos, which it fixes (cos^4 law), and the shading term
    focal_shading = (0.5 * (lens.fx + lens.fy) if lens is not None else
                     focal_for(prep.beam_photo, g.focal_35mm, g.hfov_deg)[0])
    image, falloff_note = prep.image, None
    if prep.resp.kind == "linear" and prep.flat_note is None:
        if focal_shading is not None:
            image, falloff_note = _natural_falloff_removed(image, focal_shading), "natural cos^4 fall-off divided out"
        else:
            warnings.append("a linear photo keeps the lens's natural cos^4 fall-off, but no focal length is known to "
                            "remove it; give --focal-35mm, or a flat field")
    return Linear(prep, image, lens, focal_shading, falloff_note, warnings)


# ---- stage 3: the wall mapping: printed target, given points, or a pinhole camera -----------------

@dataclass(frozen=True)
class Mapped:
    mapping: object
    image: LinearImage
    geometry_note: dict | None
    f_px: float | None
    f_u: float
    f_src: str
    cam_d: float | None
    wall_points_used: tuple | None
    beam_markers: object
    inputs: list
    warnings: list
    #: the quick look for target markers left on the wall (pinhole mapping only), still running
    marker_look: object = None


def wall_mapping(req: Request, loaded: Loaded, linear: Linear) -> Mapped:
    """Image pixels to wall millimetres.  With neither a target photo nor points, a pinhole camera
    square to the wall, while a look for target markers left on the wall runs on the second core."""
    g, s = req.geometry, req.setup
    beam0, lens = loaded.beam[0], linear.lens
    beam_photo = linear.prep.beam_photo
    warnings: list[str] = []
    inputs: list = []
    image = linear.image
    if g.geometry_photo is not None:
        geo = same_size(load_input(g.geometry_photo, "geometry"), beam0, "geometry photo",
                        "take it from the same tripod position with the same camera")
        inputs.append(input_record("geometry", geo))
        det = detect_markers(grey(geo), name=geo.name, target_scale=g.target_scale)
        beam_markers = markers_still_there(beam0, det, g.target_scale)
        mapping = marker_mapping(det, geo, g.focal_35mm, g.hfov_deg, "target markers in the geometry photo",
                                 warnings, lens)
        note = {"file": geo.name, "markers": list(det.ids), "target_scale": g.target_scale}
        return _homography_mapped(mapping, image, note, None, beam_markers, inputs, warnings, lens, beam0.name)
    if g.wall_points is not None:
        img_pts, wall_pts = parse_wall_points(g.wall_points) if isinstance(g.wall_points, str) else g.wall_points
        if lens is not None:
            img_pts = lens.undistort(img_pts)
        mapping = homography_mapping(img_pts, wall_pts, method="wall points given by the user")
        used = (np.asarray(img_pts, float), np.asarray(wall_pts, float))
        return _homography_mapped(mapping, image, {"points": len(img_pts)}, used, None, inputs, warnings, lens,
                                  beam0.name)
    f_px, f_u, f_src = focal_for(beam_photo, g.focal_35mm, g.hfov_deg)
    if lens is not None:
        f_px, f_src = 0.5 * (lens.fx + lens.fy), f"camera profile '{loaded.profile.name}' (calibrated camera matrix)"
    cam_d = s.distance_m if s.camera_distance_m is None else s.camera_distance_m
    mapping = None
    if f_px is not None:
        mapping = _with_lens(pinhole_mapping(beam_photo.shape, f_px, cam_d, scale_uncertainty=f_u), lens)
    pool = ThreadPoolExecutor(max_workers=1)
    look = pool.submit(markers_left_in, beam0, image, g.target_scale)
    pool.shutdown(wait=False)
    return Mapped(mapping, image, None, f_px, f_u, f_src, cam_d, None, None, inputs, warnings, look)


def _homography_mapped(mapping, image, note, points_used, beam_markers, inputs, warnings, lens, name) -> Mapped:
    """A mapping from markers or points: the focal length is not needed, the wall scale is the fit's."""
    mapping = _with_lens(mapping, lens)
    if beam_markers is not None:
        image = mask_quads(image, beam_markers.quads)
        warnings.append(f"target markers found in {name} were masked out; remove the target before the beam photos")
    return Mapped(mapping, image, note, None, mapping.scale_uncertainty, "not needed (homography)", None,
                  points_used, beam_markers, inputs, warnings)


# ---- stage 4: beam axis -> intensity map -> shape, and the light's tilt --------------------------

def beam_map(req: Request, loaded: Loaded, linear: Linear, mapped: Mapped) -> tuple[Mapped, "_Measured"]:
    """The measured beam (axis, map, shape, pose).  On the pinhole path, target markers found on
    the wall by the quick look replace the pinhole mapping, and the beam is measured again."""
    s, g = req.setup, req.geometry
    name = loaded.beam[0].name
    if mapped.marker_look is None:
        return mapped, _measure_beam(mapped.image, mapped.mapping, s.distance_m, mapped.f_u, name,
                                     assume_square=s.assume_square, target_based=True)
    measured, failure = None, None
    if mapped.mapping is not None:
        try:
            measured = _measure_beam(mapped.image, mapped.mapping, s.distance_m, mapped.f_u, name,
                                     assume_square=s.assume_square, target_based=False)
        except BeamshotError as exc:
            failure = exc
    markers = mapped.marker_look.result()
    if markers is not None:
        warnings = list(mapped.warnings)
        mapping = marker_mapping(markers, loaded.beam[0], g.focal_35mm, g.hfov_deg, "target markers in the beam photo",
                                 warnings, linear.lens)
        note = {"file": name, "markers": list(markers.ids), "target_scale": g.target_scale}
        remapped = _homography_mapped(mapping, mapped.image, note, None, markers, mapped.inputs, warnings,
                                      linear.lens, name)
        return remapped, _measure_beam(remapped.image, remapped.mapping, s.distance_m, remapped.f_u, name,
                                       assume_square=s.assume_square, target_based=True)
    if failure is not None:
        raise failure
    if mapped.mapping is None:
        raise BeamshotError(f"{name}: the photo's EXIF has no 35 mm-equivalent focal length; give --focal-35mm (mm) "
                            "or --hfov (degrees), or use the wall target (--geometry)")
    return replace(mapped, marker_look=None), measured


# ---- stage 5: the absolute scale ----------------------------------------------------------------

@dataclass(frozen=True)
class Scaled:
    scale: AbsoluteScale
    beam: object
    warnings: list


def absolute_scale(req: Request, loaded: Loaded, linear: Linear, mapped: Mapped, measured: "_Measured") -> Scaled:
    """Lux per linear unit, in order of preference: a lux reading (at the peak or a stated pixel),
    the profile's kept camera constant, the exposure metadata (an estimate); else relative figures."""
    s, profile = req.setup, loaded.profile
    pk = measured.shape.peak
    exif = linear.prep.beam_photo.exif  # the photo the linear image is expressed in (a bracket's reference)
    warnings: list[str] = []
    lux = s.lux_reading_lx
    if lux is not None and s.lux_point_px is not None:
        value, noise, grad_px = _metered_value(mapped.image, loaded.beam[0], s.lux_point_px)
        scale = scale_from_lux_at_point(lux, value, noise, tuple(s.lux_point_px), meter_accuracy=s.lux_meter_accuracy,
                                        extra=_point_terms(linear, loaded, mapped, s.lux_point_px, value, grad_px))
    elif lux is not None:
        cos_inc = measured.cos_incidence(pk)
        scale = scale_from_lux_meter(lux, pk.value, float(np.arccos(cos_inc)), s.distance_m,
                                     meter_accuracy=s.lux_meter_accuracy)
        if pk.clipped:
            warnings.append("the hotspot is clipped: the lux reading still gives the peak, but it scales the clipped "
                            "level, so the fluxes are upper bounds - lower the exposure, or meter a wall point that is "
                            "not clipped (--lux LX --lux-at X,Y)")
    elif profile.scale_constant is not None and s.reflectance is None:
        scale = scale_from_camera_constant(exif, profile.scale_constant, profile.scale_uncertainty or 0.0, profile.name)
    elif s.use_exif_scale:
        scale = scale_from_exposure(exif, reflectance=s.reflectance)
        if scale.kind == "none":
            scale = no_scale(scale.description.removeprefix("no absolute scale: ") +
                             "; give a lux reading (--lux) for absolute figures")
    else:
        scale = no_scale("no lux reading given and the exposure-metadata estimate is switched off")
    if lux is not None and profile.scale_constant is not None and not (pk.clipped and s.lux_point_px is None):
        _check_constant_against_meter(scale, profile, exif, warnings)
    beam = measured.beam.scaled(scale.lux_per_unit, "cd") if scale.absolute else measured.beam
    return Scaled(scale, beam, warnings)


# ---- stage 6: the uncertainty budget (uncertainty.py) -------------------------------------------

@dataclass(frozen=True)
class Uncertain:
    budget: object
    values: dict
    pixel_deg: float
    ratio_delta: float
    ratio_source: str
    shading: dict


def uncertainty(req: Request, loaded: Loaded, linear: Linear, mapped: Mapped, measured: "_Measured",
                scaled: Scaled) -> Uncertain:
    """Every known error source, propagated by re-measuring (beamshot.uncertainty)."""
    s = req.setup
    prep = linear.prep
    ratio_delta, ratio_source = _ratio_error(prep, prep.resp, loaded.profile)
    shading = _shading_plan(prep, prep.flat_note)
    values = measured.values(scaled.scale, s.lux_reading_lx)
    pixel_deg = _pixel_deg(measured)
    beside = mapped.geometry_note is None
    budget = build_budget(measured, values, scale=scaled.scale, lux_at_peak=s.lux_reading_lx, distance_m=s.distance_m,
                          distance_u_m=s.distance_u_m,
                          camera_distance_m=s.camera_distance_m if beside else None,
                          camera_beside=beside and s.camera_distance_m is None,
                          wall_scale_u=mapped.f_u, wall_points=mapped.wall_points_used, ratio_delta=ratio_delta,
                          ratio_assumed=ratio_source == "assumed", shading=shading, focal_px=linear.focal_shading,
                          pixel_deg=pixel_deg, block_deg=_block_deg(pixel_deg, mapped.image, prep.beam_photos))
    return Uncertain(budget, values, pixel_deg, ratio_delta, ratio_source, shading)


# ---- stage 7: the figures (measure.py) ----------------------------------------------------------

def figures_of(req: Request, measured: "_Measured", scaled: Scaled, unc: Uncertain) -> dict:
    """Every reported figure with its uncertainty, status and budget."""
    budget, values, scale = unc.budget, unc.values, scaled.scale
    keys = [k for k in values if k != "peak_rel" and not k.endswith("_rel")]
    estimates = budget.estimates(keys)
    if scale.kind == "exposure_metadata":
        estimates |= {"peak_intensity", "beam_distance", "hotspot_flux", "spill_flux", "beam_flux"}
    figures = beam_figures(measured.shape, measured.beam, scale, values, budget.sigmas(keys), estimates,
                           axis_uncertainty_rad=measured.axis.uncertainty_mm / (req.setup.distance_m * 1000.0),
                           pixel_deg=unc.pixel_deg)
    figures = {k: (replace(f, budget=tuple(budget.of(k).items())) if f.value is not None and f.uncertainty else f)
               for k, f in figures.items()}
    figures["light_tilt"] = _tilt_figure(measured.pose, req.setup.assume_square, measured.shape.edge)
    edge_reason = _clipped_edge_reason(measured.shape, measured.beam) if measured.shape.peak.clipped else None
    if edge_reason and not req.setup.assume_square:
        figures["light_tilt"] = not_measured("deg", figures["light_tilt"].method, edge_reason)
    return figures


# ---- stage 8: beam shape and artefacts (artefacts.py, rings.py, shape_iso.py) -------------------

def shape_of(req: Request, linear: Linear, mapped: Mapped, measured: "_Measured", unc: Uncertain,
             figures: dict | None = None) -> dict:
    """Rings, centre hole, sectors, principal axes, ISO 11146 and ISO 13694 measures of the relative
    map (scale-free: the absolute scale does not enter); see docs/artefacts.md.  The axes of the
    hotspot and spill outlines take the systematic terms of the main figures on the same outline."""
    from .artefacts import shape_figures, with_known_limits, with_mapping_anisotropy, with_shared_terms

    block = _block_deg(unc.pixel_deg, mapped.image, linear.prep.beam_photos)
    ratio_delta = getattr(unc, "ratio_delta", 0.0)
    shape = shape_figures(measured.beam, measured.shape, pixel_deg=unc.pixel_deg, scale_u=mapped.f_u,
                          correlation_deg=block, tone_eps=ratio_delta / np.log(RATIO_SPAN),
                          tone_assumed=getattr(unc, "ratio_source", "") == "assumed",
                          bent=getattr(getattr(unc, "budget", None), "tone_bent", None),
                          coding_rel=_coding_rel(linear, measured)).figures
    # a homography (points or a target) may scale its two axes differently; a pinhole scales both alike
    anisotropy = mapped.f_u if mapped.f_px is None else 0.0
    return with_known_limits(with_mapping_anisotropy(with_shared_terms(shape, figures or {}), anisotropy))


# ---- stage 9: colour across the beam (beamshot.colour) -------------------------------------------

def colour_of(req: Request, loaded: Loaded, linear: Linear, mapped: Mapped, measured: "_Measured",
              figures: dict | None = None):
    """Chromaticity, CCT and Duv per zone and over the map, tint uniformity (beamshot.colour.beam_colour);
    the zone boundaries move by the relative uncertainties of the hotspot, field and spill angles."""
    from .colour.beam_colour import beam_colour
    from .photo import RAW_EXTENSIONS

    import os

    photos = linear.prep.beam_photos
    raw = any(os.path.splitext(p.name)[1].lower() in RAW_EXTENSIONS for p in photos)
    rel = []
    for key in ("hotspot_angle", "field_angle", "spill_angle"):
        f = (figures or {}).get(key)
        rel.append(f.uncertainty / f.value if f is not None and f.value and f.uncertainty and f.status in
                   ("measured", "estimate") else 0.0)
    return beam_colour(mapped.image, measured, photos=photos, profile=loaded.profile, raw=raw,
                       boundary_rel=tuple(rel))


def colour_warnings(result) -> list[str]:
    """The report's warning lines about colour: why it is not measured, or what limits it."""
    if not result.measured:
        return [f"colour not measured: {result.reason}"]
    out = list(result.notes)
    clipped = [z for z, d in result.zones.items() if d["cct"].reason and "clipped" in d["cct"].reason]
    if clipped:
        out.append(f"colour of the {' and '.join(clipped)} not measured: clipped in at least one channel")
    return out


# ---- stage 10: the report ------------------------------------------------------------------------

def assemble(req: Request, loaded: Loaded, linear: Linear, mapped: Mapped, measured: "_Measured", scaled: Scaled,
             unc: Uncertain, figures: dict) -> BeamReport:
    """The BeamReport: figures, the warnings a user should act on, and what went into it."""
    s = req.setup
    prep, profile, scale, resp = linear.prep, loaded.profile, scaled.scale, linear.prep.resp
    axis, beam, shape_, pose = measured.axis, measured.beam, measured.shape, measured.pose
    pk = shape_.peak
    image = mapped.image
    warnings = list(linear.warnings) + list(mapped.warnings) + list(measured.warnings) + list(scaled.warnings)
    if unc.shading["kind"] == "envelope":
        warnings.append("no flat field: lens shading may be left in the photo, and its possible effect is carried "
                        "in the uncertainties; shoot a flat field (beamshot camera flat), turn the camera between two "
                        "beam photos (beamshot camera flat-from-turns), or use a camera profile that has one")
    if unc.ratio_source == "assumed":
        warnings.append(f"the tone curve ({resp.describe()}) is assumed, not measured; its possible error is carried in "
                        "the uncertainties - calibrate the camera's response (beamshot camera response), or give "
                        "a bracket (3 or more exposures of the beam on one analyze command line)")
    if pk.clipped:
        warnings.append("the hotspot is clipped: the figures that depend on its level are bounds or not measured"
                        + (" (the peak itself comes from the lux reading)" if scale.kind == "lux_meter" else "")
                        + "; lower the exposure or bracket")
    with np.errstate(invalid="ignore"):
        peak_level = float(np.nanmax(image.luminance))
    if not pk.clipped and peak_level < _LOW_EXPOSURE_LEVEL:
        warnings.append(f"the brightest point is only {peak_level:.0%} of full scale; a longer exposure gives less noise")
    if not shape_.edge.complete:
        warnings.append(figures["spill_angle"].reason)
    if req.photos.ambient is None:
        outside = _outside_level(beam, shape_)
        if outside is not None and outside > 0.002 * pk.value:
            warnings.append(f"the wall outside the beam is at {outside / pk.value:.1%} of the peak; "
                            "room light adds to every figure - darken the room or give a light-off photo (--ambient)")
    if not pk.clipped and np.degrees(pk.theta) > 3.0:
        warnings.append(f"the hotspot is {np.degrees(pk.theta):.1f} deg off the spill centre")
    if s.head_diameter_mm is not None and s.distance_m * 1000.0 < FAR_FIELD_FACTOR * s.head_diameter_mm:
        warnings.append(f"the wall is closer than {FAR_FIELD_FACTOR:g}x the head diameter; the inverse-square "
                        "law may not hold yet (IES five-times rule) - measure farther away")
    if scale.kind == "exposure_metadata":
        warnings.append("absolute figures are an estimate from exposure metadata "
                        f"(±{scale.rel_uncertainty:.0%}); a lux-meter reading (--lux) is far better")
    mapping, note = mapped.mapping, mapped.geometry_note
    settings = {
        "light_name": s.light_name,
        "distance_m": s.distance_m,
        "distance_uncertainty_m": s.distance_u_m,
        "camera_distance_m": mapped.cam_d,
        "camera_position": ("anywhere (wall mapped by homography)" if note is not None else
                            "beside the light, square to the wall" if s.camera_distance_m is None else
                            "square to the wall"),
        "focal_length": mapped.f_src,
        "focal_px": mapped.f_px,
        "focal_relative_uncertainty": mapped.f_u,
        "response": resp.describe(),
        "lux_at_peak": s.lux_reading_lx,
        "lux_point_px": None if s.lux_point_px is None else [float(v) for v in s.lux_point_px],
        "reflectance": s.reflectance,
        "use_exif_scale": s.use_exif_scale,
        "head_diameter_mm": s.head_diameter_mm,
        "working_bin_factor": image.bin_factor,
        "theta_step_deg": float(np.degrees(beam.d_theta)),
        "phi_step_deg": float(np.degrees(beam.d_phi)),
    }
    calibration = {
        "camera_profile": {"name": profile.name, "calibrated": profile.calibrated,
                           "provenance": list(profile.provenance)},
        "response_quality": profile.response_quality,
        "hdr_merge": prep.hdr_note or "single photo",
        "calibration_relative_uncertainty": unc.ratio_delta,
        "dark_frame": prep.dark_note or "none",
        "response": resp.describe(),
        "response_source": unc.ratio_source,
        "flat_field": prep.flat_note or linear.falloff_note or "none: lens shading not corrected; its possible effect "
                                                               "is in the uncertainties",
        "uncertainty_terms": [t.to_dict() for t in unc.budget.terms],
        "ambient": prep.ambient_note or "none: no light-off photo subtracted",
        "absolute_scale": scale.to_dict(),
        "wall_mapping": {"method": mapping.method if mapping.method != "pinhole" else
                         "pinhole camera square to the wall", "focal_px": mapped.f_px,
                         "relative_scale_uncertainty": mapped.f_u, "geometry": note},
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
        inputs=list(prep.inputs) + list(mapped.inputs),
        settings=settings,
        calibration=calibration,
        beam_axis=beam_axis,
        warnings=warnings,
        profile=radial_profile(scaled.beam),
        beam=scaled.beam,
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


#: How far (mm) the meter's sensor may sit from the point given, 1 sigma (assumption: about 1 cm).
METER_PLACEMENT_MM = 10.0


def _metered_value(image: LinearImage, photo, xy) -> tuple[float, float, float]:
    """Linear value, its relative 1-sigma noise and its relative gradient per working pixel at pixel
    ``xy`` = (x, y) of the photo (as shown, y down), interpolated on the working image."""
    import cv2

    x, y = float(xy[0]), float(xy[1])
    full_h, full_w = image.full_shape
    if not (0 <= x < full_w and 0 <= y < full_h):
        raise BeamshotError(f"the metered point ({x:g}, {y:g}) is outside {photo.name} ({full_w}x{full_h} pixels); "
                            "give X,Y in pixels of the photo as shown, x right and y down from the top-left corner")
    b = image.bin_factor
    cx, cy = (x - (b - 1) / 2) / b, (y - (b - 1) / 2) / b  # working-pixel coordinates of the full-res pixel
    r, c = int(round(cy)), int(round(cx))
    h = _METER_PATCH_HALF
    rows = slice(max(r - h, 0), r + h + 1)
    cols = slice(max(c - h, 0), c + h + 1)
    if np.any(image.saturated[rows, cols]):
        raise BeamshotError(f"the metered point ({x:g}, {y:g}) is clipped in {photo.name}; meter a point that is not "
                            "overexposed, or lower the exposure")
    n = 2 * h + 1
    # a small window around the point (not a copy of the whole image), NaN outside the photo as 0
    r0, c0 = max(r - h - 2, 0), max(c - h - 2, 0)
    window = image.luminance[r0:r + h + 3, c0:c + h + 3]
    lum = np.ascontiguousarray(np.nan_to_num(window, nan=0.0), dtype=np.float32)
    patch = cv2.getRectSubPix(lum, (n, n), (cx - c0, cy - r0)).astype(float)  # bilinear, border replicated
    value = float(np.mean(patch))
    noise = float(np.std(patch) / np.sqrt(patch.size))
    if not (value > 0 and np.isfinite(noise)) or noise > 0.2 * value:
        raise BeamshotError(f"the metered point ({x:g}, {y:g}) is too dark in {photo.name} to scale the photo; meter "
                            "a brighter point of the beam, such as the hotspot (--lux without --lux-at)")
    gy, gx = np.gradient(patch)
    grad = float(np.hypot(np.mean(gx), np.mean(gy)) / value)
    return value, noise / value, grad


def _point_terms(linear, loaded, mapped, xy, value: float, grad_px: float) -> dict:
    """Relative 1-sigma terms of a scale metered at a point: where the meter sat (the relative
    gradient times METER_PLACEMENT_MM), and the tone curve's error over the ratio from that point
    to the peak (the power-law bend of beamshot.uncertainty: eps ln(v_peak / v_point))."""
    terms = {}
    b = mapped.image.bin_factor
    p = np.array([[float(xy[0]), float(xy[1])], [float(xy[0]) + b, float(xy[1])]])
    mm = mapped.mapping.image_to_wall(p) if mapped.mapping is not None else None
    if mm is not None and np.all(np.isfinite(mm)):
        mm_per_px = float(np.linalg.norm(mm[1] - mm[0]))
        if mm_per_px > 0:
            terms["meter placement"] = grad_px / mm_per_px * METER_PLACEMENT_MM
    ratio_delta, _ = _ratio_error(linear.prep, linear.prep.resp, loaded.profile)
    with np.errstate(invalid="ignore"):
        v_peak = float(np.nanmax(mapped.image.luminance))
    if ratio_delta > 0 and v_peak > value:
        terms["tone curve from the point to the peak"] = ratio_delta / np.log(RATIO_SPAN) * np.log(v_peak / value)
    return terms


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
    trusted = not (shape_.peak.clipped and _clipped_edge_reason(shape_, beam))  # not a clipped plateau's rim
    if (assume_square is False and shape_.edge.complete and shape_.edge.sharp_fraction >= TILT_MIN_SHARP_FRACTION
            and trusted):
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


def _coding_rel(linear: Linear, measured: "_Measured") -> np.ndarray | None:
    """Per row of the measured map, the relative 1-sigma of the concentric error a JPEG's coding
    leaves in an azimuthal mean (beamshot/jpeg_coding.py), at the photo's level on that row; None
    unless every beam photo is an 8-bit JPEG.  In a bracket, merged in units of its shortest frame
    (camera/hdr.py), a level is taken at the code of the longest frame that holds it below the clip,
    whose error is the smallest the merge can have there (the merge's averaging of frames is not
    credited).  The level is the working image's, with the ambient taken off and divided by a flat,
    not the photo's own: where the ambient is a large part of the light, or a flat's gain is below 1,
    the term comes out too small (by ``(c_photo / c_level)^(gamma - 1)`` for a power-law curve; not
    counted)."""
    from ._quiet import quiet_nan
    from .beammap import sampled_image
    from .camera.linearize import SATURATION_CODE_FRACTION
    from .jpeg_coding import COLOUR_RMS_CODES, coding_rms_codes, concentric_sigma_rel, is_jpeg

    photos = linear.prep.beam_photos
    if not photos or not all(is_jpeg(p) and p.max_code == 255 for p in photos):
        return None
    img = measured.image
    # every 4th azimuth of the map (45 of 180): a row's mean level and colour, not its detail
    where = dict(image=img, mapping=measured.mapping, axis_mm=measured.foot_mm, distance_m=measured.distance_m,
                 axis_dir=measured.axis_dir, every=4)
    lum = sampled_image(img.luminance, **where)
    rgb = sampled_image(img.rgb_counts if img.rgb_counts is not None else img.rgb_values, **where).astype(np.float64)
    inside = np.isfinite(lum)
    with quiet_nan():
        level = np.nanmean(lum, axis=1)
        # cells outside the photo are NaN in a float image (ambient taken off, a flat): 0, as in counts
        red, blue = (np.sum(np.where(inside, rgb[..., c], 0.0), axis=1) for c in (0, 2))
        lit = np.isfinite(level) & (level >= COLOUR_LIT_FRACTION * np.nanmax(level))
    # the colour's change along the profile: ln(R / B) of bands of rows 2 deg wide (sums over some
    # 900 cells each, so that a faint spill's colour is not noise), where the light is lit
    band = max(1, int(round(2.0 / np.degrees(measured.beam.d_theta))))
    rows = np.flatnonzero(lit)
    groups = rows // band
    r_sum = np.bincount(groups, red[rows]) if rows.size else np.zeros(0)
    b_sum = np.bincount(groups, blue[rows]) if rows.size else np.zeros(0)
    seen = (r_sum > 0) & (b_sum > 0)
    change = float(np.ptp(np.log(r_sum[seen] / b_sum[seen]))) if seen.sum() >= 2 else float("nan")
    sigma_codes = coding_rms_codes(change) if np.isfinite(change) else COLOUR_RMS_CODES
    ratios = np.asarray((linear.prep.hdr_note or {}).get("ratios_used", [1.0]) if len(photos) > 1 else [1.0], float)
    clip = float(linear.prep.resp.decode(SATURATION_CODE_FRACTION))
    in_frames = level[:, None] * ratios[None, :]  # the level in each frame's own units
    held = np.where(in_frames < clip, in_frames, -np.inf).max(axis=1)
    return concentric_sigma_rel(np.where(np.isfinite(held), held, level), linear.prep.resp, sigma_codes=sigma_codes)


#: Rows at least this fraction of the brightest row's level show the beam's colour (2 deg bands of
#: them are summed, so a spill of a few tenths of a per cent of the peak still counts).
COLOUR_LIT_FRACTION = 0.002


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
