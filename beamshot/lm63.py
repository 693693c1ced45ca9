"""IES LM-63 photometric files (type C): the measured I(theta, phi) written out and read back.

LM-63 (ANSI/IESNA LM-63-2002, "IESNA Standard File Format for the Electronic Transfer of
Photometric Data"; editions 1986, 1991, 1995, 2002, 2019) is the lighting trade's open text format
for a luminaire's intensity distribution.  Layout of a 2002 file (REFERENCES.md 7.1; items marked
*from memory* are not confirmed in the standard's text here):

1. the format line ``IESNA:LM-63-2002`` (1995: ``IESNA:LM-63-1995``, 1991: ``IESNA91``, 1986: none);
2. keyword lines ``[KEYWORD] text``; [TEST], [TESTLAB], [ISSUEDATE], [MANUFAC] are required in
   2002; [LUMCAT], [LUMINAIRE], [LAMP], [OTHER], [MORE] (continues the previous keyword's text;
   *from memory*) and user keywords beginning with ``_`` (*from memory*) are optional;
3. ``TILT=NONE`` (or ``TILT=INCLUDE`` followed by the tilt data, or ``TILT=<file>``);
4. ten numbers: lamps, lumens per lamp (-1 for absolute photometry), candela multiplier, number
   of vertical angles, number of horizontal angles, photometric type (1 = C, 2 = B, 3 = A), units
   (1 feet, 2 metres), width, length and height of the luminous opening;
5. three numbers: ballast factor, "future use" (2002; the 1995 ballast-lamp photometric factor),
   input watts;
6. the vertical angles (ascending), the horizontal angles (ascending), then the candela values:
   one block of #vertical values per horizontal angle; cd = value x multiplier x ballast factor
   (the ballast factor's part *from memory*).

Numbers are separated by spaces, commas or line ends and a list may wrap over lines.  Lines of a
2002 file are at most 256 characters (*from memory*; 1995 allowed fewer), so this writer keeps
every line within 80 characters (common practice).  Type C: vertical angle 0 is the nadir (the
photometric axis pointing down), horizontal angles count counter-clockwise seen from above
(*from memory*); a type C file's vertical angles start at 0 or 90 and end at 90 or 180, its
horizontal angles start at 0 and end at 0 (axially symmetric), 90 (quadrant), 180 (bilateral)
or 360 (no symmetry) (REFERENCES.md 7.1; the vertical range *from memory*).

Our map -> type C: the beam axis is vertical angle 0 (a flashlight aimed at the nadir), V = theta;
the horizontal angle is our azimuth, C = phi: C0 = the right of the beam and C90 = up, seen from
behind the light (looking along the beam, which for a light aimed down is looking from above, so
both count counter-clockwise the same way).

Flux from a file: ``Phi = int_0^2pi int I(V, C) sin V dV dC`` with I linear between vertical
angles (integrated exactly against sin V) and the trapezoid rule over C, after expanding the
symmetry.  For I linear on a segment [a, b] (Delta = b - a):
``int_a^b I sin V dV = I_a (cos a - cos b) + (I_b - I_a)/Delta (sin b - sin a - Delta cos b)``.
"""

from __future__ import annotations

import math
import os
import re
from dataclasses import dataclass, field

import numpy as np

from .errors import BeamshotError, read_user_file

__all__ = ["Photometry", "parse_lm63", "read_lm63", "format_lm63", "write_lm63", "structure_problems",
           "photometry_from_map", "export_folder", "NICE_STEPS_DEG", "LINE_LIMIT"]

#: Longest line this writer produces (LM-63-2002 allows 256, from memory; 80 is safe for every edition).
LINE_LIMIT = 80
#: Vertical steps the writer chooses from (degrees): the smallest at or above what the data resolves.
NICE_STEPS_DEG = (0.1, 0.2, 0.25, 0.5, 1.0, 2.0)
#: Significant digits of the candela values written (the report's own precision, ROUND_DIGITS).
CANDELA_DIGITS = 6
#: The format lines this reader knows (LM-63-1986 files have none).
FORMAT_LINES = ("IESNA:LM-63-2002", "IESNA:LM-63-1995", "IESNA91", "IES:LM-63-2019")
#: Keywords LM-63-2002 requires (REFERENCES.md 7.1).
REQUIRED_2002 = ("TEST", "TESTLAB", "ISSUEDATE", "MANUFAC")

