"""Compiled kernels for the throw step's hot loops (numba), with the numpy code as the reference.

Two kernels, each the per-profile form of an array routine that stays in
the package as the reference implementation (and the fallback when numba
cannot be imported or ``FAULTMAP_NO_JIT=1`` is set):

* :func:`bilinear_profiles` samples the DEM along both sides of many
  profiles: :func:`faultmap.profiles.sample_profiles`.
* :func:`robust_windows` fits robust lines to a window of samples of many
  profile rows: :func:`faultmap.robust_lines._fit_windows`.
* :func:`box_pairs` finds the profiles and trace segments whose boxes
  overlap: a ``shapely.STRtree`` query in
  :func:`faultmap.stations.crossing_limits`.

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

__all__ = ["ENABLED", "bilinear_profiles", "robust_windows", "box_pairs"]

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


# Per-row state of the robust fits (columns of a float64 array)
_A, _B, _SC, _INV, _BASE_A, _BASE_B, _N, _SW, _SD, _SDD, _SZ, _SDZ, _M1, _M2, _CNT = range(15)
_NSTATE = 15


@_jit
def _load(Z0, valid, rows, s, L, init_a, init_b, has_init, Zg, Mg, st):  # pragma: no cover
    """Copy each row's window into a compact matrix (warm start applied) and fit it by least squares."""
    K = Z0.shape[1]
    w = Zg.shape[1]
    d = np.arange(1, w + 1).astype(np.float32)
    one = np.float32(1.0)
    zero = np.float32(0.0)
    for i in range(rows.size):
        r = rows[i]
        s0 = s[i]
        Li = L[i]
        cnt = 0
        for j in range(w):
            if j < Li and valid[r, min(s0 + j, K - 1)]:
                Zg[i, j] = Z0[r, min(s0 + j, K - 1)]
                Mg[i, j] = one
                cnt += 1
            else:
                Zg[i, j] = zero
                Mg[i, j] = zero
        base_a = 0.0
        base_b = 0.0
        good = False
        if has_init:
            a0 = init_a[i]
            b0 = init_b[i]
            good = np.isfinite(a0) and np.isfinite(b0)
            if good:
                base_a = a0 + b0 * float(s0)
                base_b = b0
                af = _f32_finite(base_a)
                bf = _f32_finite(base_b)
                for j in range(Li):
                    Zg[i, j] = (Zg[i, j] - (d[j] * bf + af)) * Mg[i, j]
        sw, sd, sdd, sz, sdz = _sums(Mg[i], Zg[i], d, Li)
        a, b = _solve(sw, sd, sdd, sz, sdz)
        if good:
            a = 0.0
            b = 0.0
        st[i, _A] = a
        st[i, _B] = b
        st[i, _SC] = np.nan
        st[i, _BASE_A] = base_a
        st[i, _BASE_B] = base_b
        st[i, _N] = np.rint(sw)
        st[i, _SW] = sw
        st[i, _SD] = sd
        st[i, _SDD] = sdd
        st[i, _SZ] = sz
        st[i, _SDZ] = sdz
        st[i, _CNT] = cnt


@_jit
def _abs_residuals(Zg, Mg, L, st, A):  # pragma: no cover
    """|residual| about the current lines; +inf where no sample (so a row sort puts them last)."""
    w = Zg.shape[1]
    d = np.arange(1, w + 1).astype(np.float32)
    inf = np.float32(np.inf)
    zero = np.float32(0.0)
    for i in range(Zg.shape[0]):
        af = _f32_finite(st[i, _A])
        bf = _f32_finite(st[i, _B])
        for j in range(w):
            if j < L[i] and Mg[i, j] != zero:
                A[i, j] = abs(Zg[i, j] - (d[j] * bf + af))
            else:
                A[i, j] = inf


@_jit
def _reweight(z, m, d, Li, af, bf, inv, loss, W):  # pragma: no cover
    """Weights of one row's samples about its line (Tukey or Huber), and their normal-equation sums."""
    one = np.float32(1.0)
    zero = np.float32(0.0)
    s0 = zero
    s1 = zero
    s2 = zero
    s3 = zero
    s4 = zero
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
        wj = u * m[j]
        W[j] = wj
        t = wj * d[j]
        s0 += wj
        s1 += t
        s2 += t * d[j]
        t = wj * z[j]
        s3 += t
        s4 += t * d[j]
    return np.float64(s0), np.float64(s1), np.float64(s2), np.float64(s3), np.float64(s4)


