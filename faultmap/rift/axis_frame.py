"""Along- and across-axis coordinates in the frame of a (curved) rift axis.

Works in the projected, metric working CRS. The across-axis coordinate is
positive to the right of the axis direction (towards azimuth axis + 90 deg);
beyond the ends, points are measured along the extended end segments.
Pure functions, no file I/O.
"""

from __future__ import annotations

import numpy as np
import shapely
from shapely.geometry import LineString

from faultmap.errors import GeometryError

__all__ = ["axis_coordinates", "axis_point_direction"]


def _axis_arrays(axis: LineString) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    if not isinstance(axis, LineString) or axis.is_empty or axis.length <= 0:
        raise GeometryError("the rift axis must be a non-empty LineString of positive length")
    xy = np.asarray(axis.coords, dtype=float)[:, :2]
    seg = np.diff(xy, axis=0)
    slen = np.hypot(seg[:, 0], seg[:, 1])
    keep = np.concatenate([[True], slen > 0])
    xy = xy[keep]
    seg = np.diff(xy, axis=0)
    slen = np.hypot(seg[:, 0], seg[:, 1])
    cum = np.concatenate([[0.0], np.cumsum(slen)])
    return xy, seg / slen[:, None], slen, cum


def axis_point_direction(axis: LineString, along_m: np.ndarray, *, smooth_m: float | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Points and unit tangents of the axis at along-axis distances.

    Parameters
    ----------
    axis : LineString
        Rift axis in the working CRS.
    along_m : array_like
        Distances along the axis from its first vertex, m. Values outside
        [0, length] are extrapolated along the end segments.
    smooth_m : float, optional
        Half-window (m) of the central difference giving the tangent; default
        1 % of the axis length.

    Returns
    -------
    xy : ndarray, shape (n, 2)
        Points on the (extended) axis, m.
    tangent : ndarray, shape (n, 2)
        Unit tangent (east, north) components.
    """
    xy, t, _, cum = _axis_arrays(axis)
    s = np.atleast_1d(np.asarray(along_m, dtype=float))

    def at(sv: np.ndarray) -> np.ndarray:
        k = np.clip(np.searchsorted(cum, sv, side="right") - 1, 0, len(t) - 1)
        return xy[k] + t[k] * (sv - cum[k])[:, None]

    h = 0.01 * cum[-1] if smooth_m is None else float(smooth_m)
    tan = at(s + h) - at(s - h)
    tan /= np.hypot(tan[:, 0], tan[:, 1])[:, None]
    return at(s), tan


def _locate_on_polyline(xy, t, cum, px, py) -> np.ndarray:
    """Distance along the polyline of the nearest polyline point to each point, m.

    The nearest segment of each point comes from a spatial index of the segments (n log m for n
    points and m segments); the distance is then the projection on it, clipped to the segment. The
    same values as ``shapely.line_locate_point`` (to rounding), which walks every segment per point.
    """
    if px.size == 0:
        return np.zeros(0)
    segs = shapely.linestrings(np.stack([xy[:-1], xy[1:]], axis=1))
    pts = shapely.points(px, py)
    which, k = shapely.STRtree(segs).query_nearest(pts, all_matches=False)
    seg_of = np.empty(px.size, dtype=np.int64)
    seg_of[which] = k
    slen = np.diff(cum)
    u = (px - xy[seg_of, 0]) * t[seg_of, 0] + (py - xy[seg_of, 1]) * t[seg_of, 1]
    return cum[seg_of] + np.clip(u, 0.0, slen[seg_of])


def axis_coordinates(axis: LineString, x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Along- and across-axis coordinates of points in a (curved) axis frame.

    Parameters
    ----------
    axis : LineString
        Rift axis in the working CRS.
    x, y : array_like
        Point coordinates in the working CRS, m.

    Returns
    -------
    along_m : ndarray
        Distance along the axis of the nearest axis point, m; points beyond an
        end are measured along the extended end segment (negative before the
        start, beyond the length after the end).
    across_m : ndarray
        Signed perpendicular distance, m, positive to the right of the axis
        direction.
    """
    xy, t, _, cum = _axis_arrays(axis)
    px = np.asarray(x, dtype=float).ravel()
    py = np.asarray(y, dtype=float).ravel()
    s = _locate_on_polyline(xy, t, cum, px, py)
    k = np.clip(np.searchsorted(cum, s, side="right") - 1, 0, len(t) - 1)
    q = xy[k] + t[k] * (s - cum[k])[:, None]
    dx = px - q[:, 0]
    dy = py - q[:, 1]
    tk = t[k]
    across = dx * tk[:, 1] - dy * tk[:, 0]
    ext = dx * tk[:, 0] + dy * tk[:, 1]
    at_end = (s <= 0.0) | (s >= cum[-1])
    along = s + np.where(at_end, ext, 0.0)
    return along, across

