"""Merge a bracket of linearised beam photos into one linear image.

Each frame ``i`` is brought to the units of the reference frame (the shortest exposure, whose
hotspot is least likely to clip) by ``s_i = e_ref / e_i`` with relative exposure
``e = t S / N^2``.  The merged value is the weighted mean ``sum w_i s_i v_i / sum w_i`` with
``w_i = hat(code_i) * e_i``: the hat (triangle) weight of Debevec & Malik (1997) on the encoded
level, zero within 2 % of black and from 95 % of full code, and zero for clipped pixels; the
factor ``e_i`` is the inverse-variance weight for shot-noise-limited signals (a frame exposed
k times longer has k times the signal-to-noise power).

Exposure ratios from EXIF are checked against the pixels: the median ratio of the two frames
over pixels well exposed in both (10-90 % of code).  A disagreement above
``RATIO_TOLERANCE`` gives a warning; a frame without EXIF exposure uses the measured ratio.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from ..errors import BeamshotError
from .linearize import LinearImage
from .response import Response

__all__ = ["RATIO_TOLERANCE", "MergeResult", "merge_bracket"]

RATIO_TOLERANCE = 0.03
_LO, _HI = 0.02, 0.95


@dataclass(frozen=True)
class MergeResult:
    """The merged image (in units of frame ``reference``) and what was checked."""

    image: LinearImage
    reference: int
    ratios_used: tuple[float, ...]
    ratios_exif: tuple[float | None, ...]
    ratios_measured: tuple[float | None, ...]
    warnings: tuple[str, ...]


def _hat(code: np.ndarray) -> np.ndarray:
    mid = 0.5 * (_LO + _HI)
    w = np.where(code <= mid, (code - _LO) / (mid - _LO), (_HI - code) / (_HI - mid))
    return np.clip(w, 0.0, 1.0).astype(np.float32)


def _measured_ratio(a: LinearImage, b: LinearImage, response: Response) -> float | None:
    """Median of b / a over pixels well exposed in both (10-90 % of code), or None."""
    ca = response.encode(np.clip(a.luminance, 0, 1))
    cb = response.encode(np.clip(b.luminance, 0, 1))
    ok = (ca > 0.1) & (ca < 0.9) & (cb > 0.1) & (cb < 0.9) & ~a.saturated & ~b.saturated
    if ok.sum() < 200:
        return None
    return float(np.median(b.luminance[ok] / a.luminance[ok]))


def merge_bracket(frames: list[LinearImage], exposures: list[float | None], response: Response,
                  *, names: list[str] | None = None) -> MergeResult:
    """Merge linear frames of one scene; ``exposures`` are ``t S / N^2`` (None if unknown)."""
    n = len(frames)
    names = names or [f"frame {i + 1}" for i in range(n)]
    if n < 2:
        raise BeamshotError("a bracket needs at least two photos")
    for f, name in zip(frames[1:], names[1:]):
        if f.full_shape != frames[0].full_shape:
            raise BeamshotError(f"{name}: {f.full_shape[1]}x{f.full_shape[0]} differs from {names[0]} "
                                f"({frames[0].full_shape[1]}x{frames[0].full_shape[0]}); a bracket must come "
                                "from one camera and position")
    warnings: list[str] = []
    # order frames by exposure (EXIF, else by brightness of well-exposed pixels)
    brightness = [float(np.median(f.luminance)) for f in frames]
    keys = [e if e is not None else None for e in exposures]
    if all(k is not None for k in keys):
        order = list(np.argsort(keys))
    else:
        order = list(np.argsort(brightness))
    ref = int(order[0])
    ratios_used = [1.0] * n
    ratios_exif: list[float | None] = [None] * n
    ratios_meas: list[float | None] = [None] * n
    ratios_exif[ref] = 1.0 if exposures[ref] is not None else None
    ratios_meas[ref] = 1.0
    for prev, cur in zip(order[:-1], order[1:]):
        measured = _measured_ratio(frames[prev], frames[cur], response)
        exif = exposures[cur] / exposures[prev] if exposures[cur] is not None and exposures[prev] is not None else None
        chain = ratios_used[prev]
        ratios_meas[cur] = None if measured is None else chain * measured
        ratios_exif[cur] = None if exif is None or ratios_exif[prev] is None else ratios_exif[prev] * exif
        if exif is not None:
            ratios_used[cur] = chain * exif
            if measured is not None and abs(measured / exif - 1) > RATIO_TOLERANCE:
                warnings.append(f"{names[cur]}: the pixels say {measured:.3g}x the exposure of {names[prev]}, "
                                f"EXIF says {exif:.3g}x ({measured / exif - 1:+.1%}); the merge uses EXIF - "
                                "check for automatic exposure or processing changes")
        elif measured is not None:
            ratios_used[cur] = chain * measured
            warnings.append(f"{names[cur]}: no exposure in EXIF; using the measured ratio {measured:.3g}x")
        else:
            raise BeamshotError(f"{names[cur]}: no exposure in EXIF and too little overlap with {names[prev]} "
                                "to measure it; give EXIF or use smaller steps")
    num_rgb = np.zeros_like(frames[0].rgb)
    den = np.zeros(frames[0].shape, np.float32)
    for i, f in enumerate(frames):
        code = response.encode(np.clip(f.luminance, 0.0, 1.0)).astype(np.float32)
        w = _hat(code) * np.float32(ratios_used[i])
        w[f.saturated] = 0.0
        s = np.float32(1.0 / ratios_used[i])
        num_rgb += (w * s)[..., None] * f.rgb
        den += w
    empty = den <= 0
    merged = np.where(empty[..., None], 0.0, num_rgb / np.where(empty, 1.0, den)[..., None]).astype(np.float32)
    if np.any(empty):
        # no frame usable: clipped in every frame -> take the reference (still clipped);
        # black in every frame -> take the longest exposure, scaled
        longest = int(order[-1])
        fill = np.where(frames[ref].saturated[..., None], frames[ref].rgb,
                        frames[longest].rgb / np.float32(ratios_used[longest]))
        merged[empty] = fill[empty]
    # clipped only where even the shortest exposure clipped
    out = replace(frames[ref].with_values(merged), saturated=frames[ref].saturated.copy())
    return MergeResult(image=out, reference=ref, ratios_used=tuple(ratios_used), ratios_exif=tuple(ratios_exif),
                       ratios_measured=tuple(ratios_meas), warnings=tuple(warnings))
