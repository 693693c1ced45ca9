"""A shareable beam card: one 1080 x 1350 px PNG (4:5, the common portrait size of a post).

Top to bottom: the light's name; the beam on a wall at the comparison's common exposure (the
same tone curve and full scale for every card of one comparison, so cards can be set side by
side); the key figures as tiles with value ± 1σ and status in words; the analysis facts in small
print (the photo's wall distance beside the common one drawn at, absolute scale, camera profile,
the common exposure); the safety line.
Palette: warm off-white paper, near-black text, one Okabe-Ito accent (#0072B2) for the figure
values; status words in grey (no meaning carried by colour alone).
"""

from __future__ import annotations

import numpy as np

from .. import vocabulary

__all__ = ["CARD_PX", "CARD_KEYS", "card_figure", "photo_distance_text", "subtitle_text"]

#: Card size in pixels (width, height) and the figure size that gives it at CARD_DPI.
CARD_PX = (1080, 1350)
CARD_DPI = 150
CARD_KEYS = ("peak_intensity", "beam_distance", "hotspot_angle", "field_angle", "spill_angle", "ra")
_PAPER = "#fbfaf6"
_INK = "#1b1b1b"
_ACCENT = "#0072B2"
_MUTED = "#5a5a5a"
_SCALE_WORDS = {"lux_meter": "lux meter at the peak", "lux_meter_point": "lux meter at a wall point",
                "camera_constant": "camera constant of a profile", "exposure_metadata": "estimated from EXIF (±28 %)",
                "none": "none (relative)"}


def scale_bar_m(longest_m: float) -> float:
    """The scale bar's length: the largest 1, 2 or 5 x 10^k m not above ``longest_m`` (a round length
    reads at a glance; common practice).

    >>> scale_bar_m(1.19), scale_bar_m(0.6), scale_bar_m(3.0)
    (1.0, 0.5, 2.0)
    """
    k = np.floor(np.log10(longest_m))
    return float(max(m * 10**k for m in (1, 2, 5) if m * 10**k <= longest_m))


def subtitle_text(common_m: float, n_lights: int) -> str:
    """The line under the name: the beam is re-drawn at the comparison's common wall distance."""
    return f"beam re-drawn on a wall at {common_m:g} m, the same distance and exposure for all {n_lights} lights"


def photo_distance_text(photo_m, common_m: float) -> str:
    """Small print: where the photo was taken, against the common distance the picture is drawn at."""
    if photo_m is None:
        return f"photo distance not recorded (drawn above at {common_m:g} m)"
    try:
        d = float(photo_m)
    except (TypeError, ValueError):
        return f"photo taken at {photo_m} m from the wall (drawn above at {common_m:g} m)"
    if abs(d - float(common_m)) < 1e-9:
        return f"photo taken at {d:g} m from the wall, as drawn above"
    return f"photo taken at {d:g} m from the wall; drawn above at {common_m:g} m for comparison"


