"""Speed-ups that must not move any number: each fast path against the plain computation it replaces.

Every check here is exact (``np.array_equal`` / ``==``): the fast paths reorder no arithmetic,
they only skip work (a map rebuilt identically, NaN cells, temporaries, numpy call overhead).
The references are the definitions themselves: numpy's median, a 0/1 matrix product, the
censored-normal inverse of beamshot.floor written out on the whole array, the gain
``V = cos^4(alpha) (1 - c d^2)`` computed on the whole image, and ``remeasure(tone=eps)``.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest
from scipy.special import ndtr

from beamshot.photo import decode_photo
from beamshot.synth import HotspotSpillBeam, Scene, SynthCamera, encode_jpeg, exposure_time_for_peak, render_photo

BEAM = HotspotSpillBeam(peak_cd=10000.0, hotspot_fwhm_deg=8.0, spill_fraction=0.02, cutoff_deg=24.0,
                        edge_width_deg=0.5)


@pytest.mark.parametrize("n", [3, 4, 5, 8, 9, 100, 101, 777])
def test_spill_median_is_numpys_median(n):
    # numpy's definition: the middle order statistic, or the mean of the two middle ones
    from beamshot.spill import _median

    rng = np.random.default_rng(n)
    for d in (rng.normal(size=n), rng.integers(0, 4, n).astype(float), np.full(n, 0.1)):
        assert _median(d) == np.median(d)


def test_sector_profiles_mark_missing_rows_as_the_matrix_product_did():
    # reference: a sector row is NaN where (missing 0/1) @ (weight > 0) is positive
    from beamshot.spill import _sector_columns, _sector_profiles

    from conftest import analytic_map

    beam = analytic_map(lambda t, p: np.exp(-(np.degrees(t) / 10.0) ** 2), theta_max_deg=40.0, d_phi_deg=2.0)
    inten = beam.intensity.copy()
    rng = np.random.default_rng(3)
    inten[rng.random(inten.shape) < 0.02] = np.nan  # scattered holes
    inten[300:, 40:75] = np.nan  # a corner of the photo
    beam = replace(beam, intensity=inten)
    _, profiles = _sector_profiles(beam)
    n_sec = profiles.shape[0]
    centres = np.arange(n_sec) * 360.0 / n_sec
    col = np.degrees(beam.d_phi)
    d = np.abs((np.degrees(beam.phi)[None, :] - centres[:, None] + 180.0) % 360.0 - 180.0)
    weights = np.clip(180.0 / n_sec - d + col / 2, 0.0, col) / col
    weights[weights < 1e-9] = 0.0
    expect_nan = (np.isnan(inten).astype(float) @ (weights > 0).T.astype(float)) > 0
    assert np.array_equal(np.isnan(profiles.T), expect_nan)
    assert sum(len(c) for c in _sector_columns(weights)) == int((weights > 0).sum())


def _unclipped_whole(m, sigma):
    """beamshot.floor.unclipped_mean as first written: every step on the whole array."""
    from beamshot.floor import _F_TABLE, _Z_TABLE, clipped_mean

    r = np.asarray(m, float) / sigma
    z = np.where(r > _F_TABLE[-1], r, np.interp(r, _F_TABLE, _Z_TABLE))
    for _ in range(2):
        slope = ndtr(z)
        step = (clipped_mean(z, 1.0) - r) / np.maximum(slope, 1e-3)
        z = np.where(slope > 1e-3, z - step, z)
    return z * sigma


@pytest.mark.parametrize("sigma,rows", [(0.01, 120), (1.0, 120), (3.7, 120), (1.0, 400)])
def test_unclipped_mean_on_finite_cells_equals_the_whole_array(sigma, rows):
    # 400 x 90 cells: more than one block of beamshot.floor._BLOCK
    from beamshot.floor import unclipped_mean

    rng = np.random.default_rng(7)
    m = rng.normal(0.5, 2.0, (rows, 90)) * sigma
    m[rows // 2:] = rng.exponential(12.0, (rows - rows // 2, 90)) * sigma  # far above the noise: no Newton steps
    m[rng.random(m.shape) < 0.3] = np.nan
    m[0, :6] = [0.0, -9 * sigma, 9 * sigma, 1e-300, -1e-300, 8.0 * sigma]  # table ends, zero, tiny
    m[1, :6] = [10.0 * sigma, np.nextafter(10.0, 11.0) * sigma, 1e300, np.inf, -np.inf, 1e6 * sigma]
    with np.errstate(invalid="ignore", over="ignore"):  # the inf and 1e300 cells, in both
        assert np.array_equal(unclipped_mean(m, sigma), _unclipped_whole(m, sigma), equal_nan=True)
    for value in (-1.5 * sigma, 0.3 * sigma, 12.0 * sigma):  # a single value (0-d) as well
        assert float(unclipped_mean(value, sigma)) == float(_unclipped_whole(value, sigma))


def _ndtr_whole(z):
    """beamshot.normal_cdf.ndtr as first written: the cubic Hermite formula on the whole array."""
    import math

    from beamshot.normal_cdf import _LO, _HI, _STEPS_PER_UNIT, _table

    z = np.asarray(z, float)
    values, slopes = _table()
    h = 1.0 / _STEPS_PER_UNIT
    with np.errstate(invalid="ignore"):
        inside = (z >= _LO) & (z < _HI)
    x = (np.where(inside, z, _LO) - _LO) * _STEPS_PER_UNIT
    k = np.minimum(x.astype(np.intp), values.size - 2)
    t = x - k
    t2, t3 = t * t, t * t * t
    out = ((2 * t3 - 3 * t2 + 1) * values[k] + (t3 - 2 * t2 + t) * h * slopes[k]
           + (-2 * t3 + 3 * t2) * values[k + 1] + (t3 - t2) * h * slopes[k + 1])
    rest = ~inside & ~np.isnan(z)
    out = np.where(inside, out, np.nan)
    out[rest] = [0.5 * math.erfc(-v / math.sqrt(2.0)) for v in z[rest]]
    return out


@pytest.mark.parametrize("shape", [(7,), (1000,), (300, 180), (40001,)])
def test_ndtr_in_blocks_equals_the_formula_on_the_whole_array(shape):
    # blocks of beamshot.normal_cdf._BLOCK elements, worked in place: the same numbers
    from beamshot.normal_cdf import ndtr as ours

    rng = np.random.default_rng(11)
    z = rng.normal(0.0, 4.0, shape)
    flat = z.reshape(-1)
    flat[:7] = [np.nan, np.inf, -np.inf, 8.0, -8.0, np.nextafter(8.0, 0.0), 9.5]  # table ends and beyond
    assert np.array_equal(ours(z), _ndtr_whole(z), equal_nan=True)
    assert float(ours(1.3)) == float(_ndtr_whole(np.array([1.3]))[0])


def _gain_whole(shape, b, full_shape, focal_px, natural, corner_depth):
    """V on the whole image at once (the formula of beamshot.uncertainty.shading_gain, in float32)."""
    h, w = shape
    height, width = full_shape
    x = (np.arange(w) * b + (b - 1) / 2.0 - (width - 1) / 2.0).astype(np.float32)
    y = (np.arange(h) * b + (b - 1) / 2.0 - (height - 1) / 2.0).astype(np.float32)
    d2 = x[None, :] ** 2 + y[:, None] ** 2
    v = 1.0 - np.float32(corner_depth / (((width - 1) / 2.0) ** 2 + ((height - 1) / 2.0) ** 2)) * d2
    if natural and focal_px:
        v /= np.square(1.0 + d2 * np.float32(1.0 / focal_px**2))
    return v


@pytest.mark.parametrize("shape,b,natural,focal", [((75, 100), 2, True, 400.0), ((33, 50), 4, False, None),
                                                   ((31, 7), 1, True, 55.5), ((1, 9), 3, True, 0.0)])
def test_shading_gain_in_strips_equals_the_whole_image(shape, b, natural, focal):
    from beamshot.uncertainty import shading_divided, shading_gain

    full = (shape[0] * b + 1, shape[1] * b)
    ref = _gain_whole(shape, b, full, focal, natural, 0.2)
    got = shading_gain(shape, b, full, focal, natural=natural, corner_depth=0.2)
    assert got.dtype == np.float32 and np.array_equal(got, ref)
    lum = np.random.default_rng(1).random(shape, dtype=np.float32)
    div = shading_divided(lum, b, full, focal, natural=natural, corner_depth=0.2)
    assert div.dtype == np.float32 and np.array_equal(div, lum / ref)


def _measured_of(photo, **options):
    """The analysis' measured beam (beamshot.analysis._Measured) for ``photo``."""
    import beamshot.analysis as analysis

    seen = []
    measure = analysis._measure_beam

    def keep(*a, **k):
        seen.append(measure(*a, **k))
        return seen[-1]

    analysis._measure_beam = keep
    try:
        report = analysis.analyze(photo, **options)
    finally:
        analysis._measure_beam = measure
    return seen[-1], report