_KEYWORD = re.compile(r"^\[([A-Za-z0-9_]+)\]\s?(.*)$")


@dataclass(frozen=True)
class Photometry:
    """The content of a photometric file.  ``candela[j, i]`` is the intensity in cd (multiplier
    and ballast factor applied) toward vertical angle ``vertical_deg[i]`` in the plane
    ``horizontal_deg[j]``; ``keywords`` are ``(name, text)`` pairs in file order."""

    vertical_deg: np.ndarray = field(repr=False)
    horizontal_deg: np.ndarray = field(repr=False)
    candela: np.ndarray = field(repr=False)
    keywords: tuple = ()
    format_line: str = "IESNA:LM-63-2002"
    lamps: int = 1
    lumens_per_lamp: float = -1.0
    multiplier: float = 1.0
    photometric_type: int = 1
    units_type: int = 2
    width: float = 0.0
    length: float = 0.0
    height: float = 0.0
    ballast_factor: float = 1.0
    future_use: float = 1.0
    input_watts: float = 0.0
    tilt: str = "NONE"
    #: longest line of the file read (0 for one built in memory)
    longest_line: int = 0

    def keyword(self, name: str) -> list[str]:
        """Every text given under ``[name]``."""
        return [t for k, t in self.keywords if k == name]

    # ------------------------------------------------------------ derived quantities
    def full_circle(self) -> tuple[np.ndarray, np.ndarray]:
        """Horizontal angles over 0-360 deg and their candela, the symmetry expanded
        (last angle 0: one plane for all; 90: quadrant; 180: bilateral; 360: none)."""
        h, c = self.horizontal_deg, self.candela
        last = h[-1]
        if h[0] != 0 or last not in (0, 90, 180, 360):
            raise BeamshotError(f"horizontal angles {h[0]:g}-{last:g} deg: only type C files from 0 to 0, 90, 180 or "
                                "360 deg are integrated here")
        if last == 0:
            return np.array([0.0, 360.0]), np.vstack([c[0], c[0]])
        if last == 90:
            h, c = np.r_[h, 180 - h[-2::-1]], np.vstack([c, c[-2::-1]])
        if h[-1] == 180:
            h, c = np.r_[h, 360 - h[-2::-1]], np.vstack([c, c[-2::-1]])
        return h, c

    def flux_lm(self, v_max_deg: float | None = None) -> float:
        """Luminous flux (lm) of the distribution (module docstring: linear in V against sin V,
        trapezoid in C); with ``v_max_deg``, only within the cone V <= v_max_deg."""
        h, c = self.full_circle()
        v = np.radians(self.vertical_deg)
        if v_max_deg is not None:
            vm = min(max(math.radians(v_max_deg), v[0]), v[-1])
            keep = v < vm
            c = np.hstack([c[:, keep], np.array([np.interp(vm, v, row) for row in c])[:, None]])
            v = np.r_[v[keep], vm]
        a, b = v[:-1], v[1:]
        d = b - a
        ia, ib = c[:, :-1], c[:, 1:]
        per_plane = (ia * (np.cos(a) - np.cos(b)) + (ib - ia) / d * (np.sin(b) - np.sin(a) - d * np.cos(b))).sum(axis=1)
        hr = np.radians(h)
        return float(np.sum((per_plane[1:] + per_plane[:-1]) / 2 * np.diff(hr)))

    def peak(self) -> tuple[float, float, float]:
        """Largest intensity (cd) and its vertical and horizontal angle (deg)."""
        j, i = np.unravel_index(int(np.argmax(self.candela)), self.candela.shape)
        return float(self.candela[j, i]), float(self.vertical_deg[i]), float(self.horizontal_deg[j])

    def cone_angle_deg(self, fraction: float) -> float | None:
        """Full angle of the cone with the solid angle of the region around V = 0 at or above
        ``fraction`` of the peak: each plane's first crossing V* (linear), then
        ``2 arccos(mean cos V*)`` (cone solid angle 2 pi (1 - cos a); the report's method for a
        hotspot on the axis).  None if a plane does not fall below the level within the file."""
        h, c = self.full_circle()
        level = fraction * float(self.candela.max())
        v = self.vertical_deg
        cross = []
        for row in c:
            below = np.nonzero(row < level)[0]
            if below.size == 0 or below[0] == 0:
                return None
            k = below[0]
            t = (row[k - 1] - level) / (row[k - 1] - row[k])
            cross.append(v[k - 1] + t * (v[k] - v[k - 1]))
        w = np.r_[(h[1] - h[0]) / 2, np.diff(h)[1:] / 2 + np.diff(h)[:-1] / 2, (h[-1] - h[-2]) / 2]
        mean_cos = float(np.sum(w * np.cos(np.radians(cross))) / np.sum(w))
        return math.degrees(2 * math.acos(min(1.0, mean_cos)))


