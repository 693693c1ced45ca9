"""Camera profile: what was learned about a camera, kept as a versioned, readable JSON file.

A profile holds the response curve (parametric or measured table), the flat-field model, the
black level, and the absolute-scale constant ``K`` (lx per linear unit at ``N^2 / (t S) = 1``):
wall illuminance ``E = K v N^2 / (t S)``, from ISO 12232's ``H = q L t / N^2`` with the lens
factor, the wall's reflectance and the sensitivity folded into one measured number.  Every
part records its provenance (when, which files and their SHA-256, method, residuals).

Profiles are found by path, or by name in ``$BEAMSHOT_HOME/cameras`` (default
``~/.config/beamshot/cameras``) and in the project's ``calibration/`` folder; the built-in
``uncalibrated-srgb`` profile is the default.
"""

from __future__ import annotations

import datetime as _dt
import json
import os
import tempfile
from dataclasses import dataclass, field, replace

import numpy as np

from ..errors import BeamshotError
from .distortion import Distortion
from .flatfield import FlatField
from .response import Response

__all__ = ["SCHEMA_NAME", "SCHEMA_VERSION", "DEFAULT_PROFILE_NAME", "PROFILE_LIMITS", "CameraProfile", "default_profile",
           "profile_dir", "find_profile", "load_profile", "save_profile", "list_profiles"]

SCHEMA_NAME = "beamshot.camera"
SCHEMA_VERSION = "1.0"
DEFAULT_PROFILE_NAME = "uncalibrated-srgb"


