"""Measurements taken from a BeamMap: the beam's shape, then the reported figures.

``measure_shape`` works on the relative map (peak, 50 % and 10 % contours, spill edge,
zone fluxes); ``beam_figures`` turns that shape plus an absolute scale and the geometry
uncertainties into :class:`~beamshot.figure.Figure` objects, each with a 1-sigma
uncertainty, a method and a status.  Full angles are reported in degrees.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .beammap import BeamMap
from .figure import Figure, not_measured
from .flux import ZoneFlux, zone_fluxes
from .hotspot import Contour, Peak, find_peak, trace_contours
from .scale import AbsoluteScale
from .spill import SpillEdge, find_spill_edge

__all__ = ["HOTSPOT_LEVEL", "FIELD_LEVEL", "BeamShape", "measure_shape", "shape_values", "noise_deltas",
           "beam_figures", "FIGURE_ORDER", "ANGLE_KEYS"]

#: Hotspot (beam angle) threshold: 50 % of maximum intensity (IES; CIE ILV 17-27-077 uses centre-beam).
HOTSPOT_LEVEL = 0.5
#: Field angle threshold: 10 % of maximum intensity (IES).
FIELD_LEVEL = 0.1

#: Order in which figures are listed in reports.
FIGURE_ORDER = (
    "peak_intensity", "beam_distance", "hotspot_angle", "hotspot_angle_horizontal",
    "hotspot_angle_vertical", "field_angle", "spill_angle", "spill_angle_horizontal",
    "spill_angle_vertical", "hotspot_flux", "spill_flux", "beam_flux", "ra", "hotspot_offset", "light_tilt",
)


@dataclass(frozen=True)
class BeamShape:
    """Scale-free description of the beam measured on the relative map."""

    peak: Peak
    hotspot: Contour
    field: Contour
    edge: SpillEdge
    flux: ZoneFlux
    flux_hot_plus: ZoneFlux
    flux_edge_plus: ZoneFlux
    hot_rel_sigma: float
    edge_rel_sigma: float


def measure_shape(beam: BeamMap, *, boundary_noise: bool = True) -> BeamShape:
    """Peak, contours, spill edge and zone fluxes of a relative map.

    With ``boundary_noise`` the zone fluxes are also integrated with each zone boundary moved out
    by its own 1-sigma noise (``flux_hot_plus``, ``flux_edge_plus``), for the pixel-noise term of
    the flux uncertainties; re-measurements for other error sources skip that.
    """
    peak = find_peak(beam)
    hot, fld = trace_contours(beam, peak.vector, [(HOTSPOT_LEVEL * peak.value, HOTSPOT_LEVEL),
                                                  (FIELD_LEVEL * peak.value, FIELD_LEVEL)])
    edge = find_spill_edge(beam, peak.value)
    hot_rel = _rel_sigma(hot.full_angle() if hot.complete else np.nan,
                         hot.full_angle_sigma() if hot.complete else np.nan)
    edge_rel = _rel_sigma(edge.full_angle() if edge.complete else np.nan,
                          edge.full_angle_sigma() if edge.complete else np.nan)
    if hot.complete:
        scales = [(1.0, 1.0), (1.0 + hot_rel, 1.0), (1.0, 1.0 + edge_rel)] if boundary_noise else [(1.0, 1.0)]
        fluxes = zone_fluxes(beam, hot, peak.vector, edge, scales)
        base = fluxes[0]
        hot_plus, edge_plus = (fluxes[1], fluxes[2]) if boundary_noise else (base, base)
    else:
        base = hot_plus = edge_plus = None
    return BeamShape(peak, hot, fld, edge, base, hot_plus, edge_plus, hot_rel, edge_rel)


def _rel_sigma(full: float, sigma: float) -> float:
    if not np.isfinite(full) or full <= 0 or not np.isfinite(sigma):
        return 0.0
    return float(sigma / full)


#: Keys of :func:`shape_values` that are angles in degrees (full angles, or the offset).
ANGLE_KEYS = ("hotspot_angle", "hotspot_angle_horizontal", "hotspot_angle_vertical", "field_angle",
              "spill_angle", "spill_angle_horizontal", "spill_angle_vertical", "hotspot_offset")


def shape_values(shape: BeamShape) -> dict[str, float]:
    """The scale-free numbers of a shape: angles (deg), relative peak and fluxes, Ra (NaN if unmeasurable).

    ``peak_rel`` and ``*_flux_rel`` are in map units (times sr for fluxes).
    """
    nan = float("nan")
    hot, fld, edge, fx = shape.hotspot, shape.field, shape.edge, shape.flux
    deg = lambda rad: float(np.degrees(rad)) if np.isfinite(rad) else nan  # noqa: E731
    v = {
        "peak_rel": float(shape.peak.value),
        "hotspot_angle": deg(hot.full_angle()) if hot.complete else nan,
        "hotspot_angle_horizontal": deg(hot.width_along(0.0)),
        "hotspot_angle_vertical": deg(hot.width_along(90.0)),
        "field_angle": deg(fld.full_angle()) if fld.complete else nan,
        "spill_angle": deg(edge.full_angle()) if edge.complete else nan,
        "spill_angle_horizontal": deg(edge.across(0.0)[0]),
        "spill_angle_vertical": deg(edge.across(90.0)[0]),
        "hotspot_offset": deg(shape.peak.theta),
    }
    if fx is None:
        v.update(hotspot_flux_rel=nan, spill_flux_rel=nan, beam_flux_rel=nan, ra=nan)
    else:
        spill = nan if fx.spill is None else float(fx.spill)
        v.update(hotspot_flux_rel=float(fx.hotspot), spill_flux_rel=spill, beam_flux_rel=float(fx.hotspot) + spill,
                 ra=spill / float(fx.hotspot) if fx.hotspot > 0 else nan)
    return v


def noise_deltas(shape: BeamShape) -> dict[str, float]:
    """1-sigma effect of pixel noise on each scale-free value (same keys as :func:`shape_values`).

    Angles: the crossings' own noise along each ray (independent rays).  Fluxes and Ra: each zone
    boundary moved out by its noise.  ``peak_rel``: the residual noise of the peak fit.
    """
    hot, fld, edge, fx = shape.hotspot, shape.field, shape.edge, shape.flux
    deg = lambda rad: float(np.degrees(rad))  # noqa: E731
    d = {
        "peak_rel": float(shape.peak.rel_noise * shape.peak.value),
        "hotspot_angle": deg(hot.full_angle_sigma()) if hot.complete else 0.0,
        "hotspot_angle_horizontal": deg(hot.width_sigma_along(0.0)),
        "hotspot_angle_vertical": deg(hot.width_sigma_along(90.0)),
        "field_angle": deg(fld.full_angle_sigma()) if fld.complete else 0.0,
        "spill_angle": deg(edge.full_angle_sigma()) if edge.complete else 0.0,
        "spill_angle_horizontal": deg(edge.across(0.0)[1]),
        "spill_angle_vertical": deg(edge.across(90.0)[1]),
    }
    if fx is not None:
        hp, ep = shape.flux_hot_plus, shape.flux_edge_plus
        d["hotspot_flux_rel"] = abs(hp.hotspot - fx.hotspot)
        if fx.spill is not None:
            d["spill_flux_rel"] = float(np.hypot(hp.spill - fx.spill, ep.spill - fx.spill))
            d["beam_flux_rel"] = abs((ep.hotspot + ep.spill) - (fx.hotspot + fx.spill))
            ra = fx.spill / fx.hotspot
            d["ra"] = float(np.hypot(hp.spill / hp.hotspot - ra, ep.spill / ep.hotspot - ra))
    return {k: (v if np.isfinite(v) else 0.0) for k, v in d.items()}


def beam_figures(shape: BeamShape, beam: BeamMap, scale: AbsoluteScale, values: dict[str, float],
                 sigmas: dict[str, float], estimates: set[str] | frozenset = frozenset(), *,
                 axis_uncertainty_rad: float = 0.0, pixel_deg: float = 0.0) -> dict[str, Figure]:
    """All reported figures (see FIGURE_ORDER) from a measured shape, its absolute ``values`` and
    their combined 1-sigma ``sigmas`` (from :mod:`beamshot.uncertainty`).

    ``estimates`` names the figures whose uncertainty is mostly an assumption (an assumed tone
    curve or lens shading, an exposure-metadata scale); their status is ``estimate``.
    ``pixel_deg`` is the angular size of a working pixel: contours fewer than
    ``MIN_CONTOUR_PIXELS`` across are too coarse to measure (see :func:`_resolution_limits`).
    """
    figs: dict[str, Figure] = {}
    pk = shape.peak
    clipped = pk.clipped
    clip_reason = ("the hotspot is clipped (overexposed) in the photo; lower the exposure "
                   "(shorter time or lower ISO) or give a bracket")

    def fig(key: str, unit: str, method: str) -> Figure:
        value, sigma = float(values[key]), float(sigmas.get(key, 0.0))
        if not (np.isfinite(value) and np.isfinite(sigma)):
            return not_measured(unit, method, "the map has too few valid samples to measure this figure")
        st = "estimate" if key in estimates else "measured"
        return Figure(value, sigma, unit, method, st)

    def bound(key: str, unit: str, method: str, kind: str, reason: str = clip_reason) -> Figure:
        """A bound: the value the clipped photo gives, with the uncertainty of that value itself."""
        value, sigma = float(values[key]), float(sigmas.get(key, 0.0))
        if not np.isfinite(value):
            return not_measured(unit, method, reason)
        return Figure(value, sigma if np.isfinite(sigma) and sigma > 0 else None, unit, method, kind, reason)

    # ---- peak intensity and beam distance
    # A clipped peak: a lux reading taken at the peak gives the peak itself (I = E D^2 / cos^3),
    # whatever the photo shows; any other scale sees only the clipped level, a lower bound.
    pinned = scale.kind == "lux_meter"
    if scale.absolute:
        peak_method = f"maximum of the intensity map (local quadratic fit); scale: {scale.description}"
        dist_method = "ANSI/PLATO FL 1: distance at which the peak gives 0.25 lx, d = sqrt(I / 0.25 lx)"
        if clipped and not pinned:
            figs["peak_intensity"] = bound("peak_intensity", "cd", peak_method, "lower_bound")
            figs["beam_distance"] = bound("beam_distance", "m", dist_method, "lower_bound")
        else:
            if clipped:
                peak_method = "the lux reading at the peak: I = E D^2 / cos^3 theta (the photo's peak is clipped)"
            figs["peak_intensity"] = fig("peak_intensity", "cd", peak_method)
            figs["beam_distance"] = fig("beam_distance", "m", dist_method)
    else:
        figs["peak_intensity"] = not_measured("cd", "maximum of the intensity map", scale.description)
        figs["beam_distance"] = not_measured("m", "ANSI/PLATO FL 1 (0.25 lx)", scale.description)
    # ---- hotspot and field angles
    for key, contour, label in (("hotspot_angle", shape.hotspot, "50 %"), ("field_angle", shape.field, "10 %")):
        method = (f"full angle of the cone with the same solid angle as the region at or above {label} "
                  "of the maximum intensity, traced on 72 rays from the peak")
        if clipped:
            figs[key] = not_measured("deg", method, clip_reason)
        elif not contour.complete:
            figs[key] = not_measured("deg", method, f"the {label} contour runs off the photo; step back or use a wider lens")
        else:
            figs[key] = fig(key, "deg", method)
    for key, word in (("hotspot_angle_horizontal", "horizontal"), ("hotspot_angle_vertical", "vertical")):
        method = f"full width at 50 % of maximum along the wall's {word} through the peak"
        if clipped:
            figs[key] = not_measured("deg", method, clip_reason)
        elif not np.isfinite(values[key]):
            figs[key] = not_measured("deg", method, "the 50 % contour runs off the photo")
        else:
            figs[key] = fig(key, "deg", method)
    # ---- spill angle
    edge = shape.edge
    pooled = sum(k == "cutoff_pooled" for k in edge.kind) / max(len(edge.kind), 1)
    edge_method = ("outer spill edge: half-level point of the sharpest outer cut-off in 36 azimuth sectors "
                   f"({edge.sharp_fraction:.0%} of sectors show a sharp cut-off of their own"
                   + (f", {pooled:.0%} one found on wider azimuth ranges where a sector alone is too noisy"
                      if pooled else "")
                   + "; the rest use the 0.5 % of peak threshold); full angle of the cone of equal solid angle")
    edge_reason = _clipped_edge_reason(shape, beam) if clipped else None
    if edge_reason:
        figs["spill_angle"] = not_measured("deg", edge_method, edge_reason)
    elif edge.complete:
        figs["spill_angle"] = fig("spill_angle", "deg", edge_method)
    else:
        figs["spill_angle"] = not_measured("deg", edge_method, _coverage_reason(edge))
    for key, phi, word in (("spill_angle_horizontal", 0.0, "horizontal"), ("spill_angle_vertical", 90.0, "vertical")):
        method = f"spill edge to spill edge across the beam axis along the wall's {word}"
        if edge_reason:
            figs[key] = not_measured("deg", method, edge_reason)
        elif np.isfinite(values[key]):
            figs[key] = fig(key, "deg", method)
        else:
            figs[key] = not_measured("deg", method, _coverage_reason(edge, phi))
    # ---- flux
    fx = shape.flux
    flux_method = "sum of I dOmega over map cells (exact cell solid angles)"
    zones = {"hotspot_flux": " inside the 50 % contour", "spill_flux": " between the 50 % contour and the spill edge",
             "beam_flux": " inside the spill edge"}
    if fx is None:
        for key in ("hotspot_flux", "spill_flux", "beam_flux", "ra"):
            figs[key] = not_measured("lm" if key != "ra" else "", flux_method, "the hotspot contour is not complete")
    else:
        for key, zone in zones.items():
            method = flux_method + zone
            if not scale.absolute:
                figs[key] = not_measured("lm", flux_method, scale.description)
            elif key == "beam_flux" and edge_reason:
                figs[key] = not_measured("lm", method, edge_reason)
            elif key != "hotspot_flux" and fx.spill is None:
                figs[key] = not_measured("lm", method, _coverage_reason(edge))
            elif clipped and key == "spill_flux":
                # the spill zone starts at the 50 % contour of a peak the photo does not show
                figs[key] = not_measured("lm", method, clip_reason)
            elif clipped and pinned:
                # scale matched to the clipped level is too large; clipped cells count at the metered
                # peak, which no cell exceeds: every cell's intensity is at most what is summed
                figs[key] = bound(key, "lm", method, "upper_bound", clip_reason + "; the lux reading scales the "
                                  "clipped level, so the map is too bright: an upper bound")
            elif clipped and key == "beam_flux":
                # the zone (inside the spill edge) does not depend on the peak; clipped cells are too dim
                figs[key] = bound(key, "lm", method, "lower_bound")
            elif clipped:
                # the 50 % contour of a clipped map encloses more than the true hotspot zone, with clipped
                # cells too dim: the two errors have opposite signs, so not even a bound is known
                figs[key] = not_measured("lm", method, clip_reason)
            else:
                figs[key] = fig(key, "lm", method)
        ra_method = "Ra = spill flux over hotspot flux (this project's spill-to-hotspot ratio, not a colour index)"
        if clipped:
            figs["ra"] = not_measured("", ra_method, clip_reason)
        elif fx.spill is None:
            figs["ra"] = not_measured("", ra_method, _coverage_reason(edge))
        else:
            figs["ra"] = fig("ra", "", ra_method)
    # ---- hotspot offset
    off_method = "angle between the peak direction and the beam axis (spill centre)"
    if clipped:
        figs["hotspot_offset"] = not_measured("deg", off_method, clip_reason)
    else:
        off_sigma = float(np.degrees(np.hypot(axis_uncertainty_rad, beam.d_theta)))
        off = float(values["hotspot_offset"])
        if off > 2.0 * off_sigma:
            figs["hotspot_offset"] = Figure(off, off_sigma, "deg", off_method + f"; toward azimuth "
                                            f"{np.degrees(pk.phi):.0f} deg (0 = right, 90 = up; beam_axis.peak_direction_deg)")
        else:
            # a length is never negative, so a small one is biased up: within 2 sigma of zero it is only
            # bounded (about 95 %, as the light tilt)
            figs["hotspot_offset"] = Figure(off + 2.0 * off_sigma, None, "deg", off_method + "; not significant",
                                            "upper_bound", "the hotspot is centred on the beam axis within the "
                                            "uncertainty; the value is an upper bound (about 95 %)")
    if pixel_deg > 0:
        _resolution_limits(figs, values, pixel_deg, pinned)
    return {k: figs[k] for k in FIGURE_ORDER if k in figs}


#: With a clipped hotspot, a spill edge this close (deg) to the clipped area may be the plateau's rim.
CLIPPED_EDGE_MARGIN_DEG = 3.0


def _clipped_edge_reason(shape: BeamShape, beam: BeamMap) -> str | None:
    """Why the spill edge of a clipped photo cannot be trusted, or None: a sector that found no sharp
    cut-off of its own fell back to a level relative to the peak, which the photo does not show; and
    an edge next to the clipped area may be the rim of the clipped plateau, not the bezel's cut-off."""
    edge = shape.edge
    if not edge.complete:
        return None
    if edge.sharp_fraction < 1.0:
        return ("the hotspot is clipped, and the spill edge was found partly by a level relative to the peak, "
                "which the photo does not show; lower the exposure or give a bracket")
    sat = np.any(beam.saturated, axis=1)
    if np.any(sat):
        reach = float(np.max(beam.theta[sat]))
        if np.min(edge.theta) < reach + np.radians(CLIPPED_EDGE_MARGIN_DEG):
            return ("the hotspot is clipped, and the spill edge lies next to the clipped area, where it may be the "
                    "rim of the clipped plateau; lower the exposure or give a bracket")
    return None