# ---------------------------------------------------------------- reading

def _tokens(lines: list[str], start: int):
    """Numbers after the TILT line as ``(text, line number)``, split on spaces and commas."""
    for n in range(start, len(lines)):
        for tok in re.split(r"[,\s]+", lines[n].strip()):
            if tok:
                yield tok, n + 1


def parse_lm63(text: str, *, source: str = "file") -> Photometry:
    """Parse the text of an LM-63 file (1986-2019 layouts; type C, B or A is kept as given).

    Refuses a malformed file in one line naming the line and what was expected.
    """
    lines = text.splitlines()
    if not lines or not any(line.strip() for line in lines):
        raise BeamshotError(f"{source}: empty; give an LM-63 (.ies) photometric file")
    longest = max(len(line) for line in lines)
    first = lines[0].strip()
    fmt = first if first.upper().startswith(("IESNA", "IES:")) else ""
    keywords: list[list[str]] = []
    tilt_at = None
    for n in range(1 if fmt else 0, len(lines)):
        s = lines[n].strip()
        if re.match(r"^TILT\s*=", s, re.IGNORECASE):
            tilt_at = n
            break
        m = _KEYWORD.match(s)
        if m:
            name, body = m.group(1).upper(), m.group(2).strip()
            if name == "MORE" and keywords:
                keywords[-1][1] = f"{keywords[-1][1]} {body}".strip()
            else:
                keywords.append([name, body])
        elif s:
            keywords.append(["", s])  # 1986/1991 free-text header lines
    if tilt_at is None:
        raise BeamshotError(f"{source}: no TILT= line (TILT=NONE, TILT=INCLUDE or TILT=<file>); not an LM-63 "
                            "photometric file, or its header is cut")
    tilt_line = lines[tilt_at].strip()
    tilt = tilt_line.split("=", 1)[1].strip()
    toks = _tokens(lines, tilt_at + 1)
    last_line = [tilt_at + 1]

    def number(what: str) -> float:
        try:
            tok, ln = next(toks)
        except StopIteration:
            raise BeamshotError(f"{source}: the file ends at line {last_line[0]} before the {what}; "
                                "it is cut short or its counts are wrong") from None
        last_line[0] = ln
        try:
            x = float(tok)
        except ValueError:
            raise BeamshotError(f"{source}, line {ln}: {tok[:20]!r} is not a number; expected the {what}") from None
        if not math.isfinite(x):
            raise BeamshotError(f"{source}, line {ln}: {tok[:20]!r} is not a finite number ({what})")
        return x

    def count(what: str, low: int = 1) -> int:
        x = number(what)
        if x != int(x) or x < low:
            raise BeamshotError(f"{source}, line {last_line[0]}: the {what} is {x:g}; it must be a whole number "
                                f"of at least {low}")
        return int(x)

    if tilt.upper() == "INCLUDE":
        count("lamp-to-luminaire geometry of TILT=INCLUDE")
        n_tilt = count("number of tilt angles")
        for _ in range(2 * n_tilt):
            number("tilt angles and multiplying factors")
    elif tilt.upper() != "NONE":
        raise BeamshotError(f"{source}, line {tilt_at + 1}: TILT={tilt} names another file, which is not read here; "
                            "give a file with TILT=NONE or TILT=INCLUDE")
    lamps = count("number of lamps")
    lumens = number("lumens per lamp")
    mult = number("candela multiplier")
    n_v = count("number of vertical angles")
    n_h = count("number of horizontal angles")
    ptype = count("photometric type")
    if ptype not in (1, 2, 3):
        raise BeamshotError(f"{source}, line {last_line[0]}: photometric type {ptype}; it must be 1 (C), 2 (B) or 3 (A)")
    units = count("units type")
    if units not in (1, 2):
        raise BeamshotError(f"{source}, line {last_line[0]}: units type {units}; it must be 1 (feet) or 2 (metres)")
    width, length, height = (number(w) for w in ("luminous width", "luminous length", "luminous height"))
    ballast = number("ballast factor")
    future = number("future-use (ballast-lamp factor) number")
    watts = number("input watts")
    vert = np.array([number(f"vertical angle {i + 1} of {n_v}") for i in range(n_v)])
    hor = np.array([number(f"horizontal angle {i + 1} of {n_h}") for i in range(n_h)])
    cand = np.array([number(f"candela value {i + 1} of {n_v * n_h}") for i in range(n_v * n_h)]).reshape(n_h, n_v)
    extra = next(toks, None)
    if extra is not None:
        raise BeamshotError(f"{source}, line {extra[1]}: more numbers than the header's {n_v} x {n_h} candela values; "
                            "its counts are wrong")
    for name, a in (("vertical", vert), ("horizontal", hor)):
        if np.any(np.diff(a) <= 0):
            raise BeamshotError(f"{source}: the {name} angles do not rise steadily; the file is damaged")
    if ptype == 1 and (vert[0] < 0 or vert[-1] > 180 or hor[0] < 0 or hor[-1] > 360):
        raise BeamshotError(f"{source}: type C angles outside 0-180 deg (vertical) or 0-360 deg (horizontal); "
                            "the file is damaged")
    if ptype != 1 and (min(vert[0], hor[0]) < -180 or max(vert[-1], hor[-1]) > 360):
        raise BeamshotError(f"{source}: angles outside -180 to 360 deg; the file is damaged")
    return Photometry(vertical_deg=vert, horizontal_deg=hor, candela=cand * mult * ballast,
                      keywords=tuple((k, t) for k, t in keywords), format_line=fmt, lamps=lamps, lumens_per_lamp=lumens,
                      multiplier=mult, photometric_type=ptype, units_type=units, width=width, length=length,
                      height=height, ballast_factor=ballast, future_use=future, input_watts=watts, tilt=tilt.upper(),
                      longest_line=longest)


