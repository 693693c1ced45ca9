"""beam.png's radial profile panel, drawn with the raster kit: the azimuthal mean intensity (log
scale) against the full cone angle, its 10-90 % spread over azimuth, the dark wall's noise floor
drawn as a floor, the clipped angles, and the hotspot, field and spill angles as vertical lines.

Values below the azimuthal mean's detection level (:func:`beamshot.report.plots.noise_floor`) are
drawn at that level, over a shaded band, instead of as noise; past the spill edge the mean ends
where it first sinks into the floor.  Relative profiles are divided by their peak.
"""

from __future__ import annotations

import numpy as np

from .. import vocabulary
from ..beammap import BeamMap
from .map_panel import MAP_STYLES, PX_PER_PT
from .plots import _BLUE, _VERMILLION, DEFAULT_DECADES, MAX_DECADES, NoiseFloor, _azimuth_percentiles
from .raster import Canvas
from .raster_chart import draw_legend, draw_line_sample, finite_runs_mask, legend_box, linear_ticks, log_ticks

__all__ = ["draw_profile_panel", "profile_series"]

_GRID = "#e7e7e7"  # matplotlib's grid grey (#b0b0b0) at 30 % on white, as before
_FLOOR = "#555555"


def profile_series(profile, figures: dict, beam: BeamMap | None, noise: NoiseFloor | None, relative: bool) -> dict:
    """What the panel plots, as plain arrays: full angles ``x``, the drawn mean ``y`` (NaN where not
    drawn), the band ``lo``/``hi`` and where it shows, the floor level, the y range."""
    ok = np.isfinite(profile.mean)
    full = 2.0 * np.asarray(profile.theta_deg)[ok]
    mean = np.asarray(profile.mean)[ok]
    top = float(np.nanmax(mean)) if mean.size else 1.0
    factor = 1.0 / top if relative and top > 0 else 1.0
    mean = mean * factor
    top *= factor
    floor = noise.mean_level * factor if noise is not None and noise.mean_level > 0 else None
    bottom = floor / 3.0 if floor is not None else top * 10 ** (-DEFAULT_DECADES - 1)
    bottom = max(bottom, top * 10 ** (-MAX_DECADES))
    detected = mean > (floor if floor is not None else bottom)
    out = dict(x=full, floor=floor, ylim=(bottom, top * 2.0), band=None, clipped_to=None)
    if beam is not None:
        lo, hi = _azimuth_percentiles(beam)[:, ok] * factor
        band = detected & np.isfinite(lo) & np.isfinite(hi)
        out["band"] = (np.maximum(lo, bottom), np.maximum(hi, bottom), band)
    if beam is not None and np.any(beam.saturated):
        # polar angles with clipped cells: the profile there is only a lower bound
        out["clipped_to"] = 2.0 * float(np.degrees(np.max(np.asarray(beam.theta)[np.any(beam.saturated, axis=1)])
                                                   + beam.d_theta / 2))
    level = floor if floor is not None else bottom
    shown = np.where(detected, mean, np.nan)
    sinks = np.flatnonzero(~detected[1:] & detected[:-1]) + 1
    shown[sinks] = level
    spill = figures.get("spill_angle")
    if spill is not None and spill.value is not None:
        past = np.flatnonzero((full > spill.value) & ~detected)
        if past.size:
            shown[past[0] + 1:] = np.nan
    out["y"] = shown
    return out


def _angle_styles() -> tuple:
    """The vertical lines at the beam angles: (figure key, line style)."""
    return (("hotspot_angle", dict(colour="#000000", width=1.4 * PX_PER_PT)),
            ("field_angle", dict(MAP_STYLES["field"], width=1.3 * PX_PER_PT)),
            ("spill_angle", MAP_STYLES["edge"]))


_MEAN_STYLE = dict(colour=_BLUE, width=1.8 * PX_PER_PT)


def _legend_entries(s: dict, figures: dict) -> list:
    """The legend's entries ``(label, kind, style)``, in drawing order, for what the panel draws."""
    out = []
    if s["band"] is not None:
        out.append(("10–90 % over azimuth", "patch", dict(fill=_BLUE, alpha=0.22)))
    if s["clipped_to"] is not None:
        out.append(("clipped: not measured", "patch", dict(hatch=("/", "\\"), hatch_colour=_VERMILLION,
                                                           spacing=7.0, edge=None)))
    out.append(("azimuthal mean", "line", _MEAN_STYLE))
    if s["floor"] is not None:
        out.append(("below the noise floor (3σ of the dark wall)", "patch", dict(fill=_FLOOR, alpha=0.28)))
    for key, style in _angle_styles():
        f = figures.get(key)
        if f is not None and f.value is not None:
            out.append((vocabulary.label(key), "line", style))
    return out


