"""Pictures of colour across the beam (tint.png): intensity map, tint map, and u'v' against angle.

Three panels in a row:

1. the intensity map as in beam.png (:func:`beamshot.report.plots.plot_intensity_map`);
2. the tint map on the same azimuthal-equidistant axes (degrees from the beam axis, right and
   up positive): each cell of the colour map (``RING_STEP_DEG`` x ``SECTOR_STEP_DEG``) filled
   by its distance in CIE 1976 (u', v') from the hotspot's chromaticity (or, if the hotspot has
   none, from the brightest measured cell), cells too noisy for colour hatched;
3. a CIE 1976 (u', v') diagram around the beam's points: the Planckian locus, lines of constant
   CCT from Duv -0.02 to +0.02 (Ohno 2013 inverse, colour-science), the track of whole rings
   from the axis outward coloured by angle, and each zone's point with its 2-sigma ellipse
   (channel noise only: the part that matters for differences across the beam).

When colour is not measured the picture holds the intensity map and the reason in words.
Colours of the tint palette are our own (a light-to-dark sequential ramp, readable in grey).
"""

from __future__ import annotations

import numpy as np

from .plots import FROM_REPORT

__all__ = ["ISO_CCT_K", "tint_figure", "plot_tint_map", "plot_uv_diagram"]

#: Rings whose u'v' is known to better than this (1 sigma) are drawn filled; up to ``RING_ROUGH_UV``
#: open; beyond it they are left out (project choice: 0.003 is about the step between two CCT
#: lines 100 K apart near 4000 K, from memory; 0.02 is a colour change anyone sees).
RING_SURE_UV, RING_ROUGH_UV = 0.003, 0.02
#: Temperatures (K) of the iso-CCT lines drawn, and their Duv reach.
ISO_CCT_K = (2200, 2700, 3000, 3500, 4000, 5000, 6500, 10000)
ISO_DUV_REACH = 0.02
#: Palette of the tint map (sequential, light to dark; project choice) and of the angle track.
TINT_COLOURS = ("#fbf7ee", "#f0d9a8", "#d9a05b", "#a8613a", "#5c2d2a")
ANGLE_CMAP = "viridis"
#: Zone marker colours (project choice).
ZONE_COLOURS = {"hotspot": "#1b4f8a", "corona": "#2a8a5c", "spill": "#b3472d"}
FONT_PT = 9.0
#: Height of tint.png (in; 16.5 in wide at 110 dpi).
TINT_HEIGHT_IN = 7.1


def _pyplot():
    import matplotlib

    matplotlib.use("Agg", force=False)
    import matplotlib.pyplot as plt

    return plt


def _tint_cmap():
    from matplotlib.colors import LinearSegmentedColormap

    return LinearSegmentedColormap.from_list("beamshot-tint", TINT_COLOURS)


def _reference_uv(result) -> np.ndarray | None:
    hot = result.zones.get("hotspot", {})
    if hot.get("u_prime") is not None and hot["u_prime"].value is not None:
        return np.array([hot["u_prime"].value, hot["v_prime"].value])
    return None