def read_lm63(path) -> Photometry:
    """Read an LM-63 file (text; bytes that are not UTF-8 are read as Latin-1)."""
    raw = read_user_file(path, "give the .ies file")
    if b"\x00" in raw[:4096]:
        raise BeamshotError(f"{path}: a binary file, not an LM-63 text file; give the .ies file")
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        text = raw.decode("latin-1")
    return parse_lm63(text, source=str(path))


def structure_problems(p: Photometry) -> list[str]:
    """Where ``p`` departs from the LM-63-2002 type C layout (empty for a file that follows it)."""
    out = []
    if p.format_line != "IESNA:LM-63-2002":
        out.append(f"format line {p.format_line or '(none)'!r}, not 'IESNA:LM-63-2002'")
    names = {k for k, _ in p.keywords}
    missing = [k for k in REQUIRED_2002 if k not in names]
    if missing:
        out.append(f"required keyword(s) missing: {', '.join('[' + k + ']' for k in missing)}")
    if p.photometric_type != 1:
        out.append(f"photometric type {p.photometric_type}, not 1 (type C)")
    if p.photometric_type == 1:
        if p.vertical_deg[0] not in (0, 90) or p.vertical_deg[-1] not in (90, 180):
            out.append(f"vertical angles {p.vertical_deg[0]:g}-{p.vertical_deg[-1]:g} deg; type C runs 0 or 90 to 90 or 180")
        if p.horizontal_deg[0] != 0 or p.horizontal_deg[-1] not in (0, 90, 180, 360):
            out.append(f"horizontal angles {p.horizontal_deg[0]:g}-{p.horizontal_deg[-1]:g} deg; type C runs from 0 to "
                       "0, 90, 180 or 360")
    if p.longest_line > 256:
        out.append(f"a line of {p.longest_line} characters (2002 allows 256, from memory)")
    if np.any(p.candela < 0):
        out.append("negative candela values")
    return out


