"""One vocabulary for every figure: key, short label, unit and one-line definition.

Every output (the printed table, the demo, report.json, profile.csv, beam.png, the docs) takes
its words from here, so a figure is called the same thing everywhere.  Definitions follow the
trade's usage: ANSI/PLATO FL 1 for peak intensity and beam distance, IES for the 50 % / 10 %
beam and field angles (common practice for hotspot/spill naming); Ra is this project's own
figure (spill flux over hotspot flux, not the colour rendering index).
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["Term", "FIGURES", "COLOUR_TERMS", "COLOUR_FIGURES", "colour_figures_of", "SHAPE_FIGURES", "term", "label", "unit_text", "STATUS_WORDS",
           "STATUS_MARKS"]


@dataclass(frozen=True)
class Term:
    key: str
    label: str
    unit: str
    definition: str
    #: for the H/V components: the key of the figure they belong to (printed indented)
    part_of: str | None = None


FIGURES: dict[str, Term] = {t.key: t for t in (
    Term("peak_intensity", "peak intensity", "cd",
         "the largest luminous intensity of the beam (ANSI/PLATO FL 1 peak beam intensity)"),
    Term("beam_distance", "beam distance (0.25 lx)", "m",
         "distance at which the peak intensity gives 0.25 lx, sqrt(I/0.25) (ANSI/PLATO FL 1)"),
    Term("hotspot_angle", "hotspot angle (50 %)", "deg",
         "full angle of the region at or above 50 % of the peak (IES beam angle)"),
    Term("hotspot_angle_horizontal", "horizontal", "deg",
         "full width of the 50 % contour along the wall's horizontal through the peak", "hotspot_angle"),
    Term("hotspot_angle_vertical", "vertical", "deg",
         "full width of the 50 % contour along the wall's vertical through the peak", "hotspot_angle"),
    Term("field_angle", "field angle (10 %)", "deg",
         "full angle of the region at or above 10 % of the peak (IES field angle)"),
    Term("spill_angle", "spill angle (edge)", "deg",
         "full angle of the outer edge of the spill, where the light's rim cuts it off"),
    Term("spill_angle_horizontal", "horizontal", "deg",
         "full width of the spill edge along the wall's horizontal", "spill_angle"),
    Term("spill_angle_vertical", "vertical", "deg",
         "full width of the spill edge along the wall's vertical", "spill_angle"),
    Term("hotspot_flux", "hotspot flux", "lm", "luminous flux inside the 50 % contour"),
    Term("spill_flux", "spill flux", "lm", "luminous flux between the 50 % contour and the spill edge"),
    Term("beam_flux", "beam flux (in edge)", "lm", "luminous flux inside the spill edge"),
    Term("ra", "Ra (spill / hotspot flux)", "",
         "spill flux over hotspot flux; this project's figure, not the colour rendering index"),
    Term("hotspot_offset", "hotspot offset", "deg",
         "angle between the peak's direction and the beam axis (the spill's centre)"),
    Term("light_tilt", "light tilt (to the wall)", "deg",
         "angle between the light's beam axis and the wall's normal"),
)}

#: Words for colour across the beam (the report's ``colour`` section; beamshot.colour).  Kept apart
#: from FIGURES: colour is measured only when asked for (--colour), per zone.
COLOUR_TERMS: dict[str, Term] = {t.key: t for t in (
    Term("transform", "colour transform", "", "the stated conversion from linear camera RGB to CIE 1931 XYZ"),
    Term("cct", "CCT", "K", "correlated colour temperature by Ohno (2013) on CIE 1960 (u, v) (CIE 15; ANSI C78.377)"),
    Term("duv", "Duv", "", "signed distance from the Planckian locus on CIE 1960 (u, v), positive above "
                           "(greenish), negative below (pinkish) (ANSI C78.377)"),
    Term("uv", "u', v' (CIE 1976)", "", "CIE 1976 UCS chromaticity coordinates of the zone's light"),
    Term("xy", "x, y (CIE 1931)", "", "CIE 1931 chromaticity coordinates of the zone's light"),
    Term("ansi_class", "ANSI C78.377 class", "K", "the nominal CCT whose quadrangle holds (CCT, Duv), as a guide"),
    Term("zones_max_delta_uv", "largest tint difference between zones (Δu'v')", "",
         "largest distance in CIE 1976 (u', v') between hotspot, corona and spill"),
    Term("map_max_delta_uv", "largest tint difference across the map (Δu'v')", "",
         "largest distance in CIE 1976 (u', v') between two cells of the colour map"),
)}

#: Colour figures as one-number figures, for comparisons of lights (beamshot.compare): read from a
#: report's ``colour`` section, ``(zone or "tint", key)``.
COLOUR_FIGURES: dict[str, Term] = {t.key: t for t in (
    Term("hotspot_cct", "hotspot CCT", "K", "correlated colour temperature of the hotspot's light (Ohno 2013)"),
    Term("corona_cct", "corona CCT", "K", "correlated colour temperature of the light between the 50 % and 10 % contours"),
    Term("spill_cct", "spill CCT", "K", "correlated colour temperature of the spill's light"),
    Term("hotspot_duv", "hotspot Duv", "", "the hotspot's distance from the Planckian locus (ANSI C78.377)"),
    Term("spill_duv", "spill Duv", "", "the spill's distance from the Planckian locus (ANSI C78.377)"),
    Term("zones_max_delta_uv", "largest tint difference between zones (Δu'v')", "",
         "largest distance in CIE 1976 (u', v') between hotspot, corona and spill"),
)}
#: Where each :data:`COLOUR_FIGURES` key sits in report.json's ``colour`` section.
COLOUR_FIGURE_SOURCES = {"hotspot_cct": ("zones", "hotspot", "cct"), "corona_cct": ("zones", "corona", "cct"),
                         "spill_cct": ("zones", "spill", "cct"), "hotspot_duv": ("zones", "hotspot", "duv"),
                         "spill_duv": ("zones", "spill", "duv"), "zones_max_delta_uv": ("tint", "zones_max_delta_uv")}

def colour_figures_of(report: dict) -> dict:
    """The :data:`COLOUR_FIGURES` records (value, uncertainty, unit, status...) found in a report
    dict's ``colour`` section; empty when colour was not measured."""
    colour = report.get("colour") if isinstance(report, dict) else None
    if not (isinstance(colour, dict) and colour.get("measured")):
        return {}
    out = {}
    for key, path in COLOUR_FIGURE_SOURCES.items():
        node = colour
        for part in path:
            node = node.get(part) if isinstance(node, dict) else None
        if isinstance(node, dict) and "value" in node:
            out[key] = node
    return out


