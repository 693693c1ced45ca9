"""Physically based synthetic beam photos with ground truth (for tests and the demo).

The renderer follows the light from the lamp to the JPEG:

1. intensity ``I(theta, phi)`` (cd) of an analytic or tabulated beam pattern, in the light's
   own frame (optionally tilted);
2. wall illuminance by the inverse-square and cosine laws, ``E = I cos(incidence) / r^2``
   (IES 9.1.1/9.1.2), plus ambient illuminance;
3. Lambertian wall luminance ``L = rho E / pi`` (CIE ILV 17-24-063);
4. focal-plane exposure ``H = (pi/4) T f_v cos^4(alpha) L t / N^2`` (ISO 12232 form, with the
   natural cos^4 fall-off optional because phones correct it) times extra lens vignetting;
5. linear signal ``v = H S / 78`` (1 at clipping, ISO 12232 saturation-based speed), shot
   and read noise in electrons, clipping, the tone curve, 8-bit quantisation, JPEG.

Ground truth is computed from the pattern itself on a fine angular grid.
All names and scenarios here are invented.
"""

from __future__ import annotations

import io
from dataclasses import dataclass, field
from fractions import Fraction

import numpy as np
from PIL import Image, TiffImagePlugin
from scipy.special import erfc

from .camera.exposure import ISO12232_SATURATION_CONSTANT
from .camera.response import LUMINANCE_WEIGHTS_BT709, Response
from .wall import FULL_FRAME_DIAGONAL_MM, rotation_yaw_pitch

__all__ = [
    "HotspotSpillBeam",
    "TabulatedBeam",
    "Scene",
    "SynthCamera",
    "render_linear",
    "render_photo",
    "encode_jpeg",
    "encode_png16",
    "exposure_time_for_peak",
    "truth_figures",
    "render_bracket",
    "blackbody_rgb",
    "TwoToneBeam",
    "render_two_tone_linear",
    "render_two_tone_photo",
    "two_tone_truth",
]

#: Lens transmission T and vignetting factor f_v of the simulated camera (ISO 12232 typical).
_LENS_T, _LENS_FV = 0.9, 0.98


# --------------------------------------------------------------------------- beam patterns
@dataclass(frozen=True)
class HotspotSpillBeam:
    """A reflector-like beam: Gaussian hotspot, a gently falling spill, a bezel cut-off.

    ``I = peak * [(1-s) G + s S(theta)] C(theta) + rings``, where
    ``G = exp(-(dx^2/sx^2 + dy^2/sy^2)/2)`` about the hotspot centre (offset by
    ``hotspot_offset_deg`` = (right, up)), ``S = 1 - spill_falloff (theta/cutoff)^2``,
    and ``C = erfc((theta - cutoff) / (sqrt(2) w)) / 2`` is the bezel cut-off, exactly 0.5 at
    ``cutoff_deg``.  ``hotspot_fwhm_deg`` is the full width at half maximum of G
    (FWHM = 2 sqrt(2 ln 2) sigma); ``ellipse_ratio`` = vertical / horizontal width.
    Rings are ``(angle_deg, width_deg, relative_height)`` Gaussian rings.
    """

    peak_cd: float = 10000.0
    hotspot_fwhm_deg: float = 8.0
    spill_fraction: float = 0.02
    spill_falloff: float = 0.3
    cutoff_deg: float = 30.0
    edge_width_deg: float = 0.6
    hotspot_offset_deg: tuple[float, float] = (0.0, 0.0)
    ellipse_ratio: float = 1.0
    rings: tuple[tuple[float, float, float], ...] = ()
    stray_fraction: float = 0.0

    def __call__(self, theta: np.ndarray, phi: np.ndarray) -> np.ndarray:
        """Intensity (cd) toward polar angle ``theta`` and azimuth ``phi`` (radians)."""
        theta = np.asarray(theta, dtype=np.float64)
        tdeg = np.degrees(theta)
        # azimuthal-equidistant coordinates in degrees about the beam axis
        tx = tdeg * np.cos(phi)
        ty = tdeg * np.sin(phi)
        sigma = self.hotspot_fwhm_deg / (2.0 * np.sqrt(2.0 * np.log(2.0)))
        dx = tx - self.hotspot_offset_deg[0]
        dy = ty - self.hotspot_offset_deg[1]
        g = np.exp(-0.5 * ((dx / sigma) ** 2 + (dy / (sigma * self.ellipse_ratio)) ** 2))
        s = np.clip(1.0 - self.spill_falloff * (tdeg / self.cutoff_deg) ** 2, 0.0, None)
        cut = 0.5 * erfc((tdeg - self.cutoff_deg) / (np.sqrt(2.0) * self.edge_width_deg))
        rel = ((1.0 - self.spill_fraction) * g + self.spill_fraction * s) * cut
        for angle, width, height in self.rings:
            rel = rel + height * np.exp(-0.5 * ((tdeg - angle) / width) ** 2) * cut
        rel = rel + self.stray_fraction * np.cos(theta).clip(0) ** 2
        return self.peak_cd * rel

    @property
    def spill_edge_deg(self) -> float | None:
        return self.cutoff_deg