# ---------------------------------------------------------------- writing

def _num(x: float, digits: int = CANDELA_DIGITS) -> str:
    """``x`` with ``digits`` significant digits in plain decimal notation (no exponent), trailing
    zeros dropped; magnitudes below 1e-6 are written as 0.

    >>> _num(12000.04), _num(0.5), _num(123.4567891), _num(3e-9), _num(90.0)
    ('12000', '0.5', '123.457', '0', '90')
    """
    if not math.isfinite(x) or abs(x) < 1e-6:
        return "0"
    decimals = min(6, max(0, digits - 1 - int(math.floor(math.log10(abs(x))))))
    s = f"{x:.{decimals}f}"
    if "." in s:
        s = s.rstrip("0").rstrip(".")
    return "0" if s in ("-0", "") else s


def _wrap(tokens: list[str], limit: int = LINE_LIMIT) -> list[str]:
    out, line = [], ""
    for t in tokens:
        if line and len(line) + 1 + len(t) > limit:
            out.append(line)
            line = t
        else:
            line = f"{line} {t}" if line else t
    if line:
        out.append(line)
    return out


def _keyword_lines(name: str, text: str, limit: int = LINE_LIMIT) -> list[str]:
    """``[NAME] text`` wrapped at ``limit`` characters, continued on ``[MORE]`` lines."""
    text = " ".join(str(text).split())
    lines, head = [], f"[{name}] "
    words = text.split(" ") if text else [""]
    line = head
    room = limit - max(len(head), len("[MORE] ")) - 1
    pieces = []
    for w in words:  # a word longer than a line (a long name without spaces) is cut into line-sized pieces
        pieces.extend([w[i:i + room] for i in range(0, len(w), room)] if len(w) > room else [w])
    for w in pieces:
        if len(line) + len(w) > limit and line not in (head, "[MORE] "):
            lines.append(line.rstrip())
            line = "[MORE] "
        line += w + " "
    lines.append(line.rstrip())
    return lines


def format_lm63(p: Photometry) -> str:
    """The text of an LM-63-2002 file for ``p`` (CR LF line ends, every line within LINE_LIMIT)."""
    out = [p.format_line or "IESNA:LM-63-2002"]
    for name, text in p.keywords:
        out += _keyword_lines(name, text)
    out.append(f"TILT={p.tilt}")
    scale = p.multiplier * p.ballast_factor
    out += _wrap([str(p.lamps), _num(p.lumens_per_lamp), _num(p.multiplier), str(len(p.vertical_deg)),
                  str(len(p.horizontal_deg)), str(p.photometric_type), str(p.units_type), _num(p.width),
                  _num(p.length), _num(p.height)])
    out += _wrap([_num(p.ballast_factor), _num(p.future_use), _num(p.input_watts)])
    out += _wrap([_num(v) for v in p.vertical_deg])
    out += _wrap([_num(h) for h in p.horizontal_deg])
    for row in p.candela:
        out += _wrap([_num(c / scale) for c in row])
    return "\r\n".join(out) + "\r\n"


def write_lm63(p: Photometry, path) -> None:
    """Write ``p`` to ``path`` (replaced whole: written to a temporary file, then renamed)."""
    from .atomic_file import write_text_atomic

    path = os.fspath(path)
    try:
        write_text_atomic(path, format_lm63(p), encoding="ascii", errors="replace", newline="")
    except OSError as exc:
        raise BeamshotError(f"{path}: cannot be written ({exc.strerror or exc}); choose another place") from None


