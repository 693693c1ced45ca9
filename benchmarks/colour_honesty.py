"""Benchmark: are the colour-across-the-beam figures honest under JPEG coding?

Run:  python benchmarks/colour_honesty.py [--seeds 3] [--qualities 75 85 90 95] [--size 1600] [--by-quality]

Two-tone beams (beamshot.synth.TwoToneBeam: a blackbody hotspot in a blackbody spill of another
temperature) are rendered as 8-bit sRGB photos with sensor noise, coded as JPEG (Pillow's libjpeg,
4:2:0) at several qualities, the same 8-bit photos as lossless PNG and the same linear frames as 16-bit PNG
(no coding error: the controls), then analysed with colour.  Each figure is compared with its truth in units of its own
stated 1-sigma; the fraction within 2 sigma is printed per figure (a normal error: 95 %).

Truth.
* Zones: ``beamshot.synth.two_tone_truth`` (dense integration of the two parts' XYZ).
* Rings and map cells: a ring ``theta in [a, b)`` over all azimuths holds the light
  ``XYZ = int_a^b (I_hot(theta) XYZ_hot + I_spill(theta) XYZ_spill) sin(theta) dtheta``
  (the cells' solid-angle weights, as the analysis sums them), with ``XYZ_k`` each blackbody's
  XYZ at Y = 1 (Planck's law and the CIE 1931 2-degree functions, colour-science).  The photo's
  camera writes linear sRGB ``c_k = M^-1 XYZ_k`` (``synth.blackbody_rgb``) and the analysis assumes
  the same sRGB matrix ``M`` (IEC 61966-2-1), so ``M (I_hot c_hot + I_spill c_spill)`` is that
  XYZ: the mixture's chromaticity per direction is the XYZ mix, (u', v') by CIE 15:2018 eq. 8.10-8.11.
* Map maximum: the largest distance between the true (u', v') of the cells the analysis used.
For the rings and the map cells u' and v' count separately against the stated radius
``sigma_uv`` (the RMS 1-sigma per axis, sqrt(tr C / 2)).  The zones' u', v' are also shown against
their uncertainty without the "colour transform assumed" term (the synthetic camera is exactly
sRGB, so that term hides any other error).
"""

from __future__ import annotations

import argparse
import time
from dataclasses import replace

import numpy as np

from beamshot import analyze
from beamshot.colour.cct import cct_duv
from beamshot.colour.chromaticity import delta_uv_prime, uv_prime_of, xy_of
from beamshot.photo import decode_photo
from beamshot.synth import (HotspotSpillBeam, Scene, SynthCamera, TwoToneBeam, encode_jpeg, encode_png16,
                            exposure_time_for_peak, render_two_tone_linear, two_tone_ring_uv, two_tone_truth)

#: Colour pairs (hotspot K, spill K): the demo's prototype 4 and two others.
PAIRS = ((5700.0, 3500.0), (6500.0, 4000.0), (4500.0, 2700.0))
SHAPE = dict(peak_cd=7000.0, hotspot_fwhm_deg=7.0, spill_fraction=0.03, spill_falloff=0.3, cutoff_deg=28.0,
             edge_width_deg=0.5)


def _camera(width: int) -> SynthCamera:
    return SynthCamera(width_px=width, height_px=width * 3 // 4, focal_35mm_mm=15, sensor_diag_mm=6.0,
                       f_number=2.2, iso=50.0, supersample=1)


def _png8(px: np.ndarray, cam: SynthCamera) -> bytes:
    """The 8-bit photo before coding, losslessly (PNG): the 8-bit rounding without JPEG's coding."""
    import io

    from PIL import Image

    buf = io.BytesIO()
    Image.fromarray(px).save(buf, "PNG")
    return buf.getvalue()


def _fig(f):
    return f["value"], f["uncertainty"], dict(f.get("budget") or {})


