"""Trace conditioning: geometry clean-up, attributes, strike, censoring, linkage.

Pure functions on GeoDataFrames in a projected metric working CRS. The tool
wrapper (:mod:`faultmap.traces.tool`) reads the files and reprojects.
"""

from __future__ import annotations

from collections.abc import Callable

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components

from faultmap.errors import GeometryError, InputError, ParameterError
from faultmap.numerics.directions import axial_mean_deg, segment_azimuths
from faultmap.registry import DEFAULT_FIELDS
from faultmap.traces.attributes import ParsedValues, parse_values, sigma_from_range

__all__ = [
    "condition_traces",
    "strike_from_geometry",
    "orient_traces",
    "censor_flags",
    "link_systems",
    "system_sizes",
]

#: Input attribute names (conventions); remappable with ``[fields]``.
def strike_from_geometry(lines, dip_dir_deg=None) -> np.ndarray:
    """Right-hand-rule strike of each line, length-weighted over its segments.

    Where the dip direction is known the strike is the axis direction that
    puts the dip direction on its right (``dip_dir = strike + 90``); where it
    is unknown (NaN) the axis is returned in [0, 180).
    """
    lines = np.asarray(lines)
    li, az, ln = segment_azimuths(lines)
    axis = axial_mean_deg(az, ln, li, len(lines))
    if dip_dir_deg is None:
        return axis
    dd = np.asarray(dip_dir_deg, dtype=float)
    want = (dd - 90.0) % 360.0
    alt = (axis + 180.0) % 360.0
    d1 = np.abs((axis - want + 180.0) % 360.0 - 180.0)
    d2 = np.abs((alt - want + 180.0) % 360.0 - 180.0)
    return np.where(np.isnan(dd), axis, np.where(d1 <= d2, axis, alt))


def orient_traces(lines, strike_deg) -> np.ndarray:
    """Reverse lines so that each runs along its strike direction.

    The start-to-end vector is put within 90 degrees of the strike, so the
    stored trace direction no longer depends on how it was digitised.
    """
    lines = np.asarray(lines)
    start = shapely.get_coordinates(shapely.get_point(lines, 0))
    end = shapely.get_coordinates(shapely.get_point(lines, -1))
    d = end - start
    s = np.radians(np.asarray(strike_deg, dtype=float))
    along = d[:, 0] * np.sin(s) + d[:, 1] * np.cos(s)
    flip = along < 0
    out = lines.copy()
    if flip.any():
        out[flip] = shapely.reverse(lines[flip])
    return out


def _bool(series: pd.Series, *, field: str, ids, where: str) -> np.ndarray:
    s = series.astype(object)
    out = np.zeros(len(s), dtype=bool)
    for value, positions in s.groupby(s.map(lambda v: str(v).strip().lower()), dropna=False).indices.items():
        if value in ("1", "1.0", "true", "yes", "y", "t"):
            out[positions] = True
        elif value in ("0", "0.0", "false", "no", "n", "f", "", "none", "nan", "<na>"):
            pass
        else:
            raise InputError(
                f"{where}: feature {ids[positions[0]]}: field '{field}' is {value!r}; use 1/0 or true/false."
            )
    return out