def card_figure(comp, index: int, path=None):
    """The card of light ``index`` of a :class:`beamshot.compare.Comparison`; returns the figure."""
    from .compare_plots import CAUTION_LINE, _save, figure_cell, plain
    from .plots import _pyplot

    plt = _pyplot()
    light = comp.lights[index]
    ex = comp.exposure
    W, H = CARD_PX[0] / CARD_DPI, CARD_PX[1] / CARD_DPI
    fig = plt.figure(figsize=(W, H), dpi=CARD_DPI, facecolor=_PAPER)

    def box(left, top, width, height):
        return [left / W, 1 - (top + height) / H, width / W, height / H]

    if len(light.label) <= 34:
        title, size = plain(light.label, 34), 22
    else:  # a long name on two lines, smaller, cut only past what two lines hold
        import textwrap

        lines = textwrap.wrap(plain(light.label, 90), 46)
        title, size = "\n".join(lines[:2]) + ("…" if len(lines) > 2 else ""), 15
    fig.text(0.35 / W, 1 - 0.42 / H, title, ha="left", va="center", fontsize=size, weight="bold", color=_INK,
             linespacing=1.1)
    fig.text(0.35 / W, 1 - 0.82 / H, subtitle_text(ex["wall_distance_m"], len(comp.lights)), ha="left",
             va="center", fontsize=10, color=_MUTED)
    side = 4.7
    ax = fig.add_axes(box((W - side) / 2, 1.05, side, side))
    tile = comp.wall_tiles[index]
    rgb = np.repeat(np.nan_to_num(tile, nan=0.0)[..., None], 3, axis=2)
    rgb[~np.isfinite(tile)] = np.array([0xd9, 0xd9, 0xd9]) / 255.0
    half_m = ex["wall_half_width_m"]
    ax.imshow(rgb, extent=(-half_m, half_m, -half_m, half_m), interpolation="bilinear")
    ax.set_xticks([])
    ax.set_yticks([])
    for s in ax.spines.values():
        s.set_visible(False)
    bar = scale_bar_m(half_m * 0.35)
    ax.plot([half_m * 0.9 - bar, half_m * 0.9], [-half_m * 0.9] * 2, color="white", lw=2)
    ax.text(half_m * 0.9 - bar / 2, -half_m * 0.85, f"{bar:g} m", color="white", ha="center", va="bottom",
            fontsize=8)
    # figure tiles: 3 columns x 2 rows
    top = 1.05 + side + 0.2
    cols, cw, ch = 3, (W - 0.7) / 3, 0.78
    for k, key in enumerate(CARD_KEYS):
        r, c = divmod(k, cols)
        x, y = 0.35 + c * cw, top + r * ch
        f = light.figures.get(key) or {}
        t = vocabulary.term(key)
        unit = vocabulary.unit_text(t.unit)
        fig.text((x + 0.05) / W, 1 - (y + 0.14) / H, t.label, ha="left", va="center", fontsize=8.5, color=_MUTED)
        fig.text((x + 0.05) / W, 1 - (y + 0.42) / H, figure_cell(f) + (("" if unit == "°" else " ") + unit
                                                                      if f.get("value") is not None and unit else ""),
                 ha="left", va="center", fontsize=13, weight="bold",
                 color=_ACCENT if f.get("value") is not None else "#9a9a9a")
        status = vocabulary.STATUS_WORDS.get(f.get("status"), f.get("status") or "not measured")
        fig.text((x + 0.05) / W, 1 - (y + 0.66) / H, status, ha="left", va="center", fontsize=8, color=_MUTED,
                 style="normal" if f.get("status") == "measured" else "italic")
    settings = light.report.get("settings") or {}
    cal = light.report.get("calibration") or {}
    scale = (cal.get("absolute_scale") or {}).get("kind", "none")
    profile = (cal.get("camera_profile") or {}).get("name", "?")
    when = str(light.report.get("created_utc", ""))[:10]
    full = (f"full scale {ex['full_scale']:.3g} lx at the wall (the brightest light)" if comp.absolute
            else "each light normalised to its own peak (not all in cd)")
    small = [photo_distance_text(settings.get("distance_m"), ex["wall_distance_m"]),
             f"absolute scale: {_SCALE_WORDS.get(scale, scale)} · camera profile: {plain(profile, 30)} · "
             f"analysed {when}",
             f"drawn from the calibrated intensity map: sRGB tone (IEC 61966-2-1), {full}",
             "value ± 1σ standard uncertainty; ≈ estimate, ≥ / ≤ bound. Made with beamshot."]
    fig.text(0.35 / W, 1 - (top + 2 * ch + 0.15) / H, "\n".join(small), ha="left", va="top", fontsize=6.6,
             color=_MUTED, linespacing=1.45)
    fig.text(0.5, 0.12 / H, CAUTION_LINE, ha="center", va="bottom", fontsize=7, color=_INK)
    fig.patch.set_facecolor(_PAPER)
    if path is not None:
        import warnings

        with warnings.catch_warnings():
            warnings.filterwarnings("ignore", message="Glyph .* missing from font")
            fig.savefig(path, dpi=CARD_DPI, facecolor=_PAPER, pil_kwargs={"compress_level": 3})
        plt.close(fig)
        return fig
    return _save(fig, None)
