"""The linear working image of an analysis: load the photos, choose the response curve,
linearise, subtract black level or dark frame, merge a bracket, subtract the ambient (light-off)
photo, divide by the flat field.

Each step records what it used (file, hash, exposure ratio, model) for the report.

Response curve of a bracket
---------------------------
A bracket of a still scene measures the camera's response: after linearisation with the right
curve ``f^-1``, each pixel's values divided by the frames' relative exposures ``e = t S / N^2``
agree (Debevec & Malik 1997, eq. 2: ``Z_ij = f(E_i dt_j)``).  Their disagreement,
``consistency_rms`` (bracket.py), is measured for the curve the analysis would assume; when no
curve was measured (the profile holds no table) and none was named (no ``response=``), the
curve is also recovered from the bracket itself (Debevec & Malik 1997 via OpenCV) and the curve
with the smaller disagreement is used.  That disagreement is reported as ``linearity_rel``: the
relative 1-sigma error of intensity ratios the linearisation leaves (None for a single photo,
where it cannot be measured).

Offsets
-------
A frame's linear value is ``v = s + b`` with ``b`` the black level (``profile.black_level``) or,
if a dark frame (lens covered, same settings) is given, ``b`` = the dark frame, which already
contains the black level.  ``b`` is subtracted once from every frame - each bracket frame, the
ambient photo and the flat - so ``beam - ratio * ambient`` removes the ambient light alone
(EMVA 1288 R4.0, sec. 4: the dark signal is removed from every image before it is used).
"""

from __future__ import annotations

import os
from dataclasses import asdict, dataclass

import numpy as np

from .camera.bracket import MIN_FRAMES, check_alignment, consistency_rms, recover_response
from .camera.flatfield import fit_flat_field
from .camera.hdr import merge_bracket
from .camera.linearize import LinearImage, linearize
from .camera.profile import CameraProfile
from .camera.response import Response, parse_response
from .decode_ahead import PendingPhoto
from .errors import BeamshotError
from .photo import Photo, load_photo

__all__ = ["LINEARITY_WARN", "RESPONSE_SOURCES", "PreparedImage", "prepare_image", "load_input", "same_size",
           "input_record"]

#: Frames that still disagree by more than this (relative RMS) after linearisation get a warning.
LINEARITY_WARN = 0.05
#: The values of ``PreparedImage.response_source``.
RESPONSE_SOURCES = ("assumed", "camera profile", "recovered from the bracket", "linear (raw or linear file)")


def load_input(obj, role: str) -> Photo:
    """A Photo as given, loaded from a path, or the result of one being loaded (beamshot.decode_ahead)."""
    if isinstance(obj, Photo):
        return obj
    if isinstance(obj, PendingPhoto):
        return obj.result()
    if isinstance(obj, (str, os.PathLike)):
        return load_photo(obj)
    raise TypeError(f"{role}: expected a path or a Photo, not {type(obj).__name__}")


def same_size(other: Photo, beam: Photo, what: str, fix: str) -> Photo:
    """Refuse a companion photo whose size differs from the beam photo's."""
    if other.shape != beam.shape:
        raise BeamshotError(f"{other.name}: the {what} is {other.shape[1]}x{other.shape[0]}, "
                            f"the beam photo {beam.shape[1]}x{beam.shape[0]}; {fix}")
    return other


@dataclass(frozen=True)
class PreparedImage:
    """The linear working image ready for mapping, with what went into it."""

    image: LinearImage
    beam_photos: list
    beam_photo: Photo
    inputs: list
    resp: Response
    warnings: list
    hdr_note: dict | None
    dark_note: dict | None
    ambient_note: dict | None
    flat_note: dict | None
    #: Where the response curve came from: one of ``RESPONSE_SOURCES``.
    response_source: str = "assumed"
    #: Relative 1-sigma error of intensity ratios left by the linearisation, measured as the
    #: disagreement of a bracket's frames (``consistency_rms``); None for a single photo.
    linearity_rel: float | None = None


def _source_of(resp: Response, photos: list[Photo]) -> str:
    if resp.kind == "linear" or any(p.linear for p in photos):
        return "linear (raw or linear file)"
    return "camera profile" if resp.kind == "table" else "assumed"


