"""Chart parts for the raster kit (:mod:`beamshot.report.raster`): axis ticks (linear, and log with
plain-text labels), line styles in pixels, and a legend block of line, mark and patch samples.

Log ticks follow beam.png's earlier rule: decades, or 1-2-5 steps when the axis spans under two
decades, at most ``MAX_TICKS`` labels; their texts come from :func:`beamshot.report.plots._decade_text`
and :func:`~beamshot.report.plots._tick_text` (plain text, thousands grouped).
"""

from __future__ import annotations

import math

import numpy as np

from .plots import _decade_text, _tick_text
from .raster import Canvas

__all__ = ["log_ticks", "linear_ticks", "Style", "draw_line_sample", "draw_legend", "MAX_TICKS"]

#: Most tick labels on an axis (more are thinned to every k-th).
MAX_TICKS = 12


def log_ticks(lo: float, hi: float, *, short_scales: bool = False) -> list[tuple[float, str]]:
    """Tick values in ``[lo, hi]`` with their texts: decades, or 1-2-5 steps when ``short_scales``
    and fewer than three decades fall inside (a scale from 70 to 9,500 would show only 100 and 1,000)."""
    if not (lo > 0 and hi > lo and math.isfinite(lo) and math.isfinite(hi)):
        return []
    e0, e1 = math.floor(math.log10(lo)) - 1, math.ceil(math.log10(hi)) + 1
    decades = sum(1 for e in range(e0, e1 + 1) if lo * (1 - 1e-9) <= 10.0 ** e <= hi * (1 + 1e-9))
    if short_scales and decades < 3:
        vals = [m * 10.0 ** e for e in range(e0, e1 + 1) for m in (1, 2, 5)]
        text = _tick_text
    else:
        vals = [10.0 ** e for e in range(e0, e1 + 1)]
        text = _decade_text
    tol = 1e-9
    vals = [v for v in vals if lo * (1 - tol) <= v <= hi * (1 + tol)]
    step = max(1, math.ceil(len(vals) / MAX_TICKS))
    return [(v, text(v)) for v in vals[::step]]


def linear_ticks(lo: float, hi: float, most: int = 7) -> list[float]:
    """Round tick values (1, 2, 2.5 or 5 x 10^k apart) in ``[lo, hi]``, at most ``most`` of them."""
    span = hi - lo
    if not (span > 0 and math.isfinite(span)):
        return [lo]
    for k in range(math.floor(math.log10(span / most)) - 1, math.ceil(math.log10(span)) + 2):
        for m in (1.0, 2.0, 2.5, 5.0):
            step = m * 10.0 ** k
            first = math.ceil(lo / step - 1e-9) * step
            n = math.floor((hi - first) / step + 1e-9) + 1
            if n <= most:
                return [first + i * step for i in range(n)]
    return [lo, hi]


#: A line style: colour, width (px), dash pattern (px) or None, and an optional wider stroke under it.
Style = dict


def draw_line_sample(c: Canvas, pts, style: Style, clip=None, square_ends: bool = False) -> None:
    """A polyline in ``style`` (with its under-stroke first, if any)."""
    kw = dict(dash=style.get("dash"), alpha=style.get("alpha", 1.0), clip=clip, square_ends=square_ends)
    if style.get("stroke"):
        c.polyline(pts, style["stroke"], style["stroke_width"], **kw)
    c.polyline(pts, style["colour"], style["width"], **kw)


def _draw_handle(c: Canvas, kind: str, style: dict, x: float, y: float, length: float, height: float) -> None:
    if kind == "line":
        draw_line_sample(c, [(x, y), (x + length, y)], style, square_ends=True)
    elif kind == "mark":
        draw_mark(c, style["shape"], (x + length / 2, y), style)
    elif kind == "patch":
        x0, y0, x1, y1 = x, y - height / 2, x + length * 0.8, y + height / 2
        if style.get("fill") is not None:
            c.rect(x0, y0, x1, y1, fill=style["fill"], alpha=style.get("alpha", 1.0))
        if style.get("hatch"):
            c.hatch((x0, y0, x1, y1), colour=style.get("hatch_colour", "#9a9a9a"), spacing=style.get("spacing", 8.0),
                    width=style.get("hatch_width", 1.0), directions=style["hatch"])
        if style.get("edge") is not None:
            c.rect(x0, y0, x1, y1, edge=style["edge"], width=style.get("edge_width", 1.0))