@_jit
def _step(Zg, Mg, L, st, sc_row, inv_row, loss, Wg):  # pragma: no cover
    """One reweighting pass of every row at the given scale; the new lines and how far they moved."""
    w = Zg.shape[1]
    d = np.arange(1, w + 1).astype(np.float32)
    for i in range(Zg.shape[0]):
        a = st[i, _A]
        b = st[i, _B]
        sw, sd, sdd, sz, sdz = _reweight(
            Zg[i], Mg[i], d, L[i], _f32_finite(a), _f32_finite(b), inv_row[i], loss, Wg[i]
        )
        a_new, b_new = _solve(sw, sd, sdd, sz, sdz)
        da = a_new - a
        db = b_new - b
        st[i, _M1] = abs(da + db * 1.0)
        st[i, _M2] = abs(da + db * float(max(L[i], 1)))
        if np.isfinite(a_new):
            st[i, _A] = a_new
            st[i, _B] = b_new
        st[i, _SC] = sc_row[i]
        st[i, _INV] = inv_row[i]
        st[i, _SW] = sw
        st[i, _SD] = sd
        st[i, _SDD] = sdd
        st[i, _SZ] = sz
        st[i, _SDZ] = sdz


@_jit
def _converge_and_finish(Zg, Mg, L, st, s, has_init, loss, n_it, cap, tol, autocorr, scale_floor, Wg, out, sel):  # pragma: no cover
    """Go on reweighting each row at its held scale until its line stops moving; then its statistics."""
    w = Zg.shape[1]
    d = np.arange(1, w + 1).astype(np.float32)
    for i in range(Zg.shape[0]):
        Li = L[i]
        a = st[i, _A]
        b = st[i, _B]
        sw = st[i, _SW]
        sd = st[i, _SD]
        sdd = st[i, _SDD]
        sz = st[i, _SZ]
        sdz = st[i, _SDZ]
        if loss == 0 or n_it <= 0:
            if has_init:
                a, b = _solve(sw, sd, sdd, sz, sdz)
            ssr, lag, wlag = _finish(Mg[i], Zg[i], d, Li, a, b, autocorr)
            scale = np.nan  # from the rms below
        else:
            sc = st[i, _SC]
            inv = np.float32(st[i, _INV])
            m1 = st[i, _M1]
            m2 = st[i, _M2]
            it = n_it
            while True:
                # NaN movement: nothing to gain
                moving = (m1 == m1) and (m2 == m2) and max(m1, m2) >= tol * sc
                if not (it < cap and moving):
                    break
                sw, sd, sdd, sz, sdz = _reweight(
                    Zg[i], Mg[i], d, Li, _f32_finite(a), _f32_finite(b), inv, loss, Wg[i]
                )
                a_new, b_new = _solve(sw, sd, sdd, sz, sdz)
                da = a_new - a
                db = b_new - b
                m1 = abs(da + db * 1.0)
                m2 = abs(da + db * float(max(Li, 1)))
                if np.isfinite(a_new):
                    a = a_new
                    b = b_new
                it += 1
            ssr, lag, wlag = _finish(Wg[i], Zg[i], d, Li, a, b, autocorr)
            scale = sc
        # statistics of the line (local abscissa), as faultmap.robust_lines._line_stats
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
        # back to the absolute abscissa and the samples before the warm start
        off = float(s[i])
        b = b + st[i, _BASE_B]
        a = a + st[i, _BASE_A] - b * off
        var_a = var_a - 2.0 * off * cov_ab + off * off * var_b
        cov_ab = cov_ab - off * var_b
        if not (sw > 1.5) or not (det > 0):
            a = b = var_a = var_b = cov_ab = rms = ssr = np.nan
        k = sel[i]
        out[0, k] = a
        out[1, k] = b
        out[2, k] = var_a
        out[3, k] = var_b
        out[4, k] = cov_ab
        out[5, k] = scale
        out[6, k] = rms
        out[7, k] = st[i, _N]
        out[8, k] = sw
        out[9, k] = ssr


#: Windows whose lengths differ by under this factor share one compact matrix.
_GROWTH = 1.25
#: Largest compact matrix, samples (bounded memory; the caller's matrices are already chunked).
_GROUP_SAMPLES = 1 << 20


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


