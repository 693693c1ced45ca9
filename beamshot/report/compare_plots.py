"""Pictures of a comparison: the equal-exposure sheet, the overlaid profiles, the ratio map, the reach overlay.

All take a :class:`beamshot.compare.Comparison` and draw what it already holds (one exposure, one
tone curve, one angular scale were fixed there).  Palette: greys for the wall (it is a rendering
of light, not a colour scale), cividis for the log-intensity maps (perceptually uniform, made for
colour-vision deficiency), Okabe-Ito colours for lines, each light also with its own dash and
marker so that no line is told apart by colour alone; the ratio map has its own blue-white-orange
diverging map (blue-orange stays distinct for protan, deutan and tritan vision; common practice).
User text (labels) is drawn literally: ``$`` is escaped so matplotlib's mathtext never parses it.
"""

from __future__ import annotations

import functools

import numpy as np

from .. import vocabulary
from ..figure import value_with_uncertainty

__all__ = ["LINE_COLOURS", "LINE_STYLES", "RATIO_CMAP_COLOURS", "plain", "legend_name", "figure_cell", "value_text", "sheet_figure",
           "profiles_figure", "difference_figure", "reach_overlay_figure", "SHEET_KEYS"]

#: Okabe-Ito (2008) colour-blind-safe set, black first.
LINE_COLOURS = ("#000000", "#E69F00", "#56B4E9", "#009E73", "#CC79A7", "#0072B2", "#D55E00", "#F0E442")
LINE_STYLES = ("-", "--", "-.", ":", (0, (5, 1, 1, 1)), (0, (1, 1)))
MARKERS = ("o", "s", "^", "D", "v", "P", "X", "*", "<", ">", "h", "p")
#: The ratio map: blue where b is brighter, white where equal, orange where a is brighter.
RATIO_CMAP_COLOURS = ("#0a4a7a", "#4f9bd0", "#f7f7f7", "#f0a64a", "#8c4a00")
RATIO_LIMIT_STOPS = 2.0
#: Figures shown in the sheet's table (all of them are in comparison.json).
SHEET_KEYS = ("peak_intensity", "beam_distance", "hotspot_angle", "spill_angle", "ra")
_OUTSIDE = "#d9d9d9"
_DARK_BOX = {"facecolor": "black", "alpha": 0.6, "edgecolor": "none", "pad": 1.5}
DPI = 150
FONT_PT = 9.0
CAUTION_LINE = "Caution: do not look into the beam or aim it at people, animals, vehicles or aircraft."


def _pyplot():
    from .plots import _pyplot as p

    return p()


def plain(text: str, limit: int = 40) -> str:
    """A user label as literal picture text: shortened to ``limit`` characters, ``$`` escaped."""
    s = " ".join(str(text).split())
    if len(s) > limit:
        s = s[: limit - 1] + "…"
    return s.replace("$", r"\$")


def legend_name(text: str, width: int = 30) -> str:
    """A light's name for a legend: whole, on up to two lines of about ``width`` characters (cut with
    '…' only past that), ``$`` escaped."""
    import textwrap

    lines = textwrap.wrap(" ".join(str(text).split()), width) or [""]
    if len(lines) > 2:
        lines = [lines[0], lines[1][: width - 1] + "…"]
    return "\n".join(lines).replace("$", r"\$")


def style(i: int) -> dict:
    return {"color": LINE_COLOURS[i % len(LINE_COLOURS)], "linestyle": LINE_STYLES[i % len(LINE_STYLES)]}


def figure_cell(f: dict | None, *, with_unit: bool = False) -> str:
    """``≈ 8.1 ± 0.3`` from a figure dict (status mark, GUM rounding); '—' when not measured."""
    if not f or f.get("value") is None:
        return "—"
    mark = vocabulary.STATUS_MARKS.get(f.get("status"), "")
    unit = vocabulary.unit_text(f.get("unit") or "") if with_unit else ""
    sep = "" if unit in ("°", "") else " "
    u = f.get("uncertainty")
    if u:
        v, us = value_with_uncertainty(float(f["value"]), float(u))
        return f"{mark}{v} ± {us}{sep}{unit}"
    from ..figure import _number

    return f"{mark}{_number(float(f['value']), 3)}{sep}{unit}"


