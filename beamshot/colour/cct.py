"""Correlated colour temperature (CCT) and Duv from CIE 1960 (u, v).

CCT (CIE 15:2004): the temperature of the Planckian radiator whose chromaticity is nearest on
the CIE 1960 (u, v) = (u', 2v'/3) diagram; meaningful only within a distance of 0.05 of the
locus.  Duv (ANSI C78.377): that distance, positive above the locus (greenish), negative below
(pinkish).

Methods (both from colour-science, imported only when these functions run):

- Ohno (2013/2014): Planckian table with cascade refinement, triangular solution near the
  locus and parabolic solution for |Duv| >= 0.002; within 1 K over 1000-20 000 K and
  |Duv| <= 0.03 (the paper's claim).  The reported value.
- Robertson (1968): interpolation between isotemperature lines (Wyszecki & Stiles, Table
  1(3.11)); valid from 1667 K up.  The cross-check.

Uncertainty: first-order propagation of the (u', v') covariance through the Ohno function,
with its Jacobian taken by central differences (JCGM 100, 5.1.3 and 5.2).

References
----------
Y. Ohno, "Practical Use and Calculation of CCT and Duv", LEUKOS 10(1):47-55 (2014),
doi:10.1080/15502724.2014.839020.
A. R. Robertson, "Computation of correlated color temperature and distribution temperature",
JOSA 58(11):1528-1535 (1968).
CIE 15:2004 Colorimetry, 3rd ed. (CCT definition, the 0.05 limit).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["CCT_RANGE_K", "MAX_ABS_DUV", "CctResult", "cct_duv", "cct_duv_robertson", "cct_duv_with_uncertainty"]

#: Range of Ohno's method (the paper's stated accuracy range), K.
CCT_RANGE_K = (1000.0, 20000.0)
#: Largest |Duv| for which a CCT is meaningful (CIE 15:2004).
MAX_ABS_DUV = 0.05
#: Step of the central differences for the Jacobian, in (u', v') units.
_STEP_UV = 1e-5


def _temperature_module():
    """colour-science's ``colour.temperature``, imported here (lazily); a one-line error if it is missing."""
    try:
        from colour import temperature
    except ModuleNotFoundError:
        from ..errors import BeamshotError

        raise BeamshotError("colour across the beam needs the colour-science package; install it with "
                            "'pip install colour-science', or leave out --colour") from None
    return temperature


def _uv1960(uv_prime) -> np.ndarray:
    up = np.asarray(uv_prime, float)
    return np.stack([up[..., 0], up[..., 1] / 1.5], axis=-1)


def cct_duv(uv_prime) -> np.ndarray:
    """(CCT in K, Duv) of (u', v') ``(..., 2)`` by Ohno (2013), colour-science's implementation.

    >>> [round(float(v), 1) for v in cct_duv([0.1978, 0.3122 * 1.5])][:1]  # colour's test value: 6507.47 K
    [6507.5]
    """
    return np.asarray(_temperature_module().uv_to_CCT_Ohno2013(_uv1960(uv_prime)), float)


def cct_duv_robertson(uv_prime) -> np.ndarray:
    """(CCT in K, Duv) of (u', v') ``(..., 2)`` by Robertson (1968), colour-science's implementation."""
    robertson = _temperature_module().uv_to_CCT_Robertson1968
    uv = _uv1960(uv_prime)
    flat = uv.reshape(-1, 2)
    out = np.array([robertson(p) for p in flat], float)
    return out.reshape(uv.shape)


@dataclass(frozen=True)
class CctResult:
    """CCT (K) and Duv with 1-sigma uncertainties, the Robertson cross-check and validity."""

    cct_k: float
    cct_sigma_k: float
    duv: float
    duv_sigma: float
    robertson_cct_k: float
    robertson_duv: float
    valid: bool
    reason: str | None


def cct_duv_with_uncertainty(uv_prime, cov_uv_prime) -> CctResult:
    """CCT and Duv of one (u', v') with the 2x2 covariance carried through (first order)."""
    p = np.asarray(uv_prime, float)
    h = _STEP_UV
    pts = np.array([p, p + [h, 0], p - [h, 0], p + [0, h], p - [0, h]])
    res = cct_duv(pts)
    j = np.array([[(res[1, 0] - res[2, 0]) / (2 * h), (res[3, 0] - res[4, 0]) / (2 * h)],
                  [(res[1, 1] - res[2, 1]) / (2 * h), (res[3, 1] - res[4, 1]) / (2 * h)]])
    cov = j @ np.asarray(cov_uv_prime, float) @ j.T
    t, duv = float(res[0, 0]), float(res[0, 1])
    rob = cct_duv_robertson(p)
    reason = None
    if not np.isfinite(t) or abs(duv) > MAX_ABS_DUV:
        reason = (f"the light is {abs(duv):.3f} from the Planckian locus in (u, v); a CCT means something only "
                  f"within {MAX_ABS_DUV} (CIE 15:2004)")
    elif not CCT_RANGE_K[0] <= t <= CCT_RANGE_K[1]:
        reason = f"{t:.0f} K is outside the range of Ohno's method ({CCT_RANGE_K[0]:.0f}-{CCT_RANGE_K[1]:.0f} K)"
    return CctResult(t, float(np.sqrt(max(cov[0, 0], 0.0))), duv, float(np.sqrt(max(cov[1, 1], 0.0))),
                     float(rob[0]), float(rob[1]), reason is None, reason)


def _planck_uv_prime(temperatures_k) -> np.ndarray:
    """(u', v') of the Planckian locus at ``temperatures_k`` (Ohno 2013 inverse at Duv = 0, colour-science)."""
    t = np.asarray(temperatures_k, float)
    uv = np.asarray(_temperature_module().CCT_to_uv_Ohno2013(np.c_[t, np.zeros_like(t)]), float)
    return np.c_[uv[:, 0], 1.5 * uv[:, 1]]


def iso_cct_line(temperature_k: float, duv_reach: float, n: int = 9) -> np.ndarray:
    """(u', v') points of constant CCT from Duv = -reach to +reach (Ohno 2013 inverse, colour-science)."""
    duv = np.linspace(-duv_reach, duv_reach, n)
    uv = np.asarray(_temperature_module().CCT_to_uv_Ohno2013(np.c_[np.full(n, float(temperature_k)), duv]), float)
    return np.c_[uv[:, 0], 1.5 * uv[:, 1]]
