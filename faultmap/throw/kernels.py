"""Compiled kernels for the throw step's hot loops (numba), with the numpy code as the reference.

Each kernel is the compiled form of an array routine that stays in the
package as the reference implementation (and runs instead when numba
cannot be imported or ``FAULTMAP_NO_JIT=1`` is set):

* :func:`bilinear_profiles` samples the DEM along both sides of many
  profiles: :func:`faultmap.throw.profiles.sample_profiles`.
* :func:`robust_windows` fits robust lines to a window of samples of many
  profile rows: :func:`faultmap.throw.robust_lines._fit_windows`.
* :func:`profile_gradients` smooths each profile's gradient and finds its
  background slope: :func:`faultmap.throw.scarp_fit._profile_gradients`.
* :func:`scarp_edges` finds where each side's scarp ends:
  :func:`faultmap.throw.scarp_fit._scarp_edges`.
* :func:`box_pairs` finds the profiles and trace segments whose boxes
  overlap: a ``shapely.STRtree`` query in
  :func:`faultmap.throw.stations.crossing_limits`.
* :func:`voids_to_nan` sets the voids of a DEM window to NaN:
  :func:`faultmap.io.dem.read_window_array`.
* :func:`hampel_flags` and :func:`smooth_stations` smooth the along-strike
  throw profiles: :func:`faultmap.throw.along_strike._smooth_chunk`.

The first six repeat the reference's float32 arithmetic operation by
operation and accumulate every sum sample by sample in the same order, so
they return the same numbers (``tests/throw/test_kernels.py`` compares them). The
smoothing kernel sums station by station where its reference uses matrix
products, so it agrees to rounding, with the same outliers and widths. Each profile
is handled on its own, so results never depend on how the work was
batched. The kernels release the GIL: an engine running batches in
threads runs them in parallel. They are serial inside (no hidden thread
pool competing with the engine's workers).

Compilation happens once per environment (numba's on-disk cache); the
first call in a new environment takes several seconds.
"""

from __future__ import annotations

import math
import os

import numpy as np

__all__ = [
    "ENABLED",
    "bilinear_profiles",
    "robust_windows",
    "profile_gradients",
    "scarp_edges",
    "box_pairs",
    "voids_to_nan",
    "hampel_flags",
    "smooth_stations",
]

try:  # pragma: no cover - exercised by whichever environment runs the tests
    if os.environ.get("FAULTMAP_NO_JIT", "") not in ("", "0"):
        raise ImportError("disabled by FAULTMAP_NO_JIT")
    import numba as _nb

    ENABLED = True
except ImportError:  # pragma: no cover
    _nb = None
    ENABLED = False


def compiled_on_disk() -> bool | None:
    """Whether numba's on-disk cache already holds the compiled kernels of this source.

    ``False`` means the next run compiles them (about 13 s, once per
    environment); ``None`` when it cannot tell (numba's cache layout is not
    a public interface). Always ``True`` when the kernels are disabled.
    """
    if _nb is None:
        return True
    try:
        for fn in (_bilinear_rows, _gradients, _cv_choice, _final_fit, _converge, _grid_query):
            if not fn._cache._cache_file._load_index():
                return False
        return True
    except Exception:  # pragma: no cover - another numba version
        return None


def _jit(fn):
    if _nb is None:  # pragma: no cover
        return fn
    return _nb.njit(cache=True, nogil=True, error_model="numpy")(fn)


_F32 = np.float32
#: Loss codes of :func:`robust_windows`.
LOSS_CODES = {"none": 0, "tukey": 1, "huber": 2}


# ---------------------------------------------------------------------------
# Bilinear sampling of profiles
# ---------------------------------------------------------------------------
@_jit
def _bilinear_rows(flat, nr, nc, frac_r, frac_c, off_r, off_c, drow, dcol, K, k_max, out):  # pragma: no cover
    one = np.float32(1.0)
    nan = np.float32(np.nan)
    for r in range(frac_r.size):
        fr0 = frac_r[r]
        fc0 = frac_c[r]
        dr = drow[r]
        dc = dcol[r]
        for j in range(K):
            if j >= k_max[r]:
                out[r, j] = nan
                continue
            kf = np.float32(j + 1)
            fr = dr * kf
            fr = fr + fr0
            fc = dc * kf
            fc = fc + fc0
            if not (fr == fr and fc == fc):
                out[r, j] = nan
                continue
            flr = math.floor(fr)
            flc = math.floor(fc)
            fr = fr - np.float32(flr)
            fc = fc - np.float32(flc)
            ii = np.int64(flr) + off_r[r]
            jj = np.int64(flc) + off_c[r]
            if ii < 0 or ii > nr - 2 or jj < 0 or jj > nc - 2:
                # a sample exactly on the last row or column of pixel centres is inside
                if ii == nr - 1 and fr == 0 and nr > 1:
                    ii = nr - 2
                    fr = one
                if jj == nc - 1 and fc == 0 and nc > 1:
                    jj = nc - 2
                    fc = one
                if ii < 0 or ii > nr - 2 or jj < 0 or jj > nc - 2:
                    out[r, j] = nan
                    continue
            idx = ii * nc + jj
            z = flat[idx]
            d01 = flat[idx + 1]
            d10 = flat[idx + nc]
            d11 = flat[idx + nc + 1]
            # the reference's order of operations (faultmap.throw.profiles.sample_profiles)
            d11 = d11 - d10
            d10 = d10 - z
            d01 = d01 - z
            d11 = d11 - d01
            d11 = d11 * fc
            d11 = d11 + d10
            d11 = d11 * fr
            d01 = d01 * fc
            d01 = d01 + d11
            out[r, j] = z + d01


