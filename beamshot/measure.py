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
from .photometry import beam_distance_m
from .scale import AbsoluteScale
from .spill import SpillEdge, find_spill_edge

__all__ = ["HOTSPOT_LEVEL", "FIELD_LEVEL", "BeamShape", "measure_shape", "beam_figures", "FIGURE_ORDER"]

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


def measure_shape(beam: BeamMap, *, angle_scale_uncertainty: float = 0.0) -> BeamShape:
    """Peak, contours, spill edge and zone fluxes of a relative map."""
    peak = find_peak(beam)
    hot, fld = trace_contours(beam, peak.vector, [(HOTSPOT_LEVEL * peak.value, HOTSPOT_LEVEL),
                                                  (FIELD_LEVEL * peak.value, FIELD_LEVEL)])
    edge = find_spill_edge(beam, peak.value)
    hot_rel = _rel_sigma(hot.full_angle() if hot.complete else np.nan,
                         hot.full_angle_sigma() if hot.complete else np.nan, angle_scale_uncertainty)
    edge_rel = _rel_sigma(edge.full_angle() if edge.complete else np.nan,
                          edge.full_angle_sigma() if edge.complete else np.nan, angle_scale_uncertainty)
    if hot.complete:
        base, hot_plus, edge_plus = zone_fluxes(beam, hot, peak.vector, edge,
                                                [(1.0, 1.0), (1.0 + hot_rel, 1.0), (1.0, 1.0 + edge_rel)])
    else:
        base = hot_plus = edge_plus = None
    return BeamShape(peak, hot, fld, edge, base, hot_plus, edge_plus, hot_rel, edge_rel)


def _rel_sigma(full: float, sigma: float, scale_u: float) -> float:
    if not np.isfinite(full) or full <= 0:
        return 0.0
    return float(np.hypot(sigma / full, scale_u))


def _angle_figure(full_rad: float, noise_rad: float, scale_u: float, method: str) -> Figure:
    """Full angle in degrees; a relative scale error ``scale_u`` of tan(angle) is propagated."""
    half = full_rad / 2.0
    # angle = atan(k tan a): d angle / d ln k = sin a cos a  (for the half-angle)
    scale_term = 2.0 * np.sin(half) * np.cos(half) * scale_u
    return Figure(float(np.degrees(full_rad)), float(np.degrees(np.hypot(noise_rad, scale_term))), "deg", method)