def _photo(scene, **cam_kw):
    base = dict(width_px=900, height_px=675, focal_35mm_mm=16, supersample=1, position_m=(0.15, 0.0, 0.0))
    base.update(cam_kw)
    cam = SynthCamera(**base)
    cam = replace(cam, exposure_time_s=exposure_time_for_peak(BEAM, scene, cam, target=0.8))
    return decode_photo(encode_jpeg(render_photo(BEAM, scene, cam, seed=5), cam, quality=90), "beam.jpg"), cam


@pytest.mark.parametrize("case", ["square pinhole", "tilted light, wall points"])
def test_tone_term_from_the_measured_map_equals_remeasure(case):
    # the tone term bends the map measured instead of rebuilding it: the same map, so the same values
    from beamshot.scale import no_scale
    from beamshot.uncertainty import _tone_moved

    if case == "square pinhole":
        photo, _ = _photo(Scene(distance_m=5.0))
        measured, _ = _measured_of(photo, distance_m=5.0)
    else:
        scene = Scene(distance_m=5.0, light_yaw_deg=6.0)
        photo, cam = _photo(scene, width_px=1200, height_px=900, position_m=(0.6, 0.1, 0.0), yaw_deg=-10.0)
        from beamshot.wall import rotation_yaw_pitch

        wall = np.array([[-1.2, 0.9], [1.2, 0.9], [1.2, -0.9], [-1.2, -0.9]])
        r = rotation_yaw_pitch(cam.yaw_deg, cam.pitch_deg)
        p = (np.c_[wall, np.full(4, 5.0)] - np.asarray(cam.position_m)) @ r
        f, cx, cy = cam.focal_px, (cam.width_px - 1) / 2, (cam.height_px - 1) / 2
        px = np.c_[p[:, 0] / p[:, 2] * f + cx, p[:, 1] / p[:, 2] * f + cy]
        measured, _ = _measured_of(photo, distance_m=5.0, wall_points=(px, wall * 1000.0))
        assert measured.axis_dir is not None  # the tilt was applied: the map's axis is not the wall's normal
    scale = no_scale("relative, for the test")
    eps = 0.075
    fast = _tone_moved(measured, eps, scale, None)
    slow = measured.values(scale, None, measured.remeasure(tone=eps), None)
    assert fast.keys() == slow.keys()
    for key in fast:
        assert fast[key] == slow[key] or (np.isnan(fast[key]) and np.isnan(slow[key])), key
    # and the map it starts from is the one remeasure() builds with nothing moved
    rebuilt = measured.remeasure()
    assert rebuilt.peak.value == measured.shape.peak.value


