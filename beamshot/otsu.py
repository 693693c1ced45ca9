"""Otsu's threshold for three classes, without SciPy on the import path of an analysis.

N. Otsu, "A threshold selection method from gray-level histograms", IEEE Trans. SMC 9 (1979)
62-66, section III: the thresholds that split a histogram into classes maximise the between-class
variance, equivalently ``sum_k S_k^2 / P_k`` with ``P_k`` the probability and ``S_k`` the first
moment (in bin indices) of class ``k``.  The histogram has 256 equal bins from the sample's
minimum to its maximum, and a threshold is the centre of the last bin of the class below it (as
``skimage.filters.threshold_multiotsu``, which tests/test_numerics.py compares with; importing
it loads SciPy's ndimage, about 0.3 s per process).  All ``(i, j)`` pairs are tried at once.
"""

from __future__ import annotations

import numpy as np

__all__ = ["three_class_thresholds"]


def three_class_thresholds(sample, nbins: int = 256) -> tuple[float, float]:
    """The two thresholds splitting ``sample`` into three classes (see the module docstring).

    Raises ValueError when the histogram has fewer than three occupied bins.

    >>> three_class_thresholds(np.r_[np.zeros(10), np.ones(10), 2 * np.ones(10)], nbins=3)
    (0.3333333333333333, 1.0)
    """
    v = np.asarray(sample, float).ravel()
    v = v[np.isfinite(v)]
    if v.size == 0:
        raise ValueError("no finite values to threshold")
    counts, edges = np.histogram(v, bins=nbins, range=(float(v.min()), float(v.max())))
    centres = 0.5 * (edges[:-1] + edges[1:])
    prob = counts / counts.sum()
    occupied = np.flatnonzero(prob)
    if occupied.size < 3:
        raise ValueError(f"only {occupied.size} occupied bins: cannot split into three classes")
    if occupied.size == 3:
        return float(centres[occupied[0]]), float(centres[occupied[1]])
    # cumulative probability and moment up to and including bin i
    P = np.cumsum(prob)
    S = np.cumsum(np.arange(nbins) * prob)
    i = np.arange(nbins)[:, None]  # last bin of class 0
    j = np.arange(nbins)[None, :]  # last bin of class 1 (class 2: j+1 .. nbins-1)
    p0, s0 = P[i], S[i]
    p1, s1 = P[j] - P[i], S[j] - S[i]
    p2, s2 = P[-1] - P[j], S[-1] - S[j]
    with np.errstate(divide="ignore", invalid="ignore"):
        score = (np.where(p0 > 0, s0 * s0 / p0, 0.0) + np.where(p1 > 0, s1 * s1 / p1, 0.0)
                 + np.where(p2 > 0, s2 * s2 / p2, 0.0))
    score = np.where((j > i) & (j < nbins - 1), score, -np.inf)
    a, b = np.unravel_index(int(np.argmax(score)), score.shape)
    return float(centres[a]), float(centres[b])
