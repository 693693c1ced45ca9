"""BeamMap: luminous intensity on a regular polar angular grid about the beam axis.

``intensity[k, j]`` is the intensity toward polar angle ``theta[k]`` (from the beam axis)
and azimuth ``phi[j]`` (counter-clockwise from the right, as seen from behind the light);
both grids hold cell *centres*, in radians, with steps ``d_theta`` and ``d_phi``.  Values
are NaN where the photo does not cover the direction.  Units are ``unit``: ``"cd"`` with an
absolute scale, otherwise ``"relative"`` (linear camera units times m^2).

Conversion from the wall (light square to the wall, axis at the wall foot point):
``I = E D^2 / cos^3(theta)`` (IES 9.1.1/9.1.2, see :mod:`beamshot.photometry`).
"""

from __future__ import annotations

import threading
from dataclasses import dataclass, field, replace
from functools import cached_property

import cv2
import numpy as np

from .camera.linearize import LinearImage
from .frames import beam_frame, beam_to_wall
from .photometry import intensity_from_illuminance, intensity_from_wall_illuminance, polar_cell_solid_angles
from .wall import WallMapping

__all__ = ["THETA_STEP_DEG", "PHI_STEP_DEG", "BeamMap", "build_beam_map", "directions"]

#: Polar-angle step of the grid, degrees (resolves a 2-degree hotspot with 20 steps).
THETA_STEP_DEG = 0.1
#: Azimuth step of the grid, degrees.
PHI_STEP_DEG = 2.0
#: Largest polar angle mapped, degrees.
THETA_LIMIT_DEG = 85.0


@dataclass(frozen=True)
class BeamMap:
    """Intensity on a polar grid; see the module docstring for conventions."""

    theta: np.ndarray = field(repr=False)
    phi: np.ndarray = field(repr=False)
    intensity: np.ndarray = field(repr=False)
    saturated: np.ndarray = field(repr=False)
    distance_m: float
    unit: str = "relative"
    #: Outline of the photo's view as ``(n, 2)`` azimuthal-equidistant angles in degrees
    #: (``theta cos phi``, ``theta sin phi``), for pictures; None if unknown.
    footprint_deg: np.ndarray | None = field(default=None, repr=False)

    @property
    def d_theta(self) -> float:
        return float(self.theta[1] - self.theta[0])

    @property
    def d_phi(self) -> float:
        return float(2 * np.pi / len(self.phi))

    @property
    def valid(self) -> np.ndarray:
        return np.isfinite(self.intensity)

    def cell_solid_angles(self) -> np.ndarray:
        """Solid angle (sr) of each cell, shape ``(n_theta, 1)`` (broadcasts over phi)."""
        edges = np.append(self.theta - self.d_theta / 2, self.theta[-1] + self.d_theta / 2)
        edges[0] = max(edges[0], 0.0)
        return polar_cell_solid_angles(edges, len(self.phi))[:, None]

    def scaled(self, factor: float, unit: str) -> "BeamMap":
        """A copy with intensities multiplied by ``factor`` and a new unit."""
        return replace(self, intensity=self.intensity * factor, unit=unit)

    @cached_property
    def _wrapped(self) -> np.ndarray:
        """The intensity with one azimuth column repeated on each side (for wrapping interpolation)."""
        return np.concatenate([self.intensity[:, -1:], self.intensity, self.intensity[:, :1]], axis=1)

    def sample(self, vectors: np.ndarray) -> np.ndarray:
        """Bilinear intensity toward unit vectors ``(..., 3)`` in the beam frame (NaN outside)."""
        v = np.asarray(vectors, float)
        th = np.arccos(np.clip(v[..., 2], -1.0, 1.0))
        ph = np.mod(np.arctan2(v[..., 1], v[..., 0]), 2 * np.pi)
        k = (th - self.theta[0]) / self.d_theta
        j = (ph - self.phi[0]) / self.d_phi
        # clamp theta below the first centre; azimuth wraps through the padded copy
        k = np.clip(k, 0.0, None)
        out = bilinear(self._wrapped, k.ravel(), (j + 1.0).ravel())
        out[k.ravel() > len(self.theta) - 1] = np.nan
        return out.reshape(th.shape)


