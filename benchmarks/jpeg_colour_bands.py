"""Benchmark: the concentric colour errors JPEG coding puts into band means of a beam's light.

Run:  python benchmarks/jpeg_colour_bands.py [--qualities 75 85 90 95] [--seeds 2]

As benchmarks/jpeg_concentric_error.py does for luminance: beams are rendered by beamshot.synth as
8-bit sRGB photos with sensor noise (two-tone beams, a cool hotspot in a warm spill, and a beam of
one colour), coded as JPEG by Pillow's libjpeg at several qualities (4:2:0 and 4:4:4 chroma), and
decoded.  For radial bands 3 px wide about the beam's centre the mean linear R, G, B (sRGB decoding,
IEC 61966-2-1) of the decoded photo is compared with that of the photo before coding.  Noise
averages out of a band of thousands of pixels; what is left is the coding's error, the same all
around a band.

Each channel's error of the band mean is put in codes (divided by d lin / d code at the band's
mean level, a central step of one code), and the code errors are turned into JPEG's
Y, Cb, Cr (the JFIF matrix, ITU-T T.871 sec. 7): ``dY = 0.299 dR + 0.587 dG + 0.114 dB``,
``dCb = -0.168736 dR - 0.331264 dG + 0.5 dB``, ``dCr = 0.5 dR - 0.418688 dG - 0.081312 dB``.
Printed: their RMS and largest values over the bands with a mean code 15-230, and the band means'
(u', v') error (CIE 15:2018 eq. 8.10-8.11 through the sRGB matrix).  Then the model of
beamshot.jpeg_coding.chroma_sigma_uv (Y at ``COLOUR_RMS_CODES``, Cb and Cr at
``CHROMA_RMS_CODES``) is checked: the fraction of the bands' u' and v' errors within 2 of its sigma.
"""

from __future__ import annotations

import argparse
import io

import numpy as np
from PIL import Image

from beamshot.camera.response import Response, srgb_decode
from beamshot.colour.chromaticity import uv_prime_of
from beamshot.colour.transform import SRGB_TO_XYZ
from beamshot.synth import (HotspotSpillBeam, Scene, SynthCamera, TwoToneBeam, exposure_time_for_peak,
                            render_two_tone_photo)

#: Pillow's codes for the chroma subsampling (JPEG plugin: 0 = 4:4:4, 2 = 4:2:0).
SUBSAMPLING = {"4:4:4": 0, "4:2:0": 2}
#: RGB code errors -> Y, Cb, Cr code errors (ITU-T T.871, JFIF, sec. 7).
RGB_TO_YCC = np.array([[0.299, 0.587, 0.114], [-0.168736, -0.331264, 0.5], [0.5, -0.418688, -0.081312]])


def _camera(**kw) -> SynthCamera:
    base = dict(width_px=1600, height_px=1200, focal_35mm_mm=15, sensor_diag_mm=6.0, f_number=2.2, iso=50.0,
                supersample=1)
    base.update(kw)
    return SynthCamera(**base)


def band_errors(source: np.ndarray, quality: int, subsampling: int, band_px: float = 3.0):
    """Per band (mean code 15-230): mean linear RGB before coding (n, 3), the Y/Cb/Cr code errors of
    the band mean (n, 3) and the (u', v') error (n, 2)."""
    buf = io.BytesIO()
    Image.fromarray(source).save(buf, "JPEG", quality=quality, subsampling=subsampling)
    with Image.open(io.BytesIO(buf.getvalue())) as im:
        decoded = np.asarray(im.convert("RGB"))
    lin_src = srgb_decode(source / 255.0).reshape(-1, 3)
    lin_dec = srgb_decode(decoded / 255.0).reshape(-1, 3)
    lum = (lin_src @ SRGB_TO_XYZ[1]).reshape(source.shape[:2])
    cy, cx = np.unravel_index(np.argmax(lum), lum.shape)
    yy, xx = np.indices(lum.shape)
    band = (np.hypot(yy - cy, xx - cx) / band_px).astype(int).ravel()
    n = np.bincount(band)
    m_src = np.stack([np.bincount(band, lin_src[:, c]) for c in range(3)], 1) / np.maximum(n, 1)[:, None]
    m_dec = np.stack([np.bincount(band, lin_dec[:, c]) for c in range(3)], 1) / np.maximum(n, 1)[:, None]
    grid = np.linspace(0, 1, 4097)
    code = 255.0 * np.interp(m_src, srgb_decode(grid), grid)
    slope = (srgb_decode(np.minimum(code + 0.5, 255) / 255) - srgb_decode(np.maximum(code - 0.5, 0) / 255))
    ok = (n > 500) & np.all(m_src > 0, axis=1)
    lum_code = 255.0 * np.interp(m_src @ SRGB_TO_XYZ[1], srgb_decode(grid), grid)
    keep = ok & (lum_code > 15) & (lum_code < 230)
    d_codes = (m_dec - m_src)[keep] / slope[keep]
    d_uv = uv_prime_of(m_dec[keep] @ SRGB_TO_XYZ.T) - uv_prime_of(m_src[keep] @ SRGB_TO_XYZ.T)
    # zones of the source's luminance (fraction of its brightest band): >= 50 %, 10-50 %, and 0.5-10 %
    # (the lit spill); a zone's mean is the mean of all its pixels
    rel = (lum / np.max(m_src @ SRGB_TO_XYZ[1])).ravel()
    z_err = []
    for lo, hi in ((0.5, np.inf), (0.1, 0.5), (0.005, 0.1)):
        sel = (rel >= lo) & (rel < hi) & (source.reshape(-1, 3).max(axis=1) < 255)
        zs, zd = lin_src[sel].mean(axis=0), lin_dec[sel].mean(axis=0)
        zc = 255.0 * np.interp(zs, srgb_decode(grid), grid)
        zslope = srgb_decode(np.minimum(zc + 0.5, 255) / 255) - srgb_decode(np.maximum(zc - 0.5, 0) / 255)
        z_err.append(((zd - zs) / zslope) @ RGB_TO_YCC.T)
    return m_src[keep], d_codes @ RGB_TO_YCC.T, d_uv, np.array(z_err)


