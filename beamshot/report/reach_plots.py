"""Pictures of what a beam does at distance: axis illuminance against distance, and the ground seen from above.

Axis: ``E = I / d^2`` on log-log axes with the 0.25 lx (ANSI/PLATO FL 1 beam distance) and 1 lx
levels drawn across and the distance each light reaches them marked.  Ground: log illuminance in
lx on the cividis map (perceptually uniform, colour-blind safe) with labelled lines of equal
illuminance (:data:`beamshot.reach.GROUND_LEVELS_LUX`) in white and black.
"""

from __future__ import annotations

import numpy as np

__all__ = ["plot_axis_illuminance", "plot_ground", "reach_figure"]

FONT_PT = 9.0
DPI = 150


def plot_axis_illuminance(items, *, ax=None):
    """``items``: ``[(label, peak figure dict), ...]``; draws E(d) = I/d^2 per light in cd, the legend's
    peak rounded as the report rounds it (:func:`~beamshot.report.compare_plots.value_text`). Returns the axes."""
    from ..reach import BEAM_DISTANCE_LUX, BRIGHT_POINT_LUX
    from .compare_plots import MARKERS, style, value_text
    from .plots import _plain_log_ticks, _pyplot

    plt = _pyplot()
    if ax is None:
        _, ax = plt.subplots(figsize=(7.2, 4.0), dpi=DPI)
    usable = [(lab, p) for lab, p in items if p and p.get("value") and p.get("unit") == "cd"]
    d_top = max((2.0 * np.sqrt(p["value"]) for _, p in usable), default=100.0) * 2.0
    d = np.geomspace(1.0, max(d_top, 10.0), 200)
    for i, (lab, p) in enumerate(items):
        if not (p and p.get("value") and p.get("unit") == "cd"):
            continue
        st = style(i)
        mark = {"lower_bound": "≥ ", "upper_bound": "≤ ", "estimate": "≈ "}.get(p.get("status"), "")
        ax.plot(d, p["value"] / d**2, lw=1.6, label=f"{lab}: {mark}{value_text(p['value'], p.get('uncertainty'))} cd",
                **st)
        for lux, m in ((BEAM_DISTANCE_LUX, MARKERS[i % len(MARKERS)]), (BRIGHT_POINT_LUX, MARKERS[i % len(MARKERS)])):
            ax.plot([np.sqrt(p["value"] / lux)], [lux], marker=m, color=st["color"], ms=6, ls="none")
    for lux, word in ((BEAM_DISTANCE_LUX, "0.25 lx: beam distance (ANSI/PLATO FL 1)"), (BRIGHT_POINT_LUX, "1 lx")):
        ax.axhline(lux, color="#777777", lw=0.8, ls="--")
        ax.text(1.05, lux * 1.12, word, fontsize=FONT_PT * 0.8, color="#444444", va="bottom")
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlim(1.0, d[-1])
    ax.set_ylim(0.05, max((p["value"] for _, p in usable), default=1e4) * 1.5)
    _plain_log_ticks(ax.xaxis)
    _plain_log_ticks(ax.yaxis)
    ax.set_xlabel("distance along the beam axis (m)", fontsize=FONT_PT)
    ax.set_ylabel("illuminance on the axis (lx)", fontsize=FONT_PT)
    ax.set_title("on the beam axis: E = I / d²", fontsize=FONT_PT * 1.05, loc="left")
    ax.grid(True, which="both", color="#e4e4e4", lw=0.5)
    ax.tick_params(labelsize=FONT_PT * 0.85)
    if usable:
        ax.legend(fontsize=FONT_PT * 0.75, frameon=False, loc="upper right")
    else:
        ax.text(0.5, 0.5, "no light in cd: distances need an absolute scale", transform=ax.transAxes, ha="center")
    return ax


def for_iso_lines(e: np.ndarray) -> np.ndarray:
    """A ground illuminance grid made ready for iso-lux lines: outside the map 0, smoothed by one grid
    step (0.2-0.3 m at the usual extents) so that the map's cell noise in a faint, flat spill does not
    fray the lines; a peak four steps wide loses a few per cent.  Colours stay unsmoothed."""
    from ..smoothing import gaussian_filter1d

    filled = np.where(np.isfinite(e), e, 0.0)
    return gaussian_filter1d(gaussian_filter1d(filled, 1.0, axis=0), 1.0, axis=1)