@dataclass(frozen=True)
class CameraProfile:
    """A camera profile; see the module docstring.  ``scale_constant`` in lx (None if unknown)."""

    name: str
    response: Response = field(default_factory=Response)
    response_quality: dict | None = None
    flat: FlatField | None = None
    black_level: float = 0.0
    scale_constant: float | None = None
    scale_uncertainty: float | None = None
    scale_notes: dict | None = None
    make: str | None = None
    model: str | None = None
    calibrated: bool = False
    created_utc: str = ""
    provenance: tuple = ()
    distortion: Distortion | None = None
    #: Camera RGB -> CIE XYZ fitted from a reference-chart photo (beamshot.colour.chart): ``{"matrix":
    #: 3x3 rows, "residual_rms_uv": fit residual in u'v', "patches": count, "method": text}``; None if not fitted.
    colour_matrix: dict | None = None

    def with_step(self, step: str, files: list[dict], *, details: dict | None = None, **changes) -> "CameraProfile":
        """A copy with ``changes`` applied and a provenance entry for ``step`` (plus ``details``, if any)."""
        entry = {"step": step, "when_utc": _now(), "files": files, **(details or {})}
        return replace(self, provenance=tuple(self.provenance) + (entry,), calibrated=True, **changes)

    def to_dict(self) -> dict:
        r = self.response
        response = {"kind": r.kind}
        if r.kind == "gamma":
            response["gamma"] = r.gamma
        if r.kind == "table":
            response["table_rgb"] = [list(row) for row in r.table]
        return {
            "schema": SCHEMA_NAME,
            "schema_version": SCHEMA_VERSION,
            "name": self.name,
            "calibrated": self.calibrated,
            "make": self.make,
            "model": self.model,
            "created_utc": self.created_utc,
            "response": response,
            "response_quality": self.response_quality,
            "flat_field": None if self.flat is None else {
                "model": "1/V = 1 + b1 r^2 + b2 r^4 + b3 r^6 (r to the half-diagonal)",
                "coefficients": list(self.flat.coefficients),
                "residual_rms": self.flat.residual_rms,
                "image_size": [self.flat.shape[1], self.flat.shape[0]],
                "method": self.flat.method,
                "data_to_radius": self.flat.max_radius,
            },
            "black_level": self.black_level,
            "distortion": None if self.distortion is None else self.distortion.to_dict(),
            "absolute_scale": None if self.scale_constant is None else {
                "constant_lx": self.scale_constant,
                "relative_uncertainty": self.scale_uncertainty,
                "relation": "E_wall = K * v * N^2 / (t * S)  (v linear, 1 = clipping)",
                **(self.scale_notes or {}),
            },
            "provenance": list(self.provenance),
            **({} if self.colour_matrix is None else {"colour_matrix": self.colour_matrix}),
        }

    @classmethod
    def from_dict(cls, data: dict, source: str = "profile") -> "CameraProfile":
        """A profile from its JSON form, each field checked against its type and physical range.

        A bad field raises a one-line :class:`BeamshotError` naming the field, the value, the
        accepted range and the fix (see :data:`PROFILE_LIMITS`).
        """
        if not isinstance(data, dict) or data.get("schema") != SCHEMA_NAME:
            raise BeamshotError(f"{source}: not a beamshot camera profile (no \"schema\": \"{SCHEMA_NAME}\"); "
                                "give a file written by 'beamshot camera ...'")
        version = data.get("schema_version")
        try:
            if isinstance(version, bool) or not isinstance(version, (str, int, float)):
                raise ValueError
            major = int(str(version).split(".")[0])
        except ValueError:
            raise BeamshotError(f"{source}: the profile has no readable schema_version ({version!r}); "
                                f"expected \"{SCHEMA_VERSION}\"; recreate it with 'beamshot camera ...'") from None
        if major > int(SCHEMA_VERSION.split(".")[0]):
            raise BeamshotError(f"{source}: written by a newer beamshot (camera schema {version}, this one reads "
                                f"{SCHEMA_VERSION.split('.')[0]}.x); upgrade beamshot")
        if major < 1:
            raise BeamshotError(f"{source}: camera schema {version} is not one beamshot wrote (accepted: 1.x); "
                                "recreate the profile with 'beamshot camera ...'")
        check = _FieldCheck(source)
        name = check.text("name", data.get("name"), required=True)
        response = _response_from(check, data.get("response"))
        flat = _flat_from(check, data.get("flat_field"))
        black = check.number("black_level", data.get("black_level", 0.0), *PROFILE_LIMITS["black_level"]) or 0.0
        sc = data.get("absolute_scale")
        constant = uncertainty = notes = None
        if sc is not None:
            check.mapping("absolute_scale", sc)
            constant = check.number("absolute_scale.constant_lx", sc.get("constant_lx"),
                                    *PROFILE_LIMITS["constant_lx"], required=True)
            uncertainty = check.number("absolute_scale.relative_uncertainty", sc.get("relative_uncertainty"),
                                       *PROFILE_LIMITS["relative_uncertainty"], required=True)
            notes = {k: v for k, v in sc.items() if k not in ("constant_lx", "relative_uncertainty", "relation")}
        quality = data.get("response_quality")
        if quality is not None:
            check.mapping("response_quality", quality)
            rms = quality.get("consistency_rms")
            if rms is not None:
                check.number("response_quality.consistency_rms", rms, 0.0, 1.0, lo_open=False)
        provenance = data.get("provenance", [])
        if not isinstance(provenance, list) or not all(isinstance(e, dict) for e in provenance):
            check.fail("provenance", provenance, "a list of {\"step\": ...} records")
        calibrated = data.get("calibrated", False)
        if not isinstance(calibrated, bool):
            check.fail("calibrated", calibrated, "true or false")
        return cls(
            distortion=_distortion_from(check, data.get("distortion")),
            name=name,
            response=response,
            response_quality=quality,
            flat=flat,
            black_level=black,
            scale_constant=constant,
            scale_uncertainty=uncertainty,
            scale_notes=notes,
            make=check.text("make", data.get("make")),
            model=check.text("model", data.get("model")),
            calibrated=calibrated,
            created_utc=check.text("created_utc", data.get("created_utc", "")) or "",
            provenance=tuple(provenance),
            colour_matrix=_colour_matrix_from(check, data.get("colour_matrix")),
        )


def _colour_matrix_from(check: "_FieldCheck", cm) -> dict | None:
    """The chart-fitted colour matrix: a finite, invertible 3x3 ``matrix`` plus its fit notes."""
    if cm is None:
        return None
    check.mapping("colour_matrix", cm)
    rows = cm.get("matrix")
    if not isinstance(rows, list) or len(rows) != 3:
        check.fail("colour_matrix.matrix", rows, "3 rows of 3 numbers (camera RGB -> XYZ)")
    m = [check.numbers(f"colour_matrix.matrix[{i}]", row, 3) for i, row in enumerate(rows)]
    if abs(float(np.linalg.det(np.asarray(m, float)))) < 1e-9:
        check.fail("colour_matrix.matrix", rows, "an invertible matrix (fit it again from a chart photo)")
    return {**cm, "matrix": m}


