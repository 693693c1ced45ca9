"""Bracketed series: checks, relative exposures and camera-response recovery.

References
----------
- P. E. Debevec, J. Malik, "Recovering High Dynamic Range Radiance Maps from Photographs",
  Proc. SIGGRAPH '97, 369-378, doi:10.1145/258734.258884 (OpenCV ``createCalibrateDebevec``).
- M. A. Robertson, S. Borman, R. L. Stevenson, "Estimation-theoretic approach to dynamic range
  enhancement using multiple exposures", J. Electronic Imaging 12(2), 219-228 (2003); OpenCV
  ``createCalibrateRobertson`` implements the 1999 conference version.
- Relative exposure of a frame: ``t S / N^2`` (ISO 12232 focal-plane exposure at fixed scene
  luminance scales with t / N^2; the linear signal of saturation speed S with S).
- Motion between frames: S. Mann, R. W. Picard, "On being 'undigital' with digital cameras",
  IS&T 48th Annual Conf. (1995) and S. Mann, "Comparametric equations with practical
  applications in quantigraphic image processing", IEEE TIP 9(8), 1389-1406 (2000): for a still
  scene the code of one exposure is a monotonic function of the code of another (the
  comparametric function), whatever the response curve.  B. D. Lucas, T. Kanade, "An iterative
  image registration technique", IJCAI 1981: the translation ``d`` with ``b(x + d) = a(x)``
  solves ``M d = -sum w g (b - a)`` with the structure tensor ``M = sum w g g^T`` (``g`` the
  image gradient); its eigenvectors are the directions the scene constrains (C. Harris,
  M. Stephens, Alvey Vision Conf. 1988), and a direction with a (near) zero eigenvalue - the
  bands of a step wedge, a flat wall - cannot be measured.  The comparametric function is
  made monotonic by isotonic regression (pool adjacent violators; Barlow et al., "Statistical
  inference under order restrictions", Wiley 1972).

OpenCV returns a 256-entry inverse response per channel at an arbitrary scale; it is
normalised here to 1 at code 255 (extrapolated in log from codes 200-240, because the top
codes are clipped in every frame), made monotonic, and its consistency is measured: the RMS
of ``log((v_j / e_j) / (v_i / e_i))`` over pixels at 5-95 % of the code range in both frames.
"""

from __future__ import annotations

from dataclasses import dataclass

import cv2
import numpy as np

from ..errors import BeamshotError
from ..photo import Photo
from .response import Response

__all__ = ["MIN_FRAMES", "MOVE_LIMIT_PX", "ALIGN_EIGEN_RATIO", "ALIGN_SIGMA_PX", "Alignment", "ResponseFit",
           "relative_exposures", "check_alignment", "recover_response", "consistency_rms"]

MIN_FRAMES = 3
#: A frame shifted by more than this many pixels (at 1024 px across) against its neighbour is refused.
MOVE_LIMIT_PX = 1.5
_CODE_LO, _CODE_HI = 13, 242  # 5 % and 95 % of 255
_SAMPLES = 600
_BLOCK = 8
_ALIGN_SIDE = 1024
_ALIGN_SEARCH = 40  # pixels searched in each direction at 1024 px across
#: Codes (fraction of full scale) between which a pixel counts as well exposed for alignment:
#: above the noise and JPEG floor, below the shoulder where clipping starts (common practice).
_ALIGN_LO, _ALIGN_HI = 0.04, 0.94
#: Fewer pixels well exposed in both frames than this fraction of the picture: not checked.
_ALIGN_MIN_OVERLAP = 0.002
_COMPARAMETRIC_BINS = 96
_LK_STEPS = 6  # Gauss-Newton steps per scale
_ALIGN_ROUNDS = 4  # comparametric map re-estimated at the latest shift, at most this often
#: A direction whose (cross) structure-tensor eigenvalue is below this fraction of the largest
#: is unconstrained (from memory: the usual corner/edge ratio tests use 0.01-0.1).
ALIGN_EIGEN_RATIO = 0.01
#: ... and so is one along which the least-squares shift error exceeds this (px at 1024 across;
#: a fifth of ``MOVE_LIMIT_PX``, so a constrained direction resolves the limit).
ALIGN_SIGMA_PX = 0.3


