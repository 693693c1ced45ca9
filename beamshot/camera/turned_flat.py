"""Flat field from the beam photos themselves: the camera turned on its tripod between photos.

Physics
-------
A camera turned about its centre of projection (a pan or tilt on the tripod head, no
translation) sees every wall point along the *same* line of sight before and after the turn, so
the point sends the same luminance toward the lens in both photos, whatever the wall's
reflectance or gloss.  Only where it lands in the frame changes.  With a pinhole camera of
intrinsic matrix ``K = [[f, 0, cx], [0, f, cy], [0, 0, 1]]`` (f in pixels from the focal length
in EXIF or given; principal point at the image centre), pixel ``x`` of photo *i* and pixel
``x'`` of photo *j* showing the same wall point are related by the homography of a pure
rotation (Hartley & Zisserman, *Multiple View Geometry*, 2nd ed. 2004, sec. 8.4.5, "from
memory" for the section number)::

    x' ~ H x,   H = K R K^-1,   R = R_j R_i^T   (R_k: rotation of photo k relative to photo 0).

A linear pixel value is ``v_k(x) = e_k V(x) L(x)``: wall luminance L, exposure factor ``e_k``
(t S / N^2, ISO 12232) and the lens shading V (natural cos^4 fall-off and lens/processing
vignetting), the same function of the position in the frame in every photo.  Taking logs and
subtracting, L cancels::

    log v_i(x) - log v_j(H x) = (c_i - c_j) + log V(x) - log V(H x),   c_k = log e_k,

the relation used by Goldman & Chen ("Vignette and exposure calibration and compensation",
ICCV 2005, from memory) and by panorama stitchers to remove vignetting.  V is the radial model
of :mod:`beamshot.camera.flatfield`, ``1/V = 1 + b1 r^2 + b2 r^4 + b3 r^6`` (r normalised to
the half-diagonal; natural cos^4 fall-off is exactly of this form for a pinhole, since
``1/cos^4 a = (1 + tan^2 a)^2``).  V(0) = 1 by definition; the unknown exposure offsets
``c_k`` (k >= 1, c_0 = 0) absorb any overall brightness change between photos.

The turn (a rotation vector per photo, Rodrigues form), the offsets and ``b1..b3`` are fitted
jointly by non-linear least squares (trust-region reflective, scipy) on the log differences of
well-exposed, unclipped pixels seen in both photos, with a soft-L1 loss against JPEG ringing
at the bezel cut-off and a second pass weighted by the scatter measured at each signal level
(iteratively reweighted least squares, common practice).  The start comes from a coarse search
of pan and tilt on small images (any turn within the field of view), with the exposure offset
taken as the median difference and a handful of shading strengths tried; a first pass on a grid
half as fine brings the start close before the fine grid is used.

The model keeps the fewest terms (b1; b1, b2; or all three) that give a fall-off falling
monotonically with radius (vignetting does: cos^4 and the lens's mechanical vignetting both
fall with field angle) and fit not significantly worse than all three (likelihood-ratio test of
nested least-squares models at 99 %, with the residual variance scaled for samples correlated
within a block); dropping terms the data need would bias the curve, keeping terms they cannot
fix would make it wander.  The fall-off's standard uncertainty at the largest radius reached is
reported (Gauss-Newton covariance, same scaling) and a warning given above
``FALLOFF_UNCERTAINTY_WARN``.

The centre of the first photo must stay in the turned photo's view (``MAX_TURN_OF_HALF_VIEW``):
the relation gives only differences of log V, and V = 1 at the centre ties them down only if
pairs reach from a centre to the rest of the frame.

Limits (stated in docs/calibration.md): the response curve must be right - an error of the
tone curve's exponent scales log V by the same factor (the "exponential ambiguity" between
response and vignetting noted by Goldman & Chen, from memory) and cannot be seen in the fit; a
curve of the wrong shape leaves the photos disagreeing (a block residual above
``BLOCK_RESIDUAL_WARN`` is warned about); the pivot should be near the
lens's entrance pupil (a few cm off is negligible for a wall metres away and a smooth beam);
the light and the exposure must not change between photos (a change of exposure alone is
fitted).  The shading is known only out to the radius the beam reached in some photo
(``FlatField.max_radius``); beyond it the polynomial is extrapolated.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import cv2
import numpy as np

from ..errors import BeamshotError
from .flatfield import FlatField

__all__ = ["MIN_TURN_DEG", "RECOMMENDED_TURN_DEG", "LOW_SIGNAL", "MAX_CLIPPED_FRACTION", "MAX_RESIDUAL_RMS",
           "FALLOFF_UNCERTAINTY_WARN", "BLOCK_RESIDUAL_WARN", "MAX_TURN_OF_HALF_VIEW", "TurnedPhoto", "Turn", "TurnedFlatFit", "fit_turned_flat",
           "rotation_homography", "shading", "pan_tilt_roll"]

#: A turn smaller than this (degrees) moves the wall too little across the frame to separate the
#: shading from noise; refused.
MIN_TURN_DEG = 5.0
#: The turn to recommend: a third to a half of the field of view (common practice).
RECOMMENDED_TURN_DEG = "15-25"
#: Linear signal (1 = clipping) below which a pixel is not used: the sRGB toe and noise (common practice).
LOW_SIGNAL = 0.004
#: A photo with more than this fraction of its pixels clipped is refused.
MAX_CLIPPED_FRACTION = 0.01
#: After the best turn, photos whose log differences scatter more than this (RMS) do not match.
MAX_RESIDUAL_RMS = 0.08
#: A warning when the model's block residual exceeds this (common practice: a flat field's own
#: residual is well under 1 % when model and tone curve are right).
BLOCK_RESIDUAL_WARN = 0.01
#: A warning when the fall-off's standard uncertainty at the largest radius reached exceeds this.
FALLOFF_UNCERTAINTY_WARN = 0.01
#: A turn whose axis leaves this fraction of the first photo's half-width (or half-height) is refused:
#: the first photo's centre must stay in view, or the shading is not tied to the centre.
MAX_TURN_OF_HALF_VIEW = 0.9
#: 99 % point of the chi-square distribution with one degree of freedom (statistical tables).
_CHI2_99_1DOF = 6.635
#: Log step between neighbouring grid cells above which a cell counts as on a steep edge (25 %).
STEEP_LOG_STEP = 0.25
#: At least this many sample pairs seen in both photos (on the fit grid).
MIN_SAMPLES = 2000
#: Longest side of the fit grid and of the coarse search grid (pixels).
_FIT_SIDE = 320
_SEARCH_SIDE = 72
#: 1/V at the corner tried in the coarse search: from no shading to nine times darker corners.
_SEARCH_CORNER_GAINS = (1.0, 1.5, 2.0, 3.0, 5.0, 9.0)
#: Soft-L1 scale of the robust loss (log units, i.e. about 2 %).
_ROBUST_SCALE = 0.02
#: Block grid over which the reported model residual is averaged (as for a flat photo).
_RESIDUAL_BLOCKS = 48


@dataclass(frozen=True)
class TurnedPhoto:
    """One photo prepared for the fit: linear luminance (1 = clipping) and clip mask at working size.

    ``bin_factor`` is the working image's binning of the full photo ``full_shape`` (h, w).
    """

    name: str
    luminance: np.ndarray = field(repr=False)
    saturated: np.ndarray = field(repr=False)
    bin_factor: int
    full_shape: tuple[int, int]

    @classmethod
    def from_linear(cls, name: str, image) -> "TurnedPhoto":
        """From a :class:`beamshot.camera.linearize.LinearImage`."""
        return cls(name, image.luminance, image.saturated, image.bin_factor, tuple(image.full_shape))


@dataclass(frozen=True)
class Turn:
    """The rotation of photo ``to_name`` relative to photo ``from_name``; see :func:`pan_tilt_roll`.

    ``angle_deg`` is the whole rotation angle; ``exposure_ratio`` = e_to / e_from as fitted.
    """

    from_name: str
    to_name: str
    rotation_vector: tuple[float, float, float]
    angle_deg: float
    pan_deg: float
    tilt_deg: float
    roll_deg: float
    exposure_ratio: float


@dataclass(frozen=True)
class TurnedFlatFit:
    """Result: the flat field, the turns, and how well the model explains the photos."""

    flat: FlatField
    turns: list
    residual_rms_samples: float
    samples: int
    terms: int
    max_radius: float
    uncertainty_at_max_radius: float
    focal_px: float
    warnings: list

    def falloff(self, radii) -> np.ndarray:
        """Fitted V at radii (fraction of the half-diagonal)."""
        return shading(self.flat.coefficients, np.square(np.asarray(radii, float)))

    def summary(self) -> dict:
        """Plain-data record for a profile's provenance."""
        return {"method": "turned-camera flat: log v_i(x) - log v_j(Hx) = c_i - c_j + log V(x) - log V(Hx), "
                          "H = K R K^-1",
                "focal_px": self.focal_px, "terms": self.terms, "samples": self.samples,
                "residual_rms_samples": self.residual_rms_samples, "residual_rms_blocks": self.flat.residual_rms,
                "data_to_radius": self.max_radius, "uncertainty_at_data_radius": self.uncertainty_at_max_radius,
                "turns": [{"from": t.from_name, "to": t.to_name, "angle_deg": t.angle_deg, "pan_deg": t.pan_deg,
                           "tilt_deg": t.tilt_deg, "roll_deg": t.roll_deg,
                           "rotation_vector": list(t.rotation_vector), "exposure_ratio": t.exposure_ratio}
                          for t in self.turns]}