def plot_tint_map(result, contours: dict | None = None, *, ax=None, half_width_deg: float | None = None):
    """The tint map: delta u'v' of each colour-map cell from the hotspot's chromaticity; returns the mesh."""
    from ..colour.beam_colour import MAP_SIGMA_UV_LIMIT

    plt = _pyplot()
    if ax is None:
        _, ax = plt.subplots(figsize=(5, 5))
    cells = result.cells
    u, v, s = cells["u_prime"], cells["v_prime"], cells["sigma_uv"]
    ref = _reference_uv(result)
    ok = np.isfinite(u) & np.isfinite(v) & np.isfinite(s) & (s <= MAP_SIGMA_UV_LIMIT)
    ref_words = "the hotspot's colour"
    if ref is None and ok.any():  # no hotspot colour (clipped): the innermost measured cell
        ref = np.array([u[ok][0], v[ok][0]])
        ref_words = "the innermost measured colour (hotspot not measured)"
    d = np.hypot(u - ref[0], v - ref[1]) if ref is not None else np.full(u.shape, np.nan)
    d = np.where(ok, d, np.nan)
    te = np.radians(np.asarray(cells["theta_edges_deg"]))
    pe = np.radians(np.asarray(cells["phi_edges_deg"]))
    # each cell as a polygon in azimuthal-equidistant degrees (fine azimuth steps along the arcs)
    sub = 8
    phis = np.concatenate([np.linspace(pe[j], pe[j + 1], sub, endpoint=False) for j in range(len(pe) - 1)] + [pe[-1:]])
    tt, pp = np.meshgrid(np.degrees(te), phis, indexing="ij")
    x, y = tt * np.cos(pp), tt * np.sin(pp)
    vals = np.repeat(d, sub, axis=1)
    vmax = max(float(np.nanmax(d)) if np.isfinite(d).any() else 0.0, 0.003)
    mesh = ax.pcolormesh(x, y, np.ma.masked_invalid(vals), cmap=_tint_cmap(), vmin=0.0, vmax=vmax, shading="flat")
    noisy = np.repeat(~ok, sub, axis=1).astype(float)
    ax.pcolor(x, y, np.ma.masked_equal(noisy, 0.0), hatch="////", facecolor="none", edgecolor="#9a9a9a",
              linewidth=0.0, shading="flat")
    _draw_zone_lines(ax, contours or {})
    half = half_width_deg or float(np.degrees(te[-1])) * 1.08
    ax.set_xlim(-half, half)
    ax.set_ylim(-half, half)
    ax.set_aspect("equal")
    ax.set_facecolor("#ececec")
    ax.set_xlabel("angle from the beam axis, right (deg)", fontsize=FONT_PT)
    ax.set_ylabel("angle from the beam axis, up (deg)", fontsize=FONT_PT)
    ax.set_title(f"tint: Δu′v′ from {ref_words}", fontsize=FONT_PT + 1)
    cb = ax.figure.colorbar(mesh, ax=ax, orientation="horizontal", fraction=0.05, pad=0.12)
    cb.set_label(f"Δu′v′ (hatched: colour noise above {MAP_SIGMA_UV_LIMIT:g}, or clipped)", fontsize=FONT_PT)
    cb.ax.tick_params(labelsize=FONT_PT - 1)
    ax.tick_params(labelsize=FONT_PT - 1)
    return mesh


def _draw_zone_lines(ax, contours: dict) -> None:
    """The hotspot (50 %) and field (10 %) contours and the spill edge, in azimuthal-equidistant degrees."""
    from ..hotspot import local_basis

    pk = contours.get("peak")
    for key, style in (("hotspot", dict(color="#1b4f8a", lw=1.0, ls="-")),
                       ("field", dict(color="#2a8a5c", lw=1.0, ls="--"))):
        c = contours.get(key)
        if c is None or pk is None or not c.complete:
            continue
        e1, e2 = local_basis(pk.vector)
        b = np.r_[c.bearings, c.bearings[:1]]
        a = np.r_[c.alpha, c.alpha[:1]]
        vec = (np.cos(a)[:, None] * pk.vector[None, :] + np.sin(a)[:, None] *
               (np.cos(b)[:, None] * e1[None, :] + np.sin(b)[:, None] * e2[None, :]))
        th = np.degrees(np.arccos(np.clip(vec[:, 2], -1, 1)))
        ph = np.arctan2(vec[:, 1], vec[:, 0])
        ax.plot(th * np.cos(ph), th * np.sin(ph), **style)
    edge = contours.get("edge")
    if edge is not None and edge.complete:
        ph = np.linspace(0, 2 * np.pi, 361)
        th = np.degrees(edge.at(ph))
        ax.plot(th * np.cos(ph), th * np.sin(ph), color="#5c2d2a", lw=1.0, ls=":")


def _planck_uv(temps) -> np.ndarray:
    from ..colour.cct import _planck_uv_prime

    return _planck_uv_prime(np.asarray(temps, float))


