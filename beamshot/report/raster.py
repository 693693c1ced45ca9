"""A small raster drawing kit for the report pictures: lines, dashes, shapes, hatching and text
on an RGB canvas, with a plain record of what was drawn (for tests), without matplotlib.

Shapes are drawn with OpenCV's anti-aliased primitives (``cv2.LINE_AA``, sub-pixel coordinates)
at ``SUPERSAMPLE`` times the final size and, above 1, shrunk with area averaging
(``cv2.INTER_AREA``); 1 is the default: at beam.png's line widths OpenCV's own anti-aliasing
looks as smooth, for a quarter of the work.  Dashed lines are drawn as filled quads (square-cut
ends, as a pen draws them).  Text is drawn afterwards at the final size with Pillow (hinted
glyphs stay sharp), always on top of the shapes.  Coordinates are final-size pixels, origin top
left, y down; a ``clip`` rectangle ``(x0, y0, x1, y1)`` limits a shape.

Fonts: the DejaVu Sans faces shipped in matplotlib's package data, found through the import
system without importing matplotlib; Pillow's built-in font if they are missing.  A character
the font lacks (a CJK or emoji file name) is drawn as the font's 'missing glyph' box, silently.
"""

from __future__ import annotations

import functools
import importlib.util
import os
from dataclasses import dataclass, field

import numpy as np

__all__ = ["Canvas", "Drawing", "TextItem", "font", "hex_rgb", "png_bytes", "png_pair"]

#: Shapes are drawn at this many times the final size, then area-averaged down (anti-aliasing).
SUPERSAMPLE = 1
#: Sub-pixel precision of OpenCV's drawing calls: coordinates in 1/2**SHIFT pixels.
_SHIFT = 4
_FONT_FILES = {"normal": "DejaVuSans.ttf", "bold": "DejaVuSans-Bold.ttf", "italic": "DejaVuSans-Oblique.ttf"}


def hex_rgb(colour) -> tuple[int, int, int]:
    """'#rrggbb' or an (r, g, b) tuple of 0-255 ints -> (r, g, b)."""
    if isinstance(colour, str):
        c = colour.lstrip("#")
        return int(c[0:2], 16), int(c[2:4], 16), int(c[4:6], 16)
    return tuple(int(v) for v in colour)  # type: ignore[return-value]


@functools.lru_cache(maxsize=None)
def _font_dir() -> str | None:
    spec = importlib.util.find_spec("matplotlib")
    if spec is None or not spec.submodule_search_locations:
        return None
    d = os.path.join(list(spec.submodule_search_locations)[0], "mpl-data", "fonts", "ttf")
    return d if os.path.isdir(d) else None


@functools.lru_cache(maxsize=None)
def font(size_px: int, style: str = "normal"):
    """A Pillow font ``size_px`` pixels (em size) in ``style`` ('normal', 'bold', 'italic')."""
    from PIL import ImageFont

    d = _font_dir()
    if d is not None:
        try:
            # the basic layout (no complex-script shaping): the pictures' texts are Latin with symbols,
            # and it draws about twice as fast as the shaping engine
            return ImageFont.truetype(os.path.join(d, _FONT_FILES[style]), int(size_px),
                                      layout_engine=ImageFont.Layout.BASIC)
        except OSError:
            pass
    return ImageFont.load_default(int(size_px))


@functools.lru_cache(maxsize=1)
def _measure():
    """A drawing context used only to measure text."""
    from PIL import Image, ImageDraw

    return ImageDraw.Draw(Image.new("L", (1, 1)))


@functools.lru_cache(maxsize=4096)
def _text_bbox(s: str, size_i: int, style: str, anchor: str, stroke: int) -> tuple:
    """Pillow's box of ``s`` drawn at (0, 0) (px); cached per process, as a batch repeats most texts."""
    return tuple(_measure().textbbox((0, 0), s, font=font(size_i, style), anchor=anchor, stroke_width=stroke))


@functools.lru_cache(maxsize=4096)
def _text_length(s: str, size_i: int, style: str) -> float:
    return float(font(size_i, style).getlength(s))


