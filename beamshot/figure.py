"""Figure: one reported number with its uncertainty, unit, method and status."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["Figure", "not_measured"]

#: Status values: the number was measured; is only a bound; is an estimate from assumptions;
#: or could not be measured (``value`` is None and ``reason`` says why).
STATUSES = ("measured", "lower_bound", "upper_bound", "estimate", "not_measured")


@dataclass(frozen=True)
class Figure:
    """A reported figure.  ``uncertainty`` is a 1-sigma standard uncertainty in ``unit``."""

    value: float | None
    uncertainty: float | None
    unit: str
    method: str
    status: str = "measured"
    reason: str | None = None
    #: ``((source, 1-sigma contribution in unit), ...)``: the terms of the uncertainty budget.
    budget: tuple = ()

    def __post_init__(self):
        if self.status not in STATUSES:
            raise ValueError(f"status must be one of {STATUSES}, not {self.status!r}")
        if self.status == "not_measured" and self.value is not None:
            raise ValueError("a figure that is not measured has no value")

    @property
    def known(self) -> bool:
        return self.value is not None and self.status in ("measured", "estimate")

    def to_dict(self) -> dict:
        def clean(x):
            return None if x is None else float(f"{x:.6g}")

        return {
            "value": clean(self.value),
            "uncertainty": clean(self.uncertainty),
            "unit": self.unit,
            "status": self.status,
            "method": self.method,
            "reason": self.reason,
            "budget": {name: clean(u) for name, u in self.budget} if self.budget else None,
        }

    def text(self, digits: int = 3) -> str:
        """Human-readable ``value ± u unit`` (or the reason it is missing)."""
        if self.value is None:
            return f"not measured ({self.reason})"
        prefix = {"lower_bound": "≥ ", "upper_bound": "≤ ", "estimate": "≈ "}.get(self.status, "")
        unit = "°" if self.unit == "deg" else (f" {self.unit}" if self.unit else "")
        if self.uncertainty is not None and self.uncertainty > 0:
            value, u = value_with_uncertainty(self.value, self.uncertainty)
            return f"{prefix}{value} ± {u}{unit}"
        if self.uncertainty == 0 and float(self.value).is_integer() and abs(self.value) < 1e15:
            return f"{prefix}{int(self.value):,}{unit}"  # an exact count ("rings found 1", not "1.00")
        return f"{prefix}{_number(self.value, digits)}{unit}"


def _number(x: float, digits: int) -> str:
    """``digits`` significant figures without exponent notation for everyday magnitudes.

    >>> _number(9505.2, 3), _number(0.08862, 2), _number(61.95, 3)
    ('9,510', '0.089', '62.0')
    """
    if x == 0 or not 1e-4 <= abs(x) < 1e9:
        return f"{x:.{digits}g}"
    rounded = float(f"{x:.{digits}g}")
    decimals = max(0, digits - 1 - int(np.floor(np.log10(abs(rounded)))))
    return f"{rounded:,.{decimals}f}"


def value_with_uncertainty(value: float, uncertainty: float) -> tuple[str, str]:
    """Round the uncertainty to two significant digits and the value to the same place (GUM 7.2.6).

    >>> value_with_uncertainty(0.00235, 0.1107)
    ('0.00', '0.11')
    >>> value_with_uncertainty(10061.0, 2811.0)
    ('10,100', '2,800')
    """
    exponent = int(np.floor(np.log10(uncertainty))) - 1
    decimals = max(0, -exponent)
    scale = 10.0**exponent
    v = round(value / scale) * scale
    u = round(uncertainty / scale) * scale
    return f"{v:,.{decimals}f}", f"{u:,.{decimals}f}"


def not_measured(unit: str, method: str, reason: str) -> Figure:
    """A figure that could not be measured, with the reason in plain words."""
    return Figure(value=None, uncertainty=None, unit=unit, method=method, status="not_measured", reason=reason)
