"""Extension along transects by heave summation.

Pure functions: GeoDataFrames in, GeoDataFrames out. The tool wrapper
``faultmap/extension/transect_tool.py`` reads and writes; nothing here touches files.

Main entry points
-----------------
:func:`mean_strike_deg`
    Length-weighted axial mean strike of a fault population.
:func:`auto_transects`
    Transects perpendicular to the mean strike at a regular spacing.
:func:`throw_at`
    Throw (and its error) at given distances along given faults, from the
    station profiles (shared with :mod:`faultmap.extension.kostrov`).
:func:`measure_transects`
    Crossings, throw, dip, heave and projected heave at each crossing; per
    transect sums, extension, beta, Monte Carlo uncertainties and the
    separate sub-resolution correction.

Definitions (see ``docs/methods/extension.md``)
-----------------------------------------------
* heave h = T / tan(dip) (dip-slip geometry);
* projected heave (``heave_along_m``) = lengthening of the transect at the
  crossing: h |cos(dip direction - transect azimuth)| for dip slip;
* L1 = present length of the faulted zone, L0 = L1 - sum(projected heave),
  e = (L1 - L0) / L0, beta = L1 / L0.
"""

from __future__ import annotations

import re
import threading
import warnings
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely
from scipy import sparse

from faultmap.errors import (
    AnalysisError,
    CRSError,
    FaultmapWarning,
    GeometryError,
    InputError,
    ParameterError,
)
from faultmap.extension.subresolution import corrected_sum, fraction_below_detection
from faultmap.numerics.directions import axial_mean_deg, axial_resultant_length, segment_azimuths

__all__ = [
    "mean_strike_deg",
    "auto_transects",
    "throw_at",
    "measure_transects",
    "ZONE_CHOICES",
    "TransectBatch",
    "plan_transect_batches",
    "transect_seed",
    "measure_transect_batch",
    "gather_transect_batches",
    "merge_messages",
]

#: Ways to define the present length L1 of a transect.
ZONE_CHOICES = ("faulted", "full")

_DIP_MIN_DEG = 1.0  # lower clip of Monte Carlo dips (heave -> infinity as dip -> 0)


# --------------------------------------------------------------------------- helpers
def _ids(values: Sequence) -> str:
    """Compact list of ids for messages."""
    vals = [str(v) for v in values]
    return ", ".join(vals[:10]) + (f" and {len(vals) - 10} more" if len(vals) > 10 else "")


def _azimuth_deg(dx: np.ndarray, dy: np.ndarray) -> np.ndarray:
    """Azimuth clockwise from grid north of the vector (dx east, dy north), degrees 0-360."""
    return np.degrees(np.arctan2(dx, dy)) % 360.0


def _check_crs_metric(crs, what: str) -> None:
    if crs is not None and crs.is_geographic:
        raise CRSError(f"{what} are in geographic CRS {crs.name}; reproject to a projected metric CRS first.")


def _as_lines(gdf: gpd.GeoDataFrame, ids: np.ndarray, what: str) -> np.ndarray:
    """Geometries of ``gdf`` as a numpy array of LineStrings (single-part MultiLineStrings merged)."""
    geoms = np.asarray(gdf.geometry.values, dtype=object)
    missing = shapely.is_missing(geoms) | shapely.is_empty(geoms)
    if missing.any():
        raise GeometryError(f"{what} {_ids(ids[missing])}: empty geometry; remove or redraw these features.")
    tid = shapely.get_type_id(geoms)
    multi = tid == 5
    if multi.any():
        geoms = geoms.copy()
        geoms[multi] = shapely.line_merge(geoms[multi])
        tid = shapely.get_type_id(geoms)
    bad = tid != 1
    if bad.any():
        raise GeometryError(
            f"{what} {_ids(ids[bad])}: geometry is not a single LineString; split or merge these features."
        )
    return geoms


def _in_faults_crs(layer, faults: gpd.GeoDataFrame, what: str, kind: str, *, reproject: bool):
    """``layer`` checked as a GeoDataFrame, in the faults' CRS (reprojected if allowed), metric."""
    if not isinstance(layer, gpd.GeoDataFrame):
        raise InputError(f"{what} must be a GeoDataFrame of {kind}.")
    if layer.crs != faults.crs:
        if reproject and layer.crs is not None and faults.crs is not None:
            layer = layer.to_crs(faults.crs)
        else:
            raise CRSError(
                f"{what} CRS ({getattr(layer.crs, 'name', None)}) differs from the faults CRS "
                f"({getattr(faults.crs, 'name', None)}); reproject the {what} (reproject=True)."
            )
    _check_crs_metric(layer.crs, what)
    return layer


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


def _check_faults(faults: gpd.GeoDataFrame) -> tuple[np.ndarray, np.ndarray]:
    """Validate the faults layer; return (fault_id array, LineString array)."""
    if not isinstance(faults, gpd.GeoDataFrame):
        raise InputError("faults must be a GeoDataFrame of LineStrings.")
    for col in ("fault_id", "dip_deg"):
        if col not in faults.columns:
            raise InputError(f"faults layer has no '{col}' column; run the prepare and throw tools first.")
    _check_crs_metric(faults.crs, "fault traces")
    fid = faults["fault_id"].to_numpy()
    if pd.Index(fid).has_duplicates:
        dup = pd.Index(fid)[pd.Index(fid).duplicated()].unique()
        raise InputError(f"faults: duplicate fault_id {_ids(dup)}; fault ids must be unique.")
    return fid, _as_lines(faults, fid, "fault")


def _col(df: pd.DataFrame, name: str, default, dtype=float) -> np.ndarray:
    if name in df.columns:
        return df[name].to_numpy(dtype=dtype)
    return np.full(len(df), default, dtype=dtype)


def _local_azimuth(lines: np.ndarray, dist: np.ndarray) -> np.ndarray:
    """Azimuth of ``lines`` at distance ``dist`` along them (central difference), degrees."""
    length = shapely.length(lines)
    delta = np.minimum(1.0, 1e-3 * length)
    a = shapely.line_interpolate_point(lines, np.clip(dist - delta, 0, length))
    b = shapely.line_interpolate_point(lines, np.clip(dist + delta, 0, length))
    ca, cb = shapely.get_coordinates(a), shapely.get_coordinates(b)
    return _azimuth_deg(cb[:, 0] - ca[:, 0], cb[:, 1] - ca[:, 1])