@dataclass(frozen=True)
class TabulatedBeam:
    """A rotationally symmetric beam from a table of (angle_deg, intensity_cd), linear in between."""

    angle_deg: tuple[float, ...]
    intensity_cd: tuple[float, ...]
    edge_deg: float | None = None

    def __call__(self, theta, phi):
        return np.interp(np.degrees(theta), self.angle_deg, self.intensity_cd, right=0.0)

    @property
    def spill_edge_deg(self) -> float | None:
        return self.edge_deg


# --------------------------------------------------------------------------- scene / camera
@dataclass(frozen=True)
class Scene:
    """Light, wall and room.  Distances in m, illuminance in lx; tilt of the light in degrees."""

    distance_m: float = 5.0
    wall_reflectance: float = 0.85
    ambient_lux: float = 0.0
    light_yaw_deg: float = 0.0
    light_pitch_deg: float = 0.0
    light_rgb: tuple[float, float, float] = (1.0, 1.0, 1.0)
    #: Centre of the pinned paper target on the wall (mm, light frame), or None for no target.
    target_at_mm: tuple[float, float] | None = None
    #: Scale of the printed target relative to 100 % (a printer that shrinks prints 0.98).
    target_print_scale: float = 1.0


@dataclass(frozen=True)
class SynthCamera:
    """A simulated camera.  Position in m in the light frame (z = 0 is the light's plane).

    ``focal_35mm_mm`` fixes the view (diagonal convention); ``sensitivity_factor`` is the
    true saturation-based speed over the nominal ISO (1 = honest metadata).
    ``lens_vignetting`` is the extra fall-off at the image corner (0.4 = 40 % darker).
    """

    width_px: int = 1200
    height_px: int = 900
    focal_35mm_mm: int = 26
    sensor_diag_mm: float = 7.7
    position_m: tuple[float, float, float] = (0.15, 0.0, 0.0)
    yaw_deg: float = 0.0
    pitch_deg: float = 0.0
    f_number: float = 1.8
    exposure_time_s: float = 1 / 100
    iso: float = 100.0
    sensitivity_factor: float = 1.0
    response: Response = field(default_factory=Response)
    natural_vignetting: bool = False
    lens_vignetting: float = 0.0
    full_well_e: float = 6000.0
    read_noise_e: float = 2.5
    supersample: int = 2
    orientation: int = 1
    make: str = "beamshot-synth"
    model: str = "virtual camera"
    #: OpenCV distortion coefficients (k1, k2, p1, p2, k3) of the lens; None for an ideal pinhole.
    distortion: tuple[float, ...] | None = None

    @property
    def focal_px(self) -> float:
        return self.focal_35mm_mm * np.hypot(self.width_px, self.height_px) / FULL_FRAME_DIAGONAL_MM

    @property
    def focal_mm(self) -> float:
        return self.focal_35mm_mm * self.sensor_diag_mm / FULL_FRAME_DIAGONAL_MM


def _light_rotation(scene: Scene) -> np.ndarray:
    """Rotation light-beam frame -> room frame (yaw right, pitch up)."""
    return rotation_yaw_pitch(scene.light_yaw_deg, scene.light_pitch_deg) @ np.diag([1.0, -1.0, 1.0])


