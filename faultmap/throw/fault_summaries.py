"""Per-fault throw figures from the along-strike throw profiles.

From the station throws of each fault (sorted by distance along the trace),
smoothed by :mod:`faultmap.throw.smoothing`: the maximum (refined between
stations), mean throw, heave integral and tip gradients
(:func:`summarise_faults`). Everything is vectorised over all the stations
of all faults at once.
"""

from __future__ import annotations

import warnings as _warnings

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely

from faultmap.throw.smoothing import _smooth_profiles

__all__ = [
    "summarise_faults",
    "MAX_THROW_STATION_SHARE",
    "MAX_THROW_MODEL_REL_ERR",
    "MAX_THROW_SAMPLING_SHARE",
]

#: Share of a fault's typical (median) station throw error that smoothing cannot average away:
#: neighbouring stations share relief, far-field surfaces and DEM errors, so their errors are
#: correlated along strike. Calibrated on synthetic scenes (docs/methods/throw.md, "Error of the
#: maximum throw").
MAX_THROW_STATION_SHARE = 0.75

#: Relative model error of a maximum throw: what a straight-line far-field surface cannot
#: represent (flexure and tapering neighbours within the profile, scarp degradation).
#: Calibrated on synthetic scenes with several pixel sizes, noise, roughness and profile shapes.
MAX_THROW_MODEL_REL_ERR = 0.025

#: Sampling error of a peak between stations: the apex may lie anywhere up to a station from the
#: highest one, so the maximum may miss up to the smoothed throw change to the farther-dropping
#: neighbour; taken as uniform on [0, change], its standard deviation is change / sqrt(12).
MAX_THROW_SAMPLING_SHARE = 1.0 / np.sqrt(12.0)


def _vertex_between_stations(i, g, d, T, se, usable, coef, key):
    """Refine maxima at stations ``i`` with the local polynomial up to half a station either way.

    A peak that falls between two stations is under-sampled by both; the
    local quadratic fitted at the highest station is evaluated at its vertex
    (or at half a station towards the higher neighbour), only towards
    neighbours that were measured, and never above what the stations involved
    allow (raw throw + 2 sigma). Returns the value and its distance along
    the trace.
    """
    n = d.size
    val = key[i].copy()
    pos = d[i].copy()
    if i.size == 0:
        return val, pos
    nb_l = i - 1
    nb_r = i + 1
    has_l = (nb_l >= 0) & (g[np.maximum(nb_l, 0)] == g[i]) & usable[np.maximum(nb_l, 0)]
    has_r = (nb_r < n) & (g[np.minimum(nb_r, n - 1)] == g[i]) & usable[np.minimum(nb_r, n - 1)]
    sp_l = np.where(has_l, d[i] - d[np.maximum(nb_l, 0)], np.nan)
    sp_r = np.where(has_r, d[np.minimum(nb_r, n - 1)] - d[i], np.nan)
    c0, c1, c2 = coef[i, 0], coef[i, 1], coef[i, 2]
    lo = np.where(has_l, -0.5, 0.0)
    hi = np.where(has_r, 0.5, 0.0)
    with np.errstate(invalid="ignore", divide="ignore"):
        xv = np.where(c2 < 0, -c1 / (2.0 * c2), 0.0)
    xv = np.clip(np.nan_to_num(xv), lo, hi)
    cand = np.stack([lo, hi, xv], axis=1)
    pv = c0[:, None] + c1[:, None] * cand + c2[:, None] * cand * cand
    k = np.nanargmax(np.where(np.isfinite(pv), pv, -np.inf), axis=1)
    xb = cand[np.arange(i.size), k]
    vb = pv[np.arange(i.size), k]
    cap_self = T[i] + 2.0 * se[i]
    cap_l = np.where(has_l, T[np.maximum(nb_l, 0)] + 2.0 * se[np.maximum(nb_l, 0)], -np.inf)
    cap_r = np.where(has_r, T[np.minimum(nb_r, n - 1)] + 2.0 * se[np.minimum(nb_r, n - 1)], -np.inf)
    cap = np.where(
        xb < 0, np.maximum(cap_self, cap_l), np.where(xb > 0, np.maximum(cap_self, cap_r), cap_self)
    )
    vb = np.minimum(vb, cap)
    better = np.isfinite(vb) & (vb > val)
    val = np.where(better, vb, val)
    step = np.where(xb < 0, sp_l, sp_r)
    pos = np.where(better & (xb != 0), d[i] + xb * np.nan_to_num(step), pos)
    return val, pos


def _sorted_by_group(group, d) -> bool:
    """Whether stations are in (group, distance) order."""
    if group.size < 2:
        return True
    dg = np.diff(group)
    return bool(np.all(dg >= 0) and np.all((dg > 0) | (np.diff(d) >= 0)))


