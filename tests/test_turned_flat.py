"""Flat field from turned beam photos (beamshot.camera.turned_flat, `camera flat-from-turns`).

Scenario (invented): "prototype 2, 24 deg optic" - a wide reflector beam (24 deg hotspot, 5 %
spill, bezel cut-off at 40 deg) on a wall 3 m away; the camera, a 24 mm-equivalent lens whose
JPEGs keep the natural cos^4 fall-off plus 10 % more at the corners, stands on a tripod 2 m
behind the light.  No flat photo: two beam photos with the camera panned 20 deg between them.
"""

import json
from dataclasses import replace

import cv2
import numpy as np
import pytest
from click.testing import CliRunner

from beamshot import analyze
from beamshot.camera.flatfield import FlatField
from beamshot.camera.linearize import linearize
from beamshot.camera.profile import CameraProfile, load_profile
from beamshot.camera.response import Response
from beamshot.camera.turned_flat import TurnedPhoto, fit_turned_flat, rotation_homography, shading
from beamshot.cli import cli
from beamshot.errors import BeamshotError
from beamshot.photo import decode_photo
from beamshot.synth import (HotspotSpillBeam, Scene, SynthCamera, encode_jpeg, exposure_time_for_peak, render_photo,
                            truth_figures)
from beamshot.wall import rotation_yaw_pitch

BEAM = HotspotSpillBeam(peak_cd=3000, hotspot_fwhm_deg=24, spill_fraction=0.05, cutoff_deg=40)
SCENE = Scene(distance_m=3.0)
CAMERA_BEHIND_M = 2.0
LENS_CORNER = 0.1  # extra fall-off at the corner, beyond cos^4


def _camera(width=1200, height=900, **kw):
    cam = SynthCamera(width_px=width, height_px=height, focal_35mm_mm=24, position_m=(0.15, 0.0, -CAMERA_BEHIND_M),
                      natural_vignetting=True, lens_vignetting=LENS_CORNER, **kw)
    truth = truth_figures(BEAM, SCENE.distance_m)
    t = exposure_time_for_peak(BEAM, SCENE, cam, target=0.8, peak_lux=truth["peak_lux_on_wall"])
    return replace(cam, exposure_time_s=t), truth


def _true_falloff(cam, r):
    """V(r) of the synthetic camera: natural cos^4 fall-off (textbook cos^4 law of illumination,
    with tan(angle) = pixel radius / focal length for a pinhole) times its lens term 1 - a r^2."""
    half_diag = np.hypot((cam.width_px - 1) / 2, (cam.height_px - 1) / 2)
    tan2 = (np.asarray(r) * half_diag / cam.focal_px) ** 2
    return (1.0 - cam.lens_vignetting * np.asarray(r) ** 2) / (1.0 + tan2) ** 2


def _jpeg_bytes(cam, yaw=0.0, pitch=0.0, seed=0):
    c = replace(cam, yaw_deg=yaw, pitch_deg=pitch)
    return encode_jpeg(render_photo(BEAM, SCENE, c, seed=seed), c)


def _turned(cam, yaw, pitch, seed, name):
    photo = decode_photo(_jpeg_bytes(cam, yaw, pitch, seed), name)
    return TurnedPhoto.from_linear(name, linearize(photo, Response()))


def _rel(fig, truth):
    assert fig.value is not None, fig.reason
    return fig.value / truth - 1.0


# --------------------------------------------------------------------------- exact relations
def test_rotation_homography_of_a_pan():
    # pinhole projection, H = K R K^-1 for a pure rotation (Hartley & Zisserman 2004, sec. 8.4.5,
    # from memory): after a pan by a to the right, the wall point that was on the optical axis is
    # seen at x = cx - f tan(a), on the centre row
    f, shape = 1000.0, (3000, 4000)
    a = np.radians(20.0)
    h = rotation_homography((0.0, -a, 0.0), f, shape)
    p = h @ np.array([1999.5, 1499.5, 1.0])
    np.testing.assert_allclose(p[:2] / p[2], [1999.5 - f * np.tan(a), 1499.5], atol=1e-9)
    # a rotation maps the plane at infinity to itself: H of the inverse rotation is H^-1
    np.testing.assert_allclose(rotation_homography((0.0, a, 0.0), f, shape) @ h, np.eye(3), atol=1e-9)


def test_shading_model_holds_cos4_exactly():
    # natural vignetting: cos^4 of the field angle (textbook cos^4 law); 1/cos^4 = (1 + tan^2)^2
    # = 1 + 2 k r^2 + k^2 r^4 with tan = r * half_diag / f, k = (half_diag / f)^2
    k = 1.7
    r = np.linspace(0.0, 1.0, 11)
    np.testing.assert_allclose(shading((2 * k, k * k, 0.0), r**2), np.cos(np.arctan(r * np.sqrt(k))) ** 4,
                               rtol=1e-12)


