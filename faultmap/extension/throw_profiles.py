"""Throw along fault traces, from the throw stations or the fallback profile.

Pure functions; nothing here touches files. Shared by the transect sums
(:mod:`faultmap.extension.transect_measure`) and Kostrov summation
(:mod:`faultmap.extension.kostrov_pieces`, :mod:`faultmap.extension.kostrov_tiles`).

Main entry points
-----------------
:func:`throw_at`
    Throw (and its error) at given distances along given faults, from the
    station profiles (else a profile scaled to ``max_throw_m``).
:func:`faults_with_throw`
    Which faults have a throw known to :func:`throw_at`.
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely

from faultmap.extension.fault_inputs import _col

__all__ = ["throw_at", "faults_with_throw"]


def throw_at(
    faults: gpd.GeoDataFrame,
    stations: gpd.GeoDataFrame | None,
    fault_pos: np.ndarray,
    dist_m: np.ndarray,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Throw and its error at distances along faults, from the station profiles.

    Parameters
    ----------
    faults : geopandas.GeoDataFrame
        Fault traces with ``fault_id`` and, for the fallback, ``max_throw_m``,
        ``max_throw_err_m`` and optionally ``max_throw_dist_m``.
    stations : geopandas.GeoDataFrame or None
        Throw stations with ``fault_id``, ``dist_m``, ``throw_m``,
        ``throw_err_m``, ``status``. Only ``status == 'ok'`` stations with a
        finite throw are used. ``dist_m`` is recomputed from the point
        geometry when the column is missing.
    fault_pos : array of int
        Positional index (0..n-1) into ``faults`` of each query.
    dist_m : array of float
        Distance along the trace from its first vertex of each query, m
        (clipped to the trace).

    Returns
    -------
    throw_m, throw_err_m : numpy.ndarray
        Throw and 1-sigma error, m (NaN where nothing is known).
    source : numpy.ndarray of str
        ``stations`` (interpolated between ok stations, tapering linearly to 0
        at the tips), ``max_throw_profile`` (no ok station: fallback profile
        scaled to ``max_throw_m``) or ``none``.

    Notes
    -----
    All faults are interpolated in one ``numpy.interp`` call: each fault's
    profile is shifted to its own interval of a common axis (offset by the
    cumulative trace length plus a gap), so no loop over faults is needed.
    Throw is taken as 0 at both tips (displacement vanishes at the tip line
    of an isolated fault; common practice). The error at a tip is that of
    the nearest station. The fallback profile is ours: a two-sided parabola,
    T(x) = Tmax (1 - r^2), with r the distance from the point of maximum
    throw (``max_throw_dist_m``, else mid-trace) divided by the distance from
    that point to the tip on the same side; its error scales with T.
    """
    geoms = np.asarray(faults.geometry.values, dtype=object)
    length = shapely.length(geoms)
    nf = len(geoms)
    fq = np.asarray(fault_pos, dtype=np.int64)
    dq = np.clip(np.asarray(dist_m, dtype=float), 0.0, length[fq])
    n = len(fq)
    throw = np.full(n, np.nan)
    err = np.full(n, np.nan)
    source = np.full(n, "none", dtype=object)
    has = np.zeros(nf, dtype=bool)
    gap = 1.0 + 1e-3 * (length.max() if nf else 0.0)
    off = np.concatenate([[0.0], np.cumsum(length + gap)[:-1]]) if nf else np.zeros(0)

    if stations is not None and len(stations):
        sid = pd.Index(faults["fault_id"].to_numpy()).get_indexer(stations["fault_id"].to_numpy())
        st = _col(stations, "throw_m", np.nan)
        se = _col(stations, "throw_err_m", np.nan)
        status = stations["status"].astype(str).to_numpy() if "status" in stations.columns else None
        if "dist_m" in stations.columns:
            sd = stations["dist_m"].to_numpy(dtype=float)
        else:
            sd = np.full(len(stations), np.nan)
            known = sid >= 0
            sd[known] = shapely.line_locate_point(
                geoms[sid[known]], np.asarray(stations.geometry.values, dtype=object)[known]
            )
        ok = (sid >= 0) & np.isfinite(st) & np.isfinite(sd)
        if status is not None:
            ok &= status == "ok"
        sf, sd, st = sid[ok], sd[ok], st[ok]
        se = np.nan_to_num(se[ok], nan=0.0)
        sd = np.clip(sd, 0.0, length[sf])
        order = np.lexsort((sd, sf))
        sf, sd, st, se = sf[order], sd[order], st[order], se[order]
        counts = np.bincount(sf, minlength=nf)
        has = counts > 0
        if has.any():
            last = np.cumsum(counts) - 1
            first = last - counts + 1
            f_has = np.flatnonzero(has)
            tol = 1e-9 * np.maximum(length[f_has], 1.0)
            need0 = sd[first[f_has]] > tol
            needl = sd[last[f_has]] < length[f_has] - tol
            f0, fl = f_has[need0], f_has[needl]
            xp = np.concatenate([off[sf] + sd, off[f0], off[fl] + length[fl]])
            tp = np.concatenate([st, np.zeros(len(f0)), np.zeros(len(fl))])
            ep = np.concatenate([se, se[first[f0]], se[last[fl]]])
            o = np.argsort(xp, kind="stable")
            xp, tp, ep = xp[o], tp[o], ep[o]
            use = has[fq]
            xq = off[fq[use]] + dq[use]
            throw[use] = np.interp(xq, xp, tp)
            err[use] = np.interp(xq, xp, ep)
            source[use] = "stations"

    fb = ~has[fq]
    if fb.any():
        tmax = _col(faults, "max_throw_m", np.nan)[fq[fb]]
        emax = _col(faults, "max_throw_err_m", np.nan)[fq[fb]]
        lf = length[fq[fb]]
        xm = _col(faults, "max_throw_dist_m", np.nan)[fq[fb]]
        xm = np.where(np.isfinite(xm) & (xm > 0) & (xm < lf), xm, 0.5 * lf)
        d = dq[fb]
        with np.errstate(divide="ignore", invalid="ignore"):
            r = np.where(d < xm, (xm - d) / xm, (d - xm) / (lf - xm))
        shape = np.clip(1.0 - r**2, 0.0, 1.0)
        t = tmax * shape
        e = np.nan_to_num(emax, nan=0.0) * shape
        known = np.isfinite(t)
        throw[fb] = t
        err[fb] = np.where(known, e, np.nan)
        source[np.flatnonzero(fb)[known]] = "max_throw_profile"
    return throw, err, source


