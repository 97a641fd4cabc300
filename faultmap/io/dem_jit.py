"""Compiled (numba) pass that sets the voids of a DEM window to NaN.

:func:`voids_to_nan` replaces the void values and +-inf of a float32 window
by NaN in one pass, in place: the common case of
:func:`faultmap.io.dem.read_window_array` (a float32 GeoTIFF), whose array
code stays the reference and runs instead when the kernels are disabled
(:mod:`faultmap.numerics.jit`) or a window has more than :data:`MAX_VOIDS`
void values. ``tests/throw/test_kernels.py`` compares them. The kernel
releases the GIL. :data:`ENABLED` (that of :mod:`faultmap.numerics.jit`)
says whether it is compiled.
"""

from __future__ import annotations

import numpy as np

from faultmap.numerics.jit import ENABLED, _jit

__all__ = ["ENABLED", "MAX_VOIDS", "voids_to_nan"]


@_jit
def _voids_to_nan(flat, v0, v1, v2, v3, v4, v5):  # pragma: no cover
    nan = np.float32(np.nan)
    inf = np.float32(np.inf)
    for k in range(flat.size):
        v = flat[k]
        # branch-free, so the loop vectorises; a NaN void value never matches
        bad = (abs(v) == inf) | (v == v0) | (v == v1) | (v == v2) | (v == v3) | (v == v4) | (v == v5)
        flat[k] = nan if bad else v


#: Most void values :func:`voids_to_nan` takes at once.
MAX_VOIDS = 6


def voids_to_nan(arr, voids):
    """Set void values and +-inf of a float32 array to NaN, in place, in one pass (compiled).

    Parameters
    ----------
    arr : ndarray of float32, C-contiguous, writeable
    voids : sequence of float
        Up to :data:`MAX_VOIDS` void values, compared as float32 (the file's
        own type); NaN entries are ignored (NaN stays NaN anyway).
    """
    v = [np.float32(x) for x in voids if not np.isnan(x)]
    if len(v) > MAX_VOIDS:
        raise ValueError(f"at most {MAX_VOIDS} void values, got {len(v)}")
    v += [np.float32(np.nan)] * (MAX_VOIDS - len(v))
    _voids_to_nan(arr.reshape(-1), *v)
