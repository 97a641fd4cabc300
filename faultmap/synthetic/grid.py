"""Grids of the synthetic scenes: origin, shape and pixel-centre coordinates.

North-up grid with top-left corner ``origin_xy = (x0, y0)`` and square pixels
of ``pixel_size_m`` = ``px``; the value at row ``i``, column ``j`` is the
elevation at the pixel centre ``x = x0 + (j + 0.5) px``,
``y = y0 - (i + 0.5) px`` (see :mod:`faultmap.synthetic.builder`). Also the check of
positive sizes shared by the scene builders. Pure functions, no file I/O.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

import numpy as np
from rasterio.transform import Affine

from faultmap.errors import ParameterError

__all__ = ["grid_spec", "pixel_centres"]


def _positive(value: Any, name: str) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise ParameterError(f"{name} must be a number, got {value!r}") from None
    if not np.isfinite(v) or v <= 0:
        raise ParameterError(f"{name} must be a positive finite number, got {value!r}")
    return v


def grid_spec(
    bounds: Sequence[float], *, pixel_size_m: float, margin_m: float = 0.0
) -> dict[str, Any]:
    """Grid origin and shape covering ``bounds`` (keyword arguments for :func:`~faultmap.synthetic.builder.build_dem`).

    Parameters
    ----------
    bounds : (xmin, ymin, xmax, ymax)
        Area to cover, metres in the working CRS.
    pixel_size_m : float
        Pixel size, metres.
    margin_m : float
        Extra margin added on every side, metres.

    Returns
    -------
    dict
        ``{"origin_xy": (x0, y0), "pixel_size_m": px, "shape": (nrows, ncols)}``
        with ``(x0, y0)`` the top-left corner.
    """
    px = _positive(pixel_size_m, "pixel_size_m")
    xmin, ymin, xmax, ymax = (float(v) for v in bounds)
    if not (xmax > xmin and ymax > ymin):
        raise ParameterError("bounds must be (xmin, ymin, xmax, ymax) with xmax > xmin and ymax > ymin")
    m = float(margin_m)
    ncols = int(math.ceil((xmax - xmin + 2 * m) / px - 1e-9))
    nrows = int(math.ceil((ymax - ymin + 2 * m) / px - 1e-9))
    return {"origin_xy": (xmin - m, ymax + m), "pixel_size_m": px, "shape": (nrows, ncols)}


def pixel_centres(transform: Affine, shape: tuple[int, int]) -> tuple[np.ndarray, np.ndarray]:
    """Coordinates of pixel centres of a north-up grid.

    Parameters
    ----------
    transform : rasterio.Affine
        North-up transform ``Affine(px, 0, x0, 0, -px, y0)``.
    shape : (nrows, ncols)

    Returns
    -------
    x, y : numpy.ndarray
        1-D arrays: ``x[j] = x0 + (j + 0.5) px`` (length ncols) and
        ``y[i] = y0 - (i + 0.5) px`` (length nrows).
    """
    nrows, ncols = int(shape[0]), int(shape[1])
    x = transform.c + (np.arange(ncols) + 0.5) * transform.a
    y = transform.f + (np.arange(nrows) + 0.5) * transform.e
    return x, y

