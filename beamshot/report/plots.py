"""The intensity map drawn with matplotlib (for tint.png and other matplotlib pictures), and the
data and text helpers that every beam picture shares: noise floor, colour-scale floor, the
azimuthal-equidistant grid, percentiles over azimuth, tick texts and the figures' value texts.

beam.png itself is drawn without matplotlib by :mod:`beamshot.report.beam_picture`; this module's
top level imports no matplotlib either (it is imported lazily, with the Agg backend, by
:func:`plot_intensity_map` and :func:`_pyplot`).

Conventions: map coordinates are azimuthal-equidistant angles from the beam axis in degrees
(right and up positive); every angle written on the picture is a full cone angle (twice the
angle from the axis), as every reported figure is.  Noise: the dark wall beyond the spill edge
gives the 1-sigma noise of one map cell and of the azimuthal mean (median absolute deviation
x 1.4826, the normal-consistent scale, common practice); a value is shown as detected when it
exceeds the dark wall's median by ``DETECTION_SIGMAS`` sigma (the k = 3 limit of detection,
IUPAC convention, from memory).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .. import vocabulary
from ..beammap import BeamMap, directions
from ..figure import value_with_uncertainty
from ..hotspot import local_basis

__all__ = ["NoiseFloor", "noise_floor", "map_floor", "inset_place", "plot_intensity_map", "figure_value_text", "intensity_label",
           "row_percentiles", "CAUTION_LINE", "TABLE_KEYS"]

#: Sigmas above the dark wall's median for a value to count as detected (k = 3, IUPAC, from memory).
DETECTION_SIGMAS = 3.0
#: MAD -> 1-sigma of a normal distribution (common practice).
MAD_TO_SIGMA = 1.4826
#: Dark wall: cells this far beyond the spill edge, in degrees or as a fraction of the edge angle,
#: whichever is larger (clear of the bezel's soft cut-off; project choice).
DARK_MARGIN_DEG = 2.0
DARK_MARGIN_FRACTION = 0.08
#: Fewest dark-wall cells / profile rows for a noise estimate (project choice).
MIN_DARK_CELLS = 200
MIN_DARK_ROWS = 8
#: The colour scale reaches down to half the spill's median level at least (project choice) ...
SPILL_FLOOR_FRACTION = 0.5
#: ... but never more than this many decades below the peak; without a spill or a dark wall it
#: shows DEFAULT_DECADES (project choice).
MAX_DECADES = 6.0
DEFAULT_DECADES = 3.0
#: Bearing (deg, counter-clockwise from right) along which the rings are labelled.
RING_LABEL_BEARING_DEG = 35.0
#: A hotspot whose field contour reaches less than this fraction of the map's half width gets an
#: enlarged inset (project choice).
INSET_BELOW_FRACTION = 0.2
#: The inset's side as a fraction of the map's side, largest first: it takes the largest that covers
#: no measured light, else the placement covering least (project choice).
INSET_SIZES = (0.38, 0.34, 0.30, 0.26)
#: The inset shows the field contour's reach times this (deg from the axis), and is drawn only if it
#: enlarges at least INSET_MIN_ENLARGEMENT times: a smaller one adds nothing the map does not show
#: (project choices).
INSET_ZOOM_REACH = 1.25
INSET_MIN_ENLARGEMENT = 1.5
#: Gap between the inset and the map's border, as fractions of the map's side (x, y).
INSET_MARGIN = (0.015, 0.02)
#: Corners tried for the inset, in order of preference when several are equally clear.
INSET_CORNERS = ("upper left", "lower left", "upper right", "lower right")
#: Figures listed in the picture's table, in the printed table's order.
TABLE_KEYS = (
    "peak_intensity", "beam_distance", "hotspot_angle", "hotspot_angle_horizontal", "hotspot_angle_vertical",
    "field_angle", "spill_angle", "spill_angle_horizontal", "spill_angle_vertical", "hotspot_flux",
    "spill_flux", "beam_flux", "ra", "hotspot_offset", "light_tilt",
)

#: Size (in) of a map drawn on its own by :func:`plot_intensity_map`, and its text size (pt).
FIG_WIDTH_IN = 6.0
FONT_PT = 11.0
#: Iso-intensity lines drawn on the map, as fractions of the peak (beside the 50 % and 10 % contours).
ISO_LEVELS = (0.01, 0.001)

# Colours: cividis (perceptually uniform, made for colour-vision deficiency) for the map; marks
# from the Okabe-Ito palette and told apart by line style and marker shape as well.
_CMAP = "cividis"
_BELOW = "#000000"          # below the noise floor (darker than cividis' darkest blue)
_OUTSIDE = "#eeeeee"        # outside the photo (hatched)
_VERMILLION = "#D55E00"
_BLUE = "#0072B2"
_SKY = "#56B4E9"


def _pyplot():
    import matplotlib

    matplotlib.use("Agg", force=False)
    import matplotlib.pyplot as plt

    return plt


# ----------------------------------------------------------------------------- noise and floors
@dataclass(frozen=True)
class NoiseFloor:
    """Noise of the dark wall beyond the spill edge, in the map's unit.

    ``cell_sigma`` is the 1-sigma of one map cell and ``cell_level`` the level a cell must
    exceed to count as detected (median + ``DETECTION_SIGMAS`` sigma, at least the sigma term);
    ``mean_sigma``/``mean_level`` the same for the azimuthal mean of the radial profile.
    ``cells`` and ``rows`` count the dark cells and the profile rows used.
    """

    cell_sigma: float
    cell_level: float
    mean_sigma: float
    mean_level: float
    cells: int
    rows: int


def _robust(values: np.ndarray) -> tuple[float, float]:
    """Median and MAD-based 1-sigma of finite values."""
    v = values[np.isfinite(values)]
    med = float(np.median(v))
    return med, MAD_TO_SIGMA * float(np.median(np.abs(v - med)))


def _edge_at(edge, phi: np.ndarray) -> np.ndarray:
    """Spill-edge angle (rad) of the sector nearest each azimuth (NaN where the edge is unknown)."""
    d = np.abs(np.angle(np.exp(1j * (phi[:, None] - np.asarray(edge.phi)[None, :]))))
    return np.asarray(edge.theta, float)[np.argmin(d, axis=1)]


def noise_floor(beam: BeamMap, edge, profile=None) -> NoiseFloor | None:
    """The dark wall's noise beyond the spill ``edge`` (a :class:`~beamshot.spill.SpillEdge`).

    Dark cells lie beyond the edge by ``DARK_MARGIN_DEG`` or ``DARK_MARGIN_FRACTION`` of the edge
    angle.  The azimuthal mean's noise comes from the profile rows wholly beyond the edge; with
    too few such rows it is taken as the cell noise (an upper bound).  None without an edge or
    with fewer than ``MIN_DARK_CELLS`` dark cells.
    """
    if edge is None or not np.any(np.isfinite(edge.theta)):
        return None
    e = _edge_at(edge, np.asarray(beam.phi, float))
    margin = np.maximum(np.radians(DARK_MARGIN_DEG), DARK_MARGIN_FRACTION * e)
    th = np.asarray(beam.theta, float)[:, None]
    with np.errstate(invalid="ignore"):
        dark = np.isfinite(beam.intensity) & np.isfinite(e)[None, :] & (th > (e + margin)[None, :])
    if dark.sum() < MIN_DARK_CELLS:
        return None
    med, sigma = _robust(beam.intensity[dark])
    cell_level = max(med, 0.0) + DETECTION_SIGMAS * sigma
    mean_sigma, mean_level, rows = sigma, cell_level, 0
    if profile is not None:
        beyond = np.asarray(profile.theta_deg) > np.degrees(np.nanmax(e + margin))
        row_means = np.asarray(profile.mean)[beyond]
        row_means = row_means[np.isfinite(row_means)]
        if row_means.size >= MIN_DARK_ROWS:
            m_med, m_sigma = _robust(row_means)
            mean_sigma, mean_level, rows = m_sigma, max(m_med, 0.0) + DETECTION_SIGMAS * m_sigma, int(row_means.size)
    return NoiseFloor(sigma, cell_level, mean_sigma, mean_level, int(dark.sum()), rows)


#: ``noise`` argument of the report writers: work out the report's noise floor where it is needed.
FROM_REPORT = "from the report"


def report_noise_floor(report) -> NoiseFloor | None:
    """:func:`noise_floor` of a report's map, spill edge and profile (what beam.png and the page show)."""
    return noise_floor(report.beam, (report.contours or {}).get("edge"), report.profile)


