"""Active-fault hazard screening.

Rupture scenarios, magnitudes, slip rates, recurrence intervals and
surface-rupture zones.

Pure functions: GeoDataFrames in, GeoDataFrames / DataFrames and lists of
warning strings out. No file I/O, no printing, no global state.

Input ``faults`` follows the data contract of DEVELOPERS.md (projected metric
working CRS; columns ``fault_id``, ``length_m``, ``dip_deg``, ``dip_dir_deg``,
``system_id``, ``active``, ``surface_age_ka`` and, after ``throw``,
``max_throw_m``, ``max_throw_err_m``, ``mean_throw_m``). Optional columns
used when present: ``surface_age_err_ka`` (1-sigma age error, ka),
``event_max_displacement_m`` and ``event_avg_displacement_m`` (displacement
in ONE earthquake, m) and ``mapping_uncertainty_m`` (m).

Everything here is a screening estimate; see :data:`CAUTION`.

Notes
-----
Magnitude relations: Wells & Coppersmith (1994, BSSA 84), Hanks & Bakun
(2002, BSSA 92), see :mod:`faultmap.magnitude`. Slip rate = displacement /
age of the offset surface; recurrence = single-event displacement / slip rate
(methods.md). Zone widths are common practice (from memory), not a code.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely
from scipy import stats

from faultmap.errors import InputError, ParameterError
from faultmap.magnitude import (
    MAGNITUDE_KEYS,
    PREFERRED_RULES,
    SHEAR_MODULUS_PA,
    displacement_from_magnitude,
    downdip_width_km,
    get_relation,
    magnitude_table,
    moment_from_magnitude,
    preferred_magnitude,
    range_warnings,
)

__all__ = [
    "CAUTION",
    "HazardResult",
    "select_faults",
    "rupture_scenarios",
    "slip_rate_draws",
    "slip_rates",
    "mapping_uncertainty_from_scale",
    "rupture_zones",
    "screen_hazard",
]

#: The caution that goes with every hazard output (figures, docs, run_info).
CAUTION = (
    "SCREENING ONLY. These magnitudes, slip rates, recurrence intervals and "
    "surface-rupture zones are first-pass estimates from mapped traces, a DEM "
    "and empirical relations whose scatter is large (about 0.25-0.4 magnitude "
    "units, one sigma) and which are valid only inside the data ranges they "
    "were fitted on. They are not a site-specific fault-rupture investigation "
    "(no trenching, no dating, no subsurface data). Local codes and licensed "
    "professionals decide on setbacks, design and land use."
)

_PCT = (16.0, 50.0, 84.0)


@dataclass
class HazardResult:
    """Everything :func:`screen_hazard` produces.

    Attributes
    ----------
    faults : geopandas.GeoDataFrame
        The input faults with hazard fields added (NaN for faults not screened).
    scenarios : geopandas.GeoDataFrame
        Layer ``rupture_scenarios``: one row per rupture scenario.
    zones : geopandas.GeoDataFrame
        Layer ``rupture_zones``.
    warnings : list of str
        Messages for the user, each naming the fault or scenario.
    settings : dict
        Values actually used (e.g. the mapping uncertainty, the preferred
        rule), for run_info.
    """

    faults: gpd.GeoDataFrame
    scenarios: gpd.GeoDataFrame
    zones: gpd.GeoDataFrame
    warnings: list[str] = field(default_factory=list)
    settings: dict = field(default_factory=dict)


# --------------------------------------------------------------------------
# helpers
# --------------------------------------------------------------------------

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


def _axis_unit_vector(lines: np.ndarray, weights: np.ndarray) -> np.ndarray:
    """Length-weighted axial mean direction of line end-to-end vectors (E, N)."""
    start, end = _endpoints(lines)
    d = end - start
    ang = np.arctan2(d[:, 1], d[:, 0])
    c = np.sum(weights * np.cos(2 * ang))
    s = np.sum(weights * np.sin(2 * ang))
    theta = 0.5 * math.atan2(s, c)
    return np.array([math.cos(theta), math.sin(theta)])


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
# scenarios and magnitudes
# --------------------------------------------------------------------------

def _connected(members: list[int], adj: np.ndarray) -> bool:
    todo, seen = [members[0]], {members[0]}
    mset = set(members)
    while todo:
        k = todo.pop()
        for j in np.flatnonzero(adj[k]):
            j = int(j)
            if j in mset and j not in seen:
                seen.add(j)
                todo.append(j)
    return len(seen) == len(mset)


def _components(adj: np.ndarray) -> list[list[int]]:
    n = adj.shape[0]
    label = -np.ones(n, int)
    comps = []
    for i in range(n):
        if label[i] >= 0:
            continue
        todo, comp = [i], []
        label[i] = len(comps)
        while todo:
            k = todo.pop()
            comp.append(k)
            for j in np.flatnonzero(adj[k] & (label < 0)):
                label[j] = len(comps)
                todo.append(int(j))
        comps.append(sorted(comp))
    return comps


def rupture_scenarios(
    faults: gpd.GeoDataFrame,
    *,
    fault_ids: list[int] | tuple[int, ...] | None = None,
    seismogenic_thickness_km: float = 15.0,
    link_gap_m: float | None = None,
    preferred: str = "area_mean",
    shear_modulus_pa: float = SHEAR_MODULUS_PA,
    event_max_displacement_m: float | None = None,
    event_avg_displacement_m: float | None = None,
) -> tuple[gpd.GeoDataFrame, list[str]]:
    """Rupture scenarios of the screened faults and their magnitudes.

    Parameters
    ----------
    faults : geopandas.GeoDataFrame
        Faults (working CRS, metres) with ``fault_id``, ``length_m``,
        ``dip_deg``, ``system_id`` and ``active`` (unless ``fault_ids``).
    fault_ids : sequence of int, optional
        Screen these faults instead of those marked active.
    seismogenic_thickness_km : float, optional
        Thickness of the seismogenic layer, km (default 15, common practice
        for continental crust). Down-dip width W = thickness / sin(dip).
    link_gap_m : float, optional
        When set, also build multi-segment scenarios: faults whose traces
        lie within this distance (m) of each other are linked (across
        systems too), and every run of along-strike neighbours that is
        connected by such links becomes a scenario.
    preferred : str, optional
        Rule for ``mag_preferred`` (see
        :func:`faultmap.magnitude.preferred_magnitude`): ``"area_mean"``
        (default) or a relation key such as ``"srl_wc94"``.
    shear_modulus_pa : float, optional
        Shear modulus for the seismic moment, Pa.
    event_max_displacement_m, event_avg_displacement_m : float, optional
        Single-event maximum / average displacement (m) for faults without
        the per-fault columns of the same names. Not cumulative throw.

    Returns
    -------
    scenarios : geopandas.GeoDataFrame
        Layer ``rupture_scenarios``: ``scenario_id``, ``kind`` (``segment``,
        ``system``, ``linked``), ``system_id`` (-1 when several),
        ``system_ids``, ``fault_ids`` (comma-separated), ``n_faults``,
        ``length_km``, ``sum_trace_length_km``, ``width_km``, ``area_km2``,
        ``mag_<relation>`` and ``mag_<relation>_sigma`` for every relation,
        ``mag_preferred``, ``mag_preferred_sigma``, ``preferred_rule``,
        ``m0_nm`` (from ``mag_preferred``), ``mean_slip_m`` (M0 / (mu A)),
        geometry (MultiLineString of the traces).
    warnings : list of str

    Notes
    -----
    Length of a single segment = its trace length. Length of a multi-fault
    scenario = the extent of its traces projected on their length-weighted
    mean direction, but not less than its longest member. Width = the
    length-weighted mean of the members' down-dip widths; area = length x
    width. Magnitudes: Wells & Coppersmith (1994) normal and all-slip
    relations on SRL, RA and (where known) MD and AD; Hanks & Bakun (2002)
    on RA. Seismic moment M0 = 10**(1.5 M + 9.1) N m (IASPEI form of
    Hanks & Kanamori 1979) from the preferred magnitude.
    """
    if preferred not in PREFERRED_RULES:
        raise ParameterError(f"preferred must be one of {', '.join(PREFERRED_RULES)}; got {preferred!r}")
    if not (seismogenic_thickness_km > 0):
        raise ParameterError("seismogenic_thickness_km must be > 0")
    if link_gap_m is not None and link_gap_m < 0:
        raise ParameterError("link_gap_m must be >= 0")
    _require(faults, ("fault_id", "dip_deg", "system_id"), "rupture scenarios")
    mask, warns = select_faults(faults, fault_ids=fault_ids)
    sel = faults.loc[mask].reset_index(drop=True)
    lines = sel.geometry.to_numpy()
    n = len(sel)
    ids = sel["fault_id"].to_numpy().astype(int)

    length_m = _col(sel, "length_m")
    length_m = np.where(np.isfinite(length_m), length_m, shapely.length(lines) if n else length_m)
    dip = _col(sel, "dip_deg")
    bad_dip = ~np.isfinite(dip) | (dip <= 0) | (dip > 90)
    if bad_dip.any():
        raise InputError(f"faults {_ids_text(ids[bad_dip])}: dip_deg missing or outside (0, 90]; fix the dips or rerun prepare")
    width_km = downdip_width_km(seismogenic_thickness_km, dip)
    md = _col(sel, "event_max_displacement_m")
    ad = _col(sel, "event_avg_displacement_m")
    if event_max_displacement_m is not None:
        md = np.where(np.isfinite(md), md, float(event_max_displacement_m))
    if event_avg_displacement_m is not None:
        ad = np.where(np.isfinite(ad), ad, float(event_avg_displacement_m))
    systems = sel["system_id"].to_numpy()

    # ---- member sets ---------------------------------------------------
    sets: list[tuple[str, tuple[int, ...]]] = [("segment", (i,)) for i in range(n)]
    seen = {frozenset(s) for _, s in sets}
    for sid in pd.unique(systems):
        members = tuple(int(i) for i in np.flatnonzero(systems == sid))
        if len(members) > 1 and frozenset(members) not in seen:
            sets.append(("system", members))
            seen.add(frozenset(members))
    if link_gap_m is not None and n > 1:
        tree = shapely.STRtree(lines)
        pairs = tree.query(lines, predicate="dwithin", distance=float(link_gap_m))
        adj = np.zeros((n, n), bool)
        adj[pairs[0], pairs[1]] = True
        np.fill_diagonal(adj, False)
        for comp in _components(adj):
            if len(comp) < 2:
                continue
            comp_arr = np.asarray(comp)
            axis = _axis_unit_vector(lines[comp_arr], length_m[comp_arr])
            cent = shapely.get_coordinates(shapely.centroid(lines[comp_arr]))
            order = comp_arr[np.argsort(cent @ axis, kind="stable")]
            for i0 in range(len(order)):
                for i1 in range(i0 + 2, len(order) + 1):
                    members = tuple(sorted(int(k) for k in order[i0:i1]))
                    if frozenset(members) in seen or not _connected(list(members), adj):
                        continue
                    sets.append(("linked", members))
                    seen.add(frozenset(members))

    # ---- geometry of each scenario -------------------------------------
    m = len(sets)
    scen_len = np.empty(m)
    scen_sum = np.empty(m)
    scen_w = np.empty(m)
    scen_md = np.full(m, np.nan)
    scen_ad = np.full(m, np.nan)
    geoms = []
    for k, (_kind, members) in enumerate(sets):
        mem = np.asarray(members)
        lens = length_m[mem]
        scen_sum[k] = lens.sum()
        scen_w[k] = np.sum(lens * width_km[mem]) / lens.sum() if lens.sum() > 0 else width_km[mem].mean()
        if len(mem) == 1:
            scen_len[k] = lens[0]
        else:
            axis = _axis_unit_vector(lines[mem], lens)
            proj = shapely.get_coordinates(lines[mem]) @ axis
            scen_len[k] = max(proj.max() - proj.min(), lens.max())
        if np.isfinite(md[mem]).any():
            scen_md[k] = np.nanmax(md[mem])
        if np.isfinite(ad[mem]).all():
            scen_ad[k] = np.sum(lens * ad[mem]) / lens.sum()
        geoms.append(shapely.multilinestrings(shapely.get_parts(lines[mem])))
    length_km = scen_len / 1000.0
    area_km2 = length_km * scen_w

    labels = []
    for kind, members in sets:
        fid = ",".join(str(ids[i]) for i in members)
        labels.append(f"fault {fid}" if kind == "segment" else f"{kind} scenario (faults {fid})")
    table, rw = magnitude_table(
        length_km=length_km, area_km2=area_km2, max_disp_m=scen_md, avg_disp_m=scen_ad, labels=labels
    )
    warns += rw
    short = np.flatnonzero(length_km < scen_w)
    if short.size:
        warns.append(
            "rupture length shorter than the down-dip width for "
            + "; ".join(labels[i] for i in short[:20])
            + (f" and {short.size - 20} more" if short.size > 20 else "")
            + ": the area (L x W) overstates a rupture of that length, prefer the SRL estimate there"
        )
    pref, pref_sig = preferred_magnitude(table, rule=preferred)
    m0 = moment_from_magnitude(pref)
    with np.errstate(invalid="ignore", divide="ignore"):
        mean_slip = m0 / (shear_modulus_pa * area_km2 * 1e6)

    sys_of = []
    sys_ids = []
    for _, members in sets:
        s = sorted({int(systems[i]) for i in members})
        sys_of.append(s[0] if len(s) == 1 else -1)
        sys_ids.append(",".join(str(v) for v in s))

    out = pd.DataFrame(
        {
            "scenario_id": np.arange(1, m + 1, dtype=int),
            "kind": [k for k, _ in sets],
            "system_id": np.asarray(sys_of, dtype=int),
            "system_ids": sys_ids,
            "fault_ids": [",".join(str(ids[i]) for i in mem) for _, mem in sets],
            "n_faults": np.asarray([len(mem) for _, mem in sets], dtype=int),
            "length_km": length_km,
            "sum_trace_length_km": scen_sum / 1000.0,
            "width_km": scen_w,
            "area_km2": area_km2,
            "event_max_displacement_m": scen_md,
            "event_avg_displacement_m": scen_ad,
        }
    )
    out = pd.concat([out, table], axis=1)
    out["mag_preferred"] = pref
    out["mag_preferred_sigma"] = pref_sig
    out["preferred_rule"] = preferred
    out["m0_nm"] = m0
    out["mean_slip_m"] = mean_slip
    gdf = gpd.GeoDataFrame(out, geometry=np.asarray(geoms, dtype=object) if m else [], crs=faults.crs)
    return gdf, _compact(warns)


# --------------------------------------------------------------------------
# slip rates and recurrence
# --------------------------------------------------------------------------

def slip_rate_draws(
    throw_m: np.ndarray,
    throw_err_m: np.ndarray,
    age_ka: np.ndarray,
    age_err_ka: np.ndarray,
    dip_deg: np.ndarray,
    *,
    dip_range_deg: float = 10.0,
    n_draws: int = 10000,
    seed: int = 0,
) -> dict[str, np.ndarray]:
    """Monte Carlo draws of vertical, horizontal and net slip rates.

    Parameters
    ----------
    throw_m, throw_err_m : numpy.ndarray, shape (n,)
        Cumulative throw of the offset surface and its 1-sigma error, m.
    age_ka, age_err_ka : numpy.ndarray, shape (n,)
        Age of the offset surface and its 1-sigma error, ka (> 0).
    dip_deg : numpy.ndarray, shape (n,)
        Fault dip, degrees.
    dip_range_deg : float, optional
        Dips are drawn uniformly within +- this range of ``dip_deg``
        (clipped to 1-90 degrees).
    n_draws : int, optional
        Draws per fault.
    seed : int, optional
        Seed of the numpy random generator; same seed, same draws.

    Returns
    -------
    dict of numpy.ndarray, each shape (n, n_draws)
        ``vert``, ``horiz``, ``net`` rates in mm/yr (m/ka = mm/yr), and the
        drawn ``throw_m``, ``age_ka``, ``dip_deg``.

    Notes
    -----
    Throw ~ normal(throw, err) truncated at 0; age ~ log-normal with median
    ``age_ka`` and coefficient of variation ``age_err_ka / age_ka``; dip ~
    uniform. Vertical rate = T / t; horizontal (heave, extension) rate =
    T / (t tan dip); net dip-slip rate = T / (t sin dip) (geometry;
    methods.md).
    """
    throw = np.asarray(throw_m, float)[:, None]
    terr = np.asarray(throw_err_m, float)[:, None]
    age = np.asarray(age_ka, float)[:, None]
    aerr = np.asarray(age_err_ka, float)[:, None]
    dip = np.asarray(dip_deg, float)[:, None]
    n = throw.shape[0]
    rng = np.random.default_rng(seed)
    shape = (n, int(n_draws))

    has_err = np.isfinite(terr) & (terr > 0)
    scale = np.where(has_err, terr, 1.0)
    loc = np.where(np.isfinite(throw), throw, 0.0)
    a = -loc / scale
    t_draw = stats.truncnorm.rvs(a, np.inf, loc=loc, scale=scale, size=shape, random_state=rng)
    t_draw = np.where(has_err, t_draw, throw)

    cv = np.where(np.isfinite(aerr) & (aerr > 0), aerr / age, 0.0)
    s_ln = np.sqrt(np.log1p(cv**2))
    age_draw = age * np.exp(s_ln * rng.standard_normal(shape))

    lo = np.clip(dip - dip_range_deg, 1.0, 90.0)
    hi = np.clip(dip + dip_range_deg, 1.0, 90.0)
    lo = np.minimum(lo, dip)
    dip_draw = lo + (hi - lo) * rng.random(shape)
    rad = np.radians(dip_draw)

    vert = t_draw / age_draw
    return {
        "vert": vert,
        "horiz": vert / np.tan(rad),
        "net": vert / np.sin(rad),
        "throw_m": t_draw,
        "age_ka": age_draw,
        "dip_deg": dip_draw,
    }


def slip_rates(
    faults: gpd.GeoDataFrame,
    *,
    fault_ids: list[int] | tuple[int, ...] | None = None,
    throw_field: str = "max_throw_m",
    age_rel_err: float = 0.2,
    age_abs_err_ka: float | None = None,
    dip_range_deg: float = 10.0,
    n_draws: int = 10000,
    seed: int = 0,
    max_age_ka: float = 5000.0,
    max_rate_mm_yr: float = 20.0,
    min_rate_mm_yr: float = 0.001,
    event_displacement_m: float | np.ndarray | None = None,
    magnitude_for_displacement: np.ndarray | None = None,
) -> tuple[pd.DataFrame, list[str]]:
    """Slip rates (with Monte Carlo percentiles) and recurrence intervals.

    Parameters
    ----------
    faults : geopandas.GeoDataFrame
        Faults with ``fault_id``, ``dip_deg``, ``surface_age_ka``, the throw
        field and ``max_throw_err_m``; optional ``surface_age_err_ka``.
    fault_ids : sequence of int, optional
        Screen these faults instead of those marked active.
    throw_field : str, optional
        Cumulative throw used: ``max_throw_m`` (default) or ``mean_throw_m``.
    age_rel_err : float, optional
        Relative 1-sigma age error (default 0.2) for faults without
        ``surface_age_err_ka`` and when ``age_abs_err_ka`` is not set.
    age_abs_err_ka : float, optional
        Absolute 1-sigma age error, ka (overrides ``age_rel_err``).
    dip_range_deg : float, optional
        Half-width of the uniform dip range drawn, degrees (default 10;
        methods.md: +-10-15 degrees for an unknown normal-fault dip).
    n_draws, seed : int, optional
        Monte Carlo draws per fault and random seed.
    max_age_ka : float, optional
        Ages above this (ka) are flagged ``age_suspect``: probably given
        in years (default 5000 ka).
    max_rate_mm_yr, min_rate_mm_yr : float, optional
        Median vertical rates outside this range are flagged ``rate_high`` /
        ``rate_low`` (implausible for a mapped scarp: check the age units).
    event_displacement_m : float or array, optional
        Characteristic single-event displacement, m (scalar or one value per
        screened fault). Where unknown, the median of Wells & Coppersmith
        (1994) normal log10(AD) = -4.45 + 0.63 M (from memory) at
        ``magnitude_for_displacement`` is used, with its scatter (0.33 log10
        units) drawn in the Monte Carlo.
    magnitude_for_displacement : array, optional
        One magnitude per screened fault (e.g. ``mag_preferred``); without
        it and without ``event_displacement_m`` no recurrence is given.

    Returns
    -------
    table : pandas.DataFrame
        One row per screened fault: ``fault_id``, ``throw_used_m``,
        ``age_used_ka``, ``age_err_used_ka``, ``slip_rate_{vert,horiz,net}_mm_yr``
        (median) with ``_p16_`` / ``_p84_`` percentiles, ``rate_flag``
        (``ok``, ``no_age``, ``no_throw``, ``age_suspect``, ``rate_high``,
        ``rate_low``; several joined by ``;``), ``event_displacement_m``,
        ``event_displacement_source``, ``recurrence_yr`` (median),
        ``recurrence_p16_yr``, ``recurrence_p84_yr``.
    warnings : list of str

    Raises
    ------
    InputError
        A screened fault has a zero or negative ``surface_age_ka``.

    Notes
    -----
    Slip rate = displacement / age of the offset surface; recurrence =
    single-event displacement / net slip rate (methods.md). 1 m / 1 ka =
    1 mm/yr. The Wells & Coppersmith displacement is the surface slip in one
    event, so recurrence uses the net dip-slip rate.
    """
    if throw_field not in ("max_throw_m", "mean_throw_m"):
        raise ParameterError("throw_field must be 'max_throw_m' or 'mean_throw_m'")
    if age_rel_err < 0 or (age_abs_err_ka is not None and age_abs_err_ka < 0):
        raise ParameterError("age errors must be >= 0")
    if not (0 <= dip_range_deg <= 45):
        raise ParameterError("dip_range_deg must be between 0 and 45")
    if n_draws < 100:
        raise ParameterError("n_draws must be >= 100 for stable percentiles")
    _require(faults, ("fault_id", "dip_deg"), "slip rates")
    mask, warns = select_faults(faults, fault_ids=fault_ids)
    sel = faults.loc[mask].reset_index(drop=True)
    n = len(sel)
    ids = sel["fault_id"].to_numpy().astype(int)

    age = _col(sel, "surface_age_ka")
    if "surface_age_ka" not in sel.columns and n:
        warns.append("faults layer has no 'surface_age_ka' field: slip rates and recurrence skipped for all faults; magnitudes still given")
    bad = np.isfinite(age) & (age <= 0)
    if bad.any():
        raise InputError(
            f"fault(s) {_ids_text(ids[bad])}: surface_age_ka must be > 0 (got {age[bad][0]:g}); fix the age (in ka)"
        )
    no_age = ~np.isfinite(age)
    if no_age.any() and "surface_age_ka" in sel.columns:
        warns.append(
            f"fault(s) {_ids_text(ids[no_age])}: no surface_age_ka, slip rate and recurrence skipped; magnitudes still given"
        )
    throw = _col(sel, throw_field)
    if throw_field not in sel.columns and n:
        warns.append(f"faults layer has no '{throw_field}' field (run the throw tool): slip rates skipped")
    no_throw = ~np.isfinite(throw) | (throw <= 0)
    nt = no_throw & ~no_age
    if nt.any() and throw_field in sel.columns:
        warns.append(f"fault(s) {_ids_text(ids[nt])}: no positive {throw_field}, slip rate and recurrence skipped")
    terr = _col(sel, "max_throw_err_m")
    if throw_field == "mean_throw_m" and "mean_throw_err_m" in sel.columns:
        terr = _col(sel, "mean_throw_err_m")
    miss_err = ~np.isfinite(terr) & ~no_throw & ~no_age
    if miss_err.any():
        warns.append(f"fault(s) {_ids_text(ids[miss_err])}: no throw error, throw treated as exact in the Monte Carlo")
    aerr = _col(sel, "surface_age_err_ka")
    default_err = age * age_rel_err if age_abs_err_ka is None else np.full(n, float(age_abs_err_ka))
    aerr = np.where(np.isfinite(aerr) & (aerr >= 0), aerr, default_err)

    ok = ~no_age & ~no_throw
    dip = _col(sel, "dip_deg")
    cols: dict[str, np.ndarray] = {}
    draws = slip_rate_draws(
        np.where(ok, throw, np.nan), terr, np.where(ok, age, 1.0), aerr, np.where(np.isfinite(dip), dip, 60.0),
        dip_range_deg=dip_range_deg, n_draws=n_draws, seed=seed,
    ) if n else None
    for comp in ("vert", "horiz", "net"):
        if n:
            p = np.percentile(draws[comp], _PCT, axis=1)
            p[:, ~ok] = np.nan
        else:
            p = np.empty((3, 0))
        cols[f"slip_rate_{comp}_mm_yr"] = p[1]
        cols[f"slip_rate_{comp}_p16_mm_yr"] = p[0]
        cols[f"slip_rate_{comp}_p84_mm_yr"] = p[2]

    # ---- flags -------------------------------------------------------------
    flags = [[] for _ in range(n)]
    for i in range(n):
        if no_age[i]:
            flags[i].append("no_age")
        elif no_throw[i]:
            flags[i].append("no_throw")
    vmed = cols["slip_rate_vert_mm_yr"]
    suspect = np.isfinite(age) & (age > max_age_ka)
    high = np.isfinite(vmed) & (vmed > max_rate_mm_yr)
    low = np.isfinite(vmed) & (vmed < min_rate_mm_yr)
    for i in np.flatnonzero(suspect):
        flags[i].append("age_suspect")
        warns.append(
            f"fault {ids[i]}: surface_age_ka {age[i]:g} ka is above {max_age_ka:g} ka, "
            "too old for a mapped scarp: was the age given in years? (rate_flag age_suspect)"
        )
    for i in np.flatnonzero(high):
        flags[i].append("rate_high")
        warns.append(
            f"fault {ids[i]}: vertical slip rate {vmed[i]:.3g} mm/yr is above {max_rate_mm_yr:g} mm/yr, "
            "implausible for a mapped normal-fault scarp: check surface_age_ka (ka) and the throw (rate_flag rate_high)"
        )
    for i in np.flatnonzero(low):
        flags[i].append("rate_low")
        warns.append(
            f"fault {ids[i]}: vertical slip rate {vmed[i]:.3g} mm/yr is below {min_rate_mm_yr:g} mm/yr: "
            "was surface_age_ka given in years instead of ka? (rate_flag rate_low)"
        )
    rate_flag = [";".join(f) if f else "ok" for f in flags]

    # ---- recurrence ----------------------------------------------------------
    ev = np.full(n, np.nan)
    if event_displacement_m is not None:
        ev = np.broadcast_to(np.asarray(event_displacement_m, float), (n,)).copy()
        if np.any(np.isfinite(ev) & (ev <= 0)):
            raise ParameterError("event_displacement_m must be > 0")
    src = np.where(np.isfinite(ev), "user", "")
    rel = get_relation("ad_on_m_wc94")
    mag = np.full(n, np.nan) if magnitude_for_displacement is None else np.asarray(magnitude_for_displacement, float)
    use_rel = ~np.isfinite(ev) & np.isfinite(mag)
    ev = np.where(use_rel, displacement_from_magnitude(mag, key=rel.key), ev)
    src = np.where(use_rel, rel.key, src)
    if (use_rel & ok).any():
        warns += range_warnings(
            rel.key, mag[use_rel & ok], labels=[f"fault {i} (recurrence)" for i in ids[use_rel & ok]]
        )
    rec = np.full((3, n), np.nan)
    has_rec = ok & np.isfinite(ev)
    if has_rec.any():
        rng = np.random.default_rng(None if seed is None else seed + 1)
        logd = np.log10(np.where(np.isfinite(ev), ev, 1.0))[:, None] + np.where(use_rel, rel.sigma, 0.0)[:, None] * rng.standard_normal((n, n_draws))
        with np.errstate(divide="ignore", invalid="ignore"):
            r = (10.0**logd) * 1000.0 / draws["net"]  # m / (mm/yr) * 1000 = yr
        rec = np.percentile(r, _PCT, axis=1)
        rec[:, ~has_rec] = np.nan

    table = pd.DataFrame(
        {
            "fault_id": ids,
            "throw_used_m": np.where(ok, throw, np.nan),
            "age_used_ka": age,
            "age_err_used_ka": np.where(np.isfinite(age), aerr, np.nan),
            **cols,
            "rate_flag": rate_flag,
            "event_displacement_m": ev,
            "event_displacement_source": src,
            "recurrence_yr": rec[1],
            "recurrence_p16_yr": rec[0],
            "recurrence_p84_yr": rec[2],
        }
    )
    return table, _compact(warns)


# --------------------------------------------------------------------------
# surface-rupture zones
# --------------------------------------------------------------------------

def mapping_uncertainty_from_scale(map_scale_denominator: float, *, line_error_mm: float = 0.5) -> float:
    """Ground uncertainty (m) of a trace digitised from a map of scale 1:denominator.

    Parameters
    ----------
    map_scale_denominator : float
        E.g. 25000 for a 1:25 000 map.
    line_error_mm : float, optional
        Positional error on the printed map, mm (default 0.5 mm, common
        practice for a drawn line; from memory).

    Returns
    -------
    float
        line_error_mm / 1000 * denominator, m (1:25 000 -> 12.5 m).
    """
    if not (map_scale_denominator > 0):
        raise ParameterError("map_scale_denominator must be > 0 (e.g. 25000 for 1:25 000)")
    return line_error_mm / 1000.0 * float(map_scale_denominator)


def rupture_zones(
    faults: gpd.GeoDataFrame,
    *,
    fault_ids: list[int] | tuple[int, ...] | None = None,
    hw_width_m: float = 150.0,
    fw_width_m: float = 75.0,
    mapping_uncertainty_m: float | None = None,
    map_scale_denominator: float | None = None,
) -> tuple[gpd.GeoDataFrame, list[str]]:
    """Surface-rupture zones around the screened traces, wider on the hanging wall.

    Parameters
    ----------
    faults : geopandas.GeoDataFrame
        Faults (projected metric CRS) with ``fault_id`` and ``dip_dir_deg``
        (azimuth towards the hanging wall).
    fault_ids : sequence of int, optional
        Screen these faults instead of those marked active.
    hw_width_m, fw_width_m : float, optional
        Zone half-widths on the hanging-wall and footwall sides, m (defaults
        150 and 75: common practice, from memory; local codes decide).
    mapping_uncertainty_m : float, optional
        Positional uncertainty of the traces, m, added to both sides.
    map_scale_denominator : float, optional
        Source map scale 1:denominator; uncertainty = 0.5 mm at map scale
        (used when ``mapping_uncertainty_m`` is not given). A per-fault
        ``mapping_uncertainty_m`` column, where finite, takes precedence over
        both. With none of them the uncertainty is 0 and a warning says so.

    Returns
    -------
    zones : geopandas.GeoDataFrame
        Layer ``rupture_zones``: ``fault_id``, ``hw_width_m``,
        ``fw_width_m``, ``mapping_uncertainty_m``, ``zone_kind``
        (``asymmetric`` or ``symmetric_no_dip_dir``), ``area_m2``, Polygon
        geometry. The boundary lies ``hw_width_m + mapping_uncertainty_m``
        from the trace on the hanging-wall side and ``fw_width_m +
        mapping_uncertainty_m`` on the footwall side; the tips are rounded
        with the footwall distance.
    warnings : list of str

    Notes
    -----
    The hanging wall is the side the dip direction points to, decided from
    ``dip_dir_deg`` and the trace's end-to-end vector, so the digitising
    direction does not matter. Shapely 2 one-sided buffers
    (``single_sided=True``; positive distance = left of the line) are
    evaluated on arrays of geometries.
    """
    if hw_width_m < 0 or fw_width_m < 0:
        raise ParameterError("hw_width_m and fw_width_m must be >= 0")
    if mapping_uncertainty_m is not None and mapping_uncertainty_m < 0:
        raise ParameterError("mapping_uncertainty_m must be >= 0")
    _require(faults, ("fault_id", "dip_dir_deg"), "rupture zones")
    mask, warns = select_faults(faults, fault_ids=fault_ids)
    sel = faults.loc[mask].reset_index(drop=True)
    n = len(sel)
    ids = sel["fault_id"].to_numpy().astype(int)
    lines = sel.geometry.to_numpy()

    if mapping_uncertainty_m is not None:
        u_default = float(mapping_uncertainty_m)
    elif map_scale_denominator is not None:
        u_default = mapping_uncertainty_from_scale(map_scale_denominator)
    else:
        u_default = np.nan
    u = _col(sel, "mapping_uncertainty_m")
    u = np.where(np.isfinite(u) & (u >= 0), u, u_default)
    if n and not np.isfinite(u).all():
        warns.append(
            f"fault(s) {_ids_text(ids[~np.isfinite(u)])}: no mapping uncertainty given (mapping_uncertainty_m "
            "or map_scale_denominator); zones include none"
        )
        u = np.where(np.isfinite(u), u, 0.0)

    start, end = _endpoints(lines) if n else (np.empty((0, 2)), np.empty((0, 2)))
    d = end - start
    dlen = np.hypot(d[:, 0], d[:, 1])
    az = np.radians(_col(sel, "dip_dir_deg"))
    # component of the dip-direction unit vector (sin az, cos az) on the left normal (-dy, dx)
    with np.errstate(invalid="ignore", divide="ignore"):
        left = (-d[:, 1] * np.sin(az) + d[:, 0] * np.cos(az)) / dlen
    known = np.isfinite(left) & (np.abs(left) > 0.05)
    if (~known).any():
        warns.append(
            f"fault(s) {_ids_text(ids[~known])}: dip direction unknown or parallel to the trace; "
            "zone drawn symmetric with the hanging-wall width on both sides"
        )
    side = np.where(left > 0, 1.0, -1.0)
    hw = np.full(n, float(hw_width_m)) + u
    fw = np.full(n, float(fw_width_m)) + u
    # symmetric fallback: both sides at max(hw, fw)
    hw_d = np.where(known, hw, np.maximum(hw, fw))
    fw_d = np.where(known, fw, np.maximum(hw, fw))
    if n:
        hw_poly = shapely.buffer(lines, side * hw_d, single_sided=True, cap_style="flat")
        fw_poly = shapely.buffer(lines, -side * fw_d, single_sided=True, cap_style="flat")
        tips = shapely.buffer(lines, np.minimum(hw_d, fw_d), cap_style="round")
        zones = shapely.union(shapely.union(hw_poly, fw_poly), tips)
        zones = shapely.make_valid(zones)
    else:
        zones = np.empty(0, dtype=object)
    out = gpd.GeoDataFrame(
        {
            "fault_id": ids,
            "hw_width_m": np.full(n, float(hw_width_m)),
            "fw_width_m": np.full(n, float(fw_width_m)),
            "mapping_uncertainty_m": u,
            "zone_kind": np.where(known, "asymmetric", "symmetric_no_dip_dir"),
            "area_m2": shapely.area(zones) if n else np.empty(0),
        },
        geometry=zones if n else [],
        crs=faults.crs,
    )
    return out, _compact(warns)


# --------------------------------------------------------------------------
# everything at once
# --------------------------------------------------------------------------

def screen_hazard(
    faults: gpd.GeoDataFrame,
    *,
    fault_ids: list[int] | tuple[int, ...] | None = None,
    seismogenic_thickness_km: float = 15.0,
    link_gap_m: float | None = None,
    preferred: str = "area_mean",
    shear_modulus_pa: float = SHEAR_MODULUS_PA,
    event_max_displacement_m: float | None = None,
    event_avg_displacement_m: float | None = None,
    throw_field: str = "max_throw_m",
    age_rel_err: float = 0.2,
    age_abs_err_ka: float | None = None,
    dip_range_deg: float = 10.0,
    n_draws: int = 10000,
    seed: int = 0,
    max_age_ka: float = 5000.0,
    max_rate_mm_yr: float = 20.0,
    min_rate_mm_yr: float = 0.001,
    hw_width_m: float = 150.0,
    fw_width_m: float = 75.0,
    mapping_uncertainty_m: float | None = None,
    map_scale_denominator: float | None = None,
) -> HazardResult:
    """Screen the active faults: scenarios, magnitudes, rates, recurrence, zones.

    Parameters are those of :func:`rupture_scenarios`, :func:`slip_rates`
    and :func:`rupture_zones` (same names, same units). The single-event
    displacement for recurrence is ``event_avg_displacement_m`` (or the
    per-fault column) where given, else the Wells & Coppersmith (1994)
    AD-on-M median at the fault's own (segment) ``mag_preferred``.

    Returns
    -------
    HazardResult
        ``faults`` gets, for screened faults (NaN / ``not_screened``
        elsewhere): ``hazard_screened``, ``rupture_width_km``,
        ``rupture_area_km2``, ``mag_<relation>``, ``mag_<relation>_sigma``,
        ``mag_preferred``, ``mag_preferred_sigma``, ``m0_nm``, the slip-rate
        fields, ``rate_flag``, ``event_displacement_m``,
        ``event_displacement_source``, ``recurrence_yr``,
        ``recurrence_p16_yr``, ``recurrence_p84_yr``.

    Notes
    -----
    See the module notes and :data:`CAUTION`.
    """
    mask, warns = select_faults(faults, fault_ids=fault_ids)
    ids_sel = faults.loc[mask, "fault_id"].to_numpy().astype(int)
    scen, w1 = rupture_scenarios(
        faults, fault_ids=fault_ids, seismogenic_thickness_km=seismogenic_thickness_km,
        link_gap_m=link_gap_m, preferred=preferred, shear_modulus_pa=shear_modulus_pa,
        event_max_displacement_m=event_max_displacement_m, event_avg_displacement_m=event_avg_displacement_m,
    )
    seg = scen.loc[scen["kind"] == "segment"].copy()
    seg["fault_id"] = seg["fault_ids"].astype(int)
    seg = seg.set_index("fault_id").reindex(ids_sel)
    ev_col = _col(faults.loc[mask].reset_index(drop=True), "event_avg_displacement_m")
    if event_avg_displacement_m is not None:
        ev_col = np.where(np.isfinite(ev_col), ev_col, float(event_avg_displacement_m))
    rates, w2 = slip_rates(
        faults, fault_ids=fault_ids, throw_field=throw_field, age_rel_err=age_rel_err,
        age_abs_err_ka=age_abs_err_ka, dip_range_deg=dip_range_deg, n_draws=n_draws, seed=seed,
        max_age_ka=max_age_ka, max_rate_mm_yr=max_rate_mm_yr, min_rate_mm_yr=min_rate_mm_yr,
        event_displacement_m=ev_col, magnitude_for_displacement=seg["mag_preferred"].to_numpy(float),
    )
    zones, w3 = rupture_zones(
        faults, fault_ids=fault_ids, hw_width_m=hw_width_m, fw_width_m=fw_width_m,
        mapping_uncertainty_m=mapping_uncertainty_m, map_scale_denominator=map_scale_denominator,
    )

    out = faults.copy()
    out["hazard_screened"] = mask
    fid = out["fault_id"].to_numpy().astype(int)
    mag_cols = ["width_km", "area_km2"] + [c for k in MAGNITUDE_KEYS for c in (f"mag_{k}", f"mag_{k}_sigma")] + [
        "mag_preferred", "mag_preferred_sigma", "m0_nm"]
    rename = {"width_km": "rupture_width_km", "area_km2": "rupture_area_km2"}
    seg_all = seg.reindex(fid)
    for c in mag_cols:
        out[rename.get(c, c)] = seg_all[c].to_numpy(float)
    r_all = rates.set_index("fault_id").reindex(fid)
    for c in rates.columns:
        if c == "fault_id":
            continue
        vals = r_all[c]
        if vals.dtype == object or c in ("rate_flag", "event_displacement_source"):
            out[c] = vals.where(mask, "not_screened" if c == "rate_flag" else "").fillna("").to_numpy()
        else:
            out[c] = vals.to_numpy(float)

    u_used = zones["mapping_uncertainty_m"].to_numpy(float)
    settings = {
        "preferred_rule": preferred,
        "seismogenic_thickness_km": seismogenic_thickness_km,
        "link_gap_m": link_gap_m,
        "n_screened": int(mask.sum()),
        "n_scenarios": int(len(scen)),
        "mapping_uncertainty_m": (
            None if u_used.size == 0 else float(u_used[0]) if np.unique(u_used).size == 1 else "per fault"
        ),
        "caution": CAUTION,
    }
    return HazardResult(
        faults=out, scenarios=scen, zones=zones, warnings=_compact(warns + w1 + w2 + w3), settings=settings
    )
