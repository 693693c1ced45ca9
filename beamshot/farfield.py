"""Far-field check: the same light analysed at two wall distances must give the same peak
intensity and hotspot angle within their uncertainties.

The inverse-square law holds for a point source; IES (definition 9.1.1) gives the
"five-times rule" (within 1 % at five times the largest dimension of a source of uniform
luminance) and CIE ILV 17-25-104 asks that the approximation be verified by measurement at
the distance used.  Focusing reflectors converge much farther out (common practice: a large
thrower may need 10 m or more); the two-distance comparison is the measurement that settles it.
"""

from __future__ import annotations

import numpy as np

from .errors import BeamshotError

__all__ = ["AGREEMENT_SIGMAS", "SHARED_SCALE_TERMS", "COMPARED_FIGURES", "combined_sigma", "check_report",
           "compare_distances"]

#: Figures agree when they differ by less than this many combined standard uncertainties.
AGREEMENT_SIGMAS = 2.0


#: Budget terms that are the same error in both reports of one light when both used the same
#: instrument: the lux meter's calibration, or the camera constant of one camera profile.
SHARED_SCALE_TERMS = ("lux meter", "camera constant")


#: The figures compared, their label, unit and accepted value range (open at both ends).
COMPARED_FIGURES = {"peak_intensity": ("peak intensity", "cd", 0.0, float("inf")),
                    "hotspot_angle": ("hotspot angle", "deg", 0.0, 180.0)}

_FIX = "give the report.json written by 'beamshot analyze ... --out DIR' (run it again if the file was edited)"


def _number(x) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool) and bool(np.isfinite(x))


def check_report(report, source: str = "report") -> None:
    """Refuse, in one line naming the field and the fix, a report dict the comparison cannot use:
    no ``settings`` or ``figures`` object, a distance that is not a positive number of metres, or a
    compared figure whose value, uncertainty, budget or unit is of the wrong type, non-finite or
    out of range.  (Figures that were not measured, value null, are allowed: they are reported so.)
    """
    def fail(field_name, value, accepted):
        shown = repr(value)
        shown = shown if len(shown) <= 40 else shown[:37] + "..."
        raise BeamshotError(f"{source}: {field_name} = {shown} is not usable (accepted: {accepted}); {_FIX}")

    if not isinstance(report, dict):
        raise BeamshotError(f"{source}: not a beamshot report (a JSON object is expected); {_FIX}")
    settings = report.get("settings")
    if not isinstance(settings, dict):
        fail("settings", settings, "an object holding distance_m")
    d = settings.get("distance_m")
    if not _number(d) or d <= 0:
        fail("settings.distance_m", d, "the light-to-wall distance, a number of metres above 0")
    figures = report.get("figures")
    if not isinstance(figures, dict):
        fail("figures", figures, "an object of figures")
    for key, (_, unit, lo, hi) in COMPARED_FIGURES.items():
        f = figures.get(key)
        if f is None:
            continue
        if not isinstance(f, dict):
            fail(f"figures.{key}", f, "an object with value, uncertainty and unit")
        if f.get("unit") != unit:
            fail(f"figures.{key}.unit", f.get("unit"), f'"{unit}"')
        v, u = f.get("value"), f.get("uncertainty")
        if v is not None and (not _number(v) or not lo < v < hi):
            fail(f"figures.{key}.value", v, f"null or a number above {lo:g}" + (f" and below {hi:g}" if hi < np.inf else "")
                 + f" {unit}")
        if u is not None and (not _number(u) or u < 0):
            fail(f"figures.{key}.uncertainty", u, f"null or a number of {unit} at least 0")
        budget = f.get("budget")
        if budget is not None and (not isinstance(budget, dict)
                                   or not all(isinstance(k, str) and _number(x) and x >= 0 for k, x in budget.items())):
            fail(f"figures.{key}.budget", budget, f"null or an object of error sources and numbers of {unit} at least 0")
    calibration = report.get("calibration", {})
    if not isinstance(calibration, dict) or not isinstance(calibration.get("absolute_scale", {}) or {}, dict):
        fail("calibration", calibration, "an object holding absolute_scale")


def _shown(fig: tuple, unit: str) -> str:
    """``value ± u unit`` as the figures are printed everywhere (GUM 7.2.6 rounding)."""
    from .figure import Figure

    return Figure(fig[0], fig[1], unit, "").text()


def _fig(report: dict, key: str):
    f = report.get("figures", {}).get(key)
    if not f or f.get("value") is None or f.get("uncertainty") is None:
        return None
    if f.get("status") not in ("measured", "estimate"):
        return None  # a bound (a clipped or too small hotspot) is not a value to compare
    return float(f["value"]), float(f["uncertainty"]), dict(f.get("budget") or {})


