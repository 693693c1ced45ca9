"""BeamReport: the versioned result of one analysis (schema in docs/report-schema.md)."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..beammap import BeamMap
from ..figure import Figure
from ..profile import RadialProfile

__all__ = ["SCHEMA_NAME", "SCHEMA_VERSION", "CAUTIONS", "BeamReport"]

SCHEMA_NAME = "beamshot.report"
#: Major.minor; a reader accepts the same major version and refuses a newer major.
SCHEMA_VERSION = "1.1"

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

    def __getitem__(self, name: str) -> Figure:
        return self.figures[name]

    def to_dict(self) -> dict:
        """Plain JSON-ready dict following the documented schema."""

        def arr(a):
            return [None if not np.isfinite(x) else float(f"{x:.6g}") for x in np.asarray(a, float)]

        p = self.profile
        return {
            "schema": SCHEMA_NAME,
            "schema_version": SCHEMA_VERSION,
            "tool": {"name": "beamshot", "version": self.tool_version},
            "created_utc": self.created_utc,
            "inputs": self.inputs,
            "settings": self.settings,
            "calibration": self.calibration,
            "beam_axis": self.beam_axis,
            "figures": {k: f.to_dict() for k, f in self.figures.items()},
            "warnings": list(self.warnings),
            "cautions": list(CAUTIONS),
            "profile": {
                "unit": self.beam.unit,
                "theta_deg": arr(p.theta_deg),
                "mean": arr(p.mean),
                "std": arr(p.std),
                "min": arr(p.min),
                "max": arr(p.max),
            },
        }
