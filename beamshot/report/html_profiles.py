"""Profile charts for the HTML report, drawn as inline SVG (no image file, no script, scales to any width).

Two charts from a report's map: the radial profile (azimuthal mean against the full cone angle,
log intensity, with the hotspot, field and spill angles marked) and the horizontal and vertical
plane profiles (signed angle from the beam axis, linear intensity).  Series are told apart by
colour (Okabe-Ito blue and vermillion, colour-blind safe) *and* by dash pattern, and named in a
legend.  All numbers are in the report's unit (cd, or relative to the peak).
"""

from __future__ import annotations

import math

import numpy as np

from .html_page import esc

__all__ = ["nice_ticks", "svg_chart"]

_W, _H = 460, 310
_L, _R, _T, _B = 62, 12, 52, 46  # margins (SVG units)
_COLOURS = ("#0072B2", "#D55E00", "#009E73")
_DASHES = ("", "7 4", "2 3")
#: Points kept per series (the map's 0.1 deg rows thinned evenly; enough for a 640-unit wide chart).
MAX_POINTS = 700
#: Decades shown on a log axis below its top (the dark wall's noise lies further down).
MAX_DECADES = 5


def nice_ticks(lo: float, hi: float, n: int = 6) -> list[float]:
    """Round tick values (1, 2, 2.5, 5 x 10^k steps) covering [lo, hi].

    >>> nice_ticks(0, 60)
    [0.0, 10.0, 20.0, 30.0, 40.0, 50.0, 60.0]
    """
    if not (math.isfinite(lo) and math.isfinite(hi)) or hi <= lo:
        return [lo]
    raw = (hi - lo) / max(n, 1)
    mag = 10 ** math.floor(math.log10(raw))
    step = next(s * mag for s in (1, 2, 2.5, 5, 10) if s * mag >= raw)
    first = math.ceil(lo / step - 1e-9) * step
    out = []
    t = first
    while t <= hi + 1e-9 * step:
        out.append(round(t, 10) + 0.0)
        t += step
    return out


def _fmt(x: float) -> str:
    if x == 0:
        return "0"
    if abs(x) >= 1e5 or abs(x) < 1e-3:
        return f"{x:.0e}".replace("e+0", "e").replace("e-0", "e-")
    return f"{x:,.6g}"


