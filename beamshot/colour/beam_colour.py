"""Colour across the beam: chromaticity per zone and over the (theta, phi) map, CCT, Duv, tint uniformity.

Per-channel maps.  Each linear channel (R, G, B) is put on the intensity map's polar grid with the
same wall mapping, foot point and axis (``beammap.build_beam_map``), so ``I_c(theta, phi)`` is
the channel's share of the intensity; a map of ones gives the conversion factor
``r^2 / cos(incidence)`` per cell, for the noise.  The black floor of each channel is removed as
for the intensity map (``floor.floor_corrected``).

Zones (the same contours as the flux figures): hotspot = inside the 50 % contour; corona =
inside the 10 % (field) contour and outside the hotspot; spill = inside the spill edge and
outside the field contour.  A zone's colour is that of its light: the channel sums
``S_c = sum I_c dOmega`` over its cells (cells on a boundary count in proportion), then
``XYZ = M S`` (the stated transform, :mod:`beamshot.colour.transform`).

Uncertainty.  Each channel's noise is measured on the photo (``channel_noise``: ``sigma^2 = a +
b v`` per working pixel).  A cell of wall area a_cell samples the image at a point: its variance
is ``sigma^2 max(a_px / a_cell, 1)`` (cells smaller than a pixel share its error), times
``(r^2/cos)^2``, and the cells add in quadrature with their weights.  Errors correlated over
larger areas (a JPEG codes colour in 8 x 8 blocks at half resolution, ITU-T T.81 with 4:2:0)
are not in that model: the scatter between the azimuth sectors of each ring of the colour map
against the model gives a variance factor (:func:`correlation_gain`, at least 1) applied to all.
A JPEG's coding also leaves errors that are the same all around the axis (beamshot.jpeg_coding), which
no comparison of sectors sees: for a single 8-bit JPEG a "JPEG coding" term
(``jpeg_coding.chroma_sigma_uv``, sized by benchmarks/jpeg_colour_bands.py) at the mean level of each
ring, map cell and zone enters the rings' ``sigma_uv``, the map maximum (cells of two rings, taken as
independent; the cells' ``sigma_uv`` stays the noise, kept apart as ``sigma_uv_coding``) and the zone
figures (a zone's error did not average down to its noise, benchmarks/colour_honesty.py; it is sized
from zone means, a third to a half of a band's).
Zone boundaries: the light near a boundary is a mix of both zones' light, so a zone's colour moves
with its boundaries; each boundary (hotspot, field, spill edge) is moved in turn by the relative
1-sigma uncertainty of its angle figure and the change enters as the "zone boundaries" term.  Then ``cov_XYZ = M diag(var S) M^T`` and first-order
propagation to (x, y), (u', v'), CCT and Duv (JCGM 100, 5.2).  With an assumed transform (sRGB,
white balance) a further term, :data:`ASSUMED_TRANSFORM_SIGMA_UV`, enters the absolute values but
cancels in differences across the beam.

Clipped cells (any channel at clipping) are never used; a zone with more than
:data:`CLIPPED_ZONE_LIMIT` of its solid angle clipped is not measured.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..beammap import build_beam_map
from ..camera.linearize import LinearImage
from ..figure import Figure, not_measured
from ..floor import floor_corrected
from ..flux import inside_contour
from .channel_noise import ChannelNoise, channel_noise
from .chromaticity import delta_uv_prime, uv_prime_of, xy_of
from .nominal import nominal_class
from .transform import ColourTransform, matrix_transform, srgb_transform
from .white_balance import AUTO_WB_NOTE, white_balance_of

__all__ = ["ZONES", "ASSUMED_TRANSFORM_SIGMA_UV", "CLIPPED_ZONE_LIMIT", "MAP_SIGMA_UV_LIMIT", "RING_STEP_DEG",
           "SECTOR_STEP_DEG", "BeamColour", "beam_colour", "colour_not_measured", "COLOUR_LIMITS"]

ZONES = ("hotspot", "corona", "spill")
#: 1-sigma error in (u', v') of an assumed camera transform (sRGB matrix, white balance taken as
#: D65) for near-white light: an assumption (from memory: consumer cameras' rendering of whites
#: differs from colorimetry by a few thousandths in u'v'); it cancels in differences across the beam.
ASSUMED_TRANSFORM_SIGMA_UV = 0.005
#: A zone with more than this fraction of its solid angle clipped is not measured.
CLIPPED_ZONE_LIMIT = 0.01
#: Map cells whose own (u', v') noise exceeds this are left out of the tint map and its largest
#: difference (0.001 is far below the just-visible tint step, roughly 0.003-0.005; common practice).
MAP_SIGMA_UV_LIMIT = 0.001
#: Polar-angle step (deg) of the rings of the colour map, and azimuth step (deg) of its sectors.
RING_STEP_DEG = 1.0
SECTOR_STEP_DEG = 30.0

#: What a camera cannot tell about colour: printed in every colour section.
COLOUR_LIMITS = (
    "Colour rendering (CRI Ra, TM-30 Rf/Rg) cannot be measured from a camera photo: it needs the light's spectrum "
    "(a spectrometer); beamshot does not report it.",
    "Chromaticity comes from three camera channels through a stated transform, not from a spectrum: absolute CCT "
    "and Duv are as good as that transform and the white balance; differences across the beam are more robust.",
    "Dim parts of the beam carry a larger colour uncertainty (each channel's noise); clipped parts are not measured.",
)


@dataclass(frozen=True)
class BeamColour:
    """The colour of a beam: per zone, as a map, tint uniformity; ``measured`` False with ``reason`` if not."""

    measured: bool
    reason: str | None
    transform: ColourTransform | None = None
    white_balance: str = "unknown"
    zones: dict = field(default_factory=dict)
    tint: dict = field(default_factory=dict)
    rings: dict = field(default_factory=dict)
    #: the (theta, phi) super-cells: theta/phi centres (deg) and (u', v') with 1-sigma, NaN where not measured
    cells: dict = field(default_factory=dict, repr=False)
    notes: tuple = ()

    def to_dict(self) -> dict:
        return {
            "measured": self.measured,
            "reason": self.reason,
            "transform": None if self.transform is None else self.transform.to_dict(),
            "white_balance": self.white_balance,
            "zones": {z: {k: (v.to_dict() if isinstance(v, Figure) else v) for k, v in d.items()}
                      for z, d in self.zones.items()},
            "tint": {k: (v.to_dict() if isinstance(v, Figure) else v) for k, v in self.tint.items()},
            "rings": self.rings,
            "notes": list(self.notes),
            "limits": list(COLOUR_LIMITS),
        }


def colour_not_measured(reason: str, white_balance: str = "unknown") -> BeamColour:
    return BeamColour(False, reason, white_balance=white_balance)


def _is_grey(rgb: np.ndarray) -> bool:
    """True if the three channels are equal everywhere (a grey-scale photo decoded to RGB)."""
    step = max(1, rgb.shape[0] // 400)
    s = rgb[::step]
    return bool(np.array_equal(s[..., 0], s[..., 1]) and np.array_equal(s[..., 1], s[..., 2]))


def choose_transform(photos, profile, raw: bool) -> tuple[ColourTransform | None, str | None]:
    """The stated transform for these photos and camera profile, or (None, reason) if there is none."""
    cm = getattr(profile, "colour_matrix", None)
    if cm is not None:
        return matrix_transform(cm["matrix"], f"fitted from a reference chart (camera profile '{profile.name}', "
                                              f"residual {cm.get('residual_rms_uv', float('nan')):.4f} in u'v')"), None
    if raw:
        if any(p.colour_facts.get("camera_matrix") is False for p in photos):
            return None, ("the raw file carries no camera-to-XYZ matrix, so its RGB is the sensor's own; fit a colour "
                          "matrix from a chart photo into the camera profile, or use a raw format LibRaw knows")
        return srgb_transform("raw: the file's camera-to-XYZ matrix, applied by LibRaw to sRGB primaries; then "
                              "linear sRGB -> XYZ (IEC 61966-2-1)",
                              "the camera's as-shot white balance (LibRaw use_camera_wb); its white is taken as "
                              "D65"), None
    return srgb_transform("assumed: the camera writes sRGB, linear sRGB -> XYZ (IEC 61966-2-1)",
                          "assumed fixed and balanced for D65 daylight: camera RGB (1, 1, 1) is taken as D65"), None


def _channel_maps(image: LinearImage, mapping, foot_mm, distance_m, axis_dir, theta_step_deg, phi_step_deg):
    """Maps of R, G, B (floor removed) and of ones (the factor r^2/cos), on the intensity map's grid."""
    rgb = image.rgb
    out = []
    for plane in (rgb[..., 0], rgb[..., 1], rgb[..., 2], None):
        lum = np.ones(image.shape, np.float32) if plane is None else np.ascontiguousarray(plane)
        one = LinearImage(luminance=lum, saturated=image.saturated, bin_factor=image.bin_factor,
                          full_shape=image.full_shape)
        m = build_beam_map(one, mapping, foot_mm, distance_m, axis_dir=axis_dir, theta_step_deg=theta_step_deg,
                           phi_step_deg=phi_step_deg)
        if plane is not None:
            m = floor_corrected(m, bin_factor=image.bin_factor)[0]
        out.append(m)
    return out