def _peak_drop(i, g, Ts, usable):
    """Largest change of the smoothed throw from stations ``i`` to a usable neighbour of the same fault."""
    n = Ts.size
    out = np.zeros(i.size)
    for j in (i - 1, i + 1):
        jc = np.clip(j, 0, max(n - 1, 0))
        has = (j >= 0) & (j < n) & (g[jc] == g[i]) & usable[jc]
        dv = np.abs(Ts[i] - Ts[jc])
        out = np.where(has & np.isfinite(dv), np.maximum(out, dv), out)
    return out


def _group_median(group, v, n_groups):
    """Median of ``v`` per group index (0..n_groups-1), NaN for empty groups; one sort."""
    out = np.full(n_groups, np.nan)
    if group.size == 0:
        return out
    o = np.lexsort((v, group))
    g, vv = group[o], v[o]
    starts = np.flatnonzero(np.r_[True, g[1:] != g[:-1]])
    counts = np.diff(np.r_[starts, g.size])
    lo = starts + (counts - 1) // 2
    hi = starts + counts // 2
    out[g[starts]] = 0.5 * (vv[lo] + vv[hi])
    return out


def _grouped_trapz(group, d, v, L, n_groups):
    """Integral over [0, L_g] of the piecewise-linear curve through (d, v), 0 at both ends."""
    g = np.concatenate([np.arange(n_groups), group, np.arange(n_groups)])
    dd = np.concatenate([np.zeros(n_groups), d, L])
    vv = np.concatenate([np.zeros(n_groups), v, np.zeros(n_groups)])
    o = np.lexsort((dd, g))
    g, dd, vv = g[o], dd[o], vv[o]
    same = g[1:] == g[:-1]
    seg = 0.5 * (vv[1:] + vv[:-1]) * (dd[1:] - dd[:-1])
    return np.bincount(g[1:][same], seg[same], minlength=n_groups)