def _thin(x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    step = max(1, math.ceil(len(x) / MAX_POINTS))
    return x[::step], y[::step]


def svg_chart(series: list[tuple[str, np.ndarray, np.ndarray]], *, xlabel: str, ylabel: str, log_y: bool,
              x_range: tuple[float, float], marks: list[tuple[float, str]] = (), title: str = "",
              gid: str = "chart", floor: float | None = None) -> str:
    """An SVG line chart.  ``series``: (name, x, y); non-finite or (log) non-positive points break the line.

    ``marks``: vertical lines at x with a short label.  ``floor`` (log axis): values below it (the
    noise level) are not drawn and the axis starts at its decade.  Returns ``<svg>`` markup (all
    text escaped).
    """
    floor = floor if (log_y and floor is not None and math.isfinite(floor) and floor > 0) else None
    x0, x1 = x_range
    ys = [np.asarray(y, float)[(np.asarray(x, float) >= x0) & (np.asarray(x, float) <= x1)] for _, x, y in series]
    low = floor if floor is not None else 0.0
    finite = np.concatenate([y[np.isfinite(y) & ((y > low) if log_y else True)] for y in ys] or [np.array([])])
    if finite.size == 0:
        return f'<p class="note">No {esc(title or "profile")} could be drawn: no finite values.</p>'
    if log_y:
        y1 = math.log10(finite.max()) + 0.08  # a little headroom above the largest value
        y0 = float(max(math.floor(math.log10(finite.min())), math.floor(y1 - MAX_DECADES)))
        yt = [float(k) for k in range(math.ceil(y0), math.floor(y1) + 1)]
        ylab = [_fmt(10 ** k) for k in yt]

        def ty(v):
            return np.log10(v)
    else:
        y0, y1 = 0.0, float(finite.max()) * 1.05
        yt = nice_ticks(y0, y1, 5)
        ylab = [_fmt(t) for t in yt]

        def ty(v):
            return v
    pw, ph = _W - _L - _R, _H - _T - _B

    def px(x):
        return _L + (np.asarray(x, float) - x0) / (x1 - x0) * pw

    def py(v):
        return _T + ph - (np.asarray(v, float) - y0) / (y1 - y0) * ph

    out = [(f'<svg viewBox="0 0 {_W} {_H}" role="img" '
            f'aria-label="{esc(title)}" id="{esc(gid)}" font-family="system-ui, sans-serif" font-size="13">'),
           f'<rect x="{_L}" y="{_T}" width="{pw}" height="{ph}" fill="#ffffff" stroke="#b9b5aa"/>']
    for t, lab in zip(yt, ylab):
        if y0 - 1e-9 <= t <= y1 + 1e-9:
            yy = float(py(t))
            out.append(f'<line x1="{_L}" x2="{_L + pw}" y1="{yy:.1f}" y2="{yy:.1f}" stroke="#e6e3da"/>')
            out.append(f'<text x="{_L - 6}" y="{yy + 4:.1f}" text-anchor="end" fill="#444">{esc(lab)}</text>')
    for t in nice_ticks(x0, x1, 5):
        xx = float(px(t))
        out.append(f'<line x1="{xx:.1f}" x2="{xx:.1f}" y1="{_T}" y2="{_T + ph}" stroke="#eeebe3"/>')
        out.append(f'<text x="{xx:.1f}" y="{_T + ph + 16}" text-anchor="middle" fill="#444">{esc(_fmt(t))}</text>')
    for i, (xm, lab) in enumerate(marks):
        if x0 <= xm <= x1:
            xx = float(px(xm))
            out.append(f'<line x1="{xx:.1f}" x2="{xx:.1f}" y1="{_T}" y2="{_T + ph}" stroke="#1f2430" '
                       f'stroke-width="1" stroke-dasharray="{("", "5 3", "1 3")[i % 3]}"/>')
            right = xx > _L + 0.7 * pw  # near the right edge: label to the left of its line
            out.append(f'<text x="{xx + (-3 if right else 3):.1f}" y="{_T + 12 + 13 * i}" '
                       f'text-anchor="{"end" if right else "start"}" fill="#1f2430" font-size="11" paint-order="stroke" stroke="#ffffff" stroke-width="3">{esc(lab)}</text>')
    for i, (name, x, y) in enumerate(series):
        x, y = _thin(np.asarray(x, float), np.asarray(y, float))
        ok = np.isfinite(y) & (x >= x0) & (x <= x1) & ((y > low) if log_y else True)
        with np.errstate(divide="ignore", invalid="ignore"):
            yv = np.clip(ty(np.where(ok, y, 1.0)), y0, y1)
            xs_px, ys_px = px(x).tolist(), py(yv).tolist()  # element by element as px(x[k]), py(yv[k])
        runs, cur = [], []
        for k, drawn in enumerate(ok.tolist()):
            if drawn:
                cur.append(f"{xs_px[k]:.1f},{ys_px[k]:.1f}")
            elif cur:
                runs.append(cur)
                cur = []
        if cur:
            runs.append(cur)
        dash = _DASHES[i % len(_DASHES)]
        for run in runs:
            out.append(f'<polyline fill="none" stroke="{_COLOURS[i % 3]}" stroke-width="2" '
                       f'stroke-dasharray="{dash}" stroke-linejoin="round" points="{" ".join(run)}"/>')
        lx = _L + 190 * i
        ly = _T - 10
        out.append(f'<line x1="{lx}" x2="{lx + 26}" y1="{ly - 4}" y2="{ly - 4}" stroke="{_COLOURS[i % 3]}" '
                   f'stroke-width="2.5" stroke-dasharray="{dash}"/>')
        out.append(f'<text x="{lx + 31}" y="{ly}" fill="#1f2430">{esc(name)}</text>')
    out.append(f'<text x="{_L + pw / 2:.1f}" y="{_H - 10}" text-anchor="middle" fill="#1f2430">{esc(xlabel)}</text>')
    out.append(f'<text transform="translate(14 {_T + ph / 2:.1f}) rotate(-90)" text-anchor="middle" '
               f'fill="#1f2430">{esc(ylabel)}</text>')
    if title:
        out.append(f'<text x="{_L}" y="18" fill="#1f2430" font-weight="600">{esc(title)}</text>')
    out.append("</svg>")
    return "".join(out)