#: Accepted range of each numeric profile field: ``(low, high)``; the low end is excluded for
#: quantities that must be positive.  Sources: the camera constant ``K = 78 pi / (q rho)`` of an
#: ideal camera is about 440 lx (ISO 12232 with q = 0.65, rho = 0.85); the range allows a factor
#: of about 400 either way (common practice: true sensitivity and lens factors differ from nominal
#: by far less).  Black level and flat-field fall-off are in linear units (1 = clipping).
PROFILE_LIMITS = {
    "gamma": (1.0, 3.5),               # same range as --response gamma:<exponent>
    "black_level": (0.0, 0.5),
    "constant_lx": (1.0, 2.0e5),
    "relative_uncertainty": (0.0, 1.0),
    "flat_falloff": (0.05, 1.5),       # V(r) = 1/G(r) anywhere in the frame (corner at 5 %..150 % of centre)
    "flat_residual_rms": (0.0, 1.0),
    "flat_data_to_radius": (0.0, 1.0),
    "table_length": (16, 65536),
    "image_side_px": (1, 100000),
    "distortion_focal_over_side": (0.1, 100.0),  # fx, fy over the longer image side
    "distortion_radial_factor": (0.2, 5.0),  # common practice: strong wide-angle lenses stay within 0.5-2
    "distortion_tangential": (-0.1, 0.1),    # decentring terms p1, p2: typically 1e-3 (from memory)
}

#: The command that measures each part of a profile again (named in messages about a bad field).
_REMEASURE = {"response": "beamshot camera response PHOTOS... --name NAME",
              "flat_field": "beamshot camera flat PHOTOS... --name NAME",
              "absolute_scale": "beamshot camera scale PHOTO --lux LX --name NAME"}


def _fix(field_name: str) -> str:
    command = _REMEASURE.get(field_name.split(".")[0].split("[")[0])
    if command:
        return f"measure it again with '{command}' or correct the file"
    return "correct the file, or make the profile again with 'beamshot camera response/flat/scale ... --name NAME'"


class _FieldCheck:
    """Field checks for one profile file; every failure is one line naming field, value, range and fix."""

    def __init__(self, source: str):
        self.source = source

    def fail(self, field_name: str, value, accepted: str):
        shown = repr(value)
        if len(shown) > 60:
            shown = shown[:57] + "..."
        raise BeamshotError(f"{self.source}: camera profile field {field_name} = {shown} is not accepted "
                            f"(accepted: {accepted}); {_fix(field_name)}")

    def number(self, field_name: str, value, lo: float | None = None, hi: float | None = None, *,
               lo_open: bool | None = None, required: bool = False) -> float | None:
        """A finite JSON number within ``[lo, hi]`` (``(lo, hi]`` when ``lo_open``, default: lo == 0 is open
        only for positive quantities), or None when missing and not required."""
        if value is None and not required:
            return None
        rng = _range_text(lo, hi, lo_open)
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            self.fail(field_name, value, f"a number {rng}")
        x = float(value)
        if not np.isfinite(x):
            self.fail(field_name, value, f"a finite number {rng}")
        if lo is not None and (x < lo or (lo_open and x == lo)):
            self.fail(field_name, value, f"a number {rng}")
        if hi is not None and x > hi:
            self.fail(field_name, value, f"a number {rng}")
        return x

    def text(self, field_name: str, value, *, required: bool = False) -> str | None:
        if value is None and not required:
            return None
        if not isinstance(value, str) or (required and not value.strip()):
            self.fail(field_name, value, "a text" + (" (not empty)" if required else " or null"))
        return value

    def image_size(self, field_name: str, size) -> tuple[int, int]:
        """``[width, height]`` in whole pixels within the profile's limits."""
        lo_px, hi_px = PROFILE_LIMITS["image_side_px"]
        if (not isinstance(size, list) or len(size) != 2
                or not all(isinstance(v, int) and not isinstance(v, bool) and lo_px <= v <= hi_px for v in size)):
            self.fail(field_name, size, f"[width, height] in whole pixels, {lo_px}-{hi_px}")
        return size[0], size[1]

    def mapping(self, field_name: str, value) -> dict:
        if not isinstance(value, dict):
            self.fail(field_name, value, "an object {...}" + ("" if field_name == "response" else " or null"))
        return value

    def numbers(self, field_name: str, value, count: int | tuple[int, ...]) -> list[float]:
        counts = (count,) if isinstance(count, int) else count
        want = " or ".join(str(c) for c in counts)
        if not isinstance(value, list) or len(value) not in counts:
            self.fail(field_name, value, f"a list of {want} finite numbers")
        return [self.number(f"{field_name}[{i}]", v, required=True) for i, v in enumerate(value)]