def _rake_factor(rake: np.ndarray) -> np.ndarray:
    """Factor k = cos(rake) / |sin(rake)|, so that the horizontal strike slip is T k / sin(dip) (0 for dip slip)."""
    r = np.radians(rake)
    k = np.cos(r) / np.abs(np.sin(r))
    return np.where(np.abs(rake + 90.0) < 1e-9, 0.0, k)


def _check_rake(rake: np.ndarray, where: str) -> None:
    bad = np.isfinite(rake) & ((rake < -170.0) | (rake > -10.0))
    if bad.any():
        raise ParameterError(
            f"{where}: rake must lie between -170 and -10 deg for a normal fault (Aki-Richards convention, "
            f"-90 = pure dip slip), got {rake[bad][0]:g}."
        )


# --------------------------------------------------------------------------- strike and auto transects
def mean_strike_deg(faults: gpd.GeoDataFrame) -> float:
    """Length-weighted axial mean strike of a fault population, degrees 0-180.

    Parameters
    ----------
    faults : geopandas.GeoDataFrame
        Fault traces (LineStrings) in a projected metric CRS.

    Returns
    -------
    float
        Mean strike, degrees clockwise from grid north, in [0, 180).

    Raises
    ------
    AnalysisError
        If the traces have no preferred strike (e.g. two equal orthogonal sets).

    Notes
    -----
    Strikes are axial data (a strike and its opposite are the same line), so
    the mean is taken on doubled angles (Mardia & Jupp 2000, axial data;
    common practice): every trace segment contributes its length times
    (cos 2a, sin 2a); the mean strike is half the angle of the resultant.
    Digitising direction does not matter.
    """
    _, az, seg_len = segment_azimuths(np.asarray(faults.geometry.values, dtype=object))
    if axial_resultant_length(az, seg_len) < 1e-9:
        raise AnalysisError("fault traces have no preferred strike; give the transect azimuth explicitly.")
    return float(axial_mean_deg(az, seg_len)[0])


def auto_transects(
    faults: gpd.GeoDataFrame,
    *,
    spacing_m: float,
    margin_m: float | None = None,
    azimuth_deg: float | None = None,
    max_transects: int = 10000,
) -> gpd.GeoDataFrame:
    """Straight transects across the whole fault population at a regular spacing.

    Parameters
    ----------
    faults : geopandas.GeoDataFrame
        Fault traces (LineStrings) in a projected metric CRS.
    spacing_m : float
        Distance between neighbouring transects along strike, m (> 0).
    margin_m : float, optional
        Length added beyond the outermost fault at each end, m (>= 0).
        Default: the median across-strike gap between neighbouring trace
        midpoints (one typical fault spacing), at least 1 % of the
        population's extent.
    azimuth_deg : float, optional
        Transect azimuth, degrees. Default: perpendicular to the
        length-weighted axial mean strike (:func:`mean_strike_deg`).
    max_transects : int
        Safety limit on the number of transects.

    Returns
    -------
    geopandas.GeoDataFrame
        LineStrings with ``transect_id`` (1..n), ``azimuth_deg`` (0-180,
        start to end), ``position_m`` (along-strike position of the transect
        relative to the population's centre), ``margin_m`` and
        ``source = 'auto'``; same CRS as ``faults``.

    Raises
    ------
    ParameterError
        Non-positive spacing, negative margin, or more transects than
        ``max_transects``.

    Notes
    -----
    Transects are centred on the population along strike and run from the
    outermost fault on one side to the outermost on the other, plus the
    margin, so none ends inside the population (common practice).
    """
    if spacing_m is None or not np.isfinite(spacing_m) or spacing_m <= 0:
        raise ParameterError(f"spacing_m must be a positive distance in m, got {spacing_m!r}.")
    if margin_m is not None and (not np.isfinite(margin_m) or margin_m < 0):
        raise ParameterError(f"margin_m must be >= 0 m, got {margin_m!r}.")
    fid, geoms = _check_faults(faults)
    if len(geoms) == 0:
        raise InputError("faults layer is empty; nothing to place transects across.")
    strike = mean_strike_deg(faults) if azimuth_deg is None else (float(azimuth_deg) - 90.0) % 180.0
    az = (strike + 90.0) % 180.0
    t_hat = np.array([np.sin(np.radians(az)), np.cos(np.radians(az))])
    s_hat = np.array([np.sin(np.radians(strike)), np.cos(np.radians(strike))])
    coords = shapely.get_coordinates(geoms)
    pt, ps = coords @ t_hat, coords @ s_hat
    tmin, tmax, smin, smax = pt.min(), pt.max(), ps.min(), ps.max()
    if margin_m is None:
        # one typical across-strike fault spacing (median gap between trace midpoints), at least 1 % of the extent
        mid = shapely.get_coordinates(shapely.line_interpolate_point(geoms, 0.5, normalized=True)) @ t_hat
        gaps = np.diff(np.sort(mid))
        gaps = gaps[gaps > 0]
        typical = float(np.median(gaps)) if gaps.size else 0.0
        margin_m = max(typical, 0.01 * max(tmax - tmin, smax - smin), 1.0)
    extent = smax - smin
    n = max(1, int(np.floor(extent / spacing_m)))
    if n > max_transects:
        raise ParameterError(
            f"spacing_m {spacing_m:g} m gives {n} transects (limit {max_transects}); use a larger spacing."
        )
    offset = 0.5 * (extent - n * spacing_m) if extent >= spacing_m else 0.5 * extent - 0.5 * spacing_m
    s_pos = smin + offset + (np.arange(n) + 0.5) * spacing_m
    start = s_pos[:, None] * s_hat + (tmin - margin_m) * t_hat
    end = s_pos[:, None] * s_hat + (tmax + margin_m) * t_hat
    lines = shapely.linestrings(np.stack([start, end], axis=1))
    centre = 0.5 * (smin + smax)
    return gpd.GeoDataFrame(
        {
            "transect_id": np.arange(1, n + 1),
            "azimuth_deg": np.full(n, az),
            "position_m": s_pos - centre,
            "margin_m": np.full(n, float(margin_m)),
            "source": np.full(n, "auto", dtype=object),
        },
        geometry=lines,
        crs=faults.crs,
    )