def bilinear(a: np.ndarray, rows: np.ndarray, cols: np.ndarray) -> np.ndarray:
    """Bilinear interpolation of the 2-D array ``a`` at fractional ``(rows, cols)``, NaN outside.

    ``sum w_ij a[r0 + i, c0 + j]`` over the four cells around the point with weights
    ``(1 - t)`` / ``t`` per axis (``r0 = floor(row)``, ``t = row - r0``).  A point beyond
    ``[0, n - 1]`` on either axis is NaN; on the last row or column the missing neighbour (weight
    0) is the mirrored one; a NaN neighbour gives NaN even at weight 0.  These are the values of
    ``scipy.ndimage.map_coordinates(a, (rows, cols), order=1, mode="constant", cval=nan,
    prefilter=False)`` (tests/test_numerics.py), without importing SciPy's ndimage (about 0.3 s).
    """
    n, m = a.shape
    rows = np.asarray(rows, float)
    cols = np.asarray(cols, float)
    with np.errstate(invalid="ignore"):
        inside = (rows >= 0) & (rows <= n - 1) & (cols >= 0) & (cols <= m - 1)
    r = np.where(inside, rows, 0.0)
    c = np.where(inside, cols, 0.0)
    fi, fj = np.floor(r), np.floor(c)
    i, j = fi.astype(np.intp), fj.astype(np.intp)
    tr, tc = r - fi, c - fj  # r - i: the floor is an integer, exactly a float
    i1 = np.where(i + 1 < n, i + 1, max(n - 2, 0))  # the mirrored neighbour on the last row
    j1 = np.where(j + 1 < m, j + 1, max(m - 2, 0))
    # the four neighbours by flat index (one gather each instead of a two-index one)
    flat = a.reshape(-1) if a.flags.c_contiguous else np.ascontiguousarray(a).reshape(-1)
    i *= m
    i1 *= m
    uc = 1.0 - tc
    top = uc * flat.take(i + j)
    top += tc * flat.take(i + j1)
    bottom = uc * flat.take(i1 + j)
    bottom += tc * flat.take(i1 + j1)
    top *= 1.0 - tr
    bottom *= tr
    out = top
    out += bottom
    out[~inside] = np.nan
    return out


def directions(theta: np.ndarray, phi: np.ndarray) -> np.ndarray:
    """Unit vectors ``(..., 3)`` for polar angle ``theta`` and azimuth ``phi`` (radians)."""
    st = np.sin(theta)
    return np.stack(np.broadcast_arrays(st * np.cos(phi), st * np.sin(phi), np.cos(theta)), axis=-1)


def build_beam_map(image: LinearImage, mapping: WallMapping, axis_mm: tuple[float, float],
                   distance_m: float, *, theta_step_deg: float | None = None,
                   phi_step_deg: float | None = None, axis_dir: np.ndarray | None = None) -> BeamMap:
    """Resample the linear luminance onto the polar grid and convert to relative intensity.

    ``axis_mm`` is the light's foot point on the wall (mm) and ``axis_dir`` the beam axis as a
    unit vector in the wall frame (+z toward the wall; default square to the wall).  Pixel
    values are proportional to wall luminance, and for a Lambertian wall to illuminance ``E``;
    intensity follows from the general form ``I = E r^2 / cos(incidence)`` with ``r`` and the
    incidence from the light's position, which for a square light is ``E D^2 / cos^3(theta)``.
    """
    geo = _geometry(image, mapping, axis_mm, distance_m, theta_step_deg, phi_step_deg, axis_dir)
    lum = cv2.remap(image.luminance, geo.mx, geo.my, cv2.INTER_LINEAR, borderMode=cv2.BORDER_CONSTANT,
                    borderValue=float("nan"))
    sat = geo.saturated_of(image.saturated)
    intensity = lum.astype(np.float64) * geo.factor
    return BeamMap(theta=geo.theta.copy(), phi=geo.phi.copy(), intensity=intensity, saturated=sat,
                   distance_m=distance_m, footprint_deg=None if geo.footprint is None else geo.footprint.copy())


