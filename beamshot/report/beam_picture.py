"""The report picture (beam.png) laid out in one column with the raster kit, without matplotlib:
title, the map panel (:mod:`beamshot.report.map_panel`), the radial profile
(:mod:`beamshot.report.profile_panel`), the figures table and the caution line.

``PICTURE_WIDTH_PX`` wide (the earlier 6 in at 170 dpi), with text at least ``MIN_TEXT_PX`` tall
so that it stays legible shown 400 px wide on a phone.  The figures table uses the words of
:mod:`beamshot.vocabulary`: label, value ± 1σ with its status mark, status in words (grey when
not measured, italic when not 'measured'), parts of a figure indented.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .. import vocabulary
from .map_panel import PX_PER_PT, draw_map_panel
from .plots import CAUTION_LINE, FROM_REPORT, TABLE_KEYS, _title, figure_value_text, intensity_label, report_noise_floor
from .profile_panel import draw_profile_panel
from .raster import Canvas, Drawing, png_bytes, png_pair

__all__ = ["PICTURE_WIDTH_PX", "BeamPicture", "draw_beam_picture", "beam_pictures", "write_beam_picture"]

PICTURE_WIDTH_PX = 1020
#: Body text size (px): 11 pt at 170 dpi.
FONT_PX = 11.0 * PX_PER_PT
#: Smallest text drawn (px): 18 px is 7 px when the picture is shown 400 px wide.
MIN_TEXT_PX = 18.0
ROW_PX = 51.0
#: zlib level of beam.png (lossless at any level): on a 12 MP report's picture 2 deflates as fast as
#: 1 (23 ms) for a file 3.5 % smaller, and 3 takes 20 % longer (29 ms) for a file 4 % smaller than 2
#: (475 kB against 494 kB; the page's map panel alike); speed choice.
PNG_COMPRESS_LEVEL = 2


@dataclass
class BeamPicture:
    """The drawn picture: RGB pixels, what was drawn, and the row where the map panel ends."""

    rgb: np.ndarray
    drawing: Drawing
    map_panel_rows: int


def _fit(s: str, size: float, width: float, style: str = "normal") -> tuple[str, float]:
    """Shrink ``s`` to fit ``width`` px (down to MIN_TEXT_PX), then shorten its middle with '…'."""
    w = Canvas.text_width(s, size, style)
    if w <= width:
        return s, size
    size = max(MIN_TEXT_PX, size * width / w)
    if Canvas.text_width(s, size, style) <= width:
        return s, size
    keep = len(s)
    while keep > 4 and Canvas.text_width(s[: keep // 2] + "…" + s[len(s) - keep // 2:], size, style) > width:
        keep -= 2
    return s[: keep // 2] + "…" + s[len(s) - keep // 2:], size


def _draw_table(c: Canvas, figures: dict, *, left: float, top: float, width: float) -> float:
    """The figures table; returns its bottom (px)."""
    keys = [k for k in TABLE_KEYS if k in figures] + [k for k in figures if k not in TABLE_KEYS]
    x_value, x_status = left + 0.70 * width, left + 0.74 * width
    head = dict(colour="#444444", style="bold", va="center")
    y = top + ROW_PX / 2
    c.text(left, y, "figure", FONT_PX * 0.9, role="table-head", **head)
    c.text(x_value, y, "value ± 1σ", FONT_PX * 0.9, role="table-head", ha="right", **head)
    c.text(x_status, y, "status", FONT_PX * 0.9, role="table-head", **head)
    for i, key in enumerate(keys, start=1):
        f = figures[key]
        part = vocabulary.term(key).part_of is not None
        colour = "#8a8a8a" if f.status == "not_measured" else "#000000"
        size = FONT_PX * (0.9 if part else 1.0)
        y = top + (i + 0.5) * ROW_PX
        if i % 2 == 0:
            c.rect(left - 4, y - ROW_PX / 2, left + width, y + ROW_PX / 2, fill="#f0f0f0")
        c.text(left + (0.04 * width if part else 0.0), y, vocabulary.label(key), size, role=f"figure-label:{key}",
               colour=colour)
        c.text(x_value, y, figure_value_text(f), size, role=f"figure-value:{key}", ha="right", colour=colour)
        c.text(x_status, y, vocabulary.STATUS_WORDS.get(f.status, f.status), FONT_PX * 0.9,
               role=f"figure-status:{key}", colour=colour, style="italic" if f.status != "measured" else "normal")
    return top + (len(keys) + 1) * ROW_PX


def draw_beam_picture(report, *, noise=FROM_REPORT) -> BeamPicture:
    """Draw beam.png for ``report`` (a :class:`~beamshot.report.model.BeamReport`); ``noise``, its
    :func:`~beamshot.report.plots.report_noise_floor` when the caller has it already."""
    W = PICTURE_WIDTH_PX
    n_rows = len(report.figures) + 1
    map_side, map_left, map_top = 850, 85, 145
    # the map panel's height depends on its legend; the canvas is cut to size at the end
    H = int(map_top + map_side + 20 + 29 + 105 + 300 + 493 + 128 + ROW_PX * n_rows + 68)
    c = Canvas(W, H)
    title, sub = _title(report)
    t, size = _fit(title, FONT_PX * 1.3, W - 40, "bold")
    c.text(W / 2, 54, t, size, role="title", ha="center", style="bold")
    if sub:
        t, size = _fit(sub, FONT_PX * 0.9, W - 40)
        c.text(W / 2, 109, t, size, role="subtitle", ha="center", colour="#444444")
    unit = "cd" if report.beam.unit == "cd" else "relative"
    label = intensity_label(report, unit)
    if noise is FROM_REPORT:
        noise = report_noise_floor(report)
    legend_bottom = draw_map_panel(c, report.beam, report.contours, box=(map_left, map_top, map_left + map_side,
                                                                         map_top + map_side),
                                   noise=noise, label=label, font_px=FONT_PX)
    cut = int(np.ceil(legend_bottom + 0.6 * FONT_PX))
    prof_top = cut + 0.8 * FONT_PX
    prof = (161, prof_top, W - 35, prof_top + 493)
    draw_profile_panel(c, report.profile, report.figures, box=prof, beam=report.beam, noise=noise, label=label,
                       font_px=FONT_PX)
    table_bottom = _draw_table(c, report.figures, left=34, top=prof[3] + 128, width=W - 60)
    height = int(np.ceil(table_bottom + 60))
    c.text(W / 2, height - 12, CAUTION_LINE, MIN_TEXT_PX, role="caution", ha="center", va="bottom", colour="#444444")
    rgb = c.finish()[:height]
    c.record.height = height
    return BeamPicture(rgb, c.record, min(cut, height))


def beam_pictures(report, *, noise=FROM_REPORT) -> tuple[bytes, bytes]:
    """beam.png's bytes, and its upper part (title, map, colour bar and legend) for the HTML page,
    from one drawing; PNG, RGB."""
    pic = draw_beam_picture(report, noise=noise)
    return png_pair(pic.rgb, pic.map_panel_rows, PNG_COMPRESS_LEVEL)


def write_beam_picture(report, path) -> BeamPicture:
    """Draw beam.png and write it to ``path``; returns the drawing."""
    pic = draw_beam_picture(report)
    with open(path, "wb") as fh:
        fh.write(png_bytes(pic.rgb, PNG_COMPRESS_LEVEL))
    return pic
