"""Pictures of a beam: false-colour intensity map with angle rings, and the radial profile.

Each helper takes ``ax=None`` (a new figure is made), imports matplotlib lazily with the
non-interactive Agg backend, labels its axes with units and returns the main artist.
"""

from __future__ import annotations

import numpy as np

from ..beammap import BeamMap, directions
from ..hotspot import local_basis

__all__ = ["plot_intensity_map", "plot_radial_profile", "beam_figure"]

#: Decades of intensity shown below the peak in the false-colour map.
MAP_DECADES = 3.0


def _pyplot():
    import matplotlib

    matplotlib.use("Agg", force=False)
    import matplotlib.pyplot as plt

    return plt


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
        from matplotlib.path import Path
        from scipy.ndimage import distance_transform_edt

        inside = Path(beam.footprint_deg).contains_points(np.c_[xx.ravel(), yy.ravel()]).reshape(xx.shape)
        _, (ri, ci) = distance_transform_edt(~np.isfinite(vals), return_indices=True)
        vals = np.where(inside, vals[ri, ci], np.nan)
    return a, vals


def plot_intensity_map(beam: BeamMap, contours: dict | None = None, *, ax=None, half_width_deg=None):
    """False-colour map of intensity (log scale, 3 decades) with angle rings; returns the image."""
    plt = _pyplot()
    from matplotlib.colors import LogNorm

    if ax is None:
        _, ax = plt.subplots(figsize=(6, 6))
    cov = float(np.degrees(beam.theta[np.any(beam.valid, axis=1)].max())) if beam.valid.any() else 10.0
    half = half_width_deg or min(cov, 89.0)
    a, vals = _azimuthal_grid(beam, half)
    peak = np.nanmax(vals)
    floor = peak * 10 ** (-MAP_DECADES)
    edge = (contours or {}).get("edge")
    if edge is not None and np.all(np.isfinite(edge.theta)):
        # reach down to a deep spill: a third of its median level, at most 5 decades below peak
        rr = np.radians(np.hypot(*np.meshgrid(a, a)))
        inner = np.isfinite(vals) & (rr < 0.9 * np.min(edge.theta)) & (vals < 0.1 * peak)
        if inner.sum() > 50:
            floor = max(min(floor, np.median(vals[inner]) / 3.0), peak * 1e-5)
    norm = LogNorm(vmin=floor, vmax=peak)
    shown = np.where(np.isfinite(vals), np.clip(vals, floor, None), np.nan)
    im = ax.imshow(shown, origin="lower", extent=(a[0], a[-1], a[0], a[-1]), cmap="inferno", norm=norm)
    ax.set_facecolor("#d9d9d9")
    unit = "cd" if beam.unit == "cd" else "relative"
    plt.colorbar(im, ax=ax, fraction=0.046, pad=0.04, label=f"intensity ({unit})")
    step = 10 if half > 25 else (5 if half > 10 else 2)
    t = np.linspace(0, 2 * np.pi, 361)
    for r in np.arange(step, half + 1e-9, step):
        ax.plot(r * np.cos(t), r * np.sin(t), color="white", lw=0.4, alpha=0.5)
        ax.text(r * np.cos(np.radians(45)), r * np.sin(np.radians(45)), f"{r:g}°", color="white", fontsize=7, alpha=0.8)
    if np.any(beam.saturated):
        # outline of the clipped area: nearest-cell lookup of the saturation mask on the same grid
        xx, yy = np.meshgrid(a, a)
        th = np.radians(np.hypot(xx, yy))
        k = np.clip(np.round((th - beam.theta[0]) / beam.d_theta).astype(int), 0, len(beam.theta) - 1)
        j = np.round((np.mod(np.arctan2(yy, xx), 2 * np.pi) - beam.phi[0]) / beam.d_phi).astype(int) % len(beam.phi)
        sat = beam.saturated[k, j].astype(float)
        ax.contour(a, a, sat, levels=[0.5], colors="#00e5ff", linewidths=1.2, linestyles=":")
        ax.plot([], [], color="#00e5ff", ls=":", label="clipped (not measured)")
    clipped = bool(contours and contours.get("peak") is not None and contours["peak"].clipped)
    if contours:
        pk = contours.get("peak")
        for key, colour, label in (("hotspot", "#00e5ff", "hotspot 50 %"), ("field", "#7CFC00", "field 10 %")):
            c = contours.get(key)
            if clipped or c is None or pk is None or not np.any(np.isfinite(c.alpha)):
                continue
            xy = _contour_xy(pk.vector, c.bearings, c.alpha)
            ax.plot(xy[:, 0], xy[:, 1], color=colour, lw=1.2, label=label)
        e = contours.get("edge")
        if e is not None and np.any(np.isfinite(e.theta)):
            th = np.degrees(np.r_[e.theta, e.theta[:1]])
            ph = np.r_[e.phi, e.phi[:1]]
            ax.plot(th * np.cos(ph), th * np.sin(ph), color="#ff4fd8", lw=1.2, ls="--", label="spill edge")
        if pk is not None and not clipped:
            x, y = np.degrees(pk.theta) * np.cos(pk.phi), np.degrees(pk.theta) * np.sin(pk.phi)
            ax.plot([x], [y], marker="+", color="#00e5ff", ms=10, mew=1.5, ls="none", label="peak")
        ax.plot([0], [0], marker="x", color="#ff4fd8", ms=6, ls="none", label="beam axis")
        ax.legend(loc="lower right", fontsize=7, framealpha=0.6)
    ax.set_xlabel("angle right of the beam axis (deg)")
    ax.set_ylabel("angle above the beam axis (deg)")
    ax.set_aspect("equal")
    return im