def bilinear_profiles(flat, nr, nc, frac_r, frac_c, off_r, off_c, drow, dcol, K, k_max):
    """Bilinear samples along many rays from per-ray pixel positions (compiled).

    Parameters
    ----------
    flat : ndarray of float32, shape (nr * nc,)
        The DEM window, row-major, NaN = void.
    nr, nc : int
        Window shape.
    frac_r, frac_c : ndarray of float32, shape (R,)
        Fractional row and column of each ray's origin within its pixel.
    off_r, off_c : ndarray of int64, shape (R,)
        Whole row and column of each ray's origin pixel in the window.
    drow, dcol : ndarray of float32, shape (R,)
        Row and column increment per step along each ray.
    K : int
        Samples per ray (steps 1..K).
    k_max : ndarray of int64, shape (R,)
        Samples wanted on each ray (the rest are NaN).

    Returns
    -------
    ndarray of float32, shape (R, K)
        NaN where a neighbour pixel is void or the sample lies outside the
        window.
    """
    out = np.empty((frac_r.size, int(K)), dtype=_F32)
    _bilinear_rows(flat, int(nr), int(nc), frac_r, frac_c, off_r, off_c, drow, dcol, int(K), k_max, out)
    return out


# ---------------------------------------------------------------------------
# Robust lines on windows of profile rows
# ---------------------------------------------------------------------------
# Layout: the windows of a group of rows are the columns of (w, g) float32 matrices (ZT samples,
# MT 1/0 usable, WT weights), as in the array code, so every loop over a window's samples runs
# over all rows at once (vectorised across rows) while each row's sums still accumulate sample by
# sample, in the array code's order.


@_jit
def _solve(sw, sd, sdd, sz, sdz):  # pragma: no cover
    det = sw * sdd - sd * sd
    if sw > 1.5 and det > 1e-9 * max(sw * sdd, 1e-30):
        b = (sw * sdz - sd * sz) / det
        return (sz - b * sd) / sw, b
    return np.nan, np.nan


@_jit
def _f32_finite(v):  # pragma: no cover
    return np.float32(v) if np.isfinite(v) else np.float32(0.0)


@_jit
def _lines32(a, b):  # pragma: no cover
    """float32 intercepts and slopes (0 where not finite), as the array code uses them."""
    af = np.empty(a.size, dtype=np.float32)
    bf = np.empty(a.size, dtype=np.float32)
    for i in range(a.size):
        af[i] = _f32_finite(a[i])
        bf[i] = _f32_finite(b[i])
    return af, bf


@_jit
def _load(Z0, valid, rows, s, L, init_a, init_b, has_init, ZT, MT, base_a, base_b, cnt):  # pragma: no cover
    """Copy each row's window into a column (warm start applied, zero where unusable)."""
    K = Z0.shape[1]
    w = ZT.shape[0]
    one = np.float32(1.0)
    zero = np.float32(0.0)
    for i in range(rows.size):
        r = rows[i]
        s0 = s[i]
        c = 0
        for j in range(w):
            col = min(s0 + j, K - 1)
            if j < L[i] and valid[r, col]:
                ZT[j, i] = Z0[r, col]
                MT[j, i] = one
                c += 1
            else:
                ZT[j, i] = zero
                MT[j, i] = zero
        cnt[i] = c
        base_a[i] = 0.0
        base_b[i] = 0.0
        if has_init and np.isfinite(init_a[i]) and np.isfinite(init_b[i]):
            # work on the samples minus the starting line (small numbers keep float32 sums exact)
            base_a[i] = init_a[i] + init_b[i] * float(s0)
            base_b[i] = init_b[i]
            af = _f32_finite(base_a[i])
            bf = _f32_finite(base_b[i])
            for j in range(w):
                ZT[j, i] = (ZT[j, i] - (np.float32(j + 1) * bf + af)) * MT[j, i]


@_jit
def _weighted_sums(ZT, WT, S):  # pragma: no cover
    """Normal-equation sums of every column, weights ``WT`` (float32, sample by sample) into ``S``."""
    S[:] = 0.0
    for j in range(ZT.shape[0]):
        dj = np.float32(j + 1)
        for i in range(ZT.shape[1]):
            wj = WT[j, i]
            t = wj * dj
            S[0, i] += wj
            S[1, i] += t
            S[2, i] += t * dj
            t = wj * ZT[j, i]
            S[3, i] += t
            S[4, i] += t * dj


@_jit
def _abs_residuals(ZT, MT, a, b, A):  # pragma: no cover
    """|residual| of every row about its line into A (g, w); +inf where no sample (sorted last)."""
    w, g = ZT.shape
    af, bf = _lines32(a, b)
    inf = np.float32(np.inf)
    zero = np.float32(0.0)
    for j in range(w):
        dj = np.float32(j + 1)
        for i in range(g):
            r = abs(ZT[j, i] - (dj * bf[i] + af[i]))
            A[i, j] = r if MT[j, i] != zero else inf


@_jit
def _weight(r, inv, loss):  # pragma: no cover
    """Tukey (loss 1) or Huber (loss 2) weight of a residual, in the array code's float32 steps."""
    one = np.float32(1.0)
    zero = np.float32(0.0)
    u = r * inv
    if loss == 1:
        u = u * u
        u = one - u
        u = u if u > zero else zero
        return u * u
    u = abs(u)
    u = u if u > one else one
    return one / u


@_jit
def _reweight(ZT, MT, a, b, inv, loss, WT, S):  # pragma: no cover
    """Weights of every row's samples about its line and their normal-equation sums (all rows at once)."""
    w, g = ZT.shape
    af, bf = _lines32(a, b)
    for j in range(w):
        dj = np.float32(j + 1)
        for i in range(g):
            WT[j, i] = _weight(ZT[j, i] - (dj * bf[i] + af[i]), inv[i], loss) * MT[j, i]
    _weighted_sums(ZT, WT, S)