def sampled_image(values: np.ndarray, image: LinearImage, mapping: WallMapping, axis_mm: tuple[float, float],
                  distance_m: float, *, axis_dir: np.ndarray | None = None, every: int = 1) -> np.ndarray:
    """``values`` (the working image's luminance ``(h, w)`` or colour ``(h, w, 3)``) at the cells of the
    map :func:`build_beam_map` makes from ``image`` and the same inputs (default grid), ``(n_theta,
    n_phi[, 3])``, or at every ``every``-th azimuth of it: the photo's own level toward each
    direction, before the conversion to intensity.  Outside the photo: NaN for floats, 0 for integers."""
    geo = _geometry(image, mapping, axis_mm, distance_m, None, None, axis_dir)
    mx, my = (geo.mx, geo.my) if every == 1 else (np.ascontiguousarray(m[:, ::every]) for m in (geo.mx, geo.my))
    border = float("nan") if values.dtype.kind == "f" else 0
    return cv2.remap(values, mx, my, cv2.INTER_LINEAR, borderMode=cv2.BORDER_CONSTANT, borderValue=border)


@dataclass(frozen=True)
class _Geometry:
    """What a map's grid, wall mapping, foot point, distance and axis fix, whatever the photo's values:
    the grid, the working-image coordinates each cell samples, the factor from wall illuminance to
    intensity per cell, and the photo's outline; and the clip mask sampled, per clip mask."""

    key: tuple
    mapping: object
    axis_dir: object
    theta: np.ndarray
    phi: np.ndarray
    mx: np.ndarray
    my: np.ndarray
    factor: np.ndarray
    footprint: np.ndarray | None
    sampled: list = field(default_factory=list)  # [(clip mask, its samples)], the latest only

    def matches(self, key: tuple, mapping, axis_dir) -> bool:
        if key != self.key or mapping is not self.mapping:
            return False
        if axis_dir is None or self.axis_dir is None:
            return axis_dir is None and self.axis_dir is None
        return axis_dir is self.axis_dir or np.array_equal(axis_dir, self.axis_dir)

    def saturated_of(self, saturated: np.ndarray) -> np.ndarray:
        """The clip mask sampled at the cells (nearest pixel; outside the photo: not clipped)."""
        seen = self.sampled[0] if self.sampled else None
        if seen is None or seen[0] is not saturated:
            sat = cv2.remap(saturated.view(np.uint8), self.mx, self.my, cv2.INTER_NEAREST,
                            borderMode=cv2.BORDER_CONSTANT, borderValue=0).astype(bool)
            seen = (saturated, sat)
            self.sampled[:] = [seen]
        return seen[1].copy()


#: Geometries of the latest maps, for maps built again on the same grid, mapping, foot point, distance
#: and axis (the uncertainty budget's lens-shading term, the colour channels): the same numbers,
#: computed once.  The mapping is held, so an identity match cannot be a new object at its address.
_GEOMETRIES: list = []
_GEOMETRIES_KEPT = 4
_GEOMETRIES_LOCK = threading.Lock()


def _geometry(image: LinearImage, mapping: WallMapping, axis_mm, distance_m: float, theta_step_deg, phi_step_deg,
              axis_dir) -> _Geometry:
    key = (tuple(image.full_shape), image.bin_factor, tuple(float(a) for a in axis_mm), float(distance_m),
           theta_step_deg, phi_step_deg)
    with _GEOMETRIES_LOCK:
        for g in _GEOMETRIES:
            if g.matches(key, mapping, axis_dir):
                return g
    g = _new_geometry(image, mapping, axis_mm, distance_m, theta_step_deg, phi_step_deg, axis_dir, key)
    with _GEOMETRIES_LOCK:
        _GEOMETRIES.insert(0, g)
        del _GEOMETRIES[_GEOMETRIES_KEPT:]
    return g


