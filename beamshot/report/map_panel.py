"""beam.png's map panel, drawn with the raster kit: the angular intensity map through the colour
table (log scale), its colour bar and its legend.

What it shows (as :func:`beamshot.report.plots.plot_intensity_map` does with matplotlib for tint.png):
azimuthal-equidistant angles from the beam axis (right and up positive, seen from behind the
light); the colour scale from :func:`~beamshot.report.plots.map_floor` up to the peak, cells below
it in the 'below' colour, cells outside the photo hatched; rings at round full cone angles
(labelled with the full angle, twice the radius); iso-intensity lines at
:data:`~beamshot.report.plots.ISO_LEVELS` x peak; hotspot and field contours, the spill edge, the
beam axis (ring) and the peak (diamond); the clipped area hatched and outlined; a small hotspot
enlarged in an inset, in the corner where it covers least (:func:`~beamshot.report.plots.inset_place`).
"""

from __future__ import annotations

import functools

import numpy as np

from .. import vocabulary
from ..beammap import BeamMap
from .colour_table import CIVIDIS_RGB
from .plots import (_BELOW, _OUTSIDE, _SKY, _VERMILLION, INSET_BELOW_FRACTION, INSET_MIN_ENLARGEMENT,
                    INSET_ZOOM_REACH, ISO_LEVELS, RING_LABEL_BEARING_DEG, _contour_xy, _edge_line, _inside_outline,
                    _ring_step_full_deg, inset_place, map_view)
from .raster import Canvas
from .raster_chart import draw_legend, draw_line_sample, draw_mark, log_ticks

__all__ = ["draw_map_panel", "picture_grid", "MAP_STYLES"]

#: Pixels per typographic point at beam.png's resolution (170 dpi, the earlier picture's scale).
PX_PER_PT = 170.0 / 72.0

#: Line and mark styles (px), shared by the map, the legend and the profile panel.
MAP_STYLES = {
    "ring": dict(colour="#ffffff", width=0.7 * PX_PER_PT, alpha=0.5),
    "ring_legend": dict(colour="#9a9a9a", width=0.9 * PX_PER_PT),
    "iso": dict(colour="#ffffff", width=0.8 * PX_PER_PT, dash=(1.0 * PX_PER_PT, 1.65 * PX_PER_PT)),
    "iso_legend": dict(colour="#555555", width=1.0 * PX_PER_PT, dash=(1.0 * PX_PER_PT, 1.65 * PX_PER_PT)),
    "hotspot": dict(colour="#000000", width=1.7 * PX_PER_PT),
    "field": dict(colour="#000000", width=1.5 * PX_PER_PT, dash=(5.5 * PX_PER_PT, 2.4 * PX_PER_PT)),
    "edge": dict(colour="#ffffff", width=1.5 * PX_PER_PT, dash=(7.5 * PX_PER_PT, 3 * PX_PER_PT, 1.5 * PX_PER_PT,
                                                                 3 * PX_PER_PT),
                 stroke="#000000", stroke_width=3.0 * PX_PER_PT),
    "axis": dict(shape="ring", size=10.5 * PX_PER_PT, colour=_SKY, width=2.2 * PX_PER_PT),
    "peak": dict(shape="diamond", size=8.0 * PX_PER_PT, colour=_VERMILLION, rim="#ffffff", width=0.9 * PX_PER_PT),
    "clipped": dict(colour=_VERMILLION, width=1.5 * PX_PER_PT),
}
#: Hatch spacing (px) of 'outside the photo' and of the clipped area.
HATCH_PX = 14.0
CLIP_HATCH_PX = 10.0