def _spill_median(beam: BeamMap, edge, peak: float) -> float | None:
    """Median of the map cells between the 10 % region and 0.9 x the spill edge (None if too few)."""
    if edge is None or not np.any(np.isfinite(edge.theta)):
        return None
    e = _edge_at(edge, np.asarray(beam.phi, float))
    th = np.asarray(beam.theta, float)[:, None]
    v = beam.intensity
    with np.errstate(invalid="ignore"):
        cells = np.isfinite(v) & (th < 0.9 * e[None, :]) & (v < 0.1 * peak)
    if cells.sum() < 50:
        return None
    return float(np.median(v[cells]))


def map_view(beam: BeamMap, contours: dict, noise: NoiseFloor | None, grid, half_width_deg: float | None = None):
    """What a map picture shows, whichever draws it: the half width (deg; the photo's coverage, at
    most 89), the grid ``grid(beam, half) -> (angles, values)``, the peak in view, the factor to the
    shown unit (1/peak for a relative map) and the floor with its legend words (:func:`map_floor`).
    Returns ``(half, a, vals, peak, factor, floor, below_text)``."""
    cov = float(np.degrees(beam.theta[np.any(beam.valid, axis=1)].max())) if beam.valid.any() else 10.0
    half = half_width_deg or min(cov, 89.0)
    a, vals = grid(beam, half)
    peak = float(np.nanmax(vals)) if np.any(np.isfinite(vals)) else np.nan
    if not peak > 0:  # nothing lit in view (the analysis refuses such photos; keep the picture drawable)
        peak = 1.0
    factor = 1.0 / peak if beam.unit != "cd" else 1.0
    floor, below_text = map_floor(beam, (contours or {}).get("edge"), peak, noise)
    return half, a, vals, peak, factor, floor, below_text


