"""A seeded set of synthetic beam photos with varied faults, and the z-score of every reported figure.

The check (JCGM 100:2008, GUM, sections 6.2-6.3): a stated standard uncertainty u is honest when
the errors of many independent figures, divided by their u, scatter like a standard normal:
about 95 % of |z| = |value - truth| / u below 2 (k = 2 gives 95.45 % for a normal distribution),
and the mean of z near 0 (no bias hidden inside the uncertainty).

Faults drawn per photo (all invented scenarios, rendered by beamshot.synth):
beam width (narrow, medium, wide); lens shading left in (cos^4 plus 10 % at the corner) with no
flat field; a tone curve other than the assumed sRGB (gamma 2.0 or 2.4); JPEG quality 75 or 92;
room light with a light-off photo; the light-to-wall distance off by a tape error; a lux reading
off by the meter's error (or no meter: the exposure-metadata estimate); an oblique camera whose
wall is mapped by four points picked to whole pixels, or by the printed target in a geometry photo.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from beamshot import analyze
from beamshot.camera.response import Response
from beamshot.photo import decode_photo
from beamshot.synth import (HotspotSpillBeam, Scene, SynthCamera, encode_jpeg, exposure_time_for_peak,
                            render_photo, truth_figures)
from beamshot.wall import rotation_yaw_pitch

#: Figure -> key of synth.truth_figures (horizontal/vertical widths of a round beam equal its full angle).
TRUTH_KEYS = {
    "peak_intensity": "peak_cd", "hotspot_angle": "hotspot_angle_deg", "hotspot_angle_horizontal": "hotspot_angle_deg",
    "hotspot_angle_vertical": "hotspot_angle_deg", "field_angle": "field_angle_deg", "spill_angle": "spill_angle_deg",
    "spill_angle_horizontal": "spill_angle_deg", "spill_angle_vertical": "spill_angle_deg",
    "hotspot_flux": "hotspot_flux_lm", "spill_flux": "spill_flux_lm", "beam_flux": "beam_flux_lm", "ra": "ra",
}
TAPE_SIGMA_M = 0.02      # the analysis's default distance uncertainty
METER_SIGMA = 0.05       # the analysis's default lux-meter accuracy


@dataclass(frozen=True)
class Case:
    name: str
    pattern: HotspotSpillBeam
    scene: Scene
    camera: SynthCamera
    quality: int
    ambient: bool
    stated_distance_m: float
    lux_factor: float | None
    wall_points: bool
    seed: int
    #: oblique camera mapped by the printed target (a geometry photo, target printed at 2x) instead of points
    target: bool = False


def draw_case(seed: int) -> Case:
    """One photo's scene, camera and faults, drawn from ``seed``."""
    rng = np.random.default_rng(1000 + seed)
    kind = ("narrow", "medium", "wide")[seed % 3]
    if kind == "narrow":
        pattern = HotspotSpillBeam(peak_cd=rng.uniform(3e4, 8e4), hotspot_fwhm_deg=rng.uniform(3.0, 5.0),
                                   spill_fraction=rng.uniform(0.005, 0.012), cutoff_deg=rng.uniform(20, 26),
                                   edge_width_deg=rng.uniform(0.4, 0.7))
    elif kind == "medium":
        pattern = HotspotSpillBeam(peak_cd=rng.uniform(8e3, 2e4), hotspot_fwhm_deg=rng.uniform(7.0, 10.0),
                                   spill_fraction=rng.uniform(0.015, 0.03), cutoff_deg=rng.uniform(27, 31),
                                   edge_width_deg=rng.uniform(0.4, 0.8))
    else:
        pattern = HotspotSpillBeam(peak_cd=rng.uniform(1.5e3, 4e3), hotspot_fwhm_deg=rng.uniform(16.0, 22.0),
                                   spill_fraction=rng.uniform(0.04, 0.07), cutoff_deg=rng.uniform(32, 35),
                                   edge_width_deg=rng.uniform(0.5, 0.9))
    distance = float(rng.uniform(3.0, 6.0))
    ambient = bool(rng.random() < 0.3)
    scene = Scene(distance_m=distance, ambient_lux=float(rng.uniform(1.0, 3.0)) if ambient else 0.0)
    shading = bool(rng.random() < 0.4)
    response = Response() if rng.random() < 0.75 else Response("gamma", float(rng.choice([2.0, 2.4])))
    oblique = kind != "wide" and rng.random() < 0.3
    cam = SynthCamera(width_px=1200, height_px=900, focal_35mm_mm=13, supersample=2, response=response,
                      natural_vignetting=shading, lens_vignetting=0.1 if shading else 0.0,
                      position_m=(0.6, 0.1, 0.0) if oblique else (0.15, 0.0, 0.0),
                      yaw_deg=-10.0 if oblique else 0.0)
    t = exposure_time_for_peak(pattern, scene, cam, target=float(rng.uniform(0.6, 0.9)))
    cam = replace(cam, exposure_time_s=t)
    lux = float(1.0 + rng.normal(0.0, METER_SIGMA)) if rng.random() < 0.75 else None
    quality = int(rng.choice([75, 92]))
    stated = float(distance + rng.normal(0.0, TAPE_SIGMA_M))
    target = oblique and seed % 2 == 1  # every other oblique camera is mapped by the target
    if target:  # the markers need more pixels: a 4.3 MP camera
        cam = replace(cam, width_px=2400, height_px=1800, supersample=1)
        cam = replace(cam, exposure_time_s=exposure_time_for_peak(pattern, scene, cam, target=0.8))
    name = (f"{kind}{'-shaded' if shading else ''}{f'-gamma{response.gamma:g}' if response.kind != 'srgb' else ''}"
            f"{'-ambient' if ambient else ''}{'-oblique-target' if target else '-oblique-points' if oblique else ''}")
    return Case(name, pattern, scene, cam, quality, ambient, stated, lux, oblique and not target, seed, target)