def shading(coefficients, r2) -> np.ndarray:
    """V(r) = 1 / (1 + b1 r^2 + b2 r^4 + b3 r^6) at squared normalised radii ``r2``.

    >>> float(shading((1.0, 0.0, 0.0), 1.0))
    0.5
    """
    r2 = np.asarray(r2, float)
    g = np.ones_like(r2)
    for k, b in enumerate(coefficients):
        g = g + b * r2 ** (k + 1)
    return 1.0 / g


def rotation_homography(rvec, focal_px: float, full_shape: tuple[int, int]) -> np.ndarray:
    """H = K R K^-1 (Hartley & Zisserman 2004, sec. 8.4.5, from memory) for a rotation vector ``rvec``.

    >>> h = rotation_homography((0.0, 0.0, 0.0), 1000.0, (3000, 4000))
    >>> bool(np.allclose(h, np.eye(3)))
    True
    """
    h, w = full_shape
    k = np.array([[focal_px, 0.0, (w - 1) / 2.0], [0.0, focal_px, (h - 1) / 2.0], [0.0, 0.0, 1.0]])
    r, _ = cv2.Rodrigues(np.asarray(rvec, np.float64).reshape(3, 1))
    return k @ r @ np.linalg.inv(k)


def pan_tilt_roll(rvec) -> tuple[float, float, float]:
    """Pan, tilt and roll (degrees) of a turn given as the rotation vector of ``R`` (d_k = R d_0).

    Pan and tilt say where the first photo's centre is seen after the turn: ``b = R (0, 0, 1)``,
    pan = atan2(-b_x, b_z) (positive: the camera turned toward the image's right), tilt =
    atan2(b_y, hypot(b_x, b_z)) (positive: turned up; image y points down).  Roll is what is
    left: the angle about the optical axis of ``P^T R``, P the smallest rotation taking the axis
    to ``b``.  A round beam centred in the first photo looks the same after any roll about the
    line to its centre, so the roll is only weakly fixed by such a beam; the shading fit does
    not depend on it.

    >>> [round(v, 6) for v in pan_tilt_roll((0.0, -np.radians(20.0), 0.0))]
    [20.0, 0.0, 0.0]
    """
    r, _ = cv2.Rodrigues(np.asarray(rvec, np.float64).reshape(3, 1))
    b = r[:, 2]
    pan = float(np.degrees(np.arctan2(-b[0], b[2])))
    tilt = float(np.degrees(np.arctan2(b[1], np.hypot(b[0], b[2]))))
    z = np.array([0.0, 0.0, 1.0])
    axis = np.cross(z, b)
    s = np.linalg.norm(axis)
    if s < 1e-12:
        p = np.eye(3)
    else:
        p, _ = cv2.Rodrigues((axis / s * np.arctan2(s, b @ z)).reshape(3, 1))
    q = p.T @ r  # a rotation about z
    roll = float(np.degrees(np.arctan2(q[1, 0], q[0, 0])))
    return pan, tilt, roll