def condition_traces(
    gdf: gpd.GeoDataFrame,
    *,
    fields: dict | None = None,
    dip_deg: float = 60.0,
    where: str = "faults",
    azimuth_reference: str = "true",
) -> tuple[gpd.GeoDataFrame, list[str]]:
    """Clean traces and derive the per-fault attributes of the conventions.

    Parameters
    ----------
    gdf : geopandas.GeoDataFrame
        Raw traces in the projected metric working CRS.
    fields : dict, optional
        Mapping of conventional names (``name``, ``dip``, ``dip_dir``,
        ``active``, ``surface_age_ka``) to the input's field names.
    dip_deg : float
        Dip used where the ``dip`` attribute is missing, degrees (default 60,
        Andersonian common practice).
    where : str
        File and layer, for messages.
    azimuth_reference : {'true', 'grid'}
        North of the ``dip_dir`` attribute: ``true`` (field and database azimuths; turned into grid
        azimuths of the working CRS with the meridian convergence at each trace, recorded in
        ``dip_dir_convergence_deg``) or ``grid`` (used as given).

    Returns
    -------
    faults : geopandas.GeoDataFrame
        One row per single-part trace, oriented along its right-hand-rule
        strike, with ``fault_id``, ``source_fid``, ``name``, ``length_m``,
        ``strike_deg``, ``dip_deg``, ``dip_source``, ``dip_dir_deg``,
        ``dip_dir_source``, ``active``, ``surface_age_ka``.
    warnings : list of str
        Dropped features and defaults used.

    Raises
    ------
    GeometryError
        Points or polygons among the features, or no usable line left.
    InputError
        Attribute values out of range or of the wrong type.
    """
    warnings: list[str] = []
    f = dict(DEFAULT_FIELDS)
    f.update(fields or {})
    # a field the user mapped explicitly must exist (a default name may be absent: then it is unknown)
    absent = [f"{k}={v}" for k, v in (fields or {}).items() if v != DEFAULT_FIELDS.get(k) and v not in gdf.columns]
    if absent:
        have = ", ".join(str(c) for c in gdf.columns if c != gdf.geometry.name) or "none"
        raise InputError(
            f"{where}: no column for the field mapping {', '.join(absent)}; columns are: {have}. "
            "Fix --field NAME=COLUMN (or [fields] in the project file)."
        )
    gdf = gdf.reset_index(drop=True)
    fid = np.arange(1, len(gdf) + 1)
    geoms = gdf.geometry.to_numpy()
    missing = shapely.is_missing(geoms) | shapely.is_empty(geoms)
    types = shapely.get_type_id(geoms)
    # 1 LineString, 2 LinearRing, 5 MultiLineString; 0/4 points, 3/6 polygons, 7 collections
    wrong = ~missing & ~np.isin(types, (1, 2, 5))
    if wrong.any():
        kinds = sorted({shapely.get_type_id(g) for g in geoms[wrong]})
        names = {0: "Point", 3: "Polygon", 4: "MultiPoint", 6: "MultiPolygon", 7: "GeometryCollection"}
        ids = ", ".join(str(i) for i in fid[wrong][:10])
        raise GeometryError(
            f"{where}: features {ids}{' ...' if wrong.sum() > 10 else ''} are "
            f"{'/'.join(names.get(k, str(k)) for k in kinds)}, not lines; give a line layer of fault traces."
        )
    if missing.any():
        warnings.append(f"{where}: dropped {int(missing.sum())} features with empty geometry: {_ids(fid[missing])}.")
    keep = ~missing
    base = gdf.loc[keep].copy()
    base["source_fid"] = fid[keep]
    geoms2d = shapely.force_2d(base.geometry.to_numpy())
    # parts of one feature that share an end point are one trace digitised in pieces: join them
    multi = shapely.get_type_id(geoms2d) == 5
    if multi.any():
        before = shapely.get_num_geometries(geoms2d[multi])
        geoms2d[multi] = shapely.line_merge(geoms2d[multi])
        joined = int((before - shapely.get_num_geometries(geoms2d[multi])).sum())
        if joined:
            warnings.append(f"{where}: joined {joined} parts of multi-part features that meet end to end.")
    base = base.set_geometry(geoms2d)
    parts = base.explode(index_parts=False, ignore_index=True)
    if len(parts) > len(base):
        warnings.append(f"{where}: split {len(parts) - len(base)} extra parts of multi-part features into traces.")
    lines = parts.geometry.to_numpy()
    lines = shapely.remove_repeated_points(lines, 0.0)
    length = shapely.length(lines)
    zero = ~(length > 0) | (shapely.get_num_points(lines) < 2)
    if zero.all():
        raise GeometryError(f"{where}: every trace has zero length; check the layer's geometries and CRS.")
    if zero.any():
        warnings.append(
            f"{where}: dropped {int(zero.sum())} zero-length traces (features {_ids(parts['source_fid'].to_numpy()[zero])})."
        )
    parts = parts.loc[~zero].reset_index(drop=True)
    lines = lines[~zero]
    norm = shapely.to_wkb(shapely.normalize(lines))
    dup = pd.Series(norm).duplicated().to_numpy()
    if dup.any():
        warnings.append(
            f"{where}: removed {int(dup.sum())} exact duplicate traces (features {_ids(parts['source_fid'].to_numpy()[dup])})."
        )
    parts = parts.loc[~dup].reset_index(drop=True)
    lines = lines[~dup]
    ids = parts["source_fid"].to_numpy()
    n = len(parts)

    def col(key):
        name = f.get(key)
        return parts[name] if name and name in parts.columns else None

    dip_p = _parsed(col("dip"), n, field=f["dip"], ids=ids, where=where, lower=0.0, upper=90.0, lower_inclusive=False,
                    label="dip")
    dip = dip_p.preferred.copy()
    dip_source = np.where(np.isnan(dip), "default", "attribute")
    if np.isnan(dip).any():
        warnings.append(f"{where}: default dip {dip_deg:g} deg used for {int(np.isnan(dip).sum())} of {n} traces.")
    dip = np.where(np.isnan(dip), dip_deg, dip)

    dd_p = _parsed(col("dip_dir"), n, field=f["dip_dir"], ids=ids, where=where, compass=True, lower=0.0, upper=360.0,
                   label="dip direction")
    dd = dd_p.preferred % 360.0
    if np.any(dd_p.has_range):
        i = int(np.flatnonzero(dd_p.has_range)[0])
        raise InputError(
            f"{where}: feature {ids[i]}: field '{f['dip_dir']}' is {col('dip_dir').iloc[i]!r}: a dip direction is one "
            "azimuth or compass letters, not a range; fix the attribute."
        )
    dd_source = np.where(np.isnan(dd), "unknown", "attribute")
    convergence = np.full(n, np.nan)
    if azimuth_reference not in ("true", "grid"):
        raise ParameterError(f"azimuth_reference must be 'true' or 'grid', got {azimuth_reference!r}.")
    given_dd = ~np.isnan(dd)
    if azimuth_reference == "true" and given_dd.any() and gdf.crs is not None:
        from faultmap.crs import meridian_convergence_deg, true_to_grid_azimuth

        # at the centre of each trace's bounds (the same bits whatever the digitising direction)
        b = shapely.bounds(lines[given_dd])
        convergence[given_dd] = meridian_convergence_deg(gdf.crs, 0.5 * (b[:, 0] + b[:, 2]), 0.5 * (b[:, 1] + b[:, 3]))
        dd[given_dd] = true_to_grid_azimuth(dd[given_dd], convergence[given_dd])

    age_p = _parsed(col("surface_age_ka"), n, field=f["surface_age_ka"], ids=ids, where=where, label="age, ka")
    age = age_p.preferred
    extra = _database_columns(col, f, n, ids=ids, where=where, dip=dip_p, age=age_p)
    act_raw = col("active")
    active = np.zeros(n, dtype=bool) if act_raw is None else _bool(act_raw, field=f["active"], ids=ids, where=where)
    name_raw = col("name")
    names = (
        np.array([""] * n, dtype=object)
        if name_raw is None
        else name_raw.astype(object).where(name_raw.notna(), "").astype(str).to_numpy(dtype=object)
    )

    loops = ~shapely.is_simple(lines)
    if loops.any():
        warnings.append(
            f"{where}: features {_ids(ids[loops])} cross themselves; they are measured as digitised, but "
            "check them (a trace that loops back gives stations on both limbs)."
        )
    named = pd.Series(names[names != ""])
    repeated = named[named.duplicated()].unique()
    if len(repeated):
        warnings.append(
            f"{where}: {len(repeated)} fault names are used by several traces ({_ids(repeated)}); each trace keeps "
            "its own fault_id, and linked systems come from geometry, not from names."
        )

    strike = strike_from_geometry(lines, dd)
    # dip direction disagreeing with the trace (more than 45 deg off the normal) is a user error worth a warning
    axis = strike_from_geometry(lines)
    off = np.abs(((dd - axis) % 180.0) - 90.0)
    skew = ~np.isnan(dd) & (off > 45.0)
    if skew.any():
        warnings.append(
            f"{where}: dip direction is more than 45 deg from the trace normal for features {_ids(ids[skew])}; check field '{f['dip_dir']}'."
        )
    lines = orient_traces(lines, strike)
    # recompute from the oriented traces so the result is bit-identical whatever the digitising direction
    strike = strike_from_geometry(lines, dd)
    out = gpd.GeoDataFrame(
        {
            "fault_id": np.arange(1, n + 1, dtype=np.int64),
            "source_fid": ids.astype(np.int64),
            "name": names,
            "length_m": shapely.length(lines),
            "strike_deg": strike,
            "dip_deg": dip,
            "dip_source": dip_source,
            "dip_dir_deg": dd,
            "dip_dir_source": dd_source,
            "active": active,
            "surface_age_ka": age,
            **extra,
        },
        geometry=lines,
        crs=gdf.crs,
    )
    if azimuth_reference == "true" and given_dd.any() and gdf.crs is not None:
        out["dip_dir_convergence_deg"] = convergence
    return out, warnings