@functools.lru_cache(maxsize=1024)  # about 3 kB each: a few MB at most
def _text_ink(s: str, size_i: int, style: str, anchor: str, stroke: int, fx: float, fy: float):
    """The coverage Pillow draws for ``s`` anchored at a point whose fractional position is
    ``(fx, fy)``: ``(m, ox, oy)``, the coverage ``m`` (0-255, ``uint8``, read-only) cut to its inked
    box, and the anchor point's integer position relative to the box's corner.  Drawn by Pillow's
    own ``ImageDraw.text`` on a blank 'L' image, so that each glyph's anti-aliasing is Pillow's;
    ``None`` where ``ox + fx`` is not exact in floating point (the caller then draws the text with
    Pillow on the picture).  Cached per process: a batch's pictures repeat most texts at the same
    fractional positions (labels, ticks, legend, table)."""
    from PIL import Image, ImageDraw

    x0, y0, x1, y1 = _text_bbox(s, size_i, style, anchor, stroke)
    ox, oy = 2 - int(np.floor(x0)), 2 - int(np.floor(y0))
    if (ox + fx) - ox != fx or (oy + fy) - oy != fy:
        return None
    w, h = int(np.ceil(x1)) + ox + 3, int(np.ceil(y1)) + oy + 3
    img = Image.new("L", (max(w, 1), max(h, 1)), 0)
    ImageDraw.Draw(img).text((ox + fx, oy + fy), s, fill=255, font=font(size_i, style), anchor=anchor,
                             stroke_width=stroke)
    ink = np.asarray(img)
    rows, cols = np.flatnonzero(ink.any(axis=1)), np.flatnonzero(ink.any(axis=0))
    if rows.size == 0:
        ink, r0, c0 = ink[:0, :0], 0, 0
    else:
        r0, c0 = int(rows[0]), int(cols[0])
        ink = ink[r0:rows[-1] + 1, c0:cols[-1] + 1]
    ink = ink.copy()
    ink.flags.writeable = False
    return ink, ox - c0, oy - r0


@functools.lru_cache(maxsize=256)  # about 35 kB each: some 9 MB at most; a picture draws about 90 texts
def _text_paint(s: str, size_i: int, style: str, anchor: str, stroke: int, fx: float, fy: float, colour: tuple):
    """:func:`_text_ink` ready to paint in ``colour``: ``(255 - m, m c + 128, ox, oy)``, both
    ``uint16`` ``(h, w, 3)`` (same shapes make numpy's loops run whole rows), or None."""
    got = _text_ink(s, size_i, style, anchor, stroke, fx, fy)
    if got is None:
        return None
    ink, ox, oy = got
    return (*_paint_terms(ink, colour), ox, oy)


def _paint_terms(ink: np.ndarray, colour) -> tuple[np.ndarray, np.ndarray]:
    """``(255 - m, m c + 128)`` of a coverage ``ink`` (``(h, w)``, 0-255) in ``colour``, ``uint16``
    ``(h, w, 3)``, read-only; built row by row (whole rows of the colour repeated, not a 3-long
    inner loop per pixel)."""
    h, w = ink.shape
    m = np.repeat(ink.astype(np.uint16), 3, axis=1)  # (h, 3 w): each coverage for R, G and B
    rest = 255 - m
    mc = m * np.tile(np.asarray(colour, np.uint16), w)
    mc += 128
    rest, mc = rest.reshape(h, w, 3), mc.reshape(h, w, 3)
    rest.flags.writeable = mc.flags.writeable = False
    return rest, mc


@functools.lru_cache(maxsize=64)
def _rotated_paint(s: str, size_i: int, style: str, anchor: str, colour: tuple):
    """A text turned a quarter turn counter-clockwise, ready to paint in ``colour`` as
    :func:`_text_paint` gives it: Pillow draws it on a blank 'L' image 1 px inside its box and turns
    that image (``Image.rotate(90, expand=True)``); its corner goes 1 px above and left of the turned
    box's rounded corner."""
    from PIL import Image, ImageDraw

    f = font(size_i, style)
    x0, y0, x1, y1 = _measure().textbbox((0, 0), s, font=f, anchor=anchor)
    w, h = int(np.ceil(x1 - x0)) + 2, int(np.ceil(y1 - y0)) + 2
    ink = Image.new("L", (w, h), 0)
    ImageDraw.Draw(ink).text((1 - x0, 1 - y0), s, fill=255, font=f, anchor=anchor)
    return _paint_terms(np.asarray(ink.rotate(90, expand=True)), colour)


_SEEN: set = set()
#: Texts remembered as met (their keys only); past this the memory starts again.
_SEEN_MAX = 8192


