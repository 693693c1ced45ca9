"""The uncertainty model: every known error source, propagated by doing what it does.

Each source is a :class:`Term`: its name, how it acts on the measurement, whether it is shared
with other analyses (same meter, same camera profile), its size, and the 1-sigma change it
causes in every figure.  A term's change is found the way the error arises: the map is rebuilt
with the distance moved by u(D), the wall scale stretched by u(f), the tone curve bent, the
lens shading put back, and the figures are measured again (one-sided finite differences,
GUM JCGM 100:2008 section 5.1.3); a global scale error multiplies the absolute figures.  Terms
are independent of each other, so a figure's standard uncertainty is the root sum of squares
of its terms (GUM 5.1.2).  Terms shared *between figures* need no special care: a ratio such as
Ra is re-measured as a ratio, so a shared scale cancels in it exactly (GUM 5.2, the correlated
form gives the same result).

How the sources act (the budget table in docs/figures.md lists their sizes):

- distance to the wall D: the map is rebuilt at D + u(D); with the camera beside the light its
  view of the wall scales with D as well (pinhole mapping), so angles stay and flux goes as D^2;
  with a target or wall points the wall scale is fixed and the angles atan(rho / D) move.
- wall scale (focal length, or the target/point mapping's scale): the mapping is stretched about
  the beam's foot point by 1 + u, so tan(theta) of every direction scales by 1 + u.
- hand-placed wall points: each point is moved by a random amount of the stated click accuracy and
  the mapping re-fitted, several times; the spread of the figures is the term.
- absolute scale (lux meter, camera constant or exposure metadata): multiplies intensities and
  fluxes, cancels in every angle and in Ra.  With a lux reading at the peak, the peak intensity
  is E D^2 / cos^3(incidence) and does not depend on the pixel values at all.
- peak fit noise: moves the relative peak, hence the peak intensity (without a meter) or every
  flux (with a meter, whose reading is matched to that peak).
- pixel noise along the contours and the spill edge: the crossings' own noise (independent
  rays) and the zone boundaries moved by it.
- tone curve (linearisation): a response error that grows with the signal's span acts on a
  ratio of two intensities like a power law, ``I' = I (I / I_peak)^eps`` (a gamma error
  ``eps``); its size comes from the measured disagreement of bracket frames or of the profile's
  calibration, ``eps = delta / ln(RATIO_SPAN)``, or is an assumption when the curve was not
  measured.
- lens shading: a gain ``V`` across the photo.  With no flat field the photo may keep anything
  between no fall-off and the envelope (natural cos^4 of the field angle, plus extra lens shading
  at the corner); the figures are re-measured with the envelope divided out, and the change over
  sqrt(3) is the term: the RMS of an uncorrected error spread evenly between none and all of the
  envelope (rectangular distribution, GUM 4.3.7).  With a flat field, a residual shading
  twice the fit's RMS residual at the corner.
- pixel footprint: a contour edge is known to about one working pixel (uniform, p / sqrt(12) per
  edge), and both edges of a full angle move together when the photo is coarse.
"""

from __future__ import annotations

from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field, replace
from functools import partial

import numpy as np

from .beammap import BeamMap
from .camera.linearize import LinearImage
from .hotspot import N_BEARINGS, peak_rel_noise
from .measure import ANGLE_KEYS
from .spill import SECTOR_DEG
from .photometry import beam_distance_m, illuminance_on_wall
from .scale import AbsoluteScale
from .wall import WallMapping

__all__ = [
    "RATIO_SPAN",
    "ASSUMED_RESPONSE_EXPONENT_SIGMA",
    "SHADING_CORNER_ENVELOPE",
    "WALL_POINT_CLICK_SIGMA_PX",
    "WALL_POINT_DRAWS",
    "ASSUMPTION_SHARE_FOR_ESTIMATE",
    "Term",
    "Budget",
    "ToneBent",
    "absolute_values",
    "scale_factor",
    "tone_bent",
    "shading_gain",
    "shading_divided",
    "with_luminance",
    "mapping_stretched",
    "term_from_change",
]