def value_text(value: float, uncertainty: float | None = None) -> str:
    """A figure's value alone (for a legend), rounded as the report rounds it: to the place of its
    uncertainty's second significant digit (GUM 7.2.6), else to 3 significant figures.

    >>> value_text(9504.2, 480.0), value_text(9504.2)
    ('9,500', '9,500')
    """
    from ..figure import _number

    if uncertainty is not None and np.isfinite(uncertainty) and uncertainty > 0:
        return value_with_uncertainty(float(value), float(uncertainty))[0]
    return _number(float(value), 3)


def _save(fig, path):
    if path is None:
        return fig
    import warnings

    plt = _pyplot()
    with warnings.catch_warnings():
        warnings.filterwarnings("ignore", message="Glyph .* missing from font")
        fig.savefig(path, dpi=DPI, pil_kwargs={"compress_level": 3})
    plt.close(fig)
    return fig


def _grid(n: int) -> tuple[int, int]:
    cols = 2 if n in (2, 4) else 3
    return cols, int(np.ceil(n / cols))


def _show_wall(ax, tile, half_m):
    """The wall tile as a grey picture; not covered in light grey, hatched."""
    rgb = np.repeat(np.nan_to_num(tile, nan=0.0)[..., None], 3, axis=2)
    rgb[~np.isfinite(tile)] = np.array([0xd9, 0xd9, 0xd9]) / 255.0
    ax.imshow(rgb, extent=(-half_m, half_m, -half_m, half_m), interpolation="nearest")
    ax.set_xticks([])
    ax.set_yticks([])


def _log_norm(exposure):
    from matplotlib.colors import LogNorm

    top = float(exposure["map_scale"]["top"])
    return LogNorm(vmin=top * 10 ** -float(exposure["map_scale"]["decades"]), vmax=top)


def _map_cmap():
    plt = _pyplot()
    return plt.get_cmap("cividis").with_extremes(under="#000000", bad=_OUTSIDE)


def _angle_rings(ax, half):
    step = 10.0 if half > 25 else 5.0 if half > 10 else 2.0
    t = np.linspace(0, 2 * np.pi, 181)
    for r in np.arange(step, half + 1e-9, step):
        ax.plot(r * np.cos(t), r * np.sin(t), color="white", lw=0.5, alpha=0.6)
    ax.text(0.03, 0.03, f"rings every {2 * step:g}° (full cone)", transform=ax.transAxes, fontsize=FONT_PT * 0.7,
            color="white", va="bottom", bbox=_DARK_BOX)