def beam_figures(shape: BeamShape, beam: BeamMap, scale: AbsoluteScale, *,
                 angle_scale_uncertainty: float, distance_rel_uncertainty: float,
                 axis_uncertainty_rad: float, calibration_rel_uncertainty: float = 0.0) -> dict[str, Figure]:
    """All reported figures (see FIGURE_ORDER) from a measured shape and a scale.

    ``calibration_rel_uncertainty`` is the relative 1-sigma error of intensity *ratios* left by
    the camera calibration (response-curve consistency and flat-field residual); it enters the
    peak, the fluxes and Ra.
    """
    cal_u = float(calibration_rel_uncertainty)
    figs: dict[str, Figure] = {}
    pk = shape.peak
    clipped = pk.clipped
    clip_reason = ("the hotspot is clipped (overexposed) in the photo; lower the exposure "
                   "(shorter time or lower ISO) or give a bracket")
    # ---- peak intensity and beam distance
    if scale.absolute:
        k = scale.lux_per_unit
        rel_u = float(np.sqrt(scale.rel_uncertainty**2 + (2 * distance_rel_uncertainty) ** 2 + pk.rel_noise**2
                              + cal_u**2))
        status = "lower_bound" if clipped else ("estimate" if scale.kind == "exposure_metadata" else "measured")
        value = k * pk.value
        figs["peak_intensity"] = Figure(value, None if clipped else value * rel_u, "cd",
                                        f"maximum of the intensity map (local quadratic fit); scale: {scale.description}",
                                        status, clip_reason if clipped else None)
        d = beam_distance_m(value)
        figs["beam_distance"] = Figure(d, None if clipped else d * rel_u / 2.0, "m",
                                       "ANSI/PLATO FL 1: distance at which the peak gives 0.25 lx, d = sqrt(I / 0.25 lx)",
                                       status, clip_reason if clipped else None)
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
            figs[key] = _angle_figure(contour.full_angle(), contour.full_angle_sigma(), angle_scale_uncertainty, method)
    for key, bearing, word in (("hotspot_angle_horizontal", 0.0, "horizontal"), ("hotspot_angle_vertical", 90.0, "vertical")):
        method = f"full width at 50 % of maximum along the wall's {word} through the peak"
        width = shape.hotspot.width_along(bearing)
        if clipped:
            figs[key] = not_measured("deg", method, clip_reason)
        elif not np.isfinite(width):
            figs[key] = not_measured("deg", method, "the 50 % contour runs off the photo")
        else:
            figs[key] = _angle_figure(width, shape.hotspot.width_sigma_along(bearing), angle_scale_uncertainty, method)
    # ---- spill angle
    edge = shape.edge
    sharp = edge.sharp_fraction
    edge_method = ("outer spill edge: half-level point of the sharpest outer cut-off in 36 azimuth sectors "
                   f"({sharp:.0%} of sectors show a sharp cut-off; the rest use the 0.5 % of peak threshold); "
                   "full angle of the cone of equal solid angle")
    if edge.complete:
        figs["spill_angle"] = _angle_figure(edge.full_angle(), edge.full_angle_sigma(), angle_scale_uncertainty, edge_method)
    else:
        figs["spill_angle"] = not_measured("deg", edge_method, _coverage_reason(edge))
    for key, phi, word in (("spill_angle_horizontal", 0.0, "horizontal"), ("spill_angle_vertical", 90.0, "vertical")):
        full, sig = edge.across(phi)
        method = f"spill edge to spill edge across the beam axis along the wall's {word}"
        if np.isfinite(full):
            figs[key] = _angle_figure(full, sig, angle_scale_uncertainty, method)
        else:
            figs[key] = not_measured("deg", method, _coverage_reason(edge, phi))
    # ---- flux
    fx = shape.flux
    flux_method = "sum of I dOmega over map cells (exact cell solid angles)"
    if fx is None:
        for key in ("hotspot_flux", "spill_flux", "beam_flux", "ra"):
            figs[key] = not_measured("lm" if key != "ra" else "", flux_method, "the hotspot contour is not complete")
    else:
        dh = abs(shape.flux_hot_plus.hotspot - fx.hotspot)
        if scale.absolute:
            k = scale.lux_per_unit
            rel_s = float(np.sqrt(scale.rel_uncertainty**2 + (2 * distance_rel_uncertainty) ** 2 + cal_u**2))
            st = "estimate" if scale.kind == "exposure_metadata" else "measured"
            hv = k * fx.hotspot
            figs["hotspot_flux"] = (Figure(hv, None, "lm", flux_method + " inside the 50 % contour", "lower_bound", clip_reason)
                                    if clipped else
                                    Figure(hv, float(np.hypot(hv * rel_s, k * dh)), "lm", flux_method + " inside the 50 % contour", st))
            if fx.spill is None:
                figs["spill_flux"] = not_measured("lm", flux_method, _coverage_reason(edge))
                figs["beam_flux"] = not_measured("lm", flux_method, _coverage_reason(edge))
            else:
                sv = k * fx.spill
                ds = np.hypot(shape.flux_hot_plus.spill - fx.spill, shape.flux_edge_plus.spill - fx.spill)
                bv = k * (fx.hotspot + fx.spill)
                db = abs((shape.flux_edge_plus.hotspot + shape.flux_edge_plus.spill) - (fx.hotspot + fx.spill))
                if clipped:
                    figs["spill_flux"] = not_measured("lm", flux_method, clip_reason)
                    figs["beam_flux"] = Figure(bv, None, "lm", flux_method + " inside the spill edge", "lower_bound", clip_reason)
                else:
                    figs["spill_flux"] = Figure(sv, float(np.hypot(sv * rel_s, k * ds)), "lm",
                                                flux_method + " between the 50 % contour and the spill edge", st)
                    figs["beam_flux"] = Figure(bv, float(np.hypot(bv * rel_s, k * db)), "lm",
                                               flux_method + " inside the spill edge", st)
        else:
            for key in ("hotspot_flux", "spill_flux", "beam_flux"):
                figs[key] = not_measured("lm", flux_method, scale.description)
        ra_method = "Ra = spill-zone flux / hotspot-zone flux (this project's spill-to-hotspot ratio, not a colour index)"
        if clipped:
            figs["ra"] = not_measured("", ra_method, clip_reason)
        elif fx.spill is None:
            figs["ra"] = not_measured("", ra_method, _coverage_reason(edge))
        else:
            ra = fx.spill / fx.hotspot
            ra_h = shape.flux_hot_plus.spill / shape.flux_hot_plus.hotspot
            ra_e = shape.flux_edge_plus.spill / shape.flux_edge_plus.hotspot
            figs["ra"] = Figure(ra, float(np.sqrt((ra_h - ra) ** 2 + (ra_e - ra) ** 2 + (cal_u * ra) ** 2)), "", ra_method)
    # ---- hotspot offset
    off_method = "angle between the peak direction and the beam axis (spill centre)"
    off_sigma = float(np.hypot(axis_uncertainty_rad, beam.d_theta))
    if clipped:
        figs["hotspot_offset"] = not_measured("deg", off_method, clip_reason)
        return {k: figs[k] for k in FIGURE_ORDER if k in figs}
    figs["hotspot_offset"] = Figure(float(np.degrees(pk.theta)), float(np.degrees(off_sigma)), "deg",
                                    off_method + f"; toward azimuth {np.degrees(pk.phi):.0f} deg (0 = right, 90 = up)")
    return {k: figs[k] for k in FIGURE_ORDER if k in figs}


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
