"""Compiled (numba) search for the profiles and trace segments whose boxes overlap.

:func:`box_pairs` returns the same pairs as the ``shapely.STRtree`` query
of :func:`faultmap.throw.stations.crossing_limits` (``use_jit=False``),
from a uniform grid of cells; that query stays the reference and runs
instead when the kernels are disabled (:mod:`faultmap.numerics.jit`).
``tests/throw/test_kernels.py`` compares them. The kernels release the GIL
and are serial inside.
"""

from __future__ import annotations

import math

import numpy as np

from faultmap.numerics.jit import _jit

__all__ = ["box_pairs"]


@_jit
def _cells(b, k, x0, y0, inv_c, ncx, ncy):  # pragma: no cover
    """First and last grid column and row that box ``b[k]`` touches (clamped to the grid)."""
    cx0 = min(max(int(math.floor((b[k, 0] - x0) * inv_c)), 0), ncx - 1)
    cx1 = min(max(int(math.floor((b[k, 2] - x0) * inv_c)), 0), ncx - 1)
    cy0 = min(max(int(math.floor((b[k, 1] - y0) * inv_c)), 0), ncy - 1)
    cy1 = min(max(int(math.floor((b[k, 3] - y0) * inv_c)), 0), ncy - 1)
    return cx0, cx1, cy0, cy1


@_jit
def _grid_count(b, x0, y0, inv_c, ncx, ncy, counts):  # pragma: no cover
    for k in range(b.shape[0]):
        cx0, cx1, cy0, cy1 = _cells(b, k, x0, y0, inv_c, ncx, ncy)
        for cy in range(cy0, cy1 + 1):
            for cx in range(cx0, cx1 + 1):
                counts[cy * ncx + cx + 1] += 1


@_jit
def _grid_fill(b, x0, y0, inv_c, ncx, ncy, start, items):  # pragma: no cover
    fill = start[:-1].copy()
    for k in range(b.shape[0]):
        cx0, cx1, cy0, cy1 = _cells(b, k, x0, y0, inv_c, ncx, ncy)
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
        cx0, cx1, cy0, cy1 = _cells(q, i, x0, y0, inv_c, ncx, ncy)
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
