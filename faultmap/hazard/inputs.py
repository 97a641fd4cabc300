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
from faultmap.numerics.dip_ranges import dip_draw_bounds

__all__ = ["select_faults", "rates_from_field"]


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


def morphologic_age_fallback(sel: pd.DataFrame) -> tuple[pd.DataFrame, list[str]]:
    """Fill a missing ``surface_age_ka`` with the scarp's morphologic age, flagged in ``age_source``.

    Where ``surface_age_ka`` is missing and the throw tool gave a morphologic age
    (``morph_age_ka``, ``morph_age_err_ka``: kappa t over a regional or calibrated kappa,
    :mod:`faultmap.scarps`), that age and its error are used; ``age_source`` says ``given``,
    ``morphologic`` or ``none``. Returns a copy and a warning naming the faults.
    """
    out = sel.copy()
    age = _col(out, "surface_age_ka")
    morph = _col(out, "morph_age_ka")
    use = ~np.isfinite(age) & np.isfinite(morph) & (morph > 0)
    out["age_source"] = np.where(np.isfinite(age), "given", np.where(use, "morphologic", "none")).astype(object)
    if not use.any():
        return out, []
    out["surface_age_ka"] = np.where(use, morph, age)
    err = _col(out, "surface_age_err_ka")
    out["surface_age_err_ka"] = np.where(use, _col(out, "morph_age_err_ka"), err)
    ids = out["fault_id"].to_numpy()[use] if "fault_id" in out.columns else np.flatnonzero(use)
    return out, [
        f"fault(s) {_ids_text(ids)}: no surface_age_ka, the morphologic age of the scarp (kappa t / kappa, "
        "regional kappa) used for the slip rate (age_source morphologic)"
    ]


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


# --------------------------------------------------------------------------
# slip rates given as a field (fault databases): used where throw and age give none
# --------------------------------------------------------------------------
#: Rate draws held in memory at once (faults x draws).
_FIELD_CHUNK = 1_000_000