def _parsed(series, n: int, **kw) -> ParsedValues:
    """Parse an optional attribute column (all NaN when the column is absent)."""
    if series is None:
        nan = np.full(n, np.nan)
        return ParsedValues(nan, nan.copy(), nan.copy(), np.full(n, "missing", dtype=object))
    return parse_values(series, **kw)


def _database_columns(col, f: dict, n: int, *, ids, where: str, dip: ParsedValues, age: ParsedValues) -> dict:
    """Fault-database attributes kept on the faults layer: spreads of dip and age, given throws and slip rates.

    Only columns the input holds are returned (a layer without them keeps today's columns). A range or
    triple becomes a 1-sigma error of a quarter of its width (:func:`faultmap.traces.attributes.sigma_from_range`).
    """
    out: dict[str, np.ndarray] = {}
    if dip.has_range.any():
        out["dip_min_deg"] = np.where(np.isfinite(dip.min), dip.min, np.nan)
        out["dip_max_deg"] = np.where(np.isfinite(dip.max), dip.max, np.nan)
    if age.has_range.any():
        out["surface_age_err_ka"] = sigma_from_range(age)
    for key, given, err_key in (
        ("max_throw_m", "given_max_throw_m", "max_throw_err_m"),
        ("displacement_m", "given_displacement_m", None),
    ):
        raw = col(key)
        if raw is None:
            continue
        v = parse_values(raw, field=f[key], ids=ids, where=where, lower=0.0)
        out[given] = v.preferred
        err = sigma_from_range(v)
        if err_key is not None and col(err_key) is not None:
            e = parse_values(col(err_key), field=f[err_key], ids=ids, where=where, lower=0.0).preferred
            err = np.where(np.isfinite(e), e, err)
        out[given[:-2] + "_err_m"] = err
    raw = col("slip_rate_mm_yr")
    if raw is not None:
        v = parse_values(raw, field=f["slip_rate_mm_yr"], ids=ids, where=where, lower=0.0)
        out["slip_rate_mm_yr"] = v.preferred
        out["slip_rate_min_mm_yr"] = v.min
        out["slip_rate_max_mm_yr"] = v.max
    return out