# ---------------------------------------------------------------- our map -> a type C distribution

def supported_step_deg(beam, settings: dict | None) -> tuple[float, str]:
    """The vertical step the data supports, and why.

    Finer than the map's own polar step would only interpolate it; finer than a working pixel
    seen from the light at the axis would write detail the photo does not resolve.  A working
    pixel spans ``bin x Dc / f_px`` on the wall (pinhole camera; f_px the focal length in photo
    pixels, ``bin`` the working image's binning, Dc the camera-to-wall distance), which the light
    at distance D sees under ``bin Dc / (f_px D)`` rad.  The step is the smallest of
    :data:`NICE_STEPS_DEG` at or above the larger of the two (the pixel is unknown when the wall
    was mapped by a homography: then the map's step).
    """
    map_step = math.degrees(beam.d_theta)
    s = settings or {}
    pixel = None
    f_px, binning = s.get("focal_px"), s.get("working_bin_factor") or 1
    if f_px:
        dc = s.get("camera_distance_m") or s.get("distance_m") or beam.distance_m
        pixel = math.degrees(binning * dc / (f_px * (s.get("distance_m") or beam.distance_m)))
    need = max(map_step, pixel or 0.0)
    step = next((x for x in NICE_STEPS_DEG if x >= need - 1e-9), NICE_STEPS_DEG[-1])
    why = (f"{step:g} deg: the smallest of {', '.join(f'{x:g}' for x in NICE_STEPS_DEG)} deg at or above the map's "
           f"{map_step:g} deg" + (f" and a working pixel's {pixel:.3g} deg at the axis" if pixel else
                                  " (the pixel's angle is unknown: no focal length in the report)"))
    return step, why


