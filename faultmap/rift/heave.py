"""Heave carried by the faults of a rift: per fault, per trace piece, and how concentrated.

The fault population every rift-width step works on: checks of the
``faults`` GeoDataFrame, the heave integral of each fault with documented
fallbacks, traces cut into short weighted pieces, weighted quantiles over
them, and the share of the total heave carried by the largest faults.
Pure functions in the projected metric working CRS, no file I/O.
"""

from __future__ import annotations

import math
import warnings

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely

from faultmap.errors import FaultmapWarning, GeometryError, InputError, ParameterError

__all__ = ["fault_heave_m2", "heave_concentration"]


def fault_heave_m2(faults: gpd.GeoDataFrame) -> tuple[np.ndarray, list[str]]:
    """Heave integral per fault (m2) with documented fallbacks.

    Parameters
    ----------
    faults : GeoDataFrame
        Fault traces (see DEVELOPERS.md); uses ``heave_integral_m2`` and, where
        it is missing, ``mean_throw_m`` or ``max_throw_m`` with ``dip_deg``.

    Returns
    -------
    heave : ndarray
        Along-strike heave integral per row, m2 (0 where nothing is known).
    warnings : list of str
        One message per fallback used.

    Notes
    -----
    Fallbacks (geometry): heave = throw / tan(dip); the integral is the mean
    heave times the trace length; when only the maximum throw is known, the
    mean throw is taken as half of it (a triangular throw profile, common
    practice).
    """
    n = len(faults)
    length = shapely.length(np.asarray(faults.geometry.values))
    dip = np.asarray(faults["dip_deg"], dtype=float) if "dip_deg" in faults else np.full(n, 60.0)
    dip = np.where(np.isfinite(dip) & (dip > 0), dip, 60.0)
    tan_dip = np.tan(np.radians(dip))
    out = np.full(n, np.nan)
    msgs: list[str] = []
    if "heave_integral_m2" in faults:
        out = np.asarray(faults["heave_integral_m2"], dtype=float).copy()
    miss = ~np.isfinite(out)
    if miss.any() and "mean_throw_m" in faults:
        alt = np.asarray(faults["mean_throw_m"], dtype=float) / tan_dip * length
        use = miss & np.isfinite(alt)
        out[use] = alt[use]
        if use.any():
            msgs.append(f"{int(use.sum())} fault(s) without heave_integral_m2: used mean_throw_m / tan(dip) x length")
        miss = ~np.isfinite(out)
    if miss.any() and "max_throw_m" in faults:
        alt = 0.5 * np.asarray(faults["max_throw_m"], dtype=float) / tan_dip * length
        use = miss & np.isfinite(alt)
        out[use] = alt[use]
        if use.any():
            msgs.append(f"{int(use.sum())} fault(s) without heave: used half of max_throw_m / tan(dip) x length")
        miss = ~np.isfinite(out)
    if miss.any():
        msgs.append(f"{int(miss.sum())} fault(s) have no throw or heave: they carry no heave weight (run the throw tool first)")
        out[miss] = 0.0
    return np.clip(out, 0.0, None), msgs


def _check_faults(faults: gpd.GeoDataFrame) -> gpd.GeoDataFrame:
    if not isinstance(faults, gpd.GeoDataFrame):
        raise InputError("faults must be a GeoDataFrame of LineStrings in the working CRS")
    if faults.crs is not None and faults.crs.is_geographic:
        raise InputError("faults are in a geographic CRS: reproject them to a projected metric CRS first")
    geom = np.asarray(faults.geometry.values)
    ok = ~(shapely.is_missing(geom) | shapely.is_empty(geom))
    types = shapely.get_type_id(geom)
    bad = ok & ~np.isin(types, (1, 5))
    if bad.any():
        raise GeometryError("faults must be LineStrings or MultiLineStrings: found other geometry types")
    if not ok.all():
        warnings.warn(f"{int((~ok).sum())} fault(s) with empty geometry ignored", FaultmapWarning, stacklevel=3)
        faults = faults.loc[ok]
    if len(faults) == 0:
        raise InputError("no fault traces to analyse: the faults layer is empty")
    return faults


def _fault_ids(faults: gpd.GeoDataFrame) -> np.ndarray:
    if "fault_id" in faults:
        return np.asarray(faults["fault_id"]).astype(np.int64)
    return np.arange(1, len(faults) + 1, dtype=np.int64)