def _wall_illuminance(pattern, scene: Scene, px: np.ndarray, py: np.ndarray) -> np.ndarray:
    """Illuminance (lx) at wall points (m, light frame), beam plus ambient."""
    d = scene.distance_m
    rx, ry, rz = px, py, np.full_like(px, d)
    r = np.sqrt(rx**2 + ry**2 + rz**2)
    rot = _light_rotation(scene).T  # room -> beam frame
    bx = (rot[0, 0] * rx + rot[0, 1] * ry + rot[0, 2] * rz) / r
    by = (rot[1, 0] * rx + rot[1, 1] * ry + rot[1, 2] * rz) / r
    bz = (rot[2, 0] * rx + rot[2, 1] * ry + rot[2, 2] * rz) / r
    theta = np.arccos(np.clip(bz, -1.0, 1.0))
    phi = np.arctan2(by, bx)
    cos_inc = rz / r
    e = pattern(theta, phi) * cos_inc / r**2
    return e + scene.ambient_lux


def render_linear(pattern, scene: Scene, camera: SynthCamera, *, rows: slice | None = None) -> np.ndarray:
    """Noise-free linear signal ``v`` (1 = clipping), shape ``(H, W)``, before colour and noise."""
    w, h = camera.width_px, camera.height_px
    f = camera.focal_px
    cx, cy = (w - 1) / 2.0, (h - 1) / 2.0
    rot = rotation_yaw_pitch(camera.yaw_deg, camera.pitch_deg)
    cam = np.asarray(camera.position_m, float)
    ss = max(1, int(camera.supersample))
    offsets = (np.arange(ss) + 0.5) / ss - 0.5
    rows = rows or slice(0, h)
    yy, xx = np.mgrid[rows, 0:w].astype(np.float64)
    q_axis = np.pi / 4.0 * _LENS_T * _LENS_FV
    s_true = camera.iso * camera.sensitivity_factor
    gain = q_axis * camera.exposure_time_s / camera.f_number**2 * s_true / ISO12232_SATURATION_CONSTANT
    acc = np.zeros_like(xx)
    for oy in offsets:
        for ox in offsets:
            dx = (xx + ox - cx) / f
            dy = (yy + oy - cy) / f
            if camera.distortion is not None:
                import cv2

                k = np.array([[f, 0, cx], [0, f, cy], [0, 0, 1.0]])
                pts = np.stack([xx + ox, yy + oy], axis=-1).reshape(-1, 1, 2)
                und = cv2.undistortPoints(pts, k, np.asarray(camera.distortion, float), None, None, None,
                                              (cv2.TERM_CRITERIA_COUNT | cv2.TERM_CRITERIA_EPS, 30, 1e-10))
                dx = und[:, 0, 0].reshape(xx.shape)
                dy = und[:, 0, 1].reshape(xx.shape)
            wx = rot[0, 0] * dx + rot[0, 1] * dy + rot[0, 2]
            wy = rot[1, 0] * dx + rot[1, 1] * dy + rot[1, 2]
            wz = rot[2, 0] * dx + rot[2, 1] * dy + rot[2, 2]
            t = (scene.distance_m - cam[2]) / wz
            px, py = cam[0] + t * wx, cam[1] + t * wy
            lum = scene.wall_reflectance * _wall_illuminance(pattern, scene, px, py) / np.pi
            if scene.target_at_mm is not None:
                from .target import target_albedo

                k = scene.target_print_scale
                lum = lum * target_albedo((px * 1000.0 - scene.target_at_mm[0]) / k,
                                          (py * 1000.0 - scene.target_at_mm[1]) / k)
            fall = np.ones_like(dx)
            if camera.natural_vignetting:
                fall = fall / (1.0 + dx**2 + dy**2) ** 2  # cos^4 of the ray angle
            acc += lum * fall
    v = acc / ss**2 * gain
    if camera.lens_vignetting:
        rr = ((xx - cx) ** 2 + (yy - cy) ** 2) / (cx**2 + cy**2)
        v = v * (1.0 - camera.lens_vignetting * rr)
    return v


def render_photo(pattern, scene: Scene, camera: SynthCamera, *, seed: int = 0) -> np.ndarray:
    """Render the 8-bit RGB photo ``(H, W, 3)`` uint8 (upright; orientation applied at encode)."""
    rgb = render_rgb_linear(pattern, scene, camera, seed=seed)
    return np.round(camera.response.encode(rgb) * 255.0).astype(np.uint8)