def map_floor(beam: BeamMap, edge, peak: float, noise: NoiseFloor | None) -> tuple[float, str]:
    """Bottom of the map's colour scale and what lies below it (for the legend).

    The scale reaches down to the dark wall's detection level, or to ``SPILL_FLOOR_FRACTION`` of
    the spill's median level where that is lower (a spill fainter than one cell's noise still
    shows, speckled), at most ``MAX_DECADES`` below the peak.
    """
    spill = _spill_median(beam, edge, peak)
    candidates = []
    if noise is not None and noise.cell_level > 0:
        candidates.append(noise.cell_level)
    if spill is not None and spill > 0:
        candidates.append(SPILL_FLOOR_FRACTION * spill)
    if not candidates:
        return peak * 10 ** (-DEFAULT_DECADES), f"below {10 ** (-DEFAULT_DECADES):g} × peak"
    floor = min(min(candidates), 0.1 * peak)  # a noise level near the peak: keep a decade in view
    deepest = peak * 10 ** (-MAX_DECADES)
    if floor < deepest:
        return deepest, f"below {10 ** (-MAX_DECADES):g} × peak"
    if noise is not None and floor >= noise.cell_level:
        return floor, "below the noise floor"
    return floor, "below half the spill level"


def inset_place(a: np.ndarray, vals: np.ndarray, floor: float, *, edge_xy=None, keep_out=()) -> dict:
    """Where a map's enlarged inset covers least: a corner and a size from :data:`INSET_SIZES`.

    ``a`` (deg, ascending) and ``vals`` (rows bottom to top) are the drawn grid; cells at or above
    ``floor`` are measured light, and each point of ``edge_xy`` (deg, the spill edge's line) counts
    as much as 50 such cells.  ``keep_out`` lists boxes ``(x0, y0, x1, y1)`` in fractions of the map
    from its top left (labels, the zoomed area) that the inset must not touch.  Returns ``{"corner",
    "box": (x0, y0, x1, y1) in those fractions, "covered": cells covered}``: the largest size that
    covers nothing, else the placement covering least; ties go by :data:`INSET_CORNERS`' order.
    """
    half = (a[-1] - a[0]) / 2.0
    fx = (a - a[0]) / (2 * half)  # column -> fraction from the left
    fy = 1.0 - fx                 # row (bottom to top) -> fraction from the top
    with np.errstate(invalid="ignore"):
        lit = np.isfinite(vals) & (vals >= floor)
    rows, cols = np.nonzero(lit)
    px, py = fx[cols], fy[rows]
    if edge_xy is not None and len(edge_xy):
        e = np.asarray(edge_xy, float)
        e = e[np.all(np.isfinite(e), axis=1)]
        ex, ey = (e[:, 0] - a[0]) / (2 * half), 1.0 - (e[:, 1] - a[0]) / (2 * half)
    else:
        ex = ey = np.zeros(0)
    mx, my = INSET_MARGIN
    best = None
    for size in INSET_SIZES:
        for order, corner in enumerate(INSET_CORNERS):
            x0 = mx if "left" in corner else 1.0 - mx - size
            y0 = my if "upper" in corner else 1.0 - my - size
            box = (x0, y0, x0 + size, y0 + size)
            if any(k[0] < box[2] and box[0] < k[2] and k[1] < box[3] and box[1] < k[3] for k in keep_out):
                continue
            inside = (px >= box[0]) & (px <= box[2]) & (py >= box[1]) & (py <= box[3])
            on_edge = (ex >= box[0]) & (ex <= box[2]) & (ey >= box[1]) & (ey <= box[3])
            covered = int(inside.sum()) + 50 * int(on_edge.sum())
            # nothing covered: the largest size wins; else the least covered
            key = (covered > 0, covered if covered else -size, order)
            if best is None or key < best[0]:
                best = (key, {"corner": corner, "box": box, "covered": covered})
    if best is None:  # every placement touches a label: the first corner at the smallest size
        size, (mx, my) = INSET_SIZES[-1], INSET_MARGIN
        return {"corner": INSET_CORNERS[0], "box": (mx, my, mx + size, my + size), "covered": -1}
    return best[1]