#: Span of intensities over which a ratio error ``delta`` is quoted: peak to 1 % of peak (the
#: spill of a typical reflector sits at 0.5-5 % of the peak; project choice).
RATIO_SPAN = 100.0
#: 1-sigma error of the exponent of an assumed (unmeasured) tone curve.  Cameras' JPEG engines
#: depart from the curve they are assumed to follow (sRGB) by S-curves and local tone mapping.
#: An assumption, stated in every report that uses it: 0.075 puts a pure gamma-2.4 camera read as
#: sRGB (a ratio error of about 2x between the peak and 1 % of it, so eps ~ 0.15) at 2 sigma.
ASSUMED_RESPONSE_EXPONENT_SIGMA = 0.075
#: Extra lens shading at the photo's corner beyond natural cos^4 fall-off, for the envelope of
#: uncorrected shading (assumption; common practice puts uncorrected lenses at 10-30 % wide open).
SHADING_CORNER_ENVELOPE = 0.20
#: 1-sigma placement error of a wall point picked by hand in the photo, pixels (assumption).
WALL_POINT_CLICK_SIGMA_PX = 0.5
#: Monte Carlo draws for the hand-placed wall points term (seeded, so reports are repeatable).
WALL_POINT_DRAWS = 8
#: A figure is an estimate when assumptions make up more than this share of its variance.
ASSUMPTION_SHARE_FOR_ESTIMATE = 0.5

_ABSOLUTE_KEYS = ("peak_intensity", "beam_distance", "hotspot_flux", "spill_flux", "beam_flux")


@dataclass(frozen=True)
class Term:
    """One error source: how it acts, whether it is shared, its size, and its 1-sigma effect per figure."""

    source: str
    acts: str
    size: str
    shared: bool = False
    assumption: bool = False
    deltas: dict[str, float] = field(default_factory=dict)

    def to_dict(self) -> dict:
        return {"source": self.source, "acts": self.acts, "size": self.size, "shared": self.shared,
                "assumption": self.assumption}


@dataclass(frozen=True)
class Budget:
    """The terms of one analysis; figures' standard uncertainties are their root sum of squares."""

    terms: tuple[Term, ...]
    #: The tone term's bent map and its shape (:class:`ToneBent`), for the shape stage, which
    #: measures the same bent map again (beamshot.artefacts.shape_figures); None without a tone term.
    tone_bent: ToneBent | None = field(default=None, repr=False, compare=False)

    def sigma(self, key: str) -> float:
        return float(np.sqrt(sum(t.deltas.get(key, 0.0) ** 2 for t in self.terms)))

    def sigmas(self, keys) -> dict[str, float]:
        return {k: self.sigma(k) for k in keys}

    def of(self, key: str) -> dict[str, float]:
        """Source -> 1-sigma contribution to figure ``key`` (nonzero terms only)."""
        return {t.source: abs(float(t.deltas[key])) for t in self.terms if t.deltas.get(key)}

    def assumption_share(self, key: str) -> float:
        total = sum(t.deltas.get(key, 0.0) ** 2 for t in self.terms)
        if total <= 0:
            return 0.0
        return sum(t.deltas.get(key, 0.0) ** 2 for t in self.terms if t.assumption) / total

    def estimates(self, keys) -> set[str]:
        return {k for k in keys if self.assumption_share(k) > ASSUMPTION_SHARE_FOR_ESTIMATE}


def scale_factor(scale: AbsoluteScale, peak_rel: float, cos_incidence: float, distance_m: float,
                 lux_reading: float | None) -> float | None:
    """Lux per linear unit.  With a lux reading ``E`` at the peak, the map's relative peak ``I_rel``
    gives wall illuminance ``I_rel cos^3(incidence) / D^2`` there (inverse-square and cosine laws,
    IES 9.1.1/9.1.2), so the factor is ``E D^2 / (I_rel cos^3)``; other scales are fixed."""
    if scale.kind == "lux_meter" and lux_reading is not None:
        return float(lux_reading / illuminance_on_wall(peak_rel, np.arccos(np.clip(cos_incidence, -1, 1)), distance_m))
    return scale.lux_per_unit


