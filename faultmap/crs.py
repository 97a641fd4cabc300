"""Choosing and applying the working CRS (projected, metric)."""

from __future__ import annotations

import math

import numpy as np
from pyproj import CRS

from faultmap.errors import CRSError

__all__ = ["local_metric_crs", "check_metric", "meridian_convergence_deg", "true_to_grid_azimuth"]


def local_metric_crs(lon: float, lat: float) -> CRS:
    """Return a UTM CRS (WGS 84) for the zone holding (lon, lat), degrees.

    Near the poles (|lat| > 84) a polar stereographic CRS is returned.

    Notes
    -----
    UTM zones are 6 degrees wide (zone = floor((lon + 180) / 6) + 1); the
    scale factor within a zone stays within 0.9996-1.0010 (common practice).
    """
    if not (math.isfinite(lon) and math.isfinite(lat)):
        raise CRSError("cannot choose a local CRS: the data's centre is not finite.")
    if lat > 84:
        return CRS.from_epsg(3413)
    if lat < -80:
        return CRS.from_epsg(3031)
    zone = int(math.floor(((lon + 180.0) % 360.0) / 6.0)) + 1
    return CRS.from_epsg((32600 if lat >= 0 else 32700) + zone)


def check_metric(crs: CRS, *, where: str) -> None:
    """Raise unless ``crs`` is projected with metre units."""
    if crs.is_geographic:
        raise CRSError(f"{where}: geographic CRS {crs.name}; a projected metric CRS is needed.")
    units = {ax.unit_name for ax in crs.axis_info if ax.direction in ("east", "north", "west", "south")}
    if units and not units <= {"metre", "meter", "m"}:
        raise CRSError(
            f"{where}: CRS {crs.name} has units {', '.join(sorted(units))}; reproject to a CRS in metres."
        )


def meridian_convergence_deg(crs, x, y) -> np.ndarray:
    """Meridian convergence at projected points: the angle from grid north to true north, degrees.

    Parameters
    ----------
    crs : pyproj.CRS or anything pyproj reads
        Projected working CRS.
    x, y : array_like
        Points in ``crs``, metres.

    Returns
    -------
    numpy.ndarray
        Convergence gamma in degrees (PROJ's sign: positive where true north lies west of grid north,
        e.g. east of the central meridian of a transverse Mercator zone in the northern hemisphere).
        A true azimuth ``a`` is the grid azimuth ``a - gamma``.

    Notes
    -----
    Computed for all points at once with ``pyproj.Proj(crs).get_factors(lon, lat)`` (PROJ's
    numerical derivatives of the projection); ``tests/frame/test_convergence.py`` checks it against
    the transverse Mercator series gamma = dlambda sin(phi) [1 + dlambda^2 cos^2(phi)/3 (1 + 3 eta^2
    + 2 eta^4) + ...] (Snyder 1987, USGS Professional Paper 1395; from memory).
    """
    from pyproj import Proj, Transformer

    crs = CRS.from_user_input(crs)
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    if x.size == 0:
        return np.zeros(x.shape)
    to_geo = Transformer.from_crs(crs, crs.geodetic_crs, always_xy=True)
    lon, lat = to_geo.transform(x, y)
    f = Proj(crs).get_factors(np.atleast_1d(lon), np.atleast_1d(lat), errcheck=False)
    return np.asarray(f.meridian_convergence, dtype=float).reshape(x.shape)


def true_to_grid_azimuth(azimuth_deg, convergence_deg) -> np.ndarray:
    """Grid azimuth (0-360) of a direction given from true north, with the convergence of :func:`meridian_convergence_deg`."""
    return (np.asarray(azimuth_deg, dtype=float) - np.asarray(convergence_deg, dtype=float)) % 360.0
