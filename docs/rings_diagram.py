"""Draw docs/rings-diagram.png: the issue's two-ring beam, its azimuthal-mean profile, the smooth
profile left when the rings found are divided out, and the rings marked.

A synthetic photo (beamshot.synth) of a 14 deg hotspot on a 5 % spill with a bright ring at 10 deg
(+30 %) and a dark ring at 5 deg (-15 %), analysed as any photo is.

Run:  python docs/rings_diagram.py
"""

import os
from dataclasses import replace

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402

from beamshot import analysis as A  # noqa: E402
from beamshot.artefacts import shape_figures  # noqa: E402
from beamshot.photo import decode_photo  # noqa: E402
from beamshot.request import Request  # noqa: E402
from beamshot.savgol import savgol  # noqa: E402
from beamshot.synth import HotspotSpillBeam, Scene, SynthCamera, encode_jpeg, exposure_time_for_peak, render_photo  # noqa: E402
from beamshot.synth_artefacts import FWHM_PER_SIGMA, RingedBeam  # noqa: E402

HERE = os.path.dirname(os.path.abspath(__file__))


def main(path=os.path.join(HERE, "rings-diagram.png")):
    beam = RingedBeam(HotspotSpillBeam(peak_cd=10000.0, hotspot_fwhm_deg=14.0, spill_fraction=0.05, cutoff_deg=24.0),
                      ((10.0, 1.0, 0.30), (5.0, 1.0, -0.15)))
    scene = Scene(distance_m=5.0)
    cam = SynthCamera(width_px=900, height_px=675, focal_35mm_mm=16, supersample=1)
    cam = replace(cam, exposure_time_s=exposure_time_for_peak(beam, scene, cam, peak_lux=10000.0 / 25.0))
    photo = decode_photo(encode_jpeg(render_photo(beam, scene, cam, seed=3), cam), "two-rings.jpg")
    req = Request.from_options(photo, distance_m=5.0, use_exif_scale=False).validated()
    loaded = A.load(req)
    linear = A.linear_image(req, loaded)
    mapped, measured = A.beam_map(req, loaded, linear, A.wall_mapping(req, loaded, linear))
    result = shape_figures(measured.beam, measured.shape, pixel_deg=A._pixel_deg(measured))
    t = np.degrees(measured.beam.theta)
    inten = measured.beam.intensity
    n = np.isfinite(inten).sum(axis=1)
    p = np.where(n > 0, np.nansum(inten, axis=1) / np.maximum(n, 1), np.nan)
    p = p / np.nanmax(p)
    factor = np.ones_like(t)
    for r in result.rings:
        factor *= 1.0 + r.amplitude * np.exp(-0.5 * ((t - r.angle_deg) / (r.width_deg / FWHM_PER_SIGMA)) ** 2)
    fig, (ax, ax2) = plt.subplots(2, 1, figsize=(8, 6.4), dpi=110, sharex=True,
                                  gridspec_kw={"height_ratios": [2, 1.2]})
    keep = t <= 26
    ax.semilogy(t[keep], p[keep], color="#1b4965", lw=1.6, label="azimuthal-mean profile (photo)")
    ax.semilogy(t[keep], (p / factor)[keep], color="#c9a227", lw=1.2, ls="--",
                label="smooth profile (rings divided out)")
    ax.set_ylabel("relative intensity")
    ax.set_ylim(0.01, 1.6)
    ax.legend(loc="lower left", fontsize=9, frameon=False)
    ax.set_title("Rings found on a synthetic photo: +30 % at 10°, −15 % at 5° (truth)", fontsize=11)
    # the photo's ripple against a smooth profile (cubic Savitzky-Golay, 3 deg, of the log profile with
    # the rings divided out), and the fitted rings on it
    inside = (t <= 22.0) & np.isfinite(p) & (p > 0)  # inside the spill edge (24 deg) and its fall
    smooth = np.exp(savgol(np.log((p / factor)[inside]), 31, 3))
    ax2.plot(t[inside], 100 * (p[inside] / smooth - 1.0), color="#5c946e", lw=1.0, label="photo")
    ax2.plot(t[inside], 100 * (factor[inside] - 1.0), color="#333333", lw=0.9, ls="--", label="fitted rings")
    ax2.legend(loc="upper right", fontsize=8.5, frameon=False)
    ax2.axhline(0.0, color="#888888", lw=0.8)
    for r in result.rings:
        colour = "#b23a48" if r.amplitude < 0 else "#2a7f62"
        for a in (ax, ax2):
            a.axvline(r.angle_deg, color=colour, lw=0.8, ls=":")
        ax2.annotate(f"{r.kind} {100 * r.amplitude:+.1f} ± {100 * r.amplitude_sigma:.1f} %\n"
                     f"at {r.angle_deg:.2f}°, {r.width_deg:.2f}° wide", xy=(r.angle_deg, 100 * r.amplitude),
                     xytext=(r.angle_deg + 1.2, 100 * r.amplitude * 0.55 - 4), fontsize=8.5, color=colour)
    ax2.set_ylabel("ring, % of the smooth profile")
    ax2.set_xlabel("angle from the beam axis θ (degrees)")
    ax2.set_ylim(-25, 45)
    ax2.set_xlim(-0.5, 26.5)
    fig.tight_layout()
    fig.savefig(path)
    plt.close(fig)


if __name__ == "__main__":
    main()
