"""BeamReport: the versioned result of one analysis.

The written form is described by ``schema.json`` beside this module (JSON Schema draft 2020-12)
and by docs/report-schema.md; tests/test_schema.py keeps the three in agreement.  Every float in
the written dict is rounded to :data:`ROUND_DIGITS` significant digits and non-finite values are
written as ``null`` (RFC 8259 JSON has no NaN or Infinity).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..beammap import BeamMap
from ..figure import Figure
from ..profile import RadialProfile

__all__ = ["SCHEMA_NAME", "SCHEMA_VERSION", "CAUTIONS", "ROUND_DIGITS", "BeamReport", "rounded"]

SCHEMA_NAME = "beamshot.report"
#: Major.minor; a reader accepts the same major version and refuses a newer major.
SCHEMA_VERSION = "1.2"
#: Significant digits of every float written to report.json (the figures' precision; more than
#: any figure's uncertainty justifies, and enough to re-read a value without visible change).
ROUND_DIGITS = 6

#: Safety cautions printed in every report (own wording; see docs/safety.md).
CAUTIONS = (
    "Do not look into the beam or aim it at people, animals, vehicles or aircraft.",
    "Powerful lights heat up and can scorch or ignite materials close to the lens; keep the head clear.",
    "These are photometric figures from photographs; they cannot establish an IEC 62471 "
    "photobiological risk group. Follow local rules and the light maker's instructions.",
)


@dataclass(frozen=True)
class BeamReport:
    """Everything one analysis produced.  ``figures`` maps names to :class:`Figure`."""

    figures: dict[str, Figure]
    inputs: list[dict]
    settings: dict
    calibration: dict
    beam_axis: dict
    warnings: list[str]
    profile: RadialProfile = field(repr=False)
    beam: BeamMap = field(repr=False)
    contours: dict = field(repr=False, default_factory=dict)
    created_utc: str = ""
    tool_version: str = ""
    #: Wall-clock seconds of each analysis stage (``beamshot.analysis.STAGES``), for benchmarks and the curious.
    stage_seconds: dict = field(repr=False, default_factory=dict)
    #: Colour across the beam (``beamshot.colour.BeamColour.to_dict()``), or None when colour was not asked for.
    colour: dict | None = field(repr=False, default=None)
    #: The BeamColour itself (with its map cells), for pictures; not written.
    colour_result: object = field(repr=False, default=None, compare=False)
    #: The figures judged against a beam specification (``analyze --spec``; beamshot.qa), or None.
    qa: dict | None = field(repr=False, default=None)
    #: Beam shape and artefact figures (``beamshot.artefacts.SHAPE_ORDER``), written as ``shape``.
    shape_figures: dict = field(repr=False, default_factory=dict)

    def __getitem__(self, name: str) -> Figure:
        return self.figures[name]

    def to_dict(self) -> dict:
        """Plain JSON-ready dict following the documented schema."""

        def arr(a):
            return np.asarray(a, float).tolist()

        p = self.profile
        return rounded({
            "schema": SCHEMA_NAME,
            "schema_version": SCHEMA_VERSION,
            "tool": {"name": "beamshot", "version": self.tool_version, "stage_seconds": dict(self.stage_seconds)},
            "created_utc": self.created_utc,
            "inputs": self.inputs,
            "settings": self.settings,
            "calibration": self.calibration,
            "beam_axis": self.beam_axis,
            "figures": {k: f.to_dict() for k, f in self.figures.items()},
            **({"shape": {k: f.to_dict() for k, f in self.shape_figures.items()}} if self.shape_figures else {}),
            "warnings": list(self.warnings),
            "cautions": list(CAUTIONS),
            **({} if self.colour is None else {"colour": self.colour}),
            **({} if self.qa is None else {"qa": self.qa}),
            "profile": {
                "unit": self.beam.unit,
                "theta_deg": arr(p.theta_deg),
                "mean": arr(p.mean),
                "std": arr(p.std),
                "min": arr(p.min),
                "max": arr(p.max),
            },
        })


def _valid_text(text: str) -> str:
    """``text`` as valid Unicode: a file name read from a file system with non-UTF-8 bytes carries them
    as lone surrogates (PEP 383), which JSON in UTF-8 cannot hold; they become U+FFFD."""
    try:
        text.encode("utf-8")
        return text
    except UnicodeEncodeError:
        return text.encode("utf-8", "surrogateescape").decode("utf-8", "replace")


def rounded(obj, digits: int = ROUND_DIGITS):
    """A JSON-ready copy of ``obj``: floats to ``digits`` significant digits, non-finite floats as
    None, -0.0 as 0.0, numpy scalars and arrays as Python numbers and lists, tuples as lists;
    dicts and lists recursively; text made valid Unicode; bools, ints and None unchanged.

    >>> rounded({"focal_px": 693.3752452815363, "phi": [265.55311615725145, float("nan")], "n": 3})
    {'focal_px': 693.375, 'phi': [265.553, None], 'n': 3}
    """
    kind = type(obj)
    if kind is float:  # the common cases first, by exact type (the same results as the general rules below)
        return float(f"{obj:.{digits}g}") + 0.0 if math.isfinite(obj) else None
    if kind is list:
        return [(float(f"{v:.{digits}g}") + 0.0 if math.isfinite(v) else None) if type(v) is float
                else rounded(v, digits) for v in obj]
    if kind is str or kind is int or obj is None:
        return _valid_text(obj) if kind is str else obj
    if isinstance(obj, (bool, np.bool_)):
        return bool(obj)
    if isinstance(obj, (int, np.integer)):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        x = float(obj)
        return float(f"{x:.{digits}g}") + 0.0 if np.isfinite(x) else None
    if isinstance(obj, str):
        return _valid_text(obj)
    if isinstance(obj, dict):
        return {_valid_text(k) if isinstance(k, str) else k: rounded(v, digits) for k, v in obj.items()}
    if isinstance(obj, (list, tuple, np.ndarray)):
        return [rounded(v, digits) for v in obj]
    return obj
