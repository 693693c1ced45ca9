"""Concentric errors that JPEG coding leaves in the azimuthal mean of a beam's luminance.

Noise averages out of a mean taken all around the beam axis; an error the same all around does
not.  JPEG coding makes such errors on the smooth gradients of a beam: the blocks at one level
around the beam are coded alike, so their errors line up in rings, which a ring search cannot
tell from the beam's own rings (beamshot.rings).  ``benchmarks/jpeg_concentric_error.py`` measures
them with libjpeg (through Pillow) on 8-bit sRGB photos rendered with sensor noise: for a beam
whose colour changes across it (a cool hotspot in a warm spill), the means of 3-pixel radial bands
of the decoded photo's linear BT.709 luminance differ from the photo's before coding by 0.05-0.27
of a luminance code RMS, at most 0.56, at qualities 75-95 with 4:2:0 and 4:4:4 chroma; for a beam
of one colour by 0.03-0.18 RMS, at most 0.46 (grey: at most 0.08 RMS; 5000 K and 3000 K throughout,
whose channels differ, up to 0.18).  The error does not shrink with the quantisation step (0.24
code RMS at quality 75 and 0.16-0.20 at 95 on the same beam), so it is taken as one size in codes,
the largest RMS measured, rounded up: ``COLOUR_RMS_CODES`` when the beam's colour changes across it
by more than ``COLOUR_CHANGE`` (the ratio of red to blue along the azimuthal-mean profile), else
``ONE_COLOUR_RMS_CODES``.  As a relative error of the
luminance ``L = f(c / c_max)`` (the tone curve ``f``) it is ``sigma_c d ln L / dc``, large in dim
parts of the photo (at code 40 of sRGB a third of a code is 1.5 %) and small in bright ones.
"""

from __future__ import annotations

import numpy as np

__all__ = ["COLOUR_RMS_CODES", "ONE_COLOUR_RMS_CODES", "COLOUR_CHANGE", "coding_rms_codes", "concentric_sigma_rel",
           "is_jpeg", "CHROMA_RMS_CODES", "ZONE_LUMA_RMS_CODES",
           "ZONE_CHROMA_RMS_CODES", "YCC_TO_RGB_STEP", "chroma_sigma_uv"]

#: RMS of the concentric error of an 8-bit JPEG's azimuthal mean, in codes of the luminance, for a
#: beam whose colour changes across it (the largest RMS measured by
#: benchmarks/jpeg_concentric_error.py, 0.27, rounded up; see the module doc) ...
COLOUR_RMS_CODES = 0.3
#: ... and for a beam of one colour (largest measured 0.18, for 5000 K throughout at quality 75, rounded up).
ONE_COLOUR_RMS_CODES = 0.2
#: The change of ``ln(R / B)`` along the profile above which a beam counts as changing colour
#: (project choice: 5 %; the beams measured changed by 0 or by more than 0.3).
COLOUR_CHANGE = 0.05


def coding_rms_codes(colour_change: float) -> float:
    """The RMS concentric coding error (codes) of a beam whose ``ln(R / B)`` changes by ``colour_change``."""
    return COLOUR_RMS_CODES if not (colour_change <= COLOUR_CHANGE) else ONE_COLOUR_RMS_CODES


def is_jpeg(photo) -> bool:
    """Whether ``photo`` (a beamshot.photo.Photo) was decoded from a JPEG (or MPO) file."""
    return getattr(photo, "file_format", "") in ("JPEG", "MPO")


def concentric_sigma_rel(level, response, *, max_code: int = 255, sigma_codes: float = COLOUR_RMS_CODES):
    """Relative 1-sigma of the concentric coding error at linear level ``level`` (fraction of the
    clip level; array): ``ln f((c + s) / m) - ln f(c / m)``, ``c = m f^-1(level)``, ``s = sigma_codes``,
    ``m = max_code``, ``f`` the tone curve ``response.decode`` (a finite step rather than the
    derivative, so that it stays finite at the darkest codes).  NaN where the level is not positive.

    >>> from beamshot.camera.response import Response
    >>> round(float(concentric_sigma_rel(0.5, Response("linear"))), 6)  # linear: s / c, c = 127.5
    0.00235
    """
    lv = np.asarray(level, float)
    column = lv.reshape(-1, 1)  # one value per row: a measured table's decode then averages its channels
    with np.errstate(invalid="ignore", divide="ignore"):
        code = np.where(column > 0, max_code * np.asarray(response.encode(np.clip(column, 0.0, 1.0)), float), np.nan)
        up = np.asarray(response.decode(np.minimum(code + sigma_codes, max_code) / max_code), float)
        here = np.asarray(response.decode(code / max_code), float)
        return np.log(up / here).reshape(lv.shape)


