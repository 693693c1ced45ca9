"""Each colour channel's pixel noise against its signal, measured on the photo itself.

Model (shot plus read noise of a linear sensor, EMVA 1288 photon-transfer form):
``sigma^2(v) = a + b v`` for linear value ``v`` of one channel in one working pixel.

Estimate: second differences along rows, ``d = (v[j-1] - 2 v[j] + v[j+1]) / sqrt(6)``, whose
spread is the noise where the beam varies smoothly (a linear gradient cancels; common practice);
grouped by signal level, each group's robust variance is ``(1.4826 MAD)^2`` (MAD -> sigma for a
normal distribution), and ``a``, ``b`` follow by least squares weighted by each group's count
(both kept non-negative).
Noise correlated over more than a pixel (a JPEG's colour blocks) is not in this model; see
``beamshot.colour.beam_colour.correlation_gain``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["ChannelNoise", "channel_noise"]

#: MAD -> standard deviation for normally distributed values.
_MAD_TO_SIGMA = 1.4826
#: Signal groups (equal counts, by level) at most, and the fewest differences a group needs.
_GROUPS, _MIN_COUNT = 24, 200
#: Pixels sampled at most per channel (a regular subsample keeps it fast on large photos).
_MAX_SAMPLES = 250_000
#: Smallest variance allowed (16-bit quantisation, (1/65535)^2 / 12).
_FLOOR_VAR = (1.0 / 65535.0) ** 2 / 12.0


@dataclass(frozen=True)
class ChannelNoise:
    """``sigma^2(v) = a + b v`` per channel (R, G, B), v linear (1 = clipping)."""

    a: tuple[float, float, float]
    b: tuple[float, float, float]

    def sigma(self, channel: int, v) -> np.ndarray:
        """1-sigma noise of one working pixel of ``channel`` at linear value(s) ``v``."""
        return np.sqrt(self.a[channel] + self.b[channel] * np.clip(np.asarray(v, float), 0.0, None))


def _fit(level: np.ndarray, diff: np.ndarray) -> tuple[float, float]:
    ok = np.isfinite(level) & np.isfinite(diff) & (level > 0)
    level, diff = level[ok], diff[ok]
    if level.size < _MIN_COUNT:
        return float(np.var(diff)) if diff.size else _FLOOR_VAR, 0.0
    groups = int(np.clip(level.size // _MIN_COUNT, 1, _GROUPS))
    order = np.argsort(level, kind="stable")
    level, diff = level[order], diff[order]  # equal-count groups by level: contiguous slices
    bounds = np.linspace(0, level.size, groups + 1).astype(int)
    xs, ys, ws = [], [], []
    for lo, hi in zip(bounds[:-1], bounds[1:]):
        d = diff[lo:hi]
        if d.size < _MIN_COUNT:
            continue
        mad = np.median(np.abs(d - np.median(d)))
        xs.append(float(level[(lo + hi) // 2]))
        ys.append(float((_MAD_TO_SIGMA * mad) ** 2))
        ws.append(float(d.size))
    if len(xs) < 2:
        return max(float(np.mean(ys)) if ys else _FLOOR_VAR, _FLOOR_VAR), 0.0
    x, y, w = np.array(xs), np.array(ys), np.sqrt(np.array(ws))
    a_mat = np.c_[np.ones_like(x), x] * w[:, None]
    (a, b), *_ = np.linalg.lstsq(a_mat, y * w, rcond=None)
    if b < 0:
        a, b = float(np.average(y, weights=w**2)), 0.0
    if a < 0:
        a, b = 0.0, float(np.sum(w**2 * x * y) / np.sum(w**2 * x * x))
    return max(float(a), _FLOOR_VAR), max(float(b), 0.0)


def _second_differences(img: np.ndarray, bad: np.ndarray | None) -> tuple[np.ndarray, np.ndarray]:
    """Levels and second differences along rows, ``(v[j-1] - 2 v[j] + v[j+1]) / sqrt(6)``."""
    img = img.astype(np.float64)
    level = img[:, 1:-1]
    diff = (img[:, :-2] - 2.0 * img[:, 1:-1] + img[:, 2:]) / np.sqrt(6.0)
    if bad is not None:
        level = np.where(bad[:, :-2] | bad[:, 1:-1] | bad[:, 2:], np.nan, level)
    return level.ravel(), diff.ravel()


def channel_noise(rgb: np.ndarray, saturated: np.ndarray | None = None) -> ChannelNoise:
    """Fit the noise model of each channel of a linear image ``(h, w, 3)`` (clipped pixels left out)."""
    h, w = rgb.shape[:2]
    step = max(1, int(np.ceil(np.sqrt(h * w / _MAX_SAMPLES))))
    rows = slice(0, h, step)
    a, b = [], []
    for c in range(3):
        level, diff = _second_differences(rgb[rows, :, c], None if saturated is None else saturated[rows])
        ac, bc = _fit(level, diff)
        a.append(ac)
        b.append(bc)
    return ChannelNoise(tuple(a), tuple(b))