def _sample(beam, v_deg: np.ndarray, h_deg: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The map linearly interpolated at (V = theta, C = phi), NaN cells left out of the weights;
    returns ``(candela (n_h, n_v), covered (n_h, n_v))``.  V = 0 is the mean of the first row
    (the axis has one intensity)."""
    inten = np.asarray(beam.intensity, float)
    ok = np.isfinite(inten)
    vals = np.where(ok, inten, 0.0)
    th0, dth = float(beam.theta[0]), beam.d_theta
    ph0, dph = float(beam.phi[0]), beam.d_phi
    n_t, n_p = inten.shape
    x = (np.radians(v_deg) - th0) / dth
    i0 = np.clip(np.floor(x).astype(int), 0, n_t - 1)
    i1 = np.clip(i0 + 1, 0, n_t - 1)
    wi = np.clip(x - np.floor(x), 0.0, 1.0)
    wi = np.where(x < 0, 0.0, wi)
    y = np.mod(np.radians(h_deg) - ph0, 2 * np.pi) / dph
    j0 = np.floor(y).astype(int) % n_p
    j1 = (j0 + 1) % n_p
    wj = y - np.floor(y)
    num = np.zeros((len(h_deg), len(v_deg)))
    den = np.zeros_like(num)
    for ii, w_i in ((i0, 1 - wi), (i1, wi)):
        for jj, w_j in ((j0, 1 - wj), (j1, wj)):
            w = w_j[:, None] * w_i[None, :]
            num += w * vals[ii[None, :], jj[:, None]]
            den += w * ok[ii[None, :], jj[:, None]]
    covered = den > 1e-9
    out = np.where(covered, num / np.where(covered, den, 1.0), 0.0)
    axis = np.isclose(v_deg, 0.0)
    if axis.any():
        row = inten[0][ok[0]]
        out[:, axis] = float(row.mean()) if row.size else 0.0
        covered[:, axis] = bool(row.size)
    return out, covered


def photometry_from_map(beam, report: dict | None = None, *, vertical_step_deg: float | None = None,
                        facts: dict | None = None, issue_date: str | None = None) -> tuple[Photometry, list[str]]:
    """A type C distribution of the map ``beam`` (:class:`beamshot.beammap.BeamMap`, unit cd) with
    keywords from ``report`` (the report.json dict) and ``facts`` (``testlab``, ``manufacturer``,
    ``lumcat``, ``luminaire``, ``lamp``); returns it and notes for the user.

    Vertical angles 0, s, 2s... up to the last multiple of s at or below the outermost map row
    with any measured cell, then one zero row a step further and a zero row at 90 deg (type C
    ends at 90); horizontal angles every map azimuth step from 0 to 360.  Directions the photo
    does not cover are written as 0 and the keywords say where.  A relative map is refused:
    the file's values are candela by definition.
    """
    from datetime import datetime, timezone

    from . import __version__

    if beam.unit != "cd":
        raise BeamshotError("the intensity map is relative (the analysis had no absolute scale) and an LM-63 file "
                            "holds candela; analyse again with --lux LX at the peak or a camera profile with a "
                            "constant (docs/calibration.md)")
    rep = report or {}
    settings = rep.get("settings") or {}
    facts = {k: v for k, v in (facts or {}).items() if v}
    step, why = supported_step_deg(beam, settings)
    notes = []
    map_step = math.degrees(beam.d_theta)
    if vertical_step_deg is not None:
        if vertical_step_deg < map_step - 1e-9:
            raise BeamshotError(f"--vertical-step {vertical_step_deg:g}: finer than the map's {map_step:g} deg would only "
                                f"interpolate it; give {map_step:g} or more")
        step, why = float(vertical_step_deg), f"{vertical_step_deg:g} deg as asked"
        hot = ((rep.get("figures") or {}).get("hotspot_angle") or {}).get("value")
        if isinstance(hot, (int, float)) and hot > 0 and step > hot / 5.0:
            notes.append(f"a {step:g} deg vertical step is coarse for a {hot:.3g} deg hotspot: the file's cone angles "
                         f"and flux will differ from the report's; keep the step at or below {hot / 5.0:.2g} deg")
    inten = np.asarray(beam.intensity, float)
    any_row = np.isfinite(inten).any(axis=1)
    if not any_row.any():
        raise BeamshotError("the intensity map has no measured cell; analyse the photo again")
    theta_deg = np.degrees(beam.theta)
    last_centre = float(theta_deg[np.nonzero(any_row)[0][-1]])
    full_rows = np.isfinite(inten).all(axis=1)
    full_to = float(theta_deg[np.argmin(full_rows)] - map_step / 2) if not full_rows.all() else last_centre
    n = int(math.floor(last_centre / step + 1e-9))
    if n < 2:
        raise BeamshotError("the photo covers less than two vertical steps from the axis; nothing to write")
    v_meas = np.round(step * np.arange(n + 1), 6)
    v_lim = float(v_meas[-1])
    h_step = math.degrees(beam.d_phi)
    n_h = int(round(360.0 / h_step))
    h = np.round(h_step * np.arange(n_h + 1), 6)
    cand, covered = _sample(beam, v_meas, h)
    negative = int(np.sum(cand < 0))
    if negative:
        signed = Photometry(vertical_deg=v_meas, horizontal_deg=h, candela=cand).flux_lm()
        cand = np.maximum(cand, 0.0)
        added = Photometry(vertical_deg=v_meas, horizontal_deg=h, candela=cand).flux_lm() - signed
    tail = [v_lim + step] if v_lim + step < 90 else []
    if v_lim < 90:
        tail.append(90.0)
    v = np.r_[v_meas, tail]
    cand = np.hstack([cand, np.zeros((len(h), len(tail)))])
    gaps = float(np.mean(~covered)) * 100

    sat = np.asarray(beam.saturated, bool) & np.isfinite(inten)
    figs = rep.get("figures") or {}
    scale = (rep.get("calibration") or {}).get("absolute_scale") or {}
    inputs = rep.get("inputs") or [{}]
    created = rep.get("created_utc") or "unknown time"
    name = facts.get("luminaire") or settings.get("light_name")
    kw = [("TEST", f"beamshot {rep.get('tool', {}).get('version', __version__)} analysis of "
                   f"{inputs[0].get('name', 'a beam photo')} (sha256 {str(inputs[0].get('sha256', ''))[:12]}), "
                   f"{created}"),
          ("TESTLAB", facts.get("testlab") or "not stated; photometry from a photo of the beam on a matte white "
                                              "wall (beamshot)"),
          ("ISSUEDATE", issue_date or datetime.now(timezone.utc).strftime("%Y-%m-%d")),
          ("MANUFAC", facts.get("manufacturer") or "not stated")]
    if facts.get("lumcat"):
        kw.append(("LUMCAT", facts["lumcat"]))
    if name:
        kw.append(("LUMINAIRE", name))
    if facts.get("lamp"):
        kw.append(("LAMP", facts["lamp"]))
    kw.append(("OTHER", "Beam axis at vertical angle 0 (light aimed at the nadir); horizontal angle C0 = right of "
                        "the beam, C90 = up, counted counter-clockwise as seen from behind the light."))
    dist = settings.get("distance_m", beam.distance_m)
    kw.append(("OTHER", f"Measured on a wall at {dist:g} m; far field assumed (inverse-square law); no spectral "
                        "data; lumens -1: absolute photometry; input watts not measured (0)."))
    kw.append(("_COVERAGE", f"measured to V = {v_lim:g} deg; every C angle to {min(full_to, v_lim):.1f} deg"))
    kw.append(("_ZERO_FILL", f"directions beyond the photo are not measured and written as 0: "
                             f"{gaps:.1f} % of the values to V = {v_lim:g} deg, and every value beyond it"))
    kw.append(("_STEP", why))
    if scale:
        rel = scale.get("relative_uncertainty")
        kw.append(("_SCALE", f"{scale.get('kind', '?')}: {scale.get('description', '')}"
                   + (f"; 1 sigma {100 * rel:.1f} % on every value" if rel else "")))
    for key, word in (("peak_intensity", "_PEAK_CD"), ("beam_flux", "_BEAM_FLUX_LM")):
        f = figs.get(key) or {}
        if f.get("value") is not None:
            kw.append((word, f"{f['value']:.6g} {f.get('uncertainty') or 0:.3g} {f.get('status')} "
                             "(value, 1 sigma, status in the report)"))
    if sat.any():
        kw.append(("_CLIPPED", f"{100 * np.mean(sat[any_row]):.2f} % of the map's cells were clipped in the photo; "
                               "values there are lower bounds"))
        notes.append("the photo was clipped in places; the file says so ([_CLIPPED]) and those values are lower bounds")
    if negative:
        kw.append(("_NOISE", f"{negative} values below 0 (noise on the dark wall) written as 0; this adds "
                             f"{added:.3g} lm to the file's flux"))
    if settings.get("head_diameter_mm"):
        kw.append(("_HEAD_MM", f"{settings['head_diameter_mm']:g} (head diameter given; opening written as 0 0 0)"))
    if scale.get("kind") == "exposure_metadata":
        notes.append("the absolute scale is an estimate from exposure metadata (about ±28 %); the file says so "
                     "([_SCALE])")
    p = Photometry(vertical_deg=v, horizontal_deg=h, candela=cand, keywords=tuple(kw))
    return p, notes


def export_folder(folder, out_path, *, vertical_step_deg: float | None = None, facts: dict | None = None,
                  issue_date: str | None = None) -> tuple[Photometry, list[str]]:
    """Write the LM-63 file of an analysis output folder (intensity-map.npz + report.json)."""
    from .report.intensity_map import read_intensity_map
    from .report.output import read_report_json

    folder = os.fspath(folder)
    if os.path.isfile(folder) and os.path.basename(folder) == "report.json":
        folder = os.path.dirname(folder) or "."
    if not os.path.isdir(folder):
        raise BeamshotError(f"{folder}: not a folder; give the folder written by 'beamshot analyze ... --out DIR'")
    report = read_report_json(os.path.join(folder, "report.json"))
    beam = read_intensity_map(folder)
    try:
        p, notes = photometry_from_map(beam, report, vertical_step_deg=vertical_step_deg, facts=facts,
                                       issue_date=issue_date)
    except BeamshotError as exc:
        raise BeamshotError(f"{folder}: {exc}") from None
    write_lm63(p, out_path)
    return p, notes

