"""Compiled (numba) forms of the profile gradients and scarp edges of the scarp fits.

* :func:`profile_gradients` smooths each profile's gradient and finds its
  background slope: :func:`faultmap.throw.scarp_fit._profile_gradients`.
* :func:`scarp_edges` finds where each side's scarp ends:
  :func:`faultmap.throw.scarp_fit._scarp_edges`.

The array code of :mod:`faultmap.throw.scarp_fit` stays the reference and
runs instead when the kernels are disabled (:mod:`faultmap.numerics.jit`).
Both kernels repeat its float32 arithmetic operation by operation, so they
return the same numbers bit for bit (``tests/throw/test_kernels.py``
compares them). Each profile is handled on its own; the kernels release the
GIL and are serial inside.
"""

from __future__ import annotations

import numpy as np

from faultmap.numerics.jit import _jit, _sort_small

__all__ = ["profile_gradients", "scarp_edges"]

_F32 = np.float32


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