# ----------------------------------------------------------------------------- the map
def _azimuthal_grid(beam: BeamMap, half_width_deg: float, n: int = 401):
    """Sample the map on a square grid of azimuthal-equidistant angles (deg, right/up positive).

    With the photo's outline known, the picture shows exactly the photo's view: grid points
    inside it that fall between the map's coarse azimuth cells at the rim take the nearest
    sampled value, and points outside are blank.
    """
    a = np.linspace(-half_width_deg, half_width_deg, n)
    xx, yy = np.meshgrid(a, a)
    theta = np.radians(np.hypot(xx, yy))
    phi = np.arctan2(yy, xx)
    vals = beam.sample(directions(theta, phi))
    if beam.footprint_deg is not None and np.any(np.isfinite(vals)):
        from scipy.ndimage import distance_transform_edt

        inside = _inside_outline(beam.footprint_deg, a, a)
        _, (ri, ci) = distance_transform_edt(~np.isfinite(vals), return_indices=True)
        vals = np.where(inside, vals[ri, ci], np.nan)
    return a, vals


def _inside_outline(outline: np.ndarray, xs: np.ndarray, ys: np.ndarray) -> np.ndarray:
    """Which points of the grid ``(ys[i], xs[j])`` lie inside the closed polygon ``outline`` ``(n, 2)``.

    The even-odd crossing test (W. R. Franklin's pnpoly, which matplotlib's ``Path.contains_points``
    runs point by point) with the same comparisons in the same arithmetic: an edge from ``p0`` to
    ``p1`` that straddles a row's ``y`` flips every point whose ``+x`` ray it crosses,
    ``((y1 - y) (x0 - x1) >= (x1 - x) (y0 - y1)) == (y1 >= y)``.  For increasing ``xs`` that
    test holds on a first run of points only (its right side is monotonic in ``x``, and rounding
    keeps it so), so each straddling edge needs only where its run ends: estimated from the
    crossing and settled by evaluating the test itself beside it.  A point is inside when an odd
    number of its row's runs cover it.  ``xs`` and ``ys`` must increase.
    """
    p0 = np.asarray(outline, float)
    p1 = np.roll(p0, -1, axis=0)  # the outline is closed: the last vertex joins the first
    # an edge straddles the rows with min(y0, y1) < y <= max(y0, y1) (exactly the rows where
    # (y0 >= y) != (y1 >= y)): a run of rows for increasing ys
    first = np.searchsorted(ys, np.minimum(p0[:, 1], p1[:, 1]), side="right")
    stop = np.searchsorted(ys, np.maximum(p0[:, 1], p1[:, 1]), side="right")
    span = np.maximum(stop - first, 0)
    edges = np.repeat(np.arange(len(p0)), span)
    rows = np.arange(span.sum()) - np.repeat(np.cumsum(span) - span, span) + np.repeat(first, span)
    n = len(xs)
    inside = np.zeros((len(ys), n), bool)
    if rows.size == 0:
        return inside
    x0, y0, x1, y1 = p0[edges, 0], p0[edges, 1], p1[edges, 0], p1[edges, 1]
    lhs = (y1 - ys[rows]) * (x0 - x1)
    dy = y0 - y1
    up = y1 >= ys[rows]

    def flips(j):  # the test at column j (clipped to the grid), as the point-by-point loop evaluates it
        return (lhs >= (x1 - xs[np.clip(j, 0, n - 1)]) * dy) == up

    with np.errstate(divide="ignore", invalid="ignore"):
        guess = np.nan_to_num(x1 - lhs / dy, nan=xs[0])
    end = np.searchsorted(xs, guess)  # first column not flipped, about
    for _ in range(n + 1):  # settle: flipped at end - 1 (or end 0), not flipped at end (or end n)
        fwd = (end < n) & flips(end)
        back = (end > 0) & ~flips(end - 1)
        if not (fwd.any() or back.any()):
            break
        end = end + fwd - (back & ~fwd)
    counts = np.zeros((len(ys), n + 1), np.int32)
    np.add.at(counts, (rows, end), 1)
    # columns j < end are flipped: the number of runs covering j is the count of ends above j
    covering = np.cumsum(counts[:, ::-1], axis=1)[:, ::-1][:, 1:]
    inside[:] = covering % 2 == 1
    return inside


def _ring_step_full_deg(half: float) -> float:
    """Spacing of the rings as a full cone angle (deg): about four to six rings over the map."""
    for step in (2, 5, 10, 20, 30):
        if 2 * half / step <= 6:
            return float(step)
    return 40.0


def _outlined(fontsize, colour="white"):
    import matplotlib.patheffects as pe

    return dict(color=colour, fontsize=fontsize, path_effects=[pe.withStroke(linewidth=2.2, foreground="black")])


def intensity_label(report=None, unit: str = "cd") -> str:
    """Axis / colour-bar label of intensity: says 'estimate' when the absolute scale is one."""
    if unit != "cd":
        return "intensity (relative to peak)"
    if report is not None and _scale_is_estimate(report):
        return "intensity, estimate (cd)"
    return "intensity (cd)"


def _scale_is_estimate(report) -> bool:
    pk = report.figures.get("peak_intensity")
    scale = (report.calibration or {}).get("absolute_scale") or {}
    return (pk is not None and pk.status == "estimate") or scale.get("kind") == "exposure_metadata"


