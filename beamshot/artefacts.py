"""Beam artefacts and shape figures: rings, a centre hole, dark or bright sectors, the principal
axes of the hotspot and the spill, the ISO 11146 / ISO 13694 measures, and the hotspot-to-spill
transition; each as a :class:`~beamshot.figure.Figure` with its uncertainty and status.

Definitions, formulas and sources: docs/artefacts.md (and the docstrings of beamshot.rings,
beamshot.shape_iso).  An artefact that is not distinguishable from noise is reported as an
``upper_bound`` (the largest value the noise could hide) with the reason, its location and width
as ``not_measured``.

All angles are degrees on the azimuthal-equidistant plane about the beam axis (``x = theta cos
phi`` right, ``y = theta sin phi`` up, as seen from behind the light); orientations are azimuths
of a major axis, 0-180 deg counter-clockwise from the right.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from ._quiet import quiet_nan
from .beammap import BeamMap, directions
from .figure import Figure, not_measured
from .frames import local_basis
from .hotspot import _rays, peak_rel_noise
from .map_noise import noise_model
from .measure import _clipped_edge_reason
from .rings import CODING_SIGNIFICANCE, MAX_FWHM_DEG, RING_SIGNIFICANCE, find_rings
from .savgol import savgol
from .shape_iso import N_T, hotspot_moments, iso13694

__all__ = ["SHAPE_ORDER", "shape_figures", "ShapeResult", "HOLE_SIGNIFICANCE", "SECTOR_SIGNIFICANCE",
           "ellipse_of_points"]

#: A centre hole is reported when its depth exceeds this many times its 1-sigma noise, and
#: ``HOLE_MIN_DEPTH`` (the smallest dip a maker would act on; project choice).
HOLE_SIGNIFICANCE = 5.0
HOLE_MIN_DEPTH = 0.01
#: Sector non-uniformity is reported as measured when it exceeds this many times its noise.
SECTOR_SIGNIFICANCE = 3.0
#: Azimuth resolution of the sector profile, degrees (a reflector seam or an LED's corner spans more).
SECTOR_SMOOTH_DEG = 10.0
#: An outline is round (no orientation) when its ellipticity is within this many sigma of 1, or
#: within ``ROUND_MIN`` of it (2 % out of round: the least a maker would call oval; project choice).
ROUND_SIGMAS = 3.0
ROUND_MIN = 0.02
#: Draws of the ellipse fit with the contour points moved by their noise (uncertainty).
ELLIPSE_DRAWS = 25

#: Order of the shape figures in reports.
SHAPE_ORDER = (
    "ring_score", "ring_count", "ring_angle", "ring_amplitude", "ring_width",
    "centre_hole_depth", "centre_hole_width",
    "sector_nonuniformity_hotspot", "sector_nonuniformity_spill",
    "hotspot_major_angle", "hotspot_minor_angle", "hotspot_ellipticity", "hotspot_orientation",
    "spill_major_angle", "spill_minor_angle", "spill_ellipticity", "spill_orientation",
    "d4sigma_major", "d4sigma_minor", "d4sigma_ellipticity", "d4sigma_azimuth",
    "hotspot_flatness", "hotspot_uniformity", "hotspot_edge_steepness", "hotspot_transition_width",
)


@dataclass(frozen=True)
class ShapeResult:
    """The shape figures (``SHAPE_ORDER``) and the rings found (for the method text and tests)."""

    figures: dict
    rings: tuple
    centroid_deg: tuple


def ellipse_of_points(x: np.ndarray, y: np.ndarray) -> tuple[float, float, float]:
    """Full major and minor axes (same unit as x, y) and major-axis azimuth (deg, 0-180) of the
    ellipse fitted to the points (OpenCV fitEllipse: least-squares conic, Fitzgibbon et al. 1999)."""
    import cv2

    return _axes(cv2.fitEllipse(np.stack([x, y], axis=1).astype(np.float32)))


def _axes(ellipse) -> tuple[float, float, float]:
    """Full major and minor axes and the major axis's azimuth (deg, 0-180) of an OpenCV ellipse."""
    (_, _), (w, h), ang = ellipse
    if w >= h:
        return float(w), float(h), float(ang % 180.0)
    return float(h), float(w), float((ang + 90.0) % 180.0)


def _contour_points(pk, hot) -> tuple[np.ndarray, np.ndarray]:
    """The 50 % contour's points on the azimuthal-equidistant plane (deg)."""
    e1, e2 = local_basis(pk.vector)
    c = np.asarray(pk.vector, float) / np.linalg.norm(pk.vector)
    b, a = hot.bearings[:, None], hot.alpha[:, None]
    return _ae(np.cos(a) * c + np.sin(a) * (np.cos(b) * e1 + np.sin(b) * e2))


def _contour_centre(pk, hot) -> tuple[float, float]:
    """Centre (deg) of the ellipse fitted to the 50 % contour (the hotspot's middle when the peak
    is on the rim of a hole)."""
    import cv2

    x, y = _contour_points(pk, hot)
    (cx, cy), _, _ = cv2.fitEllipse(np.stack([x.ravel(), y.ravel()], axis=1).astype(np.float32))
    return float(cx), float(cy)