@pytest.mark.parametrize("u", [0.02, 0.3])
def test_distance_term_beside_the_light_equals_the_map_rebuilt(u):
    # the camera beside the light: moving D stretches the wall with it, so the map rebuilt at
    # D + u(D) is the old one times ((D + u)/D)^2 (I = E D^2 / cos^3, IES 9.1.1); equal to the
    # report's 6 significant digits (the rebuilt map differs from the scaled one by float rounding)
    from beamshot.report.model import rounded
    from beamshot.scale import scale_from_lux_meter, no_scale
    from beamshot.uncertainty import mapping_stretched, shape_at_distance

    photo, _ = _photo(Scene(distance_m=5.0))
    measured, _ = _measured_of(photo, distance_m=5.0)
    d, d2 = 5.0, 5.0 + u
    pk = measured.shape.peak
    for scale, lux in ((no_scale("relative, for the test"), None),
                       (scale_from_lux_meter(400.0, pk.value, float(pk.theta), d), 400.0)):
        fast = measured.values(scale, lux, shape_at_distance(measured.shape, (d2 / d) ** 2), d2)
        rebuilt = measured.remeasure(distance_m=d2, mapping=mapping_stretched(measured.mapping, d2 / d, measured.foot_mm))
        slow = measured.values(scale, lux, rebuilt, d2)
        assert rounded(fast) == rounded(slow)
        assert fast["beam_flux_rel"] != measured.values(scale, lux)["beam_flux_rel"]  # the term is not zero