def _iso_lines(ax, beam, im) -> list[float]:
    """Thin labelled iso-intensity lines at :data:`ISO_LEVELS` x peak, where they lie above the map's floor.

    The map is looked up at the nearest cell of the azimuthal-equidistant grid the picture shows
    (x = theta cos phi, y = theta sin phi, degrees).
    """
    x0, x1 = ax.get_xlim()
    a = np.linspace(x0, x1, 301)
    xx, yy = np.meshgrid(a, a)
    th = np.radians(np.hypot(xx, yy))
    k = np.round((th - beam.theta[0]) / beam.d_theta).astype(int)
    j = np.round((np.mod(np.arctan2(yy, xx), 2 * np.pi) - beam.phi[0]) / beam.d_phi).astype(int) % len(beam.phi)
    inside = k < len(beam.theta)
    vals = np.full(xx.shape, np.nan)
    vals[inside] = beam.intensity[np.clip(k[inside], 0, None), j[inside]]
    finite = vals[np.isfinite(vals)]
    if finite.size == 0:
        return []
    peak = float(np.max(finite))
    if not peak > 0:
        return []
    floor = float(im.norm.vmin) / (1.0 / peak if beam.unit != "cd" else 1.0)
    levels = [lv for lv in sorted(ISO_LEVELS) if lv * peak > floor]
    if not levels:
        return []
    from scipy.ndimage import gaussian_filter

    rel = np.where(np.isfinite(vals), vals / peak, np.nan)
    smooth = gaussian_filter(np.nan_to_num(rel, nan=0.0), 1.0)  # one grid step: keeps noise from fraying the line
    smooth[~np.isfinite(rel)] = np.nan
    cs = ax.contour(a, a, smooth, levels=levels, colors="white", linewidths=0.8, linestyles="dotted", zorder=5)
    ax.clabel(cs, fmt={lv: f"{lv * 100:g} %" for lv in levels}, fontsize=8, colors="white", inline=True)
    return levels


