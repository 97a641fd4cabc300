"""Compiled kernels for the throw step's hot loops (numba), with the numpy code as the reference.

Two kernels, each the per-profile form of an array routine that stays in
the package as the reference implementation (and the fallback when numba
cannot be imported or ``FAULTMAP_NO_JIT=1`` is set):

* :func:`bilinear_profiles` samples the DEM along both sides of many
  profiles: :func:`faultmap.profiles.sample_profiles`.
* :func:`robust_windows` fits robust lines to a window of samples of many
  profile rows: :func:`faultmap.robust_lines._fit_windows`.

Both repeat the reference's float32 arithmetic operation by operation and
accumulate every sum sample by sample in the same order, so they return
the same numbers (the tests compare them). Each profile is handled on its
own, so results never depend on how the work was batched. The kernels
release the GIL: an engine running batches in threads runs them in
parallel. They are serial inside (no hidden thread pool competing with
the engine's workers).

Compilation happens once per machine (numba's on-disk cache); the first
call in a new environment takes a few seconds.
"""

from __future__ import annotations

import math
import os

import numpy as np

__all__ = ["ENABLED", "bilinear_profiles", "robust_windows"]

try:  # pragma: no cover - exercised by whichever environment runs the tests
    if os.environ.get("FAULTMAP_NO_JIT", "") not in ("", "0"):
        raise ImportError("disabled by FAULTMAP_NO_JIT")
    import numba as _nb

    ENABLED = True
except ImportError:  # pragma: no cover
    _nb = None
    ENABLED = False


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
            # the reference's order of operations (faultmap.profiles.sample_profiles)
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
@_jit
def _solve(sw, sd, sdd, sz, sdz):  # pragma: no cover
    det = sw * sdd - sd * sd
    if sw > 1.5 and det > 1e-9 * max(sw * sdd, 1e-30):
        b = (sw * sdz - sd * sz) / det
        return (sz - b * sd) / sw, b
    return np.nan, np.nan


@_jit
def _sums(W, z, d, L):  # pragma: no cover
    """float32 normal-equation sums, accumulated sample by sample (as the reference)."""
    s0 = np.float32(0.0)
    s1 = np.float32(0.0)
    s2 = np.float32(0.0)
    s3 = np.float32(0.0)
    s4 = np.float32(0.0)
    for j in range(L):
        t = W[j] * d[j]
        s0 += W[j]
        s1 += t
        s2 += t * d[j]
        t = W[j] * z[j]
        s3 += t
        s4 += t * d[j]
    return np.float64(s0), np.float64(s1), np.float64(s2), np.float64(s3), np.float64(s4)


@_jit
def _f32_finite(v):  # pragma: no cover
    return np.float32(v) if np.isfinite(v) else np.float32(0.0)


@_jit
def _finish(W, z, d, L, a, b, autocorr):  # pragma: no cover
    af = _f32_finite(a)
    bf = _f32_finite(b)
    ssr = np.float32(0.0)
    lag = np.float32(0.0)
    wlag = np.float32(0.0)
    prev = np.float32(0.0)
    for j in range(L):
        r = z[j] - (d[j] * bf + af)
        wr = W[j] * r
        ssr += r * wr
        if j > 0:
            lag += wr * prev
            wlag += W[j] * W[j - 1]
        prev = wr
    if not autocorr:
        lag = np.float32(0.0)
        wlag = np.float32(1.0)
    return np.float64(ssr), np.float64(lag), np.float64(wlag)


@_jit
def _select(x, n, k):  # pragma: no cover
    """The k-th smallest of x[:n] (0-based; x is reordered): Wirth's selection (1976)."""
    lo = 0
    hi = n - 1
    while lo < hi:
        pivot = x[k]
        i = lo
        j = hi
        while True:
            while x[i] < pivot:
                i += 1
            while pivot < x[j]:
                j -= 1
            if i <= j:
                t = x[i]
                x[i] = x[j]
                x[j] = t
                i += 1
                j -= 1
            if i > j:
                break
        if j < k:
            lo = i
        if k < i:
            hi = j
    return x[k]