def render_rgb_linear(pattern, scene: Scene, camera: SynthCamera, *, seed: int = 0) -> np.ndarray:
    """Linear RGB with shot and read noise, clipped to [0, 1], float32 ``(H, W, 3)``."""
    rng = np.random.default_rng(seed)
    colour = np.asarray(scene.light_rgb, float)
    colour = colour / float(np.dot(colour, LUMINANCE_WEIGHTS_BT709))
    out = np.empty((camera.height_px, camera.width_px, 3), np.float32)
    step = 256
    for top in range(0, camera.height_px, step):
        sl = slice(top, min(top + step, camera.height_px))
        v = render_linear(pattern, scene, camera, rows=sl)
        for c in range(3):
            electrons = np.clip(v * colour[c], 0.0, None) * camera.full_well_e
            noisy = electrons + rng.standard_normal(electrons.shape) * np.sqrt(electrons + camera.read_noise_e**2)
            out[sl, :, c] = np.clip(noisy / camera.full_well_e, 0.0, 1.0)
    return out


def _rational(x: float) -> TiffImagePlugin.IFDRational:
    fr = Fraction(x).limit_denominator(100000)
    return TiffImagePlugin.IFDRational(fr.numerator, fr.denominator)


def exif_block(camera: SynthCamera) -> Image.Exif:
    """EXIF with the exposure facts a real camera writes (Exif 2.3 tags)."""
    exif = Image.Exif()
    exif[0x010F] = camera.make
    exif[0x0110] = camera.model
    exif[0x0112] = int(camera.orientation)
    sub = exif.get_ifd(0x8769)
    sub[0x829A] = _rational(camera.exposure_time_s)
    sub[0x829D] = _rational(camera.f_number)
    sub[0x8827] = int(round(camera.iso))
    sub[0x920A] = _rational(round(camera.focal_mm, 2))
    sub[0xA405] = int(camera.focal_35mm_mm)
    return exif


def _stored(pixels: np.ndarray, orientation: int) -> np.ndarray:
    """Inverse of the EXIF orientation: how a camera would store an upright picture."""
    inverse = {1: 1, 2: 2, 3: 3, 4: 4, 5: 5, 6: 8, 7: 7, 8: 6}[orientation]
    from .photo import apply_orientation

    return np.ascontiguousarray(apply_orientation(pixels, inverse))


def encode_jpeg(pixels: np.ndarray, camera: SynthCamera, *, quality: int = 90) -> bytes:
    """JPEG bytes of upright ``pixels`` with the camera's EXIF (orientation honoured)."""
    buf = io.BytesIO()
    img = Image.fromarray(_stored(pixels, camera.orientation))
    img.save(buf, "JPEG", quality=quality, exif=exif_block(camera))
    return buf.getvalue()


def encode_png16(rgb_linear: np.ndarray, camera: SynthCamera) -> bytes:
    """16-bit PNG bytes of linear RGB encoded with the camera's response."""
    import cv2

    codes = np.round(camera.response.encode(rgb_linear) * 65535.0).astype(np.uint16)
    ok, data = cv2.imencode(".png", cv2.cvtColor(codes, cv2.COLOR_RGB2BGR))
    return data.tobytes()


def exposure_time_for_peak(pattern, scene: Scene, camera: SynthCamera, *, target: float = 0.8,
                           peak_lux: float | None = None) -> float:
    """Exposure time (s) that puts the wall's brightest point at linear value ``target``."""
    if peak_lux is None:
        peak_lux = truth_figures(pattern, scene.distance_m)["peak_lux_on_wall"] + scene.ambient_lux
    lum = scene.wall_reflectance * peak_lux / np.pi
    q_axis = np.pi / 4.0 * _LENS_T * _LENS_FV
    s_true = camera.iso * camera.sensitivity_factor
    return target * ISO12232_SATURATION_CONSTANT * camera.f_number**2 / (q_axis * lum * s_true)


