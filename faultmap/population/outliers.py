"""Residuals from a displacement-length fit, outlier flags and their likely causes.

Pure functions: the population of :mod:`faultmap.population.dl_units` and a
:class:`~faultmap.population.linefit.LineFit` in, one row per unit out. No file I/O, no
printing, no global state.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from faultmap.errors import ParameterError
from faultmap.population.linefit import LineFit

__all__ = ["scaling_residuals"]


def scaling_residuals(
    population: pd.DataFrame,
    fit: LineFit,
    *,
    outlier_k: float = 2.0,
) -> pd.DataFrame:
    """log10 residuals from a fit and outlier flags, one row per unit.

    Parameters
    ----------
    population : pandas.DataFrame
        Output of :func:`~faultmap.population.dl_units.displacement_population`.
    fit : LineFit
        The fit residuals are measured from.
    outlier_k : float
        Flag units whose residual exceeds ``outlier_k`` standard deviations
        of the residuals of the fitted units (ddof = 2).

    Returns
    -------
    pandas.DataFrame
        ``unit_id``, ``scaling_residual`` (log10 D - fitted log10 D, dex),
        ``scaling_flag`` (``ok``, ``under_displaced``, ``over_displaced``,
        ``no_data`` or ``not_fitted``), ``under_displaced``, ``over_displaced``.
        Units left out of the fit (e.g. censored) are also measured and
        flagged against it.

    Notes
    -----
    A k-sigma rule on log residuals (common practice).
    """
    if outlier_k <= 0:
        raise ParameterError(f"outlier_k={outlier_k} must be positive (e.g. 2)")
    L = population["length_m"].to_numpy(float)
    D = population["disp_m"].to_numpy(float)
    ok = np.isfinite(L) & np.isfinite(D) & (L > 0) & (D > 0)
    res = np.full(L.size, np.nan)
    flag = np.full(L.size, "no_data", dtype=object)
    if not fit.fitted:
        flag[ok] = "not_fitted"
    else:
        with np.errstate(divide="ignore", invalid="ignore"):
            res[ok] = np.log10(D[ok]) - (fit.log10_gamma + fit.exponent * np.log10(L[ok]))
        used = population["used"].to_numpy(bool) & ok if "used" in population else ok
        sd = float(np.std(res[used], ddof=2)) if used.sum() > 2 else float("nan")
        flag[ok] = "ok"
        if np.isfinite(sd) and sd > 0:
            flag[ok & (res < -outlier_k * sd)] = "under_displaced"
            flag[ok & (res > outlier_k * sd)] = "over_displaced"
    return pd.DataFrame(
        {
            "unit_id": population["unit_id"].to_numpy(),
            "scaling_residual": res,
            "scaling_flag": flag,
            "under_displaced": flag == "under_displaced",
            "over_displaced": flag == "over_displaced",
        }
    )


def _near_larger(geoms: np.ndarray, flen: np.ndarray, k: np.ndarray, near_factor: float) -> np.ndarray:
    """Whether each trace ``k`` lies within ``near_factor`` own lengths of a trace at least twice as long.

    Parameters
    ----------
    geoms : numpy.ndarray
        Trace geometries (metric CRS).
    flen : numpy.ndarray
        Trace lengths (m).
    k : numpy.ndarray
        Positions of the traces asked about.
    near_factor : float
        Search radius in own lengths.

    Returns
    -------
    numpy.ndarray of bool
        One per ``k``.

    Notes
    -----
    Candidate pairs come from a shapely STRtree ``dwithin`` query (distance
    ``<= near_factor * flen[k]``, the same test as the minimum of the
    pairwise distances), so the work grows with the number of neighbours,
    not with the number of traces.
    """
    import shapely

    out = np.zeros(k.size, dtype=bool)
    ok = np.isfinite(flen[k])
    q = k[ok]
    if q.size == 0:
        return out
    tree = shapely.STRtree(geoms)
    pair = tree.query(geoms[q], predicate="dwithin", distance=near_factor * flen[q])
    big = flen[pair[1]] >= 2.0 * flen[q][pair[0]]
    hit = np.zeros(q.size, dtype=bool)
    hit[pair[0][big]] = True
    out[np.flatnonzero(ok)] = hit
    return out


def _join_hints(parts: list[tuple[np.ndarray, str]], size: int) -> np.ndarray:
    """Join the texts of the true masks with '; ' (object array of ``size``)."""
    out = np.full(size, "", dtype=object)
    for mask, text in parts:
        sel = np.flatnonzero(mask)
        cur = out[sel]
        out[sel] = np.where(cur == "", text, cur + ("; " + text))
    return out


def _hints(
    faults: pd.DataFrame,
    population: pd.DataFrame,
    flags: pd.DataFrame,
    *,
    unit: str,
    near_factor: float,
    detection_throw_m: float | None,
) -> np.ndarray:
    """Short reason hints for flagged units (empty for the others).

    Vectorised over the flagged units; the neighbour search uses a spatial
    index (:func:`_near_larger`).
    """
    hints = np.full(len(population), "", dtype=object)
    flagged = np.flatnonzero(flags["scaling_flag"].isin(["under_displaced", "over_displaced"]))
    if flagged.size == 0:
        return hints
    nf = flagged.size
    has_geom = "geometry" in faults.columns
    fid = np.asarray(faults["fault_id"]).astype(np.int64)
    flen = np.asarray(faults["length_m"], dtype=float)
    parts: list[tuple[np.ndarray, str]] = [
        (population["censored"].to_numpy(bool)[flagged], "censored"),
        (population["system_size"].to_numpy(np.int64)[flagged] > 1, "linked system"),
    ]
    if unit == "trace" and has_geom:
        geoms = np.asarray(faults["geometry"])
        uid = population["unit_id"].to_numpy().astype(np.int64)[flagged]
        order = np.argsort(fid, kind="stable")
        at = np.searchsorted(fid[order], uid)
        found = at < fid.size
        found[found] = fid[order][at[found]] == uid[found]
        k = order[np.where(found, at, 0)]  # first trace with the unit's id
        near = np.zeros(nf, dtype=bool)
        near[found] = _near_larger(geoms, flen, k[found], near_factor)
        parts.append((near, "short fault near a larger one"))
        if "n_stations_ok" in faults:
            n_ok = np.asarray(faults["n_stations_ok"], dtype=float)[k]
            parts.append((found & np.isfinite(n_ok) & (n_ok < 3), "few throw stations"))
    D = population["disp_m"].to_numpy(float)[flagged]
    E = population["disp_err_m"].to_numpy(float)[flagged]
    with np.errstate(divide="ignore", invalid="ignore"):
        parts.append((np.isfinite(E) & (D > 0) & (E / D > 0.5), "large throw error"))
    if detection_throw_m is not None and np.isfinite(detection_throw_m):
        T = population["max_throw_m"].to_numpy(float)[flagged]
        parts.append((T < detection_throw_m, "throw below detection limit"))
    text = _join_hints(parts, nf)
    text[text == ""] = "no obvious cause"
    hints[flagged] = text
    return hints