def censor_flags(
    lines,
    *,
    tolerance_m: float,
    dem_bounds: tuple[float, float, float, float] | None = None,
    sampler: Callable[[np.ndarray, np.ndarray], np.ndarray] | None = None,
    study_area=None,
) -> tuple[np.ndarray, np.ndarray]:
    """Which traces end near the edge of the mapped area.

    A trace is censored (its length is a lower bound) when either tip lies
    within ``tolerance_m`` of the DEM's edge, of a nodata area of the DEM, or
    of the study-area boundary, or outside them.

    Parameters
    ----------
    lines : array_like of LineString
    tolerance_m : float
        Distance within which a tip counts as at the edge, metres.
    dem_bounds : tuple, optional
        (xmin, ymin, xmax, ymax) of the DEM.
    sampler : callable, optional
        ``sampler(x, y) -> elevations`` with NaN for voids (e.g.
        :meth:`faultmap.io.dem.Dem.sample`); tips are tested on a ring of 8
        points at ``tolerance_m`` plus the tip itself.
    study_area : shapely geometry, optional
        Polygon(s) of the mapped area.

    Returns
    -------
    censored : ndarray of bool
    reason : ndarray of str
        ``dem_edge``, ``nodata``, ``study_area`` or empty.
    """
    lines = np.asarray(lines)
    n = len(lines)
    tips = np.stack(
        [shapely.get_coordinates(shapely.get_point(lines, 0)), shapely.get_coordinates(shapely.get_point(lines, -1))],
        axis=1,
    )  # (n, 2, 2)
    reason = np.full(n, "", dtype=object)
    if study_area is not None:
        pts = shapely.points(tips.reshape(-1, 2))
        boundary = shapely.boundary(study_area)
        near = (shapely.distance(pts, boundary) <= tolerance_m) | ~shapely.contains(study_area, pts)
        hit = near.reshape(n, 2).any(axis=1)
        reason[hit] = "study_area"
    if dem_bounds is not None:
        xmin, ymin, xmax, ymax = dem_bounds
        x, y = tips[..., 0], tips[..., 1]
        d = np.minimum.reduce([x - xmin, xmax - x, y - ymin, ymax - y])
        hit = (d <= tolerance_m).any(axis=1)
        reason[hit & (reason == "")] = "dem_edge"
    if sampler is not None:
        ang = np.radians(np.arange(0, 360, 45))
        ring = np.concatenate([[[0.0, 0.0]], tolerance_m * np.c_[np.sin(ang), np.cos(ang)]])  # (9, 2)
        pts = tips[:, :, None, :] + ring[None, None, :, :]  # (n, 2, 9, 2)
        z = np.asarray(sampler(pts[..., 0].ravel(), pts[..., 1].ravel())).reshape(n, 2, 9)
        hit = np.isnan(z).any(axis=(1, 2))
        reason[hit & (reason == "")] = "nodata"
    return reason != "", reason


