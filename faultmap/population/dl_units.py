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
        rows = []
        if system_length == "extent" and not has_geom:
            notes.append("faults have no geometry: system length is the sum of segment lengths")
            system_length = "sum"
        if system_throw == "summed" and (stations is None or len(stations) == 0):
            notes.append("no throw stations given: system max throw is the max over its segments")
            system_throw = "max"
        geoms = np.asarray(faults["geometry"]) if has_geom else None
        for s in pd.unique(sid):  # loop over systems (a handful)
            m = sid == s
            seg_ids = fid[m]
            if m.sum() == 1 or system_length == "sum":
                L = float(np.nansum(length[m])) if m.sum() > 1 else float(length[m][0])
            else:
                import shapely

                axis = _system_axis(geoms[m], strike[m], length[m])
                xy = shapely.get_coordinates(geoms[m])
                proj = xy @ axis
                L = float(np.ptp(proj)) if proj.size else float("nan")
            t_seg = throw[m]
            e_seg = err[m]
            if system_throw == "summed" and m.sum() > 1:
                T, E = _summed_throw(
                    stations, seg_ids, geoms[m] if geoms is not None else None, strike[m], length[m]
                )
                if not np.isfinite(T):
                    T, E = _max_over(t_seg, e_seg)
            else:
                T, E = _max_over(t_seg, e_seg)
            w = np.where(np.isfinite(length[m]), length[m], 0.0)
            dips = dip[m]
            okd = np.isfinite(dips)
            D_ = float(np.average(dips[okd], weights=w[okd] + 1e-12)) if okd.any() else float("nan")
            rows.append(
                {
                    "unit_id": int(s) if s >= 0 else int(seg_ids[0]),
                    "fault_ids": ",".join(str(f) for f in seg_ids),
                    "n_segments": int(m.sum()),
                    "length_m": L,
                    "max_throw_m": T,
                    "max_throw_err_m": E,
                    "dip_deg": D_,
                    "censored": bool(censored[m].any()),
                    "system_size": int(m.sum()),
                }
            )
        cols = [
            "unit_id",
            "fault_ids",
            "n_segments",
            "length_m",
            "max_throw_m",
            "max_throw_err_m",
            "dip_deg",
            "censored",
            "system_size",
        ]
        pop = pd.DataFrame(rows, columns=cols)

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


def _max_over(t: np.ndarray, e: np.ndarray) -> tuple[float, float]:
    ok = np.isfinite(t)
    if not ok.any():
        return float("nan"), float("nan")
    i = int(np.argmax(np.where(ok, t, -np.inf)))
    return float(t[i]), float(e[i])


def _summed_throw(
    stations: pd.DataFrame, seg_ids: np.ndarray, geoms: Any, strikes: np.ndarray, lengths: np.ndarray
) -> tuple[float, float]:
    """Max of the summed along-strike throw profile of overlapping segments."""
    import shapely

    st = stations[np.isin(np.asarray(stations["fault_id"]).astype(np.int64), seg_ids)]
    if "status" in st:
        st = st[st["status"] == "ok"]
    st = st[np.isfinite(np.asarray(st["throw_m"], dtype=float))]
    if len(st) < 2 or "geometry" not in st:
        return float("nan"), float("nan")
    axis = _system_axis(geoms, strikes, lengths) if geoms is not None else None
    if axis is None:
        return float("nan"), float("nan")
    xy = shapely.get_coordinates(np.asarray(st["geometry"]))
    s_all = xy @ axis
    grid = np.unique(s_all)
    total = np.zeros(grid.size)
    var = np.zeros(grid.size)
    sf = np.asarray(st["fault_id"]).astype(np.int64)
    t_all = np.asarray(st["throw_m"], dtype=float)
    e_all = np.asarray(st["throw_err_m"], dtype=float) if "throw_err_m" in st else np.zeros(len(st))
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