def _range_text(lo, hi, lo_open) -> str:
    if lo is None and hi is None:
        return ""
    if hi is None:
        return f"{'above' if lo_open else 'at least'} {lo:g}"
    if lo is None:
        return f"at most {hi:g}"
    return f"above {lo:g} up to {hi:g}" if lo_open else f"from {lo:g} to {hi:g}"


def _response_from(check: _FieldCheck, resp) -> Response:
    check.mapping("response", resp)
    kind = resp.get("kind")
    if kind in ("srgb", "linear", "s-curve"):
        return Response(kind)
    if kind == "gamma":
        g = check.number("response.gamma", resp.get("gamma"), *PROFILE_LIMITS["gamma"], required=True)
        return Response("gamma", gamma=g)
    if kind == "table":
        return Response("table", table=_table_from(check, resp.get("table_rgb")))
    return check.fail("response.kind", kind, "srgb, linear, s-curve, gamma or table")


def _table_from(check: _FieldCheck, table) -> tuple:
    """A measured decode table: 3 rows (R, G, B) of equal length, finite, within [0, 1], never falling,
    rising from the first to the last code, 1 at the top code (bracket.py normalises it so)."""
    lo_n, hi_n = PROFILE_LIMITS["table_length"]
    shape_text = f"3 rows (R, G, B) of {lo_n}-{hi_n} numbers each"
    if (not isinstance(table, list) or len(table) != 3 or not all(isinstance(r, list) for r in table)
            or len({len(r) for r in table}) != 1 or not lo_n <= len(table[0]) <= hi_n):
        check.fail("response.table_rgb", table, shape_text)
    for c, row in enumerate(table):
        if any(isinstance(x, bool) or not isinstance(x, (int, float)) for x in row):
            check.fail(f"response.table_rgb[{c}]", row, f"{shape_text}, all numbers")
    t = np.asarray(table, dtype=np.float64)
    for c, channel in enumerate("RGB"):
        row = t[c]
        where = f"response.table_rgb[{c}] ({channel})"
        if not np.all(np.isfinite(row)):
            k = int(np.flatnonzero(~np.isfinite(row))[0])
            check.fail(f"{where} at code {k}", float(row[k]), "finite numbers from 0 to 1")
        if row.min() < -1e-9 or row.max() > 1 + 1e-9:
            k = int(np.argmax((row < -1e-9) | (row > 1 + 1e-9)))
            check.fail(f"{where} at code {k}", float(row[k]), "numbers from 0 to 1 (1 = clipping)")
        falls = np.flatnonzero(np.diff(row) < -1e-9)
        if falls.size:
            k = int(falls[0]) + 1
            check.fail(f"{where} at code {k}", float(row[k]),
                       f"a curve that never falls (code {k - 1} holds {row[k - 1]:.6g})")
        if abs(row[-1] - 1.0) > 1e-6 or row[-1] <= row[0]:
            check.fail(f"{where} at the top code", float(row[-1]), "1 at the top code, above the first code")
    return tuple(tuple(float(x) for x in row) for row in t)


