"""Linkage zones: throw minima between the segments of linked fault systems.

The smoothed throw profiles of a system's segments are summed on the system's
strike axis (:func:`system_profile`); the lowest point of the sum between the
maxima of neighbouring segments is a linkage zone (:func:`linkage_zones`).
"""

from __future__ import annotations

import math

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely

from faultmap.numerics.directions import axial_mean_deg
from faultmap.throw.stations import strike_axis_deg

__all__ = ["system_profile", "linkage_zones"]


def _station_lookup(stations: pd.DataFrame) -> dict:
    """fault_id -> (x, y, throw, error) arrays of the usable stations (smoothed throw where given)."""
    tcol = "throw_smooth_m" if "throw_smooth_m" in stations.columns else "throw_m"
    ecol = "throw_smooth_err_m" if "throw_smooth_err_m" in stations.columns else "throw_err_m"
    t = stations[tcol].to_numpy(dtype=float)
    use = (stations["status"].to_numpy() == "ok") & np.isfinite(t)
    if "x" in stations.columns:
        xs, ys = stations["x"].to_numpy(dtype=float), stations["y"].to_numpy(dtype=float)
    else:
        xs, ys = stations.geometry.x.to_numpy(), stations.geometry.y.to_numpy()
    fid = stations["fault_id"].to_numpy()[use]
    xs, ys, t = xs[use], ys[use], t[use]
    e = np.nan_to_num(stations[ecol].to_numpy(dtype=float)[use])
    if fid.size == 0:
        return {}
    o = np.argsort(fid, kind="stable")
    fid, xs, ys, t, e = fid[o], xs[o], ys[o], t[o], e[o]
    keys, starts = np.unique(fid, return_index=True)
    ends = np.r_[starts[1:], fid.size]
    return {int(k): (xs[a:b], ys[a:b], t[a:b], e[a:b]) for k, a, b in zip(keys, starts, ends, strict=True)}


def system_profile(
    faults_sys, stations: pd.DataFrame, *, step_m: float | None = None, _lookup: dict | None = None
) -> dict | None:
    """Sum the throw of the segments of one linked system along its strike axis.

    Parameters
    ----------
    faults_sys : geopandas.GeoDataFrame
        The segments (``fault_id``, geometry) of one system.
    stations : pandas.DataFrame
        Finalised stations with ``x``, ``y`` (or Point geometry), ``status``,
        ``throw_smooth_m`` (or ``throw_m``) and its error.
    step_m : float, optional
        Spacing of the summed profile.

    Returns
    -------
    dict or None
        ``axis`` (unit vector of the strike axis), ``axis_deg``, ``centre``,
        ``grid`` (positions on the axis, m), ``total`` (summed throw, m),
        ``var`` (its variance) and ``segments``: (fault_id, line, positions,
        throws, errors) with each segment's profile tied to zero at its
        tips. None when fewer than two segments have usable stations.
    """
    lookup = _station_lookup(stations) if _lookup is None else _lookup
    lines = faults_sys.geometry.to_numpy()
    ax_deg = float(axial_mean_deg(strike_axis_deg(lines), shapely.length(lines))[0])
    ax = math.radians(ax_deg)
    ux, uy = math.sin(ax), math.cos(ax)
    c = shapely.get_coordinates(shapely.centroid(shapely.union_all(lines)))[0]
    prof = []
    for fid, line in zip(faults_sys["fault_id"].to_numpy(), lines, strict=True):
        got = lookup.get(int(fid))
        if got is None:
            continue
        xs, ys, t, e = got
        tips = shapely.get_coordinates(line)[[0, -1]]
        a = (xs - c[0]) * ux + (ys - c[1]) * uy
        at = (tips[:, 0] - c[0]) * ux + (tips[:, 1] - c[1]) * uy
        sa = np.r_[at.min(), a, at.max()]
        tv = np.r_[0.0, t, 0.0]
        ev = np.r_[0.0, e, 0.0]
        o = np.argsort(sa, kind="stable")
        prof.append((int(fid), line, sa[o], tv[o], np.nan_to_num(ev[o])))
    if len(prof) < 2:
        return None
    lo = min(p[2][0] for p in prof)
    hi = max(p[2][-1] for p in prof)
    diffs = [np.diff(p[2][1:-1]) for p in prof if p[2].size > 3]
    step = step_m or (float(np.median(np.concatenate(diffs))) if diffs else (hi - lo) / 50.0)
    step = max(step, (hi - lo) / 5000.0, 1e-6)
    grid = np.arange(lo, hi + step, step)
    tot = np.zeros(grid.size)
    var = np.zeros(grid.size)
    for _, _, sa, tv, ev in prof:
        inside = (grid >= sa[0]) & (grid <= sa[-1])
        tot += np.where(inside, np.interp(grid, sa, tv), 0.0)
        var += np.where(inside, np.interp(grid, sa, ev) ** 2, 0.0)
    return {
        "axis": (ux, uy),
        "axis_deg": ax_deg,
        "centre": c,
        "grid": grid,
        "total": tot,
        "var": var,
        "segments": prof,
    }


