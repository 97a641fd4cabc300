"""Compiled (numba) form of the diffusion scarp fit, one profile after another.

:func:`fit_rows` is the compiled form of
:func:`faultmap.scarps.diffusion.fit_diffusion_profiles`, whose array code
stays the reference and runs instead when the kernels are disabled
(:mod:`faultmap.numerics.jit`). It takes the same steps in the same order
for each row - the three candidate widths with (c, b, A) in closed form,
the Levenberg-Marquardt steps on (c, b, A, x0, ln s) with each row's own
damping, the Tukey biweights re-estimated before steps 2 and 4, the
covariance at the solution with the AR(1) inflation - but each row is
fitted on its own, in small fixed-size arrays (3 x 3 and 5 x 5 normal
equations solved by Gaussian elimination with partial pivoting, erf from
``math.erf``), over its valid samples only. Sums accumulate sample by
sample instead of numpy's pairwise order, so results agree with the
reference to rounding, not bit for bit (``tests/scarps/test_diffusion_kernels.py``
compares them). A row's result depends on its own samples only. The kernel
releases the GIL and is serial inside.
"""

from __future__ import annotations

import math

import numpy as np

from faultmap.numerics.jit import _jit, _sort_small

__all__ = ["OUT_FIELDS", "fit_rows"]

_SQPI = 2.0 / math.sqrt(math.pi)
#: Columns of :func:`fit_rows`' output, in order (the keys of ``fit_diffusion_profiles``).
OUT_FIELDS = (
    "kappa_t_m2",
    "kappa_t_se_m2",
    "log_kt_se",
    "offset_m",
    "offset_se_m",
    "x0_m",
    "slope",
    "rmse_m",
    "n_used",
)


#: From this |u| on erf(u) rounds to +-1 exactly in float64 (erfc(6) = 2.15e-17, under half an ulp of 1,
#: 5.55e-17; scipy.special.erfc), so the kernel skips the call; its derivative there, 2 / sqrt(pi)
#: exp(-u^2) < 2.7e-16, under 3e-16 of its peak, is taken as zero (a change below rounding of the sums).
_U_FLAT = 6.0


@_jit
def _erf(v):  # pragma: no cover
    if v >= _U_FLAT:
        return 1.0
    if v <= -_U_FLAT:
        return -1.0
    return math.erf(v)


@_jit
def _shape(u, roots):  # pragma: no cover
    """F(u) and dF/du of :func:`faultmap.scarps.diffusion.scarp_shape` at one point."""
    nr = roots.size
    if nr == 1:
        if abs(u) >= _U_FLAT:
            return (1.0 if u > 0.0 else -1.0), 0.0
        return math.erf(u), _SQPI * math.exp(-u * u)
    F = 0.0
    dF = 0.0
    for k in range(nr):
        v = u / roots[k]
        if abs(v) >= _U_FLAT:
            F += 1.0 if v > 0.0 else -1.0
        else:
            F += math.erf(v)
            dF += _SQPI * math.exp(-v * v) / roots[k]
    return F / nr, dF / nr


@_jit
def _shape_value(u, roots):  # pragma: no cover
    """F(u) alone (the candidate widths need no derivative)."""
    nr = roots.size
    if nr == 1:
        return _erf(u)
    F = 0.0
    for k in range(nr):
        F += _erf(u / roots[k])
    return F / nr


@_jit
def _gauss_solve(A, b, n):  # pragma: no cover
    """Solve A[:n, :n] y = b[:n] in place (partial pivoting); False if a pivot is zero or not finite."""
    for k in range(n):
        piv = k
        big = abs(A[k, k])
        for i in range(k + 1, n):
            if abs(A[i, k]) > big:
                big = abs(A[i, k])
                piv = i
        if not (big > 0.0) or not np.isfinite(big):
            return False
        if piv != k:
            for j in range(n):
                t = A[k, j]
                A[k, j] = A[piv, j]
                A[piv, j] = t
            t = b[k]
            b[k] = b[piv]
            b[piv] = t
        for i in range(k + 1, n):
            f = A[i, k] / A[k, k]
            for j in range(k, n):
                A[i, j] -= f * A[k, j]
            b[i] -= f * b[k]
    for k in range(n - 1, -1, -1):
        s = b[k]
        for j in range(k + 1, n):
            s -= A[k, j] * b[j]
        b[k] = s / A[k, k]
    return True


