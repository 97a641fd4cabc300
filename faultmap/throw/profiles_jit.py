"""Compiled (numba) form of the bilinear sampling of profiles.

:func:`bilinear_profiles` samples the DEM along both sides of many profiles:
the compiled form of :func:`faultmap.throw.profiles.sample_profiles`, which
stays the reference and runs instead when the kernels are disabled
(:mod:`faultmap.numerics.jit`). It repeats the reference's float32
arithmetic operation by operation, so it returns the same numbers bit for
bit (``tests/throw/test_kernels.py`` compares them). Each profile is handled
on its own, so results never depend on how the work was batched. The
kernel releases the GIL and is serial inside.
"""

from __future__ import annotations

import math

import numpy as np

from faultmap.numerics.jit import _jit

__all__ = ["bilinear_profiles"]

_F32 = np.float32


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