def _zone_weights(beam, shape, scales=(1.0, 1.0, 1.0)) -> tuple[dict, dict]:
    """Fraction (0-1) of each cell in each zone, and the reason for zones that cannot be drawn;
    ``scales`` multiply the hotspot contour's, the field contour's and the spill edge's angles."""
    pk = shape.peak
    weights, reasons = {}, {}
    hot = fld = None
    if shape.hotspot.complete:
        hot = inside_contour(beam, shape.hotspot, pk.vector, scales[0])
        weights["hotspot"] = hot
    else:
        reasons["hotspot"] = "the 50 % contour is not complete in the photo"
    if shape.field.complete and hot is not None:
        fld = np.maximum(inside_contour(beam, shape.field, pk.vector, scales[1]), hot)
        weights["corona"] = np.clip(fld - hot, 0.0, 1.0)
    else:
        reasons["corona"] = "the 10 % contour is not complete in the photo"
    if shape.edge.complete and fld is not None:
        edge = shape.edge.at(beam.phi)[None, :] * scales[2]
        inside = np.clip(0.5 - (beam.theta[:, None] - edge) / beam.d_theta, 0.0, 1.0)
        weights["spill"] = np.clip(inside - fld, 0.0, 1.0)
    else:
        reasons["spill"] = "the spill edge is not complete in the photo" if fld is not None else reasons["corona"]
    return weights, reasons


