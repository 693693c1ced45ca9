"""Fuzz suite: corrupt and adversarial inputs through the command line and the library.

Hypothesis (property-based testing) damages valid small inputs (truncated, bit-flipped and
zero-size JPEG/PNG/TIFF/DNG files; absurd EXIF; tiny and one-colour images; damaged camera
profiles and report.json files; option values at and beyond every limit) and checks the
promises of the README and issue 10 on every run:

- the exit code is 0, or 2 for an input problem, or 1 only for a real far-field difference;
- exit 2 comes with exactly one line on stderr and no traceback, and writes no report;
- nothing is written outside the ``--out`` folder (the working folder is listed before and after);
- every report.json written (and every ``--json`` print) is valid JSON without NaN or Infinity,
  and follows ``beamshot/report/schema.json`` (JSON Schema 2020-12) when that file exists;
- no Python warning reaches the user (a user's terminal shows every warning but deprecations).

The seed is fixed (``derandomize=True``): CI runs the same ~1700 cases every time, in about
90 s on two cores.  ``BEAMSHOT_FUZZ_EXAMPLES=N`` runs about N cases in total instead (the
default total is ``DEFAULT_TOTAL``), and ``BEAMSHOT_FUZZ_RECORD=path.json`` writes the number of
cases each test tried (also printed with ``pytest -s``).  Photos are 160 x 120 px so that a
full analysis takes about a second.

Expected outcomes are the documented input limits: README "Exit codes", the option table, and
the ranges named in beamshot.photo (MIN_SIDE_PX, EXIF_LIMITS) and beamshot.camera.profile
(PROFILE_LIMITS); the EXIF tag numbers are those of Exif 2.3 (CIPA DC-008).
"""

from __future__ import annotations

import collections
import contextlib
import io
import json
import math
import os
import shutil
import subprocess
import sys
import tempfile
import traceback
import warnings
from dataclasses import replace
from fractions import Fraction

import numpy as np
import pytest
from click.testing import CliRunner
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from PIL import Image, TiffImagePlugin
from test_photo import _linear_dng

from beamshot.camera.distortion import Distortion
from beamshot.camera.flatfield import FlatField
from beamshot.camera.profile import PROFILE_LIMITS, CameraProfile, load_profile
from beamshot.camera.response import Response
from beamshot.cli import cli
from beamshot.errors import BeamshotError
from beamshot.farfield import compare_distances
from beamshot.photo import MIN_SIDE_PX, decode_photo
from beamshot.synth import (
    HotspotSpillBeam,
    Scene,
    SynthCamera,
    encode_jpeg,
    exif_block,
    exposure_time_for_peak,
    render_photo,
    render_rgb_linear,
    truth_figures,
)

# --------------------------------------------------------------------------- budget and counting
#: Cases tried by the default run, summed over the tests below (their ``_n`` shares).
DEFAULT_TOTAL = 1640
_ENV_TOTAL = os.environ.get("BEAMSHOT_FUZZ_EXAMPLES", "").strip()
_SCALE = (int(_ENV_TOTAL) / DEFAULT_TOTAL) if _ENV_TOTAL else 1.0
CASES: collections.Counter = collections.Counter()
SCHEMA_PATH = os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))), "beamshot", "report",
                           "schema.json")


def _fuzz(share: int):
    """Hypothesis settings: fixed seed, no deadline (an analysis takes ~0.6 s), ``share`` cases by default."""
    return settings(max_examples=max(1, round(share * _SCALE)), derandomize=True, database=None, deadline=None,
                    suppress_health_check=list(HealthCheck), print_blob=False)


@pytest.fixture(scope="module", autouse=True)
def _case_record():
    yield
    total = sum(CASES.values())
    lines = [f"fuzz cases tried: {total}"] + [f"  {k}: {v}" for k, v in sorted(CASES.items())]
    print("\n" + "\n".join(lines))
    record = os.environ.get("BEAMSHOT_FUZZ_RECORD")
    if record:
        with open(record, "w", encoding="utf-8") as fh:
            json.dump({"total": total, "per_test": dict(CASES)}, fh, indent=2)


# --------------------------------------------------------------------------- inputs
BEAM = HotspotSpillBeam(peak_cd=12000.0, hotspot_fwhm_deg=8.0, spill_fraction=0.02, cutoff_deg=30.0, edge_width_deg=0.6)
W, H = 160, 120


def _camera(**kw) -> SynthCamera:
    scene = Scene(distance_m=5.0)
    cam = SynthCamera(width_px=W, height_px=H, focal_35mm_mm=16, supersample=2, **kw)
    return replace(cam, exposure_time_s=exposure_time_for_peak(BEAM, scene, cam, target=0.8))


def _encode(pixels: np.ndarray, fmt: str, exif: Image.Exif | None = None) -> bytes:
    buf = io.BytesIO()
    kw = {"exif": exif} if exif is not None else {}
    Image.fromarray(pixels).save(buf, fmt, **kw)
    return buf.getvalue()


class _Inputs(dict):
    def __repr__(self):  # Hypothesis prints fixtures with a failing case: keep it short
        return f"<valid {W}x{H} beam inputs in {self['folder']}>"