# --------------------------------------------------------------------------- ground truth
def truth_figures(pattern, distance_m: float, *, theta_max_deg: float = 80.0,
                  d_theta_deg: float = 0.01, d_phi_deg: float = 0.5) -> dict:
    """Figures of ``pattern`` by dense numerical integration (independent of the analyser).

    Hotspot and field angles are full cone angles of equal solid angle to the region at or
    above 50 % / 10 % of peak; the spill edge is the pattern's cut-off; zone fluxes integrate
    ``I dOmega`` over hotspot (>= 50 %) and spill (inside the edge, outside the hotspot).
    """
    edges = np.radians(np.arange(0.0, theta_max_deg + d_theta_deg / 2, d_theta_deg))
    theta = 0.5 * (edges[:-1] + edges[1:])
    n_phi = int(round(360.0 / d_phi_deg))
    phi = (np.arange(n_phi) + 0.5) * 2 * np.pi / n_phi
    tt, pp = np.meshgrid(theta, phi, indexing="ij")
    i = pattern(tt, pp)
    # exact solid angle of each cell, (cos lo - cos hi) dphi (integral of sin theta dtheta dphi),
    # written out here so that the truth does not share the analyser's helpers
    d_omega = ((np.cos(edges[:-1]) - np.cos(edges[1:])) * (2 * np.pi / n_phi))[:, None] * np.ones((1, n_phi))
    peak = float(i.max())
    hot = i >= 0.5 * peak
    field_ = i >= 0.1 * peak

    def full(omega):  # full angle of the cone of solid angle omega = 2 pi (1 - cos a) (Mazonka 2012, eq. 9)
        return float(np.degrees(2 * np.arccos(1.0 - omega / (2 * np.pi))))
    out = {
        "peak_cd": peak,
        "peak_lux_on_wall": float((i * np.cos(tt) ** 3).max() / distance_m**2),
        "hotspot_angle_deg": full(d_omega[hot].sum()),
        "field_angle_deg": full(d_omega[field_].sum()),
        "total_flux_lm": float((i * d_omega).sum()),
    }
    edge = getattr(pattern, "spill_edge_deg", None)
    if edge is not None:
        inside = tt <= np.radians(edge)
        out["spill_angle_deg"] = 2.0 * edge
        out["hotspot_flux_lm"] = float((i * d_omega)[hot].sum())
        out["spill_flux_lm"] = float((i * d_omega)[inside & ~hot].sum())
        out["beam_flux_lm"] = out["hotspot_flux_lm"] + out["spill_flux_lm"]
        out["ra"] = out["spill_flux_lm"] / out["hotspot_flux_lm"]
    k = np.argmax(i)
    out["peak_offset_deg"] = float(np.degrees(tt.flat[k]))
    return out


def render_bracket(pattern, scene: Scene, camera: SynthCamera, stops, *, seed: int = 0, quality: int = 95,
                   moved_frame: int | None = None, move_px: int = 0) -> list[bytes]:
    """JPEG bytes of a bracket: the same scene at exposure time ``t * 2**stop`` for each stop.

    The noise-free signal is rendered once; each frame gets its own noise and EXIF.  With
    ``moved_frame`` set, that frame is shifted right by ``move_px`` pixels (a bumped tripod).
    """
    from dataclasses import replace

    rng = np.random.default_rng(seed)
    colour = np.asarray(scene.light_rgb, float)
    colour = colour / float(np.dot(colour, LUMINANCE_WEIGHTS_BT709))
    base = np.concatenate([render_linear(pattern, scene, camera, rows=slice(top, min(top + 256, camera.height_px)))
                           for top in range(0, camera.height_px, 256)])
    frames = []
    for k, stop in enumerate(stops):
        cam = replace(camera, exposure_time_s=camera.exposure_time_s * 2.0**stop)
        v = base * 2.0**stop
        if moved_frame == k and move_px:
            v = np.roll(v, move_px, axis=1)
        rgb = np.empty(v.shape + (3,), np.float32)
        for c in range(3):
            e = np.clip(v * colour[c], 0.0, None) * cam.full_well_e
            e = e + rng.standard_normal(e.shape) * np.sqrt(e + cam.read_noise_e**2)
            rgb[..., c] = np.clip(e / cam.full_well_e, 0.0, 1.0)
        pixels = np.round(cam.response.encode(rgb) * 255.0).astype(np.uint8)
        frames.append(encode_jpeg(pixels, cam, quality=quality))
    return frames