def sheet_figure(comp, path=None):
    """The equal-exposure sheet: per light a wall tile and an angular map, one exposure; then the figures.

    Returns the matplotlib figure (closed after saving when ``path`` is given).
    """
    import textwrap

    plt = _pyplot()
    n = len(comp.lights)
    cols, rows = _grid(n)
    ex = comp.exposure
    W = 7.2
    tile = (W - 0.4) / cols - 0.15
    head_h, lab_h, gap = 1.05, 0.45, 0.12
    block = lab_h + 2 * tile + gap * 2
    cbar_h = 0.85
    table_w = W - 0.3
    layout = _table_layout(comp, table_w)
    table_h = layout["height"] + 0.35
    notes = ["Notes:"]
    for t in comp.notes:  # a note's later lines indented under its first
        notes += textwrap.wrap(f"· {t}", 125, subsequent_indent="  ") or [""]
    notes_h = 0.16 * len(notes) + 0.55
    H = head_h + rows * block + cbar_h + table_h + 0.1 + notes_h
    fig = plt.figure(figsize=(W, H), dpi=DPI)

    def box(left, top, width, height):
        return [left / W, 1 - (top + height) / H, width / W, height / H]

    mode = "absolute (cd, lx)" if comp.absolute else "normalised to each light's own peak: shapes, not brightness"
    fig.text(0.5, 1 - 0.28 / H, f"{n} lights at one exposure", ha="center", va="center", fontsize=FONT_PT * 1.5,
             weight="bold")
    full = (f"full scale {ex['full_scale']:.3g} lx (the brightest, {plain(ex['full_scale_light'], 30)})"
            if comp.absolute else "full scale: each light's own peak")
    fig.text(0.5, 1 - 0.58 / H, f"{mode} · walls re-drawn at {ex['wall_distance_m']:g} m, {full}",
             ha="center", va="center", fontsize=FONT_PT * 0.85, color="#333333")
    fig.text(0.5, 1 - 0.82 / H, f"tone: sRGB encoding (IEC 61966-2-1) · maps: ±{ex['half_angle_deg']:.0f}° "
             f"from the axis, log scale over {ex['map_scale']['decades']:g} decades", ha="center", va="center",
             fontsize=FONT_PT * 0.85, color="#333333")
    norm = _log_norm(ex)
    cmap = _map_cmap()
    half_m, half = ex["wall_half_width_m"], ex["half_angle_deg"]
    im = None
    for i, light in enumerate(comp.lights):
        r, c = divmod(i, cols)
        left = 0.2 + c * (tile + 0.15)
        top = head_h + r * block
        width = 28 if cols == 3 else 44
        lines = _even_wrap(plain(light.label, 400), width)
        # two even lines, else cut with '…' (the table below shows every name whole)
        name = "\n".join(lines) if len(lines) <= 2 else legend_name(light.label, width)
        fig.text((left + tile / 2) / W, 1 - (top + lab_h / 2) / H, name, ha="center", va="center",
                 fontsize=FONT_PT, weight="bold", color="black", linespacing=1.1)
        ax_w = fig.add_axes(box(left, top + lab_h, tile, tile))
        _show_wall(ax_w, comp.wall_tiles[i], half_m)
        if i == 0:
            ax_w.text(0.03, 0.97, f"wall at {ex['wall_distance_m']:g} m, ±{half_m:.1f} m", transform=ax_w.transAxes,
                      fontsize=FONT_PT * 0.7, color="white", va="top", bbox=_DARK_BOX)
        ax_a = fig.add_axes(box(left, top + lab_h + tile + gap, tile, tile))
        shown = np.where(comp.angular_tiles[i] > 0, comp.angular_tiles[i], norm.vmin * 1e-3)
        shown = np.where(np.isfinite(comp.angular_tiles[i]), shown, np.nan)
        im = ax_a.imshow(shown, extent=(-half, half, -half, half), cmap=cmap, norm=norm, interpolation="nearest")
        ax_a.set_xticks([])
        ax_a.set_yticks([])
        if i == 0:
            _angle_rings(ax_a, half)
        if light.clipped:
            ax_w.text(0.97, 0.03, "clipped: too dark at the peak", transform=ax_w.transAxes, ha="right",
                      fontsize=FONT_PT * 0.7, color="#E69F00", va="bottom")
    y = head_h + rows * block + 0.1
    ax_cb = fig.add_axes(box(0.6, y, W - 1.2, 0.16))
    cb = fig.colorbar(im, cax=ax_cb, orientation="horizontal", extend="min")
    cb.ax.tick_params(labelsize=FONT_PT * 0.8)
    from .plots import _plain_log_ticks

    _plain_log_ticks(cb.ax.xaxis, norm.vmax / norm.vmin)  # 10, 100, 1,000 as in every other picture
    unit = "cd" if comp.absolute else "fraction of the light's own peak"
    cb.set_label(f"angular maps: intensity, {unit} (black: below the scale; grey: not in the photo)",
                 fontsize=FONT_PT * 0.8)
    y += cbar_h
    ax_t = fig.add_axes(box(0.15, y, table_w, layout["height"] + 0.25))
    _figures_table(ax_t, comp, layout, table_w)
    y += table_h + 0.1
    fig.text(0.15 / W, 1 - y / H, "\n".join(w[: len(w) - len(w.lstrip())] + plain(w, 200) for w in notes),
             ha="left", va="top",
             fontsize=FONT_PT * 0.72, color="#333333", linespacing=1.3)
    fig.text(0.5, 0.05 / H, CAUTION_LINE, ha="center", va="bottom", fontsize=FONT_PT * 0.7, color="#444444")
    # the notes block may be longer than its estimate: grow the canvas rather than clip
    return _save(fig, path)


