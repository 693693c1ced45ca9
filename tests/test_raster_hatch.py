"""The raster kit's hatch patterns against their definition: a pixel (x, y) of the hi-res picture
is on a '/' line where (x + y) mod spacing < width, on a '\\' line where (x - y) mod spacing < width
(common practice: the lines line up across neighbouring hatched areas)."""

from __future__ import annotations

import numpy as np

from beamshot.report import raster


def _by_definition(r0, r1, c0, c1, spacing, width, directions, colour, background):
    x, y = np.arange(c0, c1)[None, :], np.arange(r0, r1)[:, None]
    on = np.zeros((r1 - r0, c1 - c0), bool)
    for d in directions:
        on |= np.mod(x + y if d == "/" else x - y, spacing * raster.SUPERSAMPLE) < width * raster.SUPERSAMPLE
    rgb = np.empty(on.shape + (3,), np.uint8)
    rgb[:] = background if background is not None else (0, 0, 0)
    rgb[on] = colour
    return rgb, on.astype(np.uint8)


def test_hatch_patterns_follow_their_definition():
    rng = np.random.default_rng(2)
    for _ in range(150):
        r0, c0 = int(rng.integers(0, 400)), int(rng.integers(0, 400))
        r1, c1 = r0 + int(rng.integers(1, 200)), c0 + int(rng.integers(1, 200))
        spacing, width = float(rng.choice([7.0, 9.0, 10.0, 14.0, 7.5])), float(rng.choice([1.0, 1.2, 2.0]))
        directions = [("/",), ("\\",), ("/", "\\")][int(rng.integers(0, 3))]
        background = None if rng.random() < 0.5 else (238, 238, 238)
        args = (r0, r1, c0, c1, spacing, width, directions, (154, 154, 154), background)
        rgb, mask = raster._hatch_pattern.__wrapped__(*args)
        ref_rgb, ref_mask = _by_definition(*args)
        np.testing.assert_array_equal(rgb, ref_rgb)
        np.testing.assert_array_equal(mask, ref_mask)
        assert mask.dtype == np.uint8 and 0 < mask.size
