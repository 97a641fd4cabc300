"""Robust straight-line fits of many lines at once (iteratively reweighted least squares).

:func:`robust_line_fits` fits one line per row of a matrix. Internally
(:func:`_fit_windows`) each fit's window of samples is copied into one column
of a compact (window samples x fits) matrix, fits of similar window length
together, so every pass touches only the samples the fits use, and every sum
over a window is a sum down the columns: numpy accumulates it sample by sample
for all fits at once (as fast as an elementwise pass), and each fit's sums,
hence its result, depend on its own samples only, never on which fits share
the matrix.
"""

from __future__ import annotations

import math

import numpy as np

from faultmap.numerics import jit
from faultmap.throw.robust_lines_jit import robust_windows

__all__ = ["CONVERGENCE_TOL", "MAX_ITERATIONS", "robust_line_fits"]

_F32 = np.float32


# ---------------------------------------------------------------------------
# Robust line fits, batched over many lines
# ---------------------------------------------------------------------------
# Layout: one line per *column* of a (w, lines) float32 matrix, w the samples of
# the fit window. Every sum over a window is then a sum over axis 0, which numpy
# accumulates sample by sample for all lines at once: as fast as an elementwise
# pass, and each line's sums depend only on its own samples (not on how many
# lines share the matrix or how far it is zero-padded), so results do not
# depend on how the work was split into batches.

#: A fit has converged when its line moves by less than this fraction of its residual scale.
CONVERGENCE_TOL = 0.01
#: Most reweighting passes a fit may take (unless ``iterations`` asks for more).
MAX_ITERATIONS = 10


def _colsum(A, out):
    """Sum of each column of ``A`` (w, lines) into ``out``, accumulated sample by sample.

    numpy adds the rows of a 2-D array one after the other for all columns
    at once; a single column would be summed pairwise instead, so it is
    accumulated explicitly (the same order, hence the same rounding).
    """
    if A.shape[1] == 1:
        out[0] = np.cumsum(A[:, 0], dtype=A.dtype)[-1] if A.shape[0] else 0.0
        return out
    return A.sum(axis=0, out=out)


def _sums(W, Z, dc, tmp, S32):
    """Normal-equation sums (sw, sd, sdd, sz, sdz) of every column: a (5, lines) float64 array."""
    _colsum(W, S32[0])
    np.multiply(W, dc, out=tmp)
    _colsum(tmp, S32[1])
    np.multiply(tmp, dc, out=tmp)
    _colsum(tmp, S32[2])
    np.multiply(W, Z, out=tmp)
    _colsum(tmp, S32[3])
    np.multiply(tmp, dc, out=tmp)
    _colsum(tmp, S32[4])
    return S32.astype(float)


def _solve_lines(S):
    """Weighted line z = a + b d per column from its normal-equation sums (float64; warnings off)."""
    sw, sd, sdd, sz, sdz = S
    det = sw * sdd - sd * sd
    ok = (sw > 1.5) & (det > 1e-9 * np.maximum(sw * sdd, 1e-30))
    b = np.where(ok, (sw * sdz - sd * sz) / det, np.nan)
    a = np.where(ok, (sz - b * sd) / sw, np.nan)
    return a, b


def _finite32(v):
    return np.where(np.isfinite(v), v, 0.0).astype(_F32)


def _residuals(Z, a, b, dc, out):
    np.multiply(dc, _finite32(b)[None, :], out=out)
    np.add(out, _finite32(a)[None, :], out=out)
    np.subtract(Z, out, out=out)
    return out


def _finish(Z, W, a, b, dc, tmp, R, autocorr):
    """Residual sums of final lines: (ssr, lag-1 products of weighted residuals, of weights)."""
    w, lines = Z.shape
    _residuals(Z, a, b, dc, R)
    WR = np.multiply(W, R, out=tmp)
    np.multiply(R, WR, out=R)
    out = np.zeros((3, lines), dtype=_F32)
    _colsum(R, out[0])
    if autocorr and w > 1:
        np.multiply(WR[1:], WR[:-1], out=R[1:])
        _colsum(R[1:], out[1])
        np.multiply(W[1:], W[:-1], out=R[1:])
        _colsum(R[1:], out[2])
    else:
        out[2] = 1.0
    return out


