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

from ..errors import BeamshotError
from .distortion import Distortion
from .flatfield import FlatField
from .response import Response

__all__ = ["SCHEMA_NAME", "SCHEMA_VERSION", "DEFAULT_PROFILE_NAME", "CameraProfile", "default_profile",
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
        }

    @classmethod
    def from_dict(cls, data: dict, source: str = "profile") -> "CameraProfile":
        if not isinstance(data, dict) or data.get("schema") != SCHEMA_NAME:
            raise BeamshotError(f"{source}: not a beamshot camera profile")
        version = str(data.get("schema_version", ""))
        try:
            major = int(version.split(".")[0])
        except ValueError:
            raise BeamshotError(f"{source}: the profile has no readable schema_version") from None
        if major > int(SCHEMA_VERSION.split(".")[0]):
            raise BeamshotError(f"{source}: written by a newer beamshot (camera schema {version}); upgrade beamshot")
        try:
            resp = data["response"]
            kind = resp["kind"]
            if kind == "table":
                table = resp["table_rgb"]
                if len(table) != 3 or any(len(row) != len(table[0]) or len(row) < 16 for row in table):
                    raise ValueError("table_rgb must be 3 rows of equal length")
                response = Response("table", table=tuple(tuple(float(x) for x in row) for row in table))
            elif kind in ("srgb", "linear", "s-curve"):
                response = Response(kind)
            elif kind == "gamma":
                response = Response("gamma", gamma=float(resp["gamma"]))
            else:
                raise ValueError(f"unknown response kind {kind!r}")
            ff = data.get("flat_field")
            flat = None
            if ff:
                b = [float(x) for x in ff["coefficients"]]
                if len(b) != 3:
                    raise ValueError("flat_field.coefficients must have 3 numbers")
                w, h = (int(x) for x in ff["image_size"])
                flat = FlatField(coefficients=tuple(b), residual_rms=float(ff["residual_rms"]), shape=(h, w),
                                 method=str(ff.get("method", "flat photo")),
                                 max_radius=float(ff.get("data_to_radius", 1.0)))
            sc = data.get("absolute_scale")
            notes = None
            if sc:
                notes = {k: v for k, v in sc.items() if k not in ("constant_lx", "relative_uncertainty", "relation")}
            dist = data.get("distortion")
            return cls(
                distortion=None if not dist else Distortion.from_dict(dist),
                name=str(data["name"]),
                response=response,
                response_quality=data.get("response_quality"),
                flat=flat,
                black_level=float(data.get("black_level", 0.0)),
                scale_constant=None if not sc else float(sc["constant_lx"]),
                scale_uncertainty=None if not sc else float(sc["relative_uncertainty"]),
                scale_notes=notes,
                make=data.get("make"),
                model=data.get("model"),
                calibrated=bool(data.get("calibrated", False)),
                created_utc=str(data.get("created_utc", "")),
                provenance=tuple(data.get("provenance", ())),
            )
        except (KeyError, TypeError, ValueError) as exc:
            raise BeamshotError(f"{source}: the camera profile is damaged ({exc}); recreate it") from None


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
        raise BeamshotError(f"no camera profile {name_or_path!r} (looked in {profile_dir()} and calibration/); "
                            "create one with 'beamshot camera response' or give a file path")
    try:
        with open(path, encoding="utf-8") as fh:
            data = json.load(fh)
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise BeamshotError(f"{path}: cannot read the camera profile ({exc})") from None
    return CameraProfile.from_dict(data, source=path)


def save_profile(profile: CameraProfile, path: str | None = None) -> str:
    """Write ``profile`` atomically (temporary file, then rename); returns the path."""
    if path is None:
        os.makedirs(profile_dir(), exist_ok=True)
        path = os.path.join(profile_dir(), f"{profile.name}.json")
    folder = os.path.dirname(os.path.abspath(path)) or "."
    os.makedirs(folder, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=".profile-", suffix=".json", dir=folder)
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            json.dump(profile.to_dict(), fh, indent=2)
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
