"""Along-strike throw profiles of single faults: robust smoothing.

From the station throws of each fault (sorted by distance along the trace):
a Hampel filter sets isolated outliers aside and a local regression smooths
the profile with a width chosen per fault by cross-validation
(:func:`_smooth_profiles`, used by
:func:`faultmap.throw.fault_summaries.summarise_faults`). Everything is
vectorised over all the stations of all faults at once; the compiled forms
are in :mod:`faultmap.throw.smoothing_jit`.
"""

from __future__ import annotations

import math

import numpy as np

from faultmap.numerics import jit
from faultmap.throw.smoothing_jit import hampel_flags, smooth_stations

__all__ = ["SMOOTHING_CANDIDATES"]


def _shift(v, j, same_group):
    """V shifted by j positions (NaN across group boundaries)."""
    out = np.full(v.shape, np.nan)
    n = v.size
    if j == 0:
        return v.astype(float).copy()
    if abs(j) >= n:
        return out
    if j > 0:
        out[:-j] = np.where(same_group[j][: n - j], v[j:], np.nan)
    else:
        k = -j
        out[k:] = np.where(same_group[k][: n - k], v[: n - k], np.nan)
    return out


def _nan_row_median(A):
    """Median of the finite values of each row (NaN where none), by one sort."""
    fin = np.isfinite(A)
    cnt = fin.sum(axis=1)
    S = np.sort(np.where(fin, A, np.inf), axis=1)
    lo = np.clip((cnt - 1) // 2, 0, A.shape[1] - 1)
    hi = np.clip(cnt // 2, 0, A.shape[1] - 1)
    with np.errstate(invalid="ignore"):
        med = 0.5 * (
            np.take_along_axis(S, lo[:, None], 1)[:, 0] + np.take_along_axis(S, hi[:, None], 1)[:, 0]
        )
    return np.where(cnt > 0, med, np.nan)


def _hampel(group, T, se):
    """Hampel identifier: stations more than 3 robust deviations from the running median of 5."""
    n = T.size
    same = {
        j: np.r_[group[j:] == group[:-j], np.zeros(j, dtype=bool)] if j < n else np.zeros(n, dtype=bool)
        for j in (1, 2)
    }
    stack = np.stack([_shift(T, j, same) for j in range(-2, 3)], axis=1)
    med = _nan_row_median(stack)
    mad = 1.4826 * _nan_row_median(np.abs(stack - med[:, None]))
    cnt = np.isfinite(stack).sum(axis=1)
    tol = 3.0 * np.sqrt(mad**2 + np.nan_to_num(se) ** 2)
    return np.isfinite(T) & (cnt >= 4) & (np.abs(T - med) > tol)


def _neighbourhood(group, Tc, sec, J):
    """Values and errors of the stations within J positions of each station (same fault), (n, 2J+1)."""
    n = Tc.size
    offs = np.arange(-J, J + 1)
    idx = np.arange(n)[:, None] + offs[None, :]
    idxc = np.clip(idx, 0, max(n - 1, 0))
    same = (
        (idx >= 0) & (idx < n) & (group[idxc] == group[:, None])
        if n
        else np.zeros((0, offs.size), dtype=bool)
    )
    V = np.where(same, Tc[idxc], np.nan) if n else np.zeros((0, offs.size))
    E = np.where(same, sec[idxc], np.nan) if n else np.zeros((0, offs.size))
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        fin = np.isfinite(V) & np.isfinite(E)
        E2 = np.where(fin, E * E, 0.0)
        base = np.where(fin, 1.0 / E2, 0.0)
    return offs.astype(float), np.where(fin, V, 0.0), E2, base


def _kernels(x, sigmas, excludes):
    """Gaussian kernel columns (len(x), m): sigma in stations, zero within ``exclude`` and beyond 3 sigma."""
    cols = []
    for sg, ex in zip(sigmas, excludes, strict=True):
        J = max(2, ex + 3, int(math.ceil(3.0 * sg)))
        k = np.exp(-0.5 * (x / sg) ** 2)
        k[(np.abs(x) <= ex) | (np.abs(x) > J)] = 0.0
        cols.append(k)
    return np.stack(cols, axis=1)


#: Rows per matrix product: small products run on the calling thread (BLAS threads that wait for a
#: busy core cost far more than these products take).
_PRODUCT_ROWS = 1024


def _products(A, K):
    """Multiply a tall ``A`` (n, j) by a small ``K`` (j, m), in blocks of rows."""
    out = np.empty((A.shape[0], K.shape[1]))
    for a in range(0, A.shape[0], _PRODUCT_ROWS):
        np.matmul(A[a : a + _PRODUCT_ROWS], K, out=out[a : a + _PRODUCT_ROWS])
    return out


def _solve_local(S, B, nl, nr, full=True):
    """Local polynomial at x = 0 from its weighted sums (arrays of any one shape).

    ``S`` = sums of w x^p (p = 0..4), ``B`` = sums of w x^p y (p = 0..2),
    ``nl``, ``nr`` = stations with weight left and right. The degree is
    quadratic with >= 2 stations on both sides, linear with stations on one
    side only or 1 on a side (boundary behaviour of local regression,
    Cleveland 1979), else constant. Returns ``coef`` (3, ...) (only the value
    when ``full`` is False), ``c`` (3, ...) the first row of the inverse
    moment matrix (the equivalent kernel of the value), ``okq``, ``okl`` and
    ``empty``.
    """
    s0, s1, s2, s3, s4 = S
    B0, B1, B2 = B
    quad = (nl >= 2) & (nr >= 2)
    lin = ~quad & (nl + nr >= 2)
    # inverse of the symmetric 3x3 moment matrix [[s0 s1 s2] [s1 s2 s3] [s2 s3 s4]] by cofactors
    c00 = s2 * s4 - s3 * s3
    c01 = s2 * s3 - s1 * s4
    c02 = s1 * s3 - s2 * s2
    with np.errstate(all="ignore"):
        det = s0 * c00 + s1 * c01 + s2 * c02
        okq = quad & (np.abs(det) > 1e-9 * np.abs(s0 * c00))
        det2 = s0 * s2 - s1 * s1
        okl = (lin | (quad & ~okq)) & (np.abs(det2) > 1e-9 * np.abs(s0 * s2))
        okc = ~okq & ~okl & (s0 > 0)  # local constant where no slope is determined
        iq = np.where(okq, 1.0 / det, 0.0)
        il = np.where(okl, 1.0 / det2, 0.0)
        ic = np.where(okc, 1.0 / s0, 0.0)
        # rows of the inverse (quadratic, linear or constant fit)
        r0 = (c00 * iq + s2 * il + ic, c01 * iq - s1 * il, c02 * iq)
        rows = [r0]
        if full:
            c11 = s0 * s4 - s2 * s2
            c12 = s1 * s2 - s0 * s3
            c22 = s0 * s2 - s1 * s1
            rows.append((c01 * iq - s1 * il, c11 * iq + s0 * il, c12 * iq))
            rows.append((c02 * iq, c12 * iq, c22 * iq))
        coef = np.stack([q[0] * B0 + q[1] * B1 + q[2] * B2 for q in rows])
    coef = np.where(np.isfinite(coef), coef, 0.0)
    c = np.stack([np.where(np.isfinite(v), v, 0.0) for v in r0])
    return coef, c, okq, okl, ~(s0 > 0)


def _local_values(nb, K):
    """Value at every station of the local fits of every kernel column of ``K`` (2J + 1, m): (n, m).

    The weights of station i and kernel k are ``base[i] * K[:, k]``, so every
    weighted sum is one matrix product over the neighbourhood. NaN where no
    station has weight.
    """
    x, Vz, E2, base = nb
    xp = [np.ones_like(x), x, x * x, x**3, x**4]
    S = [_products(base * xp[p], K) for p in range(5)]  # sums of w x^p
    bv = base * Vz
    B = [_products(bv * xp[p], K) for p in range(3)]  # sums of w x^p y
    pres = (base > 0).astype(float)
    Kp = (K > 0).astype(float)
    nl = _products(pres * (x < 0), Kp)
    nr = _products(pres * (x > 0), Kp)
    coef, _, _, _, empty = _solve_local(S, B, nl, nr, full=False)
    return np.where(empty, np.nan, coef[0])


def _local_fit_rows(nb, kern):
    """Local polynomial fit at every station with its own kernel (rows of ``kern``, (n, 2J + 1)).

    Returns ``coef`` (3, n), ``c`` (3, n), ``okq``, ``okl``, ``empty`` (see
    :func:`_solve_local`) and the weights ``W`` (n, 2J + 1).
    """
    x, Vz, E2, base = nb
    W = base * kern
    xp = [np.ones_like(x), x, x * x, x**3, x**4]
    S = [np.einsum("ij,j->i", W, xp[p]) for p in range(5)]
    WV = W * Vz
    B = [np.einsum("ij,j->i", WV, xp[p]) for p in range(3)]
    pres = (W > 0).astype(float)
    nl = np.einsum("ij,j->i", pres, (x < 0).astype(float))
    nr = np.einsum("ij,j->i", pres, (x > 0).astype(float))
    coef, c, okq, okl, empty = _solve_local(S, B, nl, nr)
    return coef, c, okq, okl, empty, W


def _local_stats(nb, W, coef, c, okq, okl):
    """Give the standard errors of local fits, one kernel per station (weights ``W``, (n, 2J + 1)).

    The propagated station errors, inflated by the reduced chi-square of the
    local fit where the stations scatter more than their errors say.
    """
    x, Vz, E2, base = nb
    L = (c[0][:, None] + c[1][:, None] * x + c[2][:, None] * (x * x)) * W
    var = np.einsum("ij,ij->i", L * L, E2)
    K = W * E2  # the kernel weight where the station exists
    R = Vz - (coef[0][:, None] + coef[1][:, None] * x + coef[2][:, None] * (x * x))
    chi = np.einsum("ij,ij->i", W * R, R)  # W is 0 where no station
    sk = K.sum(axis=1)
    sk2 = np.einsum("ij,ij->i", K, K)
    with np.errstate(invalid="ignore", divide="ignore"):
        neff = sk**2 / sk2
        p = np.where(okq, 3.0, np.where(okl, 2.0, 1.0))
        # reduced chi-square of the local fit (Birge ratio): inflate the errors where the
        # stations scatter more than their own errors say (model error, common practice)
        red = np.where(neff - p > 0.5, chi / sk * neff / (neff - p), 1.0)
        return np.sqrt(var * np.maximum(red, 1.0))


def _local_fit(group, Tc, sec, sigma, exclude: int = -1, nb=None, stats: bool = True):
    """Local regression of station values within groups (Gaussian kernel sigma, in stations).

    Stations within ``exclude`` positions of the target (itself included)
    get no weight: ``exclude=1`` predicts each station from the others
    beyond its immediate neighbours (h-block cross-validation). ``nb`` is a
    precomputed :func:`_neighbourhood` wide enough for ``sigma``.
    ``stats=False`` skips the errors (returned as NaN).

    Returns the smoothed values, their standard errors and the local
    polynomial coefficients (n, 3).
    """
    J = max(2, exclude + 3, int(math.ceil(3.0 * sigma)))
    if nb is None or nb[0].size < 2 * J + 1:
        nb = _neighbourhood(group, Tc, sec, J)
    K = _kernels(nb[0], [sigma], [exclude])
    coef, c, okq, okl, empty, W = _local_fit_rows(nb, np.broadcast_to(K[:, 0], nb[1].shape))
    Ts = coef[0].copy()
    se_s = _local_stats(nb, W, coef, c, okq, okl) if stats else np.full(Ts.size, np.nan)
    Ts[empty] = np.nan
    se_s[empty] = np.nan
    return Ts, se_s, coef.T.copy()


#: h-block cross-validation half-width (stations left out on each side of the predicted one).
_CV_BLOCK = 1
#: Standard errors of the CV score a wider kernel may lose (0 = the best score wins).
_CV_SE = 0.0

#: Candidate smoothing widths (Gaussian sigma, in stations) chosen per fault by cross-validation.
SMOOTHING_CANDIDATES = (0.6, 0.9, 1.3, 2.0, 3.0)


def smooth_chunk_task(args):
    """Run :func:`_smooth_chunk` on ``(group, T, se, sigma, floor)`` (what an engine maps over chunks)."""
    group, T, se, sigma, floor = args
    return _smooth_chunk(group, T, se, sigma, floor=floor)


def _smooth_profiles(group, T, se, sigma, *, chunk: int = 8192, mapper=None):
    """Smooth the along-strike profiles in chunks of whole faults (bounded memory).

    See :func:`_smooth_chunk`; ``group`` must be sorted (stations of a fault
    contiguous), and each chunk holds whole faults, so the result does not
    depend on the chunking. ``mapper(func, items) -> list`` (in order) may
    run the chunks in parallel (an engine's map); default a loop.
    """
    n = T.size
    if n <= chunk and mapper is None:
        return _smooth_chunk(group, T, se, sigma)
    starts = np.flatnonzero(np.r_[True, group[1:] != group[:-1]])
    cuts = [0]
    for st0 in starts[1:]:
        if st0 - cuts[-1] >= chunk:
            cuts.append(int(st0))
    cuts.append(n)
    # the error floor of the whole set, as an unchunked run would use
    fin = np.isfinite(se) & (se > 0)
    floor = float(np.median(se[fin])) * 0.1 if fin.any() else 1e-3
    items = [(group[a:b], T[a:b], se[a:b], sigma, floor) for a, b in zip(cuts[:-1], cuts[1:], strict=True)]
    parts = [smooth_chunk_task(it) for it in items] if mapper is None else mapper(smooth_chunk_task, items)
    out = [np.concatenate([p[k] for p in parts]) for k in range(4)]
    return (*out, np.concatenate([p[4] for p in parts], axis=0))


def _smooth_chunk(group, T, se, sigma, *, floor=None, use_jit: bool = True):
    """Robust local-regression smoothing of equally spaced station values within groups.

    Parameters
    ----------
    group : ndarray of int
        Fault of each station (stations sorted by fault and distance).
    T, se : ndarray
        Station values and standard errors (NaN where unusable).
    sigma : float or None
        Gaussian kernel sigma in stations; ``None`` chooses it per fault
        among :data:`SMOOTHING_CANDIDATES` by leave-one-out cross-validation;
        0 returns the stations as they are.
    floor : float, optional
        Smallest station error used (default a tenth of the median error).
    use_jit : bool
        Use the compiled kernels (:func:`faultmap.throw.smoothing_jit.hampel_flags`,
        :func:`faultmap.throw.smoothing_jit.smooth_stations`) when numba is available;
        ``False`` runs the array code below (the same results to rounding).

    Returns
    -------
    smoothed, smoothed_err, outlier, sigma_used : ndarray
    coef : ndarray, shape (n, 3)
        The local polynomial at each station (value, slope, curvature per
        station spacing), for locating a maximum between stations.

    Notes
    -----
    Hampel (1974, J. Am. Statist. Assoc. 69) identifier (running median of
    5, 3 robust deviations), then locally weighted regression (Cleveland
    1979, J. Am. Statist. Assoc. 74) with Gaussian kernel weights times
    inverse variances: quadratic with two stations on both sides, linear
    near the ends. A quadratic is reproduced exactly, so the peak of a
    smooth profile is not flattened as by a moving average. The width is
    chosen per fault from the inverse-variance weighted prediction error of
    each station from the others beyond its neighbours (h-block
    cross-validation of the smoother, h = 1: Burman, Chow & Nolan 1994,
    Biometrika 81; Cleveland & Devlin 1988, J. Am. Statist. Assoc. 83): a
    noisy plateau gets a wide kernel, an apex the stations resolve a narrow
    one. The maximum is then refined up to half a station either way on the
    local polynomial
    (:func:`faultmap.throw.fault_summaries._vertex_between_stations`). The
    error is the propagated station error, inflated by the local reduced
    chi-square where stations scatter more than their errors say.
    """
    compiled = use_jit and jit.ENABLED
    outlier = hampel_flags(group, T, se) if compiled else _hampel(group, T, se)
    Tc = np.where(outlier, np.nan, T)
    # an error of exactly zero (a noise-free plane) is usable: it takes the error floor
    sec = np.where(np.isfinite(se) & (se >= 0), se, np.nan)
    if floor is None:
        pos = sec > 0
        floor = float(np.median(sec[pos])) * 0.1 if pos.any() else 1e-3
    sec = np.maximum(np.nan_to_num(sec, nan=np.inf), max(floor, 1e-6))
    if sigma is not None and sigma <= 0:
        coef = np.c_[Tc, np.zeros(T.size), np.zeros(T.size)]
        return Tc, np.where(np.isfinite(Tc), sec, np.nan), outlier, np.zeros(T.size), coef
    if sigma is not None:
        if compiled:
            J = max(2, int(math.ceil(3.0 * float(sigma))))
            Kf = _kernels(np.arange(-J, J + 1, dtype=float), [float(sigma)], [-1])
            Ts, se_s, _, coef = smooth_stations(group, Tc, sec, None, Kf, 0, 0.0)
        else:
            Ts, se_s, coef = _local_fit(group, Tc, sec, float(sigma))
        return Ts, se_s, outlier, np.full(T.size, float(sigma)), coef
    g0 = int(group.min()) if group.size else 0
    group = group - g0  # chunks carry global fault indices
    n_g = int(group.max()) + 1 if group.size else 0
    if compiled:
        J = max(2, int(math.ceil(3.0 * max(SMOOTHING_CANDIDATES))))
        x = np.arange(-J, J + 1, dtype=float)
        m = len(SMOOTHING_CANDIDATES)
        Kcv = _kernels(x, list(SMOOTHING_CANDIDATES), [_CV_BLOCK] * m)
        Kf = _kernels(x, list(SMOOTHING_CANDIDATES), [-1] * m)
        Ts, se_s, pick, coef = smooth_stations(group, Tc, sec, Kcv, Kf, n_g, _CV_SE)
        return Ts, se_s, outlier, np.asarray(SMOOTHING_CANDIDATES)[pick], coef
    nb = _neighbourhood(group, Tc, sec, max(2, int(math.ceil(3.0 * max(SMOOTHING_CANDIDATES)))))
    m = len(SMOOTHING_CANDIDATES)
    # every candidate width predicts each station from the others beyond its neighbours, in one set of
    # matrix products: h-block cross-validation (h = 1; Burman, Chow & Nolan 1994, Biometrika 81):
    # neighbouring stations share relief and DEM errors, so each is predicted without its two
    # neighbours, or correlated errors would reward too narrow a kernel
    K = _kernels(nb[0], list(SMOOTHING_CANDIDATES), [_CV_BLOCK] * m)
    pred = _local_values(nb, K)
    z2 = ((Tc[:, None] - pred) / sec[:, None]) ** 2
    good = np.isfinite(z2)
    scores = []
    ses = []
    for k in range(m):
        gk = group[good[:, k]]
        zk = z2[good[:, k], k]
        cnt = np.bincount(gk, minlength=n_g)
        with np.errstate(invalid="ignore", divide="ignore"):
            m1 = np.bincount(gk, zk, minlength=n_g) / cnt
            m2 = np.bincount(gk, zk**2, minlength=n_g) / cnt
            ses.append(np.sqrt(np.maximum(m2 - m1 * m1, 0.0) / np.maximum(cnt - 1, 1)))
        scores.append(m1)
    sc = np.vstack(scores)
    sc[~np.isfinite(sc)] = np.inf
    se_sc = np.vstack(ses)
    imin = np.argmin(sc, axis=0)
    cols = np.arange(n_g)
    # the widest kernel whose score is within _CV_SE standard errors of the best (with _CV_SE = 1 the
    # one-standard-error rule of Breiman et al. 1984; 0 keeps the best score, which peaked profiles
    # need: wider kernels cut their apex)
    # (scores equal to rounding, e.g. a short fault every width fits alike, count as ties)
    best_sc = sc[imin, cols]
    limit = best_sc + np.maximum(_CV_SE * np.nan_to_num(se_sc[imin, cols]), 1e-9 * np.abs(best_sc))
    ok_w = sc <= limit[None, :]
    best = (m - 1) - np.argmax(ok_w[::-1], axis=0)
    # a fault with nothing to cross-validate takes the middle width
    best[~np.isfinite(sc).any(axis=0)] = m // 2
    pick = best[group] if group.size else np.zeros(0, dtype=int)
    # the fit with the width each station's fault uses, and its errors
    kern = _kernels(nb[0], list(SMOOTHING_CANDIDATES), [-1] * m)
    coef, c, okq, okl, empty, W = _local_fit_rows(nb, kern[:, pick].T)
    Ts = np.where(empty, np.nan, coef[0])
    se_s = _local_stats(nb, W, coef, c, okq, okl)
    se_s[empty] = np.nan
    return Ts, se_s, outlier, np.asarray(SMOOTHING_CANDIDATES)[pick], coef.T.copy()
