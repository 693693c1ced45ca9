"""The demo: an invented workshop comparing three reflector prototypes for a bike light.

Everything here is made up and rendered by :mod:`beamshot.synth`: the light names, the
beam patterns, the room and the camera.  The scenario: a small workshop tunes the head of
a bike light ("Larkspur") and shoots each prototype at 4 m on a white wall with a phone's
ultra-wide camera in manual exposure, plus one light-off frame, and reads a lux meter at
the hotspot.
"""

from __future__ import annotations

import json
import os
from dataclasses import dataclass

import numpy as np

from .synth import HotspotSpillBeam, Scene, SynthCamera, encode_jpeg, exposure_time_for_peak, render_photo, truth_figures

__all__ = ["DEMO_LIGHTS", "DEMO_DISTANCE_M", "write_demo_photos"]

DEMO_DISTANCE_M = 4.0


@dataclass(frozen=True)
class DemoLight:
    name: str
    label: str
    pattern: HotspotSpillBeam


DEMO_LIGHTS = (
    DemoLight("larkspur-smooth", "Larkspur prototype A, smooth reflector",
              HotspotSpillBeam(peak_cd=9500.0, hotspot_fwhm_deg=6.0, spill_fraction=0.015, spill_falloff=0.35,
                               cutoff_deg=31.0, edge_width_deg=0.4, rings=((9.0, 0.8, 0.02),))),
    DemoLight("larkspur-textured", "Larkspur prototype B, textured reflector",
              HotspotSpillBeam(peak_cd=5200.0, hotspot_fwhm_deg=10.0, spill_fraction=0.03, spill_falloff=0.3,
                               cutoff_deg=31.0, edge_width_deg=0.8)),
    DemoLight("larkspur-tir", "Larkspur prototype C, TIR optic",
              HotspotSpillBeam(peak_cd=3800.0, hotspot_fwhm_deg=14.0, spill_fraction=0.01, spill_falloff=0.2,
                               cutoff_deg=21.0, edge_width_deg=1.0, ellipse_ratio=1.12)),
)

#: The room is not perfectly dark: a little light from a corridor.
_AMBIENT_LUX = 0.6


def _camera(**kw) -> SynthCamera:
    base = dict(width_px=1600, height_px=1200, focal_35mm_mm=15, sensor_diag_mm=6.0, position_m=(0.12, -0.05, 0.0),
                f_number=2.2, iso=50.0, supersample=2, make="beamshot-synth", model="demo phone, ultra-wide")
    base.update(kw)
    return SynthCamera(**base)


def write_demo_photos(folder: str, *, seed: int = 7) -> list[dict]:
    """Render the demo photos into ``folder``; returns one dict per light with paths and truth."""
    os.makedirs(folder, exist_ok=True)
    scene = Scene(distance_m=DEMO_DISTANCE_M, ambient_lux=_AMBIENT_LUX)
    out = []
    for i, light in enumerate(DEMO_LIGHTS):
        truth = truth_figures(light.pattern, scene.distance_m)
        t = exposure_time_for_peak(light.pattern, scene, _camera(), target=0.75, peak_lux=truth["peak_lux_on_wall"])
        t = float(1.0 / np.round(1.0 / t))  # the phone app offers 1/N s
        cam = _camera(exposure_time_s=t)
        beam_path = os.path.join(folder, f"{light.name}.jpg")
        with open(beam_path, "wb") as fh:
            fh.write(encode_jpeg(render_photo(light.pattern, scene, cam, seed=seed + i), cam, quality=90))
        dark = HotspotSpillBeam(peak_cd=0.0)
        off_path = os.path.join(folder, f"{light.name}-off.jpg")
        with open(off_path, "wb") as fh:
            fh.write(encode_jpeg(render_photo(dark, scene, cam, seed=seed + 100 + i), cam, quality=90))
        lux = round(truth["peak_lux_on_wall"], 0)  # the meter shows whole lux
        record = {
            "name": light.name,
            "label": light.label,
            "photo": beam_path,
            "ambient": off_path,
            "distance_m": scene.distance_m,
            "lux_at_peak": lux,
            "truth": {k: float(v) for k, v in truth.items()},
        }
        out.append(record)
    with open(os.path.join(folder, "ground_truth.json"), "w", encoding="utf-8") as fh:
        json.dump({"note": "synthetic photos rendered by beamshot.synth; invented scenario, not real lights",
                   "lights": [{k: (os.path.basename(v) if k in ("photo", "ambient") else v) for k, v in r.items()}
                              for r in out]}, fh, indent=2)
    return out
