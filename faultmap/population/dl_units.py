"""Units of a displacement-length analysis: single traces or linked systems.

Pure functions: a faults table (GeoDataFrame or DataFrame with the columns of
the data contract in ``DEVELOPERS.md``) in, one row per unit of analysis out,
with its length, maximum throw (or dip-slip displacement), censoring and
whether it enters the fits. A linked system's length is its extent along the
segments' mean strike (or the sum of segment lengths); its throw is the
largest segment throw or the maximum of the summed along-strike profile.
"""

from __future__ import annotations

import warnings
from typing import Any

import numpy as np
import pandas as pd

from faultmap.errors import FaultmapWarning, InputError
from faultmap.population.linefit import _check_choice

__all__ = ["displacement_population"]

_REQUIRED = ("fault_id", "length_m", "max_throw_m")


def _system_axis(geoms: Any, strikes: np.ndarray, lengths: np.ndarray) -> np.ndarray:
    """Return the unit vector (east, north) of the mean strike of segments."""
    import shapely

    ok = np.isfinite(strikes) & np.isfinite(lengths)
    if ok.any():
        th = np.deg2rad(2.0 * strikes[ok])
        c, s = np.sum(lengths[ok] * np.cos(th)), np.sum(lengths[ok] * np.sin(th))
        if np.hypot(c, s) > 0:
            az = 0.5 * np.arctan2(s, c)
            return np.array([np.sin(az), np.cos(az)])
    xy = shapely.get_coordinates(np.asarray(geoms))
    xy = xy - xy.mean(axis=0)
    _, _, vt = np.linalg.svd(xy, full_matrices=False)
    return vt[0]


def _population(
    faults: pd.DataFrame,
    *,
    displacement: str,
    unit: str,
    include_censored: bool,
    system_length: str,
    system_throw: str,
    stations: pd.DataFrame | None,
    notes: list[str],
) -> pd.DataFrame:
    missing = [c for c in _REQUIRED if c not in faults.columns]
    if missing:
        raise InputError(f"faults table lacks column(s) {', '.join(missing)}: run the throw tool first")
    _check_choice("displacement", displacement, ("throw", "dip_slip"))
    _check_choice("unit", unit, ("trace", "system"))
    _check_choice("system_length", system_length, ("extent", "sum"))
    _check_choice("system_throw", system_throw, ("max", "summed"))

    n = len(faults)
    fid = np.asarray(faults["fault_id"]).astype(np.int64)
    length = np.asarray(faults["length_m"], dtype=float)
    throw = np.asarray(faults["max_throw_m"], dtype=float)
    err = (
        np.asarray(faults["max_throw_err_m"], dtype=float)
        if "max_throw_err_m" in faults
        else np.full(n, np.nan)
    )
    if "dip_deg" in faults:
        dip = np.asarray(faults["dip_deg"], dtype=float)
    else:
        dip = np.full(n, np.nan)
        if displacement == "dip_slip":
            raise InputError("faults table lacks dip_deg: needed for displacement='dip_slip'")
    censored = np.asarray(faults["censored"], dtype=bool) if "censored" in faults else np.zeros(n, dtype=bool)
    if "censored" not in faults:
        notes.append("faults table has no 'censored' column: all faults treated as uncensored")
    if "system_id" in faults:
        sid = np.asarray(pd.to_numeric(faults["system_id"], errors="coerce"), dtype=float)
        sid = np.where(np.isfinite(sid), sid, -fid.astype(float))  # lone faults: own system
    else:
        sid = -fid.astype(float)
        if unit == "system":
            notes.append("faults table has no 'system_id': each trace is its own system")
    strike = np.asarray(faults["strike_deg"], dtype=float) if "strike_deg" in faults else np.full(n, np.nan)
    has_geom = "geometry" in faults.columns

    if unit == "trace":
        pop = pd.DataFrame(
            {
                "unit_id": fid,
                "fault_ids": [str(f) for f in fid],
                "n_segments": np.ones(n, dtype=int),
                "length_m": length,
                "max_throw_m": throw,
                "max_throw_err_m": err,
                "dip_deg": dip,
                "censored": censored,
                "system_size": pd.Series(sid).map(pd.Series(sid).value_counts()).to_numpy(int),
            }
        )
    else:
        if system_length == "extent" and not has_geom:
            notes.append("faults have no geometry: system length is the sum of segment lengths")
            system_length = "sum"
        if system_throw == "summed" and (stations is None or len(stations) == 0):
            notes.append("no throw stations given: system max throw is the max over its segments")
            system_throw = "max"
        geoms = np.asarray(faults["geometry"]) if has_geom else None
        pop = _systems(
            fid,
            sid,
            length,
            throw,
            err,
            dip,
            censored,
            strike,
            geoms,
            system_length=system_length,
            system_throw=system_throw,
            stations=stations,
        )

    if displacement == "throw":
        pop["disp_m"] = pop["max_throw_m"]
        pop["disp_err_m"] = pop["max_throw_err_m"]
    else:
        sdip = np.sin(np.deg2rad(pop["dip_deg"].to_numpy(float)))
        pop["disp_m"] = pop["max_throw_m"] / sdip
        pop["disp_err_m"] = pop["max_throw_err_m"] / sdip
    pop["unit"] = unit

    reason = np.full(len(pop), "", dtype=object)
    L = pop["length_m"].to_numpy(float)
    D = pop["disp_m"].to_numpy(float)
    bad_len = ~(np.isfinite(L) & (L > 0))
    bad_d = ~(np.isfinite(D) & (D > 0))
    reason[bad_d] = "zero or missing displacement"
    reason[bad_len] = "zero or missing length"
    cens = pop["censored"].to_numpy(bool)
    if not include_censored:
        reason[(reason == "") & cens] = "censored"
    pop["used"] = reason == ""
    pop["excluded_reason"] = reason
    return pop