def faults_with_throw(faults: gpd.GeoDataFrame, stations: pd.DataFrame | None) -> np.ndarray:
    """Which faults have a known throw for :func:`throw_at`.

    Parameters
    ----------
    faults : geopandas.GeoDataFrame
        With ``fault_id`` and optionally ``max_throw_m``.
    stations : pandas.DataFrame or None
        Throw stations (``fault_id``, ``throw_m``, optionally ``status``,
        ``dist_m``).

    Returns
    -------
    numpy.ndarray of bool
        True where the fault has an ok station with a finite throw, or a
        finite ``max_throw_m`` (the fallback profile).
    """
    fid = faults["fault_id"].to_numpy()
    has = np.zeros(len(faults), dtype=bool)
    if stations is not None and len(stations) and "throw_m" in stations.columns:
        ok = np.isfinite(stations["throw_m"].to_numpy(dtype=float))
        if "status" in stations.columns:
            ok &= stations["status"].astype(str).to_numpy() == "ok"
        if "dist_m" in stations.columns:
            ok &= np.isfinite(stations["dist_m"].to_numpy(dtype=float))
        has |= np.isin(fid, stations["fault_id"].to_numpy()[ok])
    if "max_throw_m" in faults.columns:
        has |= np.isfinite(faults["max_throw_m"].to_numpy(dtype=float))
    return has