# --------------------------------------------------------------------------- the acceptance case
@pytest.fixture(scope="module")
def prototype_2(tmp_path_factory):
    """Two calibration photos panned 20 deg apart, a later single photo, and the profile from the CLI."""
    folder = tmp_path_factory.mktemp("turned")
    cam, truth = _camera()
    paths = []
    for k, (yaw, seed) in enumerate(((0.0, 11), (20.0, 12), (0.0, 13))):
        p = folder / f"proto2-{k}.jpg"
        p.write_bytes(_jpeg_bytes(cam, yaw, 0.0, seed))
        paths.append(str(p))
    prof = folder / "proto2-cam.json"
    res = CliRunner().invoke(cli, ["camera", "flat-from-turns", paths[0], paths[1], "--name", "proto2-cam",
                                   "--out", str(prof)])
    assert res.exit_code == 0, res.output
    return cam, truth, paths, str(prof), res.output


def test_turned_flat_recovers_the_falloff(prototype_2):
    cam, _, _, prof, output = prototype_2
    profile = load_profile(prof)
    ff = profile.flat
    assert ff.method == "turned camera" and ff.shape == (cam.height_px, cam.width_px)
    r = np.linspace(0.0, 0.8, 17)
    fitted = shading(ff.coefficients, r**2)
    # within 2 % of the true fall-off out to 80 % of the half-diagonal (issue's acceptance criterion)
    assert np.max(np.abs(fitted / _true_falloff(cam, r) - 1.0)) <= 0.02
    assert ff.max_radius >= 0.8
    # residual and the recovered turn are reported and kept with the profile's provenance
    assert "fit residual" in output and "pan +20.0" in output
    step = profile.provenance[-1]
    assert step["step"] == "flat-from-turns" and len(step["files"]) == 2
    assert 0 < ff.residual_rms < 0.01 and step["residual_rms_samples"] < 0.05
    turn = step["turns"][0]
    assert turn["pan_deg"] == pytest.approx(20.0, abs=0.1)
    assert turn["angle_deg"] == pytest.approx(20.0, abs=0.1)
    assert turn["exposure_ratio"] == pytest.approx(1.0, abs=0.01)  # same exposure in both photos


def test_single_photo_with_the_turned_flat_profile(prototype_2):
    cam, truth, paths, prof, _ = prototype_2
    kw = dict(distance_m=SCENE.distance_m, camera_distance_m=SCENE.distance_m + CAMERA_BEHIND_M,
              lux_at_peak=truth["peak_lux_on_wall"])
    plain = analyze(paths[2], **kw)
    fixed = analyze(paths[2], camera=prof, **kw)
    # acceptance tolerances of the beam-analysis criteria: hotspot +-2 %, field +-3 %, Ra +-5 %
    assert abs(_rel(fixed["hotspot_angle"], truth["hotspot_angle_deg"])) <= 0.02
    assert abs(_rel(fixed["field_angle"], truth["field_angle_deg"])) <= 0.03
    assert abs(_rel(fixed["ra"], truth["ra"])) <= 0.05
    assert fixed.calibration["flat_field"]["from_profile"] == "proto2-cam"
    # the profile's flat is for 1200x900 photos: a photo of another size is refused, not mis-corrected
    small, _ = _camera(width=600, height=450)
    with pytest.raises(BeamshotError, match="flat field of profile"):
        analyze(decode_photo(_jpeg_bytes(small, seed=14), "small.jpg"), camera=prof, **kw)
    # the shading left in biases the uncorrected analysis the way the issue describes (narrow, Ra low)
    assert _rel(plain["ra"], truth["ra"]) < _rel(fixed["ra"], truth["ra"]) - 0.03
    assert _rel(plain["field_angle"], truth["field_angle_deg"]) < -0.03


def test_three_photos_with_pan_and_tilt():
    # three poses, the tripod head panned and tilted; every pair at least 15 deg apart
    cam, _ = _camera(width=900, height=675)
    poses = ((0.0, 0.0), (-15.0, 4.0), (16.0, -3.0))
    photos = [_turned(cam, y, p, 20 + k, f"pose{k}.jpg") for k, (y, p) in enumerate(poses)]
    fit = fit_turned_flat(photos, cam.focal_px)
    r = np.linspace(0.0, 0.8, 17)
    assert np.max(np.abs(fit.falloff(r) / _true_falloff(cam, r) - 1.0)) <= 0.02
    base = rotation_yaw_pitch(*poses[0])
    for turn, pose in zip(fit.turns, poses[1:]):
        # relative rotation of a camera turned about its centre: R = R_k^T R_0 (camera -> room rotations)
        truth = rotation_yaw_pitch(*pose).T @ base
        fitted, _ = cv2.Rodrigues(np.asarray(turn.rotation_vector).reshape(3, 1))
        assert turn.angle_deg == pytest.approx(np.degrees(np.linalg.norm(cv2.Rodrigues(truth)[0])), abs=0.15)
        # where the first photo's centre is seen after the turn (pan and tilt), within 0.1 deg; the
        # roll about that line is only weakly fixed by a round beam and is not checked
        seen_fit, seen_true = fitted @ [0, 0, 1.0], truth @ [0, 0, 1.0]
        assert np.degrees(np.arccos(np.clip(seen_fit @ seen_true, -1, 1))) <= 0.1