def absolute_values(rel: dict[str, float], k: float | None) -> dict[str, float]:
    """Scale-free values plus the absolute ones (cd, m, lm) for scale factor ``k`` (None: NaN)."""
    out = dict(rel)
    nan = float("nan")
    if k is None:
        out.update({key: nan for key in _ABSOLUTE_KEYS})
        return out
    peak = k * rel["peak_rel"]
    out["peak_intensity"] = peak
    out["beam_distance"] = beam_distance_m(peak) if peak > 0 else nan
    out["hotspot_flux"] = k * rel["hotspot_flux_rel"]
    out["spill_flux"] = k * rel["spill_flux_rel"]
    out["beam_flux"] = k * rel["beam_flux_rel"]
    return out


def term_from_change(source: str, acts: str, size: str, base: dict[str, float], moved: dict[str, float], *,
                     factor: float = 1.0, shared: bool = False, assumption: bool = False) -> Term:
    """A term from a re-measurement: ``factor * (moved - base)`` per figure (0 where either is NaN)."""
    deltas = {}
    for key, b in base.items():
        m = moved.get(key)
        if m is not None and np.isfinite(b) and np.isfinite(m):
            d = float(factor * (m - b))
            if abs(d) > 1e-9 * max(abs(b), 1e-30):  # below that it is floating-point noise, not an effect
                deltas[key] = d
    return Term(source, acts, size, shared, assumption, deltas)


def spread_term(source: str, acts: str, size: str, base: dict[str, float], draws: list[dict[str, float]]) -> Term:
    """A term from Monte Carlo draws: the standard deviation of each figure over the draws."""
    deltas = {}
    for key, b in base.items():
        vals = np.array([d.get(key, np.nan) for d in draws], float)
        vals = vals[np.isfinite(vals)]
        if np.isfinite(b) and len(vals) >= 3:
            deltas[key] = float(np.std(vals, ddof=1))
    return Term(source, acts, size, False, True, deltas)


def tone_bent(beam: BeamMap, peak_rel: float, eps: float) -> BeamMap:
    """The map with a tone-curve (gamma) error: ``I' = I |I / I_peak|^eps`` (sign kept)."""
    r = beam.intensity / peak_rel
    with np.errstate(invalid="ignore", divide="ignore"):
        bent = beam.intensity * np.abs(r) ** eps
    return replace(beam, intensity=bent)


def shading_gain(shape: tuple[int, int], bin_factor: int, full_shape: tuple[int, int], focal_px: float | None, *,
                 natural: bool, corner_depth: float) -> np.ndarray:
    """Relative gain ``V`` (1 on the optical axis) at working pixels ``(h, w)``.

    ``V = cos^4(alpha) (1 - corner_depth (d / d_corner)^2)`` with ``tan(alpha) = d / f`` (natural
    fall-off of a thin lens, the cos^4 law; ISO 12232 uses the same law for its q factor) and
    ``d`` the distance from the image centre in full-resolution pixels; the cos^4 factor is left
    out when ``natural`` is False or the focal length is unknown.
    """
    v = np.empty(shape, np.float32)
    for rows, gain in _gain_strips(shape, bin_factor, full_shape, focal_px, natural=natural,
                                   corner_depth=corner_depth):
        v[rows] = gain
    return v


def shading_divided(luminance: np.ndarray, bin_factor: int, full_shape: tuple[int, int], focal_px: float | None, *,
                    natural: bool, corner_depth: float) -> np.ndarray:
    """``luminance / shading_gain(luminance.shape, ...)``, computed strip by strip: the same values,
    without the full-size gain and its temporaries (a few passes over tens of MB at 48 MP)."""
    out = np.empty(luminance.shape, np.result_type(luminance.dtype, np.float32))
    for rows, gain in _gain_strips(luminance.shape, bin_factor, full_shape, focal_px, natural=natural,
                                   corner_depth=corner_depth):
        np.divide(luminance[rows], gain, out=out[rows])
    return out


#: Rows of the gain computed at a time (a few hundred kB per strip: stays in cache; speed only).
_GAIN_STRIP_ROWS = 32