# --------------------------------------------------------------------------- throw profiles
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


# --------------------------------------------------------------------------- main analysis
def _validate_params(
    zone: str,
    margin_m: float | None,
    n_draws: int,
    seed: int,
    dip_range_default_deg: float,
    dip_range_attribute_deg: float,
    default_dip_deg: float,
    rake_deg: float | None,
    d_min_m: float,
) -> None:
    if zone not in ZONE_CHOICES:
        raise ParameterError(f"zone must be one of {ZONE_CHOICES}, got {zone!r}.")
    if margin_m is not None and (not np.isfinite(margin_m) or margin_m < 0):
        raise ParameterError(f"margin_m must be >= 0 m, got {margin_m!r}.")
    if isinstance(n_draws, bool) or not isinstance(n_draws, (int, np.integer)) or n_draws < 10:
        raise ParameterError(f"n_draws must be an integer >= 10, got {n_draws!r}.")
    if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or seed < 0:
        raise ParameterError(f"seed must be a non-negative integer, got {seed!r}.")
    for name, v in (("dip_range_default_deg", dip_range_default_deg), ("dip_range_attribute_deg", dip_range_attribute_deg)):
        if not np.isfinite(v) or v < 0 or v >= 90:
            raise ParameterError(f"{name} must be between 0 and 90 deg, got {v!r}.")
    if not np.isfinite(default_dip_deg) or default_dip_deg <= 0 or default_dip_deg > 90:
        raise ParameterError(f"default_dip_deg must be in (0, 90] deg, got {default_dip_deg!r}.")
    if rake_deg is not None:
        _check_rake(np.array([float(rake_deg)]), "rake_deg")
    if not np.isfinite(d_min_m) or d_min_m <= 0:
        raise ParameterError(f"d_min_m must be a positive throw in m, got {d_min_m!r}.")


