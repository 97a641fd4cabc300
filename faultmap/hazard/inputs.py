"""Which faults the hazard screening takes, and how it reads them.

Selection of the screened faults (marked ``active`` or given by id), reading
optional numeric columns, the first and last point of each trace, and the
short id lists and de-duplicated messages the screening steps return. Pure
functions, no file I/O.
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely

from faultmap.errors import InputError, ParameterError

__all__ = ["select_faults"]


def _require(faults: pd.DataFrame, cols: tuple[str, ...], what: str) -> None:
    missing = [c for c in cols if c not in faults.columns]
    if missing:
        raise InputError(
            f"faults layer lacks column(s) {', '.join(missing)} needed for {what}; "
            "run the prepare tool first (and throw for slip rates)"
        )


def _ids_text(ids) -> str:
    ids = [str(int(i)) for i in ids]
    if len(ids) > 20:
        return ", ".join(ids[:20]) + f" and {len(ids) - 20} more"
    return ", ".join(ids)


def _compact(messages: list[str]) -> list[str]:
    """Keep order, drop exact duplicates."""
    return list(dict.fromkeys(messages))


def _col(df: pd.DataFrame, name: str, default: float = np.nan) -> np.ndarray:
    if name in df.columns:
        return pd.to_numeric(df[name], errors="coerce").to_numpy(float)
    return np.full(len(df), default, dtype=float)


def select_faults(
    faults: gpd.GeoDataFrame, *, fault_ids: list[int] | tuple[int, ...] | None = None
) -> tuple[np.ndarray, list[str]]:
    """Which faults to screen.

    Parameters
    ----------
    faults : geopandas.GeoDataFrame
        Faults with ``fault_id`` and (unless ``fault_ids`` is given) ``active``.
    fault_ids : sequence of int, optional
        Screen exactly these faults instead of those marked ``active``.

    Returns
    -------
    mask : numpy.ndarray of bool
        One entry per row of ``faults``.
    warnings : list of str
    """
    _require(faults, ("fault_id",), "hazard screening")
    ids = faults["fault_id"].to_numpy()
    if fault_ids is not None:
        wanted = np.asarray(list(fault_ids))
        unknown = np.setdiff1d(wanted, ids)
        if unknown.size:
            raise ParameterError(
                f"fault_ids {_ids_text(unknown)} are not in the faults layer; use ids listed in its fault_id field"
            )
        return np.isin(ids, wanted), []
    if "active" not in faults.columns:
        return np.zeros(len(faults), bool), [
            "faults layer has no 'active' field: no fault screened; mark active faults or pass fault_ids"
        ]
    act = faults["active"]
    mask = act.fillna(False).astype(bool).to_numpy()
    warns = []
    if not mask.any():
        warns.append("no fault is marked active: nothing screened; set 'active' or pass fault_ids")
    return mask, warns


def _selected(
    faults: gpd.GeoDataFrame, fault_ids: list[int] | tuple[int, ...] | None
) -> tuple[gpd.GeoDataFrame, np.ndarray, list[str]]:
    """Screened rows (fresh index), their fault ids and the selection warnings."""
    mask, warns = select_faults(faults, fault_ids=fault_ids)
    sel = faults.loc[mask].reset_index(drop=True)
    return sel, sel["fault_id"].to_numpy().astype(int), warns


def _endpoints(lines: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """First and last coordinate (x, y) of each (Multi)LineString."""
    coords, idx = shapely.get_coordinates(lines, return_index=True)
    n = len(lines)
    first = np.full((n, 2), np.nan)
    last = np.full((n, 2), np.nan)
    if idx.size:
        uniq, fpos = np.unique(idx, return_index=True)
        lpos = np.r_[fpos[1:], idx.size] - 1
        first[uniq] = coords[fpos]
        last[uniq] = coords[lpos]
    return first, last