def _seen_before(key: tuple) -> bool:
    """Whether a text with this key was drawn before in this process (and remember it)."""
    if key in _SEEN:
        return True
    if len(_SEEN) >= _SEEN_MAX:
        _SEEN.clear()
    _SEEN.add(key)
    return False


def _blend_ink(out: np.ndarray, paint, left: int, top: int, region) -> None:
    """Paint a text's coverage (``(255 - m, m c + 128)`` as :func:`_text_paint` gives them)
    placed with its corner at ``(left, top)`` onto ``out`` (RGB uint8), within ``region``
    ``(x0, y0, x1, y1)``: Pillow's mask fill in integers, out = (bg (255 - m) + c m) / 255 rounded
    as its ``DIV255`` (``t = v + 128; ((t >> 8) + t) >> 8``, within 16 bits), so that the pixels
    equal those ``ImageDraw.text`` gives (tests/test_raster_text.py checks it)."""
    rest, mc = paint
    x0, y0, x1, y1 = max(region[0], left), max(region[1], top), min(region[2], left + rest.shape[1]), \
        min(region[3], top + rest.shape[0])
    if x1 <= x0 or y1 <= y0:
        return
    ys, xs = slice(y0 - top, y1 - top), slice(x0 - left, x1 - left)
    sub = out[y0:y1, x0:x1]
    t = sub * rest[ys, xs]
    t += mc[ys, xs]
    t += t >> 8
    t >>= 8
    sub[:] = t


def _blend_tab(out: np.ndarray, box, colour, alpha: float) -> None:
    """``Image.blend`` of the pixels in ``box`` with ``colour``: in1 + alpha (in2 - in1) in single
    precision, truncated to 8 bits, as Pillow computes it."""
    x0, y0, x1, y1 = max(box[0], 0), max(box[1], 0), min(box[2], out.shape[1]), min(box[3], out.shape[0])
    if x1 <= x0 or y1 <= y0:
        return
    sub = out[y0:y1, x0:x1]
    a = np.float32(alpha)
    v = sub.astype(np.float32) + a * (np.asarray(colour, np.float32) - sub.astype(np.float32))
    sub[:] = np.clip(v, 0, 255).astype(np.uint8)


@dataclass
class TextItem:
    """One text drawn: its role (e.g. 'title', 'legend', 'figure-value:peak_intensity'), the text,
    its box ``(x0, y0, x1, y1)`` in final pixels, its font size (px), colour, style and, for text
    placed at a data position, that position (``data``)."""

    role: str
    text: str
    box: tuple[float, float, float, float]
    size_px: float
    colour: tuple[int, int, int]
    style: str = "normal"
    data: tuple | None = None


@dataclass
class Drawing:
    """What a picture holds, for tests and callers: texts, legend entries ``(label, handle kind,
    handle style dict)``, marks ``(kind, shape, (x, y) px, data position)``, and named values
    (e.g. the colour scale's range or a curve's points) in ``values``."""

    width: int
    height: int
    texts: list[TextItem] = field(default_factory=list)
    legend: list[tuple[str, str, dict]] = field(default_factory=list)
    marks: list[tuple[str, str, tuple, tuple | None]] = field(default_factory=list)
    values: dict = field(default_factory=dict)

    def text_of(self, role: str) -> list[str]:
        return [t.text for t in self.texts if t.role == role]


@dataclass
class _QueuedText:
    item: TextItem
    xy: tuple[float, float]
    anchor: str
    font: object
    size_i: int
    stroke: int
    stroke_colour: tuple | None
    background: tuple | None
    rotate: bool