def _line_stats(a, b, S, F3):
    """Compute standard errors and fit statistics of lines from their sums (local abscissa)."""
    sw, sd, sdd = S[0], S[1], S[2]
    ssr, lag, wlag = (F3[k].astype(float) for k in range(3))
    det = sw * sdd - sd * sd
    rms = np.sqrt(ssr / sw)
    s2 = ssr / np.maximum(sw - 2.0, 1.0)
    # lag-1 autocorrelation of the weighted residuals
    rho = np.clip(np.where(ssr > 0, lag / ssr * sw / np.maximum(wlag, 1e-12), 0.0), 0.0, 0.92)
    infl = (1.0 + rho) / (1.0 - rho)
    var_a = s2 * sdd / det * infl
    var_b = s2 * sw / det * infl
    cov_ab = -s2 * sd / det * infl
    return var_a, var_b, cov_ab, rms, ssr, sw, det


def _median_fill(M):
    """Prepare :func:`_lower_median_cols` for the mask ``M`` (w, lines): ``~M``, median rank, counts."""
    notM = ~M
    cnt = M.shape[0] - np.count_nonzero(notM, axis=0)
    return notM, np.maximum((cnt - 1) // 2, 0)[:, None], cnt


def _lower_median_cols(U, fill, A):
    """Lower median of the valid entries of each column of ``U`` (w, lines; overwritten); 0 where none."""
    notM, rank, cnt = fill
    np.copyto(U, _F32(np.inf), where=notM)
    np.copyto(A, U.T)
    A.sort(axis=1)
    med = np.take_along_axis(A, rank, axis=1)[:, 0].astype(float)
    med[cnt == 0] = 0.0
    return med


def _irls(
    Z,
    M,
    d,
    *,
    loss,
    tuning,
    iterations,
    scale_floor=1e-3,
    init=None,
    autocorr=True,
    origin=None,
    max_iterations=None,
    tol=CONVERGENCE_TOL,
    span=None,
):
    """Robust lines for the columns of a compact (w, lines) matrix.

    ``Z`` (w, lines) float32 is zero outside ``M``; ``d`` (w,) is the
    abscissa shared by the lines, in local units; the absolute abscissa of
    line r is ``origin[r] + d`` (``origin`` None = 0), its window ends at
    ``d = span[r]`` (default the largest ``d``). ``init`` (a, b) and the
    returned lines are absolute. At least ``iterations`` reweighting
    passes are made, the residual scale (MAD) re-estimated at each of them;
    lines that still move by more than ``tol`` times their residual scale
    over the window go on with that scale held, up to ``max_iterations``
    passes in all (default ``MAX_ITERATIONS``). Converged lines leave the
    working matrices, so later passes are cheaper. See
    :func:`robust_line_fits`.
    """
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        return _irls_body(
            Z,
            M,
            d,
            loss=loss,
            tuning=tuning,
            iterations=int(iterations),
            scale_floor=scale_floor,
            init=init,
            autocorr=autocorr,
            origin=origin,
            max_iterations=max_iterations,
            tol=tol,
            span=span,
        )


def _irls_body(
    Z, M, d, *, loss, tuning, iterations, scale_floor, init, autocorr, origin, max_iterations, tol, span
):
    w, lines = Z.shape
    off = np.zeros(lines) if origin is None else np.asarray(origin, dtype=float)
    d = np.asarray(d, dtype=_F32)
    dc = d[:, None]
    # the ends of each line's own window (a line's convergence must not depend on its neighbours' windows)
    d_lo = float(d.min()) if d.size else 0.0
    d_hi = (
        np.full(lines, float(d.max()) if d.size else 0.0) if span is None else np.asarray(span, dtype=float)
    )
    Mf = M.astype(_F32)
    tmp = np.empty((w, lines), dtype=_F32)
    R = np.empty((w, lines), dtype=_F32)
    S32 = np.empty((5, lines), dtype=_F32)
    base_a = np.zeros(lines)
    base_b = np.zeros(lines)
    if init is not None:
        # work on the samples minus the starting line: small numbers keep float32 sums exact enough
        a0, b0 = (np.asarray(v, dtype=float) for v in init)
        good = np.isfinite(a0) & np.isfinite(b0)
        base_a = np.where(good, a0 + b0 * off, 0.0)
        base_b = np.where(good, b0, 0.0)
        if good.any():
            _residuals(Z, base_a, base_b, dc, R)
            Z = np.multiply(R, Mf)
    S = _sums(Mf, Z, dc, tmp, S32)
    n = np.rint(S[0]).astype(np.int64)
    a, b = _solve_lines(S)
    if init is not None:
        a = np.where(good, 0.0, a)
        b = np.where(good, 0.0, b)
    n_it = iterations
    if loss == "none" or n_it <= 0:
        if init is not None:
            a, b = _solve_lines(S)
        F3 = _finish(Z, Mf, a, b, dc, tmp, R, autocorr)
        scale = None
    else:
        cap = max(n_it, int(MAX_ITERATIONS if max_iterations is None else max_iterations))
        S_all = np.empty((5, lines))
        F3 = np.empty((3, lines), dtype=_F32)
        a_all = np.empty(lines)
        b_all = np.empty(lines)
        scale = np.empty(lines)
        ids = np.arange(lines)  # columns of the working matrices, as lines of the input
        fill = _median_fill(M)
        A = np.empty((lines, w), dtype=_F32)
        U = np.empty((w, lines), dtype=_F32)
        tukey = loss == "tukey"
        alive = np.ones(lines, dtype=bool)
        it = 0
        while True:
            _residuals(Z, a, b, dc, R)
            if it < n_it:
                # MAD about the current lines at each of the first passes: a start dragged by many
                # outliers (gullies) then still converges to the inliers' scale; then it is held
                np.abs(R, out=U)
                sc = np.maximum(1.4826 * _lower_median_cols(U, fill, A), scale_floor)
                inv = (1.0 / (tuning * sc)).astype(_F32)[None, :]
            np.multiply(R, inv, out=U)
            if tukey:
                np.multiply(U, U, out=U)
                np.subtract(_F32(1.0), U, out=U)
                np.maximum(U, _F32(0.0), out=U)
                np.multiply(U, U, out=U)
            else:  # huber: min(1, c s / |r|)
                np.abs(U, out=U)
                np.maximum(U, _F32(1.0), out=U)
                np.divide(_F32(1.0), U, out=U)
            np.multiply(U, Mf, out=U)
            S = _sums(U, Z, dc, tmp, S32)
            a_new, b_new = _solve_lines(S)
            # largest change of the line over its window
            da, db = a_new - a, b_new - b
            move = np.maximum(np.abs(da + db * d_lo), np.abs(da + db * d_hi))
            keep = np.isfinite(a_new)
            a = np.where(keep, a_new, a)
            b = np.where(keep, b_new, b)
            it += 1
            if it < n_it:
                continue
            # lines that have converged are final now, whatever the other lines do (so a line's
            # result never depends on which lines share its matrix)
            done = alive & ~(move >= tol * sc) if it < cap else alive  # NaN: nothing to gain
            n_done = int(np.count_nonzero(done))
            if n_done:
                if n_done == done.size:
                    fin = slice(None)
                    F3[:, ids] = _finish(Z, U, a, b, dc, tmp, R, autocorr)
                else:
                    fin = np.flatnonzero(done)
                    t2 = np.empty((w, n_done), dtype=_F32)
                    R2 = np.empty((w, n_done), dtype=_F32)
                    F3[:, ids[fin]] = _finish(Z[:, fin], U[:, fin], a[fin], b[fin], dc, t2, R2, autocorr)
                S_all[:, ids[fin]] = S[:, fin]
                a_all[ids[fin]] = a[fin]
                b_all[ids[fin]] = b[fin]
                scale[ids[fin]] = sc[fin]
                alive &= ~done
            n_alive = int(np.count_nonzero(alive))
            if n_alive == 0:
                break
            if n_alive > 0.6 * alive.size:
                continue  # compact the working matrices only once enough lines are done (the scale
                # is held by then, so the median's buffers are not needed any more)
            act = np.flatnonzero(alive)
            ids, Z, Mf, a, b, sc, d_hi = ids[act], Z[:, act], Mf[:, act], a[act], b[act], sc[act], d_hi[act]
            inv = inv[:, act]
            alive = alive[act]
            m = act.size
            tmp = np.empty((w, m), dtype=_F32)
            R = np.empty((w, m), dtype=_F32)
            U = np.empty((w, m), dtype=_F32)
            S32 = np.empty((5, m), dtype=_F32)
        a, b, S = a_all, b_all, S_all
    var_a, var_b, cov_ab, rms, ssr, sw, det = _line_stats(a, b, S, F3)
    if scale is None:
        scale = np.maximum(np.where(np.isfinite(rms), rms, scale_floor), scale_floor)
    # back to the absolute abscissa and the full samples: a = base_a + a' - (base_b + b') o
    b = b + base_b
    a = a + base_a - b * off
    var_a = var_a - 2.0 * off * cov_ab + off * off * var_b
    cov_ab = cov_ab - off * var_b
    bad = ~(sw > 1.5) | ~(det > 0)
    for arr in (a, b, var_a, var_b, cov_ab, rms, ssr):
        arr[bad] = np.nan
    return {
        "a": a,
        "b": b,
        "var_a": var_a,
        "var_b": var_b,
        "cov_ab": cov_ab,
        "scale": scale,
        "rms": rms,
        "n": n,
        "inliers": sw,
        "ssr": ssr,
    }


def robust_line_fits(
    Z,
    M,
    D,
    *,
    loss: str = "tukey",
    tuning: float = 4.685,
    iterations: int = 3,
    scale_floor: float = 1e-3,
    init: tuple[np.ndarray, np.ndarray] | None = None,
) -> dict:
    """Robust straight-line fits ``z = a + b d``, one per row, as array operations.

    Parameters
    ----------
    Z : ndarray, shape (rows, k)
        Values (float32 is fastest); entries outside ``M`` are ignored (may
        be NaN).
    M : ndarray of bool, shape (rows, k)
        Which samples each row's fit may use.
    D : ndarray, shape (k,)
        Abscissa shared by all rows.
    loss : {"tukey", "huber", "none"}
        Weight function of the iteratively reweighted least squares.
    tuning : float
        Tuning constant in units of the robust scale (Tukey 4.685, Huber 1.345).
    iterations : int
        Reweighting passes with a re-estimated scale (0 = ordinary least
        squares); fits whose line still moves then go on with the scale
        held until it moves by under 1 % of the residual scale
        (``CONVERGENCE_TOL``), at most ``MAX_ITERATIONS`` passes in all.
    scale_floor : float
        Smallest residual scale (same unit as Z), so that noise-free data do
        not turn every sample into an outlier.
    init : (a, b), optional
        Starting lines (warm start); default ordinary least squares.

    Returns
    -------
    dict of ndarray, shape (rows,)
        ``a``, ``b`` (intercept at d = 0 and slope), ``var_a``, ``var_b``,
        ``cov_ab`` (inflated for serial correlation), ``scale`` (robust
        residual scale), ``rms`` (weighted RMS of the residuals), ``n``
        (samples available), ``inliers`` (sum of final weights) and ``ssr``
        (weighted sum of squared residuals).

    Notes
    -----
    Iteratively reweighted least squares with Tukey's biweight or Huber's
    weights (Holland & Welsch 1977, Commun. Statist. A6; Huber 1981, Robust
    Statistics); the residual scale is the normalised median absolute
    deviation (1.4826 MAD) about the current lines, re-estimated at each of
    the first ``iterations`` passes (the median by selection,
    ``np.partition``, not by sorting), then held while the lines converge.
    Each pass is one closed-form weighted least-squares line per row, its
    normal-equation sums accumulated for all rows at once. Standard errors
    come from the weighted residual variance and are inflated by
    (1 + rho) / (1 - rho), rho the lag-one autocorrelation of the residuals
    (effective sample size of an AR(1) series; Bayley & Hammersley 1946),
    because neighbouring DEM samples are not independent.
    """
    Z = np.asarray(Z)
    M = np.asarray(M, dtype=bool)
    Z0 = np.ascontiguousarray(np.where(M, Z, 0.0).astype(_F32).T)
    return _irls(
        Z0,
        np.ascontiguousarray(M.T),
        np.asarray(D, dtype=_F32),
        loss=loss,
        tuning=tuning,
        iterations=iterations,
        scale_floor=scale_floor,
        init=init,
    )


#: Fit windows are grouped by length so that padding stays under this factor.
_WINDOW_GROWTH = 1.25
#: Windows up to this many samples share one group.
_WINDOW_MIN = 24


#: Padding (samples) worth one more group of fits: each group costs a fixed number of array calls.
_GROUP_COST = 16384


def _length_groups(L):
    """Index groups of windows of similar length: bins growing by ``_WINDOW_GROWTH``, small bins merged.

    A bin joins the group before it when padding the group's windows to the
    bin's length costs fewer samples than ``_GROUP_COST`` (the overhead of a
    separate group), so a few wide windows do not make many tiny groups.
    """
    if L.size == 0 or int(L.max()) <= _WINDOW_MIN:
        return [np.arange(L.size)]
    with np.errstate(divide="ignore"):
        b = np.where(
            L <= _WINDOW_MIN, 0, np.ceil(np.log(np.maximum(L, 1) / _WINDOW_MIN) / math.log(_WINDOW_GROWTH))
        )
    order = np.argsort(b, kind="stable")
    keys, starts = np.unique(b[order], return_index=True)
    ends = np.r_[starts[1:], order.size]
    groups = []
    cur, cur_w = None, 0
    for a, e in zip(starts, ends, strict=True):
        sel = order[a:e]
        w = int(L[sel].max())
        if cur is not None and sum(c.size for c in cur) * (w - cur_w) <= _GROUP_COST:
            cur.append(sel)
        else:
            if cur is not None:
                groups.append(np.concatenate(cur))
            cur = [sel]
        cur_w = w
    if cur is not None:
        groups.append(np.concatenate(cur))
    return groups


def _fit_windows(Z0, valid, rows, lo, hi, *, init=None, use_jit=True, **kw):
    """Robust lines of the samples ``lo <= d <= hi`` (steps, d = column + 1) of some rows.

    Each row's window is copied into one column of a compact (w, lines)
    matrix (local abscissa from the window's start; the result is converted
    back), rows of similar window length together, so no pass touches
    samples outside the windows. With ``use_jit`` (default) and numba
    available, the compiled per-row kernel
    :func:`faultmap.throw.robust_lines_jit.robust_windows` does the same arithmetic
    instead.
    """
    K = Z0.shape[1]
    s = np.clip(np.ceil(lo) - 1, 0, K).astype(np.int64)  # first column with d >= lo
    e = np.clip(np.floor(hi) - 1, -1, K - 1).astype(np.int64)  # last column with d <= hi
    L = np.maximum(e - s + 1, 0)
    nr = rows.size
    if use_jit and jit.ENABLED:
        mi = kw.get("max_iterations")
        cap = max(int(kw["iterations"]), int(MAX_ITERATIONS if mi is None else mi))
        return robust_windows(
            np.ascontiguousarray(Z0, dtype=_F32),
            np.ascontiguousarray(valid, dtype=bool),
            rows,
            s,
            L,
            init=init,
            loss=kw["loss"],
            tuning=kw["tuning"],
            iterations=kw["iterations"],
            max_iterations=cap,
            tol=kw.get("tol", CONVERGENCE_TOL),
            autocorr=kw.get("autocorr", True),
            scale_floor=kw.get("scale_floor", 1e-3),
        )
    out = None
    flatZ = Z0.reshape(-1)
    flatV = valid.reshape(-1)
    for sel in _length_groups(L):
        w = max(int(L[sel].max()), 2)
        j = np.arange(w)[:, None]
        idx = np.minimum(s[sel][None, :] + j, K - 1)
        idx += (rows[sel] * K)[None, :]
        M = flatV.take(idx)
        M &= j < L[sel][None, :]
        Zw = flatZ.take(idx)
        Zw *= M
        # local abscissa d = 1, 2, ... from each window's start (not centred on the matrix: a line's
        # sums then depend on its own samples only, not on how wide the other windows are)
        r = _irls(
            Zw,
            M,
            np.arange(1, w + 1, dtype=_F32),
            origin=s[sel].astype(float),
            span=np.maximum(L[sel], 1).astype(float),
            init=None if init is None else (init[0][sel], init[1][sel]),
            **kw,
        )
        if out is None:
            out = {k: np.empty(nr, dtype=v.dtype) for k, v in r.items()}
        for k, v in r.items():
            out[k][sel] = v
    return out