@_jit
def _inverse_diag(H, work, col, k):  # pragma: no cover
    """Element (k, k) of the inverse of H[:5, :5] (NaN when singular)."""
    for a in range(5):
        for c in range(5):
            work[a, c] = H[a, c]
        col[a] = 0.0
    col[k] = 1.0
    if not _gauss_solve(work, col, 5):
        return np.nan
    return col[k]


@_jit
def _evaluate(p, x, zf, valid, roots, W, F, dF, u, r):  # pragma: no cover
    """Shape, derivative, scaled distance and residual of every valid sample at p; the weighted misfit."""
    s = math.exp(p[4])
    ssr = 0.0
    for j in range(x.size):
        if valid[j]:
            uj = (x[j] - p[3]) / s
            f, d = _shape(uj, roots)
            u[j] = uj
            F[j] = f
            dF[j] = d
            rj = zf[j] - p[0] - p[1] * x[j] - p[2] * f
            r[j] = rj
            if W[j] != 0.0:
                ssr += W[j] * rj * rj
        else:
            u[j] = 0.0
            F[j] = 0.0
            dF[j] = 0.0
            r[j] = 0.0
    return ssr


@_jit
def _normal(p, x, W, F, dF, u, r, H, g):  # pragma: no cover
    """H = J W J^T and g = J W r of the five parameters (c, b, A, x0, ln s)."""
    s = math.exp(p[4])
    A = p[2]
    h00 = h01 = h02 = h03 = h04 = h11 = h12 = h13 = h14 = h22 = h23 = h24 = h33 = h34 = h44 = 0.0
    g0 = g1 = g2 = g3 = g4 = 0.0
    for j in range(x.size):
        w = W[j]
        if w == 0.0:
            continue
        aD = A * dF[j]
        j1 = x[j]
        j2 = F[j]
        j3 = -aD / s
        j4 = -aD * u[j]
        rj = r[j]
        w1 = w * j1
        w2 = w * j2
        w3 = w * j3
        w4 = w * j4
        h00 += w
        h01 += w * j1
        h02 += w * j2
        h03 += w * j3
        h04 += w * j4
        h11 += w1 * j1
        h12 += w1 * j2
        h13 += w1 * j3
        h14 += w1 * j4
        h22 += w2 * j2
        h23 += w2 * j3
        h24 += w2 * j4
        h33 += w3 * j3
        h34 += w3 * j4
        h44 += w4 * j4
        g0 += w * rj
        g1 += w1 * rj
        g2 += w2 * rj
        g3 += w3 * rj
        g4 += w4 * rj
    H[0, 0], H[0, 1], H[0, 2], H[0, 3], H[0, 4] = h00, h01, h02, h03, h04
    H[1, 1], H[1, 2], H[1, 3], H[1, 4] = h11, h12, h13, h14
    H[2, 2], H[2, 3], H[2, 4] = h22, h23, h24
    H[3, 3], H[3, 4] = h33, h34
    H[4, 4] = h44
    for a in range(5):
        for c in range(a):
            H[a, c] = H[c, a]
    g[0], g[1], g[2], g[3], g[4] = g0, g1, g2, g3, g4


@_jit
def _ssr(W, r):  # pragma: no cover
    t = 0.0
    for j in range(r.size):
        if W[j] != 0.0:
            t += W[j] * r[j] * r[j]
    return t