def plot_intensity_map(beam: BeamMap, contours: dict | None = None, *, ax=None, half_width_deg=None,
                       noise: NoiseFloor | None = None, label: str | None = None, fontsize: float = FONT_PT,
                       cbar_ax=None, legend_ax=None):
    """False-colour map of intensity (log scale) with rings at full cone angles; returns the image.

    Relative maps are shown relative to their peak.  The colour scale's bottom comes from
    :func:`map_floor`; cells below it are black, cells outside the photo hatched.  The colour
    bar goes on ``cbar_ax`` (horizontal) if given, else beside the map; the legend, naming every
    line, mark and area, on ``legend_ax`` if given, else below the map.  A hotspot small against
    the map gets an enlarged inset in the corner where it covers least (:func:`inset_place`).
    """
    plt = _pyplot()
    from matplotlib.colors import LogNorm

    if ax is None:
        _, ax = plt.subplots(figsize=(FIG_WIDTH_IN, FIG_WIDTH_IN))
    contours = contours or {}
    half, a, vals, peak, factor, floor, below_text = map_view(beam, contours, noise, _azimuthal_grid,
                                                              half_width_deg)
    relative = beam.unit != "cd"
    edge = contours.get("edge")
    # NaN cells (outside the photo) are transparent: the hatched background shows through
    cmap = plt.get_cmap(_CMAP).with_extremes(under=_BELOW, bad=(0.0, 0.0, 0.0, 0.0))
    norm = LogNorm(vmin=floor * factor, vmax=peak * factor)

    def draw(axes, a_, v_):
        # values at or below zero would be masked by the log scale: send them below the floor instead
        shown = np.where(np.isfinite(v_), np.maximum(v_, floor * 1e-3), np.nan) * factor
        axes.patch.set_facecolor(_OUTSIDE)
        axes.patch.set_hatch("///")
        axes.patch.set_edgecolor("#9a9a9a")
        return axes.imshow(shown, origin="lower", extent=(a_[0], a_[-1], a_[0], a_[-1]), cmap=cmap, norm=norm,
                           interpolation="nearest")

    im = draw(ax, a, vals)
    iso = _iso_lines(ax, beam, im)
    if cbar_ax is not None:
        cb = plt.colorbar(im, cax=cbar_ax, orientation="horizontal", extend="min")
    else:
        cb = plt.colorbar(im, ax=ax, fraction=0.046, pad=0.03, extend="min")
    cb.set_label(label or ("intensity (relative to peak)" if relative else "intensity (cd)"), fontsize=fontsize)
    cb.ax.tick_params(labelsize=fontsize * 0.9)
    _plain_log_ticks(cb.long_axis, span=norm.vmax / norm.vmin if norm.vmin > 0 else None)

    # rings at round full cone angles, labelled with the full angle (twice the radius drawn)
    step = _ring_step_full_deg(half)
    t = np.linspace(0, 2 * np.pi, 361)
    lab_dir = np.radians(RING_LABEL_BEARING_DEG)
    for full in np.arange(step, 2 * half + 1e-9, step):
        r = full / 2.0
        ax.plot(r * np.cos(t), r * np.sin(t), color="white", lw=0.7, alpha=0.6, zorder=2)
        if r <= half * 0.9:
            # on a dark tab, so that a contour passing under the label does not cut through it
            ax.text(r * np.cos(lab_dir), r * np.sin(lab_dir), f"{full:g}° full", ha="left", va="bottom",
                    gid="ring-label", zorder=6, color="white", fontsize=fontsize * 0.9,
                    bbox=dict(boxstyle="round,pad=0.15", fc="black", ec="none", alpha=0.6))

    pk = contours.get("peak")
    clipped = bool(pk is not None and pk.clipped)
    handles = [_ring_handle()]
    if iso:
        from matplotlib.lines import Line2D

        handles.append(Line2D([], [], color="#555555", lw=1.0, ls="dotted",
                              label="iso-intensity: " + ", ".join(f"{lv * 100:g} %" for lv in iso) + " of peak"))
    if np.any(beam.saturated):
        handles.append(_draw_clipped(ax, beam, a))
    handles += _draw_marks(ax, contours, edge, pk, clipped)
    handles.append(_patch(facecolor=_BELOW, edgecolor="#777777", label=below_text))
    handles.append(_patch(facecolor=_OUTSIDE, edgecolor="#9a9a9a", hatch="///", label="outside the photo"))

    # a small hotspot gets an enlarged inset, in the corner where it covers least (inset_place), so
    # that its contours and marks can be read
    fld = contours.get("field")
    if not clipped and pk is not None and fld is not None and np.any(np.isfinite(fld.alpha)):
        reach = np.degrees(pk.theta + np.nanmax(fld.alpha))
        zoom = max(INSET_ZOOM_REACH * reach, 1.0)
        x0 = y0 = x1 = y1 = 0.0
        if reach < INSET_BELOW_FRACTION * half:
            place = inset_place(a, vals, floor, edge_xy=_edge_line(edge), keep_out=_map_keep_out(half, zoom, step))
            x0, y0, x1, y1 = place["box"]
        if (x1 - x0) * half / zoom >= INSET_MIN_ENLARGEMENT:
            ins = ax.inset_axes([x0, 1.0 - y1, x1 - x0, y1 - y0])
            ins.set_gid("inset")
            a2, v2 = _azimuthal_grid(beam, zoom, n=241)
            draw(ins, a2, v2)
            _draw_marks(ins, contours, None, pk, clipped)
            ins.set_xlim(a2[0], a2[-1])
            ins.set_ylim(a2[0], a2[-1])
            ins.set_xticks([])
            ins.set_yticks([])
            for sp in ins.spines.values():
                sp.set_edgecolor("white")
                sp.set_linewidth(1.2)
            # the enlargement on the page: the inset's side over the side of the area it enlarges
            ins.text(0.04, 0.03, f"×{(x1 - x0) * half / zoom:.1f}", transform=ins.transAxes, ha="left", va="bottom",
                     gid="inset-label", **_outlined(fontsize * 0.85))
            ax.indicate_inset_zoom(ins, edgecolor="white", alpha=0.9, lw=1.0)

    kw = dict(handles=handles, fontsize=fontsize * 0.9, ncol=2, frameon=False, handlelength=2.4,
              columnspacing=1.0, borderaxespad=0.0, labelspacing=0.35)
    if legend_ax is not None:
        legend_ax.axis("off")
        legend_ax.legend(loc="upper center", **kw)
    else:
        ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.02), **kw)
    ax.set_xlim(a[0], a[-1])
    ax.set_ylim(a[0], a[-1])
    ax.set_xticks([])
    ax.set_yticks([])
    ax.set_aspect("equal")
    ax.text(0.985, 0.015, "seen from behind the light", transform=ax.transAxes, ha="right", va="bottom",
            zorder=9, **_outlined(fontsize * 0.8))
    return im


def _edge_line(edge) -> np.ndarray | None:
    """The spill edge's line (deg, right/up positive)."""
    if edge is None or not np.any(np.isfinite(edge.theta)):
        return None
    th = np.degrees(edge.theta)
    return np.column_stack((th * np.cos(edge.phi), th * np.sin(edge.phi)))


def _map_keep_out(half: float, zoom: float, ring_step_full: float) -> list:
    """Boxes (fractions of the map from its top left) an inset must leave clear on the matplotlib map:
    the ring labels (about 0.16 x 0.06 of the map from their anchor, up and right), the note along
    the lower right and the area the inset enlarges."""
    out = []
    lab = np.radians(RING_LABEL_BEARING_DEG)
    for full in np.arange(ring_step_full, 2 * half + 1e-9, ring_step_full):
        r = full / 2.0
        if r <= half * 0.9:
            fx, fy = (r * np.cos(lab) + half) / (2 * half), (half - r * np.sin(lab)) / (2 * half)
            out.append((fx, fy - 0.06, fx + 0.16, fy))
    out.append((0.55, 0.94, 1.0, 1.0))
    z = zoom / (2 * half)
    out.append((0.5 - z, 0.5 - z, 0.5 + z, 0.5 + z))
    return out


