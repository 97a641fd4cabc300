"""Robust surface fits on scarp profiles and the Caskey (1995) conversion.

Two things, as array operations over many profiles at once:

* :func:`separation_from_throw` / :func:`throw_from_separation`: vertical
  separation of a planar surface offset by a dip-slip fault (Caskey 1995).
* :func:`fit_profile_matrix`: both sides of many scarp profiles: the scarp
  zone left out of the fits, the far-field lines (robust straight lines,
  :func:`faultmap.throw.robust_lines.robust_line_fits`) and the separation.
"""

from __future__ import annotations

import warnings as _warnings

import numpy as np

from faultmap.numerics import jit
from faultmap.throw.robust_lines import _fit_windows
from faultmap.throw.scarp_fit_jit import profile_gradients, scarp_edges

__all__ = [
    "separation_from_throw",
    "throw_from_separation",
    "fit_profile_matrix",
]

_F32 = np.float32


# ---------------------------------------------------------------------------
# Caskey (1995): vertical separation <-> throw
# ---------------------------------------------------------------------------
def separation_from_throw(throw_m, *, dip_deg, surface_slope_deg):
    """Vertical separation of a planar ground surface offset by a dip-slip fault.

    Parameters
    ----------
    throw_m : array_like
        Throw (vertical component of the dip slip), metres.
    dip_deg : array_like
        Fault dip, degrees (0 < dip <= 90).
    surface_slope_deg : array_like
        Slope of the ground surface in the dip direction, degrees, positive
        when the surface descends towards the hanging wall (the usual
        range-front case), negative when it rises towards it.

    Returns
    -------
    ndarray
        Vertical separation measured at the fault, metres.

    Notes
    -----
    Caskey (1995, J. Struct. Geol. 17): with the hanging wall moved down by
    the throw T and away by the heave h = T / tan(dip),
    VS = T - h tan(theta) when the surface slopes down in the dip direction,
    VS = T + h tan(theta) the other way. One formula covers both with a
    signed slope: VS = T (1 - tan(theta) / tan(dip)).
    """
    t = np.asarray(throw_m, dtype=float)
    td = np.tan(np.radians(np.asarray(dip_deg, dtype=float)))
    ts = np.tan(np.radians(np.asarray(surface_slope_deg, dtype=float)))
    return t * (1.0 - ts / td)


def throw_from_separation(vert_sep_m, *, dip_deg, surface_slope_deg):
    """Throw from the vertical separation of a planar surface.

    The inverse of :func:`separation_from_throw`.

    Notes
    -----
    Caskey (1995): T = VS tan(dip) / (tan(dip) - tan(theta)), theta the
    surface slope, positive descending towards the hanging wall.
    """
    vs = np.asarray(vert_sep_m, dtype=float)
    td = np.tan(np.radians(np.asarray(dip_deg, dtype=float)))
    ts = np.tan(np.radians(np.asarray(surface_slope_deg, dtype=float)))
    with np.errstate(divide="ignore", invalid="ignore"):
        return vs * td / (td - ts)