@dataclass(frozen=True)
class _Sums:
    s: np.ndarray       # channel sums (3,)
    var: np.ndarray     # their variances (3,)
    solid_angle: float  # sr used
    clipped: float      # fraction of the zone's solid angle clipped
    level: np.ndarray | None = None  # mean linear level of each channel (3,): sum(w v f) / sum(w f)


def _sums(w: np.ndarray, maps, factor: np.ndarray, d_omega: np.ndarray, noise: ChannelNoise, share: np.ndarray,
          saturated: np.ndarray) -> _Sums:
    """Channel sums over cells weighted ``w`` (zone fraction), their noise variances, clipped fraction."""
    vals = np.stack([m.intensity for m in maps], axis=-1)
    finite = np.all(np.isfinite(vals), axis=-1) & np.isfinite(factor) & (factor > 0)
    ww = w * d_omega
    total = float(np.sum(ww[np.isfinite(ww)]))
    clipped = float(np.sum(ww[saturated & (w > 0)])) / total if total > 0 else 0.0
    use = finite & ~saturated & (w > 0)
    wu = ww[use]
    s = np.array([float(np.sum(wu * vals[..., c][use])) for c in range(3)])
    var = np.empty(3)
    f = factor[use]
    for c in range(3):
        v = vals[..., c][use] / f
        var[c] = float(np.sum((wu * f) ** 2 * _cell_variance(noise, c, v, share[use])))
    with np.errstate(invalid="ignore", divide="ignore"):
        level = s / float(np.sum(wu * f))
    return _Sums(s, var, float(np.sum(wu)), clipped, level)


def _numeric_jacobian(fn, x: np.ndarray) -> np.ndarray:
    """Central-difference Jacobian of ``fn`` at ``x`` (relative step 1e-6)."""
    x = np.asarray(x, float)
    y0 = np.asarray(fn(x), float)
    j = np.empty((y0.size, x.size))
    for i in range(x.size):
        h = 1e-6 * max(abs(x[i]), 1e-12)
        xp, xm = x.copy(), x.copy()
        xp[i] += h
        xm[i] -= h
        j[:, i] = (np.asarray(fn(xp), float) - np.asarray(fn(xm), float)) / (2 * h)
    return j


def _chromaticity(sums: _Sums, m: np.ndarray):
    """xy, u'v' and their 2x2 covariances from channel sums through matrix ``m``."""
    xyz = m @ sums.s
    cov_xyz = m @ np.diag(sums.var) @ m.T
    out = {}
    for name, fn in (("xy", xy_of), ("uv", uv_prime_of)):
        j = _numeric_jacobian(fn, xyz)
        out[name] = (np.asarray(fn(xyz), float), j @ cov_xyz @ j.T)
    return xyz, out


