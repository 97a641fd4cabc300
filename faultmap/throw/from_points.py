"""Throw stations from point measurements (field or seismic throws), without a DEM.

Each measurement point is snapped to the nearest trace within a tolerance (or to the nearest trace
sharing its key in a join field); its position along that trace becomes a station, and the stations
of each fault give the same along-strike profile, maximum, mean throw and heave integral as DEM
stations do (:func:`faultmap.throw.fault_summaries.summarise_faults`). Pure functions, no I/O.
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely

from faultmap.errors import InputError
from faultmap.throw.fault_summaries import summarise_faults
from faultmap.traces.attributes import parse_values, sigma_from_range

__all__ = ["snap_to_traces", "point_stations", "throws_from_points"]

#: Columns of ``throw_stations`` a point measurement gives itself (or that the summaries add); the
#: DEM route's other columns (:data:`faultmap.throw.step.STATION_COLUMNS`) are written as NaN so both
#: routes write one layout.
_POINT_COLUMNS = (
    "fault_id",
    "dist_m",
    "throw_m",
    "throw_err_m",
    "heave_m",
    "status",
    "throw_smooth_m",
    "throw_smooth_err_m",
    "outlier",
)


def snap_to_traces(points, lines, *, tolerance_m: float, point_keys=None, line_keys=None):
    """Nearest trace of each point, within a tolerance or among the traces sharing its key.

    Parameters
    ----------
    points : array_like of shapely Point
    lines : array_like of shapely LineString
    tolerance_m : float
        Largest distance from a point to its trace, m (not applied with keys).
    point_keys, line_keys : array_like, optional
        Join values: a point is snapped only to traces with the same key (a fault id field shared by
        both layers; a fault split into several traces keeps one key).

    Returns
    -------
    line_index : numpy.ndarray of int
        Index into ``lines`` (-1: no trace within the tolerance, or no trace with the key).
    dist_m : numpy.ndarray
        Distance along that trace from its first vertex, m (NaN where unsnapped).
    offset_m : numpy.ndarray
        Distance from the point to the trace, m (NaN where unsnapped).
    """
    pts = np.asarray(points, dtype=object)
    lines = np.asarray(lines, dtype=object)
    n = len(pts)
    idx = np.full(n, -1, dtype=np.int64)
    off = np.full(n, np.nan)
    if n == 0 or len(lines) == 0:
        return idx, np.full(n, np.nan), off
    if point_keys is None:
        tree = shapely.STRtree(lines)
        (pi, li), dist = tree.query_nearest(
            pts, max_distance=tolerance_m, return_distance=True, all_matches=False
        )
        idx[pi] = li
        off[pi] = dist
    else:
        # every (point, trace) pair sharing a key, then the nearest per point: no loop over keys
        pk = pd.DataFrame(
            {"key": pd.Series(np.asarray(point_keys, dtype=object)).astype(str), "p": np.arange(n)}
        )
        lk = pd.DataFrame(
            {"key": pd.Series(np.asarray(line_keys, dtype=object)).astype(str), "l": np.arange(len(lines))}
        )
        pairs = pk.merge(lk, on="key")
        if len(pairs):
            d = shapely.distance(pts[pairs["p"].to_numpy()], lines[pairs["l"].to_numpy()])
            pairs["d"] = d
            best = pairs.loc[pairs.groupby("p")["d"].idxmin()]
            idx[best["p"].to_numpy()] = best["l"].to_numpy()
            off[best["p"].to_numpy()] = best["d"].to_numpy()
    dist = np.full(n, np.nan)
    ok = idx >= 0
    dist[ok] = shapely.line_locate_point(lines[idx[ok]], pts[ok])
    return idx, dist, off


def point_stations(
    faults: gpd.GeoDataFrame,
    points: gpd.GeoDataFrame,
    *,
    fields: dict | None = None,
    tolerance_m: float,
    join_field: str | None = None,
    default_rel_err: float = 0.1,
    where: str = "throw_points",
) -> tuple[gpd.GeoDataFrame, list[str]]:
    """Stations on the traces from a layer of throw measurements.

    Parameters
    ----------
    faults : geopandas.GeoDataFrame
        Prepared traces (``fault_id``, ``dip_deg``, LineString geometry; with ``join_field`` also
        that column, as read from the traces).
    points : geopandas.GeoDataFrame
        Point layer in the same CRS with the throw field (``throw_m``, remappable with ``fields``;
        a number, a range or a triple) and optionally ``throw_err_m`` (1-sigma, m).
    fields : dict, optional
        Field-name mapping (``throw_m``, ``throw_err_m``).
    tolerance_m : float
        Largest distance of a point from its trace, m.
    join_field : str, optional
        Field present in both layers: each point goes to the nearest trace with its value.
    default_rel_err : float
        1-sigma error of a throw given without error or range, as a fraction of the throw.
    where : str
        Layer name for messages.

    Returns
    -------
    stations : geopandas.GeoDataFrame
        ``fault_id``, ``dist_m``, ``throw_m``, ``throw_err_m``, ``heave_m`` (= throw / tan dip),
        ``status`` (``ok``), ``offset_m`` (point to trace), ``source_fid`` (feature number in the
        point layer), the DEM-only columns as NaN, geometry the point's foot on the trace.
    warnings : list of str

    Raises
    ------
    InputError
        Not a point layer, no throw field, an unreadable or negative value (naming feature, field
        and value), or a join field missing from either layer.
    """
    fields = dict(fields or {})
    tname = fields.get("throw_m", "throw_m")
    ename = fields.get("throw_err_m", "throw_err_m")
    geoms = points.geometry.to_numpy()
    ids = np.arange(1, len(points) + 1)
    kinds = shapely.get_type_id(geoms)
    if len(points) and not np.all(kinds == 0):
        i = int(np.flatnonzero(kinds != 0)[0])
        raise InputError(
            f"{where}: feature {ids[i]} is not a Point; give a point layer of throw measurements."
        )
    if tname not in points.columns:
        have = ", ".join(str(c) for c in points.columns if c != points.geometry.name) or "none"
        raise InputError(
            f"{where}: no field '{tname}' for the throws; columns are: {have}. Map it with --field throw_m=COLUMN."
        )
    tv = parse_values(points[tname], field=tname, ids=ids, where=where, lower=0.0)
    err = sigma_from_range(tv)
    if ename in points.columns:
        e = parse_values(points[ename], field=ename, ids=ids, where=where, lower=0.0).preferred
        err = np.where(np.isfinite(e), e, err)
    warns: list[str] = []
    no_err = np.isfinite(tv.preferred) & ~np.isfinite(err)
    if no_err.any():
        warns.append(
            f"{where}: {int(no_err.sum())} throw(s) without error or range: 1-sigma error taken as "
            f"{100 * default_rel_err:g} % of the throw."
        )
        err = np.where(no_err, default_rel_err * tv.preferred, err)
    keys = None
    if join_field:
        for layer, df in (("traces", faults), (where, points)):
            if join_field not in df.columns:
                raise InputError(
                    f"{layer}: no field '{join_field}' to join throw points to traces; check join_field."
                )
        keys = (points[join_field].to_numpy(), faults[join_field].to_numpy())
    lines = faults.geometry.to_numpy()
    li, dist, off = snap_to_traces(
        geoms,
        lines,
        tolerance_m=tolerance_m,
        point_keys=None if keys is None else keys[0],
        line_keys=None if keys is None else keys[1],
    )
    use = (li >= 0) & np.isfinite(tv.preferred)
    lost = (li < 0) & np.isfinite(tv.preferred)
    if lost.any():
        how = (
            f"no trace with the same '{join_field}'"
            if join_field
            else f"farther than {tolerance_m:g} m from every trace"
        )
        shown = ", ".join(map(str, ids[lost][:10])) + (" ..." if lost.sum() > 10 else "")
        warns.append(f"{where}: {int(lost.sum())} point(s) {how} (features {shown}); they are not used.")
    fid = faults["fault_id"].to_numpy()[li[use]]
    dip = np.radians(faults["dip_deg"].to_numpy(dtype=float)[li[use]])
    T = tv.preferred[use]
    st = pd.DataFrame(
        {
            "fault_id": fid,
            "dist_m": dist[use],
            "throw_m": T,
            "throw_err_m": err[use],
            "heave_m": T / np.tan(dip),
            "status": np.full(int(use.sum()), "ok", dtype=object),
            "offset_m": off[use],
            "source_fid": ids[use],
        }
    )
    from faultmap.throw.step import STATION_COLUMNS

    for c in STATION_COLUMNS:
        if c not in _POINT_COLUMNS and c not in st.columns:
            st[c] = np.nan
    foot = shapely.get_coordinates(shapely.line_interpolate_point(lines[li[use]], dist[use]))
    st["x"], st["y"] = foot[:, 0], foot[:, 1]
    order = np.lexsort((st["dist_m"].to_numpy(), st["fault_id"].to_numpy()))
    st = st.take(order).reset_index(drop=True)
    geom = gpd.points_from_xy(st["x"], st["y"], crs=faults.crs)
    return gpd.GeoDataFrame(st.drop(columns=["x", "y"]), geometry=geom, crs=faults.crs), warns


def throws_from_points(
    faults: gpd.GeoDataFrame, stations: gpd.GeoDataFrame, *, smooth_stations: float = 0.0
) -> tuple[gpd.GeoDataFrame, gpd.GeoDataFrame]:
    """Per-fault throw fields from point stations, as the DEM route computes them.

    Parameters
    ----------
    faults : geopandas.GeoDataFrame
        Prepared traces.
    stations : geopandas.GeoDataFrame
        From :func:`point_stations`.
    smooth_stations : float
        Along-strike smoothing (Gaussian sigma in stations; 0: each measurement as it is).

    Returns
    -------
    faults, stations
        With the fields of :func:`faultmap.throw.fault_summaries.summarise_faults` and
        ``throw_source`` (``points`` where a fault has a usable point, else ``none``).

    Notes
    -----
    The maximum is read at a measured point (never between points), the mean throw and heave
    integral integrate the piecewise-linear profile through the points tapering to zero at both
    tips (Walsh & Watterson 1988, from memory): a maximum is only as good as the points' cover of
    the fault's peak.
    """
    xy = shapely.get_coordinates(stations.geometry.to_numpy())
    table = pd.DataFrame(stations.drop(columns=stations.geometry.name)).assign(x=xy[:, 0], y=xy[:, 1])
    f, st = summarise_faults(faults, table, smooth_stations=smooth_stations)
    out = gpd.GeoDataFrame(
        st.drop(columns=["x", "y"]), geometry=gpd.points_from_xy(st["x"], st["y"]), crs=faults.crs
    )
    out["throw_source"] = "points"
    has = np.isfinite(f["max_throw_m"].to_numpy(dtype=float))
    f["throw_source"] = np.where(has, "points", "none").astype(object)
    f["throw_profile"] = np.where(has, "points", "").astype(object)
    return f, out