# ---------------------------------------------------------------------------
# Row medians
# ---------------------------------------------------------------------------
def _row_median(A, valid):
    """Median (mean of the two middle values) of the ``valid`` entries of each row; NaN where none.

    Invalid entries become +inf and each row is sorted (numpy's vectorised
    sort is as fast as a selection for rows this short).
    """
    rows, w = A.shape
    cnt = np.count_nonzero(valid, axis=1)
    B = np.where(valid, A, _F32(np.inf))
    B.sort(axis=1)
    lo = np.take_along_axis(B, np.clip((cnt - 1) // 2, 0, w - 1)[:, None], axis=1)[:, 0].astype(float)
    hi = np.take_along_axis(B, np.clip(cnt // 2, 0, w - 1)[:, None], axis=1)[:, 0].astype(float)
    with np.errstate(invalid="ignore"):
        return np.where(cnt > 0, 0.5 * (lo + hi), np.nan)


# ---------------------------------------------------------------------------
# Fitting the two sides of many profiles at once
# ---------------------------------------------------------------------------
def _profile_gradients(Zc, lim, row_samples=None):
    """Smoothed outward gradient of each row and a robust background slope.

    Returns ``g`` (rows, k): central difference over 4 steps (2 at the
    ends), NaN at voids, and ``bg`` (rows,): median of every second
    gradient within the usable part of the row, the far-field slope a scarp
    stands out from (robust to a scarp or a neighbour's feature covering
    under half of the row).
    """
    R2, K = Zc.shape
    g = np.empty((R2, K), dtype=_F32)
    g[:, 0] = np.nan
    g[:, -1] = np.nan
    np.subtract(Zc[:, 4:], Zc[:, :-4], out=g[:, 2:-2])
    g[:, 2:-2] *= _F32(0.25)
    g[:, 1] = (Zc[:, 2] - Zc[:, 0]) * _F32(0.5)
    g[:, -2] = (Zc[:, -1] - Zc[:, -3]) * _F32(0.5)
    if row_samples is not None:
        # a row shorter than the matrix ends as if the matrix ended there
        kr = np.asarray(row_samples, dtype=np.int64)
        r = np.flatnonzero((kr < K) & (kr >= 3))
        if r.size:
            j = kr[r] - 2
            g[r, j] = (Zc[r, j + 1] - Zc[r, j - 1]) * _F32(0.5)
    sub = g[:, 1::2]
    dsub = np.arange(2, K + 1, 2, dtype=float)[: sub.shape[1]]
    use = np.isfinite(sub) & (dsub[None, :] <= lim[:, None])
    bg = _row_median(sub, use)
    bg = np.where(np.isfinite(bg), bg, 0.0).astype(_F32)
    return g, bg, Zc[:, 0]


def _scarp_edges(g, bg, z_first, scale, up, lim, n, m_run, grad_frac=0.25):
    """Where each side's scarp ends, from the excess gradient of the profile.

    A sample is undisturbed when the profile's gradient there, taken towards
    the other side's level and in excess of the row's background slope, is
    under ``grad_frac`` of the scarp's peak gradient and under three noise
    deviations of a 4-step difference. The peak is the larger of the jump
    across the trace and the steepest excess among the first five samples
    of either side. The edge is the first sample from which ``m_run``
    consecutive samples are undisturbed (a run test, robust to isolated
    spikes).

    Returns found (bool per row) and the edge distance in steps.
    """
    R2, K = g.shape
    upf = up.astype(_F32)
    ex = (g - bg[:, None]) * upf[:, None]
    cross = (z_first[:n] - z_first[n:]) * 0.5 * up[:n]
    with _warnings.catch_warnings():
        _warnings.simplefilter("ignore", RuntimeWarning)
        near = np.nanmax(np.concatenate([ex[:n, 1:6], ex[n:, 1:6]], axis=1), axis=1)
    peak = np.fmax(np.nan_to_num(cross, nan=0.0), np.nan_to_num(near, nan=0.0))
    thr = np.maximum(grad_frac * np.concatenate([peak, peak]), 1.06 * scale).astype(_F32)
    ok = ex < thr[:, None]  # NaN (void, or the unsmoothed ends) counts as disturbed
    run_ok = ok[:, : K - m_run + 1].copy()
    for k in range(1, m_run):
        run_ok &= ok[:, k : K - m_run + 1 + k]
    run_ok &= (np.arange(1, K - m_run + 2, dtype=float) + (m_run - 1))[None, :] <= lim[:, None]
    found = run_ok.any(axis=1)
    first = np.argmax(run_ok, axis=1)
    return found, (first + 1).astype(float)


def _merge(fit, part, rows):
    for k, v in part.items():
        fit[k][rows] = v
    return fit


def fit_profile_matrix(
    Z,
    lim_steps,
    *,
    w0_steps: float,
    far_min_steps: float,
    far_field_widths: float = 2.5,
    min_samples: int = 10,
    loss: str = "tukey",
    tuning: float = 4.685,
    iterations: int = 3,
    scarp_iterations: int = 3,
    tolerance_frac: float = 0.02,
    row_samples=None,
    use_jit: bool = True,
) -> dict:
    """Fit the far-field surfaces on both sides of many profiles.

    Parameters
    ----------
    Z : ndarray, shape (2 n, k)
        Profile samples. Row ``i < n`` is the - side of station ``i`` and row
        ``n + i`` its + side, each ordered outwards: column ``j`` lies
        ``j + 1`` steps from the trace. NaN = void or outside the raster.
    lim_steps : ndarray, shape (2 n,)
        Farthest usable distance of each side, in steps (profile end or a
        crossing trace).
    w0_steps : float
        Smallest scarp half-width, steps.
    far_min_steps : float
        Shortest stretch of far-field surface fitted on a side, steps.
    far_field_widths : float
        Far-field stretch in scarp widths (McCalpin 1987 practice: 2-3).
    min_samples : int
        Samples a side needs for its fit to be kept.
    loss, tuning, iterations
        Robust fit settings (:func:`faultmap.throw.robust_lines.robust_line_fits`).
    scarp_iterations : int
        Times the scarp edges are re-detected and the lines refitted.
    tolerance_frac : float
        Kept for compatibility; the scarp edges come from the profile's
        gradients (see Notes).
    row_samples : ndarray of int, shape (2 n,), optional
        Samples of each row when some rows are shorter than ``k`` (their
        remaining columns NaN): a row then gives the same result as in a
        matrix of its own length. Default ``k`` for all.
    use_jit : bool
        Use the compiled kernels (when numba is available) for the gradients
        and the scarp edges (:mod:`faultmap.throw.scarp_fit_jit`) and the robust
        fits (:mod:`faultmap.throw.robust_lines_jit`); ``False`` runs the array
        code they repeat (the same numbers).

    Returns
    -------
    dict of ndarray
        Per row (2 n): ``a`` (surface at the trace, Z units), ``b`` (slope
        outwards, Z units per step), ``var_a``, ``var_b``, ``scale``,
        ``rms``, ``n_used``, ``inlier_frac``, ``w`` (inner edge of the fit
        window, steps), ``hi`` (outer edge), ``edge_found`` (bool),
        ``need`` (half-length in steps a full-quality fit would need),
        ``ssr`` and ``sw`` (weighted residual sum of squares and sum of
        weights). Per station (n): ``vs`` (- side minus + side at the
        trace).

    Notes
    -----
    Scarp-profile practice (McCalpin 1987; Avouac 1993, J. Geophys. Res. 98,
    from memory): fit the footwall and hanging-wall surfaces beyond the
    scarp, over 2-3 scarp widths of undisturbed surface, and project both to
    the fault. A coarse robust line on the outer half of each side says
    which side is up and whether the separation is significant; the scarp
    edge on a side is then the first sample, going outwards, from which
    three consecutive samples are no steeper than a quarter of the scarp's
    peak gradient nor three noise deviations (a run test, robust to
    isolated noise spikes). A station is refitted only when its own scarp
    zones change, so its result depends on its own samples alone.
    """
    Z = np.asarray(Z, dtype=_F32)
    R2, K = Z.shape
    n = R2 // 2
    lim = np.minimum(np.asarray(lim_steps, dtype=float), K)
    valid = np.isfinite(Z)
    # reference elevation per station keeps float32 sums well conditioned
    h = min(3, K)
    head = np.concatenate([Z[:n, :h], Z[n:, :h]], axis=1)
    with np.errstate(all="ignore"), _warnings.catch_warnings():
        _warnings.simplefilter("ignore", RuntimeWarning)
        ref = np.nanmean(head, axis=1)
        miss = ~np.isfinite(ref)
        if miss.any():
            ref[miss] = np.nanmean(np.concatenate([Z[:n][miss], Z[n:][miss]], axis=1), axis=1)
    ref = np.nan_to_num(ref).astype(_F32)
    ref2 = np.concatenate([ref, ref])
    Zc = Z - ref2[:, None]  # NaN stays NaN
    Z0 = np.where(valid, Zc, _F32(0.0))
    w = np.full(R2, float(w0_steps))
    m_run = 3
    edge_found = np.ones(R2, dtype=bool)
    n_it = int(scarp_iterations)
    grads = None
    if n_it > 0 and K >= 10:
        if use_jit and jit.ENABLED:
            grads = (*profile_gradients(Zc, lim, row_samples), Zc[:, 0])
        else:
            grads = _profile_gradients(Zc, lim, row_samples)
    del Zc
    fitkw = dict(loss=loss, tuning=tuning)
    all_rows = np.arange(R2)
    prev_sig = np.zeros(n, dtype=bool)
    prev_q = np.zeros(n, dtype=_F32)
    fit = None
    redo = all_rows
    it = 0
    while True:
        coarse = it == 0 and n_it > 0
        if coarse:
            # coarse start: the outer half of each side, so a scarp of any width up to half the
            # profile leaves the first lines undisturbed
            lo = np.maximum(float(w0_steps), 0.5 * lim)
            hi = lim.copy()
            lo = np.where(hi - lo + 1 < min_samples, np.maximum(float(w0_steps), hi - min_samples + 1), lo)
        else:
            W_sc = w[:n] + w[n:]
            far = np.maximum(far_field_widths * W_sc, far_min_steps)
            lo = w
            hi = np.minimum(lim, w + np.concatenate([far, far]))
        init = None if fit is None else (fit["a"][redo], fit["b"][redo])
        part = _fit_windows(
            Z0,
            valid,
            redo,
            lo[redo],
            hi[redo],
            init=init,
            iterations=1 if coarse else iterations,
            max_iterations=1 if coarse else None,
            autocorr=not coarse,
            use_jit=use_jit,
            **fitkw,
        )
        fit = part if redo is all_rows else _merge(fit, part, redo)
        if it >= n_it:
            break
        a = fit["a"]
        vs = a[:n] - a[n:]
        se = np.sqrt(fit["var_a"][:n] + fit["var_a"][n:])
        sc = fit["scale"]
        noise = np.maximum(sc[:n], sc[n:])
        with np.errstate(invalid="ignore"):
            signif = (np.abs(vs) > 4.0 * se) & (np.abs(vs) > 4.0 * noise)
        q = np.sign(np.nan_to_num(vs)).astype(_F32)
        up = np.concatenate([q, -q])  # +1 on the higher (footwall) side, -1 on the lower
        # the gradients are fixed, so edges change only where the up side or the significance did
        todo = signif & (~prev_sig | (q != prev_q)) if it > 0 else signif
        if it > 0 and not todo.any():
            break  # the fit just made already used the final windows
        found = np.ones(R2, dtype=bool)
        edge = np.full(R2, float(w0_steps))
        if grads is not None and todo.any():
            si = np.flatnonzero(todo)
            rr = np.concatenate([si, si + n])
            g, bg, zf = grads
            if use_jit and jit.ENABLED:
                f_s, e_s = scarp_edges(g, bg, zf, sc[rr], up[rr], lim[rr], rr, si.size, m_run)
            else:
                f_s, e_s = _scarp_edges(g[rr], bg[rr], zf[rr], sc[rr], up[rr], lim[rr], si.size, m_run)
            found[rr] = f_s
            edge[rr] = e_s
        prev_sig, prev_q = signif, q
        failed = ~np.isfinite(vs)
        fail2 = np.concatenate([failed, failed])
        margin = np.maximum(1.0, 0.5 * edge)
        w_new = np.where(found, np.maximum(float(w0_steps), edge + margin), np.maximum(lim, w))
        # a side whose fit failed keeps its window (and its verdict) from the pass before
        # scarp zones only widen: a later, noisier verdict never shrinks a zone already seen
        keep = fail2 | ~np.concatenate([todo, todo])
        w_new = np.where(keep, w, np.maximum(w, w_new))
        edge_found = np.where(keep, edge_found, found)
        if it == 0:
            redo = all_rows  # from the coarse windows to the scarp-zone windows: every row
        else:
            moved = (w_new[:n] != w[:n]) | (w_new[n:] != w[n:])
            if not moved.any():
                break  # the fit just made already used these windows
            si = np.flatnonzero(moved)
            redo = np.concatenate([si, si + n])  # both sides: the far-field length uses both zones
        w = w_new
        it += 1
    n_used = fit["n"]
    with np.errstate(divide="ignore", invalid="ignore"):
        inl = np.where(n_used > 0, fit["inliers"] / n_used, 0.0)
    W_sc = w[:n] + w[n:]
    far = np.maximum(far_field_widths * W_sc, far_min_steps)
    need = w + np.concatenate([far, far])
    a = fit["a"] + ref2.astype(float)
    return {
        "a": a,
        "b": fit["b"],
        "var_a": fit["var_a"],
        "var_b": fit["var_b"],
        "scale": fit["scale"],
        "rms": fit["rms"],
        "n_used": n_used,
        "inlier_frac": inl,
        "w": w,
        "hi": hi,
        "edge_found": edge_found,
        "need": need,
        "vs": a[:n] - a[n:],
        "ssr": fit["ssr"],
        "sw": fit["inliers"],
    }