def _ae(vectors: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    th = np.degrees(np.arccos(np.clip(vectors[..., 2], -1.0, 1.0)))
    ph = np.arctan2(vectors[..., 1], vectors[..., 0])
    return th * np.cos(ph), th * np.sin(ph)


def _ellipse_figures(prefix: str, x, y, sx, sy, scale_u: float, what: str, rng) -> dict:
    """Major/minor full angles, ellipticity and orientation of an outline, with uncertainties from
    ``ELLIPSE_DRAWS`` refits with the points moved by their 1-sigma (``sx``, ``sy``)."""
    major, minor, orient = ellipse_of_points(x, y)
    # the normal deviates of every refit at once: the same numbers, in the same order, as drawing
    # those of x then those of y for each refit in turn
    import cv2

    z = rng.standard_normal((ELLIPSE_DRAWS, 2, len(x)))
    # every refit's points at once, as ellipse_of_points makes them (float32 (x, y) pairs)
    pts = np.stack([x + sx * z[:, 0], y + sy * z[:, 1]], axis=2).astype(np.float32)
    draws = np.array([_axes(cv2.fitEllipse(p)) for p in pts])
    s_major, s_minor = np.std(draws[:, 0], ddof=1), np.std(draws[:, 1], ddof=1)
    s_orient = float(np.degrees(np.std(np.angle(np.exp(2j * np.radians(draws[:, 2] - orient))), ddof=1) / 2.0))
    ratios = draws[:, 1] / draws[:, 0]
    s_ell = float(np.std(ratios, ddof=1))
    ell, h_upper = _debiased_ellipticity(major, minor, orient, draws)
    method = (f"ellipse fitted (least-squares conic) to the {what}, on the azimuthal-equidistant plane about "
              "the beam axis; full axes")
    budget_major = (("pixel noise", s_major), ("wall scale", scale_u * major))
    budget_minor = (("pixel noise", s_minor), ("wall scale", scale_u * minor))
    out = {
        f"{prefix}_major_angle": Figure(major, float(np.hypot(s_major, scale_u * major)), "deg",
                                        method + ": the major axis", budget=budget_major),
        f"{prefix}_minor_angle": Figure(minor, float(np.hypot(s_minor, scale_u * minor)), "deg",
                                        method + ": the minor axis", budget=budget_minor),
        f"{prefix}_ellipticity": Figure(ell, s_ell, "", method + ": minor over major axis (ISO 11146 ratio; 1 is "
                                        "round), its out-of-roundness freed of the noise's bias (Rice)",
                                        budget=(("pixel noise", s_ell),)),
    }
    if h_upper is not None:  # round within its noise: only how far from round it can be is known
        d = 0.5 * (major + minor)
        out[f"{prefix}_ellipticity"] = Figure(
            float((d - h_upper) / (d + h_upper)), None, "", method + ": minor over major axis (ISO 11146 ratio; 1 is "
            "round)", "lower_bound", "round within its noise: the out-of-roundness is below twice its noise, and "
            "the ratio is at least this")
    if h_upper is not None or s_orient >= 30.0 or 1.0 - ell < max(ROUND_SIGMAS * s_ell, ROUND_MIN):
        out[f"{prefix}_orientation"] = not_measured(
            "deg", method + ": azimuth of the major axis",
            "the outline is round within its noise, so it has no orientation")
    else:
        out[f"{prefix}_orientation"] = Figure(orient, s_orient, "deg",
                                              method + ": azimuth of the major axis (0-180 deg, counter-clockwise "
                                              "from the right as seen from behind the light)")
    return out


def _debiased_ellipticity(major: float, minor: float, orient: float, draws: np.ndarray) -> tuple[float, float | None]:
    """Minor over major axis with the noise's bias taken out, and, when the outline is round within
    its noise, an upper limit of its out-of-roundness (else None).

    An ellipse of mean full axis ``D`` deviates from its circle by ``H = (major - minor) / 2`` along
    twice the major axis's azimuth: the 2-vector ``h = H (cos 2a, sin 2a)``.  Noise on the outline's
    points adds a random 2-vector of variance ``s^2`` per component, so the measured length is
    biased up: ``E|h|^2 = A^2 + 2 s^2`` for a true length ``A`` (the Rice distribution; Rice, Bell
    Syst. Tech. J. 23, 1944), and a round outline (A = 0) reads ``|h|`` of ``1.25 s`` on average, not
    0 - an ellipticity biased low by about twice its own scatter.  ``s`` comes from the refits
    ``draws`` (``(n, 3)``: major, minor, azimuth), whose points were moved by their noise once more.
    ``A`` is estimated by ``sqrt(max(|h|^2 - 2 s^2, 0))`` and the ratio is ``(D - A) / (D + A)``.
    When that estimate is below ``2 s`` the outline is round within its noise, and ``|h| + 2 s`` is
    returned as the upper limit of ``A`` (about 95 %)."""
    d = 0.5 * (major + minor)

    def vec(mj, mn, az):
        half, twice = 0.5 * (np.asarray(mj) - np.asarray(mn)), np.radians(2.0 * np.asarray(az))
        return half * np.cos(twice), half * np.sin(twice)

    hx, hy = vec(major, minor, orient)
    dx, dy = vec(draws[:, 0], draws[:, 1], draws[:, 2])
    s2 = 0.5 * (np.var(dx, ddof=1) + np.var(dy, ddof=1))
    h = float(np.hypot(hx, hy))
    a = float(np.sqrt(max(h * h - 2.0 * s2, 0.0)))
    if a < 2.0 * np.sqrt(s2):
        return float((d - a) / (d + a)), h + 2.0 * float(np.sqrt(s2))
    return float((d - a) / (d + a)), None


#: Shape figures measured on the same outline as a main figure, which therefore share its
#: systematic error terms (distance, lens shading, wall points, pixel footprint): the main figures
#: whose terms they take (the larger of the two, relative to each value).
SHARED_OUTLINE = {
    "spill_major_angle": ("spill_angle_horizontal", "spill_angle_vertical"),
    "spill_minor_angle": ("spill_angle_horizontal", "spill_angle_vertical"),
    "hotspot_major_angle": ("hotspot_angle_horizontal", "hotspot_angle_vertical"),
    "hotspot_minor_angle": ("hotspot_angle_horizontal", "hotspot_angle_vertical"),
}
#: Terms the shape stage already counts itself (its pixel noise, the tone curve, the wall scale).
_COUNTED = ("pixel noise", "tone curve", "wall scale")


def with_shared_terms(shape: dict, main: dict) -> dict:
    """``shape`` figures with the systematic terms of the main figures on the same outline
    (:data:`SHARED_OUTLINE`) added in quadrature, each as the same fraction of the value (an error
    that scales the outline, as the distance or the wall points do, scales both alike).  The
    coverage check over faulted photos found the spill axes' pixel-noise-only uncertainty 5-10x too
    small (benchmarks/coverage.py --shape).  The edge steepness takes the lens shading of the
    contours it is measured on (:func:`_with_edge_shading`)."""
    out = dict(shape)
    for key, sources in SHARED_OUTLINE.items():
        f = shape.get(key)
        if f is None or f.value is None or f.uncertainty is None or f.status not in ("measured", "estimate"):
            continue
        rel: dict[str, float] = {}
        for src in sources:
            m = main.get(src)
            if m is None or not m.value or not m.budget:
                continue
            for name, u in m.budget:
                if not name.startswith(_COUNTED):
                    rel[name] = max(rel.get(name, 0.0), abs(u / m.value))
        if not rel:
            continue
        extra = tuple((name, r * abs(f.value)) for name, r in rel.items())
        u = float(np.sqrt(f.uncertainty ** 2 + sum(t ** 2 for _, t in extra)))
        out[key] = replace(f, uncertainty=u, budget=(f.budget or (("pixel noise", f.uncertainty),)) + extra)
    return _with_edge_shading(out, main)


def _with_edge_shading(shape: dict, main: dict) -> dict:
    """``shape`` with a "lens shading" term on the edge steepness ``s = 1 - A_0.9 / A_0.1``.

    A gain left in the photo (no flat field) moves each contour by a relative ``e_L`` of its radius,
    so ``ds = -(1 - s) (2 e_0.9 - 2 e_0.1)`` (areas go as radius squared).  For a gain ``1 - k r^2``
    on a Gaussian top every contour scales alike (the product is a Gaussian of another width), so
    the 90 % contour moves as the 50 % one, whose relative term is the main hotspot angle's; the
    10 % contour's is the main field angle's.  A gain falling away from the axis moves both inward,
    so the term is ``2 (1 - s) |e_0.1 - e_0.5|``.  (Flatness and uniformity of a Gaussian do not
    depend on its width, so they take no such term.)  Over 24 faulted photos a wide beam with lens
    shading left in read its edge steepness 0.24 % low (z = -3) without it."""
    f = shape.get("hotspot_edge_steepness")
    if f is None or f.value is None or f.uncertainty is None or f.status not in ("measured", "estimate"):
        return shape

    def rel(key):
        m = main.get(key)
        if m is None or not m.value or not m.budget:
            return None
        terms = [u for name, u in m.budget if name.startswith("lens shading")]
        return abs(terms[0] / m.value) if terms else None

    e01, e05 = rel("field_angle"), rel("hotspot_angle")
    if e01 is None or e05 is None:
        return shape
    term = float(2.0 * (1.0 - f.value) * abs(e01 - e05))
    if not term > 0:
        return shape
    out = dict(shape)
    out["hotspot_edge_steepness"] = replace(f, uncertainty=float(np.hypot(f.uncertainty, term)),
                                            budget=(f.budget or (("pixel noise", f.uncertainty),))
                                            + (("lens shading", term),))
    return out


#: Figures whose uncertainty leaves out a source the shape stage cannot see, each with what its
#: method says of it.  Over 24 faulted synthetic photos (benchmarks/coverage.py --shape) the ISO 13694
#: measures lie within 2 sigma of the truth for 96-100 % (after their noise and peak-fit terms were
#: counted in photo pixels; 71-83 % before), but the synthetic camera has no optical blur; the hotspot's
#: sector non-uniformity of a round beam is now an upper bound (it read 0.13-0.20 %, its noise left in).
_ISO_LIMIT = ("its uncertainty counts the map's noise, the peak fit, the tone curve and the map's sampling, "
              "not the blur of the camera's optics (docs/artefacts.md)")
KNOWN_LIMITS = {
    "hotspot_flatness": _ISO_LIMIT,
    "hotspot_uniformity": _ISO_LIMIT,
    "hotspot_edge_steepness": _ISO_LIMIT.replace("the map's sampling, ", "the map's sampling and lens shading, "),
    "sector_nonuniformity_hotspot": "its uncertainty counts the map's noise (over the photo's correlation length) "
                                    "and the tone curve, not lens shading or the wall mapping, which turn into "
                                    "sectors about an off-centre hotspot (docs/artefacts.md)",
}
NOISE_ONLY_FIGURES = tuple(KNOWN_LIMITS)


def with_known_limits(shape: dict) -> dict:
    """``shape`` with the note of :data:`KNOWN_LIMITS` at the end of the method of each such figure
    that has a value, so a report says which uncertainties are too small."""
    out = dict(shape)
    for key, note in KNOWN_LIMITS.items():
        f = shape.get(key)
        if f is not None and f.value is not None:
            out[key] = replace(f, method=f"{f.method}; {note}")
    return out


#: Ratios of two perpendicular sizes, which a wall mapping that scales its two axes differently changes.
AXIS_RATIOS = ("hotspot_ellipticity", "spill_ellipticity", "d4sigma_ellipticity")


def with_mapping_anisotropy(shape: dict, anisotropy: float) -> dict:
    """``shape`` with the term a wall mapping whose two axes may differ in scale by ``anisotropy``
    (relative 1-sigma; a homography from points or a target, 0 for a pinhole square to the wall)
    puts on each axis ratio: ``anisotropy x ratio``.  The coverage check over faulted photos found the
    ellipticities of obliquely photographed round beams off by 0.2-0.3 % against noise terms of 0.05 %."""
    if not anisotropy > 0:
        return shape
    out = dict(shape)
    for key in AXIS_RATIOS:
        f = shape.get(key)
        if f is not None and f.value is not None and f.status == "lower_bound":
            # a bound stays one: lowered by twice the term, as it was set at about two sigma of noise
            out[key] = replace(f, value=float(f.value * (1.0 - 2.0 * anisotropy)),
                               reason=f"{f.reason}; lowered by twice the wall mapping's anisotropy")
            continue
        if f is None or f.value is None or f.uncertainty is None or f.status not in ("measured", "estimate"):
            continue
        term = anisotropy * abs(f.value)
        out[key] = replace(f, uncertainty=float(np.hypot(f.uncertainty, term)),
                           budget=(f.budget or (("pixel noise", f.uncertainty),)) + (("wall mapping anisotropy", term),))
    return out


def shape_figures(beam: BeamMap, shape, *, pixel_deg: float = 0.0, scale_u: float = 0.0,
                  correlation_deg: float = 0.0, tone_eps: float = 0.0, tone_assumed: bool = False,
                  seed: int = 0, bent=None, coding_rel: np.ndarray | None = None) -> ShapeResult:
    """Every shape figure of a measured beam (``shape``: :class:`beamshot.measure.BeamShape`).

    ``pixel_deg`` is the angular size of a working pixel (for the noise of means), ``scale_u`` the
    relative 1-sigma of the wall scale (it scales every angle alike; not the ratios),
    ``correlation_deg`` the angle over which the photo's errors are correlated (a JPEG block).
    ``tone_eps`` is the 1-sigma tone-curve (gamma) error of the linearisation, as in
    :func:`beamshot.uncertainty.tone_bent`: the figures are measured again on the map bent by it,
    and the change is each figure's "tone curve" term; with ``tone_assumed`` (an assumed curve) a
    figure whose variance is mostly that term is an ``estimate``.  ``bent`` may hold that bent map
    and its shape already measured (:class:`beamshot.uncertainty.ToneBent`, from the uncertainty
    budget's tone term); it is used only if it is the bend of this ``beam`` by ``tone_eps``.
    ``coding_rel``: per map row, the relative 1-sigma of the photo's concentric coding error (a
    JPEG's, beamshot.jpeg_coding), counted in the rings' amplitudes (:func:`beamshot.rings.find_rings`).
    """
    result = _shape_once(beam, shape, pixel_deg, scale_u, correlation_deg, seed, coding_rel=coding_rel)
    if not tone_eps:
        return result
    from .measure import measure_shape
    from .uncertainty import tone_bent

    bent = bent.of(beam, shape.peak.value, tone_eps) if bent is not None else None
    if bent is not None:
        bent_map, bent_shape = bent.map, bent.shape
    else:
        bent_map = tone_bent(beam, shape.peak.value, tone_eps)
        bent_shape = measure_shape(bent_map, boundary_noise=False)
    bent = _shape_once(bent_map, bent_shape, pixel_deg, scale_u, correlation_deg, seed, with_rings=False).figures
    # rings, without fitting them again: a ring multiplies the profile, (1 + a g), and the bend raises
    # that factor to the power 1 + eps: the amplitude becomes (1 + a)^(1 + eps) - 1, the location and
    # (for small a) the width stay
    for key in ("ring_score", "ring_amplitude"):
        f = result.figures[key]
        if f.value is not None and f.status in ("measured", "estimate"):
            a = f.value if key == "ring_amplitude" else result.figures["ring_amplitude"].value
            bent[key] = replace(f, value=f.value + abs((1.0 + a) ** (1.0 + tone_eps) - 1.0 - a))
    figs = {}
    for key, f in result.figures.items():
        g = bent.get(key)
        if f.status in ("measured", "estimate") and g is not None and g.value is not None and f.uncertainty is not None:
            term = abs(g.value - f.value)
            u = float(np.hypot(f.uncertainty, term))
            budget = (f.budget or (("pixel noise", f.uncertainty),)) + (("tone curve", term),)
            status = "estimate" if tone_assumed and term ** 2 > 0.5 * u ** 2 else f.status
            f = Figure(f.value, u, f.unit, f.method, status, f.reason if status == f.status else
                       "the tone curve is assumed, and its possible error makes most of the uncertainty", budget)
        figs[key] = f
    if tone_assumed and not shape.peak.clipped:
        figs = _with_tone_shape(figs, beam, shape.peak.value)
    return ShapeResult(figs, result.rings, result.centroid_deg)


#: Level of the peak in the photo's linear range (0-1) for the tone-curve shape term: the middle of
#: the 0.6-0.9 a photo is exposed to (the change varies by 20 % over that range).
TONE_PEAK_LEVEL = 0.75
#: The ISO 13694 figures that take the tone-curve shape term.
ISO_FIGURES = ("hotspot_flatness", "hotspot_uniformity", "hotspot_edge_steepness")


def _with_tone_shape(figs: dict, beam: BeamMap, peak: float) -> dict:
    """``figs`` with a "tone curve shape" term on the ISO 13694 figures when the tone curve is assumed.

    The tone-curve term bends the map by a power law, ``I (I / I_peak)^eps``, which leaves a Gaussian's
    flatness, uniformity and edge steepness unchanged (its contours all scale alike).  A photo
    encoded with a curve of another shape does not: the sRGB curve's local exponent
    ``d ln V / d ln x`` runs from about 2.1 at 10 % of the peak to 2.3 at 90 %, a pure power law's
    is constant.  Analytic Gaussian hotspots (3-5 deg) encoded with gamma 2.0 or 2.4 and read as sRGB
    (peak at 0.6-0.9 of the range) read the edge steepness 1.5-2.4e-3 high and the flatness
    0.7-1.0e-3 low, where the power-law bend moved them by 2-3e-4 and 3-5e-5.  The term is the change
    when the map is read once more as if the photo held the sRGB code of each value (peak at
    ``TONE_PEAK_LEVEL``) decoded by a pure power law of the same overall gamma (2.2), taken as the
    half-width of a rectangular distribution (JCGM 100:2008 4.3.7: ``u = a / sqrt 3``)."""
    from .camera.response import Response

    keys = [k for k in ISO_FIGURES if k in figs and figs[k].status in ("measured", "estimate")
            and figs[k].value is not None and figs[k].uncertainty is not None]
    if not keys or not peak > 0:
        return figs
    # the rows the measures look at: down to the lowest clip level (10 %), which the re-reading moves to
    # about 7 % of the original peak; 2 % and three rows beyond leave a margin
    lit = np.flatnonzero((beam.intensity >= 0.02 * peak).any(axis=1))
    rows = min(int(lit[-1]) + 3, len(beam.theta)) if lit.size else len(beam.theta)
    beam = replace(beam, theta=beam.theta[:rows], intensity=beam.intensity[:rows], saturated=beam.saturated[:rows])
    rel = np.clip(beam.intensity / peak, 0.0, None) * TONE_PEAK_LEVEL
    power = Response("gamma", 2.2)
    with np.errstate(invalid="ignore"):
        reread = power.decode(Response().encode(rel))
    peak2 = float(power.decode(Response().encode(TONE_PEAK_LEVEL)))
    base = iso13694(beam, peak, values_only=True)
    moved = iso13694(replace(beam, intensity=reread), peak2, values_only=True)
    change = dict(zip(ISO_FIGURES, _iso_change(moved, base), strict=True))
    out = dict(figs)
    for key in keys:
        f = figs[key]
        term = float(change[key] / np.sqrt(3.0))
        if not term > 0:
            continue
        u = float(np.hypot(f.uncertainty, term))
        tone = dict(f.budget or ()).get("tone curve", 0.0)
        status = "estimate" if tone ** 2 + term ** 2 > 0.5 * u ** 2 else f.status
        out[key] = replace(f, uncertainty=u, status=status,
                           reason=f.reason if status == f.status else
                           "the tone curve is assumed, and its possible error makes most of the uncertainty",
                           budget=(f.budget or (("pixel noise", f.uncertainty),)) + (("tone curve shape", term),))
    return out


def _shape_once(beam: BeamMap, shape, pixel_deg: float, scale_u: float, correlation_deg: float,
                seed: int, with_rings: bool = True, coding_rel: np.ndarray | None = None) -> ShapeResult:
    """:func:`shape_figures` without the tone-curve term (and without the rings if not ``with_rings``)."""
    rng = np.random.default_rng(seed)
    figs: dict[str, Figure] = {}
    noise = noise_model(beam, pixel_deg)
    pk, hot, edge = shape.peak, shape.hotspot, shape.edge
    edge_deg = float(np.degrees(np.nanmin(edge.theta))) if edge.complete else None
    clipped_reason = ("the hotspot is clipped (overexposed) in the photo; lower the exposure (shorter time or "
                      "lower ISO) or give a bracket") if pk.clipped else None
    hot_full = float(np.degrees(hot.full_angle())) if hot.complete else float("nan")

    # ---- ISO 11146 second moments of the hotspot (spill and noise excluded)
    px, py = _ae(pk.vector)
    iso_method = ("ISO 11146-1 second-moment (D4sigma) diameter of the hotspot on the azimuthal-equidistant plane; "
                  f"spill model a + b theta^2 subtracted, cells below {N_T:g} sigma of noise dropped (ISO 11146-3), "
                  "integrated within d of the centroid (docs/artefacts.md)")
    if clipped_reason:
        mom = None
        reason = clipped_reason
    elif not np.isfinite(hot_full):
        mom, reason = None, "the 50 % contour runs off the photo; step back or use a wider lens"
    else:
        mom = hotspot_moments(beam, (float(px), float(py)), 1.2 * hot_full, noise,
                              0.9 * edge_deg if edge_deg is not None else None)
        reason = mom.reason
    if mom is None or mom.reason:
        for key, unit in (("d4sigma_major", "deg"), ("d4sigma_minor", "deg"), ("d4sigma_ellipticity", ""),
                          ("d4sigma_azimuth", "deg")):
            figs[key] = not_measured(unit, iso_method, reason)
        centroid = _contour_centre(pk, hot) if hot.complete else (float(px), float(py))
    else:
        centroid = mom.centroid
        for key, v, s_n, s_m in (("d4sigma_major", mom.d_major, mom.d_major_sigma, mom.d_major_model),
                                 ("d4sigma_minor", mom.d_minor, mom.d_minor_sigma, mom.d_minor_model)):
            budget = (("pixel noise", s_n), ("spill model", s_m), ("wall scale", scale_u * v))
            figs[key] = Figure(v, float(np.sqrt(s_n ** 2 + s_m ** 2 + (scale_u * v) ** 2)), "deg",
                               iso_method + (": major axis" if key.endswith("major") else ": minor axis"),
                               budget=budget)
        ell = mom.ellipticity
        # relative 1-sigma of the ratio: noise and spill model of both diameters (the wall scale cancels)
        rel = np.hypot(np.hypot(mom.d_major_sigma, mom.d_major_model) / mom.d_major,
                       np.hypot(mom.d_minor_sigma, mom.d_minor_model) / max(mom.d_minor, 1e-12))
        figs["d4sigma_ellipticity"] = Figure(ell, float(ell * rel), "", iso_method + ": d_minor / d_major "
                                             "(ISO 11146: above 0.87 the beam counts as round)")
        az_method = iso_method + ": azimuth of the major axis (0-180 deg, counter-clockwise from the right)"
        if 1.0 - ell < max(ROUND_SIGMAS * ell * rel, ROUND_MIN) or mom.azimuth_sigma > 30.0:
            figs["d4sigma_azimuth"] = not_measured("deg", az_method, "the hotspot is round within its noise, so "
                                                   "its principal axes have no orientation")
        else:
            figs["d4sigma_azimuth"] = Figure(mom.azimuth, max(mom.azimuth_sigma, 1e-3), "deg", az_method)

    # ---- centre hole, hotspot sectors and the transition, from rays about the hotspot's centroid
    cvec = directions(np.radians(np.hypot(*centroid)), np.arctan2(centroid[1], centroid[0]))
    reach = 1.5 * hot_full if np.isfinite(hot_full) else 10.0
    step = float(np.degrees(beam.d_theta))
    r = np.arange(0.0, reach, step)
    n_az = 180
    bear = np.arange(n_az) * 2 * np.pi / n_az
    ray_vec = _rays(cvec, bear, np.radians(r))
    vals = beam.sample(ray_vec)  # (n_az, n_r)
    _hole_figures(figs, r, vals, noise, pixel_deg, hot_full, clipped_reason, scale_u)
    # ---- rings (beyond a centre hole, which is not a ring)
    rings: tuple = ()
    if with_rings:
        search = find_rings(beam, noise, outer_deg=edge_deg, pixel_deg=pixel_deg,
                            exclude_below_deg=figs["centre_hole_width"].value or 0.0, correlation_deg=correlation_deg,
                            coding_rel=coding_rel)
        _ring_figures(figs, search, clipped_reason, scale_u)
        rings = search.rings
    spill_from = (float(np.hypot(*mom.centroid)) + mom.radius if mom is not None and not mom.reason else
                  float(np.degrees(shape.field.full_angle())) if shape.field.complete else float("nan"))
    _sector_figures(figs, beam, r, vals, noise, hot_full, edge_deg, clipped_reason, pixel_deg, spill_from,
                    correlation_deg)
    _transition_figure(figs, r, vals, cvec, bear, mom, noise, clipped_reason, scale_u, ray_vec)

    # ---- principal axes of the hotspot (50 % contour) and of the spill (its edge)
    if clipped_reason or not hot.complete:
        for k, u in (("major_angle", "deg"), ("minor_angle", "deg"), ("ellipticity", ""), ("orientation", "deg")):
            figs[f"hotspot_{k}"] = not_measured(u, "ellipse fitted to the 50 % contour", clipped_reason or
                                                "the 50 % contour runs off the photo; step back or use a wider lens")
    else:
        x, y = (v.ravel() for v in _contour_points(pk, hot))
        s = np.degrees(hot.sigma)
        sx, sy = s * np.abs(np.cos(hot.bearings)), s * np.abs(np.sin(hot.bearings))
        figs.update(_ellipse_figures("hotspot", x, y, sx, sy,
                                     scale_u, "50 % contour (72 rays from the peak)", rng))
    edge_reason = _clipped_edge_reason(shape, beam) if pk.clipped else None
    if edge_reason or not edge.complete:
        for k, u in (("major_angle", "deg"), ("minor_angle", "deg"), ("ellipticity", ""), ("orientation", "deg")):
            figs[f"spill_{k}"] = not_measured(
                u, "ellipse fitted to the spill edge",
                edge_reason or "the spill edge is not complete in the photo; step back or use a wider lens")
    else:
        th = np.degrees(edge.theta)
        x, y = th * np.cos(edge.phi), th * np.sin(edge.phi)
        s = np.degrees(edge.sigma)
        figs.update(_ellipse_figures("spill", x, y, s * np.abs(np.cos(edge.phi)), s * np.abs(np.sin(edge.phi)),
                                     scale_u, "spill edge (36 sectors)", rng))

    # ---- ISO 13694 on the hotspot
    iso_m = ("ISO 13694 on the intensity map about the peak (area on the azimuthal-equidistant plane)")
    if clipped_reason:
        for key in ("hotspot_flatness", "hotspot_uniformity", "hotspot_edge_steepness"):
            figs[key] = not_measured("", iso_m, clipped_reason)
    else:
        spill_level = (mom.spill_at(mom.radius + np.hypot(*centroid)) / pk.value
                       if mom is not None and not mom.reason else None)
        # the pass on the tone-bent map (no rings) gives values only: its noise is not used
        res = iso13694(beam, pk.value, noise, correlation_deg=correlation_deg, values_only=not with_rings)
        edge_reason = None
        if not shape.field.complete:
            edge_reason = "the 10 % contour runs off the photo; step back or use a wider lens"
        elif spill_level is not None and spill_level > 0.5 * 0.1:
            edge_reason = (f"the spill beside the hotspot is at {spill_level:.0%} of the peak, too close to the 10 % "
                           "clip level for an edge steepness of the hotspot")
        # the map's sampling: the change when the map is blurred once more by its sampling footprint
        blur = _resolution_changed(beam, pk, noise, res, pixel_deg) if with_rings else (0.0, 0.0, 0.0)
        # the peak fit's noise: every clip level and the flatness's divisor move with the fitted peak
        peak = _peak_changed(beam, pk, noise, res, pixel_deg) if with_rings else (0.0, 0.0, 0.0)
        if not hot.complete:
            r50 = "the 50 % contour runs off the photo; step back or use a wider lens"
            figs["hotspot_flatness"] = not_measured("", iso_m, r50)
            figs["hotspot_uniformity"] = not_measured("", iso_m, r50)
        else:
            figs["hotspot_flatness"] = _iso_figure(res.flatness, res.flatness_sigma, peak[0], blur[0],
                                                   iso_m + ": flatness F = mean over A_0.5 / peak (1: flat top)")
            figs["hotspot_uniformity"] = _iso_figure(res.uniformity, res.uniformity_sigma, peak[1], blur[1],
                                                     iso_m + ": uniformity U = RMS deviation over A_0.5 / its mean, "
                                                     "the cells' noise variance removed (0: uniform)")
        if edge_reason:
            figs["hotspot_edge_steepness"] = not_measured("", iso_m, edge_reason)
        else:
            figs["hotspot_edge_steepness"] = _iso_figure(res.edge_steepness, res.edge_steepness_sigma, peak[2],
                                                         blur[2], iso_m + ": edge steepness s = (A_0.1 - A_0.9) / "
                                                         "A_0.1 (0: vertical edge)")
    ordered = {k: figs[k] for k in SHAPE_ORDER if k in figs}
    return ShapeResult(ordered, rings, tuple(centroid))


def _iso_figure(value: float, noise: float, peak: float, blur: float, method: str) -> Figure:
    """An ISO 13694 figure with its pixel-noise, peak-fit and map-sampling terms.

    The peak fit and the areas share pixels (the fit's disc lies inside the 0.9 contour, and its
    rim pixels weigh negatively in the fitted top): over 8 noise draws of a 4 deg beam the edge
    steepness's error from the peak and that from the areas correlated by +0.8.  The two terms are
    therefore added linearly (correlation +1, JCGM 100:2008 5.2.2), the sampling term in quadrature
    (the budget lists them apart; its quadrature sum is less than the uncertainty)."""
    return Figure(value, float(np.hypot(noise + peak, blur)), "", method,
                  budget=(("pixel noise", noise), ("peak fit", peak),
                          ("map sampling", blur)))


def _peak_changed(beam: BeamMap, pk, noise, res, pixel_deg: float = 0.0) -> tuple[float, float, float]:
    """How much flatness, uniformity and edge steepness change when the fitted peak ``E_max`` moves
    by its own 1-sigma noise (:func:`beamshot.hotspot.peak_rel_noise`): the clip levels move with it, and the
    flatness is divided by it."""
    rel = peak_rel_noise(pk, pixel_deg)
    if not rel > 0:
        return 0.0, 0.0, 0.0
    return _iso_change(iso13694(beam, pk.value * (1.0 + rel), noise, values_only=True), res)


def _iso_change(moved, res) -> tuple[float, float, float]:
    """Absolute changes of flatness, uniformity and edge steepness from ``res`` to ``moved`` (0 if unknown)."""
    deltas = (moved.flatness - res.flatness, moved.uniformity - res.uniformity,
              moved.edge_steepness - res.edge_steepness)
    return tuple(float(abs(d)) if np.isfinite(d) else 0.0 for d in deltas)


#: rms width of the footprint a map cell is sampled through, in working pixels: the working pixel
#: (a box, rms 1/sqrt 12) and the bilinear sampling between pixels (a triangle, rms 1/sqrt 6) add in
#: quadrature to 1/2 (variances of convolved kernels add)
FOOTPRINT_RMS_PIXELS = 0.5


def _resolution_changed(beam: BeamMap, pk, noise, res, pixel_deg: float) -> tuple[float, float, float]:
    """How much flatness, uniformity and edge steepness change when the map is blurred along theta
    by a Gaussian of the footprint's rms width (:data:`FOOTPRINT_RMS_PIXELS` working pixels).

    The map is the beam seen through that footprint (and the camera's optics, not known here).  A
    figure that depends smoothly on the blur's variance ``b`` moves by ``f'(b0) b`` between ``b0``
    and ``b0 + b``, to first order the same as between ``b0 - b`` and ``b0``: blurring once more
    estimates the bias the sampling gave, which is kept as the "map sampling" term rather
    than corrected (the optics' own blur is not known).  Along theta only: the hotspot's edge is
    radial.  The peak is lowered with the map (the ratio of the blurred to the measured map over
    the cells about the peak)."""
    step = float(np.degrees(beam.d_theta))
    if not pixel_deg > 0 or not step > 0:
        return 0.0, 0.0, 0.0
    from .smoothing import gaussian_filter1d

    sigma_rows = FOOTPRINT_RMS_PIXELS * pixel_deg / step
    # the rows the measures look at (down to the lowest clip level, below 10 % of the peak) and the
    # blur's reach beyond them; the rest of the map does not enter
    lit = np.flatnonzero((beam.intensity >= 0.05 * pk.value).any(axis=1))
    rows = min(beam.intensity.shape[0], (int(lit[-1]) if lit.size else 0) + int(np.ceil(4 * sigma_rows)) + 3)
    inten = beam.intensity[:rows]
    bad = ~np.isfinite(inten)
    # normalised convolution: cells outside the photo neither count nor pull their neighbours down
    with np.errstate(invalid="ignore", divide="ignore"):
        blurred = (gaussian_filter1d(np.where(bad, 0.0, inten), sigma_rows, axis=0, mode="nearest")
                   / gaussian_filter1d((~bad).astype(float), sigma_rows, axis=0, mode="nearest"))
    blurred[bad] = np.nan
    beam = replace(beam, theta=beam.theta[:rows], intensity=inten, saturated=beam.saturated[:rows])
    i = int(np.clip(np.searchsorted(beam.theta, pk.theta), 0, inten.shape[0] - 1))
    j = int(np.argmin(np.abs(np.angle(np.exp(1j * (beam.phi - pk.phi))))))
    rows = slice(max(i - 2, 0), i + 3)
    cols = np.arange(j - 2, j + 3) % inten.shape[1]
    with quiet_nan():
        ratio = float(np.nansum(blurred[rows][:, cols]) / np.nansum(inten[rows][:, cols]))
    if not np.isfinite(ratio) or ratio <= 0:
        return 0.0, 0.0, 0.0
    return _iso_change(iso13694(replace(beam, intensity=blurred), pk.value * ratio, noise, values_only=True), res)


def _ring_figures(figs: dict, search, clipped_reason, scale_u: float = 0.0) -> None:
    # a JPEG's rings are held to hypot(6 sigma_fit, 3 sigma_coding) (beamshot.rings): their amplitude
    # over its total 1-sigma may be as low as 3, so the method says which test it was
    threshold = (f"when deeper than hypot({RING_SIGNIFICANCE:g} x the fit's 1-sigma, {CODING_SIGNIFICANCE:g} x the "
                 "1-sigma of the JPEG's coding errors)" if search.coding or any(r.coding_sigma for r in search.rings)
                 else f"at {RING_SIGNIFICANCE:g} sigma")
    method = ("rings: ripple of the azimuthal-mean profile about the beam axis beyond a smooth profile "
              "(Savitzky-Golay, 3 deg) and the noise; log profile fitted with a quintic and a Gaussian ring, "
              f"reported {threshold}")
    listed = "; ".join(f"{r.kind} {r.amplitude:+.1%} at {r.angle_deg:.1f} deg, {r.width_deg:.1f} deg wide"
                       for r in search.rings)
    if listed:
        method += f"; rings found: {listed}"
    if clipped_reason or search.reason:
        why = clipped_reason or search.reason
        for key, unit in (("ring_score", ""), ("ring_count", ""), ("ring_angle", "deg"), ("ring_amplitude", ""),
                          ("ring_width", "deg")):
            figs[key] = not_measured(unit, method, why)
        return
    best = search.strongest
    searched = (f"searched from {search.searched_deg[0]:.1f} to {search.searched_deg[1]:.1f} deg from the axis, "
                f"rings up to {MAX_FWHM_DEG:g} deg wide (wider ones are part of the smooth profile, not seen)")
    if best is None:
        why = (f"no ring distinguishable from noise and the JPEG's coding errors ({searched})" if search.coding else
               f"no ring distinguishable from noise ({searched})")
        figs["ring_score"] = Figure(search.limit, None, "", method + "; ring score: the largest |amplitude| of a ring; "
                                    "with none found, the amplitude a 1 deg wide ring would need to be found at 9 in "
                                    "10 of the angles searched (the dimmest tenth needs more; a ring "
                                    f"wider than {MAX_FWHM_DEG:g} deg is not searched for)",
                                    "upper_bound", why)
        figs["ring_count"] = Figure(0.0, 0.0, "", method + f"; {searched}")
        for key, unit in (("ring_angle", "deg"), ("ring_amplitude", ""), ("ring_width", "deg")):
            figs[key] = not_measured(unit, method, why)
        return
    amplitude_budget = (("pixel noise", best.amplitude_sigma),) + ((("JPEG coding", best.coding_sigma),)
                                                                     if best.coding_sigma else ())
    figs["ring_score"] = Figure(abs(best.amplitude), best.total_sigma, "",
                                method + "; ring score: the largest |amplitude| of a ring relative to the smooth "
                                "profile", budget=amplitude_budget)
    figs["ring_count"] = Figure(float(len(search.rings)), 0.0, "", method + f"; {searched}")
    su_a, su_w = scale_u * best.angle_deg, scale_u * best.width_deg
    figs["ring_angle"] = Figure(best.angle_deg, float(np.hypot(best.angle_sigma, su_a)), "deg",
                                method + "; the strongest ring's angle from the beam axis",
                                budget=(("pixel noise", best.angle_sigma), ("wall scale", su_a)))
    figs["ring_amplitude"] = Figure(best.amplitude, best.total_sigma, "",
                                    method + "; the strongest ring's amplitude "
                                    "relative to the smooth profile (+ bright, - dark)", budget=amplitude_budget)
    figs["ring_width"] = Figure(best.width_deg, float(np.hypot(best.width_sigma, su_w)), "deg",
                                method + "; the strongest ring's full width at half maximum",
                                budget=(("pixel noise", best.width_sigma), ("wall scale", su_w)))


def _hole_figures(figs, r, vals, noise, pixel_deg, hot_full, clipped_reason, scale_u) -> None:
    """Centre hole: depth ``1 - c / m`` of the level ``c`` at the hotspot's centre (a parabola in r
    fitted within ``3 r0``) below the surrounding maximum ``m`` of the (lightly smoothed) azimuthal-mean
    profile about it; width: full
    angle where the profile has risen half-way from ``c`` to ``m``."""
    method = ("centre hole: the level at the hotspot's centre (c + k r^2 fitted within 3 r0) against the maximum of "
              "the azimuthal-mean profile about it (Savitzky-Golay, 1 deg); depth 1 - centre / maximum, width the full "
              f"angle at half depth; reported at {HOLE_SIGNIFICANCE:g} sigma and {HOLE_MIN_DEPTH:.0%}")
    if clipped_reason or not np.isfinite(hot_full):
        why = clipped_reason or "the 50 % contour runs off the photo; step back or use a wider lens"
        figs["centre_hole_depth"] = not_measured("", method, why)
        figs["centre_hole_width"] = not_measured("deg", method, why)
        return


    step = r[1] - r[0]
    with np.errstate(invalid="ignore"):
        prof = np.nanmean(vals, axis=0)
    r0 = max(0.3, 2.0 * pixel_deg)
    # the level at the centre: p(r) = c + k r^2 fitted to the azimuthal-mean profile within 3 r0 (a
    # dip's bottom is a parabola), each ring of samples weighted by its independent pixels, so that
    # the curvature of a narrow hole does not lift the centre as a plain mean over a disc would
    near = (r <= 3.0 * r0) & np.isfinite(prof)
    n_ring = np.minimum(vals.shape[0], 2 * np.pi * np.maximum(r[near], step) / max(pixel_deg, step))
    sig = noise.sigma(prof[near]) / np.sqrt(np.maximum(n_ring, 1.0))
    a = np.stack([np.ones(near.sum()), r[near] ** 2], axis=1) / sig[:, None]
    coef, *_ = np.linalg.lstsq(a, prof[near] / sig, rcond=None)
    c = float(coef[0])
    s_c = float(np.sqrt(np.linalg.inv(a.T @ a)[0, 0]))
    win = int(round(1.0 / step)) | 1
    sm = savgol(np.nan_to_num(prof, nan=0.0), win, 2) if len(prof) > win else prof
    out = r > r0
    k = int(np.argmax(np.where(out, sm, -np.inf)))
    m = float(sm[k])
    circ = 2 * np.pi * max(r[k], step)
    n_m = (min(vals.shape[0], circ / pixel_deg) if pixel_deg > 0 else vals.shape[0]) * win
    s_m = float(noise.sigma(m) / np.sqrt(max(n_m, 1.0)))
    depth = 1.0 - c / m if m > 0 else float("nan")
    s_depth = float(np.hypot(s_c / m, c * s_m / m ** 2)) if m > 0 else float("nan")
    if not np.isfinite(depth):
        figs["centre_hole_depth"] = not_measured("", method, "the hotspot has no level to compare with")
        figs["centre_hole_width"] = not_measured("deg", method, "the hotspot has no level to compare with")
        return
    if depth < max(HOLE_SIGNIFICANCE * s_depth, HOLE_MIN_DEPTH):
        bound = max(depth, 0.0) + HOLE_SIGNIFICANCE * s_depth
        why = "no dip at the hotspot's centre distinguishable from noise"
        figs["centre_hole_depth"] = Figure(max(bound, HOLE_MIN_DEPTH), None, "", method, "upper_bound", why)
        figs["centre_hole_width"] = not_measured("deg", method, why)
        return
    half = c + 0.5 * (m - c)
    above = np.flatnonzero((sm >= half) & (r > r0 / 2))
    i = int(above[0]) if above.size else k
    if i > 0 and sm[i] != sm[i - 1]:
        rh = r[i - 1] + (half - sm[i - 1]) / (sm[i] - sm[i - 1]) * step
        slope = (sm[i] - sm[i - 1]) / step
    else:
        rh, slope = r[i], np.inf
    s_r = float(np.hypot(noise.sigma(half) / np.sqrt(max(n_m / win, 1.0)) / max(slope, 1e-300), step / np.sqrt(12)))
    width = 2.0 * rh
    figs["centre_hole_depth"] = Figure(depth, s_depth, "", method + ": depth")
    figs["centre_hole_width"] = Figure(width, float(np.hypot(2 * s_r, scale_u * width)), "deg", method + ": width",
                                       budget=(("pixel noise", 2 * s_r), ("wall scale", scale_u * width)))


def _sector_profile(vals_rows: np.ndarray, smooth_cells: int) -> np.ndarray:
    """Azimuthal profile of a zone: each row divided by its own mean (the radial fall-off cancels),
    averaged over the rows, then a running mean of ``smooth_cells`` (wrapping)."""
    with np.errstate(invalid="ignore"):
        rel = vals_rows / np.nanmean(vals_rows, axis=1, keepdims=True)
        a = np.nanmean(rel, axis=0)
    kern = np.ones(smooth_cells) / smooth_cells
    pad = np.concatenate([a[-smooth_cells:], a, a[:smooth_cells]])
    return np.convolve(pad, kern, mode="same")[smooth_cells:-smooth_cells]


def _sector_figure(zone, rows, az_step_deg, band_rows, method, clipped_reason, corr_rows: float = 0.0,
                   circle_deg: float = float("inf"), correlation_deg: float = 0.0):
    """RMS of the zone's azimuthal profile with the noise's share removed.  The noise is measured:
    the zone's rows are split into alternating radial bands of ``band_rows`` (wider than a pixel),
    whose two profiles differ by noise only where the sectors run radially (a seam, an LED's
    corner): ``noise RMS of the full profile = RMS(a_1 - a_2) / 2``.

    The two halves must not share their noise: errors correlated over ``corr_rows`` rows (a JPEG
    block) cancel in the difference of bands narrower than that, and a round wide beam's noise was
    read 3-4 times too small (0.0003 where six noise draws scattered by 0.0011), so that noise was
    left in the value (0.13 % where the beam has none).  The bands are made ``corr_rows`` wide when
    the zone holds two of them; else, with correlated blocks of ``c`` rows, two neighbouring bands
    of ``w < c`` rows lie in the same block with probability ``1 - w / c`` and then differ by
    nothing, so the difference keeps ``w / c`` of the noise variance: the estimate is multiplied by
    ``sqrt(c / w)``.

    The profile's independent sectors are ``360 / SECTOR_SMOOTH_DEG``, or fewer when the zone's
    middle circle (``circle_deg`` around) holds fewer correlation lengths (``correlation_deg``)."""
    if clipped_reason:
        return not_measured("", method, clipped_reason)
    if rows.shape[0] < 2 * band_rows:
        return not_measured("", method, f"the {zone} is too small or not in the photo")
    if np.mean(np.isfinite(rows)) < 0.95:
        return not_measured("", method, f"the photo does not cover the whole {zone}")
    inflate = 1.0
    if corr_rows > band_rows:
        wide = int(np.ceil(corr_rows))
        if rows.shape[0] >= 2 * wide:
            band_rows = wide
        else:
            inflate = float(np.sqrt(corr_rows / band_rows))
    cells = max(1, int(round(SECTOR_SMOOTH_DEG / az_step_deg)))
    a = _sector_profile(rows, cells)
    band = (np.arange(rows.shape[0]) // band_rows) % 2 == 0
    diff = _sector_profile(rows[band], cells) - _sector_profile(rows[~band], cells)
    noise = inflate * float(np.sqrt(np.nanmean((diff - np.nanmean(diff)) ** 2)) / 2.0)
    rms = float(np.sqrt(np.nanmean((a - np.nanmean(a)) ** 2)))
    n_ind = 360.0 / SECTOR_SMOOTH_DEG  # independent sectors of the profile
    if correlation_deg > 0:
        n_ind = float(np.clip(circle_deg / correlation_deg, 2.0, n_ind))
    darkest = float(np.argmin(a) * az_step_deg)
    brightest = float(np.argmax(a) * az_step_deg)
    if rms <= SECTOR_SIGNIFICANCE * noise:
        # a noise-only profile's RMS is the noise's; up to 3 times it is not distinguishable from it
        bound = float(np.sqrt(max((SECTOR_SIGNIFICANCE * noise) ** 2 - noise ** 2, 0.0)))
        return Figure(max(bound, float(np.sqrt(max(rms ** 2 - noise ** 2, 0.0)))), None, "", method, "upper_bound",
                      f"no sector of the {zone} distinguishable from noise")
    value = float(np.sqrt(rms ** 2 - noise ** 2))
    # spread of an RMS over n independent sectors: about RMS / sqrt(2 n) (chi distribution), noise-dominated part
    u = float(np.hypot(noise * np.sqrt(2.0 / n_ind), noise ** 2 / value))
    where = (f"; darkest toward {darkest:.0f} deg, brightest toward {brightest:.0f} deg (counter-clockwise from "
             "the right)")
    return Figure(value, u, "", method + where)


def _sector_figures(figs, beam, r, vals, noise, hot_full, edge_deg, clipped_reason, pixel_deg, spill_from,
                    correlation_deg: float = 0.0) -> None:
    """RMS relative azimuthal variation (``SECTOR_SMOOTH_DEG`` resolution) of the hotspot zone (about
    its centroid, 0.3 to 1 times the 50 % half angle) and of the spill zone (about the beam axis,
    from ``spill_from`` - where the hotspot's own light has faded: the D4sigma integration radius
    beyond the centroid, else twice the 10 % contour's half angle - to 90 % of the spill edge),
    the noise removed."""
    base = ("sectors: RMS of the azimuthal profile of the {zone} (each row over its own mean, averaged over the "
            f"zone's rows, {SECTOR_SMOOTH_DEG:g} deg running mean), the noise's share removed; includes the effect "
            "of an oval or offset beam")
    h = 0.5 * hot_full if np.isfinite(hot_full) else float("nan")
    step = float(np.degrees(beam.d_theta))
    band = max(3, int(np.ceil(2.0 * pixel_deg / step)))
    corr_rows = correlation_deg / step if step > 0 else 0.0
    # hotspot zone: the rays about the centroid
    if np.isfinite(h):
        sel = (r >= 0.3 * h) & (r <= h)
        rows = vals[:, sel].T
        figs["sector_nonuniformity_hotspot"] = _sector_figure(
            "hotspot", rows, 360.0 / vals.shape[0], band,
            base.format(zone="hotspot (about its centroid, 0.3 to 1 times the 50 % half angle)"), clipped_reason,
            corr_rows, 2.0 * np.pi * 0.65 * h, correlation_deg)
    else:
        figs["sector_nonuniformity_hotspot"] = not_measured("", base.format(zone="hotspot"),
                                                            clipped_reason or "the 50 % contour runs off the photo")
    # spill zone: map rows about the beam axis
    tdeg = np.degrees(beam.theta)
    outer = 0.9 * edge_deg if edge_deg is not None else None
    method = base.format(zone="spill (about the beam axis, from where the hotspot's own light has faded to 90 % of "
                              "the spill edge)")
    if outer is None or not np.isfinite(spill_from):
        figs["sector_nonuniformity_spill"] = not_measured("", method, "the spill edge is not complete in the photo"
                                                          if outer is None else "the hotspot's extent is not known")
        return
    sel = (tdeg >= spill_from) & (tdeg <= outer)
    rows = beam.intensity[sel]
    figs["sector_nonuniformity_spill"] = _sector_figure("spill", rows, float(np.degrees(beam.d_phi)), band, method,
                                                        clipped_reason, corr_rows, np.pi * (spill_from + outer),
                                                        correlation_deg)


def _transition_figure(figs, r, vals, cvec, bear, mom, noise, clipped_reason, scale_u, vec=None) -> None:
    """Hotspot-to-spill transition: the angle over which the hotspot's own light (the map minus the
    spill model) falls from 90 % to 10 % of its maximum, on the azimuthal mean about its centroid
    (the 10-90 % edge width of imaging practice, common practice).  A Gaussian gives 1.687 sigma."""
    method = ("hotspot-to-spill transition: the map minus the spill model (as for D4sigma), azimuthal mean about the "
              "hotspot's centroid; angle from its 90 % to its 10 % level")
    if clipped_reason or mom is None or mom.reason:
        figs["hotspot_transition_width"] = not_measured("deg", method, clipped_reason or (mom.reason if mom else
                                                                                           "no hotspot to measure"))
        return
    if vec is None:  # the rays ``vals`` were sampled along
        vec = _rays(cvec, bear, np.radians(r))
    th = np.degrees(np.arccos(np.clip(vec[..., 2], -1.0, 1.0)))
    e = vals - mom.spill_at(th)
    with np.errstate(invalid="ignore"):
        prof = np.nanmean(e, axis=0)
    step = r[1] - r[0]


    win = int(round(0.5 / step)) | 1
    sm = savgol(np.nan_to_num(prof, nan=0.0), win, 2) if len(prof) > win else prof
    k = int(np.argmax(sm))
    top = sm[k]
    crossings = []
    for level in (0.9, 0.1):
        below = np.flatnonzero(sm[k:] < level * top)
        if not below.size:
            figs["hotspot_transition_width"] = not_measured("deg", method, "the hotspot does not fall to 10 % of its "
                                                            "own light inside the measured range")
            return
        i = k + int(below[0])
        rr = r[i - 1] + (sm[i - 1] - level * top) / (sm[i - 1] - sm[i]) * step
        slope = (sm[i - 1] - sm[i]) / step
        s_r = noise.sigma(level * top + float(np.interp(rr, r, mom.spill_at(r)))) / np.sqrt(vals.shape[0]) / slope
        crossings.append((rr, float(np.hypot(s_r, step / np.sqrt(12)))))
    width = crossings[1][0] - crossings[0][0]
    s_n = float(np.hypot(crossings[0][1], crossings[1][1]))
    figs["hotspot_transition_width"] = Figure(width, float(np.hypot(s_n, scale_u * width)), "deg", method,
                                              budget=(("pixel noise", s_n), ("wall scale", scale_u * width)))