def robust_windows(
    Z0, valid, rows, s, L, *, init, loss, tuning, iterations, max_iterations, tol, autocorr, scale_floor
):
    """Robust lines of the samples ``s .. s + L - 1`` (columns) of some rows of ``Z0`` (compiled).

    The per-row form of :func:`faultmap.robust_lines._irls` on the windows
    of :func:`faultmap.robust_lines._fit_windows` (same arguments, same
    results); see :func:`faultmap.robust_lines.robust_line_fits` for the
    method. Windows are copied into compact matrices of similar lengths;
    the passes that re-estimate the residual scale sort each matrix's
    absolute residuals row by row with numpy (its vectorised sort is far
    faster than any per-row selection), the rest runs row by row.

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
    code = LOSS_CODES[loss]
    n_it = int(iterations)
    out = np.empty((10, nr))
    for sel in _groups(L):
        g = sel.size
        w = max(int(L[sel].max()), 2)
        Zg = np.empty((g, w), dtype=_F32)
        Mg = np.empty((g, w), dtype=_F32)
        Wg = np.zeros((g, w), dtype=_F32)
        st = np.empty((g, _NSTATE))
        Lg = L[sel]
        _load(Z0, valid, rows[sel], s[sel], Lg, ia[sel], ib[sel], has_init, Zg, Mg, st)
        if code != 0 and n_it > 0:
            A = np.empty((g, w), dtype=_F32)
            cnt = st[:, _CNT].astype(np.int64)
            rank = np.maximum((cnt - 1) // 2, 0)
            ar = np.arange(g)
            for _ in range(n_it):
                # scale: normalised MAD about the current lines, re-estimated at each of these passes
                _abs_residuals(Zg, Mg, Lg, st, A)
                A.sort(axis=1)
                med = A[ar, rank].astype(float)
                med[cnt == 0] = 0.0
                sc = np.maximum(1.4826 * med, float(scale_floor))
                inv = (1.0 / (float(tuning) * sc)).astype(_F32)
                _step(Zg, Mg, Lg, st, sc, inv, code, Wg)
        _converge_and_finish(
            Zg,
            Mg,
            Lg,
            st,
            s[sel],
            has_init,
            code,
            n_it,
            int(max_iterations),
            float(tol),
            bool(autocorr),
            float(scale_floor),
            Wg,
            out,
            sel,
        )
    keys = ("a", "b", "var_a", "var_b", "cov_ab", "scale", "rms", "n", "inliers", "ssr")
    res = {k: out[j] for j, k in enumerate(keys)}
    res["n"] = res["n"].astype(np.int64)
    return res


# ---------------------------------------------------------------------------
# Pairs of overlapping boxes (profiles x trace segments)
# ---------------------------------------------------------------------------
@_jit
def _grid_count(b, x0, y0, inv_c, ncx, ncy, counts):  # pragma: no cover
    for k in range(b.shape[0]):
        cx0 = min(max(int(math.floor((b[k, 0] - x0) * inv_c)), 0), ncx - 1)
        cx1 = min(max(int(math.floor((b[k, 2] - x0) * inv_c)), 0), ncx - 1)
        cy0 = min(max(int(math.floor((b[k, 1] - y0) * inv_c)), 0), ncy - 1)
        cy1 = min(max(int(math.floor((b[k, 3] - y0) * inv_c)), 0), ncy - 1)
        for cy in range(cy0, cy1 + 1):
            for cx in range(cx0, cx1 + 1):
                counts[cy * ncx + cx + 1] += 1


@_jit
def _grid_fill(b, x0, y0, inv_c, ncx, ncy, start, items):  # pragma: no cover
    fill = start[:-1].copy()
    for k in range(b.shape[0]):
        cx0 = min(max(int(math.floor((b[k, 0] - x0) * inv_c)), 0), ncx - 1)
        cx1 = min(max(int(math.floor((b[k, 2] - x0) * inv_c)), 0), ncx - 1)
        cy0 = min(max(int(math.floor((b[k, 1] - y0) * inv_c)), 0), ncy - 1)
        cy1 = min(max(int(math.floor((b[k, 3] - y0) * inv_c)), 0), ncy - 1)
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
        cx0 = min(max(int(math.floor((q[i, 0] - x0) * inv_c)), 0), ncx - 1)
        cx1 = min(max(int(math.floor((q[i, 2] - x0) * inv_c)), 0), ncx - 1)
        cy0 = min(max(int(math.floor((q[i, 1] - y0) * inv_c)), 0), ncy - 1)
        cy1 = min(max(int(math.floor((q[i, 3] - y0) * inv_c)), 0), ncy - 1)
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