#: Beam shape and artefact figures (report.json ``shape``; beamshot.artefacts; docs/artefacts.md).
#: Fractions have no unit ("" ): 0.05 is 5 %.
SHAPE_FIGURES: dict[str, Term] = {t.key: t for t in (
    Term("ring_score", "ring score", "",
         "largest |amplitude| of a ring relative to the smooth profile; an upper bound when no ring is found"),
    Term("ring_count", "rings found", "",
         "number of rings distinguishable from noise (6 sigma) and, in a JPEG, from its coding (3 sigma)"),
    Term("ring_angle", "strongest ring at", "deg", "polar angle of the strongest ring from the beam axis"),
    Term("ring_amplitude", "strongest ring amplitude", "",
         "the strongest ring's deviation from the smooth profile, + bright, - dark"),
    Term("ring_width", "strongest ring width", "deg", "full width at half maximum of the strongest ring"),
    Term("centre_hole_depth", "centre hole depth", "",
         "1 - intensity at the hotspot's centre / the surrounding maximum; an upper bound when no hole is found"),
    Term("centre_hole_width", "centre hole width", "deg", "full angle of the centre hole at half its depth"),
    Term("sector_nonuniformity_hotspot", "sectors in the hotspot", "",
         "RMS relative azimuthal variation of the hotspot at 10 deg resolution, noise removed"),
    Term("sector_nonuniformity_spill", "sectors in the spill", "",
         "RMS relative azimuthal variation of the spill at 10 deg resolution, noise removed"),
    Term("hotspot_major_angle", "hotspot major axis (50 %)", "deg",
         "full angle of the 50 % contour along its major principal axis (fitted ellipse)"),
    Term("hotspot_minor_angle", "hotspot minor axis (50 %)", "deg",
         "full angle of the 50 % contour along its minor principal axis (fitted ellipse)"),
    Term("hotspot_ellipticity", "hotspot ellipticity", "", "minor over major axis of the 50 % contour (1: round)"),
    Term("hotspot_orientation", "hotspot orientation", "deg",
         "azimuth of the 50 % contour's major axis, 0-180 deg counter-clockwise from the right"),
    Term("spill_major_angle", "spill major axis (edge)", "deg",
         "full angle of the spill edge along its major principal axis (fitted ellipse)"),
    Term("spill_minor_angle", "spill minor axis (edge)", "deg",
         "full angle of the spill edge along its minor principal axis (fitted ellipse)"),
    Term("spill_ellipticity", "spill ellipticity", "", "minor over major axis of the spill edge (1: round)"),
    Term("spill_orientation", "spill orientation", "deg",
         "azimuth of the spill edge's major axis, 0-180 deg counter-clockwise from the right"),
    Term("d4sigma_major", "D4σ major (ISO 11146)", "deg",
         "ISO 11146-1 second-moment diameter of the hotspot along its major axis, spill and noise excluded"),
    Term("d4sigma_minor", "D4σ minor (ISO 11146)", "deg",
         "ISO 11146-1 second-moment diameter of the hotspot along its minor axis, spill and noise excluded"),
    Term("d4sigma_ellipticity", "D4σ ellipticity (ISO 11146)", "",
         "ISO 11146-1 ellipticity, minor over major diameter"),
    Term("d4sigma_azimuth", "D4σ azimuth (ISO 11146)", "deg",
         "ISO 11146-1 azimuth of the major principal axis, 0-180 deg counter-clockwise from the right"),
    Term("hotspot_flatness", "hotspot flatness (ISO 13694)", "",
         "ISO 13694 flatness factor at the 50 % clip level: mean over the hotspot / peak (1: flat top)"),
    Term("hotspot_uniformity", "hotspot uniformity (ISO 13694)", "",
         "ISO 13694 beam uniformity at the 50 % clip level: RMS deviation / mean, noise removed (0: uniform)"),
    Term("hotspot_edge_steepness", "hotspot edge steepness (ISO 13694)", "",
         "ISO 13694 edge steepness (A_10% - A_90%) / A_10% (0: vertical edge)"),
    Term("hotspot_transition_width", "hotspot-to-spill transition", "deg",
         "angle over which the hotspot's own light (spill removed) falls from 90 % to 10 % of its maximum"),
)}

#: Status words as printed for people (report.json keeps the keys).
STATUS_WORDS = {
    "measured": "measured",
    "estimate": "estimate",
    "lower_bound": "lower bound",
    "upper_bound": "upper bound",
    "not_measured": "not measured",
}

#: The mark printed before a value of each status.
STATUS_MARKS = {"lower_bound": "≥ ", "upper_bound": "≤ ", "estimate": "≈ "}


def term(key: str) -> Term:
    """The :class:`Term` of a figure key (a main, shape or colour figure); unknown keys get their key as label."""
    return FIGURES.get(key) or SHAPE_FIGURES.get(key) or COLOUR_FIGURES.get(key) or Term(key, key.replace("_", " "), "", "")


def label(key: str, *, indent: bool = False) -> str:
    """The short label of a figure; with ``indent`` the H/V parts are indented under their figure."""
    t = term(key)
    return f"  {t.label}" if indent and t.part_of else t.label


def unit_text(unit: str) -> str:
    """A unit as printed next to a number ('deg' is shown as the degree sign)."""
    return {"deg": "°", "": ""}.get(unit, unit)
