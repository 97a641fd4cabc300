"""Compiled (numba) form of the robust line fits on windows of profile rows.

:func:`robust_windows` fits robust lines to a window of samples of many
profile rows: the compiled form of
:func:`faultmap.throw.robust_lines._fit_windows`, whose array code stays the
reference and runs instead when the kernels are disabled
(:mod:`faultmap.numerics.jit`). It repeats the reference's float32
arithmetic operation by operation and accumulates every sum sample by
sample in the same order, so it returns the same numbers
(``tests/throw/test_kernels.py`` compares them). Each row's result depends
on its own samples only, so results never depend on how the work was
batched. The kernels release the GIL: an engine running batches in threads
runs them in parallel. They are serial inside (no hidden thread pool
competing with the engine's workers).
"""

from __future__ import annotations

import math

import numpy as np

from faultmap.numerics.jit import _jit

__all__ = ["LOSS_CODES", "robust_windows"]

_F32 = np.float32
#: Loss codes of :func:`robust_windows`.
LOSS_CODES = {"none": 0, "tukey": 1, "huber": 2}


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