def _verdicts_against_first(comp) -> dict:
    """``{(light index, figure): verdict}`` of each light against the first one."""
    first = comp.lights[0].label
    out = {}
    index = {x.label: i for i, x in enumerate(comp.lights)}
    for d in comp.differences:
        if d["a"] == first:
            out[(index[d["b"]], d["figure"])] = d["verdict"]
    return out


#: The sheet's table: row height for one or two text lines (in), per extra name line, the space
#: between columns (in) and the most lines a name may take before it is cut (project choices).
TABLE_ROW_IN, TABLE_LINE_IN, TABLE_GAP_IN, TABLE_NAME_LINES = 0.3, 0.13, 0.14, 5
#: Smallest share of the table's width left to the names before the cells' text is made smaller.
TABLE_NAME_SHARE = 0.17


def _text_width_in(text: str, size_pt: float, bold: bool = False) -> float:
    """Width (in) of a line of text as matplotlib draws it at the pictures' resolution (Agg, DPI;
    hinting makes small text at a lower resolution measure narrower)."""
    from matplotlib.font_manager import FontProperties

    w, _, _ = _renderer().get_text_width_height_descent(
        text, FontProperties(size=size_pt, weight="bold" if bold else "normal"), ismath=False)
    return w / DPI


@functools.lru_cache(maxsize=1)
def _renderer():
    from matplotlib.backends.backend_agg import RendererAgg

    return RendererAgg(10, 10, DPI)


def _even_wrap(text: str, width: int) -> list[str]:
    """``textwrap.wrap(text, width)`` with its lines made as even as the same number of lines allows
    (no lone last word)."""
    import textwrap

    lines = textwrap.wrap(text, width) or [""]
    for w in range(width - 1, 0, -1):
        shorter = textwrap.wrap(text, w)
        if len(shorter) > len(lines):
            break
        lines = shorter
    return lines


def _longest_fitting(text: str, width_in: float, size_pt: float) -> str:
    """``text`` as literal picture text, whole if it fits ``width_in`` (with ' brighter ▶'), else cut with '…'."""
    for n in range(len(text), 8, -1):
        s = plain(text, n)
        if _text_width_in(s + " brighter ▶", size_pt) <= width_in:
            return s
    return plain(text, 8)


def _wrap_to(text: str, width_in: float, size_pt: float, max_lines: int) -> list[str]:
    """``text`` in lines no wider than ``width_in`` (words kept whole unless one alone is wider); at
    most ``max_lines``, the last cut with '…' when the text does not fit."""
    import textwrap

    s = " ".join(str(text).split())
    fits = None
    for chars in range(max(len(s), 1), 0, -1):
        lines = textwrap.wrap(s, chars, break_long_words=True) or [""]
        if fits is not None and len(lines) > len(fits):
            break  # the narrowest wrap with the fewest lines: lines of even length, no lone last word
        if all(_text_width_in(x, size_pt) <= width_in for x in lines):
            fits = lines
    lines = fits or [s]
    if len(lines) > max_lines:
        last = lines[max_lines - 1]
        while last and _text_width_in(last + "…", size_pt) > width_in:
            last = last[:-1]
        lines = lines[: max_lines - 1] + [last.rstrip() + "…"]
    return lines