@dataclass(frozen=True)
class ResponseFit:
    """A recovered response with its quality figures."""

    response: Response
    method: str
    consistency_rms: float
    monotonic_fixes: int
    exposures: tuple[float, ...]
    warnings: tuple[str, ...]
    #: What the motion check could not check (directions without detail), see :class:`Alignment`.
    alignment_notes: tuple[str, ...] = ()

    def quality(self) -> dict:
        return {"method": self.method, "consistency_rms": self.consistency_rms,
                "monotonic_fixes": self.monotonic_fixes, "frames": len(self.exposures),
                "relative_exposures": list(self.exposures), "warnings": list(self.warnings),
                "alignment_notes": list(self.alignment_notes)}


def relative_exposures(photos: list[Photo], times: list[float] | None = None) -> np.ndarray:
    """``t S / N^2`` per frame from EXIF (or explicit ``times`` in seconds); refuses missing facts."""
    if times is not None:
        if len(times) != len(photos):
            raise BeamshotError(f"{len(times)} exposure times for {len(photos)} photos; give one per photo")
        return np.asarray(times, float)
    out = []
    for p in photos:
        e = p.exif.exposure_product()
        if e is None:
            raise BeamshotError(f"{p.name}: the EXIF lacks exposure time, f-number or ISO; "
                                "give the exposure times with --times")
        out.append(e)
    return np.asarray(out, float)


def _check_sizes(photos: list[Photo]) -> None:
    shape = photos[0].shape
    for p in photos[1:]:
        if p.shape != shape:
            raise BeamshotError(f"{p.name}: {p.shape[1]}x{p.shape[0]} differs from {photos[0].name} "
                                f"({shape[1]}x{shape[0]}); a bracket must come from one camera and position")


@dataclass(frozen=True)
class Alignment:
    """What :func:`check_alignment` measured for each pair of neighbouring exposures.

    ``pairs`` holds one dict per pair: ``frame`` and ``against`` (names), ``shift_px``
    ``(dx, dy)`` in full-resolution pixels measured along the constrained directions only (None
    when the pair shares too little), ``constrained`` (``"x and y"``, ``"x only"``, ``"none"``
    ...) and ``sigma_px`` (1-sigma along each constrained direction).  ``notes`` explains every
    direction the scene cannot constrain; they are information, not refusals.
    """

    pairs: tuple[dict, ...]
    notes: tuple[str, ...]

    @property
    def shifts_px(self) -> list[float | None]:
        """Length of the measured shift per pair (full-resolution pixels), None if not measurable."""
        return [None if p["shift_px"] is None else float(np.hypot(*p["shift_px"])) for p in self.pairs]


def _gray_small(photo: Photo, scale: float) -> np.ndarray:
    small = cv2.resize(photo.bgr, None, fx=scale, fy=scale, interpolation=cv2.INTER_AREA)
    return cv2.cvtColor(small, cv2.COLOR_BGR2GRAY).astype(np.float32) / np.float32(photo.max_code)


