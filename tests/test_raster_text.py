"""The raster kit's text drawing: Pillow's coverage, cached per process and blended in numpy, gives
the pixels Pillow's own ``ImageDraw.text`` gives (the reference here is Pillow itself)."""

from __future__ import annotations

import numpy as np
import pytest

from beamshot.report import raster
from beamshot.report.raster import Canvas

Image = pytest.importorskip("PIL.Image")


def test_mask_blend_equals_pillow_fill_for_every_pair():
    # Pillow's mask fill (Image.paste of a colour through an 'L' mask, the operation ImageDraw.text
    # ends in): every background value against every coverage value, for three ink colours
    bg = np.broadcast_to(np.arange(256, dtype=np.uint8)[None, :, None], (256, 256, 3)).copy()
    mask = np.broadcast_to(np.arange(256, dtype=np.uint8)[:, None], (256, 256)).copy()
    for colour in ((0, 0, 0), (255, 255, 255), (213, 94, 0)):
        ref = Image.fromarray(bg.copy())
        ref.paste(colour, (0, 0, 256, 256), Image.fromarray(mask))
        out = bg.copy()
        m = np.repeat(mask.astype(np.uint16)[:, :, None], 3, axis=2)
        raster._blend_ink(out, (255 - m, m * np.asarray(colour, np.uint16) + 128), 0, 0, (0, 0, 256, 256))
        np.testing.assert_array_equal(out, np.asarray(ref))


@pytest.mark.parametrize("alpha", [0.6, 0.5, 0.9, 0.22])
def test_tab_blend_equals_pillow_blend_for_every_pair(alpha):
    bg = np.broadcast_to(np.arange(256, dtype=np.uint8)[None, :, None], (256, 256, 3)).copy()
    for colour in ((0, 0, 0), (255, 255, 255), (0, 114, 178)):
        top = np.broadcast_to(np.asarray(colour, np.uint8), bg.shape).copy()
        top[:, :, 0] = np.arange(256, dtype=np.uint8)[:, None]  # every pair of values in the first channel
        ref = np.asarray(Image.blend(Image.fromarray(bg), Image.fromarray(top), alpha))
        out = bg.copy()
        # the same blend, one colour at a time (the kit blends with one colour)
        for r in range(256):
            raster._blend_tab(out[r:r + 1], (0, 0, 256, 1), tuple(int(v) for v in top[r, 0]), alpha)
        np.testing.assert_array_equal(out, ref)


def _texts(c: Canvas, rng) -> None:
    """Texts of every kind the pictures draw, at random sub-pixel positions."""
    for k in range(40):
        x, y = rng.uniform(5, c.width - 5), rng.uniform(5, c.height - 5)
        kind = k % 5
        if kind == 0:
            c.text(x, y, "≈ 21,300 ± 5,900 cd", 26.0, role="v", ha="right", colour="#8a8a8a")
        elif kind == 1:
            c.text(x, y, "estimate", 23.4, role="s", style="italic", va="top")
        elif kind == 2:
            c.text(x, y, "40° full", 23.0, role="r", va="bottom", colour="#ffffff", background=("#000000", 0.6),
                   pad=3.0)
        elif kind == 3:
            c.text(x, y, "seen from behind the light", 20.8, role="n", ha="right", colour="#ffffff", stroke=2,
                   stroke_colour="#000000")
        else:
            c.text(x, y, "beam_12mp.jpg", 33.7, role="t", ha="center", style="bold")
    c.text(4.0, 2.5, "edge", 26.0, role="e", va="top")  # clipped at the picture's corner
    c.text(60.0, 150.0, "turned", 26.0, role="y", ha="center", va="bottom", rotate=True)


def test_cached_text_drawing_equals_pillow_drawing():
    base = np.random.default_rng(3).integers(0, 256, (300, 420, 3), dtype=np.uint8)  # not only white
    c = Canvas(420, 300)
    c.img[:] = base
    _texts(c, np.random.default_rng(4))
    got = c.finish().copy()
    # the reference: each text drawn by Pillow on a copy of the pixels under it
    ref = base.copy()
    for q in c._texts:
        bx0, by0, bx1, by1 = q.item.box
        region = (max(int(np.floor(bx0)) - 2, 0), max(int(np.floor(by0)) - 2, 0),
                  min(int(np.ceil(bx1)) + 3, c.width), min(int(np.ceil(by1)) + 3, c.height))
        c._text_on_patch(ref, q, region)
    np.testing.assert_array_equal(got, ref)
    # drawn again (met before: built into the cache), and a third time (from the cache): the same again
    for _ in range(2):
        c2 = Canvas(420, 300)
        c2.img[:] = base
        _texts(c2, np.random.default_rng(4))
        hits = raster._text_paint.cache_info().hits
        np.testing.assert_array_equal(c2.finish(), ref)
    assert raster._text_paint.cache_info().hits > hits
