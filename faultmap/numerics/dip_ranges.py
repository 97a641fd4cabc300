"""Dip intervals of the Monte Carlo draws: a fault's own range where given, else the dip +- a half-range.

One rule for every Monte Carlo that draws dips uniformly (hazard slip rates from throw and age or from a
slip-rate field, transect heaves), so a fault-database range such as ``50-70`` or ``(50,60,70)``
(``dip_min_deg`` / ``dip_max_deg``, read by ``prepare``) means the same everywhere.
"""

from __future__ import annotations

import numpy as np

__all__ = ["dip_draw_bounds"]


def dip_draw_bounds(dip_deg, half_range_deg, dip_min_deg=None, dip_max_deg=None, *, min_dip_deg: float = 1.0):
    """Lower and upper dips of a uniform draw, per fault.

    Parameters
    ----------
    dip_deg : array_like
        Preferred dip of each fault, degrees.
    half_range_deg : float or array_like
        Half-width of the draw around ``dip_deg`` where a fault has no range of its own, degrees.
    dip_min_deg, dip_max_deg : array_like, optional
        A fault's own lower and upper dip, degrees (NaN where not given); each replaces its side of
        ``dip_deg`` +- ``half_range_deg``.
    min_dip_deg : float
        Lowest dip drawn (heave and horizontal rates grow without bound as the dip goes to 0), degrees.

    Returns
    -------
    lo, hi : numpy.ndarray
        Bounds in degrees, clipped to [``min_dip_deg``, 90] and widened to contain ``dip_deg``.
    """
    dip = np.asarray(dip_deg, dtype=float)
    half = np.asarray(half_range_deg, dtype=float)
    lo = np.clip(dip - half, min_dip_deg, 90.0)
    hi = np.clip(dip + half, min_dip_deg, 90.0)
    if dip_min_deg is not None:
        own = np.broadcast_to(np.asarray(dip_min_deg, dtype=float), lo.shape)
        lo = np.where(np.isfinite(own), np.clip(own, min_dip_deg, 90.0), lo)
    if dip_max_deg is not None:
        own = np.broadcast_to(np.asarray(dip_max_deg, dtype=float), hi.shape)
        hi = np.where(np.isfinite(own), np.clip(own, min_dip_deg, 90.0), hi)
    return np.minimum(lo, dip), np.maximum(hi, dip)
