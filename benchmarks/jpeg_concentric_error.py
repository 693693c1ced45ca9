"""Benchmark: concentric errors that JPEG coding puts into the azimuthal mean of a beam's luminance.

Run:  python benchmarks/jpeg_concentric_error.py

A beam whose colour changes across it (a cool hotspot in a warm spill) is rendered by
beamshot.synth as an 8-bit sRGB photo with sensor noise, and coded as JPEG by Pillow's libjpeg at
several qualities (4:2:0 chroma, the common default).  For radial bands 3 px wide about the beam's
centre, the mean linear BT.709 luminance of the decoded JPEG is compared with that of the 8-bit
photo before coding (both through the sRGB decoding, IEC 61966-2-1).  Noise averages out in a band
of thousands of pixels; what is left is the coding's error, the same all around a band (concentric),
which a ring search cannot tell from a ring.  It is given in codes of the luminance (the relative
error over d ln L / dc at the band's level) and in units of the file's chroma DC quantisation step
``Q / 8`` (the step of a block mean; ITU-T T.81 A.3), with beams of one colour (grey, 5000 K and
3000 K throughout) of the same shape beside them.
"""

from __future__ import annotations

import argparse
import io

import numpy as np
from PIL import Image

from beamshot.camera.response import srgb_decode
from beamshot.synth import (HotspotSpillBeam, Scene, SynthCamera, TwoToneBeam, exposure_time_for_peak,
                            render_photo, render_two_tone_photo)

BT709 = np.array([0.2126, 0.7152, 0.0722])
#: Pillow's codes for the chroma subsampling (JPEG plugin: 0 = 4:4:4, 1 = 4:2:2, 2 = 4:2:0).
SUBSAMPLING = {"4:4:4": 0, "4:2:2": 1, "4:2:0": 2}


def _camera(**kw) -> SynthCamera:
    base = dict(width_px=1600, height_px=1200, focal_35mm_mm=15, sensor_diag_mm=6.0, f_number=2.2, iso=50.0,
                supersample=1)
    base.update(kw)
    return SynthCamera(**base)


def band_errors(source: np.ndarray, quality: int, subsampling: int = 2, band_px: float = 3.0):
    """(luminance code of each band, error of its mean in codes, chroma DC step) for ``source`` coded at ``quality``."""
    buf = io.BytesIO()
    Image.fromarray(source).save(buf, "JPEG", quality=quality, subsampling=subsampling)
    with Image.open(io.BytesIO(buf.getvalue())) as im:
        q_chroma = im.quantization.get(1, im.quantization[0])[0]
        decoded = np.asarray(im.convert("RGB"))
    lin_src = srgb_decode(source / 255.0) @ BT709
    lin_dec = srgb_decode(decoded / 255.0) @ BT709
    smooth = lin_src.astype(np.float32)
    cy, cx = np.unravel_index(np.argmax(smooth), smooth.shape)
    yy, xx = np.indices(smooth.shape)
    band = (np.hypot(yy - cy, xx - cx) / band_px).astype(int).ravel()
    n = np.bincount(band)
    m_src = np.bincount(band, lin_src.ravel()) / np.maximum(n, 1)
    m_dec = np.bincount(band, lin_dec.ravel()) / np.maximum(n, 1)
    ok = (n > 500) & (m_src > 0)
    code = 255.0 * np.interp(m_src[ok], srgb_decode(np.linspace(0, 1, 4097)), np.linspace(0, 1, 4097))
    dlnl_dc = (np.log(srgb_decode(np.minimum(code + 0.5, 255) / 255)) - np.log(srgb_decode(np.maximum(code - 0.5, 0.5) / 255)))
    rel = m_dec[ok] / m_src[ok] - 1.0
    keep = (code > 15) & (code < 230)
    return code[keep], rel[keep] / dlnl_dc[keep], q_chroma / 8.0


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--qualities", type=int, nargs="+", default=[75, 85, 90, 95])
    ap.add_argument("--subsampling", default="4:2:0,4:4:4", help="chroma subsamplings to code with, comma-separated")
    args = ap.parse_args()
    scene = Scene(distance_m=4.0)
    shape = dict(peak_cd=7000.0, hotspot_fwhm_deg=7.0, spill_fraction=0.03, spill_falloff=0.3, cutoff_deg=28.0,
                 edge_width_deg=0.5)
    beams = [("grey", HotspotSpillBeam(**shape), None)]
    for k in (5000.0, 3000.0):  # one colour, but not grey: the channels differ
        beams.append((f"{k:.0f} K throughout", TwoToneBeam.split(HotspotSpillBeam(**shape), k, k), True))
    for hot, spill in ((5700.0, 3500.0), (6500.0, 4000.0), (4500.0, 2700.0)):
        beams.append((f"{hot:.0f} K in {spill:.0f} K", TwoToneBeam.split(HotspotSpillBeam(**shape), hot, spill), True))
    print("concentric error of 3 px band means of linear luminance, decoded JPEG vs the photo before coding")
    print(f"{'beam':>20} {'chroma':>6} {'quality':>7} {'chroma step':>11} {'RMS codes':>9} {'max codes':>9} {'RMS/step':>8} {'max/step':>8}")
    for seed, (name, beam, two) in enumerate(beams):
        cam = _camera()
        grey = HotspotSpillBeam(**shape)
        cam = _camera(exposure_time_s=exposure_time_for_peak(grey, scene, cam, target=0.75))
        photo = (render_two_tone_photo if two else render_photo)(beam, scene, cam, seed=seed)
        for sub in args.subsampling.split(","):
            for q in args.qualities:
                code, err, step = band_errors(photo, q, SUBSAMPLING[sub])
                rms, mx = float(np.sqrt(np.mean(err ** 2))), float(np.max(np.abs(err)))
                print(f"{name:>20} {sub:>6} {q:>7} {step:>11.3f} {rms:>9.3f} {mx:>9.3f} {rms / step:>8.2f} "
                      f"{mx / step:>8.2f}")


if __name__ == "__main__":
    main()