# --------------------------------------------------------------------------- colour (u', v') of band means
#: RMS concentric error of an 8-bit JPEG's 3 px band means in codes of its chroma, Cb and Cr (ITU-T
#: T.871): the largest RMS measured by benchmarks/jpeg_colour_bands.py, 0.59 (three two-tone beams,
#: two seeds, qualities 75-95, 4:2:0 and 4:4:4; a beam of one colour reached 0.41; largest single band
#: 1.12), rounded up.  Unlike the luminance's, it shrinks with the quality (0.3-0.59 at 75, 0.05-0.2 at
#: 95): one size for all qualities overstates it by up to about 4 times at 95.  With Y at
#: COLOUR_RMS_CODES, 98-100 % of the bands' u' and v' errors lie within 2 sigma of chroma_sigma_uv.
#: Wider bands carry nearly the same error (up to 0.55 code RMS at 8 px, 0.52 at 16 px): the errors
#: are correlated along the radius, so a ring's width does not reduce them.
CHROMA_RMS_CODES = 0.6
#: RMS coding error of the mean of a whole zone of the beam (all pixels at >= 50 %, 10-50 % or 0.5-10 %
#: of the peak), in codes of Y and of Cb and Cr: the largest RMS per zone measured by
#: benchmarks/jpeg_colour_bands.py (Y 0.12, Cb 0.22; largest single zone 0.52), rounded up.  A zone
#: averages many bands whose errors partly cancel: a third to a half of a band's.
ZONE_LUMA_RMS_CODES = 0.15
ZONE_CHROMA_RMS_CODES = 0.25
#: How R, G, B codes move per code of Y, Cb, Cr: the inverse JFIF matrix (ITU-T T.871 sec. 7).
YCC_TO_RGB_STEP = ((1.0, 1.0, 1.0), (0.0, -0.344136, 1.772), (1.402, -0.714136, 0.0))


def chroma_sigma_uv(levels_rgb, response, matrix, *, sigma_luma_codes: float = COLOUR_RMS_CODES,
                    sigma_chroma_codes: float = CHROMA_RMS_CODES, max_code: int = 255):
    """1-sigma (u', v') error, per axis (``sqrt(tr C / 2)``), that a JPEG's concentric coding error leaves
    in the colour of a band of mean linear RGB ``levels_rgb`` ``(n, 3)`` (fraction of clipping).

    The band's codes ``c = m f^-1(level)`` (``f`` = ``response.decode``, ``m`` = ``max_code``) move by
    ``s_k e_k`` for each of Y, Cb, Cr in turn (``e_k`` the R, G, B code steps per code of Y, Cb, Cr,
    :data:`YCC_TO_RGB_STEP`; ``s`` = ``sigma_luma_codes`` for Y, ``sigma_chroma_codes`` for Cb and Cr);
    each move's linear change goes through ``matrix`` (camera RGB -> XYZ) to (u', v') (CIE 15:2018
    eq. 8.10-8.11, a finite step), and ``C = sum_k d_k d_k^T``.  NaN where a channel is not positive.
    """
    from .colour.chromaticity import uv_prime_of

    lv = np.asarray(levels_rgb, float).reshape(-1, 3)
    m = np.asarray(matrix, float)
    with np.errstate(invalid="ignore", divide="ignore"):
        ok = np.all(lv > 0, axis=1)
        code = max_code * np.asarray(response.encode(np.clip(lv, 0.0, 1.0)), float)
        here = np.asarray(response.decode(code / max_code), float)
        uv0 = uv_prime_of(here @ m.T)
        total = np.zeros(len(lv))
        for step, s in zip(YCC_TO_RGB_STEP, (sigma_luma_codes, sigma_chroma_codes, sigma_chroma_codes)):
            moved = np.clip(code + s * np.asarray(step), 0.0, max_code)
            d = uv_prime_of(np.asarray(response.decode(moved / max_code), float) @ m.T) - uv0
            total += np.sum(d**2, axis=1)
        out = np.sqrt(total / 2.0)
    out[~ok] = np.nan
    return out