def _gain_strips(shape, bin_factor, full_shape, focal_px, *, natural: bool, corner_depth: float):
    """Yield ``(row slice, gain rows)`` of :func:`shading_gain`; each element is computed by the same
    float32 operations in the same order whatever the strip height (elementwise, so strips are exact)."""
    h, w = shape
    height, width = full_shape
    b = bin_factor
    x = (np.arange(w) * b + (b - 1) / 2.0 - (width - 1) / 2.0).astype(np.float32)
    y = (np.arange(h) * b + (b - 1) / 2.0 - (height - 1) / 2.0).astype(np.float32)
    x2, y2 = x**2, y**2
    c = np.float32(corner_depth / (((width - 1) / 2.0) ** 2 + ((height - 1) / 2.0) ** 2))
    fall = natural and focal_px
    k = np.float32(1.0 / focal_px**2) if fall else None
    n = min(_GAIN_STRIP_ROWS, h)
    d2, v, t = (np.empty((n, w), np.float32) for _ in range(3))
    for top in range(0, h, n):
        m = min(n, h - top)
        dd, vv, tt = d2[:m], v[:m], t[:m]
        np.add(x2[None, :], y2[top:top + m, None], out=dd)  # d^2 = x^2 + y^2
        np.multiply(c, dd, out=vv)
        np.subtract(1.0, vv, out=vv)  # 1 - corner_depth (d / d_corner)^2
        if fall:
            np.multiply(dd, k, out=tt)
            np.add(1.0, tt, out=tt)
            np.square(tt, out=tt)  # (1 + d^2 / f^2)^2 = 1 / cos^4(alpha)
            np.divide(vv, tt, out=vv)
        yield slice(top, top + m), vv


def with_luminance(image: LinearImage, luminance: np.ndarray) -> LinearImage:
    """The same working image with another luminance (colour untouched); for re-measurements."""
    return LinearImage(luminance=luminance.astype(np.float32, copy=False), saturated=image.saturated,
                       bin_factor=image.bin_factor, full_shape=image.full_shape, rgb_values=image.rgb_values,
                       rgb_counts=image.rgb_counts)


def mapping_stretched(mapping: WallMapping, factor: float, centre_mm: tuple[float, float]) -> WallMapping:
    """The mapping with wall lengths about ``centre_mm`` multiplied by ``factor``."""
    cx, cy = centre_mm
    s = np.array([[factor, 0.0, cx * (1.0 - factor)], [0.0, factor, cy * (1.0 - factor)], [0.0, 0.0, 1.0]])
    return replace(mapping, homography=s @ mapping.homography)


def correlation_factor(full_angle_deg: float, samples: float, block_deg: float) -> float:
    """How much the noise of a mean over ``samples`` crossings exceeds the independent-sample value
    when errors are correlated over ``block_deg`` (a JPEG block or a working pixel): a contour of
    circumference pi x angle meets only pi x angle / block independent blocks, so the variance of
    the mean grows by samples / that number (variance of a mean of correlated samples; textbook).

    >>> correlation_factor(100.0, 72, 0.5), round(correlation_factor(6.0, 72, 1.0), 2)
    (1.0, 1.95)
    """
    if not (block_deg > 0 and np.isfinite(full_angle_deg) and full_angle_deg > 0):
        return 1.0
    independent = np.pi * full_angle_deg / block_deg
    return float(np.sqrt(max(1.0, samples / independent)))


def angle_footprint_term(base: dict[str, float], pixel_deg: float) -> Term:
    """Both edges of a full angle known to a working pixel ``p`` (deg): ``2 p / sqrt(12)`` per full angle."""
    deltas = {k: 2.0 * pixel_deg / np.sqrt(12.0) for k in ANGLE_KEYS if k != "hotspot_offset" and np.isfinite(base.get(k, np.nan))}
    return Term("pixel footprint", "each contour edge known to a working pixel; both edges of a full angle together",
                f"{pixel_deg:.3g} deg per working pixel near the axis", False, False, deltas)



