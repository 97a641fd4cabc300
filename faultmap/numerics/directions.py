"""Directional statistics of axial data (strikes, trace segments).

One implementation of the doubled-angle mean used by every analysis that
averages strikes (prepare, throw linkage, transects, rift axis).
"""

from __future__ import annotations

import numpy as np
import shapely

__all__ = ["segment_azimuths", "axial_mean_deg", "axial_resultant_length"]


def segment_azimuths(lines) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Azimuth and length of every segment of every line.

    Returns
    -------
    line_index : ndarray of int
        Index of the line each segment belongs to.
    azimuth_deg : ndarray of float
        Segment azimuth, clockwise from grid north, 0-360, in the digitised
        direction.
    length_m : ndarray of float
        Segment length in CRS units.
    """
    coords, idx = shapely.get_coordinates(np.asarray(lines), return_index=True)
    same = idx[1:] == idx[:-1]
    d = coords[1:] - coords[:-1]
    d, li = d[same], idx[1:][same]
    az = np.degrees(np.arctan2(d[:, 0], d[:, 1])) % 360.0
    return li, az, np.hypot(d[:, 0], d[:, 1])


def axial_mean_deg(azimuth_deg, weights, groups=None, n_groups=None) -> np.ndarray:
    """Weighted mean of axial directions (modulo 180), by doubling angles.

    Parameters
    ----------
    azimuth_deg, weights : array_like
        Directions in degrees and their weights (e.g. segment lengths).
    groups : array_like of int, optional
        Group index of each direction; one mean per group.

    Returns
    -------
    ndarray
        Mean axis in [0, 180) degrees per group (NaN for a group with no weight).

    Notes
    -----
    Axial data are averaged as the direction of the resultant of the doubled
    angles (Mardia & Jupp 2000, Directional Statistics, sec. 9.3.2).
    """
    a = np.radians(np.asarray(azimuth_deg, dtype=float) * 2.0)
    w = np.asarray(weights, dtype=float)
    if groups is None:
        groups = np.zeros(a.shape, dtype=int)
        n_groups = 1
    n_groups = int(n_groups if n_groups is not None else (groups.max() + 1 if len(groups) else 0))
    s = np.bincount(groups, w * np.sin(a), minlength=n_groups)
    c = np.bincount(groups, w * np.cos(a), minlength=n_groups)
    out = (np.degrees(np.arctan2(s, c)) / 2.0) % 180.0
    out = np.where(np.isclose(out, 180.0, rtol=0.0, atol=1e-9), 0.0, out)
    out[(s == 0) & (c == 0)] = np.nan
    return out


def axial_resultant_length(azimuth_deg, weights) -> float:
    """Mean resultant length of weighted axial directions, 0 (no preferred axis) to 1 (all parallel).

    Notes
    -----
    R = |sum w (cos 2a, sin 2a)| / sum w (Mardia & Jupp 2000, sec. 9.3.2). Callers treat
    R below ~1e-9 as "no preferred direction".
    """
    a = np.radians(np.asarray(azimuth_deg, dtype=float) * 2.0)
    w = np.asarray(weights, dtype=float)
    total = float(w.sum())
    if not total > 0:
        return 0.0
    return float(np.hypot((w * np.cos(a)).sum(), (w * np.sin(a)).sum()) / total)