def _contour_xy(centre, bearings, alpha):
    """Azimuthal-equidistant coordinates (deg) of a contour traced around ``centre``."""
    c = np.asarray(centre, float)
    e1, e2 = local_basis(c)
    b = np.r_[bearings, bearings[:1]]
    a = np.r_[alpha, alpha[:1]]
    v = np.cos(a)[:, None] * c + np.sin(a)[:, None] * (np.cos(b)[:, None] * e1 + np.sin(b)[:, None] * e2)
    th = np.degrees(np.arccos(np.clip(v[:, 2], -1, 1)))
    ph = np.arctan2(v[:, 1], v[:, 0])
    return np.c_[th * np.cos(ph), th * np.sin(ph)]


def plot_radial_profile(profile, figures: dict, *, ax=None, log=True, unit="relative"):
    """Azimuthal mean intensity against polar angle with its min-max band and the figure marks."""
    plt = _pyplot()
    if ax is None:
        _, ax = plt.subplots(figsize=(6, 4))
    ok = np.isfinite(profile.mean)
    t = profile.theta_deg[ok]
    (line,) = ax.plot(t, profile.mean[ok], color="#1f4e79", lw=1.2, label="azimuthal mean")
    ax.fill_between(t, profile.min[ok], profile.max[ok], color="#1f4e79", alpha=0.18, lw=0, label="min-max over azimuth")
    marks = (("hotspot_angle", "#0097a7", "hotspot"), ("field_angle", "#2e7d32", "field"), ("spill_angle", "#c2185b", "spill"))
    for key, colour, label in marks:
        f = figures.get(key)
        if f is not None and f.value is not None:
            ax.axvline(f.value / 2.0, color=colour, ls="--", lw=1.0, label=f"{label} edge at {f.value / 2:.1f}° ({f.value:.1f}° full angle)")
    if log and np.any(profile.mean[ok] > 0):
        ax.set_yscale("log")
        top = np.nanmax(profile.max[ok])
        ax.set_ylim(top * 1e-4, top * 2)
    ax.set_xlabel("angle from the beam axis (deg)")
    ax.set_ylabel(f"intensity ({unit})" + (", log scale" if log else ""))
    ax.grid(True, which="both", alpha=0.25)
    ax.legend(fontsize=7, loc="upper right")
    return line


def beam_figure(report, path=None):
    """The report picture: map on the left, log and linear radial profiles on the right."""
    plt = _pyplot()
    fig = plt.figure(figsize=(13, 6.2), dpi=110)
    grid = fig.add_gridspec(2, 2, width_ratios=[1.05, 1.0])
    ax_map = fig.add_subplot(grid[:, 0])
    ax_log = fig.add_subplot(grid[0, 1])
    ax_lin = fig.add_subplot(grid[1, 1], sharex=ax_log)
    plot_intensity_map(report.beam, report.contours, ax=ax_map)
    unit = "cd" if report.beam.unit == "cd" else "relative"
    plot_radial_profile(report.profile, report.figures, ax=ax_log, log=True, unit=unit)
    plot_radial_profile(report.profile, report.figures, ax=ax_lin, log=False, unit=unit)
    ax_lin.get_legend().remove()
    beams = [i["name"] for i in report.inputs if i.get("role") == "beam"]
    name = beams[0] if beams else ""
    if len(beams) > 1:
        name += f" (+{len(beams) - 1} bracket photos)"
    pk = report.figures.get("peak_intensity")
    title = f"{name} — peak {pk.text(3)}" if pk is not None else name
    fig.suptitle(title, fontsize=11)
    fig.tight_layout()
    if path is not None:
        fig.savefig(path)
        plt.close(fig)
    return fig
