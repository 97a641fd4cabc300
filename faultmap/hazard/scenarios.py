"""Rupture scenarios of the screened faults and their magnitudes.

Single segments, whole linked systems and (optionally) runs of neighbouring
traces within a linking distance become scenarios; each gets a rupture
length, down-dip width and area, magnitudes from every empirical relation
of :mod:`faultmap.hazard.magnitudes`, a preferred magnitude, seismic moment and
mean slip. Pure functions, no file I/O.
Everything here is a screening estimate; see :data:`faultmap.hazard.screening.CAUTION`.

Notes
-----
Magnitude relations: Wells & Coppersmith (1994, BSSA 84), Hanks & Bakun
(2002, BSSA 92), see :mod:`faultmap.hazard.magnitudes`.
"""

from __future__ import annotations

import math

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely

from faultmap.errors import InputError, ParameterError
from faultmap.hazard.inputs import _col, _compact, _endpoints, _ids_text, _require, _selected
from faultmap.hazard.magnitudes import (
    PREFERRED_RULES,
    SHEAR_MODULUS_PA,
    downdip_width_km,
    magnitude_table,
    moment_from_magnitude,
    preferred_magnitude,
)

__all__ = ["rupture_scenarios"]


def _axis_unit_vector(lines: np.ndarray, weights: np.ndarray) -> np.ndarray:
    """Length-weighted axial mean direction of line end-to-end vectors (E, N)."""
    start, end = _endpoints(lines)
    d = end - start
    ang = np.arctan2(d[:, 1], d[:, 0])
    c = np.sum(weights * np.cos(2 * ang))
    s = np.sum(weights * np.sin(2 * ang))
    theta = 0.5 * math.atan2(s, c)
    return np.array([math.cos(theta), math.sin(theta)])


def _neighbours(pairs: tuple[np.ndarray, np.ndarray], n: int) -> list[np.ndarray]:
    """Neighbour lists (ascending, no self-links) from the index pairs of an STRtree query."""
    i, j = np.asarray(pairs[0], np.int64), np.asarray(pairs[1], np.int64)
    keep = i != j
    i, j = i[keep], j[keep]
    key = np.unique(np.minimum(i, j) * n + np.maximum(i, j))  # symmetric, each link once
    a, b = key // n, key % n
    src = np.r_[a, b]
    dst = np.r_[b, a]
    order = np.lexsort((dst, src))
    src, dst = src[order], dst[order]
    starts = np.searchsorted(src, np.arange(n + 1))
    return [dst[starts[k] : starts[k + 1]] for k in range(n)]


def _components(nbrs: list[np.ndarray]) -> list[list[int]]:
    """Return the connected components, each sorted, in the order of their smallest member."""
    from scipy.sparse import csr_matrix
    from scipy.sparse.csgraph import connected_components

    n = len(nbrs)
    indptr = np.r_[0, np.cumsum([len(v) for v in nbrs])]
    indices = np.concatenate(nbrs) if n else np.zeros(0, np.int64)
    graph = csr_matrix((np.ones(indices.size, np.int8), indices, indptr), shape=(n, n))
    _, label = connected_components(graph, directed=False)
    order = np.argsort(label, kind="stable")
    cuts = np.flatnonzero(np.diff(label[order])) + 1
    comps = [c.tolist() for c in np.split(order, cuts)] if n else []
    comps.sort(key=lambda c: c[0])
    return comps


def _find(parent: dict[int, int], x: int) -> int:
    """Root of ``x`` in a union-find forest (path halving)."""
    while parent[x] != x:
        parent[x] = parent[parent[x]]
        x = parent[x]
    return x


def _connected_runs(order: np.ndarray, nbrs: list[np.ndarray]):
    """Every run ``order[i0:i1]`` of two or more faults whose links connect it, by i0 then i1.

    The run grows one fault at a time while a union-find counts its connected parts: each run costs
    its new fault's links, not a search of the whole run.
    """
    k = len(order)
    for i0 in range(k):
        parent: dict[int, int] = {}
        parts = 0
        for i1 in range(i0 + 1, k + 1):
            v = int(order[i1 - 1])
            parent[v] = v
            parts += 1
            for j in nbrs[v]:
                j = int(j)
                if j in parent:
                    rv, rj = _find(parent, v), _find(parent, j)
                    if rv != rj:
                        parent[rj] = rv
                        parts -= 1
            if i1 - i0 >= 2 and parts == 1:
                yield i0, i1


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
        :func:`faultmap.hazard.magnitudes.preferred_magnitude`): ``"area_mean"``
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
    sel, ids, warns = _selected(faults, fault_ids)
    lines = sel.geometry.to_numpy()
    n = len(sel)

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
    systems = pd.to_numeric(sel["system_id"], errors="coerce").to_numpy(dtype=float, copy=True)
    # a fault with no system (NaN) is a system of its own: give it an id no other fault has
    lone = ~np.isfinite(systems)
    if lone.any():
        top = np.nanmax(systems) if (~lone).any() else 0.0
        systems[lone] = top + 1.0 + np.arange(int(lone.sum()))
    systems = systems.astype(np.int64)

    # ---- member sets ---------------------------------------------------
    sets: list[tuple[str, tuple[int, ...]]] = [("segment", (i,)) for i in range(n)]
    seen = {frozenset(s) for _, s in sets}
    # systems in order of first appearance, members ascending (one sort, not one scan per system)
    by_sys = np.argsort(systems, kind="stable")
    cuts = np.flatnonzero(np.diff(systems[by_sys])) + 1
    groups = sorted(np.split(by_sys, cuts) if n else [], key=lambda g: g[0])
    for g in groups:
        members = tuple(int(i) for i in g)
        if len(members) > 1 and frozenset(members) not in seen:
            sets.append(("system", members))
            seen.add(frozenset(members))
    if link_gap_m is not None and n > 1:
        tree = shapely.STRtree(lines)
        nbrs = _neighbours(tree.query(lines, predicate="dwithin", distance=float(link_gap_m)), n)
        for comp in _components(nbrs):
            if len(comp) < 2:
                continue
            comp_arr = np.asarray(comp)
            axis = _axis_unit_vector(lines[comp_arr], length_m[comp_arr])
            cent = shapely.get_coordinates(shapely.centroid(lines[comp_arr]))
            order = comp_arr[np.argsort(cent @ axis, kind="stable")]
            for i0, i1 in _connected_runs(order, nbrs):
                members = tuple(sorted(int(k) for k in order[i0:i1]))
                if frozenset(members) in seen:
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