@_jit
def _robust_rows(
    Z0, valid, rows, s, L, init_a, init_b, has_init, loss, tuning, n_it, cap, tol, autocorr, scale_floor, out
):  # pragma: no cover
    K = Z0.shape[1]
    wmax = 2
    for i in range(rows.size):
        wmax = max(wmax, L[i])
    z = np.empty(wmax, dtype=np.float32)
    mf = np.empty(wmax, dtype=np.float32)
    W = np.empty(wmax, dtype=np.float32)
    buf = np.empty(wmax, dtype=np.float32)
    d = np.arange(1, wmax + 1).astype(np.float32)
    one = np.float32(1.0)
    zero = np.float32(0.0)
    for i in range(rows.size):
        r = rows[i]
        s0 = s[i]
        Li = L[i]
        off = float(s0)
        span = float(max(Li, 1))
        for j in range(Li):
            c = min(s0 + j, K - 1)
            if valid[r, c]:
                z[j] = Z0[r, c]
                mf[j] = one
            else:
                z[j] = zero
                mf[j] = zero
        base_a = 0.0
        base_b = 0.0
        good = False
        if has_init:
            a0 = init_a[i]
            b0 = init_b[i]
            good = np.isfinite(a0) and np.isfinite(b0)
            if good:
                base_a = a0 + b0 * off
                base_b = b0
                af = _f32_finite(base_a)
                bf = _f32_finite(base_b)
                for j in range(Li):
                    z[j] = (z[j] - (d[j] * bf + af)) * mf[j]
        sw, sd, sdd, sz, sdz = _sums(mf, z, d, Li)
        n_samp = np.rint(sw)
        a, b = _solve(sw, sd, sdd, sz, sdz)
        if good:
            a = 0.0
            b = 0.0
        if loss == 0 or n_it <= 0:
            if has_init:
                a, b = _solve(sw, sd, sdd, sz, sdz)
            ssr, lag, wlag = _finish(mf, z, d, Li, a, b, autocorr)
            scale = np.nan  # set from the rms below
        else:
            sc = 0.0
            inv = np.float32(0.0)
            it = 0
            while True:
                af = _f32_finite(a)
                bf = _f32_finite(b)
                if it < n_it:
                    # lower median of |residual| over the valid samples
                    cnt = 0
                    for j in range(Li):
                        if mf[j] != zero:
                            buf[cnt] = abs(z[j] - (d[j] * bf + af))
                            cnt += 1
                    med = 0.0
                    if cnt > 0:
                        med = np.float64(_select(buf, cnt, (cnt - 1) // 2))
                    sc = max(1.4826 * med, scale_floor)
                    inv = np.float32(1.0 / (tuning * sc))
                for j in range(Li):
                    u = (z[j] - (d[j] * bf + af)) * inv
                    if loss == 1:
                        u = u * u
                        u = one - u
                        u = max(u, zero)
                        u = u * u
                    else:
                        u = abs(u)
                        u = max(u, one)
                        u = one / u
                    W[j] = u * mf[j]
                sw, sd, sdd, sz, sdz = _sums(W, z, d, Li)
                a_new, b_new = _solve(sw, sd, sdd, sz, sdz)
                da = a_new - a
                db = b_new - b
                m1 = abs(da + db * 1.0)
                m2 = abs(da + db * span)
                if np.isfinite(a_new):
                    a = a_new
                    b = b_new
                it += 1
                if it < n_it:
                    continue
                thr = tol * sc
                moving = (m1 == m1) and (m2 == m2) and max(m1, m2) >= thr
                if it < cap and moving:
                    continue
                ssr, lag, wlag = _finish(W, z, d, Li, a, b, autocorr)
                scale = sc
                break
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
        if scale != scale:
            scale = max(rms if np.isfinite(rms) else scale_floor, scale_floor)
        b = b + base_b
        a = a + base_a - b * off
        var_a = var_a - 2.0 * off * cov_ab + off * off * var_b
        cov_ab = cov_ab - off * var_b
        if not (sw > 1.5) or not (det > 0):
            a = b = var_a = var_b = cov_ab = rms = ssr = np.nan
        out[0, i] = a
        out[1, i] = b
        out[2, i] = var_a
        out[3, i] = var_b
        out[4, i] = cov_ab
        out[5, i] = scale
        out[6, i] = rms
        out[7, i] = n_samp
        out[8, i] = sw
        out[9, i] = ssr


def robust_windows(
    Z0, valid, rows, s, L, *, init, loss, tuning, iterations, max_iterations, tol, autocorr, scale_floor
):
    """Robust lines of the samples ``s .. s + L - 1`` (columns) of some rows of ``Z0`` (compiled).

    The per-row form of :func:`faultmap.robust_lines._irls` on the windows
    of :func:`faultmap.robust_lines._fit_windows` (same arguments, same
    results); see :func:`faultmap.robust_lines.robust_line_fits` for the
    method.

    Returns
    -------
    dict of ndarray, shape (len(rows),)
        ``a``, ``b``, ``var_a``, ``var_b``, ``cov_ab``, ``scale``, ``rms``,
        ``n`` (int64), ``inliers``, ``ssr``.
    """
    nr = rows.size
    if init is None:
        ia = ib = np.zeros(nr)
    else:
        ia = np.ascontiguousarray(init[0], dtype=float)
        ib = np.ascontiguousarray(init[1], dtype=float)
    out = np.empty((10, nr))
    _robust_rows(
        Z0,
        valid,
        np.ascontiguousarray(rows, dtype=np.int64),
        np.ascontiguousarray(s, dtype=np.int64),
        np.ascontiguousarray(L, dtype=np.int64),
        ia,
        ib,
        init is not None,
        LOSS_CODES[loss],
        float(tuning),
        int(iterations),
        int(max_iterations),
        float(tol),
        bool(autocorr),
        float(scale_floor),
        out,
    )
    keys = ("a", "b", "var_a", "var_b", "cov_ab", "scale", "rms", "n", "inliers", "ssr")
    res = {k: out[j] for j, k in enumerate(keys)}
    res["n"] = res["n"].astype(np.int64)
    return res