def _bracket_response(photos: list[Photo], resp: Response, source: str, may_recover: bool,
                      warnings: list[str]) -> tuple[Response, str, float | None, dict]:
    """The response for a bracket: the given one or the one recovered from it, whichever makes
    the frames agree better (see the module docstring); also checks that the camera stayed still."""
    note: dict = {}
    exposures = [p.exif.exposure_product() for p in photos]
    eight_bit = all(p.max_code == 255 and not p.linear for p in photos)
    alignment = check_alignment(photos, None if any(e is None for e in exposures) else np.asarray(exposures))
    note["alignment"] = {"shifts_px": [p["shift_px"] and [round(v, 2) for v in p["shift_px"]] for p in alignment.pairs],
                         "constrained": [p["constrained"] for p in alignment.pairs], "notes": list(alignment.notes)}
    if any(e is None for e in exposures) or not eight_bit:
        why = "exposures missing from EXIF" if eight_bit else "measured on 8-bit photos only"
        note["response_choice"] = {"used": source, "consistency_assumed": None, "consistency_recovered": None,
                                   "why": f"not measured ({why})"}
        return resp, source, None, note
    e = np.asarray(exposures, float)
    try:
        c_given = consistency_rms(photos, e, resp)
    except BeamshotError:
        c_given = None
    c_rec, fit, why = None, None, None
    if not may_recover:
        why = "the curve was measured or named, not recovered"
    elif len(photos) < MIN_FRAMES:
        why = f"a curve is recovered from {MIN_FRAMES} or more frames"
    else:
        try:
            fit = recover_response(photos, check_motion=False, label="response recovered from the bracket "
                                   "(Debevec & Malik 1997)")
            c_rec = fit.consistency_rms
        except BeamshotError as exc:
            why = f"recovery failed: {exc}"
    used_resp, used, rel = resp, source, c_given
    if fit is not None and (c_given is None or c_rec < c_given):
        used_resp, used, rel = fit.response, "recovered from the bracket", c_rec
        # the frames' agreement is warned about below, once, for whichever curve is used
        warnings.extend(w for w in fit.warnings if not w.startswith("frames agree only"))
    note["response_choice"] = {"used": used, "curve": used_resp.describe(), "consistency_assumed": c_given,
                               "consistency_recovered": c_rec}
    if why:
        note["response_choice"]["why"] = why
    if rel is not None and rel > LINEARITY_WARN:
        warnings.append(f"the bracket's frames disagree by {rel:.1%} (RMS) after linearisation with the "
                        f"{used_resp.describe()}; intensity ratios carry that error - check that nothing moved "
                        "or changed between frames, or calibrate the camera's response (beamshot camera response)")
    return used_resp, used, rel, note


