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


def _hints(
    faults: pd.DataFrame,
    population: pd.DataFrame,
    flags: pd.DataFrame,
    *,
    unit: str,
    near_factor: float,
    detection_throw_m: float | None,
) -> np.ndarray:
    """Short reason hints for flagged units (empty for the others)."""
    hints = np.full(len(population), "", dtype=object)
    flagged = np.flatnonzero(flags["scaling_flag"].isin(["under_displaced", "over_displaced"]))
    if flagged.size == 0:
        return hints
    has_geom = "geometry" in faults.columns
    fid = np.asarray(faults["fault_id"]).astype(np.int64)
    flen = np.asarray(faults["length_m"], dtype=float)
    geoms = np.asarray(faults["geometry"]) if has_geom else None
    n_ok = np.asarray(faults["n_stations_ok"], dtype=float) if "n_stations_ok" in faults else None
    for i in flagged:  # loop over the few flagged units
        row = population.iloc[i]
        h: list[str] = []
        if bool(row["censored"]):
            h.append("censored")
        if int(row["system_size"]) > 1:
            h.append("linked system")
        if unit == "trace" and geoms is not None:
            import shapely

            k = np.flatnonzero(fid == int(row["unit_id"]))
            if k.size:
                k = int(k[0])
                big = np.flatnonzero(flen >= 2.0 * flen[k])
                if big.size and np.isfinite(flen[k]):
                    d = shapely.distance(geoms[k], geoms[big])
                    if np.nanmin(d) <= near_factor * flen[k]:
                        h.append("short fault near a larger one")
                if n_ok is not None and np.isfinite(n_ok[k]) and n_ok[k] < 3:
                    h.append("few throw stations")
        D = float(row["disp_m"])
        E = float(row["disp_err_m"])
        if np.isfinite(E) and D > 0 and E / D > 0.5:
            h.append("large throw error")
        T = float(row["max_throw_m"])
        if detection_throw_m is not None and np.isfinite(detection_throw_m) and T < detection_throw_m:
            h.append("throw below detection limit")
        hints[i] = "; ".join(h) if h else "no obvious cause"
    return hints
