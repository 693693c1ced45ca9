"""The demo: an invented workshop comparing optic prototypes for a bike light's head.

Everything here is made up and rendered by :mod:`beamshot.synth`: the beam patterns, the room
and the camera.  The prototypes are named only by number and optic (a smooth reflector, a
textured reflector, a TIR optic, and a reflector whose spill ring is warmer than its hotspot:
the blend of a white LED's blue die and phosphor changes with angle, rendered as a 5700 K
hotspot and a 3500 K spill, for colour across the beam).  The scenario: a small workshop shoots each prototype at
4 m on a white wall with a phone's ultra-wide camera in manual exposure, plus one light-off
frame, and reads a lux meter at the hotspot.

``ground_truth.json`` is reproducible: regenerating gives the same bytes (sorted keys, numbers
rounded to :data:`TRUTH_DIGITS` significant digits, no timestamps); the JPEGs are the same bytes
for the same seed and the same NumPy, Pillow and libjpeg versions.
"""

from __future__ import annotations

import functools
import json
import os
from dataclasses import dataclass

import numpy as np

from .synth import (HotspotSpillBeam, Scene, SynthCamera, TwoToneBeam, encode_jpeg, exposure_time_for_peak, render_photo,
                    render_two_tone_photo, truth_figures)

__all__ = ["DEMO_LIGHTS", "DEMO_DISTANCE_M", "DEMO_WIDTH_PX", "TRUTH_DIGITS", "write_demo_photos"]

DEMO_DISTANCE_M = 4.0
#: Width of the demo photos (4:3), px.
DEMO_WIDTH_PX = 1600
#: Significant digits of the truth values in ground_truth.json (as report.json's figures).
TRUTH_DIGITS = 6


@dataclass(frozen=True)
class DemoLight:
    name: str
    label: str
    pattern: HotspotSpillBeam | TwoToneBeam

    @property
    def colour(self) -> bool:
        """Whether the light's colour changes across the beam (analysed with colour)."""
        return isinstance(self.pattern, TwoToneBeam)


DEMO_LIGHTS = (
    DemoLight("proto-1-smooth-reflector", "prototype 1, smooth reflector",
              HotspotSpillBeam(peak_cd=9500.0, hotspot_fwhm_deg=6.0, spill_fraction=0.015, spill_falloff=0.35,
                               cutoff_deg=31.0, edge_width_deg=0.4, rings=((9.0, 0.8, 0.02),))),
    DemoLight("proto-2-textured-reflector", "prototype 2, textured reflector",
              HotspotSpillBeam(peak_cd=5200.0, hotspot_fwhm_deg=10.0, spill_fraction=0.03, spill_falloff=0.3,
                               cutoff_deg=31.0, edge_width_deg=0.8)),
    DemoLight("proto-3-tir-optic", "prototype 3, TIR optic",
              HotspotSpillBeam(peak_cd=3800.0, hotspot_fwhm_deg=14.0, spill_fraction=0.01, spill_falloff=0.2,
                               cutoff_deg=21.0, edge_width_deg=1.0, ellipse_ratio=1.12)),
    DemoLight("proto-4-warm-spill-ring", "prototype 4, reflector with a warm spill ring",
              TwoToneBeam.split(HotspotSpillBeam(peak_cd=7000.0, hotspot_fwhm_deg=7.0, spill_fraction=0.03,
                                                 spill_falloff=0.3, cutoff_deg=28.0, edge_width_deg=0.5,
                                                 rings=((13.0, 2.5, 0.025),)), 5700.0, 3500.0)),
)

#: The room is not perfectly dark: a little light from a corridor.
_AMBIENT_LUX = 0.6


def _camera(**kw) -> SynthCamera:
    base = dict(width_px=1600, height_px=1200, focal_35mm_mm=15, sensor_diag_mm=6.0, position_m=(0.12, -0.05, 0.0),
                f_number=2.2, iso=50.0, supersample=2, make="beamshot-synth", model="demo phone, ultra-wide")
    base.update(kw)
    return SynthCamera(**base)