@pytest.fixture(scope="module")
def inputs(tmp_path_factory):
    """Valid small inputs: the same beam as JPEG, 8-bit PNG, 16-bit TIFF and linear DNG, plus the
    lux at the peak (for reports with a measured peak)."""
    folder = tmp_path_factory.mktemp("fuzz-inputs")
    cam = _camera()
    scene = Scene(distance_m=5.0)
    px = render_photo(BEAM, scene, cam, seed=3)
    data = {"jpg": encode_jpeg(px, cam, quality=92), "png": _encode(px, "PNG", exif_block(cam))}
    codes16 = (px.astype(np.uint32) * 257).astype(np.uint16)
    buf = io.BytesIO()
    import tifffile

    tifffile.imwrite(buf, codes16, photometric="rgb")
    data["tif"] = buf.getvalue()
    linear = render_rgb_linear(BEAM, scene, cam, seed=3)
    dng = folder / "beam.dng"
    _linear_dng(dng, (256 + np.round(linear * (16383 - 256))).astype(np.uint16),
                exposure=(cam.exposure_time_s, cam.f_number, cam.iso))
    data["dng"] = dng.read_bytes()
    for ext, b in data.items():
        (folder / f"beam.{ext}").write_bytes(b)
    lux = truth_figures(BEAM, 5.0)["peak_lux_on_wall"]
    return _Inputs(folder=folder, bytes=data, camera=cam, pixels=px, lux=lux)


# --------------------------------------------------------------------------- the properties
def _no_constant(name):
    raise ValueError(f"{name} in JSON")


def _check_json(text: str, where: str, *, schema: bool = True) -> dict:
    """Valid JSON without NaN/Infinity (RFC 8259 has no such numbers), following the schema if it exists."""
    data = json.loads(text, parse_constant=_no_constant)
    if schema and os.path.exists(SCHEMA_PATH):
        import jsonschema

        with open(SCHEMA_PATH, encoding="utf-8") as fh:
            schema = json.load(fh)
        cls = jsonschema.validators.validator_for(schema)
        errors = sorted(cls(schema).iter_errors(data), key=lambda e: list(e.path))
        assert not errors, f"{where}: schema violations: " + "; ".join(
            f"{'/'.join(map(str, e.path))}: {e.message[:120]}" for e in errors[:5])
    return data


def _tree(root: str, skip: str | None) -> dict:
    """Every file and folder under ``root`` (except ``skip``) with its size and change time."""
    out = {}
    for base, dirs, files in os.walk(root):
        if skip is not None and os.path.abspath(base).startswith(os.path.abspath(skip)):
            continue
        for name in dirs + files:
            p = os.path.join(base, name)
            if skip is not None and os.path.abspath(p) == os.path.abspath(skip):
                continue
            st_ = os.lstat(p)
            out[os.path.relpath(p, root)] = (st_.st_size, st_.st_mtime_ns if name in files else 0)
    return out


@contextlib.contextmanager
def _cwd(path):
    old = os.getcwd()
    os.chdir(path)
    try:
        yield
    finally:
        os.chdir(old)


class Run:
    """One command-line run in a fresh working folder, with every property checked."""

    def __init__(self, args, workdir, *, out=None, allowed=(0, 2), home=None):
        self.args = [str(a) for a in args]
        before = _tree(workdir, out)
        out_before = _tree(out, None) if out and os.path.isdir(out) else None
        env = {"BEAMSHOT_HOME": home or os.path.join(workdir, ".home-unused")}
        with _cwd(workdir), warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("default")
            self.result = CliRunner(env=env).invoke(cli, self.args, catch_exceptions=True)
        r = self.result
        self.code = r.exit_code
        self.stdout, self.stderr = r.stdout, r.stderr
        shown = f"beamshot {' '.join(self.args)}\nexit {self.code}\nstdout: {self.stdout[-800:]}\nstderr: {self.stderr}"
        if r.exception is not None and not isinstance(r.exception, SystemExit):
            tb = "".join(traceback.format_exception(*r.exc_info))
            raise AssertionError(f"uncaught exception:\n{shown}\n{tb}")
        assert self.code in allowed, f"exit code {self.code} not in {allowed}:\n{shown}"
        assert "Traceback" not in self.stderr + self.stdout, shown
        user_warnings = [w for w in caught if not issubclass(w.category, (DeprecationWarning, PendingDeprecationWarning))]
        assert not user_warnings, f"warnings reach the user: {[str(w.message)[:200] for w in user_warnings]}\n{shown}"
        if self.code == 2:
            lines = self.stderr.strip().splitlines()
            assert len(lines) == 1, f"exit 2 must print exactly one line on stderr:\n{shown}"
        after = _tree(workdir, out)
        assert after == before, f"files written or changed outside --out: {set(after) ^ set(before)}\n{shown}"
        if out is not None:
            now = _tree(out, None) if os.path.isdir(out) else None
            if self.code != 0:
                assert now == out_before, f"exit {self.code} changed the --out folder:\n{shown}"
            elif now is not None and "report.json" in now:
                with open(os.path.join(out, "report.json"), encoding="utf-8") as fh:
                    self.report = _check_json(fh.read(), "report.json")
        if self.code == 0 and {"--json", "--json-full"} & set(self.args):
            # --json prints the report without its profile arrays: valid JSON, the schema only for --json-full
            _check_json(self.stdout, "--json output", schema="--json-full" in self.args)

    @property
    def one_line(self) -> str:
        return self.stderr.strip()


_WORKDIRS: list[str] = []


def _workdir() -> str:
    """A fresh folder for one example; all of them are removed when the module's tests end."""
    path = tempfile.mkdtemp(prefix="beamshot-fuzz-")
    _WORKDIRS.append(path)
    return path


@pytest.fixture(scope="module", autouse=True)
def _remove_workdirs():
    yield
    while _WORKDIRS:
        shutil.rmtree(_WORKDIRS.pop(), ignore_errors=True)


def _write(workdir, name, data: bytes) -> str:
    path = os.path.join(workdir, name)
    with open(path, "wb") as fh:
        fh.write(data)
    return path