def evaluate(report, beam: TwoToneBeam, zone_truth: dict) -> dict:
    """{figure: list of |measured - truth| / sigma} for one analysed photo."""
    col = report.colour
    out: dict[str, list] = {}
    add = lambda k, v: out.setdefault(k, []).append(float(v))  # noqa: E731
    truth_uv = {z: uv_prime_of(np.array(x)) for z, x in zone_truth.items()}
    truth_xy = {z: xy_of(np.array(x)) for z, x in zone_truth.items()}
    for z in ("hotspot", "corona", "spill"):
        zz = col["zones"][z]
        for i, key in enumerate(("x", "y")):
            v, s, _ = _fig(zz[key])
            if v is not None:
                add(f"zone {key}", abs(v - truth_xy[z][i]) / s)
        for i, key in enumerate(("u_prime", "v_prime")):
            v, s, b = _fig(zz[key])
            if v is None:
                continue
            add(f"zone {key}", abs(v - truth_uv[z][i]) / s)
            s0 = float(np.sqrt(max(s**2 - b.get("colour transform assumed", 0.0) ** 2, 0.0)))
            add("zone u'v' (no transform term)", abs(v - truth_uv[z][i]) / s0)
            add("zone |u'v' error| x 1e4 (not sigma)", 1e4 * abs(v - truth_uv[z][i]))
        t_cct, t_duv = cct_duv(truth_uv[z])
        for key, t in (("cct", t_cct), ("duv", t_duv)):
            v, s, _ = _fig(zz[key])
            if v is not None:
                add(f"zone {key}", abs(v - t) / s)
    v, s, _ = _fig(col["tint"]["zones_max_delta_uv"])
    if v is not None:
        a, b = col["tint"]["zones_pair"]
        add("zones_max_delta_uv", abs(v - float(delta_uv_prime(truth_uv[a], truth_uv[b]))) / s)
    rings = col["rings"]
    th = np.array(rings["theta_deg"])
    step = th[1] - th[0]
    r_true = two_tone_ring_uv(beam, np.r_[th - step / 2, th[-1] + step / 2])
    r_uv = np.c_[rings["u_prime"], rings["v_prime"]].astype(float)
    r_sig = np.array(rings["sigma_uv"], float)
    ok = np.isfinite(r_sig) & np.all(np.isfinite(r_uv), axis=1)
    for i in range(2):
        for e in np.abs(r_uv[ok, i] - r_true[ok, i]) / r_sig[ok]:
            add("rings u'v'", e)
    cells = report.colour_result.cells
    c_true = two_tone_ring_uv(beam, cells["theta_edges_deg"])
    n_s = cells["u_prime"].shape[1]
    c_uv = np.stack([cells["u_prime"], cells["v_prime"]], -1).astype(float)
    c_noise = np.asarray(cells["sigma_uv"], float)
    c_sig = np.hypot(c_noise, np.asarray(cells.get("sigma_uv_coding", 0.0 * c_noise), float))
    c_tr = np.repeat(c_true[:, None, :], n_s, axis=1)
    okc = np.isfinite(c_sig) & np.all(np.isfinite(c_uv), axis=-1)
    for i in range(2):
        for e in np.abs(c_uv[okc][:, i] - c_tr[okc][:, i]) / c_sig[okc]:
            add("map cells u'v'", e)
    v, s, _ = _fig(col["tint"]["map_max_delta_uv"])
    if v is not None:
        from beamshot.colour.beam_colour import MAP_SIGMA_UV_LIMIT

        used = okc & (c_noise <= MAP_SIGMA_UV_LIMIT)
        p = c_tr[used]
        d = np.hypot(p[:, None, 0] - p[None, :, 0], p[:, None, 1] - p[None, :, 1])
        add("map_max_delta_uv", abs(v - float(d.max())) / s)
    return out


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--seeds", type=int, default=3)
    ap.add_argument("--qualities", type=int, nargs="+", default=[75, 85, 90, 95])
    ap.add_argument("--size", type=int, default=1600, help="photo width (px), 4:3")
    ap.add_argument("--pairs", default=None, help="colour pairs hot/spill in K, comma-separated (e.g. 5000/5000)")
    ap.add_argument("--by-quality", action="store_true", help="columns per JPEG quality instead of per colour pair")
    args = ap.parse_args()
    scene = Scene(distance_m=4.0)
    results: dict[str, dict] = {}
    t0 = time.time()
    pairs = PAIRS if not args.pairs else [tuple(float(t) for t in p.split("/")) for p in args.pairs.split(",")]
    for hot_k, spill_k in pairs:
        beam = TwoToneBeam.split(HotspotSpillBeam(**SHAPE), hot_k, spill_k)
        truth = two_tone_truth(beam, d_theta_deg=0.02, d_phi_deg=2.0)
        cam = _camera(args.size)
        cam = replace(cam, exposure_time_s=exposure_time_for_peak(beam, scene, cam, target=0.75))
        for seed in range(args.seeds):
            lin = render_two_tone_linear(beam, scene, cam, seed=seed)
            px = np.round(cam.response.encode(lin) * 255.0).astype(np.uint8)
            runs = [(f"JPEG q{q}", decode_photo(encode_jpeg(px, cam, quality=q), "beam.jpg"), {}) for q in args.qualities]
            runs.append(("PNG8", decode_photo(_png8(px, cam), "beam.png"), {"focal_35mm": 15}))
            runs.append(("PNG16", decode_photo(encode_png16(lin, cam), "beam.png"), {"focal_35mm": 15}))
            for name, photo, kw in runs:
                rep = analyze(photo, distance_m=scene.distance_m, colour=True, **kw)
                kind = name if name.startswith("PNG") else "JPEG"
                for fig, errs in evaluate(rep, beam, truth).items():
                    results.setdefault(kind, {}).setdefault(fig, []).extend(errs)
                    results.setdefault(f"{kind} {hot_k:.0f}/{spill_k:.0f}", {}).setdefault(fig, []).extend(errs)
                    if kind == "JPEG":
                        results.setdefault(name, {}).setdefault(fig, []).extend(errs)
        print(f"  {hot_k:.0f} K in {spill_k:.0f} K done ({time.time() - t0:.0f} s)", flush=True)
    figs = list(results["JPEG"])
    print("\nfraction within 2 sigma (n = comparisons); max |error|/sigma")
    cols = ["JPEG", "PNG8", "PNG16"] + [k for k in results if k.startswith("JPEG ")]
    if args.by_quality:
        cols = ["JPEG"] + [f"JPEG q{q}" for q in args.qualities]
    print(f"{'figure':>30} " + " ".join(f"{c:>22}" for c in cols))
    for f in figs:
        cells = []
        for c in cols:
            e = np.array(results[c].get(f, []))
            cells.append(f"{np.mean(e <= 2):6.1%} n={e.size:<4d} {e.max() if e.size else np.nan:5.1f}")
        print(f"{f:>30} " + " ".join(f"{c:>22}" for c in cells))


if __name__ == "__main__":
    main()
