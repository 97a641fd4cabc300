"""Geometry of transects: their lines, their crossings with fault traces, the traces beyond their ends.

Private helpers of :mod:`faultmap.extension.transect_measure` and
:mod:`faultmap.extension.transect_batches`, vectorised with shapely (no loop
over transects or faults). Nothing here touches files.
"""

from __future__ import annotations

import warnings

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely

from faultmap.errors import FaultmapWarning, InputError
from faultmap.extension.fault_inputs import _as_lines, _ids


def _azimuth_deg(dx: np.ndarray, dy: np.ndarray) -> np.ndarray:
    """Azimuth clockwise from grid north of the vector (dx east, dy north), degrees 0-360."""
    return np.degrees(np.arctan2(dx, dy)) % 360.0


def _local_azimuth(lines: np.ndarray, dist: np.ndarray) -> np.ndarray:
    """Azimuth of ``lines`` at distance ``dist`` along them (central difference), degrees."""
    length = shapely.length(lines)
    delta = np.minimum(1.0, 1e-3 * length)
    a = shapely.line_interpolate_point(lines, np.clip(dist - delta, 0, length))
    b = shapely.line_interpolate_point(lines, np.clip(dist + delta, 0, length))
    ca, cb = shapely.get_coordinates(a), shapely.get_coordinates(b)
    return _azimuth_deg(cb[:, 0] - ca[:, 0], cb[:, 1] - ca[:, 1])


def _transect_lines(transects: gpd.GeoDataFrame) -> tuple[gpd.GeoDataFrame, np.ndarray, np.ndarray, np.ndarray]:
    """Copy of the transects with ``transect_id`` (given and unique, or 1..n), their lines and lengths, m."""
    out = transects.copy()
    if "transect_id" in out.columns:
        tid = out["transect_id"].to_numpy()
        if pd.Index(tid).has_duplicates:
            raise InputError("transects: duplicate transect_id values; ids must be unique.")
    else:
        tid = np.arange(1, len(out) + 1)
        out["transect_id"] = tid
    tgeoms = _as_lines(out, tid, "transect")
    tlen = shapely.length(tgeoms)
    zero = ~(tlen > 0)
    if zero.any():
        raise InputError(f"transect {_ids(tid[zero])}: zero length; remove it or give it two distinct ends.")
    return out, tid, tgeoms, tlen


def _crossing_positions(
    tgeoms: np.ndarray,
    fgeoms: np.ndarray,
    *,
    tree: shapely.STRtree | None = None,
    warn_ids: np.ndarray | None = None,
):
    """Crossings of transects and traces, sorted along each transect: (ti, fi, t_pos, parts).

    One vectorised STRtree query and intersection. Where a transect runs
    along a trace, the middle of the shared stretch is the crossing; with
    ``warn_ids`` (transect ids) that is warned about, for the caller of the
    function that calls this one.
    """
    if tree is None:
        tree = shapely.STRtree(fgeoms)
    qi, qf = tree.query(tgeoms, predicate="intersects")
    inter = shapely.intersection(tgeoms[qi], fgeoms[qf])
    parts, pidx = shapely.get_parts(inter, return_index=True)
    ti, fi = qi[pidx], qf[pidx]
    keep = ~shapely.is_empty(parts)
    parts, ti, fi = parts[keep], ti[keep], fi[keep]
    overlap = shapely.get_type_id(parts) != 0
    if overlap.any():
        if warn_ids is not None:
            warnings.warn(
                f"transect {_ids(np.unique(warn_ids[ti[overlap]]))}: runs along a fault trace; the middle of the "
                "shared stretch is used as the crossing. Move the transect off the trace.",
                FaultmapWarning,
                stacklevel=3,
            )
        parts = parts.copy()
        parts[overlap] = shapely.line_interpolate_point(parts[overlap], 0.5, normalized=True)
    t_pos = shapely.line_locate_point(tgeoms[ti], parts)
    order = np.lexsort((t_pos, ti))
    parts, ti, fi, t_pos = parts[order], ti[order], fi[order], t_pos[order]
    return ti, fi, t_pos, parts


def _end_rays(tgeoms: np.ndarray, reach: float) -> tuple[np.ndarray, np.ndarray]:
    """Rays of length ``reach`` beyond both ends of each transect, along its end segments."""
    xy, idx = shapely.get_coordinates(tgeoms, return_index=True)
    first = np.r_[0, np.flatnonzero(np.diff(idx)) + 1]
    last = np.r_[first[1:] - 1, len(idx) - 1]

    def ray(p_end, p_prev):
        d = p_end - p_prev
        n = np.hypot(d[:, 0], d[:, 1])[:, None]
        u = np.divide(d, n, out=np.zeros_like(d), where=n > 0)
        return shapely.linestrings(np.stack([p_end, p_end + reach * u], axis=1))

    return ray(xy[first], xy[first + 1]), ray(xy[last], xy[last - 1])


def _ends_inside(tgeoms: np.ndarray, fgeoms: np.ndarray, tree: shapely.STRtree) -> np.ndarray:
    """'start', 'end', 'both' or '' per transect: faults lie beyond that end along its last segment."""
    nt = len(tgeoms)
    if nt == 0 or len(fgeoms) == 0:
        return np.full(nt, "", dtype=object)
    xy, idx = shapely.get_coordinates(tgeoms, return_index=True)
    first = np.r_[0, np.flatnonzero(np.diff(idx)) + 1]
    last = np.r_[first[1:] - 1, len(idx) - 1]
    b = np.vstack([shapely.total_bounds(fgeoms), shapely.total_bounds(tgeoms)])
    reach = 2.0 * np.hypot(b[:, 2].max() - b[:, 0].min(), b[:, 3].max() - b[:, 1].min()) + 1.0

    def ray(p_end: np.ndarray, p_prev: np.ndarray) -> np.ndarray:
        d = p_end - p_prev
        n = np.hypot(d[:, 0], d[:, 1])[:, None]
        u = np.divide(d, n, out=np.zeros_like(d), where=n > 0)
        a = p_end + 1e-6 * reach * u  # start just beyond the end, so a fault ending on it is not "beyond"
        return shapely.linestrings(np.stack([a, p_end + reach * u], axis=1))

    start_ray = ray(xy[first], xy[first + 1])
    end_ray = ray(xy[last], xy[last - 1])
    hit_s = np.zeros(nt, dtype=bool)
    hit_e = np.zeros(nt, dtype=bool)
    hit_s[np.unique(tree.query(start_ray, predicate="intersects")[0])] = True
    hit_e[np.unique(tree.query(end_ray, predicate="intersects")[0])] = True
    side = np.full(nt, "", dtype=object)
    side[hit_s & ~hit_e] = "start"
    side[hit_e & ~hit_s] = "end"
    side[hit_s & hit_e] = "both"
    return side