def _comparametric(a: np.ndarray, b: np.ndarray, ok_a: np.ndarray, ok: np.ndarray,
                   steep: np.ndarray) -> np.ndarray | None:
    """Frame ``a`` brought to the levels of frame ``b`` by their comparametric function.

    For a still scene the code of one exposure is a monotonic function of the code of another
    (Mann & Picard 1995; Mann, IEEE TIP 9(8) 2000, "comparametric equations"), whatever the
    camera's response.  It is estimated as the median of ``b`` in narrow bins of ``a`` over
    pixels well exposed in both (``ok``), leaving out the steepest 30 % of each bin (``steep``:
    gradient size), where a moved frame differs.  Being a function, ``b`` is well exposed
    either for most pixels of a bin or for hardly any; a bin where fewer than half of the pixels
    well exposed in ``a`` (``ok_a``) are also well exposed in ``b`` holds only pixels where the
    frames disagree, and is left out.
    """
    edges = np.linspace(_ALIGN_LO, _ALIGN_HI, _COMPARAMETRIC_BINS + 1)
    n_a = np.histogram(a[ok_a], bins=edges)[0]
    av, bv, sv = a[ok], b[ok], steep[ok]
    idx = np.clip(np.searchsorted(edges, av) - 1, 0, _COMPARAMETRIC_BINS - 1)
    order = np.argsort(idx, kind="stable")
    idx_s, a_s, b_s, s_s = idx[order], av[order], bv[order], sv[order]
    bounds = np.searchsorted(idx_s, np.arange(_COMPARAMETRIC_BINS + 1))
    xs, ys, ns = [], [], []
    for k in range(_COMPARAMETRIC_BINS):
        lo, hi = bounds[k], bounds[k + 1]
        if hi - lo >= 5 and hi - lo >= 0.5 * n_a[k]:
            keep = s_s[lo:hi] <= np.percentile(s_s[lo:hi], 70)
            xs.append(float(np.median(a_s[lo:hi][keep])))
            ys.append(float(np.median(b_s[lo:hi][keep])))
            ns.append(float(keep.sum()))
    if len(xs) < 2:
        return None
    # the comparametric function is monotonic: bin medians made monotonic by isotonic regression
    # weighted by bin counts, so that a sparse bin of edge pixels cannot lift all the bins above it
    return np.interp(a, np.asarray(xs), _isotonic(np.asarray(ys), np.asarray(ns))).astype(np.float32)


def _isotonic(y: np.ndarray, w: np.ndarray) -> np.ndarray:
    """Weighted least-squares non-decreasing fit to ``y`` (pool-adjacent-violators algorithm;
    Barlow, Bartholomew, Bremner & Brunk, "Statistical inference under order restrictions", 1972)."""
    vals, wts, sizes = [], [], []
    for yi, wi in zip(y, w):
        vals.append(float(yi))
        wts.append(float(wi))
        sizes.append(1)
        while len(vals) > 1 and vals[-2] > vals[-1]:
            wsum = wts[-2] + wts[-1]
            vals[-2] = (vals[-2] * wts[-2] + vals[-1] * wts[-1]) / wsum
            wts[-2] = wsum
            sizes[-2] += sizes[-1]
            del vals[-1], wts[-1], sizes[-1]
    return np.repeat(vals, sizes)


def _shift(img: np.ndarray, d: np.ndarray) -> np.ndarray:
    """``img(x + d)`` by bilinear interpolation (edges repeated)."""
    m = np.float32([[1, 0, d[0]], [0, 1, d[1]]])
    return cv2.warpAffine(img, m, (img.shape[1], img.shape[0]), flags=cv2.INTER_LINEAR | cv2.WARP_INVERSE_MAP,
                          borderMode=cv2.BORDER_REPLICATE)


def _structure(a: np.ndarray, b: np.ndarray, w: np.ndarray):
    """Gradient ``g`` of the mean image, frame difference ``r = b - a`` and the weighted structure
    tensor ``M = sum w g g^T`` (Lucas & Kanade 1981; Harris & Stephens 1988)."""
    mean = 0.5 * (a + b)
    gx = cv2.Sobel(mean, cv2.CV_32F, 1, 0, ksize=3, scale=1 / 8)
    gy = cv2.Sobel(mean, cv2.CV_32F, 0, 1, ksize=3, scale=1 / 8)
    r = b - a
    m = np.array([[np.sum(w * gx * gx), np.sum(w * gx * gy)],
                  [np.sum(w * gx * gy), np.sum(w * gy * gy)]], np.float64)
    rhs = np.array([np.sum(w * gx * r), np.sum(w * gy * r)], np.float64)
    return m, rhs, float(np.sum(w * r * r)), float(np.sum(w))