class Canvas:
    """An RGB picture ``width`` x ``height`` px on white; shapes now, texts at :meth:`finish`."""

    def __init__(self, width: int, height: int, background="#ffffff"):
        self.width, self.height = int(width), int(height)
        s = SUPERSAMPLE
        bg = hex_rgb(background)
        if bg[0] == bg[1] == bg[2]:
            self.img = np.full((self.height * s, self.width * s, 3), bg[0], np.uint8)
        else:
            self.img = np.empty((self.height * s, self.width * s, 3), np.uint8)
            self.img[:] = bg
        self.record = Drawing(self.width, self.height)
        self._texts: list[_QueuedText] = []

    # ------------------------------------------------------------------ regions
    def _region(self, box, clip):
        """Hi-res integer rows/columns covering ``box`` (final px) within ``clip`` and the picture."""
        s = SUPERSAMPLE
        x0, y0, x1, y1 = box
        if clip is not None:
            x0, y0, x1, y1 = max(x0, clip[0]), max(y0, clip[1]), min(x1, clip[2]), min(y1, clip[3])
        c0, r0 = max(int(np.floor(x0 * s)), 0), max(int(np.floor(y0 * s)), 0)
        c1, r1 = min(int(np.ceil(x1 * s)), self.img.shape[1]), min(int(np.ceil(y1 * s)), self.img.shape[0])
        return (r0, r1, c0, c1) if r1 > r0 and c1 > c0 else None

    def _paint(self, box, clip, alpha, draw) -> None:
        """Run ``draw(sub, offset_x, offset_y)`` on a copy of the region, then put it back (blended)."""
        reg = self._region(box, clip)
        if reg is None:
            return
        r0, r1, c0, c1 = reg
        view = self.img[r0:r1, c0:c1]  # OpenCV draws into a strided view in place
        if alpha >= 1.0:
            draw(view, c0, r0)
            return
        import cv2

        sub = view.copy()
        draw(sub, c0, r0)
        cv2.addWeighted(sub, float(alpha), view, 1.0 - float(alpha), 0.0, dst=view)

    @staticmethod
    def _pts(points, ox, oy) -> np.ndarray:
        p = np.asarray(points, float) * SUPERSAMPLE - (ox, oy)
        return np.round(p * (1 << _SHIFT)).astype(np.int32)

    @staticmethod
    def _thick(width_px: float) -> int:
        return max(1, int(round(width_px * SUPERSAMPLE)))

    @staticmethod
    def _bbox(points, pad: float):
        p = np.asarray(points, float)
        if not np.isfinite(p).all():
            p = p[np.all(np.isfinite(p), axis=1)]
        if p.size == 0:
            return (0.0, 0.0, 0.0, 0.0)
        return (p[:, 0].min() - pad, p[:, 1].min() - pad, p[:, 0].max() + pad, p[:, 1].max() + pad)

    # ------------------------------------------------------------------ shapes
    def polyline(self, points, colour, width: float = 1.0, *, dash=None, closed: bool = False,
                 alpha: float = 1.0, clip=None, square_ends: bool = False) -> None:
        """A line through ``points`` ``(n, 2)``; ``dash`` a sequence of on/off lengths (px) or None.
        Non-finite points break the line.  Solid lines have round ends unless ``square_ends``."""
        if square_ends and not dash:
            dash = (float("inf"), 0.0)  # one dash as long as the line
        import cv2

        p = np.asarray(points, float)
        if closed and len(p):
            p = np.vstack([p, p[:1]])
        runs = [r for r in _finite_runs(p) if len(r) >= 2]
        if not runs:
            return
        col, th = hex_rgb(colour), self._thick(width)
        # dashes as filled quads: square-cut ends, as a pen draws them
        quads = np.concatenate([_dash_quads(r, dash, width) for r in runs]) if dash else None
        if quads is not None and not len(quads):
            return

        def draw(sub, ox, oy):
            if quads is not None:
                cv2.fillPoly(sub, list(self._pts(quads.reshape(-1, 2), ox, oy).reshape(-1, 4, 2)), col, cv2.LINE_AA,
                             _SHIFT)
            else:
                cv2.polylines(sub, [self._pts(r, ox, oy) for r in runs], False, col, th, cv2.LINE_AA, _SHIFT)

        self._paint(self._bbox(runs[0] if len(runs) == 1 else np.vstack(runs), width + 2), clip, alpha, draw)

    def polygon(self, points, fill=None, edge=None, width: float = 1.0, *, alpha: float = 1.0, clip=None) -> None:
        """A filled and/or outlined closed polygon."""
        import cv2

        p = np.asarray(points, float)
        if len(p) < 3:
            return

        def draw(sub, ox, oy):
            q = self._pts(p, ox, oy)
            if fill is not None:
                cv2.fillPoly(sub, [q], hex_rgb(fill), cv2.LINE_AA, _SHIFT)
            if edge is not None:
                cv2.polylines(sub, [q], True, hex_rgb(edge), self._thick(width), cv2.LINE_AA, _SHIFT)

        self._paint(self._bbox(p, width + 2), clip, alpha, draw)

    def rect(self, x0, y0, x1, y1, fill=None, edge=None, width: float = 1.0, *, alpha: float = 1.0, clip=None):
        self.polygon([(x0, y0), (x1, y0), (x1, y1), (x0, y1)], fill, edge, width, alpha=alpha, clip=clip)

    def circle(self, centre, radius: float, fill=None, edge=None, width: float = 1.0, *, clip=None) -> None:
        import cv2

        cx, cy = centre

        def draw(sub, ox, oy):
            c = tuple(int(v) for v in self._pts([(cx, cy)], ox, oy)[0])
            r = int(round(radius * SUPERSAMPLE * (1 << _SHIFT)))
            if fill is not None:
                cv2.circle(sub, c, r, hex_rgb(fill), -1, cv2.LINE_AA, _SHIFT)
            if edge is not None:
                cv2.circle(sub, c, r, hex_rgb(edge), self._thick(width), cv2.LINE_AA, _SHIFT)

        pad = radius + width + 2
        self._paint((cx - pad, cy - pad, cx + pad, cy + pad), clip, 1.0, draw)

    def hatch(self, box, mask=None, *, colour="#9a9a9a", background=None, spacing: float = 9.0,
              width: float = 1.0, directions=("/",)) -> None:
        """Hatch ``box`` (final px) with diagonal lines ('/' and/or '\\\\') every ``spacing`` px,
        where ``mask`` (bool, hi-res size of the box, or None for all of it) is set; ``background``
        fills under the lines."""
        reg = self._region(box, None)
        if reg is None:
            return
        r0, r1, c0, c1 = reg
        import cv2

        pattern = _hatch_pattern(r0, r1, c0, c1, spacing, width, tuple(directions), hex_rgb(colour),
                                 None if background is None else hex_rgb(background))
        sub = self.img[r0:r1, c0:c1]
        if background is None:
            on = pattern[1] if mask is None else pattern[1] & mask[: r1 - r0, : c1 - c0].astype(np.uint8)
            cv2.copyTo(pattern[0], on, sub)
        elif mask is None:
            sub[:] = pattern[0]
        else:
            cv2.copyTo(pattern[0], mask[: r1 - r0, : c1 - c0].astype(np.uint8), sub)

    def image(self, rgb: np.ndarray, box, *, clip=None) -> None:
        """Paste an RGB array stretched (nearest neighbour) over ``box``."""
        import cv2

        reg = self._region(box, clip)
        if reg is None:
            return
        r0, r1, c0, c1 = reg
        self.img[r0:r1, c0:c1] = cv2.resize(rgb, (c1 - c0, r1 - r0), interpolation=cv2.INTER_NEAREST)

    def hi_res_box(self, box):
        """The hi-res (rows, cols) size of ``box`` as :meth:`image` and :meth:`hatch` use it."""
        reg = self._region(box, None)
        return (reg[1] - reg[0], reg[3] - reg[2]) if reg else (0, 0)

    # ------------------------------------------------------------------ text
    def text(self, x: float, y: float, s: str, size_px: float, *, role: str, ha: str = "left", va: str = "center",
             colour="#000000", style: str = "normal", stroke: float = 0.0, stroke_colour="#000000",
             background=None, pad: float = 0.0, rotate: bool = False, data=None) -> TextItem:
        """Queue text at ``(x, y)`` aligned by ``ha`` (left/center/right) and ``va``
        (top/center/baseline/bottom); ``rotate`` turns it a quarter turn counter-clockwise (reads
        bottom to top, ``ha`` then aligns vertically).  ``background`` draws a tab ``pad`` px
        around it.  Returns its record (box in final px)."""
        size_i = int(round(size_px))
        f = font(size_i, style)
        anchor = {"left": "l", "center": "m", "right": "r"}[ha] + {"top": "a", "center": "m", "baseline": "s",
                                                                   "bottom": "d"}[va]
        sw = int(round(stroke))
        x0, y0, x1, y1 = _text_bbox(s, size_i, style, anchor, sw)
        if rotate:  # the horizontal box turned about the anchor point
            x0, y0, x1, y1 = y0, -x1, y1, -x0
        box = (x + x0 - pad, y + y0 - pad, x + x1 + pad, y + y1 + pad)
        item = TextItem(role, s, box, float(size_px), hex_rgb(colour), style, data)
        self.record.texts.append(item)
        self._texts.append(_QueuedText(item, (x, y), anchor, f, size_i, sw, hex_rgb(stroke_colour) if sw else None,
                                       (hex_rgb(background[0]), background[1]) if background else None, rotate))
        return item

    @staticmethod
    def text_width(s: str, size_px: float, style: str = "normal") -> float:
        return _text_length(s, int(round(size_px)), style)

    # ------------------------------------------------------------------ out
    def finish(self) -> np.ndarray:
        """The final picture (``height`` x ``width`` x 3 uint8): shapes shrunk, texts drawn on top.

        A text met before in this process (the same words, font, colours and sub-pixel position:
        labels, ticks, legends of a batch's pictures) is painted from Pillow's coverage
        (:func:`_text_ink`, :func:`_rotated_paint`, cached per process) with Pillow's integer blend
        straight into the pixels, within the box Pillow drew it in before (the text's box and 2-3 px
        around it); a text met for the first time, or one whose position does not split exactly, is
        drawn by Pillow on a small copy of the pixels under it, put back at once.  Both give the
        same pixels (tests/test_raster_text.py)."""
        import cv2

        out = self.img if SUPERSAMPLE == 1 else cv2.resize(self.img, (self.width, self.height),
                                                           interpolation=cv2.INTER_AREA)
        for q in self._texts:
            bx0, by0, bx1, by1 = q.item.box
            x0, y0 = max(int(np.floor(bx0)) - 2, 0), max(int(np.floor(by0)) - 2, 0)
            x1, y1 = min(int(np.ceil(bx1)) + 3, self.width), min(int(np.ceil(by1)) + 3, self.height)
            if x1 <= x0 or y1 <= y0:
                continue
            x, y = q.xy
            inks = None
            fx, fy = float(x - np.floor(x)), float(y - np.floor(y))
            key = (q.item.text, q.size_i, q.item.style, q.anchor)
            if not _seen_before((*key, q.stroke, q.rotate, fx, fy, q.item.colour, q.stroke_colour)):
                pass  # a text met for the first time (a figure's value, most likely once): Pillow as it comes
            elif q.rotate and "\n" not in q.item.text:  # placed at its box's rounded corner, less 1 px
                rest, mc = _rotated_paint(*key, q.item.colour)
                left, top = int(round(bx0)) - 1, int(round(by0)) - 1
                inks = [(rest, mc, int(np.floor(x)) - left, int(np.floor(y)) - top)]
            elif not q.rotate and x >= 0 and y >= 0 and "\n" not in q.item.text:
                # a stroked text: the stroke's coverage in its colour, then the text's in its own
                inks = [_text_paint(*key, q.stroke, fx, fy, q.stroke_colour)] if q.stroke else []
                if not q.stroke or q.stroke_colour != q.item.colour:
                    inks.append(_text_paint(*key, 0, fx, fy, q.item.colour))
                if any(i is None for i in inks):
                    inks = None
            if inks is None:
                self._text_on_patch(out, q, (x0, y0, x1, y1))
                continue
            if q.background is not None:
                colour, alpha = q.background
                _blend_tab(out, (int(round(bx0)), int(round(by0)), int(round(bx1)), int(round(by1))), colour, alpha)
            for rest, mc, ox, oy in inks:
                _blend_ink(out, (rest, mc), int(np.floor(x)) - ox, int(np.floor(y)) - oy, (x0, y0, x1, y1))
        return out

    def _text_on_patch(self, out: np.ndarray, q: _QueuedText, region) -> None:
        """Draw one text with Pillow on a copy of the pixels in ``region`` and put them back."""
        from PIL import Image, ImageDraw

        x0, y0, x1, y1 = region
        bx0, by0, bx1, by1 = q.item.box
        patch = Image.fromarray(out[y0:y1, x0:x1])
        if q.background is not None:
            colour, alpha = q.background
            tab = (int(round(bx0)) - x0, int(round(by0)) - y0, int(round(bx1)) - x0, int(round(by1)) - y0)
            shade = Image.blend(patch, Image.new("RGB", patch.size, colour), alpha)
            patch.paste(shade.crop(tab), tab[:2])
        if q.rotate:
            self._rotated(patch, q, (x0, y0))
        else:
            ImageDraw.Draw(patch).text((q.xy[0] - x0, q.xy[1] - y0), q.item.text, fill=q.item.colour,
                                       font=q.font, anchor=q.anchor, stroke_width=q.stroke,
                                       stroke_fill=q.stroke_colour)
        out[y0:y1, x0:x1] = np.asarray(patch)

    @staticmethod
    def _rotated(patch, q: _QueuedText, origin) -> None:
        from PIL import Image, ImageDraw

        x0, y0, x1, y1 = _measure().textbbox((0, 0), q.item.text, font=q.font, anchor=q.anchor)
        w, h = int(np.ceil(x1 - x0)) + 2, int(np.ceil(y1 - y0)) + 2
        ink = Image.new("L", (w, h), 0)
        ImageDraw.Draw(ink).text((1 - x0, 1 - y0), q.item.text, fill=255, font=q.font, anchor=q.anchor)
        ink = ink.rotate(90, expand=True)
        solid = Image.new("RGB", ink.size, q.item.colour)
        bx0, by0 = q.item.box[0], q.item.box[1]
        patch.paste(solid, (int(round(bx0)) - 1 - origin[0], int(round(by0)) - 1 - origin[1]), ink)


