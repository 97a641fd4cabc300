"""The smallest throw the DEM resolves: one rule for every tool that needs a detection limit."""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from faultmap.errors import ParameterError

__all__ = ["detection_throw_m", "station_errors"]


def detection_throw_m(
    *,
    throw_err_m: ArrayLike | None = None,
    pixel_size_m: float | None = None,
    k_sigma: float = 2.0,
) -> float:
    """Smallest throw resolved by the DEM, m.

    Parameters
    ----------
    throw_err_m : array_like, optional
        1-sigma throw errors of the measured stations, m (NaN ignored).
    pixel_size_m : float, optional
        DEM pixel size, m. Used when no throw error is available.
    k_sigma : float
        Multiple of the median throw error taken as detectable (default 2).

    Returns
    -------
    float
        ``k_sigma * median(throw_err_m)`` when errors exist, else
        ``pixel_size_m``; NaN when neither is given.

    Notes
    -----
    Our rule, not a published one, and the one rule of every tool (scaling's
    detection limit of sizes, transect's sub-resolution correction): a throw
    is taken as detectable when it exceeds ``k_sigma`` times the typical
    station measurement error (a 2-sigma detection is common practice). Without errors, a scarp one pixel high
    over one pixel (a 45 deg step) is taken as the smallest resolvable
    offset.
    """
    if k_sigma <= 0:
        raise ParameterError(f"k_sigma must be positive, got {k_sigma!r}.")
    if throw_err_m is not None:
        err = np.asarray(throw_err_m, dtype=float)
        err = err[np.isfinite(err) & (err > 0)]
        if err.size:
            return float(k_sigma * np.median(err))
    if pixel_size_m is not None and np.isfinite(pixel_size_m) and pixel_size_m > 0:
        return float(pixel_size_m)
    return float("nan")


def station_errors(stations) -> np.ndarray | None:
    """1-sigma throw errors of the stations measured ``ok`` (None without a station table), m."""
    if stations is None or "throw_err_m" not in getattr(stations, "columns", ()):
        return None
    err = stations["throw_err_m"].to_numpy(dtype=float)
    if "status" in stations.columns:
        err = err[stations["status"].astype(str).to_numpy() == "ok"]
    return err