@_jit
def _converge(ZT, MT, WT, act, a, b, inv, loss, span, m1, m2, S, it0, cap, tol, scale):  # pragma: no cover
    """Reweight each listed row at its held scale, pass after pass, until its line stops moving."""
    w = ZT.shape[0]
    z = np.empty(w, dtype=np.float32)
    m = np.empty(w, dtype=np.float32)
    W = np.empty(w, dtype=np.float32)
    for k in range(act.size):
        i = act[k]
        for j in range(w):
            z[j] = ZT[j, i]
            m[j] = MT[j, i]
        it = it0
        while True:
            # NaN movement: nothing to gain
            if not (it < cap and m1[i] == m1[i] and m2[i] == m2[i] and max(m1[i], m2[i]) >= tol * scale[i]):
                break
            af = _f32_finite(a[i])
            bf = _f32_finite(b[i])
            s0 = np.float32(0.0)
            s1 = np.float32(0.0)
            s2 = np.float32(0.0)
            s3 = np.float32(0.0)
            s4 = np.float32(0.0)
            for j in range(w):
                dj = np.float32(j + 1)
                wj = _weight(z[j] - (dj * bf + af), inv[i], loss) * m[j]
                W[j] = wj
                t = wj * dj
                s0 += wj
                s1 += t
                s2 += t * dj
                t = wj * z[j]
                s3 += t
                s4 += t * dj
            S[0, i] = s0
            S[1, i] = s1
            S[2, i] = s2
            S[3, i] = s3
            S[4, i] = s4
            a_new, b_new = _solve(np.float64(s0), np.float64(s1), np.float64(s2), np.float64(s3), np.float64(s4))
            da = a_new - a[i]
            db = b_new - b[i]
            m1[i] = abs(da + db * 1.0)
            m2[i] = abs(da + db * span[i])
            if np.isfinite(a_new):
                a[i] = a_new
                b[i] = b_new
            for j in range(w):
                WT[j, i] = W[j]
            it += 1


@_jit
def _update(S, a, b, span, m1, m2):  # pragma: no cover
    """Solve every row's line from its sums; keep the new line where it is finite."""
    for i in range(a.size):
        a_new, b_new = _solve(np.float64(S[0, i]), np.float64(S[1, i]), np.float64(S[2, i]),
                              np.float64(S[3, i]), np.float64(S[4, i]))
        da = a_new - a[i]
        db = b_new - b[i]
        m1[i] = abs(da + db * 1.0)
        m2[i] = abs(da + db * span[i])
        if np.isfinite(a_new):
            a[i] = a_new
            b[i] = b_new


@_jit
def _finish_sums(ZT, WT, a, b, autocorr, F):  # pragma: no cover
    """Weighted residual sum of squares and lag-1 products of weighted residuals and of weights."""
    w, g = ZT.shape
    af, bf = _lines32(a, b)
    ssr = np.zeros(g, dtype=np.float32)
    lag = np.zeros(g, dtype=np.float32)
    wlag = np.zeros(g, dtype=np.float32)
    prev = np.zeros(g, dtype=np.float32)
    for j in range(w):
        dj = np.float32(j + 1)
        for i in range(g):
            r = ZT[j, i] - (dj * bf[i] + af[i])
            wr = WT[j, i] * r
            ssr[i] += r * wr
            if j > 0:
                lag[i] += wr * prev[i]
                wlag[i] += WT[j, i] * WT[j - 1, i]
            prev[i] = wr
    for i in range(g):
        F[0, i] = ssr[i]
        F[1, i] = lag[i] if autocorr else 0.0
        F[2, i] = wlag[i] if autocorr else 1.0


@_jit
def _line_stats(S, F, a, b, scale, base_a, base_b, off, scale_floor, n, sel, out):  # pragma: no cover
    """Compute standard errors and fit statistics (as faultmap.throw.robust_lines._line_stats), in absolute units."""
    for i in range(a.size):
        sw = np.float64(S[0, i])
        sd = np.float64(S[1, i])
        sdd = np.float64(S[2, i])
        ssr = np.float64(F[0, i])
        lag = np.float64(F[1, i])
        wlag = np.float64(F[2, i])
        det = sw * sdd - sd * sd
        rms = np.sqrt(ssr / sw)
        s2 = ssr / max(sw - 2.0, 1.0)
        rho = 0.0
        if ssr > 0:
            rho = lag / ssr * sw / max(wlag, 1e-12)
        rho = min(max(rho, 0.0), 0.92)
        infl = (1.0 + rho) / (1.0 - rho)
        var_a = s2 * sdd / det * infl
        var_b = s2 * sw / det * infl
        cov_ab = -s2 * sd / det * infl
        sc = scale[i]
        if sc != sc:
            sc = max(rms if np.isfinite(rms) else scale_floor, scale_floor)
        o = off[i]
        bb = b[i] + base_b[i]
        aa = a[i] + base_a[i] - bb * o
        var_a = var_a - 2.0 * o * cov_ab + o * o * var_b
        cov_ab = cov_ab - o * var_b
        if not (sw > 1.5) or not (det > 0):
            aa = bb = var_a = var_b = cov_ab = rms = ssr = np.nan
        k = sel[i]
        out[0, k] = aa
        out[1, k] = bb
        out[2, k] = var_a
        out[3, k] = var_b
        out[4, k] = cov_ab
        out[5, k] = sc
        out[6, k] = rms
        out[7, k] = n[i]
        out[8, k] = sw
        out[9, k] = ssr


#: Windows whose lengths differ by under this factor share one group of columns.
_GROWTH = 1.25
#: Largest group, samples (bounded memory; the caller's matrices are already chunked).
_GROUP_SAMPLES = 1 << 19