def plot_uv_diagram(result, *, ax=None):
    """u'v' of the rings against angle, the zones with 2-sigma ellipses, the Planckian locus and iso-CCT lines."""
    from matplotlib.patches import Ellipse

    from ..colour.cct import iso_cct_line
    from .compare_plots import value_text

    plt = _pyplot()
    if ax is None:
        _, ax = plt.subplots(figsize=(5, 5))
    rings = result.rings
    th = np.asarray(rings["theta_deg"], float)
    ru, rv, rs = (np.asarray(rings[k], float) for k in ("u_prime", "v_prime", "sigma_uv"))
    known = np.isfinite(ru) & np.isfinite(rv) & np.isfinite(rs)
    ok = known & (rs < RING_SURE_UV)
    # rings known only roughly (a dim spill, a JPEG's coding) are drawn open, not left out; the view is
    # set by the others
    rough = known & (rs >= RING_SURE_UV) & (rs < RING_ROUGH_UV)
    pts = [np.c_[ru[ok], rv[ok]]]
    for z, d in result.zones.items():
        if d.get("u_prime") is not None and d["u_prime"].value is not None:
            pts.append(np.array([[d["u_prime"].value, d["v_prime"].value]]))
    allp = np.vstack(pts) if any(len(p) for p in pts) else np.array([[0.21, 0.48]])
    cu, cv = allp.mean(axis=0)
    span = max(float(np.ptp(allp[:, 0])), float(np.ptp(allp[:, 1])), 0.02) * 0.65 + 0.01
    lo_u, hi_u, lo_v, hi_v = cu - span, cu + span, cv - span, cv + span
    temps = np.geomspace(1500, 20000, 300)
    loc = _planck_uv(temps)
    ax.plot(loc[:, 0], loc[:, 1], color="#333333", lw=1.2, label="Planckian locus")
    for t in ISO_CCT_K:
        line = iso_cct_line(t, ISO_DUV_REACH)
        if not (lo_u - 0.05 < line[:, 0].mean() < hi_u + 0.05):
            continue
        ax.plot(line[:, 0], line[:, 1], color="#8a8a8a", lw=0.7)
        p = line[len(line) * 3 // 4]  # labelled a little above the locus (Duv about +0.01)
        if lo_u < p[0] < hi_u and lo_v < p[1] < hi_v:
            ax.text(p[0], p[1], f"{t:,} K", fontsize=FONT_PT - 1.5, color="#555555", ha="center", va="bottom")
    track = ok | rough
    full = 2 * th[track] if track.any() else np.array([0.0, 1.0])
    sc = ax.scatter(ru[ok], rv[ok], c=2 * th[ok], cmap=ANGLE_CMAP, s=14, zorder=3, edgecolors="none",
                    vmin=float(np.min(full)), vmax=float(np.max(full)))
    ax.plot(ru[track], rv[track], color="#bbbbbb", lw=0.6, zorder=2)
    if rough.any():
        ax.scatter(ru[rough], rv[rough], s=14, zorder=3, facecolors="none", linewidths=0.9,
                   edgecolors=sc.cmap(sc.norm(2 * th[rough])),
                   label=f"open: ring known to {RING_SURE_UV:g}–{RING_ROUGH_UV:g} in u′v′ (1σ)")
    cb = ax.figure.colorbar(sc, ax=ax, orientation="horizontal", fraction=0.05, pad=0.12)
    cb.set_label("rings: full cone angle (deg)", fontsize=FONT_PT)
    cb.ax.tick_params(labelsize=FONT_PT - 1)
    for z, d in result.zones.items():
        if d.get("u_prime") is None or d["u_prime"].value is None:
            continue
        c = np.asarray(d["uv_covariance"], float)
        w, vecs = np.linalg.eigh(c)
        ang = float(np.degrees(np.arctan2(vecs[1, 1], vecs[0, 1])))
        p = (d["u_prime"].value, d["v_prime"].value)
        ax.add_patch(Ellipse(p, 4 * np.sqrt(max(w[1], 0)), 4 * np.sqrt(max(w[0], 0)), angle=ang, fill=False,
                             color=ZONE_COLOURS[z], lw=1.0, zorder=4))
        cct = d["cct"]
        words = f"{z}" + (f"  {value_text(cct.value, cct.uncertainty)} K" if cct.value is not None else "")
        ax.plot(*p, marker="o", ms=7, mfc="white", mec=ZONE_COLOURS[z], mew=1.8, zorder=5, ls="none", label=words)
    ax.set_xlim(lo_u, hi_u)
    ax.set_ylim(lo_v, hi_v)
    ax.set_aspect("equal")
    ax.set_xlabel("u′ (CIE 1976)", fontsize=FONT_PT)
    ax.set_ylabel("v′ (CIE 1976)", fontsize=FONT_PT)
    title = "colour against angle (grey: lines of constant CCT)"
    if result.white_balance == "auto":
        title = "colour against angle (shifted by auto white balance:\nonly the differences hold)"
    ax.set_title(title, fontsize=FONT_PT + 1)
    ax.legend(fontsize=FONT_PT - 1, loc="lower right", framealpha=0.9)
    ax.tick_params(labelsize=FONT_PT - 1)
    ax.grid(color="#e4e4e4", lw=0.5)
    return sc


def tint_figure(report, path, *, noise=FROM_REPORT):
    """Write tint.png: intensity map, tint map and the u'v' diagram (or the reason colour is missing).

    The intensity map has beam.png's colour scale and words: the same floor (``noise``, the
    report's :func:`~beamshot.report.plots.report_noise_floor` unless given), so black means what
    it means there ('below the noise floor').  Returns the (closed) figure."""
    from .plots import intensity_label, plot_intensity_map, report_noise_floor

    plt = _pyplot()
    result = report.colour_result
    fig, axes = plt.subplots(1, 3, figsize=(16.5, TINT_HEIGHT_IN), gridspec_kw={"width_ratios": [1, 1, 1]})
    title = report.settings.get("light_name") or (report.inputs[0]["name"] if report.inputs else "beam")
    fig.suptitle(f"{title}: colour across the beam", fontsize=FONT_PT + 3, x=0.01, ha="left")
    half = None
    if result is not None and result.measured:
        half = float(result.cells["theta_edges_deg"][-1]) * 1.08
    if noise is FROM_REPORT:
        noise = report_noise_floor(report)
    plot_intensity_map(report.beam, report.contours, ax=axes[0], half_width_deg=half, noise=noise,
                       label=intensity_label(report, report.beam.unit))
    axes[0].set_title("intensity", fontsize=FONT_PT + 1)
    if result is None or not result.measured:
        for ax in axes[1:]:
            ax.axis("off")
        reason = "colour was not measured" if result is None else f"colour not measured: {result.reason}"
        import textwrap

        axes[1].text(0.0, 0.6, "\n".join(textwrap.wrap(reason, 60)), fontsize=FONT_PT + 1, va="top",
                     transform=axes[1].transAxes)
    else:
        plot_tint_map(result, report.contours, ax=axes[1], half_width_deg=half)
        plot_uv_diagram(result, ax=axes[2])
    notes = list(result.notes) if result is not None else []
    note = (notes[0][:1].upper() + notes[0][1:] + ".") if notes else ""
    foot = "A camera gives chromaticity, not a spectrum: colour rendering (CRI, TM-30) is not measured. " + note
    import textwrap

    from .plots import CAUTION_LINE

    fig.text(0.99, 0.97, CAUTION_LINE, ha="right", va="top", fontsize=FONT_PT - 0.5, color="#444444", gid="caution")

    fig.text(0.01, 0.01, "\n".join(textwrap.wrap(foot, 190)), fontsize=FONT_PT - 0.5, color="#444444")
    # the map's legend (up to 6 rows) hangs below it: room for it above the two-line footnote
    fig.subplots_adjust(left=0.05, right=0.99, top=1 - 0.77 / TINT_HEIGHT_IN, bottom=1.45 / TINT_HEIGHT_IN,
                        wspace=0.28)
    fig.savefig(path, dpi=110)
    plt.close(fig)
    return fig
