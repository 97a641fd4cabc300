"""Kappa t per station (final fields) and per fault (robust along-strike summary, ranking).

:func:`station_kappa_t` turns the raw degradation fields of the throw batches
into the ``throw_stations`` columns; :func:`summarise_degradation` gives each
fault a robust along-strike kappa t with its uncertainty, a flag saying
whether it is a measurement or a bound, and its rank in the population, from
freshest (1) to most degraded. Vectorised over all stations (pandas group
medians), no loop per fault.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from faultmap.scarps.diffusion import CODE_NAMES
from faultmap.scarps.profile_degradation import RAW_COLUMNS

__all__ = ["STATION_KT_COLUMNS", "FAULT_KT_COLUMNS", "station_kappa_t", "summarise_degradation"]

#: Columns :func:`station_kappa_t` adds to the stations.
STATION_KT_COLUMNS = ("kappa_t_m2", "kappa_t_err_m2", "kappa_t_bound_m2", "kappa_t_flag", "kappa_t_rmse_m")
#: Columns :func:`summarise_degradation` adds to the faults.
FAULT_KT_COLUMNS = (
    "kappa_t_m2",
    "kappa_t_err_m2",
    "kappa_t_scatter",
    "kappa_t_bound_m2",
    "kappa_t_n",
    "kappa_t_flag",
    "kappa_t_rank",
)
#: Fewest measured stations for a fault's kappa t.
MIN_STATIONS = 3


def station_kappa_t(stations: pd.DataFrame) -> pd.DataFrame:
    """Add the final kappa t fields to the stations, from the raw ones of the throw batches.

    Parameters
    ----------
    stations : pandas.DataFrame
        Finalised throw stations (``status``) with the raw fields ``kt_m2``,
        ``kt_se_m2``, ``kt_bound_m2``, ``kt_rmse_m``, ``kt_code`` (missing ones
        count as not fitted).

    Returns
    -------
    pandas.DataFrame
        The same frame (columns added, the input's own columns untouched):
        ``kappa_t_m2`` and ``kappa_t_err_m2`` (m^2, stations flagged ``ok``),
        ``kappa_t_bound_m2`` (``unresolved``: upper bound; ``broad``: lower
        bound), ``kappa_t_rmse_m`` and ``kappa_t_flag`` (``ok``,
        ``unresolved``, ``broad``, ``poor_fit``, ``no_scarp``, or
        ``not_fitted`` where the throw status is not ``ok`` or the fit was
        switched off).
    """
    df = stations.copy(deep=False)
    n = len(df)
    raw = {k: df[k].to_numpy(dtype=float) if k in df.columns else np.full(n, np.nan) for k in RAW_COLUMNS}
    ok_st = df["status"].to_numpy(dtype=object) == "ok" if "status" in df.columns else np.zeros(n, bool)
    code = np.where(ok_st & np.isfinite(raw["kt_code"]), raw["kt_code"], -1).astype(np.int64)
    names = np.array(["not_fitted"] + [CODE_NAMES[k] for k in sorted(CODE_NAMES)], dtype=object)
    good = code == 0
    df["kappa_t_m2"] = np.where(good, raw["kt_m2"], np.nan)
    df["kappa_t_err_m2"] = np.where(good, raw["kt_se_m2"], np.nan)
    df["kappa_t_bound_m2"] = np.where((code == 1) | (code == 2), raw["kt_bound_m2"], np.nan)
    df["kappa_t_rmse_m"] = np.where(code >= 0, raw["kt_rmse_m"], np.nan)
    df["kappa_t_flag"] = names[code + 1]
    return df


def summarise_degradation(faults: pd.DataFrame, stations: pd.DataFrame) -> pd.DataFrame:
    """Robust along-strike kappa t of every fault, its uncertainty and rank.

    Parameters
    ----------
    faults : pandas.DataFrame
        ``fault_id`` of every fault.
    stations : pandas.DataFrame
        Stations with ``fault_id`` and the fields of :func:`station_kappa_t`.

    Returns
    -------
    pandas.DataFrame
        A copy of ``faults`` with ``kappa_t_m2`` (median of the stations
        flagged ``ok``), ``kappa_t_err_m2`` (1 sigma of that median),
        ``kappa_t_scatter`` (robust standard deviation of ln kappa t along
        strike), ``kappa_t_bound_m2``, ``kappa_t_n`` (stations used),
        ``kappa_t_flag`` (``measured``; ``upper_bound``: most fitted
        stations are narrower than the pixels resolve, the scarp is at most
        this degraded; ``lower_bound``: broader than the profiles reach;
        ``none``) and ``kappa_t_rank`` (1 = freshest of the measured faults).

    Notes
    -----
    The median is robust to the stations that gullies, fans or a
    neighbour's tilt still spoil. Its error (ours): the larger of the
    median's sampling error under the along-strike scatter,
    1.2533 x 1.4826 MAD(ln kappa t) / sqrt(n / 2) (neighbouring stations
    share relief, hence n / 2 independent ones; 1.2533 = sqrt(pi / 2), the
    median's efficiency under a normal law, common practice), and the
    median station error / sqrt(n / 2), times the median.
    """
    f = faults.copy()
    fid = f["fault_id"].to_numpy()
    st = stations
    flag = st["kappa_t_flag"].to_numpy(dtype=object)
    g = st["fault_id"].to_numpy()
    kt = st["kappa_t_m2"].to_numpy(dtype=float)
    err = st["kappa_t_err_m2"].to_numpy(dtype=float)
    ok = (flag == "ok") & np.isfinite(kt) & (kt > 0)
    d = pd.DataFrame({"g": g[ok], "l": np.log(kt[ok]), "e": err[ok] / kt[ok]})
    grp = d.groupby("g")
    med = grp["l"].median()
    d["dev"] = np.abs(d["l"].to_numpy() - med.reindex(d["g"]).to_numpy())
    mad = d.groupby("g")["dev"].median() * 1.4826
    n = grp["l"].size()
    erel = grp["e"].median()
    neff = np.sqrt(np.maximum(n / 2.0, 1.0))
    sd_med = np.maximum(1.2533 * mad / neff, erel / neff)
    fitted = np.isin(flag, ("ok", "unresolved", "broad", "poor_fit"))
    cnt = pd.DataFrame({"g": g, "fit": fitted, "unres": flag == "unresolved", "broad": flag == "broad"})
    c = cnt.groupby("g")[["fit", "unres", "broad"]].sum()
    bnd = pd.DataFrame({"g": g, "b": st["kappa_t_bound_m2"].to_numpy(dtype=float)})
    ub = bnd[flag == "unresolved"].groupby("g")["b"].median()
    lb = bnd[flag == "broad"].groupby("g")["b"].median()

    def at(s, fill=np.nan):
        return s.reindex(fid).to_numpy(dtype=float) if len(s) else np.full(fid.size, fill)

    n_ok = np.nan_to_num(at(n), nan=0.0)
    n_fit = np.nan_to_num(at(c["fit"]), nan=0.0)
    n_un = np.nan_to_num(at(c["unres"]), nan=0.0)
    n_br = np.nan_to_num(at(c["broad"]), nan=0.0)
    measured = n_ok >= MIN_STATIONS
    upper = ~measured & (n_un >= MIN_STATIONS) & (n_un >= 0.5 * n_fit)
    lower = ~measured & ~upper & (n_br >= MIN_STATIONS) & (n_br >= 0.5 * n_fit)
    k_med = np.exp(at(med))
    f["kappa_t_m2"] = np.where(measured, k_med, np.nan)
    f["kappa_t_err_m2"] = np.where(measured, k_med * at(sd_med), np.nan)
    f["kappa_t_scatter"] = np.where(measured, at(mad), np.nan)
    f["kappa_t_bound_m2"] = np.where(upper, at(ub), np.where(lower, at(lb), np.nan))
    f["kappa_t_n"] = np.where(measured, n_ok, np.where(upper, n_un, np.where(lower, n_br, 0))).astype(
        np.int64
    )
    f["kappa_t_flag"] = np.where(
        measured, "measured", np.where(upper, "upper_bound", np.where(lower, "lower_bound", "none"))
    ).astype(object)
    f["kappa_t_rank"] = pd.Series(f["kappa_t_m2"].to_numpy(dtype=float)).rank(method="min").to_numpy()
    return f