def _groups(L):
    """Rows in order of window length, cut into groups of similar length and bounded size."""
    order = np.argsort(L, kind="stable")
    Ls = L[order]
    out = []
    i, n = 0, Ls.size
    while i < n:
        w = max(int(Ls[i]), 2)
        j = int(np.searchsorted(Ls, int(math.floor(w * _GROWTH)), side="right"))
        wg = max(int(Ls[j - 1]), 2)
        per = max(1, _GROUP_SAMPLES // wg)
        for a in range(i, j, per):
            out.append(order[a : min(j, a + per)])
        i = j
    return out


@_jit
def _group_begin(Z0, valid, rows, s, L, ia, ib, has_init, w):  # pragma: no cover
    """Load a group's windows, count their samples and fit ordinary least-squares lines (warm start applied)."""
    g = rows.size
    ZT = np.empty((w, g), dtype=np.float32)
    MT = np.empty((w, g), dtype=np.float32)
    base_a = np.empty(g)
    base_b = np.empty(g)
    cnt = np.empty(g, dtype=np.int64)
    _load(Z0, valid, rows, s, L, ia, ib, has_init, ZT, MT, base_a, base_b, cnt)
    S = np.empty((5, g), dtype=np.float32)
    _weighted_sums(ZT, MT, S)
    n = np.empty(g)
    span = np.empty(g)
    a = np.full(g, np.nan)
    b = np.full(g, np.nan)
    m1 = np.empty(g)
    m2 = np.empty(g)
    for i in range(g):
        n[i] = np.rint(np.float64(S[0, i]))
        span[i] = np.float64(max(L[i], 1))
    _update(S, a, b, span, m1, m2)  # ordinary least squares
    if has_init:
        for i in range(g):
            if np.isfinite(ia[i]) and np.isfinite(ib[i]):
                a[i] = 0.0  # the samples are relative to the starting line
                b[i] = 0.0
    return ZT, MT, base_a, base_b, cnt, S, n, span, a, b, m1, m2


@_jit
def _scale_pass(ZT, MT, A, cnt, floor, tuning, code, a, b, WT, S, span, m1, m2, scale, inv):  # pragma: no cover
    """From each row's sorted |residuals| (A): the normalised MAD scale, then one reweighting pass."""
    for i in range(cnt.size):
        k = max((cnt[i] - 1) // 2, 0)
        med = np.float64(A[i, k]) if cnt[i] > 0 else 0.0
        x = 1.4826 * med
        sc = x if (x != x or x >= floor) else floor  # numpy.maximum: NaN wins
        scale[i] = sc
        inv[i] = np.float32(1.0 / (tuning * sc))
    _reweight(ZT, MT, a, b, inv, code, WT, S)
    _update(S, a, b, span, m1, m2)


@_jit
def _group_end(ZT, MT, WT, a, b, inv, code, span, m1, m2, S, n_it, cap, tol, scale, autocorr):  # pragma: no cover
    """Rows whose line still moves converge at their held scale; the residual sums of every row."""
    g = a.size
    c = 0
    for i in range(g):
        mm = np.nan if (m1[i] != m1[i] or m2[i] != m2[i]) else max(m1[i], m2[i])
        if mm >= tol * scale[i]:
            c += 1
    if c and n_it < cap:
        act = np.empty(c, dtype=np.int64)
        c = 0
        for i in range(g):
            mm = np.nan if (m1[i] != m1[i] or m2[i] != m2[i]) else max(m1[i], m2[i])
            if mm >= tol * scale[i]:
                act[c] = i
                c += 1
        _converge(ZT, MT, WT, act, a, b, inv, code, span, m1, m2, S, n_it, cap, tol, scale)
    F = np.empty((3, g), dtype=np.float32)
    _finish_sums(ZT, WT, a, b, autocorr, F)
    return F


def _fit_group(Z0, valid, rows, s, L, ia, ib, has_init, code, tuning, n_it, cap, tol, autocorr, floor, out, sel):
    g = rows.size
    w = max(int(L.max()), 2)
    ZT, MT, base_a, base_b, cnt, S, n, span, a, b, m1, m2 = _group_begin(Z0, valid, rows, s, L, ia, ib, has_init, w)
    off = s.astype(float)
    if code == 0 or n_it <= 0:
        scale = np.full(g, np.nan)
        F = np.empty((3, g), dtype=_F32)
        if has_init:
            a[:] = np.nan
            b[:] = np.nan
            _update(S, a, b, span, m1, m2)
        _finish_sums(ZT, MT, a, b, autocorr, F)
        _line_stats(S, F, a, b, scale, base_a, base_b, off, float(floor), n, sel, out)
        return
    WT = np.empty((w, g), dtype=_F32)
    A = np.empty((g, w), dtype=_F32)
    scale = np.empty(g)
    inv = np.empty(g, dtype=_F32)
    for _ in range(n_it):
        # scale: normalised MAD about the current lines (numpy's vectorised row sort), re-estimated
        # at each of the first passes, then held
        _abs_residuals(ZT, MT, a, b, A)
        A.sort(axis=1)
        _scale_pass(ZT, MT, A, cnt, float(floor), float(tuning), code, a, b, WT, S, span, m1, m2, scale, inv)
    # rows whose line still moves go on at their held scale
    F = _group_end(ZT, MT, WT, a, b, inv, code, span, m1, m2, S, n_it, cap, float(tol), scale, autocorr)
    _line_stats(S, F, a, b, scale, base_a, base_b, off, float(floor), n, sel, out)


def robust_windows(
    Z0, valid, rows, s, L, *, init, loss, tuning, iterations, max_iterations, tol, autocorr, scale_floor
):
    """Robust lines of the samples ``s .. s + L - 1`` (columns) of some rows of ``Z0`` (compiled).

    The compiled form of :func:`faultmap.throw.robust_lines._irls` on the windows
    of :func:`faultmap.throw.robust_lines._fit_windows` (same arguments, same
    results); see :func:`faultmap.throw.robust_lines.robust_line_fits` for the
    method. The passes that re-estimate the residual scale sort each
    group's absolute residuals row by row with numpy (its vectorised sort is
    far faster than any per-row selection).

    Returns
    -------
    dict of ndarray, shape (len(rows),)
        ``a``, ``b``, ``var_a``, ``var_b``, ``cov_ab``, ``scale``, ``rms``,
        ``n`` (int64), ``inliers``, ``ssr``.
    """
    rows = np.ascontiguousarray(rows, dtype=np.int64)
    s = np.ascontiguousarray(s, dtype=np.int64)
    L = np.ascontiguousarray(L, dtype=np.int64)
    nr = rows.size
    has_init = init is not None
    if has_init:
        ia = np.ascontiguousarray(init[0], dtype=float)
        ib = np.ascontiguousarray(init[1], dtype=float)
    else:
        ia = ib = np.zeros(nr)
    out = np.empty((10, nr))
    for sel in _groups(L):
        _fit_group(
            Z0, valid, rows[sel], s[sel], L[sel], ia[sel], ib[sel], has_init, LOSS_CODES[loss], float(tuning),
            int(iterations), int(max_iterations), float(tol), bool(autocorr), float(scale_floor), out, sel,
        )
    keys = ("a", "b", "var_a", "var_b", "cov_ab", "scale", "rms", "n", "inliers", "ssr")
    res = {k: out[j] for j, k in enumerate(keys)}
    res["n"] = res["n"].astype(np.int64)
    return res


# ---------------------------------------------------------------------------
# Scarp edges from the profile gradients
# ---------------------------------------------------------------------------
@_jit
def _edges(g, bg, zf, scale, up, lim, rows, n, m_run, grad_frac, found, first):  # pragma: no cover
    K = g.shape[1]
    half = np.float32(0.5)
    gf = np.float32(grad_frac)
    for i in range(n):
        ra = rows[i]
        rb = rows[i + n]
        # the jump across the trace and the steepest excess gradient near it, either side
        cross = (zf[ra] - zf[rb]) * half * np.float32(up[i])
        near = np.float32(np.nan)
        for r, k in ((ra, i), (rb, i + n)):
            u = np.float32(up[k])
            for j in range(1, min(6, K)):
                e = (g[r, j] - bg[r]) * u
                if e == e and (near != near or e > near):
                    near = e
        c0 = cross if cross == cross else np.float32(0.0)
        n0 = near if near == near else np.float32(0.0)
        peak = c0 if c0 >= n0 else n0
        for r, k in ((ra, i), (rb, i + n)):
            u = np.float32(up[k])
            a = np.float64(gf * peak)
            b = 1.06 * scale[k]
            thr = np.float32(np.nan) if (a != a or b != b) else np.float32(a if a >= b else b)
            # first sample from which m_run consecutive samples are undisturbed, within the usable part
            run = 0
            found[k] = False
            first[k] = 1.0
            for j in range(K):
                e = (g[r, j] - bg[r]) * u
                run = run + 1 if e < thr else 0
                if run >= m_run:
                    j0 = j - m_run + 1
                    if float(j0 + m_run) <= lim[k]:
                        found[k] = True
                        first[k] = float(j0 + 1)
                    break


@_jit
def _gradients(Zc, lim, kr, g, bg, buf):  # pragma: no cover
    R2, K = Zc.shape
    nan = np.float32(np.nan)
    q = np.float32(0.25)
    h = np.float32(0.5)
    for r in range(R2):
        g[r, 0] = nan
        g[r, K - 1] = nan
        for j in range(2, K - 2):
            g[r, j] = (Zc[r, j + 2] - Zc[r, j - 2]) * q
        g[r, 1] = (Zc[r, 2] - Zc[r, 0]) * h
        g[r, K - 2] = (Zc[r, K - 1] - Zc[r, K - 3]) * h
        k = kr[r]
        if k < K and k >= 3:
            # a row shorter than the matrix ends as if the matrix ended there
            g[r, k - 2] = (Zc[r, k - 1] - Zc[r, k - 3]) * h
        # background slope: median of every second gradient within the usable part of the row
        c = 0
        for j in range(1, K, 2):
            v = g[r, j]
            if np.isfinite(v) and np.float64(j + 1) <= lim[r]:
                buf[c] = v
                c += 1
        if c == 0:
            bg[r] = np.float32(0.0)
            continue
        _sort_small(buf, c)
        med = 0.5 * (np.float64(buf[(c - 1) // 2]) + np.float64(buf[c // 2]))
        bg[r] = np.float32(med) if np.isfinite(med) else np.float32(0.0)


def profile_gradients(Zc, lim, row_samples=None):
    """Compile :func:`faultmap.throw.scarp_fit._profile_gradients`: gradients ``g`` and background slopes ``bg``."""
    R2, K = Zc.shape
    kr = np.full(R2, K, dtype=np.int64) if row_samples is None else np.ascontiguousarray(row_samples, dtype=np.int64)
    g = np.empty((R2, K), dtype=_F32)
    bg = np.empty(R2, dtype=_F32)
    _gradients(
        np.ascontiguousarray(Zc, dtype=_F32), np.ascontiguousarray(lim, dtype=float), kr, g, bg,
        np.empty(max(K // 2 + 1, 1), dtype=_F32),
    )
    return g, bg


def scarp_edges(g, bg, z_first, scale, up, lim, rows, n, m_run, grad_frac=0.25):
    """Compile :func:`faultmap.throw.scarp_fit._scarp_edges` on rows ``rows`` (n stations, - sides first) of ``g``."""
    found = np.zeros(2 * n, dtype=bool)
    first = np.ones(2 * n)
    _edges(
        g, bg, z_first, np.ascontiguousarray(scale, dtype=float), np.ascontiguousarray(up, dtype=np.float32),
        np.ascontiguousarray(lim, dtype=float), np.ascontiguousarray(rows, dtype=np.int64), int(n), int(m_run),
        float(grad_frac), found, first,
    )
    return found, first


# ---------------------------------------------------------------------------
# Pairs of overlapping boxes (profiles x trace segments)
# ---------------------------------------------------------------------------
@_jit
def _cells(b, k, x0, y0, inv_c, ncx, ncy):  # pragma: no cover
    """First and last grid column and row that box ``b[k]`` touches (clamped to the grid)."""
    cx0 = min(max(int(math.floor((b[k, 0] - x0) * inv_c)), 0), ncx - 1)
    cx1 = min(max(int(math.floor((b[k, 2] - x0) * inv_c)), 0), ncx - 1)
    cy0 = min(max(int(math.floor((b[k, 1] - y0) * inv_c)), 0), ncy - 1)
    cy1 = min(max(int(math.floor((b[k, 3] - y0) * inv_c)), 0), ncy - 1)
    return cx0, cx1, cy0, cy1


@_jit
def _grid_count(b, x0, y0, inv_c, ncx, ncy, counts):  # pragma: no cover
    for k in range(b.shape[0]):
        cx0, cx1, cy0, cy1 = _cells(b, k, x0, y0, inv_c, ncx, ncy)
        for cy in range(cy0, cy1 + 1):
            for cx in range(cx0, cx1 + 1):
                counts[cy * ncx + cx + 1] += 1


@_jit
def _grid_fill(b, x0, y0, inv_c, ncx, ncy, start, items):  # pragma: no cover
    fill = start[:-1].copy()
    for k in range(b.shape[0]):
        cx0, cx1, cy0, cy1 = _cells(b, k, x0, y0, inv_c, ncx, ncy)
        for cy in range(cy0, cy1 + 1):
            for cx in range(cx0, cx1 + 1):
                c = cy * ncx + cx
                items[fill[c]] = k
                fill[c] += 1


@_jit
def _grid_query(q, b, x0, y0, inv_c, ncx, ncy, start, items, out_i, out_j, count_only):  # pragma: no cover
    seen = np.full(b.shape[0], -1, dtype=np.int64)
    n = 0
    for i in range(q.shape[0]):
        cx0, cx1, cy0, cy1 = _cells(q, i, x0, y0, inv_c, ncx, ncy)
        for cy in range(cy0, cy1 + 1):
            for cx in range(cx0, cx1 + 1):
                c = cy * ncx + cx
                for t in range(start[c], start[c + 1]):
                    j = items[t]
                    if seen[j] == i:
                        continue
                    seen[j] = i
                    if q[i, 0] <= b[j, 2] and b[j, 0] <= q[i, 2] and q[i, 1] <= b[j, 3] and b[j, 1] <= q[i, 3]:
                        if not count_only:
                            out_i[n] = i
                            out_j[n] = j
                        n += 1
    return n


def box_pairs(q, b):
    """All pairs (i, j) of query box ``q[i]`` and box ``b[j]`` that intersect (touching counts).

    The same pairs as a ``shapely.STRtree`` of the ``b`` boxes queried with
    the ``q`` boxes (envelopes only, no predicate), from a uniform grid of
    cells about the size of the median query box (compiled).

    Parameters
    ----------
    q, b : ndarray, shape (n, 4) and (m, 4)
        Boxes as (xmin, ymin, xmax, ymax), finite.

    Returns
    -------
    i, j : ndarray of int64
        Indices into ``q`` and ``b``, sorted by ``i`` then in no set order.
    """
    q = np.ascontiguousarray(q, dtype=float)
    b = np.ascontiguousarray(b, dtype=float)
    if q.shape[0] == 0 or b.shape[0] == 0:
        return np.zeros(0, dtype=np.int64), np.zeros(0, dtype=np.int64)
    x0 = float(min(q[:, 0].min(), b[:, 0].min()))
    y0 = float(min(q[:, 1].min(), b[:, 1].min()))
    x1 = float(max(q[:, 2].max(), b[:, 2].max()))
    y1 = float(max(q[:, 3].max(), b[:, 3].max()))
    ext = np.maximum(q[:, 2] - q[:, 0], q[:, 3] - q[:, 1])
    span = max(x1 - x0, y1 - y0, 1e-9)
    # cells about the median query box, at most ~4 million of them
    c = max(float(np.median(ext)), span / 2048.0, 1e-9)
    ncx = int(min((x1 - x0) / c, 4096)) + 1
    ncy = int(min((y1 - y0) / c, 4096)) + 1
    inv_c = 1.0 / c
    counts = np.zeros(ncx * ncy + 1, dtype=np.int64)
    _grid_count(b, x0, y0, inv_c, ncx, ncy, counts)
    start = np.cumsum(counts)
    items = np.empty(int(start[-1]), dtype=np.int64)
    _grid_fill(b, x0, y0, inv_c, ncx, ncy, start, items)
    dummy = np.zeros(0, dtype=np.int64)
    n = _grid_query(q, b, x0, y0, inv_c, ncx, ncy, start, items, dummy, dummy, True)
    oi = np.empty(n, dtype=np.int64)
    oj = np.empty(n, dtype=np.int64)
    _grid_query(q, b, x0, y0, inv_c, ncx, ncy, start, items, oi, oj, False)
    return oi, oj


# ---------------------------------------------------------------------------
# Voids of a DEM window
# ---------------------------------------------------------------------------
@_jit
def _voids_to_nan(flat, v0, v1, v2, v3, v4, v5):  # pragma: no cover
    nan = np.float32(np.nan)
    inf = np.float32(np.inf)
    for k in range(flat.size):
        v = flat[k]
        # branch-free, so the loop vectorises; a NaN void value never matches
        bad = (abs(v) == inf) | (v == v0) | (v == v1) | (v == v2) | (v == v3) | (v == v4) | (v == v5)
        flat[k] = nan if bad else v


#: Most void values :func:`voids_to_nan` takes at once.
MAX_VOIDS = 6


def voids_to_nan(arr, voids):
    """Set void values and +-inf of a float32 array to NaN, in place, in one pass (compiled).

    Parameters
    ----------
    arr : ndarray of float32, C-contiguous, writeable
    voids : sequence of float
        Up to :data:`MAX_VOIDS` void values, compared as float32 (the file's
        own type); NaN entries are ignored (NaN stays NaN anyway).
    """
    v = [np.float32(x) for x in voids if not np.isnan(x)]
    if len(v) > MAX_VOIDS:
        raise ValueError(f"at most {MAX_VOIDS} void values, got {len(v)}")
    v += [np.float32(np.nan)] * (MAX_VOIDS - len(v))
    _voids_to_nan(arr.reshape(-1), *v)


# ---------------------------------------------------------------------------
# Along-strike smoothing: Hampel identifier and local regression
# ---------------------------------------------------------------------------
@_jit
def _sort_small(buf, c):  # pragma: no cover
    """Sort buf[:c] in place by insertion (short rows: measured faster than a selection up to ~50 values)."""
    for a in range(1, c):
        v = buf[a]
        b = a - 1
        while b >= 0 and buf[b] > v:
            buf[b + 1] = buf[b]
            b -= 1
        buf[b + 1] = v


@_jit
def _hampel(group, T, se, out):  # pragma: no cover
    """Hampel identifier (as faultmap.throw.along_strike._hampel): running median of 5 within the group, 3 deviations."""
    n = T.size
    buf = np.empty(5)
    dev = np.empty(5)
    big = 1.7976931348623157e308
    for i in range(n):
        c = 0
        for o in range(-2, 3):
            j = i + o
            if j < 0 or j >= n or group[j] != group[i]:
                continue
            if np.isfinite(T[j]):
                buf[c] = T[j]
                c += 1
        if c < 4 or not np.isfinite(T[i]):
            out[i] = False
            continue
        _sort_small(buf, c)
        med = 0.5 * (buf[(c - 1) // 2] + buf[c // 2])
        for k in range(c):
            dev[k] = abs(buf[k] - med)
        _sort_small(dev, c)
        mad = 1.4826 * (0.5 * (dev[(c - 1) // 2] + dev[c // 2]))
        e = se[i]
        if e != e:
            e = 0.0
        elif e > big:
            e = big
        elif e < -big:
            e = -big
        tol = 3.0 * np.sqrt(mad * mad + e * e)
        out[i] = abs(T[i] - med) > tol


@_jit
def _solve_poly(s0, s1, s2, s3, s4, b0, b1, b2, nl, nr, coef, crow):  # pragma: no cover
    """Local polynomial at x = 0 from its weighted sums (as faultmap.throw.along_strike._solve_local, one station).

    Writes the coefficients into ``coef`` (3) and the first row of the inverse
    moment matrix into ``crow`` (3); returns (okq, okl, empty).
    """
    quad = nl >= 2 and nr >= 2
    lin = (not quad) and (nl + nr >= 2)
    c00 = s2 * s4 - s3 * s3
    c01 = s2 * s3 - s1 * s4
    c02 = s1 * s3 - s2 * s2
    det = s0 * c00 + s1 * c01 + s2 * c02
    okq = quad and abs(det) > 1e-9 * abs(s0 * c00)
    det2 = s0 * s2 - s1 * s1
    okl = (lin or (quad and not okq)) and abs(det2) > 1e-9 * abs(s0 * s2)
    okc = (not okq) and (not okl) and s0 > 0
    iq = 1.0 / det if okq else 0.0
    il = 1.0 / det2 if okl else 0.0
    ic = 1.0 / s0 if okc else 0.0
    r00 = c00 * iq + s2 * il + ic
    r01 = c01 * iq - s1 * il
    r02 = c02 * iq
    c11 = s0 * s4 - s2 * s2
    c12 = s1 * s2 - s0 * s3
    c22 = s0 * s2 - s1 * s1
    r10 = c01 * iq - s1 * il
    r11 = c11 * iq + s0 * il
    r12 = c12 * iq
    r20 = c02 * iq
    r21 = c12 * iq
    r22 = c22 * iq
    a0 = r00 * b0 + r01 * b1 + r02 * b2
    a1 = r10 * b0 + r11 * b1 + r12 * b2
    a2 = r20 * b0 + r21 * b1 + r22 * b2
    coef[0] = a0 if np.isfinite(a0) else 0.0
    coef[1] = a1 if np.isfinite(a1) else 0.0
    coef[2] = a2 if np.isfinite(a2) else 0.0
    crow[0] = r00 if np.isfinite(r00) else 0.0
    crow[1] = r01 if np.isfinite(r01) else 0.0
    crow[2] = r02 if np.isfinite(r02) else 0.0
    return okq, okl, not (s0 > 0)


@_jit
def _neighbours(i, group, J):  # pragma: no cover
    """Kernel positions q0 .. q1 - 1 (station i - J + q) that exist and share station i's group (contiguous)."""
    n = group.size
    q0 = max(J - i, 0)
    q1 = min(2 * J + 1, n - i + J)
    while group[i + q0 - J] != group[i]:
        q0 += 1
    while group[i + q1 - 1 - J] != group[i]:
        q1 -= 1
    return q0, q1


@_jit
def _local_sums(i, q0, q1, J, Vz, base, Kcol, x):  # pragma: no cover
    """Weighted sums of the local fit at station i with kernel weights Kcol (2J + 1), over q0 .. q1 - 1."""
    s0 = s1 = s2 = s3 = s4 = 0.0
    b0 = b1 = b2 = 0.0
    nl = 0
    nr = 0
    for q in range(q0, q1):
        j = i + q - J
        w = base[j] * Kcol[q]
        if w == 0.0:
            continue
        xo = x[q]
        x2 = xo * xo
        s0 += w
        s1 += w * xo
        s2 += w * x2
        s3 += w * x2 * xo
        s4 += w * x2 * x2
        wv = w * Vz[j]
        b0 += wv
        b1 += wv * xo
        b2 += wv * x2
        if w > 0.0:
            if xo < 0:
                nl += 1
            elif xo > 0:
                nr += 1
    return s0, s1, s2, s3, s4, b0, b1, b2, nl, nr


@_jit
def _cv_choice(group, Tc, sec, Vz, base, Kcv, n_g, cv_tie):  # pragma: no cover
    """Cross-validation score of every candidate width per group; index of the width each group takes."""
    n = Tc.size
    m = Kcv.shape[1]
    J = (Kcv.shape[0] - 1) // 2
    x = np.arange(-J, J + 1).astype(np.float64)
    cnt = np.zeros((n_g, m))
    m1 = np.zeros((n_g, m))
    m2 = np.zeros((n_g, m))
    coef = np.empty(3)
    crow = np.empty(3)
    for i in range(n):
        g = group[i]
        q0, q1 = _neighbours(i, group, J)
        for k in range(m):
            s0, s1, s2, s3, s4, b0, b1, b2, nl, nr = _local_sums(i, q0, q1, J, Vz, base, Kcv[:, k], x)
            okq, okl, empty = _solve_poly(s0, s1, s2, s3, s4, b0, b1, b2, nl, nr, coef, crow)
            if empty:
                continue
            z = (Tc[i] - coef[0]) / sec[i]
            z2 = z * z
            if np.isfinite(z2):
                cnt[g, k] += 1.0
                m1[g, k] += z2
                m2[g, k] += z2 * z2
    best = np.empty(n_g, dtype=np.int64)
    sc = np.empty(m)
    se_sc = np.empty(m)
    for g in range(n_g):
        anyfin = False
        for k in range(m):
            c = cnt[g, k]
            a = m1[g, k] / c if c > 0 else np.nan
            b = m2[g, k] / c if c > 0 else np.nan
            v = a * a
            se_sc[k] = np.sqrt(max(b - v, 0.0) / max(c - 1.0, 1.0)) if c > 0 else np.nan
            sc[k] = a if np.isfinite(a) else np.inf
            anyfin = anyfin or np.isfinite(a)
        if not anyfin:
            best[g] = m // 2
            continue
        imin = 0
        for k in range(1, m):
            if sc[k] < sc[imin]:
                imin = k
        e = se_sc[imin]
        e = e if np.isfinite(e) else 0.0
        limit = sc[imin] + max(cv_tie * e, 1e-9 * abs(sc[imin]))
        b_k = 0
        for k in range(m):
            if sc[k] <= limit:
                b_k = k
        best[g] = b_k
    return best


@_jit
def _final_fit(group, Vz, E2, base, Kf, pick, Ts, se_s, coef_out):  # pragma: no cover
    """Local fit at every station with its group's kernel column, its value and standard error."""
    n = Vz.size
    J = (Kf.shape[0] - 1) // 2
    x = np.arange(-J, J + 1).astype(np.float64)
    coef = np.empty(3)
    crow = np.empty(3)
    for i in range(n):
        Kcol = Kf[:, pick[i]]
        q0, q1 = _neighbours(i, group, J)
        s0, s1, s2, s3, s4, b0, b1, b2, nl, nr = _local_sums(i, q0, q1, J, Vz, base, Kcol, x)
        okq, okl, empty = _solve_poly(s0, s1, s2, s3, s4, b0, b1, b2, nl, nr, coef, crow)
        coef_out[i, 0] = coef[0]
        coef_out[i, 1] = coef[1]
        coef_out[i, 2] = coef[2]
        if empty:
            Ts[i] = np.nan
            se_s[i] = np.nan
            continue
        Ts[i] = coef[0]
        # propagated station errors, inflated by the local reduced chi-square (faultmap.throw.along_strike._local_stats)
        var = 0.0
        chi = 0.0
        sk = 0.0
        sk2 = 0.0
        for q in range(q0, q1):
            j = i + q - J
            w = base[j] * Kcol[q]
            if w == 0.0:
                continue
            xo = x[q]
            lw = (crow[0] + crow[1] * xo + crow[2] * (xo * xo)) * w
            var += lw * lw * E2[j]
            kw = w * E2[j]
            r = Vz[j] - (coef[0] + coef[1] * xo + coef[2] * (xo * xo))
            chi += w * r * r
            sk += kw
            sk2 += kw * kw
        neff = sk * sk / sk2 if sk2 != 0.0 else np.nan
        p = 3.0 if okq else (2.0 if okl else 1.0)
        red = chi / sk * neff / (neff - p) if (neff - p > 0.5) else 1.0
        if not (red != red) and red < 1.0:
            red = 1.0
        se_s[i] = np.sqrt(var * red)


def smooth_stations(group, Tc, sec, Kcv, Kf, n_g, cv_tie):
    """Local-regression smoothing of station values within groups (compiled).

    The compiled form of the cross-validated local regression of
    :func:`faultmap.throw.along_strike._smooth_chunk` (after its Hampel step):
    ``Kcv`` (2J + 1, m) holds the candidate kernels with the stations near
    the predicted one left out, ``Kf`` (2J + 1, m) the same kernels for the
    final fit; with ``Kcv`` None every group takes column 0 of ``Kf``. Sums
    run station by station (the array code uses matrix products), so the
    results agree with it to rounding (``tests/throw/test_kernels.py``).

    Returns
    -------
    Ts, se_s : ndarray (n,)
    pick : ndarray of int (n,)
        Kernel column used at each station.
    coef : ndarray (n, 3)
    """
    group = np.ascontiguousarray(group, dtype=np.int64)
    Tc = np.ascontiguousarray(Tc, dtype=np.float64)
    sec = np.ascontiguousarray(sec, dtype=np.float64)
    n = Tc.size
    fin = np.isfinite(Tc) & np.isfinite(sec)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        E2 = np.where(fin, sec * sec, 0.0)
        base = np.where(fin, 1.0 / E2, 0.0)
    Vz = np.where(fin, Tc, 0.0)
    if Kcv is None:
        pick = np.zeros(n, dtype=np.int64)
    else:
        best = _cv_choice(group, Tc, sec, Vz, base, np.ascontiguousarray(Kcv, dtype=np.float64), int(n_g), float(cv_tie))
        pick = best[group] if n else np.zeros(0, dtype=np.int64)
    Ts = np.empty(n)
    se_s = np.empty(n)
    coef = np.empty((n, 3))
    _final_fit(group, Vz, E2, base, np.ascontiguousarray(Kf, dtype=np.float64), pick, Ts, se_s, coef)
    return Ts, se_s, pick, coef


def hampel_flags(group, T, se):
    """Hampel identifier per station (compiled form of :func:`faultmap.throw.along_strike._hampel`)."""
    out = np.empty(np.size(T), dtype=np.bool_)
    _hampel(
        np.ascontiguousarray(group, dtype=np.int64),
        np.ascontiguousarray(T, dtype=np.float64),
        np.ascontiguousarray(se, dtype=np.float64),
        out,
    )
    return out