def draw_profile_panel(c: Canvas, profile, figures: dict, *, box, beam: BeamMap | None, noise: NoiseFloor | None,
                       label: str, font_px: float) -> None:
    """The radial profile in ``box`` (the plotting area, px) with ticks and labels around it."""
    s = profile_series(profile, figures, beam, noise, "relative" in label)
    x0, y0, x1, y1 = box
    xmax = float(s["x"].max()) if s["x"].size else 1.0
    lo, hi = (np.log10(v) for v in s["ylim"])
    # room at the top right for the legend: the y range grows upward until the curve under the
    # legend's width stays below it (as a plot's legend would otherwise hide the spill)
    size = 0.8 * font_px
    entries = _legend_entries(s, figures)
    lb = legend_box(entries, top=0.0, centre_x=0.0, size_px=size, ncol=1, handle_len=2.2,
                    row_gap=0.3)
    w_leg, h_leg, m_leg = lb[2] - lb[0], lb[3] - lb[1], 0.8 * size
    under = s["x"] >= xmax * (1.0 - (w_leg + 2.0 * m_leg) / (x1 - x0))
    ys = s["y"][under] if s["x"].size else np.array([])
    ys = ys[np.isfinite(ys) & (ys > 0)]
    free = 1.0 - (h_leg + 2.0 * m_leg) / (y1 - y0)  # the fraction of the height below the legend
    if ys.size and 0.3 < free < 1.0:
        hi = max(hi, lo + (np.log10(float(ys.max())) - lo) / free + 0.02 * (hi - lo))
        s["ylim"] = (s["ylim"][0], 10.0 ** hi)

    def px(x, y):
        x, y = np.asarray(x, float), np.asarray(y, float)
        with np.errstate(divide="ignore", invalid="ignore"):
            yy = y1 - (np.log10(y) - lo) / (hi - lo) * (y1 - y0)
        return np.column_stack((np.atleast_1d(x0 + x / xmax * (x1 - x0)), np.atleast_1d(yy)))

    yt = log_ticks(*s["ylim"])
    xt = linear_ticks(0.0, xmax)
    for v, _ in yt:
        c.polyline(px([0, xmax], [v, v]), _GRID, 0.8 * PX_PER_PT, clip=box)
    for v in xt:
        c.polyline([(px(v, 1.0)[0, 0], y0), (px(v, 1.0)[0, 0], y1)], _GRID, 0.8 * PX_PER_PT, clip=box)

    if s["band"] is not None:
        blo, bhi, where = s["band"]
        for i, j in finite_runs_mask(where):
            if j - i < 2:
                continue
            poly = np.vstack([px(s["x"][i:j], bhi[i:j]), px(s["x"][i:j], blo[i:j])[::-1]])
            c.polygon(poly, fill=_BLUE, alpha=0.22, clip=box)
    if s["clipped_to"] is not None:
        xr = min(px(s["clipped_to"], 1.0)[0, 0], x1)
        c.hatch((x0, y0, xr, y1), colour=_VERMILLION, spacing=10.0, width=1.0, directions=("/", "\\"))
    c.polyline(px(s["x"], s["y"]), _BLUE, _MEAN_STYLE["width"], clip=box)
    c.record.values["profile_mean"] = (s["x"], s["y"])
    c.record.values["profile_ylim"] = s["ylim"]
    if s["floor"] is not None:
        yf = px(1.0, s["floor"])[0, 1]
        c.rect(x0, yf, x1, y1, fill=_FLOOR, alpha=0.28)
    for key, style in _angle_styles():
        f = figures.get(key)
        if f is not None and f.value is not None:
            x = px(f.value, 1.0)[0, 0]
            draw_line_sample(c, [(x, y0), (x, y1)], style, clip=box)
    c.rect(x0, y0, x1, y1, edge="#000000", width=0.8 * PX_PER_PT)

    tick_px = 0.9 * font_px
    for v, text in yt:
        y = px(1.0, v)[0, 1]
        c.polyline([(x0 - 8, y), (x0, y)], "#000000", 1.5)
        c.text(x0 - 12, y, text, tick_px, role="profile-tick", ha="right", va="center", data=(v,))
    for v in xt:
        x = px(v, 1.0)[0, 0]
        c.polyline([(x, y1), (x, y1 + 8)], "#000000", 1.5)
        c.text(x, y1 + 12, f"{v:g}", tick_px, role="profile-tick", ha="center", va="top", data=(v,))
    c.text((x0 + x1) / 2, y1 + 14 + 1.4 * tick_px, "full cone angle (°), twice the angle from the axis", font_px,
           role="profile-xlabel", ha="center", va="top")
    widest = max([Canvas.text_width(t, tick_px) for _, t in yt] or [0.0])
    c.text(x0 - 22 - widest, (y0 + y1) / 2, label, font_px, role="profile-ylabel", ha="center", va="bottom",
           rotate=True)

    # the legend in the corner where it covers the fewest drawn points of the mean (as 'best' placement;
    # the y range above keeps the top right clear)
    w, h, m = w_leg, h_leg, m_leg
    pts = px(s["x"], s["y"])
    pts = pts[np.isfinite(pts[:, 1])]
    corners = [(x1 - m - w, y0 + m), (x0 + m, y0 + m), (x1 - m - w, y1 - m - h), (x0 + m, y1 - m - h)]

    def covered(corner):
        cx, cy = corner
        return int(np.sum((pts[:, 0] >= cx) & (pts[:, 0] <= cx + w) & (pts[:, 1] >= cy) & (pts[:, 1] <= cy + h)))

    best = min(corners, key=covered)
    placed = draw_legend(c, entries, top=0.0, centre_x=0.0, size_px=size, ncol=1, handle_len=2.2, row_gap=0.3,
                         role="profile-legend", frame=("#ffffff", "#cccccc"), box=best)
    c.record.values["profile_box"] = (box, xmax)
    pad = 0.4 * size  # draw_legend's frame around the entries
    c.record.values["profile_legend_box"] = (placed[0] - pad, placed[1] - pad, placed[2] + pad, placed[3] + pad)