def _flat_from(check: _FieldCheck, ff) -> FlatField | None:
    if ff is None:
        return None
    check.mapping("flat_field", ff)
    b = check.numbers("flat_field.coefficients", ff.get("coefficients"), 3)
    w, h = check.image_size("flat_field.image_size", ff.get("image_size"))
    residual = check.number("flat_field.residual_rms", ff.get("residual_rms"), *PROFILE_LIMITS["flat_residual_rms"],
                            required=True)
    reach = check.number("flat_field.data_to_radius", ff.get("data_to_radius", 1.0),
                         *PROFILE_LIMITS["flat_data_to_radius"], lo_open=True, required=True)
    method = ff.get("method", "flat photo")
    if not isinstance(method, str):
        check.fail("flat_field.method", method, "a text such as \"flat photo\"")
    # The fall-off V(r) = 1 / (1 + b1 r^2 + b2 r^4 + b3 r^6) must stay positive and plausible over the
    # whole frame, r in [0, 1] (r to the half-diagonal); checked on a fine grid of r.
    r2 = np.linspace(0.0, 1.0, 1001) ** 2
    g = 1.0 + b[0] * r2 + b[1] * r2**2 + b[2] * r2**3
    lo_v, hi_v = PROFILE_LIMITS["flat_falloff"]
    with np.errstate(divide="ignore"):
        v = np.where(g > 0, 1.0 / np.where(g > 0, g, 1.0), -np.inf)
    bad = np.flatnonzero(~((v >= lo_v) & (v <= hi_v)))
    if bad.size:
        k = int(bad[0])
        at = float(np.sqrt(r2[k]))
        shown = "a level that is not positive" if not np.isfinite(v[k]) or v[k] <= 0 else f"{v[k]:.1%} of the centre"
        check.fail("flat_field.coefficients", b,
                   f"a fall-off V between {lo_v:.0%} and {hi_v:.0%} of the centre everywhere in the frame; these give "
                   f"{shown} at r = {at:.2f} of the half-diagonal")
    return FlatField(coefficients=tuple(b), residual_rms=residual, shape=(h, w), method=method, max_radius=reach)


def _distortion_from(check: _FieldCheck, dist) -> Distortion | None:
    """Lens distortion in OpenCV's model, checked to describe a real lens over the whole frame: focal
    lengths positive, the principal point inside the image, and the radial factor of the Brown-Conrady
    model (rational with 8 coefficients) between ``DISTORTION_RADIAL_FACTOR`` and rising with the
    radius out to the frame's corners, so that every pixel has one undistorted position."""
    if not dist:
        return None
    check.mapping("distortion", dist)
    w, h = check.image_size("distortion.image_size", dist.get("image_size"))
    # focal lengths in pixels: a horizontal view between about 157 and 0.6 degrees (common practice:
    # the widest rectilinear lenses reach about 120 degrees), square pixels within a factor of 2
    lo_f, hi_f = (r * max(w, h) for r in PROFILE_LIMITS["distortion_focal_over_side"])
    fx, fy = (check.number(f"distortion.{k}", dist.get(k), lo_f, hi_f, required=True) for k in ("fx", "fy"))
    if not 0.5 <= fx / fy <= 2.0:
        check.fail("distortion.fy", fy, f"a focal length within a factor of 2 of fx ({fx:g}; square pixels)")
    cx = check.number("distortion.cx", dist.get("cx"), 0.0, float(w), required=True)
    cy = check.number("distortion.cy", dist.get("cy"), 0.0, float(h), required=True)
    k = check.numbers("distortion.coefficients", dist.get("coefficients"), (4, 5, 8))
    k = k + [0.0] * (8 - len(k))
    # radial factor over the normalised radius out to the farthest corner (OpenCV calib3d model)
    r_max = float(np.hypot(max(cx, w - cx) / fx, max(cy, h - cy) / fy))
    r = np.linspace(0.0, r_max, 401)
    r2 = r * r
    with np.errstate(all="ignore"):
        num = 1 + k[0] * r2 + k[1] * r2**2 + k[4] * r2**3
        den = 1 + k[5] * r2 + k[6] * r2**2 + k[7] * r2**3
        factor = num / den
        rd = r * factor
    lo_r, hi_r = PROFILE_LIMITS["distortion_radial_factor"]
    ok = np.all(np.isfinite(factor)) and factor.min() >= lo_r and factor.max() <= hi_r and np.all(np.diff(rd) > 0)
    if not ok or max(abs(k[2]), abs(k[3])) > PROFILE_LIMITS["distortion_tangential"][1]:
        check.fail("distortion.coefficients", k[:len(dist["coefficients"])],
                   f"a lens whose radial factor stays between {lo_r:g} and {hi_r:g} and whose image radius keeps "
                   f"rising out to the corners, tangential terms within ±{PROFILE_LIMITS['distortion_tangential'][1]:g}")
    return Distortion.from_dict(dist)


