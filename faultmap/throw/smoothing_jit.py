"""Compiled (numba) forms of the along-strike smoothing: Hampel identifier and local regression.

* :func:`hampel_flags`: the Hampel identifier,
  :func:`faultmap.throw.smoothing._hampel`;
* :func:`smooth_stations`: the cross-validated local regression of
  :func:`faultmap.throw.smoothing._smooth_chunk`.

The array code of :mod:`faultmap.throw.smoothing` stays the reference and
runs instead when the kernels are disabled (:mod:`faultmap.numerics.jit`).
The smoothing kernel sums station by station where its reference uses
matrix products, so it agrees to rounding, with the same outliers and
widths (``tests/throw/test_kernels.py`` compares them). Each group is
handled on its own, so results never depend on how the work was chunked.
The kernels release the GIL and are serial inside.
"""

from __future__ import annotations

import numpy as np

from faultmap.numerics.jit import _jit, _sort_small

__all__ = ["hampel_flags", "smooth_stations"]


@_jit
def _hampel(group, T, se, out):  # pragma: no cover
    """Hampel identifier (as faultmap.throw.smoothing._hampel): running median of 5 within the group, 3 deviations."""
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
    """Local polynomial at x = 0 from its weighted sums (as faultmap.throw.smoothing._solve_local, one station).

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
        # propagated station errors, inflated by the local reduced chi-square (faultmap.throw.smoothing._local_stats)
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
    :func:`faultmap.throw.smoothing._smooth_chunk` (after its Hampel step):
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
    """Hampel identifier per station (compiled form of :func:`faultmap.throw.smoothing._hampel`)."""
    out = np.empty(np.size(T), dtype=np.bool_)
    _hampel(
        np.ascontiguousarray(group, dtype=np.int64),
        np.ascontiguousarray(T, dtype=np.float64),
        np.ascontiguousarray(se, dtype=np.float64),
        out,
    )
    return out