def prepare_image(photo, *, ambient, flat, dark, profile: CameraProfile, resp: Response,
                  response_given: bool | None = None) -> PreparedImage:
    """Load the beam photo(s), choose the response, linearise, subtract black level or dark frame
    from every frame, merge a bracket, subtract the ambient photo and divide by the flat field.

    ``response_given`` says whether the caller named ``resp`` (``--response``); None infers it
    (``resp`` is not the profile's own curve object).  Only a curve neither measured nor named
    is replaced by one recovered from a bracket.
    """
    warnings: list[str] = []
    sources = list(photo) if isinstance(photo, (list, tuple)) else [photo]
    if not sources:
        raise BeamshotError("no beam photo given")
    beam_photos = [load_input(p, "photo") for p in sources]
    for other in beam_photos[1:]:
        same_size(other, beam_photos[0], "bracket photo", "a bracket must come from one camera and position")
    if response_given is None:
        response_given = resp is not profile.response
    if any(p.linear for p in beam_photos) and resp.kind != "linear":
        resp = parse_response("linear")  # raw files are decoded to linear values
    source = _source_of(resp, beam_photos)
    linearity = None
    bracket_note: dict = {}
    if len(beam_photos) > 1:
        _check_bracket_exposures(beam_photos)
        resp, source, linearity, bracket_note = _bracket_response(
            beam_photos, resp, source, source == "assumed" and not response_given, warnings)
        recovered = bracket_note.get("response_choice", {}).get("consistency_recovered")
        if linearity is not None and recovered is not None and min(linearity, recovered) > BRACKET_REFUSE:
            # even the curve recovered from the frames themselves cannot make them agree: not one scene
            # (a wrong named curve alone is warned about below, not refused)
            raise BeamshotError(f"the photos {', '.join(p.name for p in beam_photos)} disagree by {linearity:.0%} "
                                "(RMS) after linearisation: they are not exposures of one unchanged scene (two lights, "
                                "the light switched off or moved, or the camera moved); give one light's bracket per "
                                "command, and a light-off photo with --ambient")

    # ---- offsets: the dark frame (which holds the black level) or the black level, once per frame
    inputs = [input_record("beam", p) for p in beam_photos]
    companions: list[Photo] = []  # dark, ambient and flat photos, as they are loaded
    dark_note = None
    offset = None
    if dark is not None:
        dark_photo = same_size(load_input(dark, "dark"), beam_photos[0], "dark frame", "use the same camera and settings")
        inputs.append(input_record("dark", dark_photo))
        companions.append(dark_photo)
        offset = linearize(dark_photo, resp).rgb
        dark_note = {"file": dark_photo.name,
                     "subtracted": "per pixel from every frame (beam, ambient, flat); it includes the black level"}
    elif profile.black_level:
        offset = np.float32(profile.black_level)

    def linear(p: Photo) -> LinearImage:
        f = linearize(p, resp)
        return f if offset is None else f.with_values(f.rgb - offset)

    frames = [linear(p) for p in beam_photos]
    hdr_note = None
    if len(frames) > 1:
        merged = merge_bracket(frames, [p.exif.exposure_product() for p in beam_photos], resp,
                               names=[p.name for p in beam_photos])
        image = merged.image
        beam_photo = beam_photos[merged.reference]
        warnings.extend(merged.warnings)
        hdr_note = {"frames": len(frames), "reference": beam_photo.name,
                    "ratios_used": list(merged.ratios_used), "ratios_exif": list(merged.ratios_exif),
                    "ratios_measured": list(merged.ratios_measured),
                    "method": "hat-weighted mean times relative exposure (Debevec & Malik 1997 weights)",
                    **bracket_note}
    else:
        image, beam_photo = frames[0], beam_photos[0]

    # ---- ambient (light-off) subtraction
    if ambient is not None:
        amb_photo = same_size(load_input(ambient, "ambient"), beam_photo, "ambient photo",
                               "take both from the same camera and position")
        inputs.append(input_record("ambient", amb_photo))
        companions.append(amb_photo)
        amb = linear(amb_photo)
        ratio = 1.0
        pb, pa = beam_photo.exif.exposure_product(), amb_photo.exif.exposure_product()
        if pb and pa:
            ratio = pb / pa
        elif pb != pa:
            warnings.append("the ambient photo's exposure is not in EXIF; assumed equal to the beam photo's")
        _check_ambient(image.luminance, ratio * amb.luminance, amb_photo.name, warnings)
        image = image.with_values(image.rgb - ratio * amb.rgb)  # no clipping: keeps noise unbiased
        amb_note = {"file": amb_photo.name, "exposure_ratio": ratio}
    else:
        amb_note = None

    # ---- flat field
    flat_note = None
    if flat is not None:
        flat_photo = same_size(load_input(flat, "flat"), beam_photo, "flat-field photo",
                                "shoot it with the same camera and settings")
        inputs.append(input_record("flat", flat_photo))
        companions.append(flat_photo)
        ff = fit_flat_field(linear(flat_photo).luminance)
        image = image.divided_by(ff.evaluate(image.shape))
        flat_note = {"file": flat_photo.name, "model": "1/V = 1 + b1 r^2 + b2 r^4 + b3 r^6",
                     "coefficients": list(ff.coefficients), "residual_rms": ff.residual_rms}
    elif profile.flat is not None:
        fh, fw = profile.flat.shape
        bh, bw = beam_photos[0].shape
        if (fh, fw) not in ((bh, bw), (bw, bh)):
            raise BeamshotError(f"the flat field of profile '{profile.name}' is for {fw}x{fh} photos, this one is "
                                f"{bw}x{bh}; use the camera's profile or shoot a flat field for it")
        image = image.divided_by(profile.flat.evaluate(image.shape))
        flat_note = {"from_profile": profile.name, "coefficients": list(profile.flat.coefficients),
                     "residual_rms": profile.flat.residual_rms, "method": profile.flat.method,
                     "data_to_radius": profile.flat.max_radius}

    # EXIF values outside physical ranges were ignored when the photos were read (photo.py): say so
    warnings.extend(f"{p.name}: {n}" for p in beam_photos + companions for n in p.notes)
    return PreparedImage(image, beam_photos, beam_photo, inputs, resp, warnings, hdr_note, dark_note, amb_note,
                         flat_note, response_source=source, linearity_rel=linearity)


