"""The linear working image of an analysis: load the photos, linearise, subtract black level and
dark frame, merge a bracket, subtract the ambient (light-off) photo, divide by the flat field.

Each step records what it used (file, hash, exposure ratio, model) for the report.
"""

from __future__ import annotations

import os
from dataclasses import asdict, dataclass

import numpy as np

from .camera.flatfield import fit_flat_field
from .camera.hdr import merge_bracket
from .camera.linearize import LinearImage, linearize
from .camera.profile import CameraProfile
from .camera.response import Response, parse_response
from .errors import BeamshotError
from .photo import Photo, load_photo

__all__ = ["PreparedImage", "prepare_image", "load_input", "same_size", "input_record"]


def load_input(obj, role: str) -> Photo:
    """A Photo as given, or loaded from a path."""
    if isinstance(obj, Photo):
        return obj
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


def prepare_image(photo, *, ambient, flat, dark, profile: CameraProfile, resp: Response) -> PreparedImage:
    """Load the beam photo(s), linearise, subtract black level and dark frame, merge a bracket,
    subtract the ambient photo and divide by the flat field."""
    warnings: list[str] = []
    sources = list(photo) if isinstance(photo, (list, tuple)) else [photo]
    if not sources:
        raise BeamshotError("no beam photo given")
    beam_photos = [load_input(p, "photo") for p in sources]
    for other in beam_photos[1:]:
        same_size(other, beam_photos[0], "bracket photo", "a bracket must come from one camera and position")
    if any(p.linear for p in beam_photos) and resp.kind != "linear":
        resp = parse_response("linear")  # raw files are decoded to linear values
    frames = [linearize(p, resp) for p in beam_photos]
    if profile.black_level:
        frames = [f.with_values(f.rgb - np.float32(profile.black_level)) for f in frames]
    inputs = [input_record("beam", p) for p in beam_photos]
    dark_note = None
    if dark is not None:
        dark_photo = same_size(load_input(dark, "dark"), beam_photos[0], "dark frame", "use the same camera and settings")
        inputs.append(input_record("dark", dark_photo))
        d = linearize(dark_photo, resp)
        frames = [f.with_values(f.rgb - d.rgb) for f in frames]
        dark_note = {"file": dark_photo.name, "subtracted": "per pixel from every frame"}
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
                    "method": "hat-weighted mean times relative exposure (Debevec & Malik 1997 weights)"}
    else:
        image, beam_photo = frames[0], beam_photos[0]

    # ---- ambient (light-off) subtraction
    if ambient is not None:
        amb_photo = same_size(load_input(ambient, "ambient"), beam_photo, "ambient photo",
                               "take both from the same camera and position")
        inputs.append(input_record("ambient", amb_photo))
        amb = linearize(amb_photo, resp)
        ratio = 1.0
        pb, pa = beam_photo.exif.exposure_product(), amb_photo.exif.exposure_product()
        if pb and pa:
            ratio = pb / pa
        elif pb != pa:
            warnings.append("the ambient photo's exposure is not in EXIF; assumed equal to the beam photo's")
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
        ff = fit_flat_field(linearize(flat_photo, resp).luminance)
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
                     "residual_rms": profile.flat.residual_rms}

    return PreparedImage(image, beam_photos, beam_photo, inputs, resp, warnings, hdr_note, dark_note, amb_note,
                     flat_note)


def input_record(role: str, photo: Photo) -> dict:
    """The report's record of an input file: role, name, hash, size, bits and EXIF facts."""
    ex = asdict(photo.exif)
    return {"role": role, "name": photo.name, "sha256": photo.sha256, "width": int(photo.shape[1]),
            "height": int(photo.shape[0]), "bits": 8 if photo.max_code == 255 else 16, "exif": ex}
