"""Measurement stations along fault traces: positions, smoothed normals, crossings.

Pure, vectorised geometry used by :mod:`faultmap.throw.step`. Every function takes
arrays of shapely 2 geometries or coordinates and returns arrays; nothing
loops over stations in Python.

Conventions
-----------
* A trace's *side sign* ``s`` (+1 or -1) says which side of the digitised
  direction is the "+ side" of its profiles: ``s = +1`` when the + side is on
  the right of the trace as stored. The + side is the hanging wall when the
  dip direction is known, else a canonical side that does not depend on how
  the trace was digitised (the right of the trace's strike axis taken in
  [0, 180) degrees).
* Station distances are measured from the first vertex as stored.
* Stations sit symmetrically on the trace (same margin at both tips), so a
  reversed trace carries exactly the same stations.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import shapely

from faultmap.numerics import jit
from faultmap.throw.stations_jit import box_pairs

__all__ = [
    "StationSet",
    "side_signs",
    "strike_axis_deg",
    "station_distances",
    "points_along",
    "place_stations",
    "trace_segments",
    "crossing_limits",
]


@dataclass(frozen=True)
class StationSet:
    """Stations along a set of traces (all arrays of length ``n``).

    Attributes
    ----------
    line : ndarray of int
        Index of the trace (row in the input array) each station belongs to.
    dist_m : ndarray of float
        Distance along the trace from its first stored vertex, metres.
    x, y : ndarray of float
        Station coordinates on the trace, CRS units (metres).
    nx, ny : ndarray of float
        Unit horizontal normal pointing to the + side of the trace.
    """

    line: np.ndarray
    dist_m: np.ndarray
    x: np.ndarray
    y: np.ndarray
    nx: np.ndarray
    ny: np.ndarray

    def __len__(self) -> int:
        return int(self.line.size)

    def take(self, idx) -> StationSet:
        """Subset of the stations (boolean mask or integer index)."""
        return StationSet(
            *(np.asarray(getattr(self, f))[idx] for f in ("line", "dist_m", "x", "y", "nx", "ny"))
        )


def strike_axis_deg(lines) -> np.ndarray:
    """Length-weighted strike axis of each trace in [0, 180) degrees.

    The axis is the mean of the segment azimuths taken as axial data (angles
    doubled), so it does not depend on the digitising direction.

    Notes
    -----
    Axial mean by doubling angles: Mardia & Jupp (2000), Directional
    Statistics, sec. 9.3.2.
    """
    lines = np.asarray(lines)
    coords, idx = shapely.get_coordinates(lines, return_index=True)
    same = idx[1:] == idx[:-1]
    d = (coords[1:] - coords[:-1])[same]
    li = idx[1:][same]
    ln = np.hypot(d[:, 0], d[:, 1])
    a2 = 2.0 * np.arctan2(d[:, 0], d[:, 1])
    s = np.bincount(li, ln * np.sin(a2), minlength=len(lines))
    c = np.bincount(li, ln * np.cos(a2), minlength=len(lines))
    return (np.degrees(np.arctan2(s, c)) / 2.0) % 180.0


def side_signs(lines, dip_dir_deg=None) -> np.ndarray:
    """Which side of each trace (as stored) is the + side of its profiles.

    Parameters
    ----------
    lines : array_like of LineString
        Traces in a projected metric CRS.
    dip_dir_deg : array_like of float, optional
        Dip direction (azimuth towards the hanging wall), NaN where unknown.

    Returns
    -------
    ndarray of float
        +1 where the + side lies on the right of the stored direction, -1
        where it lies on the left. With a known dip direction the + side is
        the hanging wall; otherwise it is the right-hand side of the strike
        axis in [0, 180) (east-ish), independent of digitising direction.
    """
    lines = np.asarray(lines)
    n = len(lines)
    axis = np.radians(strike_axis_deg(lines))
    # + side vector: right of the canonical axis, or the dip direction
    mx, my = np.cos(axis), -np.sin(axis)  # right-normal of (sin a, cos a)
    if dip_dir_deg is not None:
        dd = np.radians(np.asarray(dip_dir_deg, dtype=float))
        known = np.isfinite(dd)
        mx = np.where(known, np.sin(dd), mx)
        my = np.where(known, np.cos(dd), my)
    start = shapely.get_coordinates(shapely.get_point(lines, 0))
    end = shapely.get_coordinates(shapely.get_point(lines, -1))
    cx, cy = (end - start).T
    # mean direction of the trace as stored: the chord, or the axis when the chord vanishes
    ax_x, ax_y = np.sin(axis), np.cos(axis)
    along = cx * ax_x + cy * ax_y
    chord_len = np.hypot(cx, cy)
    tiny = chord_len < 1e-9 * np.maximum(shapely.length(lines), 1.0)
    # direction of travel projected on the axis decides orientation
    tx = np.where(tiny, ax_x, np.sign(along + (along == 0)) * ax_x)
    ty = np.where(tiny, ax_y, np.sign(along + (along == 0)) * ax_y)
    rx, ry = ty, -tx  # right-normal of the stored direction
    s = np.where(rx * mx + ry * my >= 0, 1.0, -1.0)
    return s.reshape(n)


def station_distances(length_m, spacing_m) -> tuple[np.ndarray, np.ndarray]:
    """Distances of stations along traces, symmetric about each midpoint.

    ``k = max(1, floor(L / s))`` stations at spacing ``s``, centred on the
    trace so that both tips keep the same margin (between s/2 and s).

    Returns
    -------
    line : ndarray of int
        Trace index of each station.
    dist : ndarray of float
        Distance from the first vertex, metres.
    """
    L = np.asarray(length_m, dtype=float)
    s = np.broadcast_to(np.asarray(spacing_m, dtype=float), L.shape)
    k = np.maximum(1, np.floor(L / s + 1e-9)).astype(np.int64)
    line = np.repeat(np.arange(L.size), k)
    start = np.cumsum(k) - k
    j = np.arange(line.size) - start[line]
    offset = 0.5 * (L - (k - 1) * s)
    return line, offset[line] + j * s[line]


class _Polylines:
    """Vertices and cumulative lengths of many traces, for interpolating points along them."""

    def __init__(self, lines):
        coords, idx = shapely.get_coordinates(np.asarray(lines), return_index=True)
        n = len(lines)
        self.xy = coords
        nv = np.bincount(idx, minlength=n)
        self.first = np.cumsum(nv) - nv  # first vertex of each line
        self.nv = nv
        seg = np.hypot(*(coords[1:] - coords[:-1]).T)
        seg[idx[1:] != idx[:-1]] = 0.0  # no segment between two lines
        # cumulative length at every vertex, restarting at each line (float64, summed once)
        cum = np.concatenate([[0.0], np.cumsum(seg)])
        self.cum = cum[: coords.shape[0]] - np.repeat(cum[self.first], nv)
        self.length = np.zeros(n)
        has = nv > 0
        self.length[has] = self.cum[self.first[has] + nv[has] - 1]

    def points(self, line, dist) -> np.ndarray:
        """(x, y) at ``dist`` metres along ``line`` (indices), clamped to the trace; shape (m, 2)."""
        line = np.asarray(line, dtype=np.int64)
        dist = np.clip(np.asarray(dist, dtype=float), 0.0, self.length[line])
        f = self.first[line]
        last = f + np.maximum(self.nv[line] - 1, 0)
        # the segment [k, k + 1] holding each distance: binary search within the line's vertices
        lo = f.copy()
        hi = last.copy()
        span = int(self.nv.max(initial=1))
        while span > 1:
            mid = (lo + hi + 1) // 2
            right = self.cum[mid] <= dist
            lo = np.where(right, mid, lo)
            hi = np.where(right, hi, mid - 1)
            span = (span + 1) // 2
        k = np.minimum(lo, np.maximum(last - 1, f))
        k1 = np.minimum(k + 1, last)
        seg = self.cum[k1] - self.cum[k]
        with np.errstate(invalid="ignore", divide="ignore"):
            t = np.where(seg > 0, (dist - self.cum[k]) / seg, 0.0)
        t = np.clip(t, 0.0, 1.0)[:, None]
        return self.xy[k] + t * (self.xy[k1] - self.xy[k])


def points_along(lines, line, dist) -> np.ndarray:
    """Points at given distances along traces, as array operations.

    Parameters
    ----------
    lines : array_like of LineString
        Traces.
    line : array_like of int
        Trace (index into ``lines``) of each point.
    dist : array_like of float
        Distance from the trace's first vertex, metres (clamped to the
        trace).

    Returns
    -------
    ndarray, shape (m, 2)
        x, y of each point.

    Notes
    -----
    The same points as ``shapely.line_interpolate_point`` for distances
    within the trace (linear interpolation on the segment holding the
    distance, geometry), found by a binary search on the cumulative vertex
    distances of all traces at once.
    """
    return _Polylines(lines).points(line, dist)


def place_stations(lines, *, spacing_m, normal_window_m, side_sign) -> StationSet:
    """Stations every ``spacing_m`` with normals smoothed over a window.

    Parameters
    ----------
    lines : array_like of LineString
        Traces (projected metric CRS).
    spacing_m : float or array_like
        Station spacing per trace, metres.
    normal_window_m : float or array_like
        Length of trace over which the normal is averaged, metres.
    side_sign : array_like of float
        From :func:`side_signs`.

    Returns
    -------
    StationSet

    Notes
    -----
    The smoothed tangent at distance d is the chord between the trace points
    at ``d - w/2`` and ``d + w/2`` (clipped to the trace): that chord is the
    arc-length integral of the unit tangent over the window, i.e. a boxcar
    mean of the local direction, so digitising noise of the vertices does not
    swing the profiles (geometry).
    """
    lines = np.asarray(lines)
    poly = _Polylines(lines)
    L = shapely.length(lines)
    line, dist = station_distances(L, spacing_m)
    w = np.broadcast_to(np.asarray(normal_window_m, dtype=float), L.shape)[line]
    p = poly.points(line, dist)
    lo = np.clip(dist - 0.5 * w, 0.0, L[line])
    hi = np.clip(dist + 0.5 * w, 0.0, L[line])
    pa = poly.points(line, lo)
    pb = poly.points(line, hi)
    t = pb - pa
    tn = np.hypot(t[:, 0], t[:, 1])
    # a closed window chord (hairpin) falls back to the first-to-last direction of the trace
    bad = tn <= 1e-9 * np.maximum(w, 1.0)
    if bad.any():
        li = line[bad]
        t[bad] = poly.xy[poly.first[li] + poly.nv[li] - 1] - poly.xy[poly.first[li]]
        tn[bad] = np.hypot(t[bad, 0], t[bad, 1])
    tn = np.where(tn > 0, tn, 1.0)
    tx, ty = t[:, 0] / tn, t[:, 1] / tn
    sgn = np.asarray(side_sign, dtype=float)[line]
    return StationSet(line=line, dist_m=dist, x=p[:, 0], y=p[:, 1], nx=sgn * ty, ny=-sgn * tx)


def trace_segments(lines) -> tuple[np.ndarray, np.ndarray]:
    """All straight segments of the traces.

    Returns
    -------
    seg : ndarray, shape (m, 4)
        x0, y0, x1, y1 of each segment.
    owner : ndarray of int
        Index of the trace each segment belongs to.
    """
    coords, idx = shapely.get_coordinates(np.asarray(lines), return_index=True)
    same = idx[1:] == idx[:-1]
    seg = np.concatenate([coords[:-1][same], coords[1:][same]], axis=1)
    return seg, idx[1:][same]


def _overlapping(px, py, nx, ny, H, seg, *, use_jit=True):
    """Pairs (profile, segment) whose bounding boxes overlap."""
    ax, ay = px - H * nx, py - H * ny
    bx, by = px + H * nx, py + H * ny
    if use_jit and jit.ENABLED:
        q = np.c_[np.minimum(ax, bx), np.minimum(ay, by), np.maximum(ax, bx), np.maximum(ay, by)]
        sb = np.c_[
            np.minimum(seg[:, 0], seg[:, 2]),
            np.minimum(seg[:, 1], seg[:, 3]),
            np.maximum(seg[:, 0], seg[:, 2]),
            np.maximum(seg[:, 1], seg[:, 3]),
        ]
        return box_pairs(q, sb)
    prof = shapely.linestrings(np.stack([np.c_[ax, ay], np.c_[bx, by]], axis=1))
    tree = shapely.STRtree(shapely.linestrings(seg.reshape(-1, 2, 2)))
    return tree.query(prof)


def crossing_limits(
    stations: StationSet,
    half_length_m,
    lines,
    *,
    line_ids=None,
    station_ids=None,
    own_exclusion_m=0.0,
    use_jit: bool = True,
) -> tuple[np.ndarray, np.ndarray]:
    """Distance along each profile to the nearest trace it crosses, per side.

    Parameters
    ----------
    stations : StationSet
        Profile origins and + side normals.
    half_length_m : float or array_like
        Half-length of each profile, metres.
    lines : array_like of LineString
        Traces that can cross the profiles (the station's own trace included).
    line_ids, station_ids : array_like of int, optional
        Fault id of each line and of each station. A station's own trace
        counts only where it crosses farther than ``own_exclusion_m`` (a
        bend or hook of the same fault); default: ids are the line index and
        ``stations.line``.
    own_exclusion_m : float
        Crossings of the own trace closer than this are the station itself.
    use_jit : bool
        Find the candidate pairs with the compiled grid of
        :func:`faultmap.throw.stations_jit.box_pairs` (default, when numba is
        available) rather than a ``shapely.STRtree``: the same pairs.

    Returns
    -------
    lim_minus, lim_plus : ndarray of float
        Distance to the nearest crossing on the - and + side, ``inf`` where
        none lies within the half-length.

    Notes
    -----
    Candidates are the pairs of overlapping profile and segment bounding
    boxes (a uniform grid, or a shapely STRtree); for each candidate pair the
    crossing is then solved in closed form (2-D segment intersection:
    position along the profile and along the segment, geometry), all as
    array operations.
    """
    n = len(stations)
    lim_m = np.full(n, np.inf)
    lim_p = np.full(n, np.inf)
    if n == 0:
        return lim_m, lim_p
    lines = np.asarray(lines)
    seg, owner = trace_segments(lines)
    if seg.shape[0] == 0:
        return lim_m, lim_p
    H = np.broadcast_to(np.asarray(half_length_m, dtype=float), (n,))
    px, py, nx, ny = stations.x, stations.y, stations.nx, stations.ny
    # candidates: profile and segment bounding boxes overlap (STRtree query without a predicate)
    i, j = _overlapping(px, py, nx, ny, H, seg, use_jit=use_jit)
    if i.size == 0:
        return lim_m, lim_p
    # solve P + t n = A + u (B - A): t along the profile, u along the segment
    ax, ay, bx, by = seg[j, 0], seg[j, 1], seg[j, 2], seg[j, 3]
    ex, ey = bx - ax, by - ay
    ni, nyi = nx[i], ny[i]
    den = ni * ey - nyi * ex  # cross(n, e)
    qx, qy = ax - px[i], ay - py[i]
    elen = np.hypot(ex, ey)
    par = np.abs(den) <= 1e-12 * np.maximum(elen, 1e-300)
    with np.errstate(divide="ignore", invalid="ignore"):
        t = (qx * ey - qy * ex) / den
        u = (qx * nyi - qy * ni) / den
    eps = 1e-9
    hit = ~par & (u >= -eps) & (u <= 1.0 + eps) & (np.abs(t) <= H[i] * (1.0 + eps))
    if par.any():
        # a segment lying along the profile: take its nearer end, where it overlaps the profile
        pi = np.flatnonzero(par)
        off_line = np.abs(qx[pi] * nyi[pi] - qy[pi] * ni[pi])  # distance of A from the profile line
        ta = qx[pi] * ni[pi] + qy[pi] * nyi[pi]
        tb = (bx[pi] - px[i[pi]]) * ni[pi] + (by[pi] - py[i[pi]]) * nyi[pi]
        Hp = H[i[pi]]
        on = (off_line <= eps * np.maximum(Hp, 1.0)) & (np.minimum(ta, tb) <= Hp) & (np.maximum(ta, tb) >= -Hp)
        t[pi] = np.where(np.abs(ta) < np.abs(tb), ta, tb)
        hit[pi] = on
    i, j, t = i[hit], j[hit], t[hit]
    lid = np.arange(len(lines)) if line_ids is None else np.asarray(line_ids)
    sid = stations.line if station_ids is None else np.asarray(station_ids)
    own = lid[owner[j]] == sid[i]
    keep = np.isfinite(t) & ~(own & (np.abs(t) <= own_exclusion_m))
    i, t = i[keep], t[keep]
    pos = t > 0
    np.minimum.at(lim_p, i[pos], t[pos])
    np.minimum.at(lim_m, i[~pos], -t[~pos])
    return lim_m, lim_p