def linkage_zones(
    faults: gpd.GeoDataFrame, stations: pd.DataFrame, *, step_m: float | None = None
) -> gpd.GeoDataFrame:
    """Throw minima between the segments of linked fault systems.

    Parameters
    ----------
    faults : geopandas.GeoDataFrame
        ``fault_id``, ``system_id``, geometry.
    stations : pandas.DataFrame
        Finalised stations with ``throw_smooth_m`` (or ``throw_m``),
        ``throw_err_m``, ``x``, ``y``, ``status``.
    step_m : float, optional
        Spacing of the system's aggregate profile (default: the median
        station spacing).

    Returns
    -------
    geopandas.GeoDataFrame
        Points, one per minimum between neighbouring segments: ``system_id``,
        ``fault_ids`` ("a,b"), ``along_m`` (position on the system's strike
        axis), ``throw_min_m`` (summed throw of the segments at the
        minimum), ``throw_left_m``, ``throw_right_m`` (neighbouring maxima),
        ``deficit_m`` (mean of the maxima minus the minimum),
        ``deficit_frac``, ``deficit_err_m`` and ``significant``
        (deficit > 2 errors).

    Notes
    -----
    Segments of a linked system share displacement; where they overlap or
    link, the summed throw profile typically shows a deficit (relay ramps;
    Peacock & Sanderson 1991, J. Struct. Geol. 13, from memory). The summed
    throw of all segments is built on the system's strike axis (each
    segment's profile tapering to zero at its tips), and the lowest point
    between the maxima of each pair of neighbouring segments is reported.
    """
    cols = [
        "system_id",
        "fault_ids",
        "along_m",
        "throw_min_m",
        "throw_left_m",
        "throw_right_m",
        "deficit_m",
        "deficit_frac",
        "deficit_err_m",
        "significant",
    ]
    empty = gpd.GeoDataFrame(
        {c: [] for c in cols}, geometry=gpd.GeoSeries([], crs=faults.crs), crs=faults.crs
    )
    if "system_id" not in faults.columns or len(stations) == 0:
        return empty
    sysid = faults["system_id"].to_numpy()
    counts = pd.Series(sysid).value_counts()
    multi = counts.index[counts.to_numpy() > 1]
    rows = []
    geoms = []
    lookup = _station_lookup(stations)
    by_sys = {k: v for k, v in faults.loc[faults["system_id"].isin(multi)].groupby("system_id")}
    for sid in sorted(multi):
        sp = system_profile(by_sys[sid], stations, step_m=step_m, _lookup=lookup)
        if sp is None:
            continue
        grid, tot, var = sp["grid"], sp["total"], sp["var"]
        c, (ux, uy) = sp["centre"], sp["axis"]
        prof = sp["segments"]
        # neighbouring segments ordered by the position of their maxima
        peaks = sorted(((p[2][np.argmax(p[3])], p) for p in prof), key=lambda t: t[0])
        for (sa_pos, pa), (sb_pos, pb) in zip(peaks[:-1], peaks[1:], strict=True):
            between = (grid >= sa_pos) & (grid <= sb_pos)
            if between.sum() < 3:
                continue
            idx = np.flatnonzero(between)
            k = idx[np.argmin(tot[idx])]
            left = idx[idx <= k]
            right = idx[idx >= k]
            tl, tr = tot[left].max(), tot[right].max()
            tmin = tot[k]
            if not (tmin < tl and tmin < tr):
                continue
            deficit = 0.5 * (tl + tr) - tmin
            err = math.sqrt(
                var[k] + 0.25 * (var[left[np.argmax(tot[left])]] + var[right[np.argmax(tot[right])]])
            )
            p_axis = shapely.points(c[0] + grid[k] * ux, c[1] + grid[k] * uy)
            qa = shapely.line_interpolate_point(pa[1], shapely.line_locate_point(pa[1], p_axis))
            qb = shapely.line_interpolate_point(pb[1], shapely.line_locate_point(pb[1], p_axis))
            qa, qb = shapely.get_coordinates(qa)[0], shapely.get_coordinates(qb)[0]
            geoms.append(shapely.points(0.5 * (qa[0] + qb[0]), 0.5 * (qa[1] + qb[1])))
            a_id, b_id = sorted((pa[0], pb[0]))
            rows.append(
                {
                    "system_id": int(sid),
                    "fault_ids": f"{a_id},{b_id}",
                    "along_m": float(grid[k]),
                    "throw_min_m": float(tmin),
                    "throw_left_m": float(tl),
                    "throw_right_m": float(tr),
                    "deficit_m": float(deficit),
                    "deficit_frac": float(deficit / (0.5 * (tl + tr))) if tl + tr > 0 else np.nan,
                    "deficit_err_m": float(err),
                    "significant": bool(deficit > 2.0 * err),
                }
            )
    if not rows:
        return empty
    return gpd.GeoDataFrame(rows, geometry=geoms, crs=faults.crs)