def _table_layout(comp, width_in: float) -> dict:
    """Where the sheet's table puts its text: the font size, each column's centre (in from the
    left; the names' column first, left-aligned at 0), each light's name in lines and each row's
    height (in).  Columns are as wide as their widest text (measured); the names get the rest and
    wrap in it, so a long name is shown whole (up to TABLE_NAME_LINES lines; the tiles'
    headings hold two)."""
    keys = [k for k in SHEET_KEYS if any(k in x.figures for x in comp.lights)]
    verdicts = _verdicts_against_first(comp)
    heads = []
    for k in keys:
        t = vocabulary.term(k)
        unit = vocabulary.unit_text(t.unit)
        heads.append([t.label.split(" (")[0]] + ([f"({unit})"] if unit else []))
    cells = [[figure_cell(x.figures.get(k)) + (" *" if verdicts.get((i, k)) == "significant" else "")
              for k in keys] for i, x in enumerate(comp.lights)]
    size = FONT_PT * 0.85
    while True:
        widths = [max([_text_width_in(h, size, True) for h in heads[j]] +
                      [_text_width_in(row[j], size, True) for row in cells]) for j in range(len(keys))]
        used = sum(widths) + TABLE_GAP_IN * (len(keys) + 0.5)  # half a gap at the right end
        if width_in - used >= TABLE_NAME_SHARE * width_in or size <= FONT_PT * 0.6:
            break
        size *= 0.93
    name_w = max(width_in - used, 0.5)
    names = [_wrap_to(plain(x.label, 400), name_w, size, TABLE_NAME_LINES) for x in comp.lights]
    widest_name = max(_text_width_in(line, size) for lines in names for line in lines)
    spare = max(width_in - used - widest_name, 0.0) / (len(keys) + 0.5)  # shared out between the columns
    x, centres = widest_name, []
    for w in widths:
        x += TABLE_GAP_IN + spare
        centres.append(x + w / 2)
        x += w
    rows = [TABLE_ROW_IN] + [TABLE_ROW_IN + TABLE_LINE_IN * max(len(lines) - 2, 0) for lines in names]
    return {"keys": keys, "heads": heads, "cells": cells, "size": size, "centres": centres, "names": names,
            "rows": rows, "height": sum(rows)}


def _figures_table(ax, comp, layout: dict, width_in: float):
    """Lights as rows, the key figures as columns; ``*`` marks a significant difference from the first
    light.  ``ax`` spans the table (``width_in`` wide, ``layout['height']`` + the key line high); data
    units are inches from its top left."""
    ax.axis("off")
    rows = layout["rows"]
    ax.set_xlim(0, width_in)
    ax.set_ylim(layout["height"] + 0.25, 0)
    size = layout["size"]
    tops = np.concatenate([[0.0], np.cumsum(rows)])
    mid = lambda i: (tops[i] + tops[i + 1]) / 2  # noqa: E731
    for j, head in enumerate(layout["heads"]):
        ax.text(layout["centres"][j], mid(0), "\n".join(head), ha="center", va="center", fontsize=size,
                weight="bold", color="#333333", gid="table-head")
    for i, light in enumerate(comp.lights, start=1):
        if i % 2 == 0:
            ax.axhspan(tops[i], tops[i + 1], color="#f0f0f0", lw=0, zorder=0)
        ax.text(0.0, mid(i), "\n".join(layout["names"][i - 1]), ha="left", va="center", fontsize=size,
                linespacing=1.15, gid="table-name")
        for j, k in enumerate(layout["keys"]):
            f = light.figures.get(k)
            txt = layout["cells"][i - 1][j]
            grey = not f or f.get("status") == "not_measured"
            ax.text(layout["centres"][j], mid(i), txt, ha="center", va="center", fontsize=size,
                    weight="bold" if txt.endswith(" *") else "normal", color="#8a8a8a" if grey else "black",
                    gid="table-cell")
    ax.text(0.0, tops[-1] + 0.06, "value ± 1σ; ≈ estimate, ≥ / ≤ bound, — not measured;  * differs from the first "
            "light beyond k = 2 combined uncertainties (bounds are never compared)", fontsize=FONT_PT * 0.7,
            va="top", color="#333333")