def build_budget(measured, base: dict[str, float], *, scale: AbsoluteScale, lux_at_peak: float | None, distance_m: float,
                 distance_u_m: float, camera_distance_m: float | None, camera_beside: bool, wall_scale_u: float,
                 wall_points: tuple[np.ndarray, np.ndarray] | None, ratio_delta: float, ratio_assumed: bool,
                 shading: dict, focal_px: float | None, pixel_deg: float, block_deg: float = 0.0) -> Budget:
    """All terms of one analysis; ``base`` holds the values measured (``measured.values(scale, lux)``).

    ``measured`` re-measures (``remeasure(image=, mapping=, distance_m=, tone=)`` -> shape,
    ``values(scale, lux, shape, distance_m)`` -> dict, ``shape``, ``image``, ``mapping``,
    ``foot_mm``, and ``beam``, the map measured, which the tone term bends instead of rebuilding it).  ``camera_beside``: the pinhole mapping was built with the camera at the light's
    distance, so moving D moves the camera too.  ``shading`` is ``{"kind": "envelope" | "flat" |
    "none", "natural": bool, "corner_depth": float, "factor": float, "size": str}``.
    """
    shape = measured.shape

    def again_now(**kw) -> dict:
        d = kw.pop("distance_m", None)
        return measured.values(scale, lux_at_peak, measured.remeasure(distance_m=d, **kw), d)

    # every re-measurement is submitted first, the dearest first, and runs on both cores (the map,
    # contour and edge work is numpy/OpenCV that releases the GIL for much of its time); the terms are
    # read in budget order whatever the order the jobs finish in
    from .threads import pool_size

    pool = ThreadPoolExecutor(max_workers=pool_size(2))
    again = partial(pool.submit, again_now)
    jobs: dict = {}
    d2 = distance_m + distance_u_m
    if distance_u_m > 0 and camera_beside:  # no map to build: the same map, intensities times (D'/D)^2
        jobs["distance"] = _Done(measured.values(scale, lux_at_peak, shape_at_distance(shape, (d2 / distance_m) ** 2), d2))
    elif distance_u_m > 0:
        jobs["distance"] = again(distance_m=d2)
    if camera_distance_m is not None and distance_u_m > 0:
        jobs["camera"] = again(mapping=mapping_stretched(measured.mapping, 1.0 + distance_u_m / camera_distance_m,
                                                         measured.foot_mm))
    if wall_scale_u > 0:
        jobs["scale"] = again(mapping=mapping_stretched(measured.mapping, 1.0 + wall_scale_u, measured.foot_mm))
    eps = ratio_delta / np.log(RATIO_SPAN)
    if shading["kind"] != "none":
        def shaded() -> dict:  # the photo divided by the shading envelope, on a worker
            img = measured.image
            lum = shading_divided(img.luminance, img.bin_factor, img.full_shape, focal_px,
                                  natural=shading["natural"], corner_depth=shading["corner_depth"])
            return again_now(image=with_luminance(img, lum))

        jobs["shading"] = pool.submit(shaded)
    if wall_points is not None:
        from .wall import homography_mapping

        img_pts, wall_pts = wall_points
        rng = np.random.default_rng(12345)
        jobs["points"] = []
        for _ in range(WALL_POINT_DRAWS):
            jitter = img_pts + rng.normal(0.0, WALL_POINT_CLICK_SIGMA_PX, img_pts.shape)
            try:
                m = homography_mapping(jitter, wall_pts, method="jittered")
            except Exception:  # noqa: BLE001 - a degenerate draw is skipped
                continue
            jobs["points"].append(again(mapping=replace(m, distortion=measured.mapping.distortion)))
    if ratio_delta > 0:  # the cheapest (no map to build): last, so the two cores finish together
        jobs["tone"] = pool.submit(_tone_bent_shape, measured, eps)
    try:
        terms = tuple(_terms(measured, jobs, base, shape, scale, lux_at_peak, distance_m, distance_u_m,
                             camera_beside, wall_scale_u, ratio_delta, ratio_assumed, eps, shading, pixel_deg,
                             block_deg))
        return Budget(terms, jobs["tone"].result() if "tone" in jobs else None)
    finally:
        pool.shutdown(wait=True)


class _Done:
    """A result known without a job (the same face as a future's)."""

    def __init__(self, value):
        self._value = value

    def result(self):
        return self._value


