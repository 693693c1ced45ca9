"""Where the light stands and where it points: a right circular cone fitted to the spill edge.

The bezel cuts the beam at a fixed angle alpha from the light's optical axis, so the spill edge
on the wall is the intersection of a right circular cone (apex at the light, D metres in
front of the wall) with the wall plane: a circle when the light is square to the wall, an
ellipse displaced from the axis when it is tilted.  The five parameters — the light's foot
point on the wall (x0, y0), the axis tilt (yaw right, pitch up) and alpha — are fitted by
least squares to the angular residuals ``angle(P_i - L, a) - alpha`` of the edge points P_i
(Levenberg-Marquardt, beamshot/levenberg.py); their covariance follows from the Jacobian.

The tilt shows mainly in the ellipse's elongation (0.5 % for 5 degrees at alpha = 30 deg),
so it is only as good as the beam is round; a reflector that is not round reads as a tilt.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

from .frames import beam_to_wall
from .levenberg import levenberg_marquardt

__all__ = ["TILT_WARN_DEG", "TILT_APPLY_SIGMAS", "TILT_SIGNIFICANCE_CHI2", "LightPose", "fit_light_pose", "axis_vector", "edge_to_wall",
           "tilt_floor_deg"]

#: Tilts above this are reported as a warning (aim the light square to the wall).
TILT_WARN_DEG = 2.0
#: A fitted tilt is applied only when (yaw, pitch) is significant jointly, ``v^T C^-1 v`` above the
#: chi-square quantile with 2 degrees of freedom at 99.73 % (the "3 sigma" level): for 2 degrees of
#: freedom ``P(chi2 > x) = exp(-x / 2)``, so ``x = -2 ln(0.0027) = 11.83`` (textbook).  Testing the
#: components jointly avoids the bias of a magnitude, which for a zero tilt is about 1.25 sigma
#: (Rayleigh distribution).
TILT_SIGNIFICANCE_CHI2 = float(-2.0 * np.log(0.0027))
#: ... and exceeds this angle: smaller tilts are within what an out-of-round beam mimics.
TILT_APPLY_MIN_DEG = 1.5
#: A fitted tilt beyond this is not a light aimed at the wall but a fit gone astray (an edge seen
#: only in part, or a spill that is not a cone); it is never applied (project choice).
TILT_APPLY_MAX_DEG = 25.0
#: Kept for the warning text: the direction-wise sigmas a tilt must exceed.
TILT_APPLY_SIGMAS = 3.0
#: A tilted reflector's hotspot lies on its axis; a fitted axis that misses the hotspot by more
#: than this (or a fifth of the tilt) is an out-of-round spill, not a tilt.
PEAK_MISS_LIMIT_DEG = 0.5
#: Edge residuals of neighbouring sectors are correlated; the Jacobian's sigma is scaled by this.
_CORRELATION_INFLATION = 2.0


@dataclass(frozen=True)
class LightPose:
    """Fitted light pose: foot point (mm, wall frame), axis unit vector, tilt and its 1-sigma (deg)."""

    foot_mm: tuple[float, float]
    axis: np.ndarray
    tilt_deg: float
    tilt_sigma_deg: float
    tilt_direction_deg: float
    half_angle_deg: float
    rms_deg: float
    points: int
    #: Angle (deg) between the fitted axis and the direction of the hotspot; None if not checked.
    peak_miss_deg: float | None = None
    #: Components: yaw (right) and pitch (up), deg, and their 2 x 2 covariance (deg^2).
    yaw_deg: float = 0.0
    pitch_deg: float = 0.0
    cov_deg2: np.ndarray = field(default_factory=lambda: np.zeros((2, 2)), repr=False)

    @property
    def chi2(self) -> float:
        """``v^T C^-1 v`` of the components (large = a tilt the fit can tell from zero)."""
        v = np.array([self.yaw_deg, self.pitch_deg])
        try:
            return float(v @ np.linalg.solve(self.cov_deg2, v))
        except np.linalg.LinAlgError:
            return 0.0

    @property
    def large(self) -> bool:
        """Jointly significant (chi-square, 2 degrees of freedom) and above the minimum angle."""
        return self.chi2 > TILT_SIGNIFICANCE_CHI2 and TILT_APPLY_MIN_DEG < self.tilt_deg <= TILT_APPLY_MAX_DEG

    @property
    def significant(self) -> bool:
        """Large against its uncertainty, and (when checked) confirmed by the hotspot lying on the axis."""
        if not self.large or self.peak_miss_deg is None:
            return self.large
        return self.peak_miss_deg <= max(PEAK_MISS_LIMIT_DEG, 0.2 * self.tilt_deg)

    @property
    def tilt_unbiased_deg(self) -> float:
        """Magnitude corrected for the noise of its components: ``E|v|^2 = |mu|^2 + tr C``."""
        return float(np.sqrt(max(self.tilt_deg**2 - np.trace(self.cov_deg2), 0.0)))

    @property
    def tilt_bound_deg(self) -> float:
        """An upper bound (about 95 %) on the tilt: the fitted magnitude plus 2 sigma of its widest direction."""
        return float(self.tilt_deg + 2.0 * np.sqrt(max(np.linalg.eigvalsh(self.cov_deg2).max(), 0.0)))


#: Elongation of the spill ellipse per squared tilt (rad^2), ~0.6 for bezel angles of 20-30 deg
#: (derived numerically from the cone-plane intersection).
ELONGATION_PER_TILT2 = 0.6


def tilt_floor_deg(anisotropy: float) -> float:
    """Smallest tilt (deg) distinguishable from a wall mapping whose two axes may differ in scale
    by ``anisotropy`` (relative): the ellipse's elongation grows with the square of the tilt."""
    return float(np.degrees(np.sqrt(max(anisotropy, 0.0) / ELONGATION_PER_TILT2)))