def _patch(**kw):
    from matplotlib.patches import Patch

    return Patch(**kw)


def _ring_handle():
    from matplotlib.lines import Line2D

    return Line2D([], [], color="#9a9a9a", lw=0.9, label="ring: full cone angle")


def _edge_style():
    import matplotlib.patheffects as pe

    return dict(color="white", lw=1.5, ls=(0, (5, 2, 1, 2)),
                path_effects=[pe.Stroke(linewidth=3.0, foreground="black"), pe.Normal()])


def _draw_clipped(ax, beam: BeamMap, a: np.ndarray):
    """Hatch and outline the clipped area (nearest-cell lookup of the saturation mask); the legend handle."""
    xx, yy = np.meshgrid(a, a)
    th = np.radians(np.hypot(xx, yy))
    k = np.clip(np.round((th - beam.theta[0]) / beam.d_theta).astype(int), 0, len(beam.theta) - 1)
    j = np.round((np.mod(np.arctan2(yy, xx), 2 * np.pi) - beam.phi[0]) / beam.d_phi).astype(int) % len(beam.phi)
    sat = beam.saturated[k, j].astype(float)
    import matplotlib as mpl

    with mpl.rc_context({"hatch.color": _VERMILLION, "hatch.linewidth": 1.2}):
        ax.contourf(a, a, sat, levels=[0.5, 1.5], colors="none", hatches=["xxx"], zorder=3)
    ax.contour(a, a, sat, levels=[0.5], colors=_VERMILLION, linewidths=2.0, zorder=4)
    return _patch(facecolor="#f7e7a0", edgecolor=_VERMILLION, hatch="xxx", lw=1.5, label="clipped: not measured")


def _draw_marks(ax, contours: dict, edge, pk, clipped: bool) -> list:
    """Hotspot and field contours, spill edge, beam axis and peak marks; returns legend handles."""
    from matplotlib.lines import Line2D

    handles = []
    styles = (("hotspot", "hotspot_angle", "black", "-", 1.7), ("field", "field_angle", "black", "--", 1.5))
    for key, fkey, colour, ls, lw in styles:
        c = contours.get(key)
        if clipped or c is None or pk is None or not np.any(np.isfinite(c.alpha)):
            continue
        xy = _contour_xy(pk.vector, c.bearings, c.alpha)
        ax.plot(xy[:, 0], xy[:, 1], color=colour, lw=lw, ls=ls, zorder=4)
        handles.append(Line2D([], [], color=colour, lw=lw, ls=ls, label=vocabulary.label(fkey)))
    if edge is not None and np.any(np.isfinite(edge.theta)):
        th = np.degrees(np.r_[edge.theta, edge.theta[:1]])
        ph = np.r_[edge.phi, edge.phi[:1]]
        ax.plot(th * np.cos(ph), th * np.sin(ph), zorder=4, **_edge_style())
        handles.append(Line2D([], [], label=vocabulary.label("spill_angle"), **_edge_style()))
    # beam axis: hollow ring; peak: small filled diamond with a white rim (told apart even when they coincide)
    axis_style = dict(marker="o", ms=12, mfc="none", mec=_SKY, mew=2.2, ls="none")
    ax.plot([0], [0], zorder=7, **axis_style)
    handles.append(Line2D([], [], label="beam axis (spill centre)", **axis_style))
    if pk is not None and not clipped:
        x, y = np.degrees(pk.theta) * np.cos(pk.phi), np.degrees(pk.theta) * np.sin(pk.phi)
        peak_style = dict(marker="D", ms=6, mfc=_VERMILLION, mec="white", mew=0.9, ls="none")
        ax.plot([x], [y], zorder=8, **peak_style)
        handles.append(Line2D([], [], label="peak", **peak_style))
    return handles


def _contour_xy(centre, bearings, alpha):
    """Azimuthal-equidistant coordinates (deg) of a contour traced around ``centre``."""
    c = np.asarray(centre, float)
    e1, e2 = local_basis(c)
    b = np.concatenate((bearings, bearings[:1]))
    a = np.concatenate((alpha, alpha[:1]))
    v = np.cos(a)[:, None] * c + np.sin(a)[:, None] * (np.cos(b)[:, None] * e1 + np.sin(b)[:, None] * e2)
    th = np.degrees(np.arccos(np.clip(v[:, 2], -1, 1)))
    ph = np.arctan2(v[:, 1], v[:, 0])
    return np.column_stack((th * np.cos(ph), th * np.sin(ph)))


# ----------------------------------------------------------------------------- the profile
def _azimuth_percentiles(beam: BeamMap, q=(10, 90), min_coverage: float = 0.5):
    """Per polar angle, percentiles of the map over azimuth (NaN where coverage is short)."""
    v = beam.intensity
    ok = np.isfinite(v).sum(axis=1) >= min_coverage * v.shape[1]
    out = np.full((len(q), v.shape[0]), np.nan)
    if ok.any():
        out[:, ok] = row_percentiles(v[ok], q)
    return out