# --------------------------------------------------------------------------- colour: a two-tone beam
def blackbody_rgb(temperature_k: float) -> tuple[float, float, float]:
    """Linear sRGB of a blackbody, normalised to relative luminance 1 (a camera with fixed D65 white balance).

    XYZ = integral of Planck's law (c2 = 1.4388e-2 m K) times the CIE 1931 2-degree colour-matching
    functions (both shipped by colour-science: ``sd_blackbody``, ``MSDS_CMFS``); then linear sRGB
    = the inverse of the IEC 61966-2-1 sRGB -> XYZ matrix (beamshot.colour.transform).
    """
    import colour

    from .colour.transform import SRGB_TO_XYZ

    cmfs = colour.MSDS_CMFS["CIE 1931 2 Degree Standard Observer"]
    xyz = colour.sd_to_XYZ(colour.sd_blackbody(float(temperature_k), cmfs.shape), cmfs) / 100.0
    rgb = np.linalg.solve(SRGB_TO_XYZ, xyz / xyz[1])
    return tuple(float(v) for v in rgb / float(np.dot(rgb, LUMINANCE_WEIGHTS_BT709)))


@dataclass(frozen=True)
class TwoToneBeam:
    """A beam whose hotspot light has one colour and whose spill light another.

    ``hotspot`` and ``spill`` are patterns (cd) whose sum is the beam; ``hotspot_k`` and
    ``spill_k`` are blackbody temperatures (K) of their light.  Called as a pattern, it gives
    the total intensity, so every other tool here (exposure, truth) works on it unchanged.
    """

    hotspot: object
    spill: object
    hotspot_k: float
    spill_k: float

    @classmethod
    def split(cls, beam: HotspotSpillBeam, hotspot_k: float, spill_k: float) -> "TwoToneBeam":
        """The hotspot (Gaussian) and spill (falling plateau) parts of a :class:`HotspotSpillBeam`,
        each with the bezel cut-off: ``I = P (1-s) G C + P s S C`` (rings and stray go with the spill)."""
        from dataclasses import replace

        hot = replace(beam, peak_cd=beam.peak_cd * (1.0 - beam.spill_fraction), spill_fraction=0.0, rings=(),
                      stray_fraction=0.0)
        spill = replace(beam, peak_cd=beam.peak_cd * beam.spill_fraction, spill_fraction=1.0,
                        rings=tuple((a, w, h / beam.spill_fraction) for a, w, h in beam.rings),
                        stray_fraction=beam.stray_fraction / beam.spill_fraction)
        return cls(hot, spill, hotspot_k, spill_k)

    def __call__(self, theta, phi):
        return self.hotspot(theta, phi) + self.spill(theta, phi)

    @property
    def spill_edge_deg(self) -> float | None:
        return self.spill.spill_edge_deg


def render_two_tone_linear(beam: TwoToneBeam, scene: Scene, camera: SynthCamera, *, seed: int = 0) -> np.ndarray:
    """Linear RGB ``(H, W, 3)`` float32 of a :class:`TwoToneBeam`, with shot and read noise, clipped to [0, 1].

    Each part is rendered as :func:`render_linear` does (all of its physics) and coloured by its
    blackbody's sRGB (:func:`blackbody_rgb`), the room's ambient light by ``scene.light_rgb`` as in
    :func:`render_rgb_linear`; the channels add, then noise as :func:`render_rgb_linear`.
    """
    rng = np.random.default_rng(seed)
    c_hot, c_spill = np.asarray(blackbody_rgb(beam.hotspot_k)), np.asarray(blackbody_rgb(beam.spill_k))
    c_room = np.asarray(scene.light_rgb, float)
    c_room = c_room / float(np.dot(c_room, LUMINANCE_WEIGHTS_BT709))  # as render_rgb_linear colours all light
    out = np.empty((camera.height_px, camera.width_px, 3), np.float32)
    step = 256
    for top in range(0, camera.height_px, step):
        sl = slice(top, min(top + step, camera.height_px))
        v_hot = render_linear(beam.hotspot, scene, camera, rows=sl)
        v_spill = render_linear(beam.spill, scene, camera, rows=sl)
        v_amb = np.zeros_like(v_hot)
        if scene.ambient_lux:  # render_linear adds the ambient to each part: keep it once, in the room's colour
            v_amb = render_linear(HotspotSpillBeam(peak_cd=0.0), scene, camera, rows=sl)
            v_hot, v_spill = v_hot - v_amb, v_spill - v_amb
        for c in range(3):
            electrons = np.clip(v_hot * c_hot[c] + v_spill * c_spill[c] + v_amb * c_room[c], 0.0, None) * camera.full_well_e
            noisy = electrons + rng.standard_normal(electrons.shape) * np.sqrt(electrons + camera.read_noise_e**2)
            out[sl, :, c] = np.clip(noisy / camera.full_well_e, 0.0, 1.0)
    return out