def _zone_figures(sums: _Sums, transform: ColourTransform, wb: str, zone: str, shifts_xy=(), shifts_uv=(),
                  coding_uv: float = 0.0) -> dict:
    """The figures of one zone: x, y, u', v', CCT, Duv (each value, uncertainty, status), the checks.
    ``shifts_xy``/``shifts_uv``: the zone's (x, y) and (u', v') moves when each zone boundary moves by
    its 1-sigma uncertainty (the "zone boundaries" term); ``coding_uv``: the JPEG coding term in
    (u', v') (1-sigma per axis, at the zone's mean level; the "JPEG coding" term)."""
    from .cct import cct_duv_with_uncertainty

    _, ch = _chromaticity(sums, np.asarray(transform.matrix, float))
    (xy, cxy), (uv, cuv) = ch["xy"], ch["uv"]
    bxy = sum((np.outer(d, d) for d in shifts_xy), np.zeros((2, 2)))
    buv = sum((np.outer(d, d) for d in shifts_uv), np.zeros((2, 2)))
    absolute_status = "measured" if transform.absolute else "estimate"
    t_uv = 0.0 if transform.absolute else ASSUMED_TRANSFORM_SIGMA_UV
    method = f"channel sums over the {zone} zone -> XYZ ({transform.source}) -> CIE chromaticity"
    figs = {}
    # the transform term in x, y: u'v' error mapped through d(x, y)/d(u', v') (CIE 15 inverse formulas)
    jxy = _numeric_jacobian(lambda p: np.array([9 * p[0] / (6 * p[0] - 16 * p[1] + 12),
                                                4 * p[1] / (6 * p[0] - 16 * p[1] + 12)]), uv)
    t_xy = np.sqrt(np.diag(jxy @ (np.eye(2) * t_uv**2) @ jxy.T))
    k_xy = np.sqrt(np.diag(jxy @ (np.eye(2) * coding_uv**2) @ jxy.T))
    for i, key in enumerate(("x", "y")):
        figs[key] = _chroma_figure(float(xy[i]), float(np.sqrt(cxy[i, i])), float(t_xy[i]), absolute_status, wb,
                                   method + " (CIE 1931 x, y)", float(np.sqrt(bxy[i, i])), float(k_xy[i]))
    for i, key in enumerate(("u_prime", "v_prime")):
        figs[key] = _chroma_figure(float(uv[i]), float(np.sqrt(cuv[i, i])), t_uv, absolute_status, wb,
                                   method + " (CIE 1976 u', v')", float(np.sqrt(buv[i, i])), coding_uv)
    res = cct_duv_with_uncertainty(uv, cuv)
    cct_method = "Ohno (2013, LEUKOS 10(1):47-55) on CIE 1960 (u, v), colour-science; Robertson (1968) cross-check"
    if wb == "auto":
        figs["cct"] = not_measured("K", cct_method, AUTO_WB_NOTE)
        figs["duv"] = not_measured("", cct_method, AUTO_WB_NOTE)
    elif not res.valid:
        figs["cct"] = not_measured("K", cct_method, res.reason)
        figs["duv"] = not_measured("", cct_method, res.reason)
    else:
        ct = cct_duv_with_uncertainty(uv, np.eye(2) * t_uv**2) if t_uv else None
        cb = cct_duv_with_uncertainty(uv, buv)
        ck = cct_duv_with_uncertainty(uv, np.eye(2) * coding_uv**2) if coding_uv else None
        figs["cct"] = _with_budget(res.cct_k, res.cct_sigma_k, ct.cct_sigma_k if ct else 0.0, "K", cct_method,
                                   absolute_status, cb.cct_sigma_k, ck.cct_sigma_k if ck else 0.0)
        figs["duv"] = _with_budget(res.duv, res.duv_sigma, ct.duv_sigma if ct else 0.0, "", cct_method,
                                   absolute_status, cb.duv_sigma, ck.duv_sigma if ck else 0.0)
    known = figs["cct"].value is not None
    return {**figs,
            "cct_robertson_k": res.robertson_cct_k if known else None,
            "duv_robertson": res.robertson_duv if known else None,
            "ansi_c78377_nominal_k": nominal_class(res.cct_k, res.duv) if known else None,
            "solid_angle_sr": sums.solid_angle,
            "clipped_fraction": sums.clipped,
            "uv_covariance": [[float(v) for v in row] for row in cuv]}


def _with_budget(value, noise, transform_term, unit, method, status, boundary_term=0.0, coding_term=0.0) -> Figure:
    budget = ((("channel noise", noise),) + ((("zone boundaries", boundary_term),) if boundary_term else ())
              + ((("JPEG coding", coding_term),) if coding_term else ())
              + ((("colour transform assumed", transform_term),) if transform_term else ()))
    total = float(np.sqrt(noise**2 + transform_term**2 + boundary_term**2 + coding_term**2))
    return Figure(float(value), total, unit, method, status, budget=budget)


def _chroma_figure(value, noise, transform_term, status, wb, method, boundary_term=0.0, coding_term=0.0) -> Figure:
    fig = _with_budget(value, noise, transform_term, "", method, status, boundary_term, coding_term)
    if wb == "auto":
        from dataclasses import replace

        return replace(fig, status="estimate", reason="shifted by the camera's automatic white balance; only "
                                                      "differences across the beam are meaningful")
    return fig


def _share(beam, mapping, image: LinearImage, distance_m: float, foot_mm) -> np.ndarray:
    """a_px / a_cell per cell: how many cells sample one working pixel (its wall size taken at the
    beam's foot; the cell's for a light square to the wall)."""
    foot = np.asarray(foot_mm, float)
    px = mapping.wall_to_image(foot[None, :])[0]
    b = image.bin_factor
    mm = mapping.image_to_wall(np.array([px + (b, 0.0), px + (0.0, b)]))
    d = np.linalg.norm(mm - foot[None, :], axis=1)
    px_mm2 = float(d[0] * d[1]) if np.all(np.isfinite(d)) else np.nan
    dist_mm = distance_m * 1000.0
    th = beam.theta[:, None]
    # wall area of a polar cell for a light square to the wall: rho d_rho d_phi, rho = D tan(theta)
    cell_mm2 = dist_mm * np.tan(th) * dist_mm / np.cos(th) ** 2 * beam.d_theta * beam.d_phi
    if not np.isfinite(px_mm2):
        return np.ones(beam.intensity.shape)
    return np.broadcast_to(px_mm2 / cell_mm2, beam.intensity.shape)