#: Bracket frames whose exposures (t S / N^2) differ by less than this are the same exposure.
SAME_EXPOSURE_REL = 0.02
#: Frames that disagree by more than this after linearisation with the curve recovered from them
#: (relative RMS) are not one scene: a recovered curve brings the frames of one still scene within
#: about 1 % (0.15 % for a film-like S-curve camera in tests/test_bracket_selfcal.py).
BRACKET_REFUSE = 0.10


def _check_bracket_exposures(photos: list[Photo]) -> None:
    """A bracket is several exposures of one scene: two frames with the same exposure are not a
    bracket (a light-off photo picked up by a wildcard, or two lights)."""
    exposures = [p.exif.exposure_product() for p in photos]
    if any(e is None for e in exposures):
        return  # the merge measures the ratios itself
    for i in range(len(photos)):
        for j in range(i + 1, len(photos)):
            if abs(exposures[i] / exposures[j] - 1.0) < SAME_EXPOSURE_REL:
                raise BeamshotError(f"{photos[i].name} and {photos[j].name} have the same exposure, so they are not a "
                                    "bracket (several exposures of one beam); give a light-off photo with --ambient, "
                                    "and analyze each light with its own command")


#: Light-off photo brighter than this fraction of the beam photo where the beam is brightest: refused.
AMBIENT_REFUSE_FRACTION = 0.5
#: ... and above this fraction: a warning (room light swamps the faint parts of the beam).
AMBIENT_WARN_FRACTION = 0.1


def _check_ambient(beam_lum: np.ndarray, ambient_lum: np.ndarray, name: str, warnings: list[str]) -> None:
    """A light-off photo must be darker than the beam photo where the beam is.

    Compared on the brightest 0.5 % of the beam photo (the hotspot): a light-off photo as bright
    as that was taken with the light on, or the two photos were swapped.
    """
    with np.errstate(invalid="ignore"):
        top = beam_lum >= np.quantile(beam_lum, 0.995)
        beam_level = float(np.median(beam_lum[top]))
        amb_level = float(np.median(ambient_lum[top]))
    if not beam_level > 0:
        return  # a black beam photo is reported by the analysis itself
    frac = amb_level / beam_level
    if frac >= AMBIENT_REFUSE_FRACTION:
        raise BeamshotError(f"{name}: the light-off photo is {frac:.0%} as bright as the beam photo where the beam "
                            "is brightest; it must be taken with the light off (same camera, position and settings) "
                            "- check that the light was off and that the two photos are not swapped")
    if frac >= AMBIENT_WARN_FRACTION:
        warnings.append(f"the light-off photo is {frac:.0%} as bright as the hotspot; room light that strong "
                        "swamps the faint spill - darken the room")


def input_record(role: str, photo: Photo) -> dict:
    """The report's record of an input file: role, name, hash, size, bits and EXIF facts."""
    ex = asdict(photo.exif)
    return {"role": role, "name": photo.name, "sha256": photo.sha256, "width": int(photo.shape[1]),
            "height": int(photo.shape[0]), "bits": 8 if photo.max_code == 255 else 16, "exif": ex}