@functools.lru_cache(maxsize=16)
def _hatch_pattern(r0, r1, c0, c1, spacing, width, directions, colour, background):
    """A hatch over rows r0:r1, columns c0:c1 (hi-res px): its RGB picture (lines on the background,
    or on black) and its 0/1 mask of line pixels.  Lines at (x + y) or (x - y) = k * spacing, so
    neighbouring hatches line up.  Cached: a picture's hatched areas repeat from report to report."""
    per, w = spacing * SUPERSAMPLE, width * SUPERSAMPLE
    k = r1 + c1  # lut[v + k] tells whether x + y or x - y = v lies on a line
    lut = np.mod(np.arange(-k, k + 1), per) < w
    # row r of the '/' lines is lut[c0 + r + k : c1 + r + k], of the '\\' lines lut[c0 - r + k : c1 - r + k]:
    # windows of one table, without an index per pixel
    windows = np.lib.stride_tricks.sliding_window_view(lut, c1 - c0)
    on = np.zeros((r1 - r0, c1 - c0), bool)
    for d in directions:
        on |= windows[c0 + r0 + k:c0 + r1 + k] if d == "/" else windows[c0 - r1 + 1 + k:c0 - r0 + 1 + k][::-1]
    mask = on.view(np.uint8).copy()
    palette = np.array([background if background is not None else (0, 0, 0), colour], np.uint8)
    rgb = np.take(palette, mask, axis=0)
    rgb.flags.writeable = False
    mask.flags.writeable = False
    return rgb, mask