@_jit
def _tukey(r, valid, tuning, W, buf):  # pragma: no cover
    """Tukey biweights with the row's MAD scale (as ``diffusion._tukey``), into W."""
    n = 0
    for j in range(r.size):
        if valid[j]:
            buf[n] = abs(r[j])
            n += 1
    if n == 0:
        mad = 1e-6
    else:
        if n <= 64:
            _sort_small(buf, n)
        else:
            buf[:n].sort()
        mad = 1.4826 * 0.5 * (buf[(n - 1) // 2] + buf[n // 2])
        if not (np.isfinite(mad) and mad > 0.0):
            mad = 1e-6
    for j in range(r.size):
        if valid[j]:
            q = abs(r[j]) / (tuning * mad)
            W[j] = (1.0 - q * q) ** 2 if q < 1.0 else 0.0
        else:
            W[j] = 0.0


@_jit
def fit_rows(X, Z, s0, roots, iterations, robust, tuning, x0max_in, s_lo, s_hi):  # pragma: no cover
    """Fit the diffusion scarp model to every row of Z, one row at a time.

    Parameters
    ----------
    X : ndarray, shape (1, N) or (m, N)
        Distance across the scarp, m (one row shared by all, or one per row).
    Z : ndarray, shape (m, N)
        Elevations, m (NaN = no sample).
    s0 : ndarray, shape (m,)
        First guess of the width 2 sqrt(kappa t), m.
    roots : ndarray
        sqrt(k / n), k = 1..n, of the n events.
    iterations : int
    robust : bool
    tuning : float
    x0max_in : ndarray, shape (m,)
        Largest shift of the mid-point, m (NaN: a quarter of the row's window).
    s_lo, s_hi : float
        Limits of the width, m.

    Returns
    -------
    ndarray, shape (m, 9)
        The fields :data:`OUT_FIELDS`, in order.
    """
    m, N = Z.shape
    out = np.empty((m, 9))
    x = np.empty(N)
    zf = np.empty(N)
    valid = np.zeros(N, dtype=np.bool_)
    W0 = np.empty(N)
    W = np.empty(N)
    F = np.empty(N)
    dF = np.empty(N)
    u = np.empty(N)
    r = np.empty(N)
    Ft = np.empty(N)
    dFt = np.empty(N)
    ut = np.empty(N)
    rt = np.empty(N)
    buf = np.empty(N)
    p = np.empty(5)
    trial = np.empty(5)
    step = np.empty(5)
    H = np.empty((5, 5))
    Hd = np.empty((5, 5))
    g = np.empty(5)
    M = np.empty((3, 3))
    rhs = np.empty(3)
    fac = (0.4, 1.0, 2.5)
    ln_lo = math.log(s_lo)
    ln_hi = math.log(s_hi)
    shared_x = X.shape[0] == 1
    for i in range(m):
        xi = 0 if shared_x else i
        n0 = 0
        zs = 0.0
        xmin = np.inf
        xmax = -np.inf
        for j in range(N):
            x[j] = X[xi, j]
            z = Z[i, j]
            if np.isfinite(z):
                valid[j] = True
                W0[j] = 1.0
                zs += z
                n0 += 1
                if x[j] < xmin:
                    xmin = x[j]
                if x[j] > xmax:
                    xmax = x[j]
            else:
                valid[j] = False
                W0[j] = 0.0
        ref = zs / n0 if n0 > 0 else 0.0
        for j in range(N):
            zf[j] = Z[i, j] - ref if valid[j] else 0.0
        half = 0.5 * (xmax - xmin)
        if not (np.isfinite(half) and half > 0.0):
            half = 1.0
        x0m = 0.25 * half if np.isnan(x0max_in[i]) else x0max_in[i]
        s0i = min(max(s0[i], s_lo), s_hi)
        # --- candidate widths, linear parameters in closed form
        best_ssr = np.inf
        for a in range(5):
            p[a] = 0.0
        for f in fac:
            s = min(max(s0i * f, s_lo), s_hi)
            sw = sx = se = sxx = sxe = see = sz = sxz = sez = 0.0
            for j in range(N):
                if valid[j]:
                    e = _shape_value(x[j] / s, roots)
                    xj = x[j]
                    zj = zf[j]
                    sw += 1.0
                    sx += xj
                    se += e
                    sxx += xj * xj
                    sxe += xj * e
                    see += e * e
                    sz += zj
                    sxz += zj * xj
                    sez += zj * e
                    Ft[j] = e
            M[0, 0], M[0, 1], M[0, 2] = sw, sx, se
            M[1, 0], M[1, 1], M[1, 2] = sx, sxx, sxe
            M[2, 0], M[2, 1], M[2, 2] = se, sxe, see
            rhs[0], rhs[1], rhs[2] = sz, sxz, sez
            big = 0.0
            for a in range(3):
                for c in range(3):
                    big = max(big, abs(M[a, c]))
            for a in range(3):
                M[a, a] += 1e-9 * (big + 1e-30)
            if not _gauss_solve(M, rhs, 3):
                continue
            ssr = 0.0
            for j in range(N):
                if valid[j]:
                    res = zf[j] - rhs[0] - rhs[1] * x[j] - rhs[2] * Ft[j]
                    ssr += res * res
            if ssr < best_ssr:
                best_ssr = ssr
                p[0], p[1], p[2], p[3], p[4] = rhs[0], rhs[1], rhs[2], 0.0, math.log(s)
        for j in range(N):
            W[j] = W0[j]
        lam = 1e-3
        ssr = _evaluate(p, x, zf, valid, roots, W, F, dF, u, r)
        fresh = False  # whether H and g hold the normal equations at p with the weights W
        for it in range(iterations):
            if robust and (it == 2 or it == 4):
                _tukey(r, valid, tuning, W, buf)
                ssr = _ssr(W, r)
                fresh = False
            if not fresh:  # (a rejected step leaves p, W and so H and g as they were)
                _normal(p, x, W, F, dF, u, r, H, g)
                fresh = True
            for a in range(5):
                for c in range(5):
                    Hd[a, c] = H[a, c]
                Hd[a, a] = H[a, a] + lam * (H[a, a] + 1e-12)
                step[a] = g[a]
            if not _gauss_solve(Hd, step, 5):
                for a in range(5):
                    step[a] = 0.0
            for a in range(5):
                if not np.isfinite(step[a]):
                    step[a] = 0.0
            step[4] = min(max(step[4], -1.0), 1.0)
            for a in range(5):
                trial[a] = p[a] + step[a]
            trial[3] = min(max(trial[3], -x0m), x0m)
            trial[4] = min(max(trial[4], ln_lo), ln_hi)
            ssr_t = _evaluate(trial, x, zf, valid, roots, W, Ft, dFt, ut, rt)
            if ssr_t <= ssr:  # keep the step: the trial's arrays become the current ones
                for a in range(5):
                    p[a] = trial[a]
                F, Ft = Ft, F
                dF, dFt = dFt, dF
                u, ut = ut, u
                r, rt = rt, r
                ssr = ssr_t
                fresh = False
                lam = lam * 0.3
            else:
                lam = lam * 10.0
        # --- uncertainty at the solution
        s = math.exp(p[4])
        _normal(p, x, W, F, dF, u, r, H, g)
        sw = 0.0
        num = 0.0
        den = 0.0
        prev = 0.0
        for j in range(N):
            sw += W[j]
            rw = r[j] if W[j] > 0.0 else 0.0
            num += rw * prev
            den += rw * rw
            prev = rw
        ssr = _ssr(W, r)
        dof = max(sw - 5.0, 1.0)
        sig2 = ssr / dof
        rho = num / den if den > 0.0 else 0.0
        if rho < 0.0:
            rho = 0.0
        elif rho > 0.95:
            rho = 0.95
        infl = (1.0 + rho) / (1.0 - rho)
        big = 0.0
        finite = True
        for a in range(5):
            for c in range(5):
                if not np.isfinite(H[a, c]):
                    finite = False
                big = max(big, abs(H[a, c]))
        var_th = np.nan
        var_a = np.nan
        if finite:
            for a in range(5):
                H[a, a] += 1e-12 * (big + 1e-30)
            # the (2, 2) and (4, 4) elements of the inverse: two solves (the regularised H is positive
            # definite with its singular values above pinv's cut, so its inverse is the reference's pinv)
            var_th = _inverse_diag(H, Hd, step, 4) * (sig2 * infl)
            var_a = _inverse_diag(H, Hd, step, 2) * (sig2 * infl)
            if var_th < 0.0:
                var_th = 0.0
            if var_a < 0.0:
                var_a = 0.0
        kt = 0.25 * s * s
        out[i, 0] = kt
        out[i, 1] = 2.0 * kt * math.sqrt(var_th)
        out[i, 2] = 2.0 * math.sqrt(var_th)
        out[i, 3] = 2.0 * p[2]
        out[i, 4] = 2.0 * math.sqrt(var_a)
        out[i, 5] = p[3]
        out[i, 6] = p[1]
        out[i, 7] = math.sqrt(ssr / sw) if sw > 0.0 else np.nan
        out[i, 8] = n0
    return out