def _profiles(light, scale):
    from ..profile import plane_profile, radial_profile

    p = radial_profile(light.beam)
    h = plane_profile(light.beam, 0.0)
    v = plane_profile(light.beam, 90.0)
    return (p.theta_deg, p.mean * scale), (h[0], h[1] * scale), (v[0], v[1] * scale)


def profiles_figure(comp, path=None):
    """Radial profile (linear and log) and the horizontal / vertical plane profiles, every light overlaid."""
    plt = _pyplot()
    fig, axes = plt.subplots(4, 1, figsize=(7.2, 11.5), dpi=DPI)
    half = comp.exposure["half_angle_deg"]
    unit = "intensity (cd)" if comp.absolute else "intensity / own peak"
    for i, (light, s) in enumerate(zip(comp.lights, comp.scales)):
        (t, m), (ha, hv), (va, vv) = _profiles(light, s)
        st = style(i)
        lab = legend_name(light.label, 36)
        every = max(1, len(t) // 12)
        kw = dict(lw=1.4, marker=MARKERS[i % len(MARKERS)], markevery=(i * 3 % every, every), markersize=4, **st)
        axes[0].plot(t, m, label=lab, **kw)
        axes[1].plot(t, np.where(m > 0, m, np.nan), label=lab, **kw)
        axes[2].plot(ha, hv, label=lab, **{**kw, "markevery": (i * 7 % (2 * every), 2 * every)})
        axes[3].plot(va, vv, label=lab, **{**kw, "markevery": (i * 7 % (2 * every), 2 * every)})
    top = max(float(np.nanmax(x.beam.intensity)) * s for x, s in zip(comp.lights, comp.scales))
    axes[1].set_yscale("log")
    axes[1].set_ylim(top * 10 ** -comp.exposure["map_scale"]["decades"] / 3, top * 1.5)
    titles = ("radial profile (mean over azimuth), linear", "radial profile, log",
              "horizontal plane (right +)", "vertical plane (up +)")
    for ax, title in zip(axes, titles):
        ax.set_title(title, fontsize=FONT_PT * 1.05, loc="left")
        ax.set_ylabel(unit, fontsize=FONT_PT)
        ax.grid(True, color="#dddddd", lw=0.6)
        ax.tick_params(labelsize=FONT_PT * 0.85)
    for ax in axes[:2]:
        ax.set_xlim(0, half)
        ax.set_xlabel("angle from the beam axis (deg)", fontsize=FONT_PT)
    for ax in axes[2:]:
        ax.set_xlim(-half, half)
        ax.set_xlabel("signed angle from the axis (deg)", fontsize=FONT_PT)
    axes[0].set_ylim(bottom=0)
    # numbers written as everywhere else in the report: 8,000 (not 8000), 10,000 (not 10^4)
    from matplotlib.ticker import FuncFormatter

    from .plots import _plain_log_ticks

    for ax in (axes[0], axes[2], axes[3]):
        ax.yaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:,g}"))
    _plain_log_ticks(axes[1].yaxis)
    axes[0].legend(fontsize=FONT_PT * 0.8, ncol=2 if len(comp.lights) > 4 else 1, frameon=False)
    mode = "absolute: every light in cd" if comp.absolute else \
        "normalised to each light's own peak (not every report is in cd): shapes only"
    fig.suptitle(f"Profiles · {mode}", fontsize=FONT_PT * 1.2, weight="bold")
    fig.text(0.5, 0.005, CAUTION_LINE, ha="center", va="bottom", fontsize=FONT_PT * 0.7, color="#444444")
    fig.tight_layout(rect=(0, 0.015, 1, 0.985))
    return _save(fig, path)