# --------------------------------------------------------------------------- refusals
def _fails(args):
    res = CliRunner().invoke(cli, args)
    assert res.exit_code == 2, res.output
    assert "Traceback" not in res.output and res.output.count("\n") == 1
    return res.output


def test_refusals_are_one_line(tmp_path):
    cam, _ = _camera(width=600, height=450)

    def write(name, data):
        p = tmp_path / name
        p.write_bytes(data)
        return str(p)

    a = write("a.jpg", _jpeg_bytes(cam, 0.0, 0.0, 1))
    out = ["--name", "x", "--out", str(tmp_path / "x.json")]
    # a single photo
    assert "at least two photos" in _fails(["camera", "flat-from-turns", a, *out])
    # a turn too small to separate the shading from the beam
    nudged = write("b.jpg", _jpeg_bytes(cam, 2.0, 0.0, 2))
    assert "turned only" in _fails(["camera", "flat-from-turns", a, nudged, *out])
    # a turn so large that the first photo's centre leaves the view: the shading would not be tied
    # to the centre (half the view of this 24 mm-equivalent lens is 36 deg across)
    far = write("far.jpg", _jpeg_bytes(cam, 40.0, 0.0, 6))
    assert "left the view" in _fails(["camera", "flat-from-turns", a, far, *out])
    # a clipped photo
    bright = replace(cam, exposure_time_s=cam.exposure_time_s * 6)
    clipped = write("c.jpg", encode_jpeg(render_photo(BEAM, SCENE, replace(bright, yaw_deg=20.0), seed=3), bright))
    assert "clipped" in _fails(["camera", "flat-from-turns", a, clipped, *out])
    # photos of different sizes
    small, _ = _camera(width=400, height=300)
    other = write("d.jpg", _jpeg_bytes(small, 20.0, 0.0, 4))
    assert "differs" in _fails(["camera", "flat-from-turns", a, other, *out])
    # no focal length anywhere: EXIF without FocalLengthIn35mmFilm and no option
    import io

    from PIL import Image

    buf = io.BytesIO()
    Image.open(io.BytesIO(_jpeg_bytes(cam, 20.0, 0.0, 5))).save(buf, "JPEG", quality=95)
    bare_a, bare_b = write("e.jpg", buf.getvalue()), write("f.jpg", buf.getvalue())
    assert "--focal-35mm" in _fails(["camera", "flat-from-turns", bare_a, bare_b, *out])
    assert not (tmp_path / "x.json").exists()


def test_flat_metadata_survives_the_profile_file():
    ff = FlatField(coefficients=(1.2, 0.3, 0.0), residual_rms=0.004, shape=(900, 1200), method="turned camera",
                   max_radius=0.87)
    back = CameraProfile.from_dict(json.loads(json.dumps(CameraProfile(name="p", flat=ff).to_dict())))
    assert back.flat == ff
    # a profile written before these fields existed reads as a flat photo covering the whole frame
    old = CameraProfile(name="p", flat=ff).to_dict()
    del old["flat_field"]["method"], old["flat_field"]["data_to_radius"]
    legacy = CameraProfile.from_dict(old).flat
    assert legacy.method == "flat photo" and legacy.max_radius == 1.0


def test_too_little_beam_is_refused():
    cam, _ = _camera(width=600, height=450)
    dark = replace(cam, exposure_time_s=cam.exposure_time_s / 400)
    photos = []
    for k, yaw in enumerate((0.0, 20.0)):
        data = encode_jpeg(render_photo(BEAM, SCENE, replace(dark, yaw_deg=yaw), seed=k), dark)
        photos.append(TurnedPhoto.from_linear(f"dim{k}.jpg", linearize(decode_photo(data, f"dim{k}.jpg"), Response())))
    with pytest.raises(BeamshotError, match="well exposed"):
        fit_turned_flat(photos, cam.focal_px)


def test_wrong_tone_curve_is_flagged():
    # sRGB photos (IEC 61966-2-1: a linear toe, then a 2.4 power) linearised as a pure gamma 2.0:
    # the log differences no longer follow one radial shading - the block residual grows well
    # beyond the right curve's and a warning names the tone curve
    cam, _ = _camera(width=600, height=450)
    fits = {}
    for label, resp in (("right", Response()), ("wrong", Response("gamma", 2.0))):
        photos = []
        for k, yaw in enumerate((0.0, 20.0)):
            photo = decode_photo(_jpeg_bytes(cam, yaw, 0.0, 40 + k), f"g{k}.jpg")
            photos.append(TurnedPhoto.from_linear(photo.name, linearize(photo, resp)))
        fits[label] = fit_turned_flat(photos, cam.focal_px)
    assert fits["wrong"].flat.residual_rms > 2 * fits["right"].flat.residual_rms
    assert any("tone curve" in w for w in fits["wrong"].warnings)
    assert not any("tone curve" in w for w in fits["right"].warnings)