def measure_transects(
    faults: gpd.GeoDataFrame,
    stations: gpd.GeoDataFrame | None,
    transects: gpd.GeoDataFrame,
    *,
    zone: str = "faulted",
    margin_m: float | None = None,
    rake_deg: float | None = None,
    default_dip_deg: float = 60.0,
    dip_range_default_deg: float = 10.0,
    dip_range_attribute_deg: float = 5.0,
    n_draws: int = 1000,
    seed: int = 0,
    detection_throw_m: float | None = None,
    exponent_c: float | None = None,
    d_min_m: float = 0.01,
    d_max_m: float | None = None,
    reproject: bool = False,
) -> tuple[gpd.GeoDataFrame, gpd.GeoDataFrame]:
    """Heave summation along transects: extension, beta and their uncertainties.

    Parameters
    ----------
    faults : geopandas.GeoDataFrame
        Fault traces (LineStrings, projected metric CRS) with ``fault_id``,
        ``dip_deg``, ``dip_source``, ``dip_dir_deg`` and, for faults without
        ok stations, ``max_throw_m`` / ``max_throw_err_m``. An optional
        ``rake_deg`` column gives per-fault rakes.
    stations : geopandas.GeoDataFrame or None
        Throw stations (see :func:`throw_at`).
    transects : geopandas.GeoDataFrame
        Transect LineStrings in the same CRS as ``faults`` (or any CRS with
        ``reproject=True``). A ``transect_id`` column is kept if present
        (must be unique), else ids 1..n are given.
    zone : {'faulted', 'full'}
        Definition of the present length L1: ``faulted`` = distance along the
        transect between the outermost crossings plus ``margin_m`` at each
        side (clipped to the transect ends); ``full`` = the whole transect
        length.
    margin_m : float, optional
        Margin added beyond each outermost crossing, m. Default: half the
        median distance between neighbouring crossings over all transects
        (each fault then "owns" half a spacing on each side, so parallel
        faults at spacing S give L1 = n S exactly).
    rake_deg : float, optional
        Rake of all faults (Aki & Richards convention: -90 = pure normal dip
        slip), between -170 and -10 deg. Default: the faults' ``rake_deg``
        column where present and finite, else -90 (dip slip).
    default_dip_deg : float
        Dip used where a fault's ``dip_deg`` is NaN (marked ``default``).
    dip_range_default_deg, dip_range_attribute_deg : float
        Half-width of the uniform Monte Carlo dip range for default dips and
        for dips from an attribute, degrees.
    n_draws : int
        Monte Carlo draws (>= 10).
    seed : int
        Seed of the random generator; the same seed gives the same result.
    detection_throw_m : float, optional
        Smallest throw resolved by the DEM, m (see
        :func:`faultmap.extension.subresolution.detection_throw_m`). With
        ``exponent_c``, enables the sub-resolution correction.
    exponent_c : float, optional
        Exponent C of the cumulative throw distribution N(>=T) ~ T^-C of
        the population sampled along a line.
    d_min_m : float
        Smallest fault throw considered in the correction, m.
    d_max_m : float, optional
        Largest throw of the population, m. Default: the largest
        ``max_throw_m`` of the faults (else of the crossings).
    reproject : bool
        Reproject transects to the faults' CRS instead of raising.

    Returns
    -------
    transects : geopandas.GeoDataFrame
        The input transects with, among others: ``transect_id``,
        ``length_m``, ``azimuth_deg``, ``n_crossings``, ``n_faults``,
        ``zone``, ``margin_m``, ``zone_length_m`` (L1),
        ``restored_length_m`` (L0), ``sum_heave_m``, ``sum_heave_err_m``,
        ``sum_heave_along_m``, ``sum_heave_along_err_m``, ``extension``,
        ``extension_p16``, ``extension_p50``, ``extension_p84``, ``beta``,
        ``beta_p16``, ``beta_p84``, ``extension_present`` (sum / L1),
        ``n_default_dip``, ``n_throw_fallback``, ``ends_inside``,
        ``ends_inside_side``, ``status`` and the separate correction fields
        ``fraction_below_detection``, ``sum_heave_along_corrected_m``,
        ``extension_corrected``, ``beta_corrected``.
    crossings : geopandas.GeoDataFrame
        One Point per crossing (a curved trace crossed twice gives two):
        ``transect_id``, ``fault_id``, ``dist_along_transect_m``,
        ``dist_along_fault_m``, ``throw_m``, ``throw_err_m``,
        ``throw_source``, ``dip_deg``, ``dip_source``, ``dip_dir_deg``,
        ``dip_dir_source`` (the fault's, or ``trace_normal`` when the dip
        direction is unknown), ``rake_deg``, ``transect_azimuth_deg``,
        ``projection_cos``, ``heave_m``, ``heave_along_m``.

    Raises
    ------
    CRSError
        Transects in another CRS than the faults (without ``reproject``),
        or a geographic CRS.
    InputError
        Zero-length transects (named), duplicate ids, missing columns.
    ParameterError
        Out-of-range options.

    Warns
    -----
    FaultmapWarning
        Transects crossing no fault (zero sums, ``status='no_crossing'``),
        transects ending inside the population, crossings without a throw,
        over-extended draws.

    Notes
    -----
    Heave h = T / tan(dip) (geometry). Extension e = (L1 - L0) / L0 and
    stretching factor beta = L1 / L0 with L0 = L1 - sum(h_along), the
    restored length (methods.md; e.g. McKenzie 1978 for beta).
    ``extension_present`` = sum / L1 = 1 - 1/beta is the same strain
    referred to the present length, the quantity Kostrov summation on the
    present area estimates (see :mod:`faultmap.extension.kostrov`).

    Projected heave: for dip slip the hanging wall moves by h along the dip
    direction m, so the transect of local direction t lengthens by
    h |m . t|. With a rake lambda (Aki & Richards 1980 convention, from
    memory), the hanging wall also moves along strike s by
    T cos(lambda) / (|sin(lambda)| sin(dip)), and the lengthening becomes
    h |m . t| + ss (s . t) sign(m . t); the heave itself (the component
    along m) is unchanged.

    Uncertainty: Monte Carlo, vectorised over (n_crossings, n_draws): one
    uniform dip per fault and draw within +-range (shared by all crossings
    of that fault, clipped to [1, 90] deg), one normal throw per crossing
    and draw with the interpolated 1-sigma error (clipped at 0).
    Percentiles 16/50/84 are reported; ``*_err_m`` is half the 16-84 range.

    Sub-resolution correction (Marrett & Allmendinger 1992): resolved faults
    carry the fraction 1 - f of the total, f from
    :func:`faultmap.extension.subresolution.fraction_below_detection`; the corrected
    sum is sum / (1 - f). Reported in separate fields only.
    """
    _validate_params(
        zone, margin_m, n_draws, seed, dip_range_default_deg, dip_range_attribute_deg,
        default_dip_deg, rake_deg, d_min_m,
    )
    fid, fgeoms = _check_faults(faults)
    transects = _in_faults_crs(transects, faults, "transects", "LineStrings", reproject=reproject)
    out, tid, tgeoms, tlen = _transect_lines(transects)
    nt = len(tgeoms)

    # ---- crossings (vectorised STRtree query + intersection)
    tree = shapely.STRtree(fgeoms)
    ti, fi, t_pos, parts = _crossing_positions(tgeoms, fgeoms, tree=tree, warn_ids=tid)
    f_dist = shapely.line_locate_point(fgeoms[fi], parts)
    nc = len(parts)

    # ---- throw, dip, direction, heave at each crossing
    throw, terr, tsrc = throw_at(faults, stations, fi, f_dist)
    dip_f = _col(faults, "dip_deg", np.nan)
    dsrc_f = (
        faults["dip_source"].astype(str).to_numpy()
        if "dip_source" in faults.columns
        else np.full(len(faults), "default", dtype=object)
    )
    dsrc_f = np.where(np.isfinite(dip_f), dsrc_f, "default").astype(object)
    dip_f = np.where(np.isfinite(dip_f), dip_f, default_dip_deg)
    bad_dip = (dip_f <= 0) | (dip_f > 90)
    if bad_dip.any():
        raise InputError(f"fault {_ids(fid[bad_dip])}: dip_deg outside (0, 90]; fix the dip attribute.")
    dip = dip_f[fi]
    dsrc = dsrc_f[fi]

    t_az = _local_azimuth(tgeoms[ti], t_pos) if nc else np.zeros(0)
    dd_f = _col(faults, "dip_dir_deg", np.nan)
    dd = dd_f[fi]
    dd_known = np.isfinite(dd)
    dd_src_f = (
        faults["dip_dir_source"].astype(str).to_numpy()
        if "dip_dir_source" in faults.columns
        else np.full(len(faults), "fault", dtype=object)
    )
    dd_src = np.where(dd_known, dd_src_f[fi], "trace_normal").astype(object)
    if (~dd_known).any():
        dd = dd.copy()
        dd[~dd_known] = (_local_azimuth(fgeoms[fi[~dd_known]], f_dist[~dd_known]) + 90.0) % 360.0

    rake_f = _col(faults, "rake_deg", np.nan) if rake_deg is None else np.full(len(faults), float(rake_deg))
    _check_rake(rake_f, "faults rake_deg")
    rake_f = np.where(np.isfinite(rake_f), rake_f, -90.0)
    rake = rake_f[fi]
    ss_k = np.where(dd_known, _rake_factor(rake), 0.0)
    if (~dd_known & (np.abs(rake + 90.0) > 1e-9)).any():
        warnings.warn(
            "faults without a dip direction are treated as pure dip slip (rake ignored); "
            "give dip_dir_deg to use the rake.",
            FaultmapWarning,
            stacklevel=2,
        )

    tr = np.radians(t_az)
    t_vec = np.stack([np.sin(tr), np.cos(tr)], axis=-1) if nc else np.zeros((0, 2))
    mr = np.radians(dd)
    m_vec = np.stack([np.sin(mr), np.cos(mr)], axis=-1) if nc else np.zeros((0, 2))
    s_vec = np.stack([-np.cos(mr), np.sin(mr)], axis=-1) if nc else np.zeros((0, 2))  # strike = dd - 90
    cm = np.sum(m_vec * t_vec, axis=1)
    cm_abs = np.abs(cm)
    cs = np.sum(s_vec * t_vec, axis=1) * np.sign(cm)

    with np.errstate(divide="ignore", invalid="ignore"):
        heave = throw / np.tan(np.radians(dip))
        heave_along = heave * cm_abs + throw * ss_k * cs / np.sin(np.radians(dip))
    valid = np.isfinite(heave_along)
    if (~valid).any():
        warnings.warn(
            f"fault {_ids(np.unique(fid[fi[~valid]]))}: no throw known at a transect crossing (no ok "
            "station and no max_throw_m); left out of the sums. Run the throw tool on these faults.",
            FaultmapWarning,
            stacklevel=2,
        )

    crossings = gpd.GeoDataFrame(
        {
            "transect_id": tid[ti],
            "fault_id": fid[fi],
            "dist_along_transect_m": t_pos,
            "dist_along_fault_m": f_dist,
            "throw_m": throw,
            "throw_err_m": terr,
            "throw_source": tsrc,
            "dip_deg": dip,
            "dip_source": dsrc,
            "dip_dir_deg": dd,
            "dip_dir_source": dd_src,
            "rake_deg": rake,
            "transect_azimuth_deg": t_az,
            "projection_cos": cm_abs,
            "heave_m": heave,
            "heave_along_m": heave_along,
        },
        geometry=gpd.GeoSeries(parts, crs=faults.crs).values,
        crs=faults.crs,
    )

    # ---- per transect nominal values
    n_cross = np.bincount(ti, minlength=nt)
    tv, fv = ti[valid], fi[valid]
    sum_h = np.bincount(tv, weights=heave[valid], minlength=nt)
    sum_ha = np.bincount(tv, weights=heave_along[valid], minlength=nt)
    pairs = np.unique(np.stack([ti, fi], axis=1), axis=0) if nc else np.zeros((0, 2), dtype=np.int64)
    n_faults = np.bincount(pairs[:, 0], minlength=nt)
    n_default = np.bincount(ti, weights=(dsrc != "attribute").astype(float), minlength=nt).astype(int)
    n_fallback = np.bincount(ti, weights=(tsrc != "stations").astype(float), minlength=nt).astype(int)

    if margin_m is None:
        gaps = np.diff(t_pos)[ti[1:] == ti[:-1]] if nc > 1 else np.zeros(0)
        gaps = gaps[gaps > 0]
        margin_used = 0.5 * float(np.median(gaps)) if gaps.size else 0.0
    else:
        margin_used = float(margin_m)
    has_c = n_cross > 0
    t_first = np.full(nt, np.nan)
    t_last = np.full(nt, np.nan)
    if nc:
        starts = np.flatnonzero(np.r_[True, ti[1:] != ti[:-1]])
        ends = np.r_[starts[1:], nc] - 1
        t_first[ti[starts]] = t_pos[starts]
        t_last[ti[ends]] = t_pos[ends]
    if zone == "full":
        L1 = tlen.copy()
    else:
        L1 = np.minimum(t_last + margin_used, tlen) - np.maximum(t_first - margin_used, 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        L0 = L1 - sum_ha
        ok_len = L0 > 0
        ext = np.where(ok_len, sum_ha / L0, np.nan)
        beta = np.where(ok_len, L1 / L0, np.nan)
        ext_present = np.where(L1 > 0, sum_ha / L1, np.nan)

    status = np.full(nt, "ok", dtype=object)
    status[has_c & ~(L1 > 0)] = "zone_undefined"
    status[has_c & (L1 > 0) & ~ok_len] = "overextended"
    status[~has_c] = "no_crossing"
    ext[~has_c], beta[~has_c], ext_present[~has_c] = 0.0, 1.0, 0.0
    if zone == "faulted":
        L1[~has_c] = np.nan
        L0[~has_c] = np.nan

    # ---- Monte Carlo (vectorised over crossings x draws; chunked over draws for memory)
    p = {k: np.zeros(nt) for k in ("h16", "h84", "a16", "a84")}
    p.update({k: np.where(has_c, np.nan, v) for k, v in (("e16", 0.0), ("e50", 0.0), ("e84", 0.0), ("b16", 1.0), ("b84", 1.0))})
    n_over = np.zeros(nt, dtype=int)
    if valid.any():
        rng = np.random.default_rng(seed)
        uf, f_inv = np.unique(fv, return_inverse=True)
        half = np.where(dsrc_f[uf] == "attribute", dip_range_attribute_deg, dip_range_default_deg)
        nvc = int(valid.sum())
        agg = sparse.csr_matrix((np.ones(nvc), (tv, np.arange(nvc))), shape=(nt, nvc))
        cm_v, cs_v, k_v = cm_abs[valid], cs[valid], ss_k[valid]
        t_v = throw[valid]
        e_v = np.nan_to_num(terr[valid], nan=0.0)
        chunk = int(max(1, min(n_draws, 4e6 // max(nvc + len(uf), 1))))
        sh, sa = [], []
        for start in range(0, n_draws, chunk):
            k = min(chunk, n_draws - start)
            u = rng.uniform(-1.0, 1.0, size=(len(uf), k))
            dips = np.clip(dip_f[uf][:, None] + half[:, None] * u, _DIP_MIN_DEG, 90.0)[f_inv]
            tdraw = np.maximum(t_v[:, None] + e_v[:, None] * rng.standard_normal((nvc, k)), 0.0)
            dr = np.radians(dips)
            h = tdraw / np.tan(dr)
            ha = h * cm_v[:, None] + tdraw * (k_v * cs_v)[:, None] / np.sin(dr)
            sh.append(agg @ h)
            sa.append(agg @ ha)
        sh, sa = np.hstack(sh), np.hstack(sa)
        p["h16"], p["h84"] = np.percentile(sh, [16, 84], axis=1)
        p["a16"], p["a84"] = np.percentile(sa, [16, 84], axis=1)
        with np.errstate(divide="ignore", invalid="ignore"):
            l0d = L1[:, None] - sa
            good = l0d > 0
            ed = np.where(good, sa / l0d, np.nan)
            bd = np.where(good, L1[:, None] / l0d, np.nan)
        n_over = (~good).sum(axis=1)
        rows = has_c & (L1 > 0) & (good.sum(axis=1) > 0)
        if rows.any():
            e_pct = np.nanpercentile(ed[rows], [16, 50, 84], axis=1)
            b_pct = np.nanpercentile(bd[rows], [16, 84], axis=1)
            p["e16"][rows], p["e50"][rows], p["e84"][rows] = e_pct
            p["b16"][rows], p["b84"][rows] = b_pct
    n_over[~(L1 > 0)] = 0

    # ---- sub-resolution correction (separate fields)
    frac = np.full(nt, np.nan)
    s_corr = np.full(nt, np.nan)
    e_corr = np.full(nt, np.nan)
    b_corr = np.full(nt, np.nan)
    if detection_throw_m is not None and exponent_c is not None and np.isfinite(detection_throw_m):
        if d_max_m is None:
            mt = _col(faults, "max_throw_m", np.nan)
            d_max_m = float(np.nanmax(mt)) if np.isfinite(mt).any() else (
                float(np.nanmax(throw)) if np.isfinite(throw).any() else np.nan
            )
        if np.isfinite(d_max_m) and d_max_m > d_min_m:
            frac[:] = fraction_below_detection(detection_throw_m, d_min=d_min_m, d_max=d_max_m, exponent_c=exponent_c)
            s_corr = corrected_sum(sum_ha, frac)
            with np.errstate(divide="ignore", invalid="ignore"):
                l0c = L1 - s_corr
                e_corr = np.where(l0c > 0, s_corr / l0c, np.nan)
                b_corr = np.where(l0c > 0, L1 / l0c, np.nan)
            e_corr[~has_c] = np.nan
        else:
            warnings.warn(
                f"sub-resolution correction skipped: largest throw ({d_max_m!r} m) is not above d_min_m "
                f"({d_min_m:g} m).",
                FaultmapWarning,
                stacklevel=2,
            )

    # ---- ends inside the population: extend each end outwards and look for faults beyond it
    ends_side = _ends_inside(tgeoms, fgeoms, tree)

    # ---- warnings
    if (~has_c).any():
        warnings.warn(
            f"transect {_ids(tid[~has_c])}: crosses no fault; sums are zero (status 'no_crossing'). "
            "Check its position or the faults layer.",
            FaultmapWarning,
            stacklevel=2,
        )
    if (status == "zone_undefined").any():
        warnings.warn(
            f"transect {_ids(tid[status == 'zone_undefined'])}: faulted zone has zero length (one crossing, "
            "no margin); give margin_m or use zone='full'.",
            FaultmapWarning,
            stacklevel=2,
        )
    if (status == "overextended").any():
        warnings.warn(
            f"transect {_ids(tid[status == 'overextended'])}: summed heave exceeds the zone length, so no "
            "restored length exists; check dips and throws or widen the zone.",
            FaultmapWarning,
            stacklevel=2,
        )
    inside = ends_side != ""
    if inside.any():
        warnings.warn(
            f"transect {_ids(tid[inside])}: ends inside the fault population (faults continue beyond its "
            "end); its sums miss those faults (flag 'ends_inside'). Extend the transect.",
            FaultmapWarning,
            stacklevel=2,
        )

    coords = shapely.get_coordinates(tgeoms, return_index=True)
    c_xy, c_idx = coords
    first_v = np.r_[0, np.flatnonzero(np.diff(c_idx)) + 1]
    last_v = np.r_[first_v[1:] - 1, len(c_idx) - 1]
    az = _azimuth_deg(c_xy[last_v, 0] - c_xy[first_v, 0], c_xy[last_v, 1] - c_xy[first_v, 1])

    out["length_m"] = tlen
    out["azimuth_deg"] = az
    out["n_crossings"] = n_cross
    out["n_faults"] = n_faults
    out["zone"] = zone
    out["margin_m"] = margin_used if zone == "faulted" else 0.0
    out["zone_length_m"] = L1
    out["restored_length_m"] = np.where(ok_len | ~has_c, L0, np.nan)
    out["sum_heave_m"] = sum_h
    out["sum_heave_err_m"] = 0.5 * (p["h84"] - p["h16"])
    out["sum_heave_along_m"] = sum_ha
    out["sum_heave_along_err_m"] = 0.5 * (p["a84"] - p["a16"])
    out["extension"] = ext
    out["extension_p16"] = p["e16"]
    out["extension_p50"] = p["e50"]
    out["extension_p84"] = p["e84"]
    out["beta"] = beta
    out["beta_p16"] = p["b16"]
    out["beta_p84"] = p["b84"]
    out["extension_present"] = ext_present
    out["n_draws_overextended"] = n_over
    out["n_default_dip"] = n_default
    out["n_throw_fallback"] = n_fallback
    out["ends_inside"] = inside
    out["ends_inside_side"] = ends_side
    out["status"] = status
    out["fraction_below_detection"] = frac
    out["sum_heave_along_corrected_m"] = s_corr
    out["extension_corrected"] = e_corr
    out["beta_corrected"] = b_corr
    return out, crossings


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


# --------------------------------------------------------------------------- batches of transects (engine)
#: Columns of the faults layer the transect sums need (others are not sent to workers).
_BATCH_FAULT_COLS = (
    "fault_id", "dip_deg", "dip_source", "dip_dir_deg", "dip_dir_source", "rake_deg", "max_throw_m",
    "max_throw_err_m", "max_throw_dist_m",
)
_BATCH_STATION_COLS = ("fault_id", "dist_m", "throw_m", "throw_err_m", "status")
_CAPTURE_LOCK = threading.Lock()
_MSG = re.compile(r"^(transect|fault) (.+?): (.+)$", re.S)


@dataclass(frozen=True)
class TransectBatch:
    """Some transects and the traces that can touch them: one independent unit of work.

    Attributes
    ----------
    faults : geopandas.GeoDataFrame
        Traces crossing these transects or lying beyond their ends along
        their end segments (only the columns the sums need).
    stations : pandas.DataFrame or None
        Throw stations of those traces.
    transects : geopandas.GeoDataFrame
        The transects (``transect_id`` set, in the faults' CRS).
    positions : tuple of int
        Position of each transect in the whole layer (its random stream).
    fault_ids : tuple of tuple
        Per transect, the fault ids that can touch it.
    options : dict
        Keyword options of :func:`measure_transects` (with ``margin_m`` and
        ``d_max_m`` fixed for the whole layer, and the layer's ``seed``).
    """

    faults: Any
    stations: Any
    transects: Any
    positions: tuple
    fault_ids: tuple
    options: dict


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


def plan_transect_batches(
    faults: gpd.GeoDataFrame,
    stations: gpd.GeoDataFrame | None,
    transects: gpd.GeoDataFrame,
    *,
    batch_size: int = 16,
    zone: str = "faulted",
    margin_m: float | None = None,
    rake_deg: float | None = None,
    default_dip_deg: float = 60.0,
    dip_range_default_deg: float = 10.0,
    dip_range_attribute_deg: float = 5.0,
    n_draws: int = 1000,
    seed: int = 0,
    detection_throw_m: float | None = None,
    exponent_c: float | None = None,
    d_min_m: float = 0.01,
    d_max_m: float | None = None,
    reproject: bool = False,
) -> list[TransectBatch]:
    """Split :func:`measure_transects` into independent batches of transects.

    What depends on the whole layer is fixed here, once: the default margin
    (half the median spacing of neighbouring crossings over all transects),
    the largest throw of the population (``d_max_m``), the transect ids.
    Each transect then gets the traces that can touch it (those it crosses
    and those beyond its ends, for the ``ends_inside`` flag) and its own
    random stream, seeded from ``seed`` and its position in the layer, so a
    transect's result does not depend on the batch it falls in.

    Parameters
    ----------
    faults, stations, transects
        As for :func:`measure_transects`.
    batch_size : int
        Transects per batch (>= 1).
    zone, margin_m, rake_deg, default_dip_deg, dip_range_default_deg, dip_range_attribute_deg, n_draws, seed,
    detection_throw_m, exponent_c, d_min_m, d_max_m, reproject
        As for :func:`measure_transects`.

    Returns
    -------
    list of TransectBatch
        In transect order; run each with :func:`measure_transect_batch` and
        assemble with :func:`gather_transect_batches`.

    Notes
    -----
    Same method as :func:`measure_transects` (heave summation; Monte Carlo
    over dips and throws; Marrett & Allmendinger 1992 correction). The
    random draws differ from one call of :func:`measure_transects` on the
    whole layer (each transect has its own stream), not their distribution.
    """
    _validate_params(
        zone, margin_m, n_draws, seed, dip_range_default_deg, dip_range_attribute_deg,
        default_dip_deg, rake_deg, d_min_m,
    )
    if isinstance(batch_size, bool) or int(batch_size) != batch_size or batch_size < 1:
        raise ParameterError(f"batch_size must be a whole number >= 1, got {batch_size!r}.")
    fid, fgeoms = _check_faults(faults)
    transects = _in_faults_crs(transects, faults, "transects", "LineStrings", reproject=reproject)
    tr, tid, tgeoms, tlen = _transect_lines(transects)
    nt = len(tgeoms)
    if nt == 0:
        return []
    crossings = None
    if margin_m is None and zone == "faulted":
        crossings = _crossing_positions(tgeoms, fgeoms)
        ti, _, t_pos, _ = crossings
        gaps = np.diff(t_pos)[ti[1:] == ti[:-1]] if len(ti) > 1 else np.zeros(0)
        gaps = gaps[gaps > 0]
        margin_m = 0.5 * float(np.median(gaps)) if gaps.size else 0.0
    if d_max_m is None and detection_throw_m is not None and exponent_c is not None and np.isfinite(detection_throw_m):
        mt = _col(faults, "max_throw_m", np.nan)
        if np.isfinite(mt).any():
            d_max_m = float(np.nanmax(mt))
        else:
            if crossings is None:
                crossings = _crossing_positions(tgeoms, fgeoms)
            _, fi, _, parts = crossings
            f_dist = shapely.line_locate_point(fgeoms[fi], parts)
            throw = throw_at(faults, stations, fi, f_dist)[0] if len(fi) else np.zeros(0)
            d_max_m = float(np.nanmax(throw)) if np.isfinite(throw).any() else np.nan
    # traces that can touch each transect: crossed, or beyond an end along the end segment
    fcols = [k for k in _BATCH_FAULT_COLS if k in faults.columns]
    f = gpd.GeoDataFrame(faults[fcols + [faults.geometry.name]], geometry=faults.geometry.name, crs=faults.crs)
    f = f.reset_index(drop=True)
    touch: list[np.ndarray] = [np.zeros(0, dtype=np.int64)] * nt
    if len(fgeoms):
        b = np.vstack([shapely.total_bounds(fgeoms), shapely.total_bounds(tgeoms)])
        reach = 2.0 * np.hypot(b[:, 2].max() - b[:, 0].min(), b[:, 3].max() - b[:, 1].min()) + 1.0
        rs, re_ = _end_rays(tgeoms, reach)
        tree = shapely.STRtree(fgeoms)
        qs = [tree.query(g, predicate="intersects") for g in (tgeoms, rs, re_)]
        qt = np.concatenate([q[0] for q in qs])
        qf = np.concatenate([q[1] for q in qs])
        pairs = np.unique(np.c_[qt, qf], axis=0) if len(qt) else np.zeros((0, 2), dtype=np.int64)
        starts = np.searchsorted(pairs[:, 0], np.arange(nt + 1))
        touch = [pairs[starts[k]:starts[k + 1], 1] for k in range(nt)]
    st = None
    if stations is not None and len(stations):
        scols = [k for k in _BATCH_STATION_COLS if k in stations.columns]
        st = pd.DataFrame(stations[scols]) if "dist_m" in stations.columns else stations[scols + [stations.geometry.name]]
    options = dict(
        zone=zone, margin_m=margin_m, rake_deg=rake_deg, default_dip_deg=default_dip_deg,
        dip_range_default_deg=dip_range_default_deg, dip_range_attribute_deg=dip_range_attribute_deg,
        n_draws=int(n_draws), seed=int(seed), detection_throw_m=detection_throw_m, exponent_c=exponent_c,
        d_min_m=d_min_m, d_max_m=d_max_m,
    )
    batches = []
    for s in range(0, nt, int(batch_size)):
        ks = np.arange(s, min(s + int(batch_size), nt))
        rows = np.unique(np.concatenate([touch[k] for k in ks])).astype(np.int64)
        sub = f.iloc[rows].reset_index(drop=True)
        sst = None
        if st is not None:
            sst = st[np.isin(st["fault_id"].to_numpy(), sub["fault_id"].to_numpy())].reset_index(drop=True)
        batches.append(
            TransectBatch(
                faults=sub,
                stations=sst,
                transects=tr.iloc[ks],
                positions=tuple(int(k) for k in ks),
                fault_ids=tuple(tuple(fid[touch[k]].tolist()) for k in ks),
                options=options,
            )
        )
    return batches


def transect_seed(seed: int, position: int) -> int:
    """Seed of one transect's random stream: from the layer's seed and the transect's position.

    Uses :class:`numpy.random.SeedSequence` (independent, reproducible
    streams from (seed, position); numpy's documented way to spawn streams).
    """
    return int(np.random.SeedSequence([int(seed), int(position)]).generate_state(1, dtype=np.uint32)[0])


def measure_transect_batch(batch: TransectBatch) -> tuple[gpd.GeoDataFrame, gpd.GeoDataFrame, list[str]]:
    """Measure one :class:`TransectBatch` (what an engine maps over batches).

    Each transect is measured by :func:`measure_transects` with only the
    traces that can touch it and its own seed (:func:`transect_seed`).

    Returns
    -------
    transects, crossings : geopandas.GeoDataFrame
        As :func:`measure_transects` returns them, for these transects.
    messages : list of str
        Warnings raised while measuring (one transect at a time); merge them
        with :func:`gather_transect_batches`.
    """
    from faultmap.errors import FaultmapWarning as _W

    opts = dict(batch.options)
    seed = opts.pop("seed")
    fids = batch.faults["fault_id"].to_numpy()
    sfid = batch.stations["fault_id"].to_numpy() if batch.stations is not None else None
    touts, couts, msgs = [], [], []
    with _CAPTURE_LOCK:  # warnings state is process-wide: one batch at a time records it
        for k in range(len(batch.transects)):
            ids = np.asarray(batch.fault_ids[k])
            fsub = batch.faults[np.isin(fids, ids)]
            ssub = batch.stations[np.isin(sfid, ids)] if batch.stations is not None else None
            with warnings.catch_warnings(record=True) as caught:
                warnings.simplefilter("always", _W)
                t, c = measure_transects(
                    fsub, ssub, batch.transects.iloc[[k]], seed=transect_seed(seed, batch.positions[k]), **opts
                )
            touts.append(t)
            couts.append(c)
            for w in caught:
                if issubclass(w.category, _W):
                    msgs.append(str(w.message))
                else:
                    warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    return _concat_frames(touts, ignore_index=False), _concat_frames(couts, ignore_index=True), msgs


def _concat_frames(frames: list, *, ignore_index: bool) -> gpd.GeoDataFrame:
    """Concatenate GeoDataFrames, skipping empty ones (keeps the schema of the first)."""
    if not frames:
        return gpd.GeoDataFrame()
    full = [f for f in frames if len(f)]
    if not full:
        return frames[0]
    if len(full) == 1:
        out = full[0]
        return out.reset_index(drop=True) if ignore_index else out
    out = pd.concat(full, ignore_index=ignore_index)
    return gpd.GeoDataFrame(out, geometry=full[0].geometry.name, crs=full[0].crs)


def _merge_ids(texts: list[str], numeric_sort: bool) -> str:
    ids: list[str] = []
    extra = 0
    for t in texts:
        m = re.match(r"^(.*) and (\d+) more$", t)
        if m:
            t, n = m.group(1), int(m.group(2))
            extra += n
        for v in t.split(", "):
            if v not in ids:
                ids.append(v)
    if numeric_sort:
        try:
            ids = sorted(ids, key=float)
        except ValueError:
            pass
    more = len(ids) - 10 + extra
    return ", ".join(ids[:10]) + (f" and {more} more" if more > 0 else "")


def merge_messages(messages: list[str]) -> list[str]:
    """Merge per-transect warnings into one line per kind (``transect 1, 4: ...``).

    Messages naming transects or faults with the same text after the ids are
    joined (transect ids in order, fault ids sorted); other messages are kept
    once, in order.
    """
    groups: dict = {}
    order: list = []
    for m in messages:
        hit = _MSG.match(m)
        key = (hit.group(1), hit.group(3)) if hit else ("", m)
        if key not in groups:
            groups[key] = []
            order.append(key)
        if hit:
            groups[key].append(hit.group(2))
    out = []
    for key in order:
        kind, rest = key
        if not kind:
            out.append(rest)
        else:
            out.append(f"{kind} {_merge_ids(groups[key], numeric_sort=kind == 'fault')}: {rest}")
    return out


def gather_transect_batches(
    outs: list[tuple[gpd.GeoDataFrame, gpd.GeoDataFrame, list[str]]],
) -> tuple[gpd.GeoDataFrame, gpd.GeoDataFrame, list[str]]:
    """Assemble :func:`measure_transect_batch` results given in batch order.

    Returns
    -------
    transects, crossings : geopandas.GeoDataFrame
        In transect order (crossings sorted along each transect).
    messages : list of str
        Merged warnings (:func:`merge_messages`).
    """
    if not outs:
        return gpd.GeoDataFrame(), gpd.GeoDataFrame(), []
    t = _concat_frames([o[0] for o in outs], ignore_index=False)
    c = _concat_frames([o[1] for o in outs], ignore_index=True)
    return t, c, merge_messages([m for o in outs for m in o[2]])