def axis_vector(yaw: float, pitch: float) -> np.ndarray:
    """Unit axis for a light turned ``yaw`` to the right and ``pitch`` up (radians)."""
    v = np.array([np.sin(yaw) * np.cos(pitch), np.sin(pitch), np.cos(yaw) * np.cos(pitch)])
    return v / np.linalg.norm(v)


def fit_light_pose(edge_mm: np.ndarray, distance_m: float, centre_mm: tuple[float, float],
                   peak_mm: tuple[float, float] | None = None, *, anisotropy: float = 0.0) -> LightPose | None:
    """Fit the cone to edge points on the wall (mm); None with fewer than 20 points.

    An ellipse is cut by two cones whose apexes, at a given distance, mirror each other across
    the ellipse's minor axis, so the fit starts from both sides and keeps the solution whose
    axis passes nearer the peak (``peak_mm``, a point on the wall): a reflector's hotspot sits
    on its axis.  Without a peak the smaller tilt is kept.
    """
    p = np.asarray(edge_mm, float).reshape(-1, 2)
    if len(p) < 20:
        return None
    d = distance_m * 1000.0
    c = np.asarray(centre_mm, float)
    starts = [c]
    if peak_mm is not None:
        h = np.asarray(peak_mm, float)
        u = (h - c) / max(np.linalg.norm(h - c), 1e-9)
        # the foot lies beyond the peak as seen from the edge's centre; the mirror apex opposite
        starts += [c + sgn * 0.15 * d * u for sgn in (1.0, -1.0)]
    first = _fit_from(p, d, c, c)
    if first is None:
        return None
    first = _with_floor(first, anisotropy)
    if not first.significant or len(starts) == 1:
        return first  # the mirror ambiguity matters only for a tilt that will be applied
    others = [f for f in (_fit_from(p, d, c, start) for start in starts[1:]) if f is not None]
    fits = [first] + [_with_floor(f, anisotropy) for f in others]
    # keep the fits that explain the edge as well as the best one (the mirror pair ties), then
    # break the tie with the peak (or the smaller tilt)
    best_rms = min(f.rms_deg for f in fits)
    fits = [f for f in fits if f.rms_deg <= 1.02 * best_rms + 1e-6]

    def score(pose):
        if peak_mm is None:
            return pose.tilt_deg
        v = np.r_[np.asarray(peak_mm) - np.asarray(pose.foot_mm), d]
        return float(np.degrees(np.arccos(np.clip(v @ pose.axis / np.linalg.norm(v), -1, 1))))

    best = min(fits, key=score)
    return replace(best, peak_miss_deg=score(best)) if peak_mm is not None else best


def _with_floor(pose: LightPose, anisotropy: float) -> LightPose:
    """Add the mapping's anisotropy floor (independent, in every direction) to the tilt's uncertainty."""
    floor = tilt_floor_deg(anisotropy)
    return replace(pose, tilt_sigma_deg=float(np.hypot(pose.tilt_sigma_deg, floor)),
                   cov_deg2=pose.cov_deg2 + floor**2 * np.eye(2))