def link_systems(
    lines,
    strike_deg,
    dip_dir_deg,
    *,
    link_distance_m: float,
    link_angle_deg: float,
    link_length_ratio: float = 0.5,
    max_segments: int = 5,
) -> np.ndarray:
    """Group traces into linked systems: pairs and short chains of along-strike segments.

    Two traces may link when they are along-strike neighbours: a tip of one
    lies within ``link_distance_m`` of a tip of the other and within
    ``link_length_ratio`` times the shorter trace's length (relay zones between
    segments are small compared with the segments: the criterion scales with
    the faults, so a dense population of small faults is not chained by a
    fixed distance); their extents along their mean strike overlap by less
    than half the shorter trace (side-by-side parallel faults are not
    segments of one fault, en-echelon segments with a relay zone are); their
    strikes differ by less than ``link_angle_deg`` (as axes, modulo 180) and
    their dip directions agree (differ by less than 90 deg) or one is unknown.

    Links are not transitive across the map: each tip links to at most one
    other trace (its nearest candidate, by tip distance over the shorter
    length) and only when that trace's tip chooses it back, so systems are
    chains of segments end to end; a chain of more than ``max_segments``
    traces is cut at its weakest links (largest relative tip distance) until
    no system is larger.

    Parameters
    ----------
    lines : array of shapely.LineString
        Traces in a projected metric CRS.
    strike_deg, dip_dir_deg : array_like of float
        Right-hand-rule strike and dip direction per trace, degrees (dip
        direction NaN when unknown).
    link_distance_m : float
        Largest tip-to-tip distance of a link, m.
    link_angle_deg : float
        Largest strike difference of a link, degrees.
    link_length_ratio : float
        Largest tip-to-tip distance as a fraction of the shorter trace's length.
    max_segments : int
        Most traces in one system (at least 2).

    Returns
    -------
    ndarray of int
        ``system_id`` per trace, 1-based, numbered by the smallest trace
        index in each system (so the numbering is stable).

    Notes
    -----
    Relay zones between overlapping or underlapping segments of one fault are
    of the order of the segment spacing, small against the segments' lengths
    (Peacock & Sanderson 1991, J. Struct. Geol. 13; Walsh et al. 2003, J.
    Struct. Geol. 25; from memory). The relative-distance, mutual-partner and
    size rules are ours (stated here and in ``docs/methods/prepare.md``).
    """
    lines = np.asarray(lines)
    n = len(lines)
    if n == 0:
        return np.zeros(0, dtype=np.int64)
    if int(max_segments) < 2:
        raise ParameterError(f"max_segments must be at least 2, got {max_segments}.")
    start = shapely.get_coordinates(shapely.get_point(lines, 0))
    end = shapely.get_coordinates(shapely.get_point(lines, -1))
    tip_xy = np.concatenate([start, end])
    owner = np.r_[np.arange(n), np.arange(n)]
    tree = shapely.STRtree(shapely.points(tip_xy))
    ti, tj = tree.query(shapely.points(tip_xy), predicate="dwithin", distance=link_distance_m)
    keep = owner[ti] != owner[tj]
    ti, tj = ti[keep], tj[keep]
    a, b = owner[ti], owner[tj]
    s = np.asarray(strike_deg, dtype=float)
    ds = np.abs(((s[a] - s[b]) + 90.0) % 180.0 - 90.0)
    dd = np.asarray(dip_dir_deg, dtype=float)
    ddiff = np.abs(((dd[a] - dd[b]) + 180.0) % 360.0 - 180.0)
    agree = np.isnan(ddiff) | (ddiff < 90.0)
    # extents along the pair's mean strike (axial mean: the same for (a, b) and (b, a))
    m = 0.5 * np.arctan2(np.sin(np.radians(2 * s[a])) + np.sin(np.radians(2 * s[b])),
                         np.cos(np.radians(2 * s[a])) + np.cos(np.radians(2 * s[b])))
    u = np.c_[np.sin(m), np.cos(m)]
    pa = np.c_[(start[a] * u).sum(1), (end[a] * u).sum(1)]
    pb = np.c_[(start[b] * u).sum(1), (end[b] * u).sum(1)]
    overlap = np.minimum(pa.max(1), pb.max(1)) - np.maximum(pa.min(1), pb.min(1))
    length = shapely.length(lines)
    shorter = np.minimum(length[a], length[b])
    gap = np.hypot(*(tip_xy[ti] - tip_xy[tj]).T)
    ok = (ds < link_angle_deg) & agree & (overlap < 0.5 * shorter) & (gap <= link_length_ratio * shorter)
    ti, tj, score = ti[ok], tj[ok], gap[ok] / np.maximum(shorter[ok], 1e-12)
    # each tip's best partner tip; a link needs both tips to choose each other
    best = np.full(2 * n, -1)
    if len(ti):
        # ties between equally near partners are broken by the partner tip's position, not by input order
        order = np.lexsort((tip_xy[tj, 1], tip_xy[tj, 0], score, ti))
        first = order[np.r_[True, ti[order][1:] != ti[order][:-1]]]
        best[ti[first]] = tj[first]
    t = np.flatnonzero(best >= 0)
    mutual = t[(best[best[t]] == t) & (t < best[t])]
    ea, eb = owner[mutual], owner[best[mutual]]
    escore = np.hypot(*(tip_xy[mutual] - tip_xy[best[mutual]]).T) / np.minimum(length[ea], length[eb])
    lo, hi = np.minimum(ea, eb), np.maximum(ea, eb)
    if len(lo):  # two traces joined at both ends: one link
        _, keep_first = np.unique(np.c_[lo, hi], axis=0, return_index=True)
        lo, hi, escore = lo[keep_first], hi[keep_first], escore[keep_first]
        mutual = mutual[keep_first]
    mid = 0.5 * (tip_xy[mutual] + tip_xy[best[mutual]])  # where each link is: breaks ties by position
    alive = np.ones(len(lo), dtype=bool)
    while True:
        graph = coo_matrix((np.ones(int(alive.sum())), (lo[alive], hi[alive])), shape=(n, n))
        _, labels = connected_components(graph, directed=False)
        size = np.bincount(labels)
        idx = np.flatnonzero(alive & (size[labels[lo]] > max_segments))
        if not len(idx):
            break
        comp = labels[lo[idx]]  # cut the weakest link of every oversized system, then look again
        order = np.lexsort((mid[idx, 1], mid[idx, 0], -escore[idx], comp))
        weakest = order[np.r_[True, comp[order][1:] != comp[order][:-1]]]
        alive[idx[weakest]] = False
    first = np.full(labels.max() + 1, n)
    np.minimum.at(first, labels, np.arange(n))
    rank = np.argsort(np.argsort(first))
    return (rank[labels] + 1).astype(np.int64)


def system_sizes(system_id) -> dict[int, int]:
    """Count linked systems by their number of traces.

    Parameters
    ----------
    system_id : array_like of int
        System of each trace (:func:`link_systems`).

    Returns
    -------
    dict of int to int
        Number of traces in a system -> number of such systems, ascending.
    """
    counts = np.bincount(np.asarray(system_id, dtype=np.int64))
    sizes, n_sys = np.unique(counts[counts > 0], return_counts=True)
    return {int(k): int(v) for k, v in zip(sizes, n_sys, strict=True)}


def _ids(values, limit: int = 10) -> str:
    v = [str(x) for x in np.asarray(values)[:limit]]
    return ", ".join(v) + (" ..." if len(values) > limit else "")