def render_two_tone_photo(beam: TwoToneBeam, scene: Scene, camera: SynthCamera, *, seed: int = 0) -> np.ndarray:
    """The 8-bit RGB photo of a :class:`TwoToneBeam` through the camera's tone curve (fixed white balance)."""
    rgb = render_two_tone_linear(beam, scene, camera, seed=seed)
    return np.round(camera.response.encode(rgb) * 255.0).astype(np.uint8)


def blackbody_xyz1(temperature_k: float) -> np.ndarray:
    """CIE 1931 XYZ of a blackbody at Y = 1 (Planck's law and the CIE 1931 2 degree functions, colour-science)."""
    import colour

    cmfs = colour.MSDS_CMFS["CIE 1931 2 Degree Standard Observer"]
    xyz = colour.sd_to_XYZ(colour.sd_blackbody(float(temperature_k), cmfs.shape), cmfs)
    return xyz / xyz[1]


def two_tone_ring_uv(beam: TwoToneBeam, edges_deg, d_theta_deg: float = 0.005) -> np.ndarray:
    """True CIE 1976 (u', v') of the light in each ring ``[edges[k], edges[k+1])`` (deg) of a beam
    symmetric about its axis: ``XYZ = sum (I_hot XYZ_hot + I_spill XYZ_spill) sin(theta) dtheta``, and
    ``u' = 4X / (X + 15Y + 3Z)``, ``v' = 9Y / (X + 15Y + 3Z)`` (CIE 15:2018, 8.1), independent of the
    analyser.  Shape ``(rings, 2)``."""
    x_hot, x_spill = blackbody_xyz1(beam.hotspot_k), blackbody_xyz1(beam.spill_k)
    out = []
    for a, b in zip(edges_deg[:-1], edges_deg[1:]):
        th = np.radians(np.arange(a + d_theta_deg / 2, b, d_theta_deg))
        w = np.sin(th)
        hot, spill = float(np.sum(beam.hotspot(th, 0 * th) * w)), float(np.sum(beam.spill(th, 0 * th) * w))
        x, y, z = hot * x_hot + spill * x_spill
        d = x + 15.0 * y + 3.0 * z
        out.append((4.0 * x / d, 9.0 * y / d))
    return np.array(out)


def two_tone_truth(beam: TwoToneBeam, *, theta_max_deg: float = 80.0, d_theta_deg: float = 0.01,
                   d_phi_deg: float = 1.0) -> dict:
    """True CIE XYZ of the light in each zone, by dense integration of the two parts (independent of
    the analyser): hotspot = at or above 50 % of the peak, corona = 10-50 %, spill = below 10 % and
    inside the spill edge (the cut-off angle).  ``XYZ = sum (I_hot XYZ_hot + I_spill XYZ_spill) dOmega``
    with each blackbody's XYZ at Y = 1 (Planck's law and the CIE 1931 functions, colour-science)."""
    x_hot, x_spill = blackbody_xyz1(beam.hotspot_k), blackbody_xyz1(beam.spill_k)
    th = np.radians(np.arange(d_theta_deg / 2, theta_max_deg, d_theta_deg))
    ph = np.radians(np.arange(d_phi_deg / 2, 360.0, d_phi_deg))
    tt, pp = np.meshgrid(th, ph, indexing="ij")
    i_hot, i_spill = beam.hotspot(tt, pp), beam.spill(tt, pp)
    total = i_hot + i_spill
    peak = float(total.max())
    d_omega = np.sin(tt) * np.radians(d_theta_deg) * np.radians(d_phi_deg)
    edge = beam.spill_edge_deg
    zones = {"hotspot": total >= 0.5 * peak, "corona": (total >= 0.1 * peak) & (total < 0.5 * peak),
             "spill": (total < 0.1 * peak) & (np.degrees(tt) <= (edge if edge is not None else theta_max_deg))}
    out = {}
    for name, z in zones.items():
        out[name] = (np.sum(i_hot * d_omega * z) * x_hot + np.sum(i_spill * d_omega * z) * x_spill).tolist()
    return out