def _cross_structure(a: np.ndarray, b: np.ndarray, wa: np.ndarray, wb: np.ndarray, d: np.ndarray):
    """Eigenvalues (largest first) and eigenvectors of the two frames' cross structure tensor at shift ``d``.

    ``C = sym(sum w grad(a) grad(b)^T)``: the noise of the two frames is independent, so its
    expectation is the structure tensor of the noise-free scene (the noise of one frame, which
    inflates the ordinary tensor along directions without detail, averages out).
    """
    bd, w = _shift(b, d), wa * _shift(wb, d)
    ax, ay = (cv2.Sobel(a, cv2.CV_32F, 1, 0, ksize=3, scale=1 / 8), cv2.Sobel(a, cv2.CV_32F, 0, 1, ksize=3, scale=1 / 8))
    bx, by = (cv2.Sobel(bd, cv2.CV_32F, 1, 0, ksize=3, scale=1 / 8), cv2.Sobel(bd, cv2.CV_32F, 0, 1, ksize=3, scale=1 / 8))
    cxy = 0.5 * (np.sum(w * ax * by) + np.sum(w * ay * bx))
    c = np.array([[np.sum(w * ax * bx), cxy], [cxy, np.sum(w * ay * by)]], np.float64)
    lam, vec = np.linalg.eigh(c)
    return lam[::-1], vec[:, ::-1]


def _direction_name(e: np.ndarray) -> str:
    ang = float(np.degrees(np.arctan2(e[1], e[0]))) % 180.0
    if min(ang, 180.0 - ang) <= 10.0:
        return "x"
    if abs(ang - 90.0) <= 10.0:
        return "y"
    return f"{ang:.0f} deg from x"