def row_percentiles(v: np.ndarray, q) -> np.ndarray:
    """``np.nanpercentile(v, q, axis=1)`` (linear method) for rows with at least one finite value,
    in one sort of the whole array instead of a call per row: each row sorted (NaN last), the
    percentile ``p`` of ``n`` values at position ``(n - 1) p / 100``, interpolated between its two
    neighbours with numpy's own two-sided lerp (the same float operations, so the same values)."""
    srt = np.sort(v, axis=1)
    n = np.isfinite(v).sum(axis=1)
    rows = np.arange(v.shape[0])
    out = np.empty((len(q), v.shape[0]))
    for i, p in enumerate(q):
        pos = (n - 1) * (float(p) / 100.0)
        lo = np.floor(pos).astype(int)
        hi = np.minimum(lo + 1, n - 1)
        t = pos - lo
        a, b = srt[rows, lo], srt[rows, hi]
        d = b - a
        out[i] = np.where(t >= 0.5, b - d * (1 - t), a + d * t)
    return out


def _decade_text(v: float, pos=None) -> str:
    """A decade tick as plain text ("0.01", "100", "10,000", "1e7"): no math typesetting, which
    costs more than the rest of the profile panel to lay out."""
    if not (v > 0 and np.isfinite(v)):
        return ""
    e = int(round(np.log10(v)))
    if abs(np.log10(v) - e) > 1e-6:
        return ""
    if -3 <= e < 0:
        return f"{10.0 ** e:.{-e}f}"
    if 0 <= e <= 6:
        return f"{10 ** e:,}"  # grouped as the figures table groups
    return f"1e{e}"


def _tick_text(v: float, pos=None) -> str:
    """A 1-2-5 tick as plain text, grouped as the figures table groups ("200", "5,000", "0.05")."""
    if not (v > 0 and np.isfinite(v)):
        return ""
    e = int(np.floor(np.log10(v) + 1e-9))
    m = v / 10.0 ** e
    if min(abs(m - k) for k in (1.0, 2.0, 5.0)) > 1e-6:
        return ""
    if e < 0:
        return f"{v:.{-e}f}"
    return f"{int(round(v)):,}" if e <= 6 else f"{m:g}e{e}"


def _plain_log_ticks(axis, span: float | None = None) -> None:
    """Log-axis ticks as plain text: decades, or 1-2-5 steps when the axis spans under two decades
    (``span``: its top over its bottom), so that a short colour bar still has more than one label."""
    from matplotlib.ticker import FuncFormatter, LogLocator, NullLocator

    if span is not None and np.isfinite(span) and 1.0 < span < 100.0:
        axis.set_major_locator(LogLocator(base=10.0, subs=(1.0, 2.0, 5.0), numticks=12))
        axis.set_major_formatter(FuncFormatter(_tick_text))
    else:
        axis.set_major_locator(LogLocator(base=10.0, numticks=12))
        axis.set_major_formatter(FuncFormatter(_decade_text))
    axis.set_minor_locator(NullLocator())  # decades only: minor ticks cost more to lay out than they tell


# ----------------------------------------------------------------------------- the figures table
def _number(x: float) -> str:
    """Three significant digits with thousands separators (no exponent for everyday sizes)."""
    if x == 0 or not 1e-3 <= abs(x) < 1e9:
        return f"{x:.3g}"
    r = float(f"{x:.3g}")
    decimals = max(0, 2 - int(np.floor(np.log10(abs(r)))))
    return f"{r:,.{decimals}f}"


def figure_value_text(fig) -> str:
    """``≈ 5.04 ± 0.22°``: status mark, value ± uncertainty (GUM rounding) and unit; '—' if none."""
    if fig.value is None:
        return "—"
    unit = vocabulary.unit_text(fig.unit)
    sep = "" if unit in ("°", "") else " "
    mark = vocabulary.STATUS_MARKS.get(fig.status, "")
    if fig.uncertainty is not None and fig.uncertainty > 0:
        v, u = value_with_uncertainty(fig.value, fig.uncertainty)
        return f"{mark}{v} ± {u}{sep}{unit}"
    return f"{mark}{_number(fig.value)}{sep}{unit}"


# ----------------------------------------------------------------------------- the report picture
def _title(report) -> tuple[str, str]:
    beams = [i["name"] for i in report.inputs if i.get("role") == "beam"]
    photo = beams[0] if beams else ""
    if len(beams) > 1:
        photo += f" (+{len(beams) - 1} bracket photos)"
    name = (report.settings or {}).get("light_name")
    d = (report.settings or {}).get("distance_m")
    wall = f"wall at {d:g} m" if d else ""
    sub = " · ".join(s for s in ((f"photo {photo}" if name and photo else ""), wall) if s)
    return (name or photo or "beam"), sub


#: The safety line at the foot of every picture (pictures are shared without their report).
CAUTION_LINE = "Caution: do not look into the beam or aim it at people, animals, vehicles or aircraft."
