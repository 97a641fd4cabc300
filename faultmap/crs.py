"""Choosing and applying the working CRS (projected, metric)."""

from __future__ import annotations

import math

from pyproj import CRS

from faultmap.errors import CRSError

__all__ = ["local_metric_crs", "check_metric"]


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
