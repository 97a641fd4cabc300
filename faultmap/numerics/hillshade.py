"""Shaded relief of an elevation grid (for map backgrounds)."""

from __future__ import annotations

import numpy as np


def hillshade(
    z: np.ndarray,
    *,
    pixel_size_x_m: float,
    pixel_size_y_m: float,
    azimuth_deg: float = 315.0,
    altitude_deg: float = 45.0,
) -> np.ndarray:
    """Shaded relief of a north-up elevation grid, 0-1 (NaN where void).

    Parameters
    ----------
    z : numpy.ndarray
        Elevations, m, row 0 at the north edge.
    pixel_size_x_m, pixel_size_y_m : float
        Pixel size east and north, m (positive).
    azimuth_deg, altitude_deg : float
        Direction the light comes from (clockwise from north) and its
        elevation above the horizon, degrees (315 / 45: common practice).

    Returns
    -------
    numpy.ndarray
        cos of the angle between the surface normal and the light direction,
        clipped to [0, 1].

    Notes
    -----
    Lambertian shading of the surface normal from central-difference
    gradients (the usual hillshade formula; common practice).
    """
    z = np.asarray(z, dtype=float)
    if z.ndim != 2 or min(z.shape) < 2:
        return np.full(z.shape, np.nan)
    dz_drow, dz_dcol = np.gradient(z)
    dzdx = dz_dcol / pixel_size_x_m
    dzdy = -dz_drow / pixel_size_y_m  # rows increase southwards
    az, alt = np.radians(azimuth_deg), np.radians(altitude_deg)
    light = np.array([np.sin(az) * np.cos(alt), np.cos(az) * np.cos(alt), np.sin(alt)])
    norm = np.sqrt(1.0 + dzdx**2 + dzdy**2)
    shade = (-dzdx * light[0] - dzdy * light[1] + light[2]) / norm
    return np.clip(shade, 0.0, 1.0)