def _cell_variance(noise: ChannelNoise, c: int, v: np.ndarray, share: np.ndarray) -> np.ndarray:
    """Noise variance of a cell's point sample of channel ``c`` at linear ``v``: sigma^2 max(a_px / a_cell, 1)."""
    return noise.sigma(c, v) ** 2 * np.maximum(share, 1.0)


def beam_colour(image: LinearImage, measured, *, photos, profile, raw: bool,
                boundary_rel=(0.0, 0.0, 0.0)) -> BeamColour:
    """The colour of the beam (see the module docstring).  ``measured`` is the analysis's measured
    beam (map, shape, mapping, foot point, axis); ``photos`` the beam photo(s); ``raw`` says they
    are raw files; ``boundary_rel`` the relative 1-sigma uncertainties of the
    hotspot angle, field angle and spill angle (each zone boundary is moved by it in turn)."""
    wb = white_balance_of(photos)
    if _is_grey(image.rgb):
        return colour_not_measured("the photo is grey-scale (its three channels are equal); colour needs a colour "
                                   "photo", wb)
    transform, reason = choose_transform(photos, profile, raw)
    if transform is None:
        return colour_not_measured(reason, wb)
    beam, shape = measured.beam, measured.shape
    maps = _channel_maps(image, measured.mapping, measured.foot_mm, measured.distance_m, measured.axis_dir,
                         np.degrees(beam.d_theta), np.degrees(beam.d_phi))
    factor = maps[3].intensity
    noise = channel_noise(image.rgb, image.saturated)
    d_omega = np.broadcast_to(beam.cell_solid_angles(), beam.intensity.shape)
    share = _share(beam, measured.mapping, image, measured.distance_m, measured.foot_mm)
    sat = maps[0].saturated
    m = np.asarray(transform.matrix, float)
    coding = _coding_response(photos, profile)
    cells = _cells(beam, shape, maps[:3], factor, d_omega, noise, share, sat, m, coding)
    gain = correlation_gain(cells)
    cells = {**cells, "sigma_uv": cells["sigma_uv"] * np.sqrt(gain)}
    weights, reasons = _zone_weights(beam, shape)
    # each boundary moved by its 1-sigma relative uncertainty, in turn (the "zone boundaries" term)
    moved = [_zone_weights(beam, shape, tuple(1.0 + (r if k == i else 0.0) for k, r in enumerate(boundary_rel)))[0]
             for i in range(3) if boundary_rel[i] > 0]
    notes = []
    if wb == "auto":
        notes.append(AUTO_WB_NOTE)
    elif wb == "unknown" and not transform.absolute:
        notes.append("the photo does not say how white was balanced (no EXIF WhiteBalance tag); it is assumed fixed "
                     "(daylight, D65) - with automatic white balance the absolute CCT would not be meaningful")
    zones, zone_uv, zone_moved = {}, {}, {}
    for z in ZONES:
        if z not in weights:
            zones[z] = _zone_not_measured(reasons[z])
            continue
        sums = _sums(weights[z], maps[:3], factor, d_omega, noise, share, sat)
        sums = _Sums(sums.s, sums.var * gain, sums.solid_angle, sums.clipped, sums.level)
        if sums.clipped > CLIPPED_ZONE_LIMIT:
            zones[z] = _zone_not_measured(f"{sums.clipped:.0%} of the {z} is clipped in at least one channel; lower "
                                          "the exposure or bracket")
            continue
        if not np.all(sums.s > 0):
            zones[z] = _zone_not_measured(f"the {z} has no light in at least one channel")
            continue
        xyz0 = m @ sums.s
        shifted = [m @ _sums(w[z], maps[:3], factor, d_omega, noise, share, sat).s for w in moved if z in w]
        coded = float(_coding_sigma_uv(coding, sums.level[None, :], m, zone=True)[0])
        zones[z] = _zone_figures(sums, transform, wb, z, [xy_of(x) - xy_of(xyz0) for x in shifted],
                                 [uv_prime_of(x) - uv_prime_of(xyz0) for x in shifted], coded)
        zone_uv[z] = (np.array([zones[z]["u_prime"].value, zones[z]["v_prime"].value]),
                      np.array(zones[z]["uv_covariance"]), coded)
        zone_moved[z] = [uv_prime_of(x) for x in shifted]
    tint = _zone_tint(zone_uv, zone_moved)
    tint.update(_map_tint(cells))
    tint["noise_correlation_gain"] = gain
    rings = _rings(beam, shape, maps[:3], factor, d_omega, noise, share, sat, m, coding, gain)
    return BeamColour(True, None, transform, wb, zones, tint, rings, cells, tuple(notes))


