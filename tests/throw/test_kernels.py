"""The compiled kernels give the same numbers as the array code they replace.

The array code (faultmap.throw.profiles.sample_profiles and
faultmap.throw.robust_lines._fit_windows with ``use_jit=False``) is itself checked
against outside references in test_throw.py: scipy.ndimage.map_coordinates
for the bilinear samples, the M-estimate fixed point (Holland & Welsch 1977)
for the robust lines. Here the kernels must reproduce it bit for bit
(the same float32 operations in the same order), including voids, window
edges, short and empty windows, warm starts and every loss.

The along-strike smoothing kernel (faultmap.throw.smoothing_jit.smooth_stations) sums
station by station where the array code uses matrix products, so it agrees
to rounding (1e-9 relative), with the same outliers and the same
cross-validated widths; the array code is checked analytically in
test_throw.py (a parabola reproduced by the local quadratic, Cleveland 1979).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from rasterio.transform import from_origin

from faultmap.io.dem_jit import voids_to_nan
from faultmap.numerics import jit
from faultmap.throw.profiles import sample_profiles
from faultmap.throw.robust_lines import _fit_windows
from faultmap.throw.scarp_fit_jit import profile_gradients
from faultmap.throw.stations_jit import box_pairs

pytestmark = pytest.mark.skipif(not jit.ENABLED, reason="numba kernels disabled (FAULTMAP_NO_JIT)")


def _same(a, b):
    a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
    return a.shape == b.shape and bool(((a == b) | (np.isnan(a) & np.isnan(b))).all())


@pytest.mark.parametrize("origin", [None, "pixel", "off-pixel"])
def test_bilinear_kernel_matches_array_code(origin):
    rng = np.random.default_rng(4)
    nr, nc, px = 90, 130, 2.0
    arr = (300.0 + np.cumsum(rng.normal(0.0, 0.5, (nr, nc)), axis=1)).astype("float32")
    arr[rng.random(arr.shape) < 0.02] = np.nan
    t = from_origin(1000.0, 5000.0, px, px)
    m, K, step = 3000, 45, 1.7
    x = rng.uniform(990.0, 1000.0 + nc * px + 10.0, m)
    y = rng.uniform(5000.0 - nr * px - 10.0, 5010.0, m)
    az = rng.uniform(0.0, 2.0 * math.pi, m)
    nx, ny = np.sin(az), np.cos(az)
    # profiles along the last row and column of pixel centres, and axis-parallel ones
    x[:20] = 1000.0 + (nc - 0.5) * px
    y[20:40] = 5000.0 - (nr - 0.5) * px
    nx[:40:2], ny[:40:2] = 0.0, 1.0
    nx[1:40:2], ny[1:40:2] = 1.0, 0.0
    k_row = rng.integers(0, K + 1, m)
    kw = {}
    if origin == "pixel":
        kw["origin_xy"] = (1000.0 - 7 * px + 0.5 * px, 5000.0 + 3 * px - 0.5 * px)
    elif origin == "off-pixel":
        kw["origin_xy"] = (1000.3, 5000.1)
    for kr in (None, k_row):
        ref = sample_profiles(arr, t, x, y, nx, ny, K, step, k_row=kr, use_jit=False, **kw)
        got = sample_profiles(arr, t, x, y, nx, ny, K, step, k_row=kr, use_jit=True, **kw)
        assert _same(got, ref)
        # the case mix is real: voids, outside samples and finite values all occur
        assert np.isnan(ref).any() and np.isfinite(ref).mean() > 0.3


def _windows(seed, R2=1500, K=70):
    rng = np.random.default_rng(seed)
    d = np.arange(1, K + 1)
    Z = 5.0 * rng.normal(size=(R2, 1)) + 0.05 * rng.normal(size=(R2, 1)) * d + rng.normal(0.0, 0.3, (R2, K))
    out = rng.random(Z.shape) < 0.08  # gullies, vegetation
    Z[out] += rng.choice([-6.0, 6.0], size=int(out.sum()))
    Z[: R2 // 20] = 1.25  # noise-free rows: the scale floor
    Z = Z.astype("float32")
    valid = rng.random(Z.shape) > 0.06
    valid[R2 // 20 : R2 // 10] = False  # empty rows
    Z0 = np.where(valid, Z, 0.0).astype("float32")
    lo = rng.uniform(0.5, 25.0, R2)
    hi = lo + rng.uniform(-3.0, 50.0, R2)  # some windows empty or of one sample
    rows = rng.permutation(R2)[: R2 - 7]
    init_a = rng.normal(0.0, 2.0, R2)
    init_b = rng.normal(0.0, 0.05, R2)
    init_a[::9] = np.nan
    return Z0, valid, rows, lo[rows], hi[rows], (init_a[rows], init_b[rows])


@pytest.mark.parametrize(
    "loss,iterations,max_iterations,autocorr,warm",
    [
        ("tukey", 3, None, True, False),
        ("tukey", 3, None, True, True),
        ("tukey", 1, 1, False, False),
        ("huber", 2, None, True, True),
        ("none", 3, None, True, False),
        ("none", 0, None, True, True),
        ("tukey", 6, 4, True, False),
    ],
)
def test_robust_window_kernel_matches_array_code(loss, iterations, max_iterations, autocorr, warm):
    Z0, valid, rows, lo, hi, init = _windows(7)
    kw = dict(
        loss=loss,
        tuning=4.685 if loss == "tukey" else 1.345,
        iterations=iterations,
        max_iterations=max_iterations,
        autocorr=autocorr,
        init=init if warm else None,
    )
    ref = _fit_windows(Z0, valid, rows, lo, hi, use_jit=False, **kw)
    got = _fit_windows(Z0, valid, rows, lo, hi, use_jit=True, **kw)
    assert set(got) == set(ref)
    for k in ref:
        assert _same(got[k], ref[k]), k
    assert got["n"].dtype == ref["n"].dtype
    # fits that failed (empty or one-sample windows) and fits that worked are both in the mix
    assert np.isnan(ref["a"]).any() and np.isfinite(ref["a"]).mean() > 0.5



def test_box_pairs_match_strtree():
    # reference library: shapely.STRtree.query (envelope intersection, touching included) on the same boxes,
    # with zero-width boxes (axis-parallel segments), boxes sharing an edge exactly and far-away ones
    import shapely

    rng = np.random.default_rng(3)
    q = rng.uniform(0.0, 1000.0, (800, 2))
    q = np.c_[q, q + rng.uniform(0.0, 80.0, (800, 2))]
    b = rng.uniform(0.0, 1000.0, (500, 2))
    b = np.c_[b, b + rng.exponential(60.0, (500, 2))]
    b[:40, 2] = b[:40, 0]  # vertical segments
    b[40:80, 3] = b[40:80, 1]  # horizontal segments
    b[80:120, 0] = q[:40, 2]  # touching the right edge of a query box
    b[80:120, 2] = b[80:120, 0] + 5.0
    b[120:125] += 5000.0  # outside everything
    i, j = box_pairs(q, b)
    tree = shapely.STRtree(shapely.box(b[:, 0], b[:, 1], b[:, 2], b[:, 3]))
    ri, rj = tree.query(shapely.box(q[:, 0], q[:, 1], q[:, 2], q[:, 3]))
    assert set(zip(i.tolist(), j.tolist(), strict=True)) == set(zip(ri.tolist(), rj.tolist(), strict=True))
    assert i.size == len(set(zip(i.tolist(), j.tolist(), strict=True)))  # no pair twice
    assert ri.size > 500


def test_crossing_limits_same_with_grid_and_strtree():
    # the throw step's use of box_pairs: the same crossing distances as with the shapely STRtree
    import shapely

    from faultmap.throw.stations import crossing_limits, place_stations

    rng = np.random.default_rng(8)
    lines = np.array(
        [shapely.LineString(np.cumsum(rng.normal(0.0, 300.0, (int(rng.integers(2, 9)), 2)), axis=0)) for _ in range(60)]
    )
    st = place_stations(lines, spacing_m=50.0, normal_window_m=100.0, side_sign=np.ones(len(lines)))
    H = rng.uniform(50.0, 600.0, len(st))
    a = crossing_limits(st, H, lines, own_exclusion_m=20.0, use_jit=True)
    b = crossing_limits(st, H, lines, own_exclusion_m=20.0, use_jit=False)
    for x, y in zip(a, b, strict=True):
        assert np.array_equal(x, y)
    assert np.isfinite(a[0]).sum() + np.isfinite(a[1]).sum() > 50  # crossings do occur


def test_voids_to_nan_matches_the_array_rule():
    # the array rule of faultmap.io.dem.read_window_array: a pixel is void when it equals a void value
    # (compared in float32, the file's type) or is +-inf; NaN stays NaN; everything else is untouched
    rng = np.random.default_rng(2)
    a = rng.normal(500.0, 50.0, (300, 200)).astype("float32")
    voids = [-9999.0, -3.4028234663852886e38, float("nan")]
    a.flat[rng.choice(a.size, 500, replace=False)] = -9999.0
    a.flat[rng.choice(a.size, 50, replace=False)] = np.float32(-3.4028234663852886e38)
    a.flat[rng.choice(a.size, 30, replace=False)] = np.inf
    a.flat[rng.choice(a.size, 30, replace=False)] = -np.inf
    a.flat[rng.choice(a.size, 30, replace=False)] = np.nan
    ref = a.copy()
    bad = (ref == np.float32(-9999.0)) | (ref == np.float32(-3.4028234663852886e38)) | np.isinf(ref)
    ref[bad] = np.nan
    voids_to_nan(a, voids)
    assert int(np.isnan(a).sum()) == int(np.isnan(ref).sum()) > 500
    assert _same(a, ref)


@pytest.mark.parametrize("short_rows", [False, True])
def test_profile_gradients_kernel_matches_array_code(short_rows):
    from faultmap.throw.scarp_fit import _profile_gradients

    rng = np.random.default_rng(21)
    R2, K = 900, 47
    Zc = np.cumsum(rng.normal(0.0, 0.4, (R2, K)), axis=1).astype("float32")
    Zc[rng.random(Zc.shape) < 0.05] = np.nan
    Zc[:30] = np.nan  # rows with no usable gradient: background 0
    lim = rng.uniform(3.0, K + 4.0, R2)
    rs = None
    if short_rows:
        rs = rng.integers(2, K + 1, R2)
        Zc[np.arange(K)[None, :] >= rs[:, None]] = np.nan
    g_ref, bg_ref, z_ref = _profile_gradients(Zc, lim, rs)
    g, bg = profile_gradients(Zc, lim, rs)
    assert _same(g, g_ref) and _same(bg, bg_ref)
    assert (bg_ref[:30] == 0).all() and np.count_nonzero(bg_ref) > R2 // 2


def test_whole_profile_fit_same_with_and_without_kernels():
    # the full fit of scarp profiles (coarse lines, scarp edges, far-field fits, refits) with every kernel
    # against the array code alone: the same numbers bit for bit. Profiles: a scarp of random height and
    # width on a sloping surface, noise, gullies (outliers), voids, rows shorter than the matrix.
    from faultmap.throw.scarp_fit import fit_profile_matrix

    rng = np.random.default_rng(12)
    n, K = 600, 60
    d = np.arange(1, K + 1, dtype=float)
    T = rng.uniform(0.5, 8.0, n)[:, None]
    w = rng.uniform(1.0, 12.0, n)[:, None]
    slope = rng.normal(0.0, 0.03, n)[:, None]
    ramp = lambda x: 0.5 * T * np.clip(x / w, -1.0, 1.0)  # noqa: E731
    minus = 100.0 + ramp(d) + slope * -d  # footwall side, going outwards
    plus = 100.0 - ramp(d) + slope * d
    Z = np.concatenate([minus, plus]) + rng.normal(0.0, 0.15, (2 * n, K))
    out = rng.random(Z.shape) < 0.04
    Z[out] += rng.choice([-3.0, 3.0], size=int(out.sum()))
    Z[rng.random(Z.shape) < 0.03] = np.nan
    Z = Z.astype("float32")
    rows = rng.integers(20, K + 1, n)
    rs = np.concatenate([rows, rows])
    Z[np.arange(K)[None, :] >= rs[:, None]] = np.nan
    lim = np.minimum(rs, rng.uniform(15.0, K + 5.0, 2 * n))
    kw = dict(w0_steps=3.0, far_min_steps=8.0, min_samples=8, row_samples=rs)
    a = fit_profile_matrix(Z, lim, use_jit=False, **kw)
    b = fit_profile_matrix(Z, lim, use_jit=True, **kw)
    assert set(a) == set(b)
    for k in a:
        assert _same(a[k], b[k]), k
    # the fits found scarps of the built heights (a loose sanity check that the case is a real one)
    ok = np.isfinite(a["vs"])
    assert ok.mean() > 0.9
    assert np.median(np.abs(a["vs"][ok] - T[ok, 0])) < 0.5
    assert a["edge_found"].mean() > 0.5


@pytest.mark.parametrize("sigma", [None, 1.3, 0.0])
def test_smoothing_kernel_matches_array_code(sigma):
    from faultmap.throw.smoothing import _smooth_chunk

    rng = np.random.default_rng(5)
    n_g = 400
    counts = rng.integers(1, 50, n_g)  # single stations, short and long faults
    g = np.repeat(np.arange(n_g), counts) + 7  # chunks carry global fault indices
    s = np.concatenate([(np.arange(c) + 0.5) / c for c in counts])
    amp = rng.uniform(5.0, 40.0, n_g)[g - 7]
    noise = rng.choice([0.05, 0.5, 3.0], n_g)[g - 7]  # smooth to noisy: the widths chosen differ
    T = amp * (1.0 - (2.0 * s - 1.0) ** 2) + rng.normal(0.0, 1.0, g.size) * noise
    se = rng.uniform(0.2, 1.0, g.size)
    T[rng.random(g.size) < 0.05] = np.nan  # unusable stations
    T[rng.random(g.size) < 0.03] += 25.0  # outliers for the Hampel identifier
    se[rng.random(g.size) < 0.01] = np.nan
    se[rng.random(g.size) < 0.01] = 0.0  # takes the error floor
    ref = _smooth_chunk(g, T, se, sigma, use_jit=False)
    got = _smooth_chunk(g, T, se, sigma, use_jit=True)
    names = ("smoothed", "error", "outlier", "sigma", "coef")
    for name, a, b in zip(names, ref, got, strict=True):
        a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
        assert a.shape == b.shape and np.array_equal(np.isnan(a), np.isnan(b)), name
        assert np.allclose(a, b, rtol=1e-9, atol=1e-9, equal_nan=True), name
    assert ref[2].any()  # outliers were found
    if sigma is None:
        assert np.unique(ref[3]).size >= 3  # several widths were chosen