def ratio_cmap():
    from matplotlib.colors import LinearSegmentedColormap

    return LinearSegmentedColormap.from_list("beamshot-ratio", RATIO_CMAP_COLOURS).with_extremes(bad=_OUTSIDE)


def difference_figure(comp, path=None):
    """log2(I_a / I_b) in angle space for exactly two lights; blank where either is below RATIO_FLOOR."""
    from ..compare import RATIO_FLOOR

    plt = _pyplot()
    full_a, full_b = (plain(x.label, 80) for x in comp.lights)
    # the title with both names whole if they fit the width at some size down to FONT_PT, else cut
    title_pt = next((FONT_PT * k for k in (1.4, 1.25, 1.1, 1.0)
                     if _text_width_in(f"{full_a} ÷ {full_b}", FONT_PT * k, True) <= 5.8), None)
    a, b = (full_a, full_b) if title_pt else (plain(x.label, 26) for x in comp.lights)
    ends = [_longest_fitting(x.label, 2.3, FONT_PT * 0.85) for x in comp.lights]
    half = comp.exposure["half_angle_deg"]
    fig = plt.figure(figsize=(6.0, 7.2), dpi=DPI)
    ax = fig.add_axes([0.1, 0.24, 0.8, 0.8 * 6.0 / 7.2])
    im = ax.imshow(comp.ratio_tile, extent=(-half, half, -half, half), cmap=ratio_cmap(),
                   vmin=-RATIO_LIMIT_STOPS, vmax=RATIO_LIMIT_STOPS, interpolation="nearest")
    _angle_rings(ax, half)
    ax.set_xlabel("angle right of the axis (deg)", fontsize=FONT_PT)
    ax.set_ylabel("angle above the axis (deg)", fontsize=FONT_PT)
    ax.tick_params(labelsize=FONT_PT * 0.85)
    cax = fig.add_axes([0.1, 0.13, 0.8, 0.025])
    cb = fig.colorbar(im, cax=cax, orientation="horizontal", extend="both")
    ticks = np.arange(-RATIO_LIMIT_STOPS, RATIO_LIMIT_STOPS + 0.5, 1.0)
    cb.set_ticks(ticks)
    cb.set_ticklabels([f"×{2 ** t:g}" if t >= 0 else f"×1/{2 ** -t:g}" for t in ticks])
    cb.ax.tick_params(labelsize=FONT_PT * 0.85)
    # which light is brighter, at the end of the bar where it is (one centred line ran off the picture
    # with long names)
    label = f"ratio {a} / {b}"
    if _text_width_in(label, FONT_PT * 0.85) > 5.6:
        label = "ratio of the first light's intensity to the second's (as in the title)"
    cb.set_label(label, fontsize=FONT_PT * 0.85)
    fig.text(0.1, 0.165, f"◀ {ends[1]} brighter", ha="left", va="bottom", fontsize=FONT_PT * 0.85, color=RATIO_CMAP_COLOURS[0])
    fig.text(0.9, 0.165, f"{ends[0]} brighter ▶", ha="right", va="bottom", fontsize=FONT_PT * 0.85,
             color=RATIO_CMAP_COLOURS[-1])
    mode = "absolute (cd / cd)" if comp.absolute else "shapes: each normalised to its own peak"
    fig.text(0.5, 0.975, f"{a} ÷ {b}", ha="center", va="top", fontsize=title_pt or FONT_PT * 1.4, weight="bold")
    fig.text(0.5, 0.935, f"ratio of intensities in the same direction, {mode}", ha="center", va="top",
             fontsize=FONT_PT * 0.85, color="#333333")
    fig.text(0.5, 0.06, f"grey: either light below {RATIO_FLOOR:.0%} of its own peak, or not in its photo",
             ha="center", fontsize=FONT_PT * 0.75, color="#333333")
    fig.text(0.5, 0.01, CAUTION_LINE, ha="center", va="bottom", fontsize=FONT_PT * 0.7, color="#444444")
    return _save(fig, path)