def shape_at_distance(shape, factor: float):
    """The shape the map rebuilt at distance ``D'`` would give when the camera stands beside the light.

    The camera beside the light sees the wall scaled with D, so the wall point toward a direction
    (theta, phi) falls on the same pixel at ``D'`` as at ``D``: the same illuminance E.  The map,
    ``I = E D^2 / cos^3 theta`` (IES 9.1.1/9.1.2), is the old one times ``factor = (D'/D)^2``, and
    every step of ``measure_shape`` is scale-equivariant (contours and the spill cut-off at levels
    relative to the peak and the floor), so the angles stay and the peak and fluxes scale.
    tests/test_speed_equivalence.py checks this against the map rebuilt.
    """
    fx = shape.flux
    return replace(shape, peak=replace(shape.peak, value=shape.peak.value * factor),
                   flux=None if fx is None else replace(fx, hotspot=fx.hotspot * factor,
                                                        spill=None if fx.spill is None else fx.spill * factor))


@dataclass(frozen=True)
class ToneBent:
    """The map ``source`` bent by a tone error ``eps`` about ``peak_value`` (:func:`tone_bent`), and
    the shape measured on it (``measure_shape(map, boundary_noise=False)``)."""

    source: BeamMap
    peak_value: float
    eps: float
    map: BeamMap
    shape: object

    def of(self, beam: BeamMap, peak_value: float, eps: float) -> ToneBent | None:
        """This, if it is the bend of ``beam`` about ``peak_value`` by ``eps`` (else None)."""
        return self if (beam is self.source and peak_value == self.peak_value and eps == self.eps) else None


def _tone_bent_shape(measured, eps: float) -> ToneBent | None:
    """The map measured, bent by ``eps``, and its shape: ``remeasure(tone=eps)`` without rebuilding
    the map (None if ``measured`` has no map to bend).

    With no input moved the map rebuilt is the one measured (``measured.beam``: same image, mapping,
    foot point, distance and axis), so the bent map is built from it; tests/test_speed_equivalence.py
    checks that this gives exactly what ``measured.remeasure(tone=eps)`` gives.
    """
    from .measure import measure_shape

    beam = getattr(measured, "beam", None)
    if beam is None:
        return None
    peak = measured.shape.peak.value
    bent = tone_bent(beam, peak, eps)
    return ToneBent(beam, peak, eps, bent, measure_shape(bent, boundary_noise=False))


def _tone_moved(measured, eps: float, scale: AbsoluteScale, lux_at_peak: float | None,
                bent: ToneBent | None = None) -> dict:
    """Values with the tone curve bent by ``eps`` (from ``bent``, :func:`_tone_bent_shape`, if given)."""
    if bent is None:
        bent = _tone_bent_shape(measured, eps)
    if bent is None:
        return measured.values(scale, lux_at_peak, measured.remeasure(tone=eps), None)
    return measured.values(scale, lux_at_peak, bent.shape, None)


