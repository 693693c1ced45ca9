"""What the beam photo says about white balance, and what that does to the colour figures.

A camera's white balance scales the three channels so that the light it judged "white" comes
out neutral.  Under automatic white balance (EXIF WhiteBalance = 0, Exif 2.3 tag 0xA403) the
scaling follows the scene, here the beam itself, so the absolute chromaticity and CCT say more
about the camera's choice than about the light.  Differences across the beam survive: the same
channel scaling moves every point of the photo alike (to first order a von Kries scaling,
common practice in colour science).  With manual (fixed) white balance the transform's stated
assumption holds as far as the preset matches it.
"""

from __future__ import annotations

__all__ = ["white_balance_of", "AUTO_WB_NOTE"]

#: The line a report carries when the camera balanced white by itself.
AUTO_WB_NOTE = ("the camera's automatic white balance set the colours (EXIF WhiteBalance = auto): absolute "
                "CCT and Duv are not measured; differences across the beam (delta u'v') still hold - set a fixed "
                "white balance (daylight) or shoot raw for absolute colour")


def white_balance_of(photos) -> str:
    """``"auto"``, ``"manual"`` or ``"unknown"`` for the beam photo(s): auto if any frame says auto."""
    words = [getattr(p, "colour_facts", {}).get("white_balance") for p in photos]
    if "auto" in words:
        return "auto"
    if words and all(w == "manual" for w in words):
        return "manual"
    return "unknown"