# --------------------------------------------------------------------------- grids
@dataclass
class _Grid:
    """A photo reduced to a grid: log luminance (NaN where unusable) and full-resolution pixel centres."""

    name: str
    log_lum: np.ndarray
    lum: np.ndarray
    step: float  # full-resolution pixels per grid cell
    x: np.ndarray  # full-res x of cell centres (1-D)
    y: np.ndarray


def _grid(photo: TurnedPhoto, side: int) -> _Grid:
    lum, sat, b = photo.luminance, photo.saturated, photo.bin_factor
    h, w = lum.shape
    s = max(1, int(np.ceil(max(h, w) / side)))
    nh, nw = h // s, w // s
    block = lum[: nh * s, : nw * s].astype(np.float64).reshape(nh, s, nw, s).mean(axis=(1, 3))
    clipped = sat[: nh * s, : nw * s].reshape(nh, s, nw, s).any(axis=(1, 3))
    clipped = cv2.dilate(clipped.astype(np.uint8), np.ones((3, 3), np.uint8)).astype(bool)
    ok = (block > LOW_SIGNAL) & ~clipped & np.isfinite(block)
    log_lum = np.where(ok, np.log(np.where(ok, block, 1.0)), np.nan)
    # steep edges (the bezel cut-off): a cell whose log value differs from a neighbour's by more
    # than STEEP_LOG_STEP, and its neighbours, are not used; interpolating across a step is biased
    filled = np.where(ok, log_lum, np.log(LOW_SIGNAL))
    step_x = np.abs(np.diff(filled, axis=1))
    step_y = np.abs(np.diff(filled, axis=0))
    steep = np.zeros_like(ok)
    steep[:, 1:] |= step_x > STEEP_LOG_STEP
    steep[:, :-1] |= step_x > STEEP_LOG_STEP
    steep[1:, :] |= step_y > STEEP_LOG_STEP
    steep[:-1, :] |= step_y > STEEP_LOG_STEP
    steep = cv2.dilate(steep.astype(np.uint8), np.ones((3, 3), np.uint8)).astype(bool)
    ok &= ~steep
    log_lum = np.where(ok, log_lum, np.nan)
    step = float(s * b)
    x = (np.arange(nw) + 0.5) * step - 0.5
    y = (np.arange(nh) + 0.5) * step - 0.5
    return _Grid(photo.name, log_lum, np.where(ok, block, np.nan), step, x, y)