def test_inside_outline_equals_matplotlib_contains_points():
    # reference: matplotlib's Path.contains_points (W. R. Franklin's even-odd crossing test), point by point
    from matplotlib.path import Path

    from beamshot.report.plots import _inside_outline

    rng = np.random.default_rng(11)
    t = np.linspace(0, 2 * np.pi, 800, endpoint=False)
    outlines = [np.c_[30 * np.cos(t) + 3 * np.cos(5 * t), 22 * np.sin(t)],  # a photo's view, 800 points
                np.array([[0.0, 0.0], [10.0, 0.0], [10.0, 10.0], [0.0, 10.0]]),  # vertices on grid rows
                np.cumsum(rng.normal(size=(60, 2)), axis=0) * 3,  # self-crossing
                rng.normal(size=(5, 2)) * 20]
    for n, half in ((401, 40.0), (241, 12.0), (61, 10.0)):
        a = np.linspace(-half, half, n)
        xx, yy = np.meshgrid(a, a)
        for outline in outlines:
            ref = Path(outline).contains_points(np.c_[xx.ravel(), yy.ravel()]).reshape(xx.shape)
            assert np.array_equal(_inside_outline(outline, a, a), ref)


def test_row_percentiles_equal_numpys_nanpercentile():
    # reference: numpy's nanpercentile, linear method (Hyndman & Fan 1996 definition 7), row by row
    from beamshot.report.plots import row_percentiles

    rng = np.random.default_rng(11)
    v = rng.lognormal(size=(300, 180))
    v[rng.random(v.shape) < 0.3] = np.nan
    v[5, 1:] = np.nan  # a row with one value
    v[7, :] = 2.5  # ties
    q = (10, 50, 90, 0, 100, 33.3)
    got = row_percentiles(v, q)
    want = np.nanpercentile(v, q, axis=1)
    assert np.array_equal(got, want)


def test_row_nanmedian_is_numpys_nanmedian():
    # reference: numpy's nanmedian (the middle value, or the two middle ones added and halved), row by row
    import warnings

    from beamshot.robust import row_nanmedian

    rng = np.random.default_rng(4)
    for n_cols in (1, 2, 7, 180, 181):
        a = np.round(rng.normal(size=(40, n_cols)) * 10, 1)  # ties as well
        a[rng.random(a.shape) < 0.3] = np.nan
        a[0] = np.nan  # a row of NaN only
        a[1, :1] = np.inf
        a[2, -1:] = -np.inf
        with warnings.catch_warnings(), np.errstate(invalid="ignore"):
            warnings.simplefilter("ignore", RuntimeWarning)
            want = np.nanmedian(a, axis=1)
        assert np.array_equal(row_nanmedian(a), want, equal_nan=True)


def test_second_differences_of_all_rows_equal_each_rows_head():
    # reference: the one-row definition, on each row's finite head
    from beamshot.spill import _second_differences, _second_differences_rows

    rng = np.random.default_rng(5)
    rows = rng.lognormal(size=(12, 300))
    lasts = rng.integers(40, 301, 12)
    for s, last in enumerate(lasts):
        rows[s, last:] = np.nan
    for n in (2, 3, 7):
        got = _second_differences_rows(rows, n)
        for s, last in enumerate(lasts):
            want = _second_differences(rows[s, :last], n)
            assert np.array_equal(got[s, :len(want)], want)