def _terms(measured, jobs, base, shape, scale, lux_at_peak, distance_m, distance_u_m, camera_beside, wall_scale_u,
           ratio_delta, ratio_assumed, eps, shading, pixel_deg, block_deg=0.0) -> list[Term]:
    """The terms, in budget order, from the submitted re-measurements ``jobs``."""
    from .measure import noise_deltas

    terms: list[Term] = []
    # ---- pixel noise: contour and edge crossings, zone boundaries
    nd = noise_deltas(shape)
    k = scale_factor(scale, base["peak_rel"], measured.cos_incidence(shape.peak), distance_m, lux_at_peak)
    noise = {key: v for key, v in nd.items() if key in ANGLE_KEYS or key == "ra"}
    for key, samples in (("hotspot_angle", N_BEARINGS), ("field_angle", N_BEARINGS), ("spill_angle", 360.0 / SECTOR_DEG)):
        if key in noise:
            noise[key] *= correlation_factor(base.get(key, np.nan), samples, block_deg)
    if k is not None:
        for key in ("hotspot_flux", "spill_flux", "beam_flux"):
            noise[key] = k * nd.get(key + "_rel", 0.0)
    terms.append(Term("pixel noise", "noise of the contour and edge crossings along each ray; zone boundaries "
                      "moved by it", "measured from the photo's own scatter", False, False, noise))
    # ---- the peak fit's noise: the peak (no meter) or every flux (meter matched to the peak)
    rel_noise = peak_rel_noise(shape.peak, pixel_deg)  # the photo's pixels counted, not the map's samples
    if k is not None:
        if scale.kind == "lux_meter":
            pk_d = {key: -rel_noise * base[key] for key in ("hotspot_flux", "spill_flux", "beam_flux")}
        else:
            pk_d = {"peak_intensity": rel_noise * base["peak_intensity"],
                    "beam_distance": 0.5 * rel_noise * base["beam_distance"]}
        terms.append(Term("peak fit noise", "scales the relative peak", f"{rel_noise:.2%}", False, False, pk_d))
    # ---- distance to the wall
    if distance_u_m > 0:
        moved = jobs["distance"].result()
        acts = ("map rebuilt at D + u(D); the camera beside the light sees the wall scaled with D" if camera_beside
                else "map rebuilt at D + u(D) on a wall scale fixed by the target or points")
        terms.append(term_from_change("distance to the wall", acts, f"{distance_u_m:g} m", base, moved, shared=False))
    # ---- camera distance given separately (square camera, pinhole mapping)
    if "camera" in jobs:
        moved = jobs["camera"].result()
        terms.append(term_from_change("camera-to-wall distance", "wall scale stretched by u(Dc)/Dc",
                                      f"{distance_u_m:g} m", base, moved))
    # ---- wall scale: focal length, or the target's pose/homography
    if wall_scale_u > 0:
        moved = jobs["scale"].result()
        terms.append(term_from_change("wall scale (focal length or target)", "wall lengths about the beam's foot "
                                      "stretched by 1 + u", f"{wall_scale_u:.2%}", base, moved))
    # ---- hand-placed wall points: re-fit the mapping with each point moved
    if "points" in jobs:
        draws = [job.result() for job in jobs["points"]]
        terms.append(spread_term("wall points placed by hand", "each point moved by the click accuracy, mapping "
                                 "re-fitted", f"{WALL_POINT_CLICK_SIGMA_PX:g} px per point, {len(draws)} draws",
                                 base, draws))
    # ---- absolute scale (shared by every figure of every analysis with the same meter/profile)
    if k is not None and scale.rel_uncertainty:
        u = float(scale.rel_uncertainty)
        sd = {key: u * base[key] for key in ("peak_intensity", "hotspot_flux", "spill_flux", "beam_flux")}
        sd["beam_distance"] = 0.5 * u * base["beam_distance"]
        terms.append(Term({"lux_meter": "lux meter", "lux_meter_point": "lux meter", "camera_constant": "camera constant",
                           "exposure_metadata": "exposure metadata"}.get(scale.kind, scale.kind),
                          "multiplies every intensity and flux; cancels in angles and Ra", f"{u:.1%}",
                          True, scale.kind == "exposure_metadata", {key: v for key, v in sd.items() if np.isfinite(v)}))
    # ---- tone curve
    if ratio_delta > 0:
        moved = _tone_moved(measured, eps, scale, lux_at_peak, jobs["tone"].result())
        size = (f"assumed curve, gamma error {ratio_delta / np.log(RATIO_SPAN):.3g}" if ratio_assumed else
                f"{ratio_delta:.1%} ratio error over 1:{RATIO_SPAN:g}")
        terms.append(term_from_change("tone curve", "intensity ratios bent by a power law I (I/Ipeak)^eps", size,
                                      base, moved, shared=not ratio_assumed, assumption=ratio_assumed))
    # ---- lens shading
    if shading["kind"] != "none":
        moved = jobs["shading"].result()
        terms.append(term_from_change("lens shading", shading["acts"], shading["size"], base, moved,
                                      factor=shading["factor"], shared=True, assumption=shading["kind"] == "envelope"))
    # ---- pixel footprint
    if pixel_deg > 0:
        terms.append(angle_footprint_term(base, pixel_deg))
    return terms