def png_bytes(rgb: np.ndarray, level: int = 3) -> bytes:
    """PNG bytes of an RGB uint8 array (zlib ``level``)."""
    return png_pair(rgb, rgb.shape[0], level)[0]


def png_pair(rgb: np.ndarray, top_rows: int, level: int = 3) -> tuple[bytes, bytes]:
    """PNG bytes of an RGB uint8 array and of its first ``top_rows`` rows, compressed in one pass.

    PNG (ISO/IEC 15948): signature, IHDR (8-bit RGB, no interlace), one IDAT holding the zlib
    stream (RFC 1950) of the scanlines, each led by its filter byte (0, none: for these pictures'
    large flat areas it compresses as well as the adaptive filters and costs nothing), and IEND;
    each chunk closed by the CRC-32 of its type and data.  The two pictures share their first
    rows: those are deflated (RFC 1951) once, and finished twice: alone (the short picture), and
    byte-aligned by a sync flush and followed by the rest deflated on its own (the long one;
    concatenated deflate blocks are one valid stream, as parallel gzip tools use), the rest in a
    second thread (zlib releases the interpreter lock).  The Adler-32 checksum is of all rows.
    Libraries' encoders choose filters row by row and took longer than the drawing.
    """
    import struct
    import threading
    import zlib

    h, w = rgb.shape[:2]
    top_rows = int(min(max(top_rows, 1), h))
    raw = np.zeros((h, 1 + 3 * w), np.uint8)
    raw[:, 1:] = np.ascontiguousarray(rgb, np.uint8).reshape(h, 3 * w)
    top_raw, rest_raw = memoryview(raw[:top_rows].reshape(-1)), memoryview(raw[top_rows:].reshape(-1))  # no copies

    rest: list[bytes] = []

    def deflate_rest() -> None:
        z = zlib.compressobj(int(level), zlib.DEFLATED, -15)
        rest.append(z.compress(rest_raw) + z.flush())

    def chunk(kind: bytes, data: bytes) -> bytes:
        return struct.pack(">I", len(data)) + kind + data + struct.pack(">I", zlib.crc32(kind + data))

    def png(rows: int, deflated: bytes, adler: int) -> bytes:
        ihdr = struct.pack(">IIBBBBB", w, rows, 8, 2, 0, 0, 0)
        stream = b"\x78\x9c" + deflated + struct.pack(">I", adler)  # zlib header: deflate, 32 KiB window
        return b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", ihdr) + chunk(b"IDAT", stream) + chunk(b"IEND", b"")

    worker = threading.Thread(target=deflate_rest)
    if len(rest_raw):
        worker.start()
    z = zlib.compressobj(int(level), zlib.DEFLATED, -15)
    body = z.compress(top_raw)
    top_adler = zlib.adler32(top_raw)
    top = png(top_rows, body + z.copy().flush(), top_adler)
    if not len(rest_raw):
        return top, top
    body += z.flush(zlib.Z_SYNC_FLUSH)  # ends on a byte boundary, not as the last block
    worker.join()
    full = png(h, body + rest[0], zlib.adler32(rest_raw, top_adler))
    return full, top