def _project(cam: SynthCamera, wall_m: np.ndarray, distance_m: float) -> np.ndarray:
    """Image positions (px) of wall points (m, light frame) for a synthetic pinhole camera."""
    r = rotation_yaw_pitch(cam.yaw_deg, cam.pitch_deg)
    p = (np.c_[wall_m, np.full(len(wall_m), distance_m)] - np.asarray(cam.position_m)) @ r
    f, cx, cy = cam.focal_px, (cam.width_px - 1) / 2, (cam.height_px - 1) / 2
    return np.c_[p[:, 0] / p[:, 2] * f + cx, p[:, 1] / p[:, 2] * f + cy]


def ideal_shape_figures(rep, pattern) -> dict:
    """The beam-shape figures of the same beam measured without a camera: the shape stage run on the
    pattern itself, sampled on the report's map grid (no noise, no fault).  Their values are the truth
    the report's shape figures are compared with (each figure as the tool defines it)."""
    from beamshot.artefacts import shape_figures
    from beamshot.beammap import BeamMap
    from beamshot.measure import measure_shape

    grid = rep.beam
    tt, pp = np.meshgrid(grid.theta, grid.phi, indexing="ij")
    ideal = BeamMap(theta=grid.theta, phi=grid.phi, intensity=np.asarray(pattern(tt, pp), float),
                    saturated=np.zeros(tt.shape, bool), distance_m=grid.distance_m, unit="cd")
    return shape_figures(ideal, measure_shape(ideal)).figures


def shape_rows(case: Case, rep) -> list[dict]:
    """One row per shape figure the report gives as measured or estimate with an uncertainty, against
    :func:`ideal_shape_figures` where that is measured."""
    truth = ideal_shape_figures(rep, case.pattern)
    rows = []
    for key, f in (rep.shape_figures or {}).items():
        t = truth.get(key)
        if (f.value is None or not f.uncertainty or f.status not in ("measured", "estimate") or t is None
                or t.value is None or t.status != "measured"):
            continue
        rows.append({"case": case.name, "seed": case.seed, "figure": key, "value": f.value, "truth": t.value,
                     "sigma": f.uncertainty, "z": float((f.value - t.value) / f.uncertainty), "status": f.status})
    return rows


