"""Each colour channel's pixel noise against its signal, measured on the photo itself.

Model (shot plus read noise of a linear sensor, EMVA 1288 photon-transfer form):
``sigma^2(v) = a + b v`` for linear value ``v`` of one channel in one working pixel.

Estimate: second differences along rows, ``d = (v[j-1] - 2 v[j] + v[j+1]) / sqrt(6)``, whose
spread is the noise where the beam varies smoothly (a linear gradient cancels; common practice);
grouped by signal level, each group's robust variance is ``(1.4826 MAD)^2`` (MAD -> sigma for a
normal distribution), and ``a``, ``b`` follow by least squares weighted by each group's count
(both kept non-negative).

The same fit on means of ``k x k`` blocks of working pixels gives the noise at the scale over
which the photo's errors are correlated (a JPEG codes colour in blocks): ``block_a``, ``block_b``.
For uncorrelated noise ``sigma_k^2 = sigma^2 / k^2``; correlated noise keeps more.
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
    #: block size (working pixels) and the model for k x k block means
    block: int = 1
    block_a: tuple[float, float, float] | None = None
    block_b: tuple[float, float, float] | None = None

    def sigma(self, channel: int, v) -> np.ndarray:
        """1-sigma noise of one working pixel of ``channel`` at linear value(s) ``v``."""
        return np.sqrt(self.a[channel] + self.b[channel] * np.clip(np.asarray(v, float), 0.0, None))

    def block_sigma(self, channel: int, v) -> np.ndarray:
        """1-sigma noise of the mean of a ``block`` x ``block`` patch at linear value(s) ``v``."""
        if self.block_a is None:
            return self.sigma(channel, v)
        return np.sqrt(self.block_a[channel] + self.block_b[channel] * np.clip(np.asarray(v, float), 0.0, None))


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


def channel_noise(rgb: np.ndarray, saturated: np.ndarray | None = None, *, block: int = 1) -> ChannelNoise:
    """Fit the noise model of each channel of a linear image ``(h, w, 3)`` (clipped pixels left out),
    for single working pixels and, if ``block`` > 1, for means of ``block`` x ``block`` patches."""
    import cv2

    h, w = rgb.shape[:2]
    step = max(1, int(np.ceil(np.sqrt(h * w / _MAX_SAMPLES))))
    rows = slice(0, h, step)
    a, b, ba, bb = [], [], [], []
    k = max(1, int(block))
    hb, wb = h // k, w // k
    for c in range(3):
        level, diff = _second_differences(rgb[rows, :, c], None if saturated is None else saturated[rows])
        ac, bc = _fit(level, diff)
        a.append(ac)
        b.append(bc)
        if k > 1 and hb >= 3 and wb >= 3:
            plane = np.ascontiguousarray(rgb[:hb * k, :wb * k, c], dtype=np.float32)
            means = cv2.resize(plane, (wb, hb), interpolation=cv2.INTER_AREA)
            bad = None
            if saturated is not None:
                sat = cv2.resize(saturated[:hb * k, :wb * k].astype(np.float32), (wb, hb), interpolation=cv2.INTER_AREA)
                bad = sat > 0
            level, diff = _second_differences(means, bad)
            ac, bc = _fit(level, diff)
            ba.append(ac)
            bb.append(bc)
    if len(ba) == 3:
        return ChannelNoise(tuple(a), tuple(b), k, tuple(ba), tuple(bb))
    return ChannelNoise(tuple(a), tuple(b))