def _systems(
    fid: np.ndarray,
    sid: np.ndarray,
    length: np.ndarray,
    throw: np.ndarray,
    err: np.ndarray,
    dip: np.ndarray,
    censored: np.ndarray,
    strike: np.ndarray,
    geoms: np.ndarray | None,
    *,
    system_length: str,
    system_throw: str,
    stations: pd.DataFrame | None,
) -> pd.DataFrame:
    """One row per linked system (systems in order of first appearance).

    Group sums, maxima and mean strikes are computed for all systems at once
    (``np.bincount``, a lexicographic sort), so the work grows with the
    number of traces, not with traces x systems. Linked systems take one
    projection each of their own vertices (the same product as before, so
    the same extents to the last bit), the ``system_throw='summed'`` profiles
    one pass each over their own stations, and the rare systems without a
    usable strike their axis by SVD.
    """
    codes, uniq = pd.factorize(sid)
    codes = codes.astype(np.int64)
    G = int(uniq.size)
    n_seg = np.bincount(codes, minlength=G)
    order = np.argsort(codes, kind="stable")  # traces grouped, input order within a group
    starts = np.r_[0, np.cumsum(n_seg)[:-1]] if G else np.empty(0, dtype=np.int64)
    first = order[starts] if G else np.empty(0, dtype=np.int64)
    fid_groups = np.split(fid[order].astype(str), np.cumsum(n_seg)[:-1]) if G else []
    multi = n_seg > 1

    # length: own length, sum of lengths or extent along the mean strike
    L = length[first].astype(float)
    if system_length == "sum":
        sums = np.bincount(codes, weights=np.where(np.isnan(length), 0.0, length), minlength=G)
        L = np.where(multi, sums, L)
    elif multi.any():
        L = np.where(multi, _extents(codes, G, multi, strike, length, geoms), L)

    # throw: largest finite segment maximum (first such segment), its error
    tt = np.where(np.isfinite(throw), throw, -np.inf)
    best = np.lexsort((np.arange(fid.size), -tt, codes))[starts] if G else np.empty(0, dtype=np.int64)
    has_t = np.bincount(codes, weights=np.isfinite(throw), minlength=G) > 0
    T = np.where(has_t, throw[best], np.nan) if G else np.empty(0)
    E = np.where(has_t, err[best], np.nan) if G else np.empty(0)
    if system_throw == "summed" and multi.any():
        T, E = T.copy(), E.copy()
        for g, (Ts, Es) in _summed_throws(stations, fid, codes, order, starts, n_seg, strike, length, geoms):
            if np.isfinite(Ts):
                T[g], E[g] = Ts, Es

    # dip: length-weighted mean of the finite dips
    okd = np.isfinite(dip)
    w = np.where(np.isfinite(length), length, 0.0) + 1e-12
    wd = np.where(okd, w, 0.0)
    num = np.bincount(codes, weights=np.where(okd, dip, 0.0) * wd, minlength=G)
    den = np.bincount(codes, weights=wd, minlength=G)
    has_d = np.bincount(codes, weights=okd, minlength=G) > 0
    with np.errstate(invalid="ignore", divide="ignore"):
        Dip = np.where(has_d, num / np.where(has_d, den, 1.0), np.nan)

    uid = np.where(uniq >= 0, uniq, fid[first] if G else uniq).astype(np.int64)
    return pd.DataFrame(
        {
            "unit_id": uid,
            "fault_ids": [",".join(f) for f in fid_groups],
            "n_segments": n_seg.astype(int),
            "length_m": L,
            "max_throw_m": T,
            "max_throw_err_m": E,
            "dip_deg": Dip,
            "censored": np.bincount(codes, weights=censored, minlength=G) > 0,
            "system_size": n_seg.astype(int),
        },
        columns=[
            "unit_id",
            "fault_ids",
            "n_segments",
            "length_m",
            "max_throw_m",
            "max_throw_err_m",
            "dip_deg",
            "censored",
            "system_size",
        ],
    )


