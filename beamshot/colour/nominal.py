"""Nominal CCT class of ANSI C78.377 (chromaticity specification for solid-state lighting).

The standard groups white light into nominal classes, each a quadrangle of CCT and Duv.  The
table below gives each class's target CCT and tolerance and target Duv and tolerance, **from
memory** (REFERENCES.md 5.7: not confirmed in the standard's text; the nominal set 2700, 3000,
3500, 4000, 4500, 5000, 5700, 6500 K is confirmed on Ohno's CORM 2011 chart).  The quadrangles
are approximated here by the CCT range and the Duv range of each class, so a point near a
corner may be classed differently from the standard's drawing: the class is given as a guide,
never as a certification.
"""

from __future__ import annotations

__all__ = ["ANSI_C78377_CLASSES", "nominal_class"]

#: (nominal K, target CCT K, CCT tolerance K, target Duv, Duv tolerance) - from memory, see above.
ANSI_C78377_CLASSES = (
    (2700, 2725, 145, 0.000, 0.006),
    (3000, 3045, 175, 0.000, 0.006),
    (3500, 3465, 245, 0.000, 0.006),
    (4000, 3985, 275, 0.001, 0.006),
    (4500, 4503, 243, 0.001, 0.006),
    (5000, 5028, 283, 0.002, 0.006),
    (5700, 5665, 355, 0.002, 0.006),
    (6500, 6530, 510, 0.003, 0.006),
)


def nominal_class(cct_k: float, duv: float) -> int | None:
    """The nominal CCT (K) of the ANSI C78.377 class holding (CCT, Duv), or None outside all classes.

    >>> nominal_class(2750.0, 0.001), nominal_class(4000.0, 0.004), nominal_class(4000.0, 0.012)
    (2700, 4000, None)
    """
    for nominal, target, tol, duv_target, duv_tol in ANSI_C78377_CLASSES:
        if abs(cct_k - target) <= tol and abs(duv - duv_target) <= duv_tol:
            return nominal
    return None