def _triangular(u: np.ndarray, lo: np.ndarray, mode: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """Inverse CDF of triangular distributions (one row per fault); a zero width gives the mode."""
    w = hi - lo
    with np.errstate(invalid="ignore", divide="ignore"):
        c = np.where(w > 0, (mode - lo) / w, 0.5)
        left = lo + np.sqrt(u * w * (mode - lo))
        right = hi - np.sqrt((1.0 - u) * w * (hi - mode))
    return np.where(w > 0, np.where(u < c, left, right), mode)


def rates_from_field(
    faults: gpd.GeoDataFrame, *, dip_range_deg: float = 10.0, n_draws: int = 10000, seed: int = 0
) -> tuple[gpd.GeoDataFrame, int, list[str]]:
    """Slip rates from a ``slip_rate_mm_yr`` field where throw and age gave none.

    Parameters
    ----------
    faults : geopandas.GeoDataFrame
        The screened faults (after :func:`faultmap.hazard.screening.screen_hazard`) with
        ``slip_rate_mm_yr`` and optionally ``slip_rate_min_mm_yr`` / ``slip_rate_max_mm_yr`` (a range or
        triple as read by :mod:`faultmap.traces.attributes`), ``dip_deg`` and optionally ``dip_min_deg``
        / ``dip_max_deg``.
    dip_range_deg : float
        Dips are drawn uniformly within +- this of ``dip_deg`` where no dip range is given.
    n_draws, seed : int
        Monte Carlo draws per fault and random seed.

    Returns
    -------
    faults : geopandas.GeoDataFrame
        A copy with the ``slip_rate_{vert,horiz,net}_mm_yr`` fields (median, ``_p16_``, ``_p84_``) and
        the recurrence filled where the field was used, ``rate_flag`` ``ok`` there, and
        ``slip_rate_source`` (``throw_age``, ``field`` or empty).
    n_used : int
        Faults whose rates come from the field.
    warnings : list of str

    Notes
    -----
    The field is read as the net (dip-slip) rate, as fault databases give it (common practice); the
    vertical and horizontal rates are net x sin(dip) and net x cos(dip) (geometry). A range or triple
    is drawn as a triangular distribution (minimum, preferred, maximum; a range's preferred value is
    its midpoint); the dip uniformly within its range. Recurrence = the screening's single-event
    displacement / net rate, drawn with the rate.
    """
    out = faults.copy()
    n = len(out)
    screened = out["hazard_screened"].to_numpy(dtype=bool) if "hazard_screened" in out else np.ones(n, bool)
    pref = _col(out, "slip_rate_mm_yr")
    lo = _col(out, "slip_rate_min_mm_yr")
    hi = _col(out, "slip_rate_max_mm_yr")
    lo = np.where(np.isfinite(lo), lo, pref)
    hi = np.where(np.isfinite(hi), hi, pref)
    have = np.isfinite(_col(out, "slip_rate_vert_mm_yr"))
    use = screened & np.isfinite(pref) & (pref > 0) & ~have
    source = np.where(have & screened, "throw_age", np.where(use, "field", ""))
    out["slip_rate_source"] = source.astype(object)
    warns: list[str] = []
    zero = screened & np.isfinite(pref) & (pref <= 0) & ~have
    if zero.any():
        warns.append(
            f"fault(s) {_ids_text(out['fault_id'].to_numpy()[zero])}: slip_rate_mm_yr is 0: no rate or recurrence"
        )
    rows = np.flatnonzero(use)
    if rows.size == 0:
        return out, 0, warns
    dlo, dhi = dip_draw_bounds(
        _col(out, "dip_deg")[rows], dip_range_deg, _col(out, "dip_min_deg")[rows], _col(out, "dip_max_deg")[rows]
    )
    ev = _col(out, "event_displacement_m")[rows]
    rng = np.random.default_rng(seed + 2)
    pct = {k: np.full((3, rows.size), np.nan) for k in ("net", "vert", "horiz", "rec")}
    per = max(1, _FIELD_CHUNK // int(n_draws))
    for s in range(0, rows.size, per):
        b = slice(s, min(s + per, rows.size))
        r = rows[b]
        shape = (r.size, int(n_draws))
        net = _triangular(rng.random(shape), lo[r, None], pref[r, None], hi[r, None])
        d = np.radians(dlo[b, None] + (dhi[b, None] - dlo[b, None]) * rng.random(shape))
        draws = {"net": net, "vert": net * np.sin(d), "horiz": net * np.cos(d)}
        with np.errstate(divide="ignore", invalid="ignore"):
            draws["rec"] = ev[b, None] * 1000.0 / net  # m / (mm/yr) x 1000 = yr
        for k, v in draws.items():
            pct[k][:, b] = np.percentile(v, (16.0, 50.0, 84.0), axis=1)
    for comp in ("vert", "horiz", "net"):
        for col, i in (
            (f"slip_rate_{comp}_p16_mm_yr", 0),
            (f"slip_rate_{comp}_mm_yr", 1),
            (f"slip_rate_{comp}_p84_mm_yr", 2),
        ):
            if col not in out:
                out[col] = np.nan
            out.loc[out.index[rows], col] = pct[comp][i]
    for col, i in (("recurrence_p16_yr", 0), ("recurrence_yr", 1), ("recurrence_p84_yr", 2)):
        if col not in out:
            out[col] = np.nan
        out.loc[out.index[rows], col] = np.where(np.isfinite(ev), pct["rec"][i], np.nan)
    if "rate_flag" in out:
        out["rate_flag"] = out["rate_flag"].astype(object)
        out.loc[out.index[rows], "rate_flag"] = "ok"
    if "recurrence_basis" in out:
        out["recurrence_basis"] = out["recurrence_basis"].astype(object)
        out.loc[out.index[rows], "recurrence_basis"] = np.where(
            np.isfinite(ev), "average event displacement / slip_rate_mm_yr field (net)", ""
        )
    return out, int(rows.size), warns