#: A contour must be at least this many working pixels across to be measured: below it, the
#: 72 rays cross the same few pixels and the crossing interpolation, the pixel footprint and the
#: map's smoothing dominate (common practice in image metrology: about 10 samples across a feature).
MIN_CONTOUR_PIXELS = 10.0


def _resolution_limits(figs: dict, values: dict, pixel_deg: float, pinned: bool) -> None:
    """Replace the figures of contours too small for the photo's pixels by ``not_measured``
    (the peak by a lower bound: averaging over pixels lowers a narrow maximum)."""
    fix = ("zoom in (a longer focal length), or use a photo with more pixels; every working pixel covers "
           f"{pixel_deg:.2g} deg here")

    def across(key):
        v = values.get(key, np.nan)
        return v / pixel_deg if np.isfinite(v) else np.inf

    groups = (("hotspot_angle", "50 %", ("hotspot_angle", "hotspot_angle_horizontal", "hotspot_angle_vertical",
                                           "hotspot_flux", "spill_flux", "ra", "hotspot_offset")),
              ("field_angle", "10 %", ("field_angle",)),
              ("spill_angle", "spill edge", ("spill_angle", "spill_angle_horizontal", "spill_angle_vertical",
                                             "beam_flux", "spill_flux", "ra")))
    for size_key, word, keys in groups:
        n = across(size_key)
        if n >= MIN_CONTOUR_PIXELS:
            continue
        reason = (f"the {word} contour is only {n:.1f} working pixels across (at least {MIN_CONTOUR_PIXELS:g} "
                  f"needed); {fix}")
        for key in keys:
            f = figs.get(key)
            if f is not None and f.value is not None:
                figs[key] = not_measured(f.unit, f.method, reason)
        if size_key == "hotspot_angle" and not pinned:
            for key in ("peak_intensity", "beam_distance"):
                f = figs.get(key)
                if f is not None and f.value is not None and f.status in ("measured", "estimate"):
                    figs[key] = Figure(f.value, f.uncertainty, f.unit, f.method, "lower_bound",
                                       reason + "; averaging over pixels lowers a narrow peak")
        elif size_key == "hotspot_angle":
            # a lux reading at the peak scales the pixel-averaged (lowered) peak: every flux is too large
            f = figs.get("beam_flux")
            if f is not None and f.value is not None and f.status in ("measured", "estimate"):
                figs["beam_flux"] = Figure(f.value, f.uncertainty, f.unit, f.method, "upper_bound",
                                           reason + "; the lux reading scales a pixel-averaged peak, so the map "
                                           "is too bright: an upper bound")


def _coverage_reason(edge: SpillEdge, phi_deg: float | None = None) -> str:
    cov = np.degrees(edge.coverage)
    if phi_deg is not None:
        i = int(round(phi_deg / 10.0)) % len(edge.phi)
        j = (i + len(edge.phi) // 2) % len(edge.phi)
        return (f"no spill edge found along this line (the photo covers {cov[i]:.1f} and {cov[j]:.1f} deg "
                "from the axis); step back or use a wider lens, and subtract a light-off photo")
    missing = [i for i, k in enumerate(edge.kind) if k == "outside"]
    return (f"no spill edge found in {len(missing)} of {len(edge.kind)} directions (the photo covers "
            f"{cov.min():.1f} to {cov.max():.1f} deg from the axis): the edge lies outside the photo, or room "
            "light or noise hides it; step back or use a wider lens, and subtract a light-off photo (--ambient)")