def _axes(
    codes: np.ndarray, G: int, strike: np.ndarray, length: np.ndarray, geoms: np.ndarray | None
) -> np.ndarray:
    """Return the unit vectors (east, north) of every system's mean strike, shape (G, 2).

    The length-weighted axial mean of the strikes (:func:`_system_axis`) for
    all systems at once; a system without a usable strike falls back to the
    SVD of its vertices, one system at a time (rare).
    """
    ok = np.isfinite(strike) & np.isfinite(length)
    th = np.deg2rad(2.0 * np.where(ok, strike, 0.0))
    wl = np.where(ok, length, 0.0)
    c = np.bincount(codes, weights=wl * np.cos(th), minlength=G)
    s = np.bincount(codes, weights=wl * np.sin(th), minlength=G)
    good = (np.bincount(codes, weights=ok, minlength=G) > 0) & (np.hypot(c, s) > 0)
    az = 0.5 * np.arctan2(s, c)
    axes = np.column_stack([np.sin(az), np.cos(az)])
    for g in np.flatnonzero(~good):  # systems without a strike: a handful
        m = codes == g
        axes[g] = _system_axis(geoms[m], strike[m], length[m])
    return axes


def _extents(
    codes: np.ndarray,
    G: int,
    multi: np.ndarray,
    strike: np.ndarray,
    length: np.ndarray,
    geoms: np.ndarray | None,
) -> np.ndarray:
    """Extent (m) of each system's vertices along its mean strike (NaN for single traces)."""
    import shapely

    keep = multi[codes]
    sub = np.flatnonzero(keep)
    remap = np.full(G, -1, dtype=np.int64)
    gm = np.flatnonzero(multi)
    remap[gm] = np.arange(gm.size)
    sc = remap[codes[sub]]
    axes = _axes(sc, gm.size, strike[sub], length[sub], geoms[sub])
    xy, gi = shapely.get_coordinates(geoms[sub], return_index=True)
    vg = sc[gi]
    o = np.argsort(vg, kind="stable")  # vertices grouped by system, input order within
    xy = xy[o]
    cnt = np.bincount(vg, minlength=gm.size)
    ends = np.cumsum(cnt)
    out = np.full(G, np.nan)
    for g in np.flatnonzero(cnt):  # one matrix-vector product per linked system
        proj = xy[ends[g] - cnt[g] : ends[g]] @ axes[g]
        out[gm[g]] = np.ptp(proj)
    return out


def _summed_throws(
    stations: pd.DataFrame,
    fid: np.ndarray,
    codes: np.ndarray,
    order: np.ndarray,
    starts: np.ndarray,
    n_seg: np.ndarray,
    strike: np.ndarray,
    length: np.ndarray,
    geoms: np.ndarray | None,
):
    """Yield (system, (summed max throw, error)) for every multi-segment system.

    The stations are filtered and sorted by fault id once; each system then
    takes its stations by binary search instead of scanning all of them.
    """
    import shapely

    st = stations
    keep = np.ones(len(st), dtype=bool)
    if "status" in st:
        keep &= np.asarray(st["status"] == "ok")
    keep &= np.isfinite(np.asarray(st["throw_m"], dtype=float))
    if "geometry" not in st or keep.sum() < 2 or geoms is None:
        return
    rows_ok = np.flatnonzero(keep)
    sf = np.asarray(st["fault_id"]).astype(np.int64)[rows_ok]
    so = np.argsort(sf, kind="stable")
    sfs = sf[so]
    xy = shapely.get_coordinates(np.asarray(st["geometry"])[rows_ok])
    t_all = np.asarray(st["throw_m"], dtype=float)[rows_ok]
    e_all = (
        np.asarray(st["throw_err_m"], dtype=float)[rows_ok] if "throw_err_m" in st else np.zeros(rows_ok.size)
    )
    for g in np.flatnonzero(n_seg > 1):  # loop over linked systems
        m = order[starts[g] : starts[g] + n_seg[g]]
        seg_ids = fid[m]
        lo = np.searchsorted(sfs, seg_ids, side="left")
        hi = np.searchsorted(sfs, seg_ids, side="right")
        pick = np.sort(np.concatenate([so[a:b] for a, b in zip(lo, hi, strict=True)]))
        yield (
            g,
            _summed_throw_arrays(
                sf[pick], xy[pick], t_all[pick], e_all[pick], seg_ids, geoms[m], strike[m], length[m]
            ),
        )