def _same_instrument(near: dict, far: dict, term: str) -> bool:
    """Whether a scale term is one shared error: same kind of scale and, for a constant, the same profile."""
    def scale(rep):
        return rep.get("calibration", {}).get("absolute_scale", {}) or {}

    def profile(rep):
        cp = rep.get("calibration", {}).get("camera_profile")
        return cp.get("name") if isinstance(cp, dict) else cp

    kind = {"lux meter": "lux_meter", "camera constant": "camera_constant"}[term]
    if scale(near).get("kind") != kind or scale(far).get("kind") != kind:
        return False
    return term == "lux meter" or profile(near) == profile(far)


def combined_sigma(a: tuple, b: tuple, shared: tuple[str, ...]) -> float:
    """Standard uncertainty of ``b - a``: independent terms add in quadrature, a term shared by both
    (the same error in each, proportional to the value) enters as the difference of its two
    contributions (GUM 5.2.2 with correlation 1).

    >>> round(combined_sigma((100.0, 5.0, {"lux meter": 5.0}), (100.0, 5.0, {"lux meter": 5.0}), ("lux meter",)), 9)
    0.0
    """
    with np.errstate(over="ignore", invalid="ignore"):  # absurd numbers give inf/nan: "cannot be compared"
        var = np.float64(a[1]) ** 2 + np.float64(b[1]) ** 2
        for term in shared:
            ua, ub = np.float64(a[2].get(term, 0.0) or 0.0), np.float64(b[2].get(term, 0.0) or 0.0)
            var += (ub - ua) ** 2 - ua**2 - ub**2
        return float(np.sqrt(max(var, 0.0))) if np.isfinite(var) else float("nan")


def compare_distances(near: dict, far: dict, *, names: tuple[str, str] = ("the first report", "the second report")
                      ) -> dict:
    """Compare two reports (dicts from report.json); the nearer one is detected by distance.

    Each report is checked first (:func:`check_report`); ``names`` name them in messages.
    """
    check_report(near, names[0])
    check_report(far, names[1])
    d1 = float(near["settings"]["distance_m"])
    d2 = float(far["settings"]["distance_m"])
    if abs(d1 - d2) < 0.1 * max(d1, d2):
        raise BeamshotError(f"the two reports are at {d1:g} m and {d2:g} m; compare distances at least 10 % apart "
                            "(better 2x)")
    if d1 > d2:
        near, far, d1, d2 = far, near, d2, d1
    lines = [f"near {d1:g} m vs far {d2:g} m"]
    shared = tuple(t for t in SHARED_SCALE_TERMS if _same_instrument(near, far, t))
    if shared:
        lines.append(f"  shared between the two (cancels in the comparison): {', '.join(shared)} - assumed the "
                     "same instrument at both distances; every other term is counted in both")
    consistent = True
    compared = 0
    for key, (label, unit, *_) in COMPARED_FIGURES.items():
        a, b = _fig(near, key), _fig(far, key)
        if a is None or b is None:
            lines.append(f"  {label}: not measured (or only a bound) in both reports, cannot be compared")
            continue
        diff = b[0] - a[0]
        sigma = combined_sigma(a, b, shared)
        if not np.isfinite(sigma) or not np.isfinite(diff):
            lines.append(f"  {label}: {a[0]:.4g} vs {b[0]:.4g}: the uncertainties are too large to be numbers, "
                         "cannot be compared")
            continue
        if not sigma > 0:
            lines.append(f"  {label}: {a[0]:.4g} vs {b[0]:.4g}: no uncertainty in either report, cannot be compared")
            continue
        ok = abs(diff) <= AGREEMENT_SIGMAS * sigma
        consistent &= ok
        compared += 1
        lines.append(f"  {label}: {_shown(a, unit)} near, {_shown(b, unit)} far: {diff / a[0]:+.1%}, "
                     f"{abs(diff) / sigma:.1f} sigma of the difference - " + ("agree" if ok else "DISAGREE"))
    if not compared:
        lines.append("nothing could be compared: the far-field check needs the peak intensity or the hotspot angle "
                     "with an uncertainty in both reports (give a lux reading or a camera constant for the peak)")
    elif not consistent:
        lines.append("the near wall is not in the far field of this light (a focusing reflector lowers the peak "
                     "and widens the hotspot up close): measure at the larger distance or farther")
    else:
        lines.append("the two distances agree within their uncertainties: the near distance is far enough")
    return {"consistent": consistent, "compared": compared, "lines": lines}