def test_iso13694_on_the_lit_rows_equals_the_whole_map():
    # reference: the measures over every row of the map (no region reaches below the lowest clip)
    from beamshot.level_integrals import above_level
    from beamshot.map_noise import NoiseModel
    from beamshot.shape_iso import (EDGE_CLIPS, HOTSPOT_CLIP, N_SUBSETS, _iso13694_of, _sector_noise, ae_grid,
                                    iso13694)

    from conftest import analytic_map

    rng = np.random.default_rng(6)
    beam = analytic_map(lambda t, p: np.exp(-(np.degrees(t) / 4.0) ** 2) + 0.02, theta_max_deg=40.0, d_theta_deg=0.1,
                        d_phi_deg=2.0)
    beam = replace(beam, intensity=beam.intensity + rng.normal(0.0, 0.01, beam.intensity.shape))
    noise = NoiseModel(1e-4, 1e-3)
    var = noise.sigma(beam.intensity) ** 2
    t = np.degrees(beam.theta)
    hot = above_level(beam.intensity, t, beam.d_phi, HOTSPOT_CLIP, var)
    a_low, a_high = (above_level(beam.intensity, t, beam.d_phi, c).area for c in EDGE_CLIPS)
    n = beam.intensity.shape[1]
    cols = np.arange(n)
    full = _iso13694_of(hot, a_low, a_high, 1.0, slice(None))
    subs = np.array([_iso13694_of(hot, a_low, a_high, 1.0, cols % N_SUBSETS == k) for k in range(N_SUBSETS)])
    got = iso13694(beam, 1.0, noise)
    assert (got.flatness, got.uniformity, got.edge_steepness) == tuple(full)
    # the noise: the larger of the interleaved spread and the contiguous sectors', over the whole map
    radius = np.sqrt(np.array([hot.area.sum(), hot.area.sum(), a_high.sum()]) / np.pi)
    sectors = _sector_noise(hot, a_low, a_high, 1.0, beam.phi, radius, 0.0)
    assert got.flatness_sigma == float(np.fmax(np.nanstd(subs, axis=0, ddof=1) / np.sqrt(N_SUBSETS), sectors)[0])
    # the rows a disc reaches, for the D4sigma moments: slices of the whole map's arrays
    from beamshot.shape_iso import _NearRows

    near = _NearRows(beam, noise)
    x, y, a = ae_grid(beam)
    for centre, radius in (((0.5, -0.3), 6.0), ((0.0, 0.0), 2.0), ((1.0, 1.0), 100.0)):
        part = near.within(centre, radius)
        rows = len(part[0])
        for got_a, want_a in zip(part, (x, y, a, beam.intensity, np.isfinite(beam.intensity),
                                        noise.sigma(beam.intensity), np.degrees(beam.theta))):
            assert np.array_equal(got_a, want_a[:rows])
        assert rows == min(len(beam.theta), int(np.searchsorted(np.hypot(x[:, 0], y[:, 0]),
                                                                float(np.hypot(*centre)) + radius, side="right")) + 1)


def test_shape_stage_with_the_budgets_bent_map_equals_bending_again():
    # the shape stage takes the tone term's bent map and shape from the budget: the same figures as its own
    from beamshot.artefacts import shape_figures
    from beamshot.uncertainty import _tone_bent_shape

    photo, _ = _photo(Scene(distance_m=5.0))
    measured, _ = _measured_of(photo, distance_m=5.0)
    eps = 0.075
    kw = {"pixel_deg": 0.05, "scale_u": 0.01, "correlation_deg": 0.2, "tone_eps": eps, "tone_assumed": True}
    own = shape_figures(measured.beam, measured.shape, **kw)
    bent = _tone_bent_shape(measured, eps)
    assert shape_figures(measured.beam, measured.shape, bent=bent, **kw) == own
    assert bent.of(measured.beam, measured.shape.peak.value, eps) is bent
    assert bent.of(measured.beam, measured.shape.peak.value, 2 * eps) is None  # another bend: not used