def _zone_not_measured(reason: str) -> dict:
    method = "channel sums over the zone -> XYZ -> chromaticity; Ohno (2013) CCT and Duv"
    return {"x": not_measured("", method, reason), "y": not_measured("", method, reason),
            "u_prime": not_measured("", method, reason), "v_prime": not_measured("", method, reason),
            "cct": not_measured("K", method, reason), "duv": not_measured("", method, reason),
            "cct_robertson_k": None, "duv_robertson": None, "ansi_c78377_nominal_k": None, "solid_angle_sr": None,
            "clipped_fraction": None, "uv_covariance": None}


def _zone_tint(zone_uv: dict, zone_moved: dict | None = None) -> dict:
    """Largest delta u'v' between two zones, with its uncertainty: noise of both, and the change when
    each zone boundary moves by its 1-sigma uncertainty (the transform's error cancels)."""
    method = ("largest Euclidean distance in CIE 1976 (u', v') between the zones' chromaticities; uncertainty from "
              "channel noise and the zone boundaries (a shared transform error cancels to first order)")
    names = [z for z in ZONES if z in zone_uv]
    best = None
    for i, a in enumerate(names):
        for b in names[i + 1:]:
            (pa, ca, ka), (pb, cb, kb) = zone_uv[a], zone_uv[b]
            d = float(delta_uv_prime(pa, pb))
            g = (pa - pb) / d if d > 0 else np.array([1.0, 0.0]) / np.sqrt(2)
            s = float(np.sqrt(max(g @ (ca + cb) @ g, 0.0)))
            if best is None or d > best[0]:
                best = (d, s, a, b, float(np.hypot(ka, kb)))
    if best is None:
        return {"zones_max_delta_uv": not_measured("", method, "fewer than two zones have a measured colour"),
                "zones_pair": None}
    d, s, a, b, coded = best
    moved_a, moved_b = (zone_moved or {}).get(a, []), (zone_moved or {}).get(b, [])
    bound = float(np.sqrt(sum((float(delta_uv_prime(pa, pb)) - d) ** 2 for pa, pb in zip(moved_a, moved_b))))
    budget = ((("channel noise", s),) + ((("zone boundaries", bound),) if bound else ())
              + ((("JPEG coding", coded),) if coded else ()))
    return {"zones_max_delta_uv": Figure(d, float(np.sqrt(s**2 + bound**2 + coded**2)), "", method, budget=budget),
            "zones_pair": [a, b]}


def _grid_sums(w_cells, vals, factor, d_omega, noise, share, sat):
    """Channel sums and variances for every super-cell label in ``w_cells`` (int label per map cell, -1 = none)."""
    n = int(w_cells.max()) + 1 if w_cells.size and w_cells.max() >= 0 else 0
    use = (w_cells >= 0) & np.all(np.isfinite(vals), axis=-1) & np.isfinite(factor) & (factor > 0) & ~sat
    lab = w_cells[use]
    wu = d_omega[use]
    f = factor[use]
    s = np.zeros((n, 3))
    var = np.zeros((n, 3))
    for c in range(3):
        v = vals[..., c][use]
        s[:, c] = np.bincount(lab, wu * v, minlength=n)
        var[:, c] = np.bincount(lab, (wu * f) ** 2 * _cell_variance(noise, c, v / f, share[use]), minlength=n)
    clipped = np.bincount(w_cells[(w_cells >= 0) & sat], minlength=n) > 0
    return s, var, clipped


def _grid_levels(w_cells, vals, factor, d_omega, sat, n: int) -> np.ndarray:
    """Mean linear level (1 = clipping) of each channel per super-cell label: ``sum(w v f) / sum(w f)``
    over the cells used by :func:`_grid_sums` (``v f`` the map value, ``f`` = r^2/cos); ``(n, 3)``."""
    use = (w_cells >= 0) & np.all(np.isfinite(vals), axis=-1) & np.isfinite(factor) & (factor > 0) & ~sat
    lab = w_cells[use]
    wu = d_omega[use]
    wsum = np.bincount(lab, wu * factor[use], minlength=n)[:n]
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.stack([np.bincount(lab, wu * vals[..., c][use], minlength=n)[:n] / wsum for c in range(3)], -1)


def _coding_sigma_uv(coding, levels: np.ndarray, m: np.ndarray, *, zone: bool = False) -> np.ndarray:
    """The JPEG coding term in (u', v') (1-sigma per axis) at each row of mean levels ``(n, 3)``: a band's
    (rings, map cells), or with ``zone`` a whole zone's (its errors partly cancel, jpeg_coding.ZONE_*);
    zeros unless ``coding`` (the tone curve of a single 8-bit JPEG, :func:`_coding_response`) is given."""
    if coding is None:
        return np.zeros(len(levels))
    from ..jpeg_coding import ZONE_CHROMA_RMS_CODES, ZONE_LUMA_RMS_CODES, chroma_sigma_uv

    if zone:
        return chroma_sigma_uv(levels, coding, m, sigma_luma_codes=ZONE_LUMA_RMS_CODES,
                               sigma_chroma_codes=ZONE_CHROMA_RMS_CODES)
    return chroma_sigma_uv(levels, coding, m)


