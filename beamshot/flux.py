"""Flux by solid-angle integration over zones of the beam map.

``Phi = sum I dOmega`` over map cells, with each cell's exact solid angle
``(cos theta_lo - cos theta_hi) * d_phi`` (zonal form of ``Phi = integral I sin(theta) dtheta dphi``).

Zones (this project's conventions, see docs/figures.md):
- hotspot zone: inside the 50 % contour traced around the peak;
- spill zone: inside the spill edge and outside the hotspot zone;
- beam: hotspot + spill.  Ra = spill flux / hotspot flux (the project's spill-to-hotspot
  ratio; not the colour rendering index that shares the symbol).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .beammap import BeamMap
from .hotspot import Contour, local_basis
from .spill import SpillEdge

__all__ = ["ZoneFlux", "zone_flux", "zone_fluxes", "inside_contour"]


@dataclass(frozen=True)
class ZoneFlux:
    """Flux (map unit x sr) per zone; ``missing`` fractions of zone solid angle not covered."""

    hotspot: float
    spill: float | None
    outside: float
    hotspot_missing: float
    spill_missing: float | None
    hotspot_saturated: bool


def _peak_polar(beam: BeamMap, centre: np.ndarray, rows: int | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Angular distance and bearing (rad) from ``centre`` of the map cells in the first ``rows`` theta rows."""
    c = np.asarray(centre, float) / np.linalg.norm(centre)
    e1, e2 = local_basis(c)
    theta = beam.theta[:rows]
    # v = (sin t cos p, sin t sin p, cos t); dot products as sums of outer products (cheap)
    st, ct = np.sin(theta)[:, None], np.cos(theta)[:, None]
    cp, sp = np.cos(beam.phi)[None, :], np.sin(beam.phi)[None, :]

    def dot(e):
        return st * (e[0] * cp + e[1] * sp) + ct * e[2]

    dist = np.arccos(np.clip(dot(c), -1.0, 1.0))
    bearing = np.mod(np.arctan2(dot(e2), dot(e1)), 2 * np.pi)
    return dist, bearing


def inside_contour(beam: BeamMap, contour: Contour, centre: np.ndarray, scale: float = 1.0,
                   *, polar: tuple[np.ndarray, np.ndarray] | None = None) -> np.ndarray:
    """Fraction (0-1) of each map cell inside ``contour`` (angles times ``scale``) around ``centre``.

    A cell whose centre lies within half a theta step of the boundary counts in proportion
    to its distance from it (linear anti-aliasing), which removes the bias of counting whole cells.
    ``polar`` (from :func:`_peak_polar`) may cover only the first rows of the map; the result
    then has those rows.
    """
    dist, bearing = _peak_polar(beam, centre) if polar is None else polar
    b = np.concatenate([contour.bearings - 2 * np.pi, contour.bearings, contour.bearings + 2 * np.pi])
    a = np.concatenate([contour.alpha, contour.alpha, contour.alpha]) * scale
    return np.clip(0.5 - (dist - np.interp(bearing, b, a)) / beam.d_theta, 0.0, 1.0)


def zone_flux(beam: BeamMap, hotspot: Contour, peak_vector: np.ndarray, edge: SpillEdge | None, *,
              hotspot_scale: float = 1.0, edge_scale: float = 1.0) -> ZoneFlux:
    """Integrate the map over the hotspot, spill and outside zones.

    ``hotspot_scale``/``edge_scale`` stretch the zone boundaries (for uncertainty estimates).
    Cells outside the photo count as zero flux and are reported as a missing fraction.
    """
    return zone_fluxes(beam, hotspot, peak_vector, edge, [(hotspot_scale, edge_scale)])[0]


def zone_fluxes(beam: BeamMap, hotspot: Contour, peak_vector: np.ndarray, edge: SpillEdge | None,
                scales: list[tuple[float, float]]) -> list[ZoneFlux]:
    """:func:`zone_flux` for several ``(hotspot_scale, edge_scale)`` pairs, sharing the geometry.

    Only the theta rows a zone can reach are weighted (a cell's angular distance from the peak is
    at least the difference of their polar angles); the rest of the map counts as outside.
    """
    d_omega_col = beam.cell_solid_angles()
    valid = beam.valid
    flux = np.where(valid, beam.intensity, 0.0) * d_omega_col
    total = float(flux.sum())
    peak_theta = float(np.arccos(np.clip(peak_vector[2] / np.linalg.norm(peak_vector), -1.0, 1.0)))
    n_t = len(beam.theta)

    def rows_to(reach: float) -> int:
        return min(n_t, int(np.searchsorted(beam.theta, reach + beam.d_theta)) + 1)

    hot_rows = rows_to(peak_theta + float(np.nanmax(hotspot.alpha)) * max(s[0] for s in scales))
    rows = hot_rows
    edge_theta = None
    if edge is not None and edge.complete:
        edge_theta = edge.at(beam.phi)[None, :]
        rows = max(rows, rows_to(float(np.max(edge_theta)) * max(s[1] for s in scales)))
    flux, valid = flux[:rows], valid[:rows]
    d_omega = np.broadcast_to(d_omega_col[:rows], flux.shape)
    polar = _peak_polar(beam, peak_vector, hot_rows)
    tt = beam.theta[:rows, None]
    invalid = ~valid
    saturated = beam.saturated[:rows]
    out = []
    hots: dict = {}  # per hotspot scale: the zone and its flux, missing fraction and clipping
    insides: dict = {}  # per edge scale: the fraction of each cell inside the edge
    for hotspot_scale, edge_scale in scales:
        if hotspot_scale not in hots:
            hot = np.zeros(flux.shape)
            hot[:hot_rows] = inside_contour(beam, hotspot, peak_vector, hotspot_scale, polar=polar)
            w = d_omega * hot  # (the same products for the missing part and the whole)
            hots[hotspot_scale] = (hot, float((flux * hot).sum()), float(w[invalid].sum() / max(w.sum(), 1e-30)),
                                   bool(np.any(saturated & (hot > 0))))
        hot, hot_flux, hot_missing, hot_sat = hots[hotspot_scale]
        if edge_theta is not None:
            if edge_scale not in insides:
                insides[edge_scale] = np.clip(0.5 - (tt - edge_theta * edge_scale) / beam.d_theta, 0.0, 1.0)
            inside = insides[edge_scale]
            spill = np.clip(inside - hot, 0.0, 1.0)
            spill_flux = float((flux * spill).sum())
            w = d_omega * spill
            spill_missing = float(w[invalid].sum() / max(w.sum(), 1e-30))
            covered = np.maximum(inside, hot)
            covered *= flux
            outside = total - float(covered.sum())
        else:
            spill_flux, spill_missing = None, None
            outside = total - hot_flux
        out.append(ZoneFlux(hotspot=hot_flux, spill=spill_flux, outside=outside, hotspot_missing=hot_missing,
                            spill_missing=spill_missing, hotspot_saturated=hot_sat))
    return out