def _finite_runs(p: np.ndarray) -> list[np.ndarray]:
    """Split a polyline at non-finite points."""
    fin = np.isfinite(p)
    if fin.all():
        return [p] if len(p) else []
    ok = np.all(fin, axis=1)
    d = np.diff(np.concatenate(([0], ok.astype(np.int8), [0])))
    return [p[i:j] for i, j in zip(np.flatnonzero(d == 1), np.flatnonzero(d == -1))]


_PERPENDICULAR = np.array([-1.0, 1.0])


def _dash_quads(p: np.ndarray, pattern, width: float) -> np.ndarray:
    """Pen strokes ``width`` px wide (square-cut ends) of the 'on' parts of a dash ``pattern``
    (on, off, on, off, ... px) along the polyline ``p``, as quads ``(n, 4, 2)``: the path is cut
    at its vertices and at the dash boundaries, and each piece whose middle falls in an 'on'
    part becomes one quad."""
    seg = np.hypot(*np.diff(p, axis=0).T)
    s = np.concatenate(([0.0], np.cumsum(seg)))
    total = s[-1]
    period = float(sum(pattern))
    if total <= 0 or period <= 0:
        return np.zeros((0, 4, 2))
    if not np.isfinite(period):  # one dash covering the whole line: the pieces are the segments
        cuts = s[np.concatenate(([True], s[1:] != s[:-1]))]  # np.unique of the sorted s
        on = cuts[1:] - cuts[:-1] > 1e-6
    else:
        bounds = np.cumsum(np.concatenate(([0.0], pattern)))
        starts = np.arange(0.0, total, period)
        cuts = np.unique(np.concatenate((s, (starts[:, None] + bounds[None, :]).ravel())))
        cuts = cuts[(cuts >= 0) & (cuts <= total)]
        mid = 0.5 * (cuts[:-1] + cuts[1:])
        phase = np.mod(mid, period)
        on = (np.searchsorted(bounds, phase, side="right") - 1) % 2 == 0
        on &= cuts[1:] - cuts[:-1] > 1e-6
    a, b = cuts[:-1][on], cuts[1:][on]
    pa, pb = np.empty((len(a), 2)), np.empty((len(b), 2))
    for k in (0, 1):
        pa[:, k] = np.interp(a, s, p[:, k])
        pb[:, k] = np.interp(b, s, p[:, k])
    d = pb - pa
    n = np.maximum(np.hypot(d[:, 0], d[:, 1]), 1e-9)[:, None]
    off = d[:, ::-1] * _PERPENDICULAR / n * (width / 2.0)  # (-dy, dx): a quarter turn
    # pieces of one dash meet end to end: lengthen each by a hair so that no seam shows between them
    ext = d / n * 0.25
    quads = np.empty((len(a), 4, 2))
    quads[:, 0] = pa - ext + off
    quads[:, 1] = pb + ext + off
    quads[:, 2] = pb + ext - off
    quads[:, 3] = pa - ext - off
    return quads