def draw_mark(c: Canvas, shape: str, centre, style: dict, clip=None) -> None:
    """A point mark: 'ring' (hollow circle) or 'diamond' (filled, with a rim)."""
    x, y = centre
    r = style["size"] / 2.0
    if shape == "ring":
        c.circle((x, y), r, edge=style["colour"], width=style["width"], clip=clip)
    else:
        pts = [(x, y - r), (x + r, y), (x, y + r), (x - r, y)]
        c.polygon(pts, fill=style["colour"], edge=style.get("rim"), width=style.get("width", 1.0), clip=clip)


def draw_legend(c: Canvas, entries, *, top: float, centre_x: float, size_px: float, ncol: int = 2,
                role: str = "legend", handle_len: float = 2.4, row_gap: float = 0.35, frame=None,
                box=None) -> tuple[float, float, float, float]:
    """Entries ``(label, kind, style)`` in ``ncol`` columns filled top to bottom, column after
    column, centred on ``centre_x`` below ``top`` (or placed with its top-left at ``box[:2]`` when
    ``box`` is given); ``frame`` (fill, edge) draws a box behind it.  Records each entry; returns
    the legend's box."""
    ncol = max(1, min(ncol, len(entries)))
    lb = legend_box(entries, top=top, centre_x=centre_x, size_px=size_px, ncol=ncol, handle_len=handle_len,
                    row_gap=row_gap)
    x0, y0 = lb[0], lb[1]
    if box is not None:
        dx, dy = box[0] - x0, box[1] - y0
        lb = (lb[0] + dx, lb[1] + dy, lb[2] + dx, lb[3] + dy)
        x0, y0 = box[0], box[1]
    if frame is not None:
        pad = 0.4 * size_px
        c.rect(lb[0] - pad, lb[1] - pad, lb[2] + pad, lb[3] + pad, fill=frame[0], alpha=0.9)
        c.rect(lb[0] - pad, lb[1] - pad, lb[2] + pad, lb[3] + pad, edge=frame[1], width=1.0)
    rows = math.ceil(len(entries) / ncol)
    hl, gap, line_h = handle_len * size_px, 0.6 * size_px, (1.0 + row_gap) * size_px * 1.15
    widths = _column_widths(entries, rows, ncol, size_px)
    x = x0
    for col in range(ncol):
        for r, (label, kind, style) in enumerate(entries[col * rows:(col + 1) * rows]):
            y = y0 + (r + 0.5) * line_h
            _draw_handle(c, kind, style, x, y, hl, 0.7 * size_px)
            c.text(x + hl + gap, y, label, size_px, role=role, va="center")
            c.record.legend.append((label, kind, dict(style)))
        x += widths[col] + hl + gap + size_px
    return lb


def _column_widths(entries, rows: int, ncol: int, size_px: float) -> list[float]:
    return [max([Canvas.text_width(lab, size_px) for lab, _, _ in entries[k * rows:(k + 1) * rows]] or [0.0])
            for k in range(ncol)]


def legend_box(entries, *, top: float, centre_x: float, size_px: float, ncol: int = 2, handle_len: float = 2.4,
               row_gap: float = 0.35) -> tuple[float, float, float, float]:
    """The box :func:`draw_legend` fills, without drawing."""
    ncol = max(1, min(ncol, len(entries)))
    rows = math.ceil(len(entries) / ncol) if entries else 0
    hl, gap, line_h = handle_len * size_px, 0.6 * size_px, (1.0 + row_gap) * size_px * 1.15
    width = sum(w + hl + gap for w in _column_widths(entries, rows, ncol, size_px)) + size_px * (ncol - 1)
    x0 = centre_x - width / 2
    return (x0, top, x0 + width, top + rows * line_h)


def finite_runs_mask(ok: np.ndarray) -> list[tuple[int, int]]:
    """``(start, stop)`` index pairs of the True runs of a boolean array."""
    d = np.diff(np.concatenate(([0], ok.astype(np.int8), [0])))
    return list(zip(np.flatnonzero(d == 1), np.flatnonzero(d == -1)))