def _fit_from(p: np.ndarray, d: float, centre: np.ndarray, foot0: np.ndarray) -> LightPose | None:
    r = np.hypot(p[:, 0] - centre[0], p[:, 1] - centre[1])
    g = (centre - foot0) / d  # aim the starting axis at the edge's centre
    x0 = np.array([foot0[0], foot0[1], np.arctan(g[0]), np.arctan(g[1]), np.arctan(np.median(r) / d)])

    def residuals(q):
        foot = q[:2]
        a = axis_vector(q[2], q[3])
        v = np.c_[p - foot, np.full(len(p), d)]
        v /= np.linalg.norm(v, axis=1, keepdims=True)
        return np.arccos(np.clip(v @ a, -1.0, 1.0)) - q[4]

    def jacobian(q):
        # d arccos(u.a)/dq = -(du/dq . a + u . da/dq) / sqrt(1 - (u.a)^2); u = v/|v|, v = (P - foot, d)
        yaw, pitch = q[2], q[3]
        a = axis_vector(yaw, pitch)
        v = np.c_[p - q[:2], np.full(len(p), d)]
        n = np.linalg.norm(v, axis=1)
        u = v / n[:, None]
        c = np.clip(u @ a, -1.0, 1.0)
        k = -1.0 / np.sqrt(np.maximum(1.0 - c * c, 1e-12))
        da_yaw = np.array([np.cos(yaw) * np.cos(pitch), 0.0, -np.sin(yaw) * np.cos(pitch)])
        da_pitch = np.array([-np.sin(yaw) * np.sin(pitch), np.cos(pitch), -np.cos(yaw) * np.sin(pitch)])
        jac = np.empty((len(p), 5))
        jac[:, 0] = k * (-a[0] + c * u[:, 0]) / n
        jac[:, 1] = k * (-a[1] + c * u[:, 1]) / n
        jac[:, 2] = k * (u @ da_yaw)
        jac[:, 3] = k * (u @ da_pitch)
        jac[:, 4] = -1.0
        return jac

    sol = levenberg_marquardt(residuals, x0, jacobian, x_scale=np.array([d * 0.01, d * 0.01, 0.01, 0.01, 0.01]))
    res = sol.fun
    dof = max(1, len(p) - 5)
    s2 = float(res @ res) / dof
    try:
        cov = np.linalg.inv(sol.jac.T @ sol.jac) * s2
    except np.linalg.LinAlgError:
        return None
    yaw, pitch = sol.x[2], sol.x[3]
    tilt = float(np.degrees(np.hypot(yaw, pitch)))
    g = np.array([yaw, pitch]) / max(np.hypot(yaw, pitch), 1e-12)
    tilt_sigma = _CORRELATION_INFLATION * float(np.degrees(np.sqrt(max(g @ cov[2:4, 2:4] @ g, 0.0))))
    cov_deg2 = _CORRELATION_INFLATION**2 * np.degrees(np.degrees(cov[2:4, 2:4]))
    return LightPose(foot_mm=(float(sol.x[0]), float(sol.x[1])), axis=axis_vector(yaw, pitch), tilt_deg=tilt,
                     tilt_sigma_deg=tilt_sigma, tilt_direction_deg=float(np.degrees(np.arctan2(pitch, yaw))),
                     half_angle_deg=float(np.degrees(sol.x[4])), rms_deg=float(np.degrees(np.sqrt(s2))),
                     points=len(p), yaw_deg=float(np.degrees(yaw)), pitch_deg=float(np.degrees(pitch)),
                     cov_deg2=cov_deg2)


def edge_to_wall(theta: np.ndarray, phi: np.ndarray, foot_mm, axis: np.ndarray | None, distance_m: float) -> np.ndarray:
    """Wall points (mm) of beam-frame directions ``(theta, phi)`` for a light at ``foot_mm``."""
    st = np.sin(theta)
    w = beam_to_wall(np.c_[st * np.cos(phi), st * np.sin(phi), np.cos(theta)], axis)
    t = distance_m * 1000.0 / w[:, 2]
    return np.c_[foot_mm[0] + t * w[:, 0], foot_mm[1] + t * w[:, 1]]