def _coding_response(photos, profile):
    """The tone curve (``profile.response``, the analysis's default) under which a JPEG's concentric coding
    error is sized, or None unless the beam photo is a single 8-bit JPEG (beamshot.jpeg_coding; a bracket's
    merge takes its levels from several frames, mostly at brighter codes: not counted, as for the rings)."""
    from ..camera.response import Response
    from ..jpeg_coding import is_jpeg

    if len(photos) != 1 or not is_jpeg(photos[0]) or getattr(photos[0], "max_code", 255) != 255:
        return None
    return getattr(profile, "response", None) or Response()


def _uv_and_sigma(s, var, m):
    """(u', v') of each row of channel sums and the RMS 1-sigma radius sqrt(tr C / 2) (first order)."""
    xyz = s @ m.T
    uv = uv_prime_of(xyz)
    x, y, z = xyz[:, 0], xyz[:, 1], xyz[:, 2]
    with np.errstate(invalid="ignore", divide="ignore"):
        d2 = (x + 15.0 * y + 3.0 * z) ** 2
        d = np.sqrt(d2)
        # d(u', v')/d(X, Y, Z) (beamshot.colour.chromaticity.uv_prime_jacobian), one 2x3 per row
        j = np.stack([np.stack([4.0 * (d - x), -60.0 * x, -12.0 * x], -1),
                      np.stack([-9.0 * y, 9.0 * (d - 15.0 * y), -27.0 * y], -1)], 1) / d2[:, None, None]
        jm = j @ m  # d(u', v')/d(R, G, B)
        c_tr = np.einsum("nkc,nc,nkc->n", jm, var, jm)
        sig = np.sqrt(np.clip(c_tr / 2.0, 0.0, None))
    bad = ~(np.all(np.isfinite(uv), axis=1) & np.all(s > 0, axis=1))
    sig[bad] = np.nan
    uv[bad] = np.nan
    return uv, sig


def _reach(beam, shape) -> float:
    """Largest polar angle (rad) of the colour map: the spill edge if known, else the field contour's reach."""
    if shape.edge.complete:
        return float(np.max(shape.edge.theta))
    return float(beam.theta[-1])


def _cells(beam, shape, maps, factor, d_omega, noise, share, sat, m, coding=None) -> dict:
    """(u', v') over (theta, phi) super-cells of RING_STEP_DEG x SECTOR_STEP_DEG inside the reach, the
    noise's 1-sigma ``sigma_uv`` and the JPEG coding term ``sigma_uv_coding`` (:func:`_coding_sigma_uv`)."""
    vals = np.stack([mm.intensity for mm in maps], axis=-1)
    reach = _reach(beam, shape)
    n_r = max(1, int(np.ceil(np.degrees(reach) / RING_STEP_DEG)))
    n_s = int(round(360.0 / SECTOR_STEP_DEG))
    ring = np.floor(np.degrees(beam.theta) / RING_STEP_DEG).astype(int)[:, None]
    sector = np.floor(np.degrees(beam.phi) / SECTOR_STEP_DEG).astype(int)[None, :] % n_s
    inside = beam.theta[:, None] <= reach
    if shape.edge.complete:
        inside = beam.theta[:, None] <= shape.edge.at(beam.phi)[None, :]
    label = np.where(inside & (ring < n_r), ring * n_s + sector, -1)
    label = np.broadcast_to(label, beam.intensity.shape).copy()
    s, var, clipped = _grid_sums(label, vals, factor, d_omega, noise, share, sat)
    n = n_r * n_s
    s = np.vstack([s, np.zeros((n - len(s), 3))]) if len(s) < n else s[:n]
    var = np.vstack([var, np.zeros((n - len(var), 3))]) if len(var) < n else var[:n]
    clipped = np.r_[clipped, np.zeros(max(0, n - len(clipped)), bool)][:n]
    uv, sig = _uv_and_sigma(s, var, m)
    uv[clipped] = np.nan
    sig[clipped] = np.nan
    coded = _coding_sigma_uv(coding, _grid_levels(label, vals, factor, d_omega, sat, n), m)
    return {"theta_edges_deg": (np.arange(n_r + 1) * RING_STEP_DEG).tolist(),
            "phi_edges_deg": (np.arange(n_s + 1) * SECTOR_STEP_DEG).tolist(),
            "u_prime": uv[:, 0].reshape(n_r, n_s), "v_prime": uv[:, 1].reshape(n_r, n_s),
            "sigma_uv": sig.reshape(n_r, n_s), "sigma_uv_coding": coded.reshape(n_r, n_s)}