def test_maps_built_again_from_kept_geometry_and_weights_equal_fresh_ones():
    # a map rebuilt on the same view reuses the sampling geometry (beammap) and the floor's smoothed
    # weights (floor); reference: the same map with nothing kept
    from beamshot import beammap, floor
    from beamshot.uncertainty import with_luminance

    photo, _ = _photo(Scene(distance_m=5.0))
    measured, _ = _measured_of(photo, distance_m=5.0)
    img = measured.image
    other = with_luminance(img, img.luminance * np.float32(0.7) + np.float32(1e-4))  # same clip mask object

    def build(image):
        raw = beammap.build_beam_map(image, measured.mapping, measured.foot_mm, measured.distance_m,
                                     axis_dir=measured.axis_dir)
        return raw, floor.floor_corrected(raw, bin_factor=image.bin_factor)[0]

    def same(a, b):
        for f in ("theta", "phi", "intensity", "saturated", "footprint_deg"):
            assert np.array_equal(getattr(a, f), getattr(b, f), equal_nan=True), f

    beammap._GEOMETRIES.clear()
    floor._WEIGHTS.clear()
    first = build(img)
    for image in (img, other):
        kept = build(image)  # geometry and weights kept from the first build
        beammap._GEOMETRIES.clear()
        floor._WEIGHTS.clear()
        fresh = build(image)
        for a, b in zip(kept, fresh):
            same(a, b)
    same(first[1], build(img)[1])


def test_one_blas_thread_measures_the_same_shape():
    # the stages after the linear image run BLAS on one thread: their products give the same numbers
    from beamshot.measure import measure_shape, shape_values
    from beamshot.threads import one_blas_thread

    photo, _ = _photo(Scene(distance_m=5.0))
    measured, _ = _measured_of(photo, distance_m=5.0)
    with one_blas_thread():
        one = shape_values(measure_shape(measured.beam))
    assert one == shape_values(measure_shape(measured.beam))


@pytest.mark.parametrize("mode", ["reflect", "nearest", "wrap"])
def test_smoothing_padding_equals_numpys_pad(mode):
    # reference: numpy.pad with the mode SciPy's name stands for; paddings shorter, as long as and longer than a row
    from beamshot.smoothing import _PAD_MODES, _padded

    rng = np.random.default_rng(4)
    for n in (1, 5, 180):
        rows = rng.normal(size=(3, n))
        for r in (0, 1, 4, 5, 6, 17):
            assert np.array_equal(_padded(rows, r, mode), np.pad(rows, ((0, 0), (r, r)), mode=_PAD_MODES[mode]))


def test_hotspot_subset_moments_equal_selecting_each_subset_from_the_map():
    # reference: each interleaved azimuth subset (columns k mod 4) selected from the whole map
    from beamshot.shape_iso import _Disc, _moments_once, ae_grid

    from conftest import analytic_map

    beam = analytic_map(lambda t, p: np.exp(-(np.degrees(t) / 4.0) ** 2) * (1 + 0.1 * np.cos(2 * p)),
                        theta_max_deg=20.0, d_phi_deg=2.0)
    x, y, area = ae_grid(beam)
    rng = np.random.default_rng(9)
    e = beam.intensity + rng.normal(0.0, 0.01, beam.intensity.shape)
    keep = e > 0.05
    centre, radius = (0.3, -0.2), 6.0
    m, subs = _Disc(x, y, centre, radius).moments_with_subsets(area, e, keep, 4)
    assert m == _moments_once(x, y, area, np.where(keep, e, 0.0), keep, centre, radius)
    cols = np.arange(e.shape[1])
    for k, ms in enumerate(subs):
        on = (cols % 4 == k)[None, :]
        assert ms == _moments_once(x, y, area, np.where(keep & on, e, 0.0), keep & on, centre, radius)