def _max_over(t: np.ndarray, e: np.ndarray) -> tuple[float, float]:
    ok = np.isfinite(t)
    if not ok.any():
        return float("nan"), float("nan")
    i = int(np.argmax(np.where(ok, t, -np.inf)))
    return float(t[i]), float(e[i])


def _summed_throw_arrays(
    sf: np.ndarray,
    xy: np.ndarray,
    t_all: np.ndarray,
    e_all: np.ndarray,
    seg_ids: np.ndarray,
    geoms: Any,
    strikes: np.ndarray,
    lengths: np.ndarray,
) -> tuple[float, float]:
    """Max of the summed along-strike throw profile of overlapping segments.

    Parameters
    ----------
    sf, xy, t_all, e_all : numpy.ndarray
        The system's good stations (input order): fault id, (x, y) (m),
        throw (m) and throw error (m).
    seg_ids, geoms, strikes, lengths
        The system's segments.

    Returns
    -------
    throw, error : float
        Maximum of the summed profile (m) and its error (errors added in
        quadrature); NaN when fewer than two stations.
    """
    if sf.size < 2:
        return float("nan"), float("nan")
    axis = _system_axis(geoms, strikes, lengths)
    s_all = xy @ axis
    grid = np.unique(s_all)
    total = np.zeros(grid.size)
    var = np.zeros(grid.size)
    e_all = np.where(np.isfinite(e_all), e_all, 0.0)
    for f in seg_ids:  # loop over a system's segments
        k = sf == f
        if k.sum() == 0:
            continue
        order = np.argsort(s_all[k])
        sk, tk, ek = s_all[k][order], t_all[k][order], e_all[k][order]
        inside = (grid >= sk[0]) & (grid <= sk[-1])
        total += np.where(inside, np.interp(grid, sk, tk), 0.0)
        var += np.where(inside, np.interp(grid, sk, ek) ** 2, 0.0)
    i = int(np.argmax(total))
    return float(total[i]), float(np.sqrt(var[i]))


def displacement_population(
    faults: pd.DataFrame,
    *,
    displacement: str = "throw",
    unit: str = "trace",
    include_censored: bool = False,
    system_length: str = "extent",
    system_throw: str = "max",
    stations: pd.DataFrame | None = None,
) -> pd.DataFrame:
    """Build the table of units (traces or linked systems) to fit.

    Parameters
    ----------
    faults : pandas.DataFrame or geopandas.GeoDataFrame
        Faults with ``fault_id``, ``length_m`` (m), ``max_throw_m`` (m) and,
        when present, ``max_throw_err_m`` (m), ``dip_deg``, ``censored``,
        ``system_id``, ``strike_deg`` and a LineString geometry.
    displacement : {'throw', 'dip_slip'}
        Fit the maximum throw, or the maximum dip-slip displacement
        ``u = T / sin(dip)`` (geometry; error scaled the same way, dip error
        ignored).
    unit : {'trace', 'system'}
        Unit of analysis: individual traces, or linked systems (``system_id``).
    include_censored : bool
        Keep faults with a tip at the map/DEM edge (their length is a lower
        bound). Default False: they are marked ``excluded_reason='censored'``.
    system_length : {'extent', 'sum'}
        System length: extent along the system's mean strike of all its
        segment vertices (default), or the sum of segment lengths.
    system_throw : {'max', 'summed'}
        System max throw: the largest segment max throw (default), or the
        maximum of the along-strike sum of overlapping segment profiles
        (needs ``stations``; errors added in quadrature).
    stations : pandas.DataFrame, optional
        ``throw_stations`` layer (``fault_id``, ``throw_m``, ``throw_err_m``,
        ``status``, Point geometry); only for ``system_throw='summed'``.

    Returns
    -------
    pandas.DataFrame
        Columns ``unit_id``, ``fault_ids``, ``n_segments``, ``length_m``,
        ``max_throw_m``, ``max_throw_err_m``, ``dip_deg``, ``censored``,
        ``system_size``, ``disp_m``, ``disp_err_m``, ``unit``, ``used``,
        ``excluded_reason``.

    Notes
    -----
    Censored lengths are lower bounds; keeping them out of fits is the safe
    default (shared methods notes; common practice). Notices are emitted as
    :class:`~faultmap.errors.FaultmapWarning`.
    """
    notes: list[str] = []
    pop = _population(
        faults,
        displacement=displacement,
        unit=unit,
        include_censored=include_censored,
        system_length=system_length,
        system_throw=system_throw,
        stations=stations,
        notes=notes,
    )
    for msg in notes:
        warnings.warn(msg, FaultmapWarning, stacklevel=2)
    return pop