def _colours(values: np.ndarray, vmin: float, vmax: float) -> np.ndarray:
    """RGB of ``values`` on a log scale from ``vmin`` to ``vmax`` through :data:`CIVIDIS_RGB`:
    index ``int(256 t)`` (the last entry at ``t = 1``), below ``vmin`` the 'below' colour (NaN
    takes the first entry)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        t = np.log10(values)
        t -= np.log10(vmin)
        t /= np.log10(vmax) - np.log10(vmin)
    np.nan_to_num(t, copy=False, nan=0.0)
    below = t < 0
    t *= 256
    np.floor(t, out=t)
    np.clip(t, 0, 255, out=t)
    idx = t.astype(np.intp)
    idx += 1  # entry 0 of the table with the 'below' colour first
    idx[below] = 0
    return np.take(_WITH_BELOW, idx, axis=0)


def _hex(c: str) -> tuple[int, int, int]:
    return int(c[1:3], 16), int(c[3:5], 16), int(c[5:7], 16)


#: The colour table with the 'below' colour as entry 0, for one lookup.
_WITH_BELOW = np.vstack([np.array([_hex(_BELOW)], np.uint8), CIVIDIS_RGB])


@functools.lru_cache(maxsize=4)  # about 1.4 MB each for the 401-point grid
def _grid_cells(half_width_deg: float, n: int, theta0: float, d_theta: float, n_theta: int, phi0: float,
                d_phi: float):
    """The square grid's angles ``a`` (deg) and, for each of its points, the map's cell coordinates
    (row ``k``, column ``j`` + 1 of the azimuth-padded map, float32 for ``cv2.remap``) and whether it
    lies beyond the map's last row.  Cached per process: a batch's maps share their grid and view."""
    a = np.linspace(-half_width_deg, half_width_deg, n)
    xx, yy = a[None, :], a[:, None]  # broadcast: the values np.meshgrid would hold, without its arrays
    th = np.radians(np.hypot(xx, yy))
    ph = np.mod(np.arctan2(yy, xx), 2 * np.pi)
    k = np.clip((th - theta0) / d_theta, 0.0, None)
    j = (ph - phi0) / d_phi + 1.0  # the azimuth wraps through one padded column each side
    out = (a, j.astype(np.float32), k.astype(np.float32), k > n_theta - 1)
    for arr in out:
        arr.flags.writeable = False
    return out


def picture_grid(beam: BeamMap, half_width_deg: float, n: int = 401):
    """The map on a square grid of azimuthal-equidistant angles (deg, right/up positive), for drawing.

    As :func:`beamshot.report.plots._azimuthal_grid` (bilinear between map cells, NaN beyond the
    map; with the photo's outline known, grid points inside it that fall between the coarse
    azimuth cells at the rim take the nearest sampled value, points outside are blank), but with
    the cell indices computed straight from the grid's angles and OpenCV doing the work:
    ``cv2.remap`` interpolates bilinearly (weights in 1/32 steps of a cell, invisible through a
    256-entry colour table) and ``cv2.distanceTransformWithLabels`` finds the nearest sampled point.
    """
    import cv2

    a, j, k, beyond = _grid_cells(float(half_width_deg), int(n), float(beam.theta[0]), float(beam.d_theta),
                                  len(beam.theta), float(beam.phi[0]), float(beam.d_phi))
    a = a.copy()
    wrapped = np.concatenate([beam.intensity[:, -1:], beam.intensity, beam.intensity[:, :1]], axis=1)
    vals = cv2.remap(wrapped.astype(np.float32), j, k, cv2.INTER_LINEAR,
                     borderMode=cv2.BORDER_REPLICATE).astype(float)
    vals[beyond] = np.nan
    finite = np.isfinite(vals)
    if beam.footprint_deg is not None and finite.any():
        inside = _inside_outline(beam.footprint_deg, a, a)
        if not finite.all():
            _, labels = cv2.distanceTransformWithLabels((~finite).astype(np.uint8), cv2.DIST_L2, cv2.DIST_MASK_5,
                                                        labelType=cv2.DIST_LABEL_PIXEL)
            source = np.zeros(int(labels.max()) + 1, np.intp)
            source[labels[finite]] = np.flatnonzero(finite)  # each label -> the sampled point it names
            vals = vals.ravel()[source[labels]]
        vals = np.where(inside, vals, np.nan)
    return a, vals


class _MapAxes:
    """Data (deg, y up) <-> pixels for a square map of half width ``half`` in ``box``."""

    def __init__(self, box, half: float):
        self.box, self.half = box, half
        self.x0, self.y0, self.x1, self.y1 = box

    def px(self, xy) -> np.ndarray:
        p = np.atleast_2d(np.asarray(xy, float))
        s = (self.x1 - self.x0) / (2 * self.half)
        return np.column_stack((self.x0 + (p[:, 0] + self.half) * s, self.y0 + (self.half - p[:, 1]) * s))


def _draw_image(c: Canvas, ax: _MapAxes, vals: np.ndarray, floor: float, peak: float, factor: float):
    """The map cells through the colour table; NaN (outside the photo) hatched."""
    shown = np.where(np.isfinite(vals), np.maximum(vals, floor * 1e-3), np.nan) * factor
    rgb = _colours(shown, floor * factor, peak * factor)[::-1]  # row 0 at the top
    outside = ~np.isfinite(vals[::-1])
    c.image(np.ascontiguousarray(rgb), ax.box)
    if outside.any():
        import cv2

        h, w = c.hi_res_box(ax.box)
        mask = cv2.resize(outside.astype(np.uint8), (w, h), interpolation=cv2.INTER_NEAREST).astype(bool)
        c.hatch(ax.box, mask, colour="#9a9a9a", background=_OUTSIDE, spacing=HATCH_PX, width=1.0)


def _nearest_cells(beam: BeamMap, a: np.ndarray):
    """Map cell indices (k, j) nearest each point of the square grid ``a`` x ``a`` (deg)."""
    xx, yy = np.meshgrid(a, a)
    th = np.radians(np.hypot(xx, yy))
    k = np.round((th - beam.theta[0]) / beam.d_theta).astype(int)
    j = np.round((np.mod(np.arctan2(yy, xx), 2 * np.pi) - beam.phi[0]) / beam.d_phi).astype(int) % len(beam.phi)
    return k, j


def _level_lines(grid: np.ndarray, a: np.ndarray, levels, upsample: int = 4) -> list[list[np.ndarray]]:
    """For each of ``levels``, the lines (deg) where the bilinear surface through ``grid`` (on
    ``a`` x ``a``) crosses it: the grid is interpolated ``upsample`` times finer (once for all
    levels) and each crossing traced with OpenCV's border following; points next to NaN cells are
    dropped (no line along the photo's outline)."""
    import cv2

    n = len(a)
    m = (n - 1) * upsample + 1
    g = np.nan_to_num(grid, nan=-1.0).astype(np.float32)
    fine = cv2.resize(g, (m, m), interpolation=cv2.INTER_LINEAR)
    # cv2's INTER_LINEAR aligns pixel centres: fine[i] ~ grid[(i + 0.5) / (m / n) - 0.5]
    bad = cv2.resize((~np.isfinite(grid)).astype(np.uint8), (m, m), interpolation=cv2.INTER_NEAREST)
    bad = cv2.dilate(bad, np.ones((2 * upsample + 1, 2 * upsample + 1), np.uint8)).astype(bool)
    step = a[1] - a[0]
    out = []
    for level in levels:
        above = (fine >= level).astype(np.uint8)
        contours, _ = cv2.findContours(above, cv2.RETR_LIST, cv2.CHAIN_APPROX_NONE)
        lines = []
        for cnt in contours:
            p = cnt[:, 0, :].astype(float)
            if len(p) < 8:
                continue
            gi = (p + 0.5) * n / m - 0.5  # fine pixel -> grid index
            xy = np.column_stack((a[0] + gi[:, 0] * step, a[0] + gi[:, 1] * step))
            xy[bad[p[:, 1].astype(int), p[:, 0].astype(int)]] = np.nan
            lines.append(np.vstack([xy, xy[:1]]))
        out.append(lines)
    return out


def _draw_iso(c: Canvas, ax: _MapAxes, a: np.ndarray, vals: np.ndarray, floor: float, font_px: float) -> list[float]:
    """Dotted iso-intensity lines at ISO_LEVELS x peak above the map's floor, traced on the drawn grid
    (``a`` x ``a``, values ``vals``) smoothed by a Gaussian of 1/300 of the map's width (so that
    noise does not fray them; the earlier picture smoothed a 301 x 301 lookup by one step); returns
    the levels drawn."""
    import cv2

    finite = vals[np.isfinite(vals)]
    if finite.size == 0 or not float(np.max(finite)) > 0:
        return []
    peak = float(np.max(finite))
    levels = [lv for lv in sorted(ISO_LEVELS) if lv * peak > floor]
    if not levels:
        return []
    rel = np.where(np.isfinite(vals), vals / peak, np.nan)
    sigma = (len(a) - 1) / 300.0
    # mirrored at the border, truncated at 4 sigma (as scipy.ndimage.gaussian_filter's defaults)
    smooth = cv2.GaussianBlur(np.nan_to_num(rel, nan=0.0), (0, 0), sigma, borderType=cv2.BORDER_REFLECT)
    smooth[~np.isfinite(rel)] = np.nan
    label_dir = np.radians(RING_LABEL_BEARING_DEG + 180.0 + 40.0)  # lower left, clear of the ring labels
    for n, (lv, lines) in enumerate(zip(levels, _level_lines(smooth, a, levels, upsample=2))):
        for xy in lines:
            draw_line_sample(c, ax.px(xy), MAP_STYLES["iso"], clip=ax.box)
        longest = max(lines, key=lambda q: np.isfinite(q[:, 0]).sum(), default=None)
        if longest is not None and np.isfinite(longest[:, 0]).sum() > 20:
            ok = np.isfinite(longest[:, 0])
            bearing = np.arctan2(longest[ok, 1], longest[ok, 0])
            # each level's label at its own bearing, so that close lines' labels stay apart
            i = int(np.argmin(np.abs(np.angle(np.exp(1j * (bearing - label_dir - np.radians(30.0) * n))))))
            x, y = ax.px(longest[ok][i])[0]
            c.text(x, y, f"{lv * 100:g} %", font_px * 0.8, role="iso-label", ha="center", va="center",
                   colour="#ffffff", background=("#000000", 0.6), pad=2.0, data=tuple(longest[ok][i]))
    return levels


def _draw_clipped(c: Canvas, ax: _MapAxes, beam: BeamMap, a: np.ndarray) -> None:
    """Cross-hatch and outline the clipped cells (nearest-cell lookup of the saturation mask)."""
    import cv2

    k, j = _nearest_cells(beam, a)
    sat = beam.saturated[np.clip(k, 0, len(beam.theta) - 1), j][::-1].astype(np.uint8)
    h, w = c.hi_res_box(ax.box)
    mask = cv2.resize(sat, (w, h), interpolation=cv2.INTER_NEAREST)
    c.hatch(ax.box, mask.astype(bool), colour=_VERMILLION, spacing=CLIP_HATCH_PX, width=1.2, directions=("/", "\\"))
    contours, _ = cv2.findContours(mask, cv2.RETR_EXTERNAL, cv2.CHAIN_APPROX_SIMPLE)
    from .raster import SUPERSAMPLE

    for cnt in contours:
        p = cnt[:, 0, :].astype(float) / SUPERSAMPLE + (ax.x0, ax.y0)
        c.polyline(p, MAP_STYLES["clipped"]["colour"], MAP_STYLES["clipped"]["width"], closed=True, clip=ax.box)


def _draw_marks(c: Canvas, ax: _MapAxes, contours: dict, edge, pk, clipped: bool, record: bool) -> list:
    """Hotspot and field contours, spill edge, beam axis and peak; returns legend entries."""
    entries = []
    for key, fkey in (("hotspot", "hotspot_angle"), ("field", "field_angle")):
        cont = contours.get(key)
        if clipped or cont is None or pk is None or not np.any(np.isfinite(cont.alpha)):
            continue
        draw_line_sample(c, ax.px(_contour_xy(pk.vector, cont.bearings, cont.alpha)), MAP_STYLES[key], clip=ax.box)
        entries.append((vocabulary.label(fkey), "line", MAP_STYLES[key]))
    if edge is not None and np.any(np.isfinite(edge.theta)):
        th = np.degrees(np.concatenate((edge.theta, edge.theta[:1])))
        ph = np.concatenate((edge.phi, edge.phi[:1]))
        draw_line_sample(c, ax.px(np.column_stack((th * np.cos(ph), th * np.sin(ph)))), MAP_STYLES["edge"], clip=ax.box)
        entries.append((vocabulary.label("spill_angle"), "line", MAP_STYLES["edge"]))
    centre = tuple(ax.px((0.0, 0.0))[0])
    draw_mark(c, "ring", centre, MAP_STYLES["axis"], clip=ax.box)
    entries.append(("beam axis (spill centre)", "mark", MAP_STYLES["axis"]))
    if record:
        c.record.marks.append(("beam axis", "ring", centre, (0.0, 0.0)))
    if pk is not None and not clipped:
        xy = (np.degrees(pk.theta) * np.cos(pk.phi), np.degrees(pk.theta) * np.sin(pk.phi))
        p = tuple(ax.px(xy)[0])
        draw_mark(c, "diamond", p, MAP_STYLES["peak"], clip=ax.box)
        entries.append(("peak", "mark", MAP_STYLES["peak"]))
        if record:
            c.record.marks.append(("peak", "diamond", p, xy))
    return entries


#: Height (px) kept clear above the map's lower edge for the 'seen from behind the light' note.
_NOTE_PX = 40.0


def _keep_out(c: Canvas, box, zoomed) -> list:
    """What an inset must leave visible, as fractions of the map ``box`` from its top left: the labels
    drawn on the map so far, the note along its bottom and the area the inset enlarges."""
    side = box[2] - box[0]

    def frac(b):
        return ((b[0] - box[0]) / side, (b[1] - box[1]) / side, (b[2] - box[0]) / side, (b[3] - box[1]) / side)

    out = [frac(t.box) for t in c.record.texts if t.role in ("ring-label", "iso-label")]
    out.append(frac((box[2] - 0.45 * side, box[3] - _NOTE_PX, box[2], box[3])))
    out.append(frac(zoomed))
    return out


def _draw_colour_bar(c: Canvas, box, vmin: float, vmax: float, label: str, font_px: float) -> float:
    """Horizontal colour bar with a 'below' triangle on the left, plain log ticks and its label;
    returns the bottom of the label."""
    x0, y0, x1, y1 = box
    tri = 0.05 * (x1 - x0)
    c.polygon([(x0, (y0 + y1) / 2), (x0 + tri, y0), (x0 + tri, y1)], fill=_BELOW, edge="#000000", width=1.0)
    bar = np.ascontiguousarray(CIVIDIS_RGB[None, :, :])
    c.image(bar, (x0 + tri, y0, x1, y1))
    c.rect(x0 + tri, y0, x1, y1, edge="#000000", width=1.0)
    lo, hi = np.log10(vmin), np.log10(vmax)
    y_text = y1 + 0.35 * font_px + 8
    for v, text in log_ticks(vmin, vmax, short_scales=True):
        x = x0 + tri + (np.log10(v) - lo) / (hi - lo) * (x1 - x0 - tri)
        c.polyline([(x, y1), (x, y1 + 8)], "#000000", 1.5)
        if text:
            c.text(x, y_text, text, font_px * 0.9, role="colour-bar-tick", ha="center", va="top", data=(v,))
    c.record.values["colour_scale"] = (vmin, vmax)
    item = c.text((x0 + x1) / 2, y_text + 1.5 * font_px, label, font_px, role="colour-bar-label", ha="center",
                  va="top")
    return item.box[3]


def draw_map_panel(c: Canvas, beam: BeamMap, contours: dict | None, *, box, noise, label: str,
                   font_px: float) -> float:
    """The map in ``box`` (square, px), its colour bar and legend below; returns the legend's bottom (px)."""
    contours = contours or {}
    half, a, vals, peak, factor, floor, below_text = map_view(beam, contours, noise, picture_grid)
    edge = contours.get("edge")
    ax = _MapAxes(box, half)
    _draw_image(c, ax, vals, floor, peak, factor)
    iso = _draw_iso(c, ax, a, vals, floor, font_px)

    # rings at round full cone angles, labelled with the full angle (twice the radius drawn)
    step = _ring_step_full_deg(half)
    t = np.linspace(0, 2 * np.pi, 361)
    lab_dir = np.radians(RING_LABEL_BEARING_DEG)
    fulls = np.arange(step, 2 * half + 1e-9, step)
    rings = [np.vstack([np.column_stack((f / 2 * np.cos(t), f / 2 * np.sin(t))), [np.nan, np.nan]]) for f in fulls]
    if rings:  # one stroke for all rings (NaN rows part them)
        draw_line_sample(c, ax.px(np.vstack(rings)), MAP_STYLES["ring"], clip=box)
    for full in fulls:
        r = full / 2.0
        if r <= half * 0.9:
            xy = (r * np.cos(lab_dir), r * np.sin(lab_dir))
            x, y = ax.px(xy)[0]
            c.text(x + 3, y - 3, f"{full:g}° full", font_px * 0.9, role="ring-label", ha="left", va="bottom",
                   colour="#ffffff", background=("#000000", 0.6), pad=3.0, data=xy)

    pk = contours.get("peak")
    clipped = bool(pk is not None and pk.clipped)
    entries = [("ring: full cone angle", "line", MAP_STYLES["ring_legend"])]
    if iso:
        entries.append(("iso-intensity: " + ", ".join(f"{lv * 100:g} %" for lv in iso) + " of peak", "line",
                        MAP_STYLES["iso_legend"]))
    if np.any(beam.saturated):
        _draw_clipped(c, ax, beam, a)
        entries.append(("clipped: not measured", "patch", dict(fill="#f7e7a0", edge=_VERMILLION, edge_width=1.5,
                                                               hatch=("/", "\\"), hatch_colour=_VERMILLION,
                                                               spacing=7.0)))
    entries += _draw_marks(c, ax, contours, edge, pk, clipped, record=True)
    entries.append((below_text, "patch", dict(fill=_BELOW, edge="#777777")))
    entries.append(("outside the photo", "patch", dict(fill=_OUTSIDE, edge="#9a9a9a", hatch=("/",), spacing=7.0)))

    # a small hotspot gets an enlarged inset, in the corner where it covers least of the measured
    # light, the spill edge and the labels, so that its contours and marks can be read
    fld = contours.get("field")
    side = box[2] - box[0]
    if not clipped and pk is not None and fld is not None and np.any(np.isfinite(fld.alpha)):
        reach, mag = np.degrees(pk.theta + np.nanmax(fld.alpha)), 0.0
        if reach < INSET_BELOW_FRACTION * half:
            zoom = max(INSET_ZOOM_REACH * reach, 1.0)
            (rx0, ry0), (rx1, ry1) = ax.px([(-zoom, zoom), (zoom, -zoom)])
            place = inset_place(a, vals, floor, edge_xy=_edge_line(edge),
                                keep_out=_keep_out(c, box, (rx0, ry0, rx1, ry1)))
            fb = place["box"]
            ibox = (box[0] + fb[0] * side, box[1] + fb[1] * side, box[0] + fb[2] * side, box[1] + fb[3] * side)
            # the enlargement on the page: the inset's side over the side of the box it enlarges
            mag = (ibox[2] - ibox[0]) / max(abs(rx1 - rx0), 1e-9)
        if reach < INSET_BELOW_FRACTION * half and mag >= INSET_MIN_ENLARGEMENT:
            c.record.values["inset_box"] = ibox
            c.record.values["inset_corner"] = place["corner"]
            c.record.values["inset_covered"] = place["covered"]
            ins = _MapAxes(ibox, zoom)
            c.rect(rx0, ry0, rx1, ry1, edge="#ffffff", width=1.0 * PX_PER_PT, alpha=0.9)
            _, v2 = picture_grid(beam, zoom, n=241)
            _draw_image(c, ins, v2, floor, peak, factor)
            _draw_marks(c, ins, contours, None, pk, clipped, record=False)
            c.rect(*ibox, edge="#ffffff", width=1.2 * PX_PER_PT)
            c.record.values["inset_deg_per_px"] = 2.0 * zoom / (ibox[2] - ibox[0])
            c.record.values["map_deg_per_px"] = 2.0 * half / side
            c.text(ibox[0] + 8, ibox[3] - 6, f"×{mag:.1f}", font_px * 0.85, role="inset-label", ha="left",
                   va="bottom", colour="#ffffff", stroke=2, stroke_colour="#000000")
    c.rect(*box, edge="#000000", width=1.0)
    c.record.values["map_box"] = tuple(box)
    c.text(box[2] - 8, box[3] - 6, "seen from behind the light", font_px * 0.8, role="map-note", ha="right",
           va="bottom", colour="#ffffff", stroke=2, stroke_colour="#000000")

    cb_top = box[3] + 20
    bottom = _draw_colour_bar(c, (box[0], cb_top, box[2], cb_top + 29), floor * factor, peak * factor,
                              label, font_px)
    lb = draw_legend(c, entries, top=bottom + 0.9 * font_px, centre_x=c.width / 2, size_px=font_px * 0.9)
    return lb[3]