def main() -> None:
    from beamshot.jpeg_coding import COLOUR_RMS_CODES, chroma_sigma_uv

    ap = argparse.ArgumentParser()
    ap.add_argument("--qualities", type=int, nargs="+", default=[75, 85, 90, 95])
    ap.add_argument("--seeds", type=int, default=2)
    ap.add_argument("--band-px", type=float, default=3.0, help="width of the radial bands (px)")
    args = ap.parse_args()
    scene = Scene(distance_m=4.0)
    shape = dict(peak_cd=7000.0, hotspot_fwhm_deg=7.0, spill_fraction=0.03, spill_falloff=0.3, cutoff_deg=28.0,
                 edge_width_deg=0.5)
    beams = [("one colour 5000 K", TwoToneBeam.split(HotspotSpillBeam(**shape), 5000.0, 5000.0))]
    for hot, spill in ((5700.0, 3500.0), (6500.0, 4000.0), (4500.0, 2700.0)):
        beams.append((f"{hot:.0f} K in {spill:.0f} K", TwoToneBeam.split(HotspotSpillBeam(**shape), hot, spill)))
    srgb = Response("srgb")
    print("concentric error of 3 px band means, decoded JPEG vs the 8-bit photo before coding (codes)")
    print(f"{'beam':>18} {'chroma':>6} {'q':>3} {'Y rms':>6} {'Y max':>6} {'Cb rms':>6} {'Cb max':>6} {'Cr rms':>6} "
          f"{'Cr max':>6} {'uv rms':>8} {'uv max':>8} {'model 2sig':>10}")
    worst = {"Y": 0.0, "C": 0.0}
    zone_errors = []
    for k, (name, beam) in enumerate(beams):
        grey = HotspotSpillBeam(**shape)
        cam = _camera(exposure_time_s=exposure_time_for_peak(grey, scene, _camera(), target=0.75))
        for seed in range(args.seeds):
            photo = render_two_tone_photo(beam, scene, cam, seed=100 * k + seed)
            for sub in SUBSAMPLING:
                for q in args.qualities:
                    lin, ycc, duv, zone = band_errors(photo, q, SUBSAMPLING[sub], args.band_px)
                    zone_errors.append(zone)
                    rms = np.sqrt(np.mean(ycc**2, axis=0))
                    mx = np.max(np.abs(ycc), axis=0)
                    sig = chroma_sigma_uv(lin, srgb, SRGB_TO_XYZ)
                    within = float(np.mean(np.abs(duv) <= 2 * sig[:, None]))
                    if name != beams[0][0]:
                        worst["Y"] = max(worst["Y"], rms[0])
                        worst["C"] = max(worst["C"], rms[1], rms[2])
                    print(f"{name:>18} {sub:>6} {q:>3} {rms[0]:6.3f} {mx[0]:6.3f} {rms[1]:6.3f} {mx[1]:6.3f} "
                          f"{rms[2]:6.3f} {mx[2]:6.3f} {np.sqrt(np.mean(duv**2)):8.5f} {np.max(np.abs(duv)):8.5f} "
                          f"{within:10.1%}", flush=True)
    print(f"largest RMS over the two-tone beams: Y {worst['Y']:.3f}, Cb/Cr {worst['C']:.3f} codes "
          f"(luminance term used for Y: {COLOUR_RMS_CODES})")
    z = np.array(zone_errors)  # (photos, zone, Y/Cb/Cr)
    print("error of the zone means (all pixels at >= 50 %, 10-50 %, 0.5-10 % of the peak), codes, over all photos:")
    for k, name in enumerate(("hotspot", "corona", "spill")):
        rms = np.sqrt(np.mean(z[:, k] ** 2, axis=0))
        mx = np.max(np.abs(z[:, k]), axis=0)
        print(f"  {name:>8}: RMS Y {rms[0]:.3f} Cb {rms[1]:.3f} Cr {rms[2]:.3f}; max Y {mx[0]:.3f} Cb {mx[1]:.3f} "
              f"Cr {mx[2]:.3f}")


if __name__ == "__main__":
    main()