def _now() -> str:
    return _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")


def default_profile() -> CameraProfile:
    """The shipped default: sRGB response, no flat field, no absolute constant (uncalibrated)."""
    return CameraProfile(name=DEFAULT_PROFILE_NAME, calibrated=False, created_utc="",
                         provenance=({"step": "default", "note": "uncalibrated: sRGB curve assumed, "
                                      "vignetting not corrected, no camera constant"},))


def profile_dir() -> str:
    """Folder for personal profiles: ``$BEAMSHOT_HOME/cameras`` or ``~/.config/beamshot/cameras``."""
    home = os.environ.get("BEAMSHOT_HOME") or os.path.join(os.path.expanduser("~"), ".config", "beamshot")
    return os.path.join(home, "cameras")


def _project_dir() -> str:
    return os.path.join(os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__)))), "calibration")


def find_profile(name_or_path: str) -> str | None:
    """Path of a profile given as a file path or a name; None if there is none."""
    if os.path.sep in name_or_path or name_or_path.endswith(".json"):
        return name_or_path if os.path.exists(name_or_path) else None
    for folder in (profile_dir(), _project_dir()):
        p = os.path.join(folder, f"{name_or_path}.json")
        if os.path.exists(p):
            return p
    return None


def load_profile(name_or_path: str | None) -> CameraProfile:
    """Load a profile by path or name (None or the default name: the built-in default)."""
    if name_or_path in (None, DEFAULT_PROFILE_NAME):
        return default_profile()
    path = find_profile(name_or_path)
    if path is None:
        if os.path.sep in name_or_path or name_or_path.endswith(".json"):
            raise BeamshotError(f"camera profile file {os.path.abspath(name_or_path)} does not exist; check the path, "
                                "or list the profiles with 'beamshot camera list'")
        folders = " and ".join(os.path.abspath(f) for f in (profile_dir(), _project_dir()))
        raise BeamshotError(f"no camera profile {name_or_path!r} (looked for {name_or_path}.json in {folders}); "
                            "list the profiles with 'beamshot camera list', or make one with "
                            f"'beamshot camera response PHOTOS... --name {name_or_path}'")
    try:
        with open(path, encoding="utf-8") as fh:
            data = json.load(fh)
    except OSError as exc:
        raise BeamshotError(f"{path}: cannot read the camera profile ({exc.strerror or exc})") from None
    except (ValueError, RecursionError) as exc:  # not UTF-8, not JSON, absurd numbers or nesting
        raise BeamshotError(f"{path}: cannot read the camera profile: not JSON written by beamshot "
                            f"({str(exc).splitlines()[0][:80]}); recreate it with 'beamshot camera ...'") from None
    return CameraProfile.from_dict(data, source=path)


def save_profile(profile: CameraProfile, path: str | None = None) -> str:
    """Write ``profile`` atomically (temporary file, then rename); returns the path.

    The profile is first checked exactly as it will be read back (:meth:`CameraProfile.from_dict`),
    so a measurement outside the physical ranges (e.g. a constant from a mistyped lux reading) is
    refused in one line instead of leaving a file that cannot be loaded.
    """
    data = profile.to_dict()
    CameraProfile.from_dict(json.loads(json.dumps(data)), source=f"the new profile '{profile.name}'")
    if path is None:
        os.makedirs(profile_dir(), exist_ok=True)
        path = os.path.join(profile_dir(), f"{profile.name}.json")
    folder = os.path.dirname(os.path.abspath(path)) or "."
    os.makedirs(folder, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=".profile-", suffix=".json", dir=folder)
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            json.dump(data, fh, indent=2, allow_nan=False)
            fh.write("\n")
        os.replace(tmp, path)
    finally:
        if os.path.exists(tmp):
            os.remove(tmp)
    return path


def list_profiles() -> list[tuple[str, str]]:
    """``(name, path)`` of every profile found, the built-in default first."""
    out = [(DEFAULT_PROFILE_NAME, "(built in)")]
    for folder in (profile_dir(), _project_dir()):
        if os.path.isdir(folder):
            for f in sorted(os.listdir(folder)):
                if f.endswith(".json") and f[:-5] != DEFAULT_PROFILE_NAME:
                    out.append((f[:-5], os.path.join(folder, f)))
    return out