def reach_overlay_figure(comp, path=None):
    """Every light's axis illuminance against distance, and its 1 lx and 0.25 lx footprints on the ground."""
    from ..reach import (BEAM_DISTANCE_LUX, BRIGHT_POINT_LUX, DEFAULT_HEIGHT_M, DEFAULT_TILT_DEG, ground_illuminance,
                         lit_extent)
    from .reach_plots import for_iso_lines, plot_axis_illuminance

    plt = _pyplot()
    fig, (ax1, ax2) = plt.subplots(2, 1, figsize=(7.2, 9.4), dpi=DPI, gridspec_kw={"height_ratios": (1, 1.25)})
    peaks = [(x.figures.get("peak_intensity") or {}) for x in comp.lights]
    plot_axis_illuminance([(legend_name(x.label), p) for x, p in zip(comp.lights, peaks)], ax=ax1)
    extents = [lit_extent(x.beam, height_m=DEFAULT_HEIGHT_M, tilt_deg=DEFAULT_TILT_DEG) for x in comp.lights]
    reach_m = max(e[0] for e in extents)
    half_m = max(max(e[1] for e in extents), reach_m / 8)
    for i, light in enumerate(comp.lights):
        g = ground_illuminance(light.beam, height_m=DEFAULT_HEIGHT_M, tilt_deg=DEFAULT_TILT_DEG, reach_m=reach_m,
                               half_width_m=half_m, n=301)
        st = style(i)
        e = for_iso_lines(g.illuminance)
        ax2.contour(g.x_m, g.y_m, e, levels=[BEAM_DISTANCE_LUX], colors=[st["color"]], linewidths=1.0,
                    linestyles=[":"])
        ax2.contour(g.x_m, g.y_m, e, levels=[BRIGHT_POINT_LUX], colors=[st["color"]], linewidths=1.8,
                    linestyles=[st["linestyle"]])
        ax2.plot([], [], label=legend_name(light.label), lw=1.8, **st)
    ax2.plot([], [], color="#555555", lw=1.8, label=f"{BRIGHT_POINT_LUX:g} lx (solid / own dash)")
    ax2.plot([], [], color="#555555", lw=1.0, ls=":", label=f"{BEAM_DISTANCE_LUX:g} lx (dotted)")
    ax2.plot([0], [0], marker="^", color="black", ms=8, ls="none", label="the light")
    ax2.set_xlim(-half_m, half_m)
    ax2.set_ylim(0, reach_m)
    ax2.set_xlabel("across (m)", fontsize=FONT_PT)
    ax2.set_ylabel("ahead (m)", fontsize=FONT_PT)
    ax2.grid(True, color="#dddddd", lw=0.6)
    ax2.legend(fontsize=FONT_PT * 0.75, loc="upper left", bbox_to_anchor=(1.02, 1.0), frameon=False)
    ax2.set_title(f"on flat ground, light {DEFAULT_HEIGHT_M:g} m high, tilted {DEFAULT_TILT_DEG:g}° down "
                  "(E = I·h / r³); across stretched", fontsize=FONT_PT * 1.05, loc="left")
    fig.text(0.5, 0.005, CAUTION_LINE + " Never aim a light at traffic.", ha="center", va="bottom",
             fontsize=FONT_PT * 0.7, color="#444444")
    fig.tight_layout(rect=(0, 0.015, 1, 1))
    return _save(fig, path)