def summarise_faults(
    faults: gpd.GeoDataFrame,
    stations: pd.DataFrame,
    *,
    smooth_stations: float | None = None,
    mapper=None,
    chunk_stations: int = 8192,
) -> tuple[gpd.GeoDataFrame, pd.DataFrame]:
    """Per-fault throw figures from the station throws.

    Parameters
    ----------
    faults : geopandas.GeoDataFrame
        ``fault_id``, geometry (for lengths), ``dip_deg``.
    stations : pandas.DataFrame
        Finalised stations (:func:`faultmap.throw.step.finalise_stations`).
    smooth_stations : float, optional
        Gaussian kernel sigma in station spacings (0 = raw stations);
        default chosen per fault by cross-validation.
    mapper : callable, optional
        ``mapper(func, items) -> list`` running the smoothing of chunks of
        whole faults, in order, possibly in parallel (an engine's map).
        Results do not depend on it.
    chunk_stations : int
        Stations per smoothing chunk (whole faults; bounded memory).

    Returns
    -------
    faults : geopandas.GeoDataFrame
        With ``max_throw_m``, ``max_throw_err_m``, ``max_throw_dist_m``,
        ``mean_throw_m``, ``heave_integral_m2``, ``tip_gradient_max``,
        ``tip_gradient_min``, ``n_stations``, ``n_stations_ok``.
    stations : pandas.DataFrame
        With ``throw_smooth_m``, ``throw_smooth_err_m`` and ``outlier``.

    Notes
    -----
    The maximum is taken on the along-strike profile smoothed with a
    Gaussian kernel (inverse-variance weighted) after a Hampel filter
    (running median of 5, 3 robust deviations; Hampel 1974) has set aside
    isolated outliers, so one noisy station cannot make the maximum. Its
    error is the larger of the propagated station errors and the local
    scatter about the smooth curve (``max_throw_fit_err_m``); the reported
    ``max_throw_err_m`` adds in quadrature 0.75 of the fault's median station
    error (station errors are correlated along strike, so smoothing cannot
    average them away), 2.5 % of the maximum (model error) and the sampling
    error of a peak between stations (the larger smoothed-throw change to a
    neighbour over sqrt(12)), a rule
    calibrated on synthetic scenes (``docs/methods/throw.md``). Mean throw and the heave integral
    integrate the piecewise-linear profile through the usable stations,
    tapering to zero at both tips (displacement vanishes at a fault tip;
    Walsh & Watterson 1988, from memory), so faults cut by the DEM edge are
    under-estimated (they are flagged ``censored``). Tip gradients fit
    throw = g x through the tip over the stations within a quarter of the
    length of each tip.
    """
    f = faults.copy()
    if _sorted_by_group(stations["fault_id"].to_numpy(), stations["dist_m"].to_numpy(dtype=float)):
        st = stations.reset_index(drop=True)
    else:
        st = stations.sort_values(["fault_id", "dist_m"], kind="stable").reset_index(drop=True)
    fid = f["fault_id"].to_numpy()
    pos = pd.Series(np.arange(len(f)), index=fid)
    g = st["fault_id"].map(pos).to_numpy()
    known = ~pd.isna(g)
    st = st.loc[known].reset_index(drop=True)
    g = g[known].astype(np.int64)
    L = shapely.length(f.geometry.to_numpy())
    T = st["throw_m"].to_numpy(dtype=float)
    se = st["throw_err_m"].to_numpy(dtype=float)
    hv = st["heave_m"].to_numpy(dtype=float)
    d = st["dist_m"].to_numpy(dtype=float)
    ok = (st["status"].to_numpy() == "ok") & np.isfinite(T)
    Ts, se_s, outl, sg, coef = _smooth_profiles(
        g,
        np.where(ok, T, np.nan),
        np.where(ok, se, np.nan),
        None if smooth_stations is None else float(smooth_stations),
        chunk=int(chunk_stations),
        mapper=mapper,
    )
    st["throw_smooth_m"] = Ts
    st["throw_smooth_err_m"] = se_s
    st["outlier"] = outl
    nF = len(f)
    # maximum of the smoothed profile per fault
    # the maximum is read where the profile is measured (an ok station), never in a gap
    # and no higher than the station's own measurement allows (raw throw + 2 sigma), so the
    # noise of a smoothed end point cannot make the maximum
    cap = np.minimum(Ts, T + 2.0 * se)
    key = np.where(np.isfinite(cap) & ok & ~outl, cap, -np.inf)
    # per fault (stations contiguous), the last station holding the largest key
    if g.size:
        starts = np.flatnonzero(np.r_[True, g[1:] != g[:-1]])
        top = np.maximum.reduceat(key, starts)
        runs = np.diff(np.r_[starts, g.size])
        at_top = key == np.repeat(top, runs)
        best = np.maximum.reduceat(np.where(at_top, np.arange(g.size), -1), starts)
    else:
        best = np.zeros(0, dtype=np.int64)
    mx = np.full(nF, np.nan)
    mx_err = np.full(nF, np.nan)
    mx_d = np.full(nF, np.nan)
    has = np.isfinite(key[best])
    bi = best[has]
    val, dpos = _vertex_between_stations(bi, g, d, T, se, ok & ~outl, coef, key)
    mx[g[bi]] = val
    mx_err[g[bi]] = se_s[bi]
    mx_fit_err = mx_err.copy()
    # the calibrated error of the maximum: the smoothed profile's own error, the share of the
    # station errors correlated along strike, and the relative model error, in quadrature
    st_err = _group_median(g[ok & ~outl], se[ok & ~outl], nF)
    drop = np.zeros(nF)
    drop[g[bi]] = _peak_drop(bi, g, Ts, ok & ~outl)
    mx_err = np.sqrt(
        mx_fit_err**2
        + (MAX_THROW_STATION_SHARE * np.nan_to_num(st_err)) ** 2
        + (MAX_THROW_MODEL_REL_ERR * mx) ** 2
        + (MAX_THROW_SAMPLING_SHARE * drop) ** 2
    )
    mx_d[g[bi]] = dpos
    n_ok = np.bincount(g[ok], minlength=nF)
    n_all = np.bincount(g, minlength=nF)
    okc = ok & ~outl
    throw_int = _grouped_trapz(g[okc], d[okc], T[okc], L, nF)
    heave_int = _grouped_trapz(g[okc], d[okc], hv[okc], L, nF)
    none = np.bincount(g[okc], minlength=nF) == 0
    mean_t = np.where(none, np.nan, throw_int / np.where(L > 0, L, np.nan))
    heave_int = np.where(none, np.nan, heave_int)
    # tip gradients
    x0 = d
    x1 = L[g] - d
    near0 = okc & (x0 <= 0.25 * L[g])
    near1 = okc & (x1 <= 0.25 * L[g])
    with np.errstate(invalid="ignore", divide="ignore"):
        g0 = np.bincount(g[near0], (x0 * T)[near0], minlength=nF) / np.bincount(
            g[near0], (x0 * x0)[near0], minlength=nF
        )
        g1 = np.bincount(g[near1], (x1 * T)[near1], minlength=nF) / np.bincount(
            g[near1], (x1 * x1)[near1], minlength=nF
        )
    g0[np.bincount(g[near0], minlength=nF) < 2] = np.nan
    g1[np.bincount(g[near1], minlength=nF) < 2] = np.nan
    with _warnings.catch_warnings():
        _warnings.simplefilter("ignore", RuntimeWarning)
        f["max_throw_m"] = mx
        f["max_throw_err_m"] = mx_err
        f["max_throw_fit_err_m"] = mx_fit_err
        f["max_throw_dist_m"] = mx_d
        f["mean_throw_m"] = mean_t
        f["heave_integral_m2"] = heave_int
        f["tip_gradient_max"] = np.fmax(g0, g1)
        f["tip_gradient_min"] = np.fmin(g0, g1)
    used = np.full(nF, np.nan)
    used[g] = sg
    f["smooth_stations_used"] = used
    f["n_stations"] = n_all.astype(np.int64)
    f["n_stations_ok"] = n_ok.astype(np.int64)
    return f, st