# --------------------------------------------------------------------------- damaged photo files
@st.composite
def damaged(draw, data: bytes):
    """A damaged copy of ``data``: truncated, emptied, bit-flipped or overwritten (offsets favour the header)."""
    n = len(data)
    kind = draw(st.sampled_from(["truncate", "flip", "flip-header", "overwrite", "zero", "append"]))
    if kind == "zero":
        return b"", "zero-size"
    if kind == "truncate":
        cut = draw(st.one_of(st.integers(0, min(n - 1, 600)), st.integers(0, n - 1)))
        return data[:cut], f"truncated at {cut}"
    if kind == "append":
        extra = draw(st.binary(min_size=1, max_size=64))
        return data + extra, f"{len(extra)} bytes appended"
    b = bytearray(data)
    hi = min(n - 1, 1024) if kind == "flip-header" else n - 1
    if kind in ("flip", "flip-header"):
        flips = draw(st.lists(st.tuples(st.integers(0, hi), st.integers(0, 7)), min_size=1, max_size=8))
        for off, bit in flips:
            b[off] ^= 1 << bit
        return bytes(b), f"bits flipped {flips}"
    off = draw(st.integers(0, hi))
    chunk = draw(st.binary(min_size=1, max_size=16))
    b[off:off + len(chunk)] = chunk
    return bytes(b[:n]), f"{len(chunk)} bytes overwritten at {off}"


_EXT = {"jpg": "beam.jpg", "png": "beam.png", "tif": "beam.tif", "dng": "beam.dng"}


def _decode_ok(photo) -> None:
    h, w = photo.shape
    assert h >= MIN_SIDE_PX and w >= MIN_SIDE_PX
    assert photo.bgr.ndim == 3 and photo.bgr.shape[2] == 3 and photo.bgr.dtype in (np.uint8, np.uint16)


@_fuzz(600)
@given(data=st.data())
def test_damaged_photo_decodes_or_one_line(inputs, capfd, data):
    # library level (fast): a damaged file decodes to a usable photo or is refused in one line, and no
    # decoder writes to the terminal by itself (OpenCV/libpng/libtiff/LibRaw messages at the C level)
    CASES["damaged photo, decoder"] += 1
    fmt = data.draw(st.sampled_from(sorted(_EXT)), label="format")
    blob, what = data.draw(damaged(inputs["bytes"][fmt]), label="damage")
    capfd.readouterr()
    try:
        photo = decode_photo(blob, _EXT[fmt])
    except BeamshotError as exc:
        msg = str(exc)
        assert "\n" not in msg and msg.startswith(_EXT[fmt]), (what, msg)
    else:
        _decode_ok(photo)
    err = capfd.readouterr().err
    assert err == "", f"{fmt} {what}: the decoder wrote to stderr: {err[:300]!r}"


@_fuzz(80)
@given(data=st.data())
def test_damaged_photo_cli(inputs, data):
    CASES["damaged photo, analyze"] += 1
    fmt = data.draw(st.sampled_from(sorted(_EXT)), label="format")
    blob, _ = data.draw(damaged(inputs["bytes"][fmt]), label="damage")
    wd = _workdir()
    photo = _write(wd, _EXT[fmt], blob)
    out = os.path.join(wd, "out")
    Run(["analyze", photo, "--distance", "5", "--out", out], wd, out=out)


@_fuzz(30)
@given(data=st.data())
def test_camera_scale_with_damaged_photo_and_odd_lux(inputs, data):
    # the calibration command that keeps a camera constant: a damaged photo or an odd lux reading
    # gives one line, and only the profile file named by --out is written
    CASES["damaged photo, camera scale"] += 1
    fmt = data.draw(st.sampled_from(["jpg", "png", "tif"]), label="format")
    blob, _ = data.draw(st.one_of(damaged(inputs["bytes"][fmt]), st.just((inputs["bytes"][fmt], "intact"))),
                        label="damage")
    lux = data.draw(st.sampled_from(["-5", "0", "nan", "inf", "1e12", "150"]), label="lux")
    wd = _workdir()
    out = os.path.join(wd, "cam.json")
    run = Run(["camera", "scale", _write(wd, _EXT[fmt], blob), "--lux", lux, "--name", "fuzzcam", "--out", out], wd,
              out=out)
    if lux in ("-5", "0", "nan", "inf"):
        assert run.code == 2
    if run.code == 0:
        _usable(load_profile(out))