def plot_ground(ground, *, ax=None, cbar_ax=None):
    """The ground from above: illuminance (lx, log colour) and labelled iso-lux lines. Returns the image."""
    from matplotlib.colors import LogNorm

    from ..reach import GROUND_LEVELS_LUX
    from .plots import _plain_log_ticks, _pyplot

    plt = _pyplot()
    if ax is None:
        _, ax = plt.subplots(figsize=(6, 8), dpi=DPI)
    e = ground.illuminance
    finite = e[np.isfinite(e) & (e > 0)]
    absolute = ground.unit == "lx"
    top = float(finite.max()) if finite.size else 1.0
    if absolute:
        norm = LogNorm(vmin=0.05, vmax=max(top, 1.0))
        levels = [lv for lv in GROUND_LEVELS_LUX if lv < top]
    else:
        e = e / top
        norm = LogNorm(vmin=1e-4, vmax=1.0)
        levels = [1e-3, 1e-2, 1e-1]
    cmap = plt.get_cmap("cividis").with_extremes(under="#000000", bad="#d9d9d9")
    shown = np.where(np.isfinite(e), np.maximum(e, norm.vmin * 1e-3), np.nan)
    im = ax.imshow(shown, origin="lower", extent=(ground.x_m[0], ground.x_m[-1], ground.y_m[0], ground.y_m[-1]),
                   cmap=cmap, norm=norm, interpolation="bilinear", aspect="auto")
    if levels:
        cs = ax.contour(ground.x_m, ground.y_m, for_iso_lines(e), levels=levels, colors="white", linewidths=1.0)
        ax.clabel(cs, fmt=(lambda v: f"{v:g} lx") if absolute else (lambda v: f"{v:.0e} of max"),
                  fontsize=FONT_PT * 0.75)
    ax.plot([0], [0], marker="^", color="#E69F00", ms=9, mec="black", ls="none")
    ax.set_xlabel("across (m)", fontsize=FONT_PT)
    ax.set_ylabel("ahead (m)", fontsize=FONT_PT)
    ax.tick_params(labelsize=FONT_PT * 0.85)
    if cbar_ax is not None:
        cb = plt.colorbar(im, cax=cbar_ax, orientation="horizontal", extend="min")
        below = f"{norm.vmin:g} lx" if absolute else f"{norm.vmin:g} of it"
        cb.set_label(("illuminance on the ground (lx)" if absolute else "illuminance / its largest value") +
                     f"; black: below {below}; grey: outside the measured map", fontsize=FONT_PT * 0.85)
        _plain_log_ticks(cb.ax.xaxis, norm.vmax / norm.vmin)
        cb.ax.tick_params(labelsize=FONT_PT * 0.8)
    return im


def reach_figure(reach, label: str, path=None):
    """One light: the axis plot, the ground map and the two distances with their uncertainty."""
    from .compare_plots import CAUTION_LINE, _save, legend_name, plain
    from .plots import _pyplot

    plt = _pyplot()
    W, H = 7.2, 12.45
    fig = plt.figure(figsize=(W, H), dpi=DPI)
    fig.text(0.5, 1 - 0.3 / H, plain(label, 50), ha="center", va="center", fontsize=FONT_PT * 1.5, weight="bold")
    bd, bright = reach.beam_distance, reach.bright_distance
    line = f"beam distance (0.25 lx): {bd.text()}   ·   1 lx: {bright.text()}"
    fig.text(0.5, 1 - 0.62 / H, line, ha="center", va="center", fontsize=FONT_PT * 0.9)
    ax1 = fig.add_axes([0.12, 1 - 4.2 / H, 0.82, 3.1 / H])
    plot_axis_illuminance([(legend_name(label), {"value": reach.peak.value, "unit": reach.peak.unit,
                                               "uncertainty": reach.peak.uncertainty, "status": reach.peak.status})],
                          ax=ax1)
    g = reach.ground
    ax2 = fig.add_axes([0.12, 1 - 11.0 / H, 0.82, 6.0 / H])
    cax = fig.add_axes([0.12, 1 - 11.55 / H, 0.82, 0.14 / H])
    plot_ground(g, ax=ax2, cbar_ax=cax)
    ax2.set_title(f"on flat ground: light {g.height_m:g} m high, tilted {g.tilt_deg:g}° down, "
                  "E = I·cos(i)/r² = I·h/r³ (across stretched)", fontsize=FONT_PT * 1.0, loc="left")
    fig.text(0.5, 0.05 / H, CAUTION_LINE + " Never aim a light at traffic.", ha="center", va="bottom",
             fontsize=FONT_PT * 0.7, color="#444444")
    return _save(fig, path)