def test_batched_window_sum_variances_equal_the_one_by_one_rule():
    # reference: _window_sum_variance, numpy's median of the segments' finite second differences
    from beamshot.spill import _window_sum_variance, _window_sum_variances

    rng = np.random.default_rng(21)
    for m in (40, 41, 300):
        d2 = rng.normal(0.0, 1.0, (30, m)) * rng.uniform(0.01, 100.0, (30, 1))
        d2[rng.random(d2.shape) < 0.05] = np.nan
        d2[3] = np.round(d2[3])  # ties
        segs = np.sort(rng.integers(0, m + 5, (30, 4)), axis=1)
        segs[4] = (0, 0, 0, 2)  # fewer than 3 values: NaN
        got = _window_sum_variances(d2, segs)
        for q in range(30):
            # the sample ranges (lo, hi) that give d2[l:u] at lag 1: u = hi - 3 + 1
            ref = _window_sum_variance(d2[q], 1, [(segs[q, 0], segs[q, 1] + 2), (segs[q, 2], segs[q, 3] + 2)])
            assert got[q] == ref or (np.isnan(got[q]) and np.isnan(ref))


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_spill_edge_with_first_cutoffs_batched_equals_one_by_one(seed, monkeypatch):
    # reference: every sector's candidates placed one by one (_centred_step), as before the batch
    from beamshot import spill

    from conftest import analytic_map

    rng = np.random.default_rng(seed)
    cut = 14.0 + 4.0 * seed

    def pattern(t, p):
        deg = np.degrees(t)
        edge = cut * (1.0 + 0.05 * np.cos(2 * p))
        return np.exp(-(deg / 3.0) ** 2) + 0.02 / (1.0 + np.exp((deg - edge) / 0.3))

    beam = analytic_map(pattern, theta_max_deg=cut + 6.0 - 4.0 * (seed == 2), d_theta_deg=0.1, d_phi_deg=2.0)
    inten = beam.intensity * (1.0 + rng.normal(0.0, 0.02 + 0.05 * seed, beam.intensity.shape))
    inten[-40:, 20:60] = np.nan  # a corner of the photo
    beam = replace(beam, intensity=inten)
    fast = spill.find_spill_edge(beam, 1.0)
    monkeypatch.setattr(spill, "_first_steps", lambda *a, **k: {})
    slow = spill.find_spill_edge(beam, 1.0)
    assert fast.kind == slow.kind and "cutoff" in fast.kind
    for a, b in ((fast.theta, slow.theta), (fast.sigma, slow.sigma), (fast.pooled, slow.pooled)):
        assert np.array_equal(a, b, equal_nan=True)


def test_cutoff_points_pick_each_runs_steepest_point_as_one_by_one():
    # reference: each sector's candidates split into contiguous runs, outermost first, and the
    # first point of steepest fall of each run (np.argmax), sector by sector
    from beamshot.spill import _cutoff_points

    rng = np.random.default_rng(5)
    n_t, k = 400, 5
    j = np.arange(n_t)
    smoothed = np.exp(-(j[None, :] / rng.uniform(60, 200, (24, 1))) ** 2)
    smoothed /= 1.0 + np.exp((j[None, :] - rng.integers(150, 350, (24, 1))) / rng.uniform(0.5, 2.0, (24, 1)))
    smoothed[5] = np.exp(-(j / 300.0) ** 2) * (0.05 + 0.95 / (1.0 + np.exp((j - 120) / 0.7)))  # two cut-offs:
    smoothed[5] /= 1.0 + np.exp((j - 300) / 0.7)  # two runs
    smoothed[6, 200:] = smoothed[6, 199]  # flat ties
    floors = np.full(24, 1e-6)
    starts, lasts = np.full(24, 20), np.full(24, n_t)
    lasts[7] = 250
    got = _cutoff_points(smoothed, floors, starts, lasts, k)
    lo = 3 * k
    jj = j[lo:n_t - k]
    inner, outer = smoothed[:, jj - k], np.maximum(smoothed[:, jj + k], floors[:, None])
    before, inner_f = np.maximum(smoothed[:, jj - 3 * k], floors[:, None]), np.maximum(inner, floors[:, None])
    drop, drop_before = np.log(inner_f / outer), np.log(before / inner_f)
    ok = (drop >= np.log(3.0)) & (inner >= 3 * floors[:, None]) & (drop >= 4.0 * drop_before)
    ok &= (jj[None, :] >= starts[:, None]) & (jj[None, :] < lasts[:, None] - k)
    assert sum(len(p) > 1 for p in got) >= 1 and sum(len(p) == 1 for p in got) >= 10
    for s in range(24):
        cand = jj[ok[s]]
        runs = np.split(cand, np.nonzero(np.diff(cand) > 1)[0] + 1)[::-1] if cand.size else []
        assert got[s] == [int(r[np.argmax(smoothed[s, r - 1] - smoothed[s, r + 1])]) for r in runs]