def run_case(case: Case, shape: bool = False) -> list[dict]:
    """Analyse one case; one row per reported figure with a known truth (with ``shape``, the
    beam-shape figures too, figure names prefixed ``shape:``)."""
    photo = decode_photo(encode_jpeg(render_photo(case.pattern, case.scene, case.camera, seed=case.seed),
                                     case.camera, quality=case.quality), f"{case.name}.jpg")
    truth = truth_figures(case.pattern, case.scene.distance_m)
    kw = dict(distance_m=case.stated_distance_m)
    if case.ambient:
        off = HotspotSpillBeam(peak_cd=0.0)
        kw["ambient"] = decode_photo(encode_jpeg(render_photo(off, case.scene, case.camera, seed=case.seed + 7),
                                                 case.camera, quality=case.quality), "off.jpg")
    if case.lux_factor is not None:
        kw["lux_at_peak"] = truth["peak_lux_on_wall"] * case.lux_factor
    if case.target:
        geo_scene = Scene(distance_m=case.scene.distance_m, ambient_lux=150.0, target_at_mm=(0.0, 0.0),
                          target_print_scale=2.0)
        gcam = replace(case.camera, exposure_time_s=1 / 30, supersample=2)
        kw["geometry"] = decode_photo(encode_jpeg(render_photo(HotspotSpillBeam(peak_cd=0.0), geo_scene, gcam,
                                                               seed=case.seed + 11), gcam, quality=92), "geometry.jpg")
        kw["target_scale"] = 2.0
    if case.wall_points:
        d = case.scene.distance_m
        wall = np.array([[-1.2, 0.9], [1.2, 0.9], [1.2, -0.9], [-1.2, -0.9]])
        img = np.round(_project(case.camera, wall, d))  # picked to whole pixels
        kw["wall_points"] = (img, wall * 1000.0)
    rep = analyze(photo, **kw)
    rows = []
    for key, tkey in TRUTH_KEYS.items():
        f = rep[key]
        if f.value is None or not f.uncertainty or f.status not in ("measured", "estimate") or tkey not in truth:
            continue
        z = (f.value - truth[tkey]) / f.uncertainty
        rows.append({"case": case.name, "seed": case.seed, "figure": key, "value": f.value, "truth": truth[tkey],
                     "sigma": f.uncertainty, "z": float(z), "status": f.status})
    if shape:
        rows.extend(dict(r, figure="shape:" + r["figure"]) for r in shape_rows(case, rep))
    return rows


def run(n_cases: int, first_seed: int = 0, shape: bool = False) -> list[dict]:
    rows = []
    for seed in range(first_seed, first_seed + n_cases):
        rows.extend(run_case(draw_case(seed), shape=shape))
    return rows


def summary(rows: list[dict]) -> dict:
    """Fraction of figures within 2 sigma, and per figure the count, mean z and RMS z."""
    z = np.array([r["z"] for r in rows])
    per = {}
    for key in list(TRUTH_KEYS) + sorted({r["figure"] for r in rows} - set(TRUTH_KEYS)):
        zk = np.array([r["z"] for r in rows if r["figure"] == key])
        if len(zk):
            per[key] = {"n": int(len(zk)), "mean_z": float(zk.mean()), "rms_z": float(np.sqrt(np.mean(zk**2))),
                        "within_2": float(np.mean(np.abs(zk) <= 2.0))}
    return {"n": int(len(z)), "within_2_sigma": float(np.mean(np.abs(z) <= 2.0)), "per_figure": per}


def format_summary(s: dict) -> str:
    lines = [f"{s['n']} figures, {s['within_2_sigma']:.1%} within 2 sigma of the truth (JCGM 100: about 95 %)",
             f"{'figure':26s} {'n':>4s} {'mean z':>7s} {'rms z':>6s} {'|z|<=2':>7s}"]
    for key, v in s["per_figure"].items():
        lines.append(f"{key:26s} {v['n']:4d} {v['mean_z']:+7.2f} {v['rms_z']:6.2f} {v['within_2']:7.0%}")
    return "\n".join(lines)