def _sample(grid: _Grid, xf: np.ndarray, yf: np.ndarray) -> np.ndarray:
    """Bilinear sample of ``grid.log_lum`` at full-resolution positions (NaN outside or next to unusable cells)."""
    u = (xf + 0.5) / grid.step - 0.5
    v = (yf + 0.5) / grid.step - 0.5
    nh, nw = grid.log_lum.shape
    out = np.full(u.shape, np.nan)
    inside = (u >= 0) & (v >= 0) & (u <= nw - 1) & (v <= nh - 1)
    u, v = u[inside], v[inside]
    i0 = np.minimum(np.floor(v).astype(int), nh - 2)
    j0 = np.minimum(np.floor(u).astype(int), nw - 2)
    fv, fu = v - i0, u - j0
    a = grid.log_lum
    out[inside] = ((1 - fv) * ((1 - fu) * a[i0, j0] + fu * a[i0, j0 + 1])
                   + fv * ((1 - fu) * a[i0 + 1, j0] + fu * a[i0 + 1, j0 + 1]))
    return out


def _map(hom: np.ndarray, xf: np.ndarray, yf: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    wq = hom[2, 0] * xf + hom[2, 1] * yf + hom[2, 2]
    wq = np.where(wq > 1e-9, wq, np.nan)  # points behind the turned camera
    return (hom[0, 0] * xf + hom[0, 1] * yf + hom[0, 2]) / wq, (hom[1, 0] * xf + hom[1, 1] * yf + hom[1, 2]) / wq


# --------------------------------------------------------------------------- start: coarse search
def _start_turn(g0: _Grid, gk: _Grid, focal_px: float, full_shape, r2norm: float) -> tuple[np.ndarray, float, float]:
    """Pan and tilt (as a rotation vector), exposure offset and a rough b1 from a coarse search on small grids."""
    yy, xx = np.meshgrid(g0.y, g0.x, indexing="ij")
    ok = np.isfinite(g0.log_lum)
    xs, ys, l0 = xx[ok], yy[ok], g0.log_lum[ok]
    h, w = full_shape
    cx, cy = (w - 1) / 2.0, (h - 1) / 2.0
    r2_0 = ((xs - cx) ** 2 + (ys - cy) ** 2) / r2norm
    # shading strengths tried: 1/V = 1 + b1 r^2 with 1/V(corner) = gain
    b1s = np.array(_SEARCH_CORNER_GAINS) - 1.0
    half_w = np.degrees(np.arctan(w / 2.0 / focal_px))
    half_h = np.degrees(np.arctan(h / 2.0 / focal_px))
    step = max(0.25, float(np.degrees(np.arctan(g0.step / focal_px))))
    min_overlap = max(50, ok.sum() // 8)

    def cost(pan, tilt):
        rvec = (-np.radians(tilt), -np.radians(pan), 0.0)
        hom = rotation_homography(rvec, focal_px, full_shape)
        xm, ym = _map(hom, xs, ys)
        lk = _sample(gk, xm, ym)
        good = np.isfinite(lk)
        if good.sum() < min_overlap:
            return np.inf, 0.0, 0.0
        r2_k = ((xm[good] - cx) ** 2 + (ym[good] - cy) ** 2) / r2norm
        d = l0[good] - lk[good]
        corr = np.log1p(b1s[:, None] * r2_k[None, :]) - np.log1p(b1s[:, None] * r2_0[good][None, :])
        dd = d[None, :] - corr  # = c_0 - c_k if the shading strength is right
        med = np.median(dd, axis=1)
        spread = np.median(np.abs(dd - med[:, None]), axis=1)
        best = int(np.argmin(spread))
        return float(spread[best]), float(med[best]), float(b1s[best])

    best = (np.inf, 0.0, 0.0, 0.0, 0.0)
    coarse = 4 * step
    for pan in np.arange(-2 * half_w, 2 * half_w + coarse / 2, coarse):
        for tilt in np.arange(-2 * half_h, 2 * half_h + coarse / 2, coarse):
            c, off, b1 = cost(pan, tilt)
            if c < best[0]:
                best = (c, off, b1, pan, tilt)
    for span, st in ((coarse, step), (step, step / 4)):
        p0, t0 = best[3], best[4]
        for pan in np.arange(p0 - span, p0 + span + st / 2, st):
            for tilt in np.arange(t0 - span, t0 + span + st / 2, st):
                c, off, b1 = cost(pan, tilt)
                if c < best[0]:
                    best = (c, off, b1, pan, tilt)
    if not np.isfinite(best[0]):
        raise BeamshotError(f"{g0.name} and {gk.name} share too little of the beam; turn the camera less "
                            f"({RECOMMENDED_TURN_DEG} deg) so that the beam is in both photos")
    _, off, b1, pan, tilt = best
    return np.array([-np.radians(tilt), -np.radians(pan), 0.0]), -off, b1  # c_k = -(c_0 - c_k)


# --------------------------------------------------------------------------- the joint fit
def _pairs(n: int) -> list[tuple[int, int]]:
    return [(i, j) for i in range(n) for j in range(i + 1, n)]


def _unpack(p: np.ndarray, n: int, terms: int):
    rvecs = [np.zeros(3)] + [p[4 * (k - 1): 4 * (k - 1) + 3] for k in range(1, n)]
    offs = [0.0] + [p[4 * (k - 1) + 3] for k in range(1, n)]
    b = tuple(p[4 * (n - 1): 4 * (n - 1) + terms]) + (0.0,) * (3 - terms)
    return rvecs, offs, b


def _relative(rvecs, i, j) -> np.ndarray:
    ri, _ = cv2.Rodrigues(np.asarray(rvecs[i], np.float64).reshape(3, 1))
    rj, _ = cv2.Rodrigues(np.asarray(rvecs[j], np.float64).reshape(3, 1))
    return rj @ ri.T


class _Problem:
    def __init__(self, grids, focal_px, full_shape):
        self.grids = grids
        self.focal_px = focal_px
        self.full_shape = full_shape
        h, w = full_shape
        self.cx, self.cy = (w - 1) / 2.0, (h - 1) / 2.0
        self.r2norm = self.cx**2 + self.cy**2
        self.k = np.array([[focal_px, 0.0, self.cx], [0.0, focal_px, self.cy], [0.0, 0.0, 1.0]])
        self.kinv = np.linalg.inv(self.k)
        self.points = []
        for g in grids:
            yy, xx = np.meshgrid(g.y, g.x, indexing="ij")
            ok = np.isfinite(g.log_lum)
            self.points.append((xx[ok], yy[ok], g.log_lum[ok], g.lum[ok]))
        self.weights = None

    def residuals(self, p, terms, *, full=False):
        n = len(self.grids)
        rvecs, offs, b = _unpack(p, n, terms)
        out, extra = [], []
        for i, j in _pairs(n):
            xs, ys, li, vi = self.points[i]
            hom = self.k @ _relative(rvecs, i, j) @ self.kinv
            xm, ym = _map(hom, xs, ys)
            lj = _sample(self.grids[j], xm, ym)
            r2i = ((xs - self.cx) ** 2 + (ys - self.cy) ** 2) / self.r2norm
            r2j = ((xm - self.cx) ** 2 + (ym - self.cy) ** 2) / self.r2norm
            gi = np.log(np.maximum(1.0 + b[0] * r2i + b[1] * r2i**2 + b[2] * r2i**3, 1e-3))
            with np.errstate(invalid="ignore"):
                gj = np.log(np.maximum(1.0 + b[0] * r2j + b[1] * r2j**2 + b[2] * r2j**3, 1e-3))
            # log v_i - log v_j(Hx) - [(c_i - c_j) + log V(x) - log V(Hx)],  log V = -log(1/V)
            res = li - lj - (offs[i] - offs[j]) + gi - gj
            if full:
                extra.append((i, j, xs, ys, r2i, r2j, vi, np.exp(lj)))
            out.append(res)
        res = np.concatenate(out)
        valid = np.isfinite(res)
        if full:
            return res, valid, extra
        res = np.where(valid, res, 0.0)
        if self.weights is not None:
            res = res * self.weights
        return res


def fit_turned_flat(photos: list[TurnedPhoto], focal_px: float) -> TurnedFlatFit:
    """Fit the turns and the radial shading to two or more photos of one beam; see the module docstring."""
    from scipy.optimize import least_squares

    if len(photos) < 2:
        raise BeamshotError("give at least two photos of the same beam, with the camera turned on the tripod "
                            "between them")
    full_shape = photos[0].full_shape
    for p in photos[1:]:
        if p.full_shape != full_shape:
            raise BeamshotError(f"{p.name}: {p.full_shape[1]}x{p.full_shape[0]} differs from {photos[0].name} "
                                f"{full_shape[1]}x{full_shape[0]}; use one camera and zoom for all photos")
    for p in photos:
        frac = float(p.saturated.mean())
        if frac > MAX_CLIPPED_FRACTION:
            raise BeamshotError(f"{p.name}: {frac:.1%} of the photo is clipped; lower the exposure so that the "
                                "hotspot is not clipped")
    grids = [_grid(p, _FIT_SIDE) for p in photos]
    small = [_grid(p, _SEARCH_SIDE) for p in photos]
    for g in grids:
        if np.isfinite(g.log_lum).sum() < MIN_SAMPLES // 2:
            raise BeamshotError(f"{g.name}: too little of the photo is well exposed (beam above "
                                f"{LOW_SIGNAL:.1%} of full scale); expose longer, or turn the camera less so "
                                "that the beam stays in the frame")
    prob = _Problem(grids, focal_px, full_shape)
    n = len(photos)

    # start: each photo against the first, by the coarse search
    p0, b1s = [], []
    for k in range(1, n):
        rvec, off, b1 = _start_turn(small[0], small[k], focal_px, full_shape, prob.r2norm)
        p0.extend([*rvec, off])
        b1s.append(b1)
    warnings: list[str] = []

    def solve(problem, terms, start_b, weights=None):
        problem.weights = weights
        x0 = np.r_[np.asarray(p0, float), np.asarray(start_b, float)[:terms]]
        return least_squares(problem.residuals, x0, args=(terms,), method="trf", loss="soft_l1",
                             f_scale=_ROBUST_SCALE, x_scale="jac", ftol=1e-6, xtol=1e-6, max_nfev=100)

    # pass 1 on a grid half as fine: all terms, equal weights, from the search's rough shading
    terms = 3
    sol = solve(_Problem([_grid(p, _FIT_SIDE // 2) for p in photos], focal_px, full_shape), terms,
                (float(np.median(b1s)), 0.0, 0.0))
    p0 = list(sol.x[: 4 * (n - 1)])
    _refuse_mismatch(prob, sol.x, terms)
    for k in range(1, n):
        angle = float(np.degrees(np.linalg.norm(sol.x[4 * (k - 1): 4 * (k - 1) + 3])))
        if angle < MIN_TURN_DEG:
            raise BeamshotError(f"the camera turned only {angle:.1f} deg between {photos[0].name} and "
                                f"{photos[k].name}; turn it {RECOMMENDED_TURN_DEG} deg on the tripod between photos")
    _refuse_unanchored(prob, sol.x, terms, [ph.name for ph in photos])
    # pass 2: weights from the scatter at each signal level; drop terms the data cannot carry
    weights = _weights(prob, sol.x, terms)
    fits = {}
    start = tuple(sol.x[4 * (n - 1):])
    for terms in (3, 2, 1):
        fit = solve(prob, terms, start + (0.0, 0.0), weights)
        fits[terms] = (fit, _falloff_uncertainty(prob, fit, terms))
        p0 = list(fit.x[: 4 * (n - 1)])  # the smaller models start from the turns just found
    # the fewest terms that give a monotonic fall-off and fit not significantly worse than three
    # (likelihood-ratio test of nested least-squares models: the cost rises by about half a
    # chi-square with one degree of freedom per dropped term, in units of the residual variance
    # scaled for correlated samples; 99 % point, common practice)
    unit = fits[3][1][3]
    chosen = None
    for terms in (1, 2, 3):
        fit, unc = fits[terms]
        worse = (fit.cost - fits[3][0].cost) / unit if unit > 0 else np.inf
        if _monotonic(_unpack(fit.x, n, terms)[2]) and worse <= 0.5 * _CHI2_99_1DOF * (3 - terms):
            chosen = (fit, terms, unc)
            break
    if chosen is None:
        chosen = (fits[3][0], 3, fits[3][1])
        warnings.append("the fitted fall-off is not monotonic with radius; turn the camera so that the beam "
                        "reaches further toward the corners in one of the photos")
    sol, terms, (r_max, u_max, _cov, _unit) = chosen
    if u_max > FALLOFF_UNCERTAINTY_WARN:
        warnings.append(f"the fall-off at r {r_max:.2f} is uncertain by {u_max:.1%}; turn {RECOMMENDED_TURN_DEG} deg "
                        "and keep more of the beam in both photos, or add a photo turned the other way")

    prob.weights = None
    res, valid, extra = prob.residuals(sol.x, terms, full=True)
    rms = float(np.sqrt(np.mean(res[valid] ** 2))) if valid.any() else np.inf
    samples = int(valid.sum())
    rvecs, offs, b = _unpack(sol.x, n, terms)
    turns = []
    for k in range(1, n):
        rv = np.asarray(rvecs[k], float)
        pan, tilt, roll = pan_tilt_roll(rv)
        turns.append(Turn(from_name=photos[0].name, to_name=photos[k].name, rotation_vector=tuple(float(v) for v in rv),
                          angle_deg=float(np.degrees(np.linalg.norm(rv))), pan_deg=pan, tilt_deg=tilt, roll_deg=roll,
                          exposure_ratio=float(np.exp(offs[k]))))
    if samples < MIN_SAMPLES:
        raise BeamshotError(f"the photos share too little well-exposed beam ({samples} samples); turn the camera "
                            f"less ({RECOMMENDED_TURN_DEG} deg) so that most of the beam is in every photo")
    _refuse_mismatch(prob, sol.x, terms)
    block_rms = _block_rms(res, valid, extra, full_shape)
    flat = FlatField(coefficients=tuple(float(v) for v in b), residual_rms=block_rms, shape=tuple(full_shape),
                     method="turned camera", max_radius=float(r_max))
    if block_rms > BLOCK_RESIDUAL_WARN:
        warnings.append(f"the shading model explains the photos only to {block_rms:.1%} (RMS in blocks): the tone "
                        "curve may be wrong or something changed between the photos; measure the curve first "
                        "(camera response) and keep the light and the exposure fixed")
    if r_max < 0.8:
        warnings.append(f"the beam reached only {r_max:.0%} of the half-diagonal; the shading beyond is "
                        "extrapolated; turn toward a corner (pan and tilt) so that the beam reaches nearer the "
                        "corners in one photo")
    return TurnedFlatFit(flat=flat, turns=turns, residual_rms_samples=rms, samples=samples, terms=terms,
                         max_radius=float(r_max), uncertainty_at_max_radius=float(u_max), focal_px=float(focal_px),
                         warnings=warnings)


def _refuse_mismatch(prob: _Problem, p, terms) -> None:
    """Refuse photos whose log differences scatter more than MAX_RESIDUAL_RMS after the fit."""
    prob.weights = None
    res, valid, _ = prob.residuals(p, terms, full=True)
    rms = float(np.sqrt(np.mean(res[valid] ** 2))) if valid.any() else np.inf
    if rms > MAX_RESIDUAL_RMS:
        raise BeamshotError(f"the photos do not match after the best turn ({rms:.1%} RMS): the light or the camera's "
                            "position changed, or the tone curve is wrong; keep the light fixed, turn only the tripod "
                            "head, and measure the curve first (camera response)")


def _refuse_unanchored(prob: _Problem, p, terms, names) -> None:
    """Refuse a turn that takes the first photo's centre out of the turned photo's view.

    The data give only differences log V(x) - log V(Hx); V is fixed to 1 at the centre, so pairs
    must tie the centre of a photo to the rest of the frame, or the level of the whole curve rests
    on the polynomial's extrapolation (synthetic test: a fall-off 5 % wrong after a 45 deg turn
    with a 72 deg-wide view).
    """
    n = len(prob.grids)
    rvecs, _, _ = _unpack(p, n, terms)
    for k in range(1, n):
        hom = prob.k @ _relative(rvecs, 0, k) @ prob.kinv
        x, y = _map(hom, np.array([prob.cx]), np.array([prob.cy]))
        inside = (np.isfinite(x[0]) and abs(x[0] - prob.cx) <= MAX_TURN_OF_HALF_VIEW * prob.cx
                  and abs(y[0] - prob.cy) <= MAX_TURN_OF_HALF_VIEW * prob.cy)
        if not inside:
            angle = float(np.degrees(np.linalg.norm(rvecs[k])))
            raise BeamshotError(f"the camera turned {angle:.0f} deg between {names[0]} and {names[k]}, so far that "
                                f"the first photo's centre left the view; turn it {RECOMMENDED_TURN_DEG} deg (less "
                                "than half the field of view)")


def _monotonic(b) -> bool:
    """1/V non-decreasing on 0 <= r <= 1 (vignetting falls with radius)."""
    r2 = np.linspace(0.0, 1.0, 201)
    deriv = b[0] + 2 * b[1] * r2 + 3 * b[2] * r2**2  # d(1/V)/d(r^2)
    return bool(np.all(deriv >= -1e-9)) and bool(np.all(1.0 / shading(b, r2) > 0))


def _weights(prob: _Problem, p, terms) -> np.ndarray:
    """1/sigma per sample, sigma the robust scatter of the residuals at the sample's signal level."""
    prob.weights = None
    res, valid, extra = prob.residuals(p, terms, full=True)
    level = np.concatenate([np.minimum(vi, vj) for (_, _, _, _, _, _, vi, vj) in extra])
    lv = np.log(np.where(valid, level, 1.0))
    edges = np.quantile(lv[valid], np.linspace(0, 1, 11))
    idx = np.clip(np.searchsorted(edges, lv, side="right") - 1, 0, 9)
    sig = np.ones(10)
    for k in range(10):
        sel = valid & (idx == k)
        if sel.sum() > 20:
            r = res[sel]
            sig[k] = 1.4826 * np.median(np.abs(r - np.median(r)))
    sig = np.maximum(sig, 1e-3)
    w = 1.0 / sig[idx]
    return w / np.median(w[valid]) if valid.any() else w


def _falloff_uncertainty(prob: _Problem, sol, terms) -> tuple[float, float, np.ndarray, float]:
    """Largest radius reached by the data, the standard uncertainty of log V there, the
    parameters' covariance, and the cost of one unit of chi-square (``s^2 * inflation / 2``).

    Gauss-Newton covariance ``s^2 (J^T J)^-1`` (s from the residuals' MAD), scaled for residuals
    that are correlated within a block (JPEG blocks, the fit grid's interpolation): as if only one
    sample per block of the 48-wide residual grid were independent (common practice for
    correlated residuals, from memory: the variance grows by the number of correlated samples).
    """
    n = len(prob.grids)
    res, valid, extra = prob.residuals(sol.x, terms, full=True)
    radii = np.sqrt(np.concatenate([np.r_[r2i, r2j] for (_, _, _, _, r2i, r2j, _, _) in extra]))
    ok = np.concatenate([np.r_[valid_part, valid_part] for valid_part in _split(valid, extra)])
    r_max = float(np.quantile(radii[ok], 0.99)) if ok.any() else 0.0
    j = sol.jac
    used = sol.fun != 0
    if used.sum() <= j.shape[1]:
        return r_max, np.inf, np.full((j.shape[1],) * 2, np.inf), 0.0
    f = sol.fun[used]
    s2 = float((1.4826 * np.median(np.abs(f - np.median(f)))) ** 2)
    blocks = max(1, _block_count(valid, extra, prob.full_shape))
    inflation = max(1.0, used.sum() / blocks)
    cov = np.linalg.pinv(j.T @ j) * s2 * inflation
    nb = terms
    cb = cov[-nb:, -nb:]
    _, _, b = _unpack(sol.x, n, terms)
    r2 = r_max**2
    gain = 1.0 / shading(b, r2)
    grad = np.array([r2 ** (k + 1) for k in range(nb)]) / gain  # d log(1/V) / d b_k
    return r_max, float(np.sqrt(max(0.0, grad @ cb @ grad))), cov, 0.5 * s2 * inflation


def _block_count(valid, extra, full_shape) -> int:
    h, w = full_shape
    bs = max(h, w) / _RESIDUAL_BLOCKS
    count, start = 0, 0
    for (i, j, xs, ys, *_rest) in extra:
        v = valid[start: start + len(xs)]
        count += len(np.unique((ys[v] // bs).astype(int) * 100_000 + (xs[v] // bs).astype(int)))
        start += len(xs)
    return count


def _split(valid, extra):
    out, start = [], 0
    for e in extra:
        m = len(e[2])
        out.append(valid[start: start + m])
        start += m
    return out


def _block_rms(res, valid, extra, full_shape) -> float:
    """RMS of the residuals averaged in blocks of a 48-wide grid over photo i, divided by sqrt(2)
    (each residual compares two photos): comparable with a flat photo's block residual."""
    h, w = full_shape
    bs = max(h, w) / _RESIDUAL_BLOCKS
    sums, counts = {}, {}
    start = 0
    for (i, j, xs, ys, *_rest) in extra:
        m = len(xs)
        r = res[start: start + m]
        v = valid[start: start + m]
        keys = (i * 10_000 + j) * 10_000_000 + (ys[v] // bs).astype(int) * 10_000 + (xs[v] // bs).astype(int)
        uk, inv = np.unique(keys, return_inverse=True)
        s = np.bincount(inv, weights=r[v])
        c = np.bincount(inv)
        for key, ss, cc in zip(uk, s, c):
            sums[key] = sums.get(key, 0.0) + ss
            counts[key] = counts.get(key, 0) + cc
        start += m
    if not sums:
        return float("inf")
    means = np.array([sums[k] / counts[k] for k in sums if counts[k] >= 4])
    if means.size == 0:
        return float("inf")
    return float(np.sqrt(np.mean(means**2)) / np.sqrt(2.0))