def _pair_shift(a: np.ndarray, b: np.ndarray):
    """Translation ``d`` (px) with ``b(x + d) = a(x)`` along the directions the scene constrains.

    1. pixels well exposed in both frames (codes 4-94 %, neither near black nor clipped,
       eroded by 3 px against JPEG ringing) carry weight; ``a`` is mapped to ``b``'s levels by
       the comparametric function (:func:`_comparametric`);
    2. the eigenvectors ``e_k`` of the frames' cross structure tensor (:func:`_cross_structure`,
       free of the noise bias of a single frame's tensor) are the directions of the scene's
       detail; the least-squares standard error of a shift along ``e_k`` is
       ``sigma_k = s_r / sqrt(lambda_k)`` (``s_r`` the RMS frame difference after alignment;
       Lucas & Kanade 1981 normal equations).  A direction is constrained if
       ``lambda_k >= ALIGN_EIGEN_RATIO lambda_1`` and ``sigma_k <= ALIGN_SIGMA_PX``;
    3. a coarse search on a grid of integer shifts at 1/8 scale, then Gauss-Newton (Lucas-Kanade)
       steps at 1/4, 1/2 and full scale, each step projected on the constrained directions; the
       comparametric map is re-estimated at the new shift until the shift settles.
    Returns ``(d, constrained eigenvectors, sigma per constrained direction, unconstrained eigenvectors)``
    or None when the frames share too few well-exposed pixels.
    """
    def well(x):
        return (x > _ALIGN_LO) & (x < _ALIGN_HI)

    def project(d, basis):
        return sum((float(e @ d) * e for e in basis), np.zeros(2))

    def grad_mag(x):
        x = cv2.GaussianBlur(x, (0, 0), 1.0)
        return np.hypot(cv2.Sobel(x, cv2.CV_32F, 1, 0, ksize=3), cv2.Sobel(x, cv2.CV_32F, 0, 1, ksize=3))

    ok_a, ok_b = well(a), well(b)
    if (ok_a & ok_b).mean() < _ALIGN_MIN_OVERLAP:
        return None
    kernel = np.ones((7, 7), np.uint8)
    wa = cv2.erode(ok_a.astype(np.float32), kernel)
    wb = cv2.erode(ok_b.astype(np.float32), kernel)
    ga, gb = grad_mag(a), grad_mag(b)
    bs = cv2.GaussianBlur(b, (0, 0), 1.0)
    d = np.zeros(2)
    basis: list[np.ndarray] = []
    lam = np.zeros(2)
    vec = np.eye(2)
    for rnd in range(_ALIGN_ROUNDS):
        # the comparametric map, refined once the shift is known
        both = ok_a & well(_shift(b, d))
        if both.sum() < 100:
            return None
        a2 = _comparametric(a, _shift(b, d), ok_a, both, np.maximum(ga, _shift(gb, d)))
        if a2 is None:
            return None
        d_before = d.copy()
        a2 = cv2.GaussianBlur(a2, (0, 0), 1.0)
        if rnd == 0:
            # coarse: exhaustive integer search at 1/8 scale (mean squared difference over the overlap)
            f = 8
            size = (max(8, a2.shape[1] // f), max(8, a2.shape[0] // f))
            ac, bc, wac, wbc = (cv2.resize(x, size, interpolation=cv2.INTER_AREA) for x in (a2, bs, wa, wb))
            reach = int(np.ceil(_ALIGN_SEARCH / f))
            best, best_d = np.inf, np.zeros(2)
            h, wd = ac.shape
            total = float(np.sum(wac * wbc))
            for dy in range(-reach, reach + 1):
                for dx in range(-reach, reach + 1):
                    ys, xs = slice(max(0, -dy), min(h, h - dy)), slice(max(0, -dx), min(wd, wd - dx))
                    ys2, xs2 = slice(max(0, dy), min(h, h + dy)), slice(max(0, dx), min(wd, wd + dx))
                    ww = wac[ys, xs] * wbc[ys2, xs2]
                    sw = float(ww.sum())
                    if sw < 0.5 * total:
                        continue
                    cost = float(np.sum(ww * (bc[ys2, xs2] - ac[ys, xs]) ** 2) / sw)
                    if cost < best * (1 - 1e-6) or (cost <= best * (1 + 1e-6) and dx * dx + dy * dy < best_d @ best_d):
                        best, best_d = cost, np.array([dx, dy], float)
            d = best_d * f
            lam, vec = _cross_structure(a2, bs, wa, wb, d)
            if lam[0] <= 0:
                return np.zeros(2), [], [], [vec[:, 0], vec[:, 1]]
            basis = [vec[:, k] for k in range(2) if lam[k] >= ALIGN_EIGEN_RATIO * lam[0]]
            d = project(d, basis)
        # fine: Lucas-Kanade (Gauss-Newton) steps, coarse to fine, along the constrained directions only
        for f in ((4, 2, 1) if rnd == 0 else (1,)):
            if f > 1:
                size = (max(8, a2.shape[1] // f), max(8, a2.shape[0] // f))
                al, bl, wal, wbl = (cv2.resize(x, size, interpolation=cv2.INTER_AREA) for x in (a2, bs, wa, wb))
            else:
                al, bl, wal, wbl = a2, bs, wa, wb
            for _ in range(_LK_STEPS):
                dl = d / f
                m_l, rhs, _, _ = _structure(al, _shift(bl, dl), wal * _shift(wbl, dl))
                lam_l, vec_l = np.linalg.eigh(m_l)
                step = np.zeros(2)
                for k in range(2):
                    if lam_l[k] >= ALIGN_EIGEN_RATIO * lam_l.max() and lam_l[k] > 0:
                        step -= float(vec_l[:, k] @ rhs) / lam_l[k] * vec_l[:, k]
                d = project(d + step * f, basis)
                if np.hypot(*step) < 0.01:
                    break
        if rnd > 0 and np.hypot(*(d - d_before)) < 0.02:
            break
    lam, vec = _cross_structure(a2, bs, wa, wb, d)
    _, _, ssr, sw = _structure(a2, _shift(bs, d), wa * _shift(wb, d))
    s_r = np.sqrt(ssr / max(sw, 1.0))
    sigma = [float(s_r / np.sqrt(lam[k])) if lam[k] > 0 else np.inf for k in range(2)]
    cons = [k for k in range(2) if lam[k] >= ALIGN_EIGEN_RATIO * lam[0] and sigma[k] <= ALIGN_SIGMA_PX]
    basis = [vec[:, k] for k in cons]
    d = project(d, basis)
    return d, basis, [sigma[k] for k in cons], [vec[:, k] for k in range(2) if k not in cons]


def check_alignment(photos: list[Photo], exposures: np.ndarray | None = None) -> Alignment:
    """Shift of each frame against the next darker one, measured where the scene allows; refuses a moved frame.

    Frames are compared at ``_ALIGN_SIDE`` px across on pixels well exposed in both (see
    :func:`_pair_shift`): clipped and near-black areas carry no weight, and exposure (and any
    unknown response curve) is taken out by the comparametric function.  A shift larger than
    ``MOVE_LIMIT_PX`` along a direction the scene constrains is refused, naming the frame; a
    direction without detail (a step-wedge's bands, a flat wall) is reported in ``notes``.
    Frames without exposures are ordered by their median code.
    """
    if exposures is None or any(e is None for e in exposures):
        keys = [float(np.median(p.bgr[::8, ::8])) / p.max_code for p in photos]
    else:
        keys = [float(e) for e in exposures]
    order = np.argsort(keys)
    scale = _ALIGN_SIDE / max(photos[0].shape)
    grays = {int(i): _gray_small(photos[i], scale) for i in order}
    pairs, notes = [], []
    unchecked: dict[str, list[str]] = {}
    for i, j in zip(order[:-1], order[1:]):
        i, j = int(i), int(j)
        res = _pair_shift(grays[i], grays[j])
        rec = {"frame": photos[j].name, "against": photos[i].name}
        if res is None:
            pairs.append({**rec, "shift_px": None, "constrained": "none", "sigma_px": []})
            notes.append(f"{photos[j].name}: too few pixels are well exposed in both it and {photos[i].name} "
                         "to check that the camera stayed still")
            continue
        d, basis, sigma, free = res
        names = [_direction_name(e) for e in basis]
        rec.update(shift_px=(float(d[0] / scale), float(d[1] / scale)),
                   constrained="x and y" if len(names) == 2 else (f"{names[0]} only" if names else "none"),
                   sigma_px=[s / scale for s in sigma])
        pairs.append(rec)
        shift = float(np.hypot(*d))
        if shift > MOVE_LIMIT_PX:
            raise BeamshotError(f"{photos[j].name}: moved by {shift / scale:.1f} px against {photos[i].name}; "
                                "use a tripod and a remote release, and shoot the bracket again")
        if len(free) == 2:
            notes.append(f"{photos[j].name}: too little detail is well exposed in both it and {photos[i].name} "
                         "to check that the camera stayed still")
        elif free:
            unchecked.setdefault(_direction_name(free[0]), []).append(photos[j].name)
    for what, names in unchecked.items():
        notes.append(f"the scene has no detail along {what}, so a shift of {', '.join(names)} along {what} "
                     "cannot be measured and was not checked")
    return Alignment(pairs=tuple(pairs), notes=tuple(notes))


def _blocks(photo: Photo) -> tuple[np.ndarray, np.ndarray]:
    """Block means and block standard deviations of the codes, ``(h, w, 3)`` float32 each.

    Averaging a nearly uniform block cuts pixel noise by the block side (8) and avoids the
    selection bias of picking noisy single pixels by their value.
    """
    h, w = photo.shape
    b = _BLOCK
    img = photo.bgr[: h // b * b, : w // b * b].astype(np.float32)
    size = (w // b, h // b)
    mean = cv2.resize(img, size, interpolation=cv2.INTER_AREA)
    sq = cv2.resize(img * img, size, interpolation=cv2.INTER_AREA)
    std = np.sqrt(np.maximum(sq - mean * mean, 0.0))
    return mean[..., ::-1], std[..., ::-1]  # R G B


def consistency_rms(photos: list[Photo], exposures: np.ndarray, response: Response) -> float:
    """Systematic disagreement between adjacent frames after linearisation (relative RMS).

    On smooth 8 x 8 blocks at 5-95 % of the code range in both frames, the log ratio of
    exposure-normalised linear values is binned by code (16 bins); the RMS over bins of the
    per-bin medians measures the curve's error while noise averages out.
    """
    order = np.argsort(exposures)
    blocks = {i: _blocks(photos[i]) for i in order}
    medians = []
    for (i, j) in zip(order[:-1], order[1:]):
        (ma, sa), (mb, sb) = blocks[i], blocks[j]
        for c in range(3):
            a, b = ma[..., c].ravel(), mb[..., c].ravel()
            ok = ((a >= _CODE_LO) & (a <= _CODE_HI) & (b >= _CODE_LO) & (b <= _CODE_HI)
                  & (sa[..., c].ravel() < 0.1 * a + 2) & (sb[..., c].ravel() < 0.1 * b + 2))
            if ok.sum() < 20:
                continue
            va = _decode_codes(response, a[ok] / 255.0, c) / exposures[i]
            vb = _decode_codes(response, b[ok] / 255.0, c) / exposures[j]
            r = np.log(vb / va)
            bins = (b[ok] // 16).astype(int)
            for k in np.unique(bins):
                sel = r[bins == k]
                if len(sel) >= 10:
                    medians.append(float(np.median(sel)))
    if not medians:
        raise BeamshotError("the bracket has too few areas exposed well in two frames; use steps of 1-2 stops")
    return float(np.sqrt(np.mean(np.square(medians))))


def _decode_codes(response: Response, v: np.ndarray, channel: int) -> np.ndarray:
    if response.kind == "table":
        t = np.asarray(response.table[channel], float)
        return np.interp(v, np.linspace(0, 1, len(t)), t)
    return response.decode(v)


def _sample_frames(photos: list[Photo], exposures: np.ndarray) -> list[np.ndarray]:
    """Tiny frames made of chosen sample blocks, for OpenCV's calibrators.

    OpenCV samples a regular grid, which on a beam photo lands mostly on dark wall.  Instead we
    take block-mean codes of smooth 8 x 8 blocks, stratified over the code range of every
    frame so each part of the curve is seen at several exposures, and hand OpenCV frames that
    consist of exactly those blocks (its grid then covers all of them).
    """
    rng = np.random.default_rng(0)
    blocks = [_blocks(p) for p in photos]
    smooth_ok = np.ones(blocks[0][0].shape[:2], bool)
    for mean, std in blocks:
        smooth_ok &= np.all(std < 0.1 * mean + 2.0, axis=2)
    chosen = set()
    per_bin = max(4, _SAMPLES // (16 * len(photos)))
    for mean, _ in blocks:
        g = mean[..., 1]
        for lo in range(0, 256, 16):
            idx = np.flatnonzero(smooth_ok & (g >= lo) & (g < lo + 16))
            if len(idx):
                chosen.update(rng.choice(idx, size=min(per_bin, len(idx)), replace=False).tolist())
    if len(chosen) < 50:
        raise BeamshotError("the bracket shows too few smooth areas; photograph an evenly lit, still scene "
                            "with a wide range of brightness")
    idx = np.array(sorted(chosen))
    side = int(np.ceil(np.sqrt(len(idx))))
    pad = side * side - len(idx)
    idx = np.r_[idx, idx[:pad]] if pad else idx
    frames = []
    for mean, _ in blocks:
        rgb = np.clip(np.round(mean.reshape(-1, 3)[idx]), 0, 255).astype(np.uint8)
        frames.append(np.ascontiguousarray(rgb.reshape(side, side, 3)[..., ::-1]))  # back to B G R
    return frames


def recover_response(photos: list[Photo], *, method: str = "debevec", times: list[float] | None = None,
                     check_motion: bool = True, label: str | None = None) -> ResponseFit:
    """Recover the camera response from a bracket of 8-bit photos of a still scene.

    ``check_motion=False`` skips :func:`check_alignment` (for a caller that has just run it);
    ``label`` names the curve's origin in :meth:`Response.describe`.
    """
    if len(photos) < MIN_FRAMES:
        raise BeamshotError(f"a bracket needs at least {MIN_FRAMES} photos (5-9 recommended), got {len(photos)}")
    _check_sizes(photos)
    if any(p.max_code != 255 for p in photos):
        raise BeamshotError("response recovery works on 8-bit photos; 16-bit and raw files are already linear")
    exposures = relative_exposures(photos, times)
    if len(np.unique(np.round(np.log2(exposures), 2))) < len(exposures):
        raise BeamshotError("two photos of the bracket have the same exposure; vary the exposure time by 1-2 stops")
    warnings = []
    steps = np.diff(np.sort(np.log2(exposures)))
    if np.any(steps > 3.0):
        warnings.append(f"exposure steps of up to {steps.max():.1f} stops; 1-2 stops give a better curve")
    notes = check_alignment(photos, exposures).notes if check_motion else ()
    frames = _sample_frames(photos, exposures)
    t = exposures.astype(np.float32) / np.float32(exposures.max())
    if method == "debevec":
        cal = cv2.createCalibrateDebevec(frames[0].shape[0] * frames[0].shape[1], 10.0, False)
    elif method == "robertson":
        cal = cv2.createCalibrateRobertson(30, 0.01)
    else:
        raise BeamshotError(f"unknown response method {method!r}; use debevec or robertson")
    raw = cal.process(frames, t).reshape(256, 3)[:, ::-1].astype(np.float64)  # B G R -> R G B
    table = np.empty((3, 256))
    fixes = 0
    codes = np.arange(256)

    for c in range(3):
        g = raw[:, c]
        seen = np.isfinite(g) & (g > 0)
        if seen.sum() < 64:
            raise BeamshotError("the bracket covers too few levels to recover a curve; photograph a scene "
                                "with a wide range of brightness")
        # codes never observed (OpenCV leaves NaN) are interpolated in log between observed ones
        g = np.exp(np.interp(codes, codes[seen], np.log(g[seen])))
        fit = np.polyfit(codes[200:241], np.log(g[200:241]), 1)
        top = float(np.exp(np.polyval(fit, 255)))
        col = g / top
        mono = np.maximum.accumulate(col)
        fixes += int(np.sum(mono[_CODE_LO:_CODE_HI] > col[_CODE_LO:_CODE_HI] * (1 + 1e-9)))
        col = mono
        col[241:] = np.minimum(np.exp(np.polyval(fit, codes[241:])) / top, 1.0)
        col = np.maximum.accumulate(col)
        col[255] = 1.0
        col[0] = 0.0
        table[c] = col
    response = Response(kind="table", table=tuple(tuple(float(x) for x in row) for row in table), label=label)
    if fixes:
        warnings.append(f"the recovered curve was not monotonic at {fixes} codes and was corrected; "
                        "the bracket may be too short or the scene too flat")
    rms = consistency_rms(photos, exposures, response)
    if rms > 0.05:
        warnings.append(f"frames agree only within {rms:.1%} after linearisation; check that the scene and "
                        "light stayed still and that no automatic processing changed between frames")
    return ResponseFit(response=response, method=f"{method} (OpenCV {cv2.__version__})", consistency_rms=rms,
                       monotonic_fixes=fixes, exposures=tuple(float(e) for e in exposures),
                       warnings=tuple(warnings), alignment_notes=tuple(notes))