def correlation_gain(cells: dict) -> float:
    """Variance factor (>= 1) for errors the pixel model misses (a JPEG's block-correlated colour noise).

    In each ring of the colour map the sectors' (u', v') scatter about their mean is compared with
    the model's noise, ``g_ring = mean((u'-mean)^2 + (v'-mean)^2) / 2 / mean(sigma^2)`` (ddof 1);
    ``g`` is the median over rings with at least :data:`_GAIN_MIN_SECTORS` measured sectors, never
    below 1.  Real tint changes with azimuth raise single rings; the median keeps them from
    setting ``g`` unless most rings change (then the uncertainty is conservative).
    """
    u, v, s = cells["u_prime"], cells["v_prime"], cells["sigma_uv"]
    ok = np.isfinite(u) & np.isfinite(v) & np.isfinite(s)
    ratios = []
    for i in range(u.shape[0]):
        k = ok[i]
        if k.sum() < _GAIN_MIN_SECTORS:
            continue
        du, dv = u[i, k] - u[i, k].mean(), v[i, k] - v[i, k].mean()
        emp = (np.sum(du**2) + np.sum(dv**2)) / (2.0 * (k.sum() - 1))
        ratios.append(emp / float(np.mean(s[i, k] ** 2)))
    if len(ratios) < 3:
        return 1.0
    return float(max(1.0, np.median(ratios)))


#: Fewest measured sectors in a ring for its scatter to count in :func:`correlation_gain`.
_GAIN_MIN_SECTORS = 8


def _map_tint(cells: dict) -> dict:
    """Largest delta u'v' between two map cells whose own noise is below MAP_SIGMA_UV_LIMIT."""
    method = (f"largest distance in CIE 1976 (u', v') between two cells of {RING_STEP_DEG:g} deg x "
              f"{SECTOR_STEP_DEG:g} deg inside the spill edge, among cells with a (u', v') noise below "
              f"{MAP_SIGMA_UV_LIMIT} and nothing clipped")
    uv = np.c_[cells["u_prime"].ravel(), cells["v_prime"].ravel()]
    sig = cells["sigma_uv"].ravel()
    ok = np.all(np.isfinite(uv), axis=1) & np.isfinite(sig) & (sig <= MAP_SIGMA_UV_LIMIT)
    if ok.sum() < 2:
        return {"map_max_delta_uv": not_measured("", method, "fewer than two map cells are bright enough for colour"),
                "map_cells_used": int(ok.sum())}
    p, s = uv[ok], sig[ok]
    coded = np.asarray(cells.get("sigma_uv_coding", np.zeros_like(cells["sigma_uv"])), float).ravel()[ok]
    d = np.hypot(p[:, None, 0] - p[None, :, 0], p[:, None, 1] - p[None, :, 1])
    i, j = np.unravel_index(int(np.argmax(d)), d.shape)
    u = float(np.hypot(s[i], s[j]))
    # each cell's coding error is its ring's (the same all around: it cancels between two cells of one
    # ring); two rings' errors are taken as independent
    rings_of = np.flatnonzero(ok) // cells["sigma_uv"].shape[-1]
    c = float(np.hypot(coded[i], coded[j])) if rings_of[i] != rings_of[j] else 0.0
    budget = (("channel noise", u),) + ((("JPEG coding", c),) if c > 0 else ())
    return {"map_max_delta_uv": Figure(float(d[i, j]), float(np.hypot(u, c)), "", method, budget=budget),
            "map_cells_used": int(ok.sum())}


def _rings(beam, shape, maps, factor, d_omega, noise, share, sat, m, coding=None, gain: float = 1.0) -> dict:
    """(u', v') of whole rings (all azimuths) of RING_STEP_DEG / 2 against polar angle, to the reach, and
    their 1-sigma: the noise (times the variance factor ``gain``) and the JPEG coding term in quadrature.
    The coding error is the same all around a ring (beamshot.jpeg_coding), so the ring's mean keeps it."""
    step = RING_STEP_DEG / 2.0
    vals = np.stack([mm.intensity for mm in maps], axis=-1)
    reach = _reach(beam, shape)
    n_r = max(1, int(np.ceil(np.degrees(reach) / step)))
    ring = np.floor(np.degrees(beam.theta) / step).astype(int)
    label = np.broadcast_to(np.where(ring < n_r, ring, -1)[:, None], beam.intensity.shape).copy()
    if shape.edge.complete:
        label[beam.theta[:, None].repeat(len(beam.phi), 1) > shape.edge.at(beam.phi)[None, :]] = -1
    s, var, clipped = _grid_sums(label, vals, factor, d_omega, noise, share, sat)
    uv, sig = _uv_and_sigma(s, var, m)
    uv[clipped[:len(uv)]] = np.nan
    sig[clipped[:len(sig)]] = np.nan
    coded = _coding_sigma_uv(coding, _grid_levels(label, vals, factor, d_omega, sat, len(s)), m)
    sig = np.hypot(sig * np.sqrt(gain), coded)
    return {"theta_deg": ((np.arange(len(uv)) + 0.5) * step).tolist(), "u_prime": uv[:, 0].tolist(),
            "v_prime": uv[:, 1].tolist(), "sigma_uv": sig.tolist()}