@pytest.mark.parametrize("fmt", sorted(_EXT))
def test_zero_size_and_cut_files_are_one_line(inputs, fmt):
    # the named cases of the issue, each as its own check: empty, cut to its header, cut in half
    wd = _workdir()
    b = inputs["bytes"][fmt]
    for blob, word in ((b"", "empty"), (b[:64], None), (b[: len(b) // 2], None)):
        photo = _write(wd, _EXT[fmt], blob)
        run = Run(["analyze", photo, "--distance", "5", "--out", os.path.join(wd, "out")], wd,
                  out=os.path.join(wd, "out"))
        assert run.code == 2 and run.one_line.count("beam.") == 1
        if word:
            assert word in run.one_line


def test_not_an_image_lists_the_formats_we_read(inputs):
    wd = _workdir()
    run = Run(["analyze", _write(wd, "notes.jpg", b"this is text, not a photo"), "--distance", "5"], wd)
    assert run.code == 2
    for fmt in ("JPEG", "PNG", "TIFF", "DNG", "CR2", "CR3", "NEF", "ARW", "RAF", "ORF", "RW2"):
        assert fmt in run.one_line


def test_c_level_stderr_is_one_line_in_a_real_process(inputs):
    # CliRunner sees Python's stderr only; a real process also shows what C libraries print
    wd = _workdir()
    png = inputs["bytes"]["png"]
    cases = [_write(wd, "cut.png", png[: len(png) * 2 // 3]), _write(wd, "tiny.png", _encode(np.zeros((1, 1, 3), np.uint8), "PNG"))]
    tif = bytearray(inputs["bytes"]["tif"])
    tif[len(tif) // 2:] = b"\xff" * (len(tif) - len(tif) // 2)
    cases.append(_write(wd, "flipped.tif", bytes(tif[: len(tif) * 3 // 4])))
    for path in cases:
        proc = subprocess.run([sys.executable, "-m", "beamshot", "analyze", path, "--distance", "5"], cwd=wd,
                              capture_output=True, text=True, timeout=120, check=False)
        assert proc.returncode in (0, 2), proc.stderr
        if proc.returncode == 2:
            assert len(proc.stderr.strip().splitlines()) == 1 and "Traceback" not in proc.stderr, proc.stderr


def _claiming(width: int, height: int) -> bytes:
    """A small valid JPEG whose frame header (SOF0, ITU-T T.81 B.2.2) claims ``width`` x ``height``."""
    data = bytearray(_encode(np.zeros((48, 64, 3), np.uint8), "JPEG"))
    i = data.find(b"\xff\xc0")
    data[i + 5:i + 7] = height.to_bytes(2, "big")
    data[i + 7:i + 9] = width.to_bytes(2, "big")
    return bytes(data)


def test_200_mp_header_passes_without_pillow_warning():
    # 16320 x 12240 is the full resolution of current 200 MP phone sensors; Pillow's own bomb guard
    # (warning above 89 MP, error above 179 MP) must neither refuse it nor reach the user
    from beamshot.photo import _probe

    pillow_limit = Image.MAX_IMAGE_PIXELS
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        width, height, fmt, _, _ = _probe(_claiming(16320, 12240), "big.jpg", 250.0)
    assert (width, height, fmt) == (16320, 12240, "JPEG")
    assert not caught, [str(w.message) for w in caught]
    assert Image.MAX_IMAGE_PIXELS == pillow_limit  # Pillow's setting is changed only during our header read


@pytest.mark.parametrize("width, height, words", [(20000, 15000, "above the 250 MP limit"),
                                                  (65000, 65000, "absurd size")])
def test_photo_above_our_limit_is_one_line_before_decoding(width, height, words):
    with pytest.raises(BeamshotError, match=words) as exc:
        decode_photo(_claiming(width, height), "huge.jpg")
    assert "\n" not in str(exc.value)


@pytest.mark.skipif(not os.environ.get("BEAMSHOT_BIG_PHOTO"), reason="set BEAMSHOT_BIG_PHOTO=1: 1.2 GB, ~20 s")
def test_a_real_200_mp_jpeg_decodes():
    rng = np.random.default_rng(0)
    px = np.repeat(rng.integers(0, 256, (12240 // 16, 16320 // 16, 3), dtype=np.uint8), 16, axis=0)
    px = np.repeat(px, 16, axis=1)
    data = _encode(px, "JPEG")
    del px
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        photo = decode_photo(data, "big.jpg")
    assert photo.shape == (12240, 16320) and not caught


def test_jpeg_end_marker_is_the_main_images():
    # an end marker inside an EXIF thumbnail (APP1) does not make a cut JPEG whole; data a phone
    # appends after the end marker does not make a whole JPEG truncated
    body = _encode(np.random.default_rng(1).integers(0, 256, (64, 64, 3), dtype=np.uint8), "JPEG")
    thumb = b"Exif\x00\x00" + b"\xff\xd8 thumbnail \xff\xd9"
    with_thumb = body[:2] + b"\xff\xe1" + (len(thumb) + 2).to_bytes(2, "big") + thumb + body[2:]
    assert decode_photo(with_thumb, "a.jpg").shape == (64, 64)
    with pytest.raises(BeamshotError, match="truncated"):
        decode_photo(with_thumb[: len(with_thumb) - 200], "a.jpg")
    assert decode_photo(body + b"\x00" * 10000, "b.jpg").shape == (64, 64)


# --------------------------------------------------------------------------- absurd EXIF
def _rational(x: float) -> TiffImagePlugin.IFDRational:
    if not math.isfinite(x):
        return TiffImagePlugin.IFDRational(1, 0)
    fr = Fraction(x).limit_denominator(100000)
    return TiffImagePlugin.IFDRational(fr.numerator, fr.denominator)


EXPOSURES = [0.0, -0.01, 1e-12, 1e6, float("inf"), 1 / 500]  # s; valid 1 us to 1 h (beamshot.photo.EXIF_LIMITS)
ISOS = [0, 1_000_000_000, 65535, 100]
F_NUMBERS = [0.0, -2.0, 1e5, 2.0]
ORIENTATIONS = [0, 9, 255, 65535, 1, 6]  # Exif 2.3: 1-8 only


@_fuzz(20)
@given(exposure=st.sampled_from(EXPOSURES), iso=st.sampled_from(ISOS), fnum=st.sampled_from(F_NUMBERS),
       orientation=st.sampled_from(ORIENTATIONS), fmt=st.sampled_from(["JPEG", "PNG"]))
def test_absurd_exif(inputs, exposure, iso, fnum, orientation, fmt):
    CASES["absurd EXIF, analyze"] += 1
    exif = exif_block(inputs["camera"])
    exif[0x0112] = orientation
    sub = exif.get_ifd(0x8769)
    sub[0x829A] = _rational(exposure)
    sub[0x829D] = _rational(fnum)
    sub[0x8827] = iso
    blob = _encode(inputs["pixels"], fmt, exif)
    wd = _workdir()
    name = "beam.jpg" if fmt == "JPEG" else "beam.png"
    photo = decode_photo(blob, name)  # never a crash; out-of-range facts dropped with a note
    assert photo.exif.orientation in range(1, 9)
    if not 1 <= orientation <= 8:
        assert photo.exif.orientation == 1 and any("orientation" in n for n in photo.notes)
    if iso == 1_000_000_000:
        assert photo.exif.iso is None and any("ISO" in n for n in photo.notes)
    if exposure <= 0 or exposure in (1e-12, 1e6):
        assert photo.exif.exposure_time_s is None
    Run(["analyze", _write(wd, name, blob), "--distance", "5", "--json"], wd)


# --------------------------------------------------------------------------- tiny and one-colour images
@_fuzz(50)
@given(w=st.integers(1, 40), h=st.integers(1, 40), fill=st.sampled_from(["black", "white", "grey", "noise"]),
       fmt=st.sampled_from(["PNG", "JPEG", "TIFF"]))
def test_tiny_images(w, h, fill, fmt):
    CASES["tiny image, analyze"] += 1
    px = {"black": np.zeros((h, w, 3), np.uint8), "white": np.full((h, w, 3), 255, np.uint8),
          "grey": np.full((h, w, 3), 128, np.uint8),
          "noise": np.random.default_rng(w * 100 + h).integers(0, 256, (h, w, 3), dtype=np.uint8)}[fill]
    wd = _workdir()
    name = {"PNG": "t.png", "JPEG": "t.jpg", "TIFF": "t.tif"}[fmt]
    run = Run(["analyze", _write(wd, name, _encode(px, fmt)), "--distance", "5", "--out", os.path.join(wd, "o")], wd,
              out=os.path.join(wd, "o"))
    if w < MIN_SIDE_PX or h < MIN_SIDE_PX:
        assert run.code == 2 and "too small" in run.one_line and f"{MIN_SIDE_PX} px" in run.one_line


@pytest.mark.parametrize("level", [0, 128, 255])
def test_one_colour_full_size_photo(level):
    # an all-black, mid-grey or all-white frame holds no beam: exit 2 with the reason, never figures
    wd = _workdir()
    px = np.full((H, W, 3), level, np.uint8)
    run = Run(["analyze", _write(wd, "flat.jpg", _encode(px, "JPEG")), "--distance", "5", "--out",
               os.path.join(wd, "o")], wd, out=os.path.join(wd, "o"))
    assert run.code == 2


# --------------------------------------------------------------------------- camera profiles
def _valid_profile() -> dict:
    codes = np.linspace(0.0, 1.0, 256)
    table = Response("srgb").decode(codes)
    table = tuple(tuple(float(x) for x in table) for _ in range(3))
    prof = CameraProfile(name="fuzzcam", response=Response("table", table=table),
                         flat=FlatField((0.25, 0.05, 0.0), 0.01, (H, W)), black_level=0.002, scale_constant=440.0,
                         scale_uncertainty=0.05, make="maker", model="model",
                         distortion=Distortion(130.0, 130.0, 79.5, 59.5, (0.01, 0.0, 0.0, 0.0, 0.0), (W, H)),
                         calibrated=True, created_utc="2026-01-01T00:00:00+00:00")
    return prof.to_dict()


def _paths(obj, prefix=()):
    """Every path into a JSON value (long lists: their first, second and last entries only)."""
    yield prefix
    if isinstance(obj, dict):
        for k, v in obj.items():
            yield from _paths(v, prefix + (k,))
    elif isinstance(obj, list):
        idx = range(len(obj)) if len(obj) <= 8 else (0, 1, len(obj) - 1)
        for i in idx:
            yield from _paths(obj[i], prefix + (i,))


ODD_VALUES = [None, True, False, 0, -1, 1, 2.5, 1e308, -1e308, 1e-300, float("nan"), float("inf"), float("-inf"),
              "big", "", "1.0", "9.0", [], {}, [1, 2, 3], [float("nan")] * 3, {"a": 1}, 2**70]


@st.composite
def mutated(draw, base: dict, focus: tuple[tuple, ...] = ()):
    """``(copy of base with one or two paths deleted or replaced by an odd value, description)``."""
    doc = json.loads(json.dumps(base))
    paths = [p for p in _paths(doc) if p]
    what = []
    for _ in range(draw(st.integers(1, 2))):
        pool = list(focus) + paths if focus else paths
        path = draw(st.sampled_from(pool))
        parent = doc
        try:
            for k in path[:-1]:
                parent = parent[k]
            parent[path[-1]]
        except (KeyError, IndexError, TypeError):
            continue
        if not isinstance(parent, (dict, list)):  # an earlier mutation replaced a container by a text
            continue
        if isinstance(parent, dict) and draw(st.booleans()) and draw(st.booleans()):
            del parent[path[-1]]
            what.append(f"del {'.'.join(map(str, path))}")
            continue
        value = draw(st.one_of(st.sampled_from(ODD_VALUES), st.floats(allow_nan=True, allow_infinity=True),
                               st.integers(-10**6, 10**6), st.text(max_size=5)))
        parent[path[-1]] = value
        what.append(f"{'.'.join(map(str, path))} = {value!r}")
    return doc, "; ".join(what)


def _usable(profile: CameraProfile) -> None:
    """What a loaded profile must be, whatever the file said (checked independently of the loader)."""
    v = profile.response.decode(np.linspace(0, 1, 257)[:, None].repeat(3, axis=1))
    assert np.all(np.isfinite(v)) and v.min() >= -1e-9 and v.max() <= 1 + 1e-9
    assert np.all(np.diff(v, axis=0) >= -1e-9)
    if profile.flat is not None:
        f = profile.flat.evaluate((60, 80))
        assert np.all(np.isfinite(f)) and f.min() > 0
    if profile.scale_constant is not None:
        assert math.isfinite(profile.scale_constant) and profile.scale_constant > 0
        assert profile.scale_uncertainty is not None and 0 <= profile.scale_uncertainty <= 1
    assert math.isfinite(profile.black_level) and 0 <= profile.black_level < 1
    assert isinstance(profile.name, str) and profile.name


PROFILE_FOCUS = (("schema_version",), ("response", "kind"), ("response", "table_rgb"), ("response", "table_rgb", 0),
                 ("response", "table_rgb", 1, 1), ("flat_field", "coefficients", 0), ("flat_field", "image_size"),
                 ("absolute_scale", "constant_lx"), ("absolute_scale", "relative_uncertainty"), ("black_level",),
                 ("distortion", "fx"), ("name",))


@_fuzz(500)
@given(case=mutated(_valid_profile(), PROFILE_FOCUS))
def test_damaged_profile_loads_usable_or_one_line(case):
    CASES["damaged profile, loader"] += 1
    doc, what = case
    try:
        profile = CameraProfile.from_dict(json.loads(json.dumps(doc)), source="p.json")
    except BeamshotError as exc:
        assert "\n" not in str(exc) and str(exc).startswith("p.json"), (what, str(exc))
    else:
        _usable(profile)


@_fuzz(50)
@given(case=mutated(_valid_profile(), PROFILE_FOCUS))
def test_damaged_profile_cli(inputs, case):
    CASES["damaged profile, analyze"] += 1
    doc, _ = case
    wd = _workdir()
    prof = _write(wd, "cam.json", json.dumps(doc).encode())
    Run(["camera", "show", prof], wd)
    Run(["analyze", str(inputs["folder"] / "beam.jpg"), "--distance", "5", "--camera", prof, "--json"], wd)


def _set(doc, path, value):
    d = json.loads(json.dumps(doc))
    node = d
    for k in path[:-1]:
        node = node[k]
    node[path[-1]] = value
    return d


TABLE_ROW = [float(x) for x in Response("srgb").decode(np.linspace(0, 1, 256))]


@pytest.mark.parametrize("path, value, words", [
    (("absolute_scale", "constant_lx"), -440.0, "absolute_scale.constant_lx"),
    (("absolute_scale", "constant_lx"), 0.0, "absolute_scale.constant_lx"),
    (("absolute_scale", "constant_lx"), float("nan"), "absolute_scale.constant_lx"),
    (("absolute_scale", "constant_lx"), "440", "absolute_scale.constant_lx"),
    (("absolute_scale", "relative_uncertainty"), -0.05, "relative_uncertainty"),
    (("absolute_scale", "relative_uncertainty"), 1.5, "relative_uncertainty"),
    (("response",), {"kind": "gamma", "gamma": 0}, "response.gamma"),
    (("response",), {"kind": "gamma", "gamma": -1}, "response.gamma"),
    (("response",), {"kind": "gamma", "gamma": float("nan")}, "response.gamma"),
    (("response",), {"kind": "gamma", "gamma": "2.2"}, "response.gamma"),
    (("response",), {"kind": "curvy"}, "response.kind"),
    (("response", "table_rgb"), [TABLE_ROW, TABLE_ROW], "response.table_rgb"),  # wrong shape
    (("response", "table_rgb"), [TABLE_ROW, TABLE_ROW, TABLE_ROW[:100]], "response.table_rgb"),
    (("response", "table_rgb"), [TABLE_ROW, TABLE_ROW, TABLE_ROW[:50] + [0.0] + TABLE_ROW[51:]], "code 50"),
    (("response", "table_rgb"), [TABLE_ROW, TABLE_ROW, TABLE_ROW[:9] + [float("nan")] + TABLE_ROW[10:]], "code 9"),
    (("response", "table_rgb"), [TABLE_ROW, [x * 2 for x in TABLE_ROW], TABLE_ROW], "table_rgb[1]"),
    (("flat_field", "coefficients"), [-1.5, 0.0, 0.0], "flat_field.coefficients"),  # 1/V = 0 at r = 0.82
    (("flat_field", "coefficients"), [40.0, 0.0, 0.0], "flat_field.coefficients"),  # corner at 2 % of centre
    (("flat_field", "coefficients"), [0.1, "x", 0.0], "flat_field.coefficients[1]"),
    (("flat_field", "image_size"), [0, 120], "flat_field.image_size"),
    (("black_level",), -0.1, "black_level"),
    (("black_level",), 0.9, "black_level"),
    (("name",), 7, "name"),
    (("calibrated",), "yes", "calibrated"),
    (("distortion", "fx"), 0, "distortion.fx"),
    (("distortion", "cx"), -5.0, "distortion.cx"),  # principal point outside the image
    (("distortion", "fx"), 1e-300, "distortion.fx"),  # found by the long fuzz run: overflow warnings in analyze
    (("distortion", "fy"), 400.0, "distortion.fy"),  # fx = 130: pixels three times taller than wide
    # found by the long fuzz run: a tangential term of 5e10 passed and overflowed the wall mapping
    (("distortion", "coefficients"), [0.01, 0.0, 53318854995.0, 0.0, 0.0], "distortion.coefficients"),
    (("distortion", "coefficients"), [-2.0, 0.0, 0.0, 0.0, 0.0], "distortion.coefficients"),  # folds back
])
def test_profile_field_refused_naming_field_value_range(path, value, words):
    doc = _set(_valid_profile(), path, value)
    with pytest.raises(BeamshotError) as exc:
        CameraProfile.from_dict(doc, source="cam.json")
    msg = str(exc.value)
    assert "\n" not in msg and words in msg and "accepted" in msg and "beamshot camera" in msg, msg


@pytest.mark.parametrize("version, words", [("2.0", "newer beamshot"), ("10.1", "newer beamshot"),
                                            ("abc", "schema_version"), (None, "schema_version"),
                                            ([1], "schema_version"), ("0.9", "not one beamshot wrote")])
def test_profile_versions(version, words):
    doc = _set(_valid_profile(), ("schema_version",), version)
    with pytest.raises(BeamshotError, match=words):
        CameraProfile.from_dict(doc, source="cam.json")


@pytest.mark.parametrize("path, value", [
    (("absolute_scale", "constant_lx"), PROFILE_LIMITS["constant_lx"][0]),
    (("absolute_scale", "constant_lx"), PROFILE_LIMITS["constant_lx"][1]),
    (("absolute_scale", "relative_uncertainty"), 1.0),
    (("response",), {"kind": "gamma", "gamma": PROFILE_LIMITS["gamma"][1]}),
    (("black_level",), 0.49),
    (("flat_field", "coefficients"), [19.0, 0.0, 0.0]),  # corner at 1/20 = the lowest fall-off accepted
])
def test_profile_at_its_limits_analyses_or_one_line(inputs, path, value):
    # a profile at the edge of every accepted range still gives exit 0 with valid JSON, or one line
    wd = _workdir()
    prof = _write(wd, "cam.json", json.dumps(_set(_valid_profile(), path, value)).encode())
    Run(["analyze", str(inputs["folder"] / "beam.jpg"), "--distance", "5", "--camera", prof, "--json-full"], wd)


def test_profile_limits_accept_a_typical_camera():
    # the ideal camera's constant K = 78 pi / (q rho) (ISO 12232 with q = 0.65, rho = 0.85, as in
    # beamshot.camera.constant) lies inside the accepted range, and the shipped profile loads
    k_ideal = 78 * math.pi / (0.65 * 0.85)
    lo, hi = PROFILE_LIMITS["constant_lx"]
    assert lo < k_ideal < hi
    prof = CameraProfile.from_dict(_valid_profile(), source="cam.json")
    assert prof.scale_constant == 440.0 and prof.flat is not None and prof.distortion is not None
    assert load_profile("uncalibrated-srgb").response.kind == "srgb"


def test_unknown_camera_names_absolute_folders_and_commands(tmp_path):
    wd = _workdir()
    run = Run(["analyze", "whatever.jpg", "--distance", "5", "--camera", "nosuchcam"], wd, home=str(tmp_path))
    assert run.code == 2
    msg = run.one_line
    assert os.path.join(str(tmp_path), "cameras") in msg and "calibration" in msg
    assert "beamshot camera list" in msg and "beamshot camera response" in msg and "--name nosuchcam" in msg
    # every folder named is absolute
    assert " calibration/" not in msg and "(looked in calibration" not in msg


# --------------------------------------------------------------------------- reports and far-field
@pytest.fixture(scope="module")
def reports(inputs, tmp_path_factory):
    """A real report.json (lux reading at the peak: the peak has an uncertainty) and a copy at twice the distance."""
    folder = tmp_path_factory.mktemp("fuzz-reports")
    out = folder / "near"
    run = Run(["analyze", inputs["folder"] / "beam.jpg", "--distance", "5", "--lux-at-peak",
               f"{inputs['lux']:.0f}", "--out", out], str(folder), out=str(out))
    assert run.code == 0
    near = json.loads((out / "report.json").read_text())
    far = json.loads(json.dumps(near))
    far["settings"]["distance_m"] = 10.0
    return _Reports((near, far))


class _Reports(tuple):
    def __repr__(self):
        return "<near and far report dicts>"


FARFIELD_FOCUS = (("settings",), ("settings", "distance_m"), ("figures",), ("figures", "peak_intensity"),
                  ("figures", "peak_intensity", "value"), ("figures", "peak_intensity", "uncertainty"),
                  ("figures", "peak_intensity", "unit"), ("figures", "peak_intensity", "budget"),
                  ("figures", "hotspot_angle", "value"), ("figures", "hotspot_angle", "uncertainty"),
                  ("schema_version",), ("schema",), ("calibration",), ("calibration", "absolute_scale"),
                  ("calibration", "camera_profile"))


@_fuzz(250)
@given(data=st.data())
def test_damaged_report_far_field(reports, data):
    CASES["damaged report, far-field"] += 1
    near, far = reports
    which = data.draw(st.sampled_from(["near", "far"]), label="which")
    doc, what = data.draw(mutated(near if which == "near" else far, FARFIELD_FOCUS), label="mutation")
    a, b = (doc, far) if which == "near" else (near, doc)
    wd = _workdir()
    pa = _write(wd, "a.json", json.dumps(a).encode())
    pb = _write(wd, "b.json", json.dumps(b).encode())
    run = Run(["far-field", pa, pb], wd, allowed=(0, 1, 2))
    if run.code == 1:
        assert "DISAGREE" in run.stdout, run.stdout
    d = doc.get("settings", {}).get("distance_m") if isinstance(doc.get("settings"), dict) else None
    if not (isinstance(d, (int, float)) and not isinstance(d, bool) and math.isfinite(d) and d > 0):
        assert run.code == 2, (what, run.stdout)


@pytest.mark.parametrize("change, words", [
    (lambda r: r.pop("settings"), "settings"),
    (lambda r: r["figures"]["peak_intensity"].update(value="big"), "figures.peak_intensity.value"),
    (lambda r: r["figures"]["hotspot_angle"].update(uncertainty=float("nan")), "figures.hotspot_angle.uncertainty"),
    (lambda r: r["figures"].update(peak_intensity=None) or r["figures"].update(hotspot_angle=[]), "hotspot_angle"),
    (lambda r: r["figures"]["peak_intensity"].update(unit="lm"), "figures.peak_intensity.unit"),
    (lambda r: r["settings"].update(distance_m=0), "settings.distance_m"),
    (lambda r: r["settings"].update(distance_m=-5), "settings.distance_m"),
    (lambda r: r["settings"].update(distance_m="5"), "settings.distance_m"),
    (lambda r: r.update(schema_version="9.0"), "newer beamshot"),
    (lambda r: r.update(schema_version="abc"), "schema_version"),
])
def test_far_field_refuses_damaged_report_in_one_line(reports, change, words):
    near, far = (json.loads(json.dumps(r)) for r in reports)
    change(far)
    wd = _workdir()
    run = Run(["far-field", _write(wd, "near.json", json.dumps(near).encode()),
               _write(wd, "far.json", json.dumps(far).encode())], wd, allowed=(2,))
    assert words in run.one_line, run.one_line


@pytest.mark.parametrize("text", [
    '{"schema": "beamshot.report", "schema_version": "1.1", "x": ' + "1" * 5000 + "}",  # Python's int limit
    "[" * 100000 + "]" * 100000,  # nesting deeper than the JSON decoder's recursion
    '{"schema": "beamshot.report", "schema_version": "\u00b2"}',  # superscript two: isdigit() but not int()
])
def test_far_field_report_json_edge_cases_are_one_line(text):
    wd = _workdir()
    path = _write(wd, "r.json", text.encode())
    Run(["far-field", path, path], wd, allowed=(2,))


def test_far_field_exit_1_only_for_a_real_difference(reports):
    # the same light at 2x the distance with a 30 % lower peak: a real difference (exit 1);
    # unchanged figures agree (exit 0)
    near, far = (json.loads(json.dumps(r)) for r in reports)
    wd = _workdir()
    pa = _write(wd, "near.json", json.dumps(near).encode())
    assert Run(["far-field", pa, _write(wd, "same.json", json.dumps(far).encode())], wd, allowed=(0,)).code == 0
    far["figures"]["peak_intensity"]["value"] *= 0.7
    run = Run(["far-field", pa, _write(wd, "far.json", json.dumps(far).encode())], wd, allowed=(1,))
    assert "DISAGREE" in run.stdout
    with pytest.raises(BeamshotError, match="distance_m"):
        compare_distances(near, _set(far, ("settings", "distance_m"), 0.0))
    # found by the long fuzz run: budget entries of 1e308 overflowed (exit 3); now "cannot be compared"
    huge = _set(near, ("figures", "peak_intensity", "uncertainty"), 1e308)
    huge["figures"]["peak_intensity"]["budget"] = {"lux meter": 1e308}
    result = compare_distances(huge, json.loads(json.dumps(reports[1])))
    assert any("cannot be compared" in line for line in result["lines"])


# --------------------------------------------------------------------------- option values at every limit
#: Per option: values that must be refused (exit 2) and values inside the documented range.
OPTIONS = {
    "--distance": (["0", "-1", "1e9", "nan", "inf", "-inf"], ["5"]),
    "--distance-uncertainty": (["-1", "nan", "inf", "5"], ["0.02", "0"]),
    "--lux": (["-5", "0", "nan", "inf"], ["LUX"]),
    "--lux-at": (["-5,-5", "1e9,0", "nan,nan", "abc", "80"], ["80,60"]),
    "--meter-accuracy": (["-0.1", "nan", "200"], ["5"]),  # percent
    "--reflectance": (["2", "0", "-1", "nan"], ["0.8"]),
    "--head-diameter": (["-10", "0", "nan", "1e9"], ["30"]),
    "--scale-bar-mm": (["0", "-1", "nan", "1e6"], ["100", "98"]),
    "--hfov": (["0", "180", "-5", "nan", "1000"], ["60"]),
    "--focal-35mm": (["0", "-1", "nan", "1e6"], ["16"]),
    "--camera-distance": (["0", "-1", "nan", "1e9"], ["5"]),
    "--response": (["gamma:0", "gamma:-1", "gamma:nan", "bogus"], ["srgb", "gamma:2.2"]),
    "--units": ([], ["metric", "imperial"]),  # a value outside the choice: test_click_usage_error_is_one_line
}


@pytest.mark.parametrize("args", [["--units", "furlongs"], ["--distance", "five"], ["--lux", "bright"]])
def test_click_usage_error_is_one_line(inputs, args):
    wd = _workdir()
    run = Run(["analyze", str(inputs["folder"] / "beam.jpg"), "--distance", "5", *args], wd)
    assert run.code == 2


@st.composite
def option_sets(draw):
    chosen = {}
    for opt, (bad, good) in OPTIONS.items():
        if opt == "--distance" or draw(st.integers(0, 3)) == 0:
            chosen[opt] = draw(st.sampled_from(bad + good))
    return chosen


@_fuzz(60)
@given(opts=option_sets())
def test_option_limits(inputs, opts):
    CASES["option limits, analyze"] += 1
    wd = _workdir()
    out = os.path.join(wd, "out")
    args = ["analyze", str(inputs["folder"] / "beam.jpg"), "--out", out]
    for opt, value in opts.items():
        args += [opt, f"{inputs['lux']:.0f}" if value == "LUX" else value]
    run = Run(args, wd, out=out)
    refused = [o for o, v in opts.items() if v in OPTIONS[o][0]]
    if refused:
        assert run.code == 2, f"{refused} accepted: {run.stdout[-400:]}"
