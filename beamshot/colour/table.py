"""The colour block of the printed table: one line per zone, tint uniformity, the limits.

Reads the report's ``colour`` section (``BeamColour.to_dict()``), so it prints the same from a
fresh analysis or a report.json read back.  Words from :mod:`beamshot.vocabulary`.
"""

from __future__ import annotations

from ..figure import Figure
from ..vocabulary import COLOUR_TERMS

__all__ = ["colour_lines", "figure_text"]


def _fig(d: dict | None) -> Figure | None:
    if d is None:
        return None
    return Figure(d["value"], d["uncertainty"], d["unit"], d["method"], d["status"], d["reason"])


def figure_text(d: dict | None, digits: int = 3) -> str:
    """A figure of the report's colour section as printed (value ± uncertainty, or 'not measured')."""
    return _text(d, digits)


def _text(d: dict | None, digits: int = 3) -> str:
    f = _fig(d)
    if f is None:
        return "-"
    if f.value is None:
        return "not measured"
    return f.text(digits)


def colour_lines(colour: dict) -> list[str]:
    """Lines for the printed table from a report's ``colour`` section."""
    out = [f"  colour ({COLOUR_TERMS['transform'].label}: {colour['transform']['source'] if colour['transform'] else '-'})"]
    if not colour["measured"]:
        out.append(f"    not measured: {colour['reason']}")
        return out
    out.append(f"    {'zone':8s} {COLOUR_TERMS['cct'].label:>22s} {COLOUR_TERMS['duv'].label:>20s}   "
               f"{COLOUR_TERMS['uv'].label:22s} {COLOUR_TERMS['ansi_class'].label}")
    reasons = []
    for zone, d in colour["zones"].items():
        cct = _fig(d["cct"])
        uv = (f"{d['u_prime']['value']:.4f}, {d['v_prime']['value']:.4f}" if d["u_prime"]["value"] is not None
              else "not measured")
        nominal = d["ansi_c78377_nominal_k"]
        out.append(f"    {zone:8s} {_text(d['cct'], 4):>22s} {_text(d['duv']):>20s}   {uv:22s} "
                   f"{'%d K' % nominal if nominal else '-'}")
        if cct.value is None and cct.reason and cct.reason not in reasons:
            reasons.append(cct.reason)
    t = colour["tint"]
    pair = " - ".join(t["zones_pair"]) if t.get("zones_pair") else ""
    out.append(f"    {COLOUR_TERMS['zones_max_delta_uv'].label}: {_text(t['zones_max_delta_uv'], 2)}"
               + (f" ({pair})" if pair else ""))
    out.append(f"    {COLOUR_TERMS['map_max_delta_uv'].label}: {_text(t['map_max_delta_uv'], 2)}")
    for r in reasons:
        out.append(f"    CCT not measured: {r}")
    out.append(f"    ({colour['limits'][0]})")
    return out