def write_demo_photos(folder: str, *, seed: int = 7, width_px: int = DEMO_WIDTH_PX) -> list[dict]:
    """Render the demo photos into ``folder``; returns one dict per light with paths and truth.

    ``width_px`` sets the photos' size (4:3; the view stays the same); smaller photos render
    faster.  The truth does not depend on it.  Also writes ``ground_truth.json``.
    """
    if width_px < 400 or width_px % 4:
        raise ValueError("width_px must be a multiple of 4, at least 400")
    os.makedirs(folder, exist_ok=True)
    scene = Scene(distance_m=DEMO_DISTANCE_M, ambient_lux=_AMBIENT_LUX)
    size = dict(width_px=width_px, height_px=width_px * 3 // 4)
    out = []
    for i, light in enumerate(DEMO_LIGHTS):
        truth = _truth(light.pattern, scene.distance_m)
        t = exposure_time_for_peak(light.pattern, scene, _camera(**size), target=0.75,
                                   peak_lux=truth["peak_lux_on_wall"])
        t = float(1.0 / np.round(1.0 / t))  # the phone app offers 1/N s
        cam = _camera(exposure_time_s=t, **size)
        beam_path = os.path.join(folder, f"{light.name}.jpg")
        with open(beam_path, "wb") as fh:
            render = render_two_tone_photo if light.colour else render_photo
            fh.write(encode_jpeg(render(light.pattern, scene, cam, seed=seed + i), cam, quality=90))
        dark = HotspotSpillBeam(peak_cd=0.0)
        off_path = os.path.join(folder, f"{light.name}-off.jpg")
        with open(off_path, "wb") as fh:
            fh.write(encode_jpeg(render_photo(dark, scene, cam, seed=seed + 100 + i), cam, quality=90))
        lux = float(round(truth["peak_lux_on_wall"], 0))  # the meter shows whole lux
        record = {
            "name": light.name,
            "label": light.label,
            "photo": beam_path,
            "ambient": off_path,
            "distance_m": float(scene.distance_m),
            "lux_at_peak": lux,
            # unit in every key name (peak_cd, hotspot_angle_deg, beam_flux_lm...; ra has none)
            "truth": {k: _rounded(v) for k, v in sorted({**truth, **_colour_truth(light.pattern)}.items())},
        }
        out.append(record)
    document = {
        "note": "synthetic photos rendered by beamshot.synth; invented scenario, not real lights",
        "seed": seed,
        "photo_size_px": [size["width_px"], size["height_px"]],
        "truth_digits": TRUTH_DIGITS,
        "lights": [{k: (os.path.basename(v) if k in ("photo", "ambient") else v) for k, v in r.items()} for r in out],
    }
    with open(os.path.join(folder, "ground_truth.json"), "w", encoding="utf-8", newline="\n") as fh:
        json.dump(document, fh, indent=2, sort_keys=True, ensure_ascii=True, allow_nan=False)
        fh.write("\n")
    return out


@functools.lru_cache(maxsize=8)
def _truth(pattern: HotspotSpillBeam, distance_m: float) -> dict:
    """The pattern's true figures (a dense integration, about 2 s; the same for every render)."""
    return truth_figures(pattern, distance_m)


@functools.lru_cache(maxsize=8)
def _colour_truth(pattern) -> dict:
    """For a two-tone beam: each zone's true CCT (Ohno 2013 on the zone's integrated XYZ) and the
    hotspot-to-spill delta u'v' (synth.two_tone_truth); nothing for a one-colour beam."""
    if not isinstance(pattern, TwoToneBeam):
        return {}
    from .colour.cct import cct_duv
    from .colour.chromaticity import delta_uv_prime, uv_prime_of
    from .synth import two_tone_truth

    uv = {z: uv_prime_of(np.asarray(xyz)) for z, xyz in two_tone_truth(pattern, d_theta_deg=0.02,
                                                                          d_phi_deg=2.0).items()}
    out = {f"{z}_cct_k": float(cct_duv(p)[0]) for z, p in uv.items()}
    out["hotspot_spill_delta_uv"] = float(delta_uv_prime(uv["hotspot"], uv["spill"]))
    return out


def _rounded(x) -> float:
    """A truth value at :data:`TRUTH_DIGITS` significant digits (fixed, so the file is reproducible)."""
    return float(f"{float(x):.{TRUTH_DIGITS}g}")