def _new_geometry(image, mapping, axis_mm, distance_m, theta_step_deg, phi_step_deg, axis_dir, key) -> _Geometry:
    d_theta = np.radians(THETA_STEP_DEG if theta_step_deg is None else theta_step_deg)
    d_phi = np.radians(PHI_STEP_DEG if phi_step_deg is None else phi_step_deg)
    h_full, w_full = image.full_shape
    corners = mapping.image_to_wall(np.array([[0, 0], [w_full - 1, 0], [0, h_full - 1], [w_full - 1, h_full - 1]], float))
    reach_mm = float(np.max(np.hypot(corners[:, 0] - axis_mm[0], corners[:, 1] - axis_mm[1])))
    tilt = 0.0 if axis_dir is None else float(np.arccos(np.clip(np.asarray(axis_dir)[2], -1, 1)))
    theta_max = min(np.arctan(reach_mm / (distance_m * 1000.0)) + tilt, np.radians(THETA_LIMIT_DEG))
    n_theta = max(2, int(np.ceil(theta_max / d_theta)))
    n_phi = int(round(2 * np.pi / d_phi))
    theta = (np.arange(n_theta) + 0.5) * d_theta
    phi = (np.arange(n_phi) + 0.5) * (2 * np.pi / n_phi)
    if axis_dir is None:
        rho = distance_m * 1000.0 * np.tan(theta)[:, None]
        wall = np.empty((n_theta, n_phi, 2))
        np.add(axis_mm[0], rho * np.cos(phi)[None, :], out=wall[..., 0])
        np.add(axis_mm[1], rho * np.sin(phi)[None, :], out=wall[..., 1])
        factor = intensity_from_wall_illuminance(1.0, theta, distance_m)[:, None]
    else:
        tt, pp = np.meshgrid(theta, phi, indexing="ij")
        w = beam_to_wall(directions(tt, pp), axis_dir)
        wz = np.where(w[..., 2] > 1e-6, w[..., 2], np.nan)
        t_mm = distance_m * 1000.0 / wz
        wall = np.stack([axis_mm[0] + t_mm * w[..., 0], axis_mm[1] + t_mm * w[..., 1]], axis=-1)
        factor = intensity_from_illuminance(1.0, t_mm / 1000.0, np.arccos(np.clip(wz, -1.0, 1.0)))  # r^2 / cos(inc)
    full_xy = mapping.wall_to_image(wall)
    b = image.bin_factor
    work = (full_xy - (b - 1) / 2.0) / b
    # NaN: the ray misses the wall (as np.nan_to_num(nan=-10.0) then float32: its +-1.8e308 for an
    # infinite coordinate is +-inf in float32 as well)
    mx = work[..., 0].astype(np.float32)
    my = work[..., 1].astype(np.float32)
    mx[np.isnan(mx)] = -10.0
    my[np.isnan(my)] = -10.0
    frame = beam_frame(axis_dir)
    footprint = _footprint_deg(mapping, image.full_shape, axis_mm, distance_m, frame, theta_max)
    for a in (theta, phi, mx, my, factor) + (() if footprint is None else (footprint,)):
        a.flags.writeable = False
    return _Geometry(key, mapping, None if axis_dir is None else np.array(axis_dir, float), theta, phi, mx, my,
                     factor, footprint)


def _footprint_deg(mapping: WallMapping, full_shape: tuple[int, int], axis_mm, distance_m: float,
                   frame: np.ndarray, theta_max: float, per_side: int = 200) -> np.ndarray | None:
    """The photo's border seen from the light, in azimuthal-equidistant degrees about the beam axis.

    ``frame`` holds the beam frame's unit vectors (rows e1, e2, axis) in the wall frame.  Border
    points beyond ``theta_max`` (or off the wall) are pulled in to it, so the outline stays closed.
    """
    h, w = full_shape
    t = np.linspace(0.0, 1.0, per_side, endpoint=False)
    x, y = (w - 1) * t, (h - 1) * t
    border = np.concatenate([np.c_[x, np.zeros_like(x)], np.c_[np.full_like(y, w - 1), y],
                             np.c_[(w - 1) - x, np.full_like(x, h - 1)], np.c_[np.zeros_like(y), (h - 1) - y]])
    wall = mapping.image_to_wall(border)
    v = np.c_[wall[:, 0] - axis_mm[0], wall[:, 1] - axis_mm[1], np.full(len(wall), distance_m * 1000.0)]
    ok = np.all(np.isfinite(v), axis=1)
    if ok.sum() < 8:
        return None
    v = v[ok] / np.linalg.norm(v[ok], axis=1, keepdims=True)
    b = v @ frame.T  # components along e1, e2, axis
    th = np.minimum(np.degrees(np.arccos(np.clip(b[:, 2], -1.0, 1.0))), np.degrees(theta_max))
    ph = np.arctan2(b[:, 1], b[:, 0])
    return np.c_[th * np.cos(ph), th * np.sin(ph)]
