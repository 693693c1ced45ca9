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

__all__ = ["MIN_FRAMES", "MOVE_LIMIT_PX", "ResponseFit", "relative_exposures", "check_alignment",
           "recover_response", "consistency_rms"]

MIN_FRAMES = 3
#: A frame shifted by more than this many pixels (at 1024 px across) against its neighbour is refused.
MOVE_LIMIT_PX = 1.5
_CODE_LO, _CODE_HI = 13, 242  # 5 % and 95 % of 255
_SAMPLES = 600
_BLOCK = 8
_ALIGN_SIDE = 1024
_ALIGN_SEARCH = 40  # pixels searched in each direction at 1024 px across


@dataclass(frozen=True)
class ResponseFit:
    """A recovered response with its quality figures."""

    response: Response
    method: str
    consistency_rms: float
    monotonic_fixes: int
    exposures: tuple[float, ...]
    warnings: tuple[str, ...]

    def quality(self) -> dict:
        return {"method": self.method, "consistency_rms": self.consistency_rms,
                "monotonic_fixes": self.monotonic_fixes, "frames": len(self.exposures),
                "relative_exposures": list(self.exposures), "warnings": list(self.warnings)}


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


def check_alignment(photos: list[Photo], exposures: np.ndarray) -> list[float]:
    """Shift (px at 1024 px across) of each frame against the next brighter one; refuses a moved frame.

    Normalised cross-correlation (OpenCV ``matchTemplate``) of the gradient magnitude of the log
    images, limited to the area both frames expose well: exposure differences vanish in the
    gradient of the log, and clipped areas carry no weight.
    """
    order = np.argsort(exposures)
    scale = _ALIGN_SIDE / max(photos[0].shape)
    logs = []
    for i in order:
        small = cv2.resize(photos[i].bgr, None, fx=scale, fy=scale, interpolation=cv2.INTER_AREA)
        g = cv2.cvtColor(small, cv2.COLOR_BGR2GRAY).astype(np.float32) / (photos[i].max_code)
        logs.append((i, g))
    shifts = []
    for (i, a), (j, b) in zip(logs[:-1], logs[1:]):
        good = ((a > 0.02) & (a < 0.95) & (b > 0.02) & (b < 0.95)).astype(np.float32)
        if good.mean() < 0.02:
            shifts.append(0.0)
            continue
        # edges of the log image (exposure differences vanish in the gradient), weighted by a
        # blurred mask of the area both frames expose well, so the mask itself adds no edges
        weight = cv2.GaussianBlur(cv2.erode(good, np.ones((5, 5), np.uint8)), (0, 0), 3.0)
        feats = []
        for g in (a, b):
            lg = np.log(np.clip(g, 1e-3, 1.0)).astype(np.float32)
            gx = cv2.Sobel(lg, cv2.CV_32F, 1, 0, ksize=3)
            gy = cv2.Sobel(lg, cv2.CV_32F, 0, 1, ksize=3)
            feats.append(np.sqrt(gx * gx + gy * gy) * weight)
        # normalised cross-correlation of the central part of one frame over the other
        m = _ALIGN_SEARCH
        score = cv2.matchTemplate(feats[0], feats[1][m:-m, m:-m], cv2.TM_CCOEFF_NORMED)
        _, _, _, (px, py) = cv2.minMaxLoc(score)
        shift = float(np.hypot(px - m, py - m))
        if shift > MOVE_LIMIT_PX:
            raise BeamshotError(f"{photos[j].name}: moved by {shift / scale:.0f} px against {photos[i].name}; "
                                "use a tripod and a remote release, and shoot the bracket again")
        shifts.append(shift)
    return shifts


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


def recover_response(photos: list[Photo], *, method: str = "debevec", times: list[float] | None = None) -> ResponseFit:
    """Recover the camera response from a bracket of 8-bit photos of a still scene."""
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
    check_alignment(photos, exposures)
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
    response = Response(kind="table", table=tuple(tuple(float(x) for x in row) for row in table))
    if fixes:
        warnings.append(f"the recovered curve was not monotonic at {fixes} codes and was corrected; "
                        "the bracket may be too short or the scene too flat")
    rms = consistency_rms(photos, exposures, response)
    if rms > 0.05:
        warnings.append(f"frames agree only within {rms:.1%} after linearisation; check that the scene and "
                        "light stayed still and that no automatic processing changed between frames")
    return ResponseFit(response=response, method=f"{method} (OpenCV {cv2.__version__})", consistency_rms=rms,
                       monotonic_fixes=fixes, exposures=tuple(float(e) for e in exposures),
                       warnings=tuple(warnings))