def _pieces(faults: gpd.GeoDataFrame, max_piece_m: float, weight: str) -> dict[str, np.ndarray]:
    """Split traces into short straight pieces (vectorised)."""
    geoms = shapely.segmentize(np.asarray(faults.geometry.values), max_piece_m)
    parts, part_fault = shapely.get_parts(geoms, return_index=True)
    coords, cidx = shapely.get_coordinates(parts, return_index=True)
    same = cidx[1:] == cidx[:-1]
    p0 = coords[:-1][same]
    p1 = coords[1:][same]
    fidx = part_fault[cidx[:-1][same]]
    d = p1 - p0
    plen = np.hypot(d[:, 0], d[:, 1])
    keep = plen > 0
    p0, p1, fidx, plen, d = p0[keep], p1[keep], fidx[keep], plen[keep], d[keep]
    flen = shapely.length(np.asarray(faults.geometry.values))
    heave, _ = fault_heave_m2(faults)
    frac = plen / flen[fidx]
    w_heave = heave[fidx] * frac
    w = w_heave if weight == "heave" else plen
    return {
        "p0": p0,
        "p1": p1,
        "mid": 0.5 * (p0 + p1),
        "length": plen,
        "fault": fidx,
        "w": w,
        "w_heave": w_heave,
        "azimuth": np.degrees(np.arctan2(d[:, 0], d[:, 1])) % 180.0,
    }


def _choose_weight(faults: gpd.GeoDataFrame, weight: str) -> str:
    if weight not in ("heave", "length"):
        raise ParameterError(f"weight must be 'heave' or 'length', not {weight!r}")
    if weight == "heave":
        heave, msgs = fault_heave_m2(faults)
        if not np.any(heave > 0):
            warnings.warn("no fault has a heave: axis weighted by trace length instead", FaultmapWarning, stacklevel=3)
            return "length"
        for m in msgs:
            warnings.warn(m, FaultmapWarning, stacklevel=3)
    return weight


def _weighted_quantiles(v: np.ndarray, w: np.ndarray, q: np.ndarray) -> np.ndarray:
    ok = np.isfinite(v) & (w > 0)
    if not ok.any():
        return np.full(len(q), np.nan)
    order = np.argsort(v[ok])
    vs = v[ok][order]
    ws = w[ok][order]
    cum = np.cumsum(ws)
    f = (cum - 0.5 * ws) / cum[-1]
    return np.interp(q, f, vs)


def heave_concentration(
    faults: gpd.GeoDataFrame,
    *,
    top_fraction: float = 0.1,
    by_system: bool = True,
) -> dict[str, float]:
    """How much of the total heave the largest faults (or systems) carry.

    Parameters
    ----------
    faults : GeoDataFrame
        Fault traces with heave (see :func:`fault_heave_m2`).
    top_fraction : float
        Fraction of the largest units whose heave share is reported
        (default 0.1: the top 10 %, at least one unit).
    by_system : bool
        Sum heave over linked systems (``system_id``) first, so that a
        segmented border fault counts as one unit.

    Returns
    -------
    dict
        ``n_units``, ``top_k``, ``top_share`` (share of total heave on the
        ``top_k`` largest units), ``top3_share``, ``gini`` (0 = equal heave on
        every unit, towards 1 = all heave on one unit).

    Notes
    -----
    Gini coefficient (Gini 1912) of the heave per unit, computed as
    ``G = 2 sum(i x_i) / (n sum x) - (n + 1) / n`` on ascending values.
    Using the heave share of the largest faults as a measure of strain
    localisation is common practice (e.g. the "border fault" argument for
    narrow rifts); the thresholds used with it are ours.
    """
    if not 0.0 < top_fraction <= 1.0:
        raise ParameterError("top_fraction must be in (0, 1]")
    heave, _ = fault_heave_m2(faults)
    if by_system and "system_id" in faults:
        sid = pd.Series(np.asarray(faults["system_id"], dtype=float))
        key = sid.where(sid.notna(), -1.0 - np.arange(len(sid)))
        units = pd.Series(heave).groupby(key.to_numpy()).sum().to_numpy()
    else:
        units = heave
    units = np.sort(units[np.isfinite(units)])[::-1]
    n = int(units.size)
    total = float(units.sum())
    k = max(1, int(math.ceil(top_fraction * n - 1e-9)))
    if n == 0 or total <= 0:
        return {"n_units": n, "top_k": k, "top_share": np.nan, "top3_share": np.nan, "gini": np.nan}
    asc = units[::-1]
    i = np.arange(1, n + 1)
    gini = float(2.0 * np.sum(i * asc) / (n * total) - (n + 1.0) / n)
    return {
        "n_units": n,
        "top_k": k,
        "top_share": float(units[:k].sum() / total),
        "top3_share": float(units[:3].sum() / total),
        "gini": gini,
    }

