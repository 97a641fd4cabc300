"""Extension along transects by heave summation.

Pure functions: GeoDataFrames in, GeoDataFrames out. The tool wrapper
``faultmap/extension/transect_tool.py`` reads and writes; nothing here touches files.
Transects can be placed by :mod:`faultmap.extension.transect_layout`; the throw at
each crossing comes from :func:`faultmap.extension.throw_profiles.throw_at`; the run's
engine measures them in batches (:mod:`faultmap.extension.transect_batches`).

Main entry points
-----------------
:func:`measure_transects`
    Crossings, throw, dip, heave and projected heave at each crossing; per
    transect sums, extension, beta, Monte Carlo uncertainties and the
    separate sub-resolution correction.
:data:`ZONE_CHOICES`
    Ways to define the present length L1 of a transect.

Definitions (see ``docs/methods/extension.md``)
-----------------------------------------------
* heave h = T / tan(dip) (dip-slip geometry);
* projected heave (``heave_along_m``) = lengthening of the transect at the
  crossing: h |cos(dip direction - transect azimuth)| for dip slip;
* L1 = present length of the faulted zone, L0 = L1 - sum(projected heave),
  e = (L1 - L0) / L0, beta = L1 / L0.
"""

from __future__ import annotations

import warnings

import geopandas as gpd
import numpy as np
import shapely
from scipy import sparse

from faultmap.errors import FaultmapWarning, InputError, ParameterError
from faultmap.extension.fault_inputs import (
    _check_faults,
    _check_rake,
    _col,
    _ids,
    _in_faults_crs,
    _rake_factor,
)
from faultmap.extension.subresolution import corrected_sum, fraction_below_detection
from faultmap.extension.throw_profiles import throw_at
from faultmap.extension.transect_geometry import (
    _azimuth_deg,
    _crossing_positions,
    _ends_inside,
    _local_azimuth,
    _transect_lines,
)
from faultmap.numerics.dip_ranges import dip_draw_bounds

__all__ = ["measure_transects", "ZONE_CHOICES"]


#: Ways to define the present length L1 of a transect.
ZONE_CHOICES = ("faulted", "full")

_DIP_MIN_DEG = 1.0  # lower clip of Monte Carlo dips (heave -> infinity as dip -> 0)


def _validate_params(
    zone: str,
    margin_m: float | None,
    n_draws: int,
    seed: int,
    dip_range_default_deg: float,
    dip_range_attribute_deg: float,
    default_dip_deg: float,
    rake_deg: float | None,
    d_min_m: float,
) -> None:
    if zone not in ZONE_CHOICES:
        raise ParameterError(f"zone must be one of {ZONE_CHOICES}, got {zone!r}.")
    if margin_m is not None and (not np.isfinite(margin_m) or margin_m < 0):
        raise ParameterError(f"margin_m must be >= 0 m, got {margin_m!r}.")
    if isinstance(n_draws, bool) or not isinstance(n_draws, (int, np.integer)) or n_draws < 10:
        raise ParameterError(f"n_draws must be an integer >= 10, got {n_draws!r}.")
    if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or seed < 0:
        raise ParameterError(f"seed must be a non-negative integer, got {seed!r}.")
    for name, v in (("dip_range_default_deg", dip_range_default_deg), ("dip_range_attribute_deg", dip_range_attribute_deg)):
        if not np.isfinite(v) or v < 0 or v >= 90:
            raise ParameterError(f"{name} must be between 0 and 90 deg, got {v!r}.")
    if not np.isfinite(default_dip_deg) or default_dip_deg <= 0 or default_dip_deg > 90:
        raise ParameterError(f"default_dip_deg must be in (0, 90] deg, got {default_dip_deg!r}.")
    if rake_deg is not None:
        _check_rake(np.array([float(rake_deg)]), "rake_deg")
    if not np.isfinite(d_min_m) or d_min_m <= 0:
        raise ParameterError(f"d_min_m must be a positive throw in m, got {d_min_m!r}.")


def measure_transects(
    faults: gpd.GeoDataFrame,
    stations: gpd.GeoDataFrame | None,
    transects: gpd.GeoDataFrame,
    *,
    zone: str = "faulted",
    margin_m: float | None = None,
    rake_deg: float | None = None,
    default_dip_deg: float = 60.0,
    dip_range_default_deg: float = 10.0,
    dip_range_attribute_deg: float = 5.0,
    n_draws: int = 1000,
    seed: int = 0,
    detection_throw_m: float | None = None,
    exponent_c: float | None = None,
    d_min_m: float = 0.01,
    d_max_m: float | None = None,
    reproject: bool = False,
) -> tuple[gpd.GeoDataFrame, gpd.GeoDataFrame]:
    """Heave summation along transects: extension, beta and their uncertainties.

    Parameters
    ----------
    faults : geopandas.GeoDataFrame
        Fault traces (LineStrings, projected metric CRS) with ``fault_id``,
        ``dip_deg``, ``dip_source``, ``dip_dir_deg`` and, for faults without
        ok stations, ``max_throw_m`` / ``max_throw_err_m``. An optional
        ``rake_deg`` column gives per-fault rakes.
    stations : geopandas.GeoDataFrame or None
        Throw stations (see :func:`~faultmap.extension.throw_profiles.throw_at`).
    transects : geopandas.GeoDataFrame
        Transect LineStrings in the same CRS as ``faults`` (or any CRS with
        ``reproject=True``). A ``transect_id`` column is kept if present
        (must be unique), else ids 1..n are given.
    zone : {'faulted', 'full'}
        Definition of the present length L1: ``faulted`` = distance along the
        transect between the outermost crossings plus ``margin_m`` at each
        side (clipped to the transect ends); ``full`` = the whole transect
        length.
    margin_m : float, optional
        Margin added beyond each outermost crossing, m. Default: half the
        median distance between neighbouring crossings over all transects
        (each fault then "owns" half a spacing on each side, so parallel
        faults at spacing S give L1 = n S exactly).
    rake_deg : float, optional
        Rake of all faults (Aki & Richards convention: -90 = pure normal dip
        slip), between -170 and -10 deg. Default: the faults' ``rake_deg``
        column where present and finite, else -90 (dip slip).
    default_dip_deg : float
        Dip used where a fault's ``dip_deg`` is NaN (marked ``default``).
    dip_range_default_deg, dip_range_attribute_deg : float
        Half-width of the uniform Monte Carlo dip range for default dips and
        for dips from an attribute, degrees. A fault's own ``dip_min_deg`` /
        ``dip_max_deg`` (a range in the traces' dip field) replace them.
    n_draws : int
        Monte Carlo draws (>= 10).
    seed : int
        Seed of the random generator; the same seed gives the same result.
    detection_throw_m : float, optional
        Smallest throw resolved by the DEM, m (see
        :func:`faultmap.extension.subresolution.detection_throw_m`). With
        ``exponent_c``, enables the sub-resolution correction.
    exponent_c : float, optional
        Exponent C of the cumulative throw distribution N(>=T) ~ T^-C of
        the population sampled along a line.
    d_min_m : float
        Smallest fault throw considered in the correction, m.
    d_max_m : float, optional
        Largest throw of the population, m. Default: the largest
        ``max_throw_m`` of the faults (else of the crossings).
    reproject : bool
        Reproject transects to the faults' CRS instead of raising.

    Returns
    -------
    transects : geopandas.GeoDataFrame
        The input transects with, among others: ``transect_id``,
        ``length_m``, ``azimuth_deg``, ``n_crossings``, ``n_faults``,
        ``zone``, ``margin_m``, ``zone_length_m`` (L1),
        ``restored_length_m`` (L0), ``sum_heave_m``, ``sum_heave_err_m``,
        ``sum_heave_along_m``, ``sum_heave_along_err_m``, ``extension``,
        ``extension_p16``, ``extension_p50``, ``extension_p84``, ``beta``,
        ``beta_p16``, ``beta_p84``, ``extension_present`` (sum / L1),
        ``n_default_dip``, ``n_throw_fallback``, ``ends_inside``,
        ``ends_inside_side``, ``status`` and the separate correction fields
        ``fraction_below_detection``, ``sum_heave_along_corrected_m``,
        ``extension_corrected``, ``beta_corrected``.
    crossings : geopandas.GeoDataFrame
        One Point per crossing (a curved trace crossed twice gives two):
        ``transect_id``, ``fault_id``, ``dist_along_transect_m``,
        ``dist_along_fault_m``, ``throw_m``, ``throw_err_m``,
        ``throw_source``, ``dip_deg``, ``dip_source``, ``dip_dir_deg``,
        ``dip_dir_source`` (the fault's, or ``trace_normal`` when the dip
        direction is unknown), ``rake_deg``, ``transect_azimuth_deg``,
        ``projection_cos``, ``heave_m``, ``heave_along_m``.

    Raises
    ------
    CRSError
        Transects in another CRS than the faults (without ``reproject``),
        or a geographic CRS.
    InputError
        Zero-length transects (named), duplicate ids, missing columns.
    ParameterError
        Out-of-range options.

    Warns
    -----
    FaultmapWarning
        Transects crossing no fault (zero sums, ``status='no_crossing'``),
        transects ending inside the population, crossings without a throw,
        over-extended draws.

    Notes
    -----
    Heave h = T / tan(dip) (geometry). Extension e = (L1 - L0) / L0 and
    stretching factor beta = L1 / L0 with L0 = L1 - sum(h_along), the
    restored length (``docs/methods/extension.md``; McKenzie 1978, Earth
    Planet. Sci. Lett. 40, for beta).
    ``extension_present`` = sum / L1 = 1 - 1/beta is the same strain
    referred to the present length, the quantity Kostrov summation on the
    present area estimates (see :mod:`faultmap.extension.kostrov_sums`).

    Projected heave: for dip slip the hanging wall moves by h along the dip
    direction m, so the transect of local direction t lengthens by
    h |m . t|. With a rake lambda (Aki & Richards 1980 convention, from
    memory), the hanging wall also moves along strike s by
    T cos(lambda) / (|sin(lambda)| sin(dip)), and the lengthening becomes
    h |m . t| + ss (s . t) sign(m . t); the heave itself (the component
    along m) is unchanged.

    Uncertainty: Monte Carlo, vectorised over (n_crossings, n_draws): one
    uniform dip per fault and draw within +-range (shared by all crossings
    of that fault, clipped to [1, 90] deg), one normal throw per crossing
    and draw with the interpolated 1-sigma error (clipped at 0).
    Percentiles 16/50/84 are reported; ``*_err_m`` is half the 16-84 range.

    Sub-resolution correction (Marrett & Allmendinger 1992): resolved faults
    carry the fraction 1 - f of the total, f from
    :func:`faultmap.extension.subresolution.fraction_below_detection`; the corrected
    sum is sum / (1 - f). Reported in separate fields only.
    """
    _validate_params(
        zone, margin_m, n_draws, seed, dip_range_default_deg, dip_range_attribute_deg,
        default_dip_deg, rake_deg, d_min_m,
    )
    fid, fgeoms = _check_faults(faults)
    transects = _in_faults_crs(transects, faults, "transects", "LineStrings", reproject=reproject)
    out, tid, tgeoms, tlen = _transect_lines(transects)
    nt = len(tgeoms)

    # ---- crossings (vectorised STRtree query + intersection)
    tree = shapely.STRtree(fgeoms)
    ti, fi, t_pos, parts = _crossing_positions(tgeoms, fgeoms, tree=tree, warn_ids=tid)
    f_dist = shapely.line_locate_point(fgeoms[fi], parts)
    nc = len(parts)

    # ---- throw, dip, direction, heave at each crossing
    throw, terr, tsrc = throw_at(faults, stations, fi, f_dist)
    dip_f = _col(faults, "dip_deg", np.nan)
    dsrc_f = (
        faults["dip_source"].astype(str).to_numpy()
        if "dip_source" in faults.columns
        else np.full(len(faults), "default", dtype=object)
    )
    dsrc_f = np.where(np.isfinite(dip_f), dsrc_f, "default").astype(object)
    dip_f = np.where(np.isfinite(dip_f), dip_f, default_dip_deg)
    bad_dip = (dip_f <= 0) | (dip_f > 90)
    if bad_dip.any():
        raise InputError(f"fault {_ids(fid[bad_dip])}: dip_deg outside (0, 90]; fix the dip attribute.")
    dip = dip_f[fi]
    dsrc = dsrc_f[fi]

    t_az = _local_azimuth(tgeoms[ti], t_pos) if nc else np.zeros(0)
    dd_f = _col(faults, "dip_dir_deg", np.nan)
    dd = dd_f[fi]
    dd_known = np.isfinite(dd)
    dd_src_f = (
        faults["dip_dir_source"].astype(str).to_numpy()
        if "dip_dir_source" in faults.columns
        else np.full(len(faults), "fault", dtype=object)
    )
    dd_src = np.where(dd_known, dd_src_f[fi], "trace_normal").astype(object)
    if (~dd_known).any():
        dd = dd.copy()
        dd[~dd_known] = (_local_azimuth(fgeoms[fi[~dd_known]], f_dist[~dd_known]) + 90.0) % 360.0

    rake_f = _col(faults, "rake_deg", np.nan) if rake_deg is None else np.full(len(faults), float(rake_deg))
    _check_rake(rake_f, "faults rake_deg")
    rake_f = np.where(np.isfinite(rake_f), rake_f, -90.0)
    rake = rake_f[fi]
    ss_k = np.where(dd_known, _rake_factor(rake), 0.0)
    if (~dd_known & (np.abs(rake + 90.0) > 1e-9)).any():
        warnings.warn(
            "faults without a dip direction are treated as pure dip slip (rake ignored); "
            "give dip_dir_deg to use the rake.",
            FaultmapWarning,
            stacklevel=2,
        )

    tr = np.radians(t_az)
    t_vec = np.stack([np.sin(tr), np.cos(tr)], axis=-1) if nc else np.zeros((0, 2))
    mr = np.radians(dd)
    m_vec = np.stack([np.sin(mr), np.cos(mr)], axis=-1) if nc else np.zeros((0, 2))
    s_vec = np.stack([-np.cos(mr), np.sin(mr)], axis=-1) if nc else np.zeros((0, 2))  # strike = dd - 90
    cm = np.sum(m_vec * t_vec, axis=1)
    cm_abs = np.abs(cm)
    cs = np.sum(s_vec * t_vec, axis=1) * np.sign(cm)

    with np.errstate(divide="ignore", invalid="ignore"):
        heave = throw / np.tan(np.radians(dip))
        heave_along = heave * cm_abs + throw * ss_k * cs / np.sin(np.radians(dip))
    valid = np.isfinite(heave_along)
    if (~valid).any():
        warnings.warn(
            f"fault {_ids(np.unique(fid[fi[~valid]]))}: no throw known at a transect crossing (no ok "
            "station and no max_throw_m); left out of the sums. Run the throw tool on these faults.",
            FaultmapWarning,
            stacklevel=2,
        )

    crossings = gpd.GeoDataFrame(
        {
            "transect_id": tid[ti],
            "fault_id": fid[fi],
            "dist_along_transect_m": t_pos,
            "dist_along_fault_m": f_dist,
            "throw_m": throw,
            "throw_err_m": terr,
            "throw_source": tsrc,
            "dip_deg": dip,
            "dip_source": dsrc,
            "dip_dir_deg": dd,
            "dip_dir_source": dd_src,
            "rake_deg": rake,
            "transect_azimuth_deg": t_az,
            "projection_cos": cm_abs,
            "heave_m": heave,
            "heave_along_m": heave_along,
        },
        geometry=gpd.GeoSeries(parts, crs=faults.crs).values,
        crs=faults.crs,
    )

    # ---- per transect nominal values
    n_cross = np.bincount(ti, minlength=nt)
    tv, fv = ti[valid], fi[valid]
    sum_h = np.bincount(tv, weights=heave[valid], minlength=nt)
    sum_ha = np.bincount(tv, weights=heave_along[valid], minlength=nt)
    pairs = np.unique(np.stack([ti, fi], axis=1), axis=0) if nc else np.zeros((0, 2), dtype=np.int64)
    n_faults = np.bincount(pairs[:, 0], minlength=nt)
    n_default = np.bincount(ti, weights=(dsrc != "attribute").astype(float), minlength=nt).astype(int)
    n_fallback = np.bincount(ti, weights=(tsrc != "stations").astype(float), minlength=nt).astype(int)

    if margin_m is None:
        gaps = np.diff(t_pos)[ti[1:] == ti[:-1]] if nc > 1 else np.zeros(0)
        gaps = gaps[gaps > 0]
        margin_used = 0.5 * float(np.median(gaps)) if gaps.size else 0.0
    else:
        margin_used = float(margin_m)
    has_c = n_cross > 0
    t_first = np.full(nt, np.nan)
    t_last = np.full(nt, np.nan)
    if nc:
        starts = np.flatnonzero(np.r_[True, ti[1:] != ti[:-1]])
        ends = np.r_[starts[1:], nc] - 1
        t_first[ti[starts]] = t_pos[starts]
        t_last[ti[ends]] = t_pos[ends]
    if zone == "full":
        L1 = tlen.copy()
    else:
        L1 = np.minimum(t_last + margin_used, tlen) - np.maximum(t_first - margin_used, 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        L0 = L1 - sum_ha
        ok_len = L0 > 0
        ext = np.where(ok_len, sum_ha / L0, np.nan)
        beta = np.where(ok_len, L1 / L0, np.nan)
        ext_present = np.where(L1 > 0, sum_ha / L1, np.nan)

    status = np.full(nt, "ok", dtype=object)
    status[has_c & ~(L1 > 0)] = "zone_undefined"
    status[has_c & (L1 > 0) & ~ok_len] = "overextended"
    status[~has_c] = "no_crossing"
    ext[~has_c], beta[~has_c], ext_present[~has_c] = 0.0, 1.0, 0.0
    if zone == "faulted":
        L1[~has_c] = np.nan
        L0[~has_c] = np.nan

    # ---- Monte Carlo (vectorised over crossings x draws; chunked over draws for memory)
    p = {k: np.zeros(nt) for k in ("h16", "h84", "a16", "a84")}
    p.update({k: np.where(has_c, np.nan, v) for k, v in (("e16", 0.0), ("e50", 0.0), ("e84", 0.0), ("b16", 1.0), ("b84", 1.0))})
    n_over = np.zeros(nt, dtype=int)
    if valid.any():
        rng = np.random.default_rng(seed)
        uf, f_inv = np.unique(fv, return_inverse=True)
        half = np.where(dsrc_f[uf] == "attribute", dip_range_attribute_deg, dip_range_default_deg)
        # a fault's own dip range (a database's "50-70" or "(50,60,70)", read by prepare) replaces +- half
        own_lo = _col(faults, "dip_min_deg", np.nan)[uf]
        own_hi = _col(faults, "dip_max_deg", np.nan)[uf]
        own = np.isfinite(own_lo) | np.isfinite(own_hi)
        lo_own, hi_own = dip_draw_bounds(dip_f[uf], half, own_lo, own_hi, min_dip_deg=_DIP_MIN_DEG)
        nvc = int(valid.sum())
        agg = sparse.csr_matrix((np.ones(nvc), (tv, np.arange(nvc))), shape=(nt, nvc))
        cm_v, cs_v, k_v = cm_abs[valid], cs[valid], ss_k[valid]
        t_v = throw[valid]
        e_v = np.nan_to_num(terr[valid], nan=0.0)
        chunk = int(max(1, min(n_draws, 4e6 // max(nvc + len(uf), 1))))
        sh, sa = [], []
        for start in range(0, n_draws, chunk):
            k = min(chunk, n_draws - start)
            u = rng.uniform(-1.0, 1.0, size=(len(uf), k))
            dips = np.where(
                own[:, None],
                lo_own[:, None] + (hi_own - lo_own)[:, None] * (0.5 * (u + 1.0)),
                dip_f[uf][:, None] + half[:, None] * u,
            )
            dips = np.clip(dips, _DIP_MIN_DEG, 90.0)[f_inv]
            tdraw = np.maximum(t_v[:, None] + e_v[:, None] * rng.standard_normal((nvc, k)), 0.0)
            dr = np.radians(dips)
            h = tdraw / np.tan(dr)
            ha = h * cm_v[:, None] + tdraw * (k_v * cs_v)[:, None] / np.sin(dr)
            sh.append(agg @ h)
            sa.append(agg @ ha)
        sh, sa = np.hstack(sh), np.hstack(sa)
        p["h16"], p["h84"] = np.percentile(sh, [16, 84], axis=1)
        p["a16"], p["a84"] = np.percentile(sa, [16, 84], axis=1)
        with np.errstate(divide="ignore", invalid="ignore"):
            l0d = L1[:, None] - sa
            good = l0d > 0
            ed = np.where(good, sa / l0d, np.nan)
            bd = np.where(good, L1[:, None] / l0d, np.nan)
        n_over = (~good).sum(axis=1)
        rows = has_c & (L1 > 0) & (good.sum(axis=1) > 0)
        if rows.any():
            e_pct = np.nanpercentile(ed[rows], [16, 50, 84], axis=1)
            b_pct = np.nanpercentile(bd[rows], [16, 84], axis=1)
            p["e16"][rows], p["e50"][rows], p["e84"][rows] = e_pct
            p["b16"][rows], p["b84"][rows] = b_pct
    n_over[~(L1 > 0)] = 0

    # ---- sub-resolution correction (separate fields)
    frac = np.full(nt, np.nan)
    s_corr = np.full(nt, np.nan)
    e_corr = np.full(nt, np.nan)
    b_corr = np.full(nt, np.nan)
    if detection_throw_m is not None and exponent_c is not None and np.isfinite(detection_throw_m):
        if d_max_m is None:
            mt = _col(faults, "max_throw_m", np.nan)
            d_max_m = float(np.nanmax(mt)) if np.isfinite(mt).any() else (
                float(np.nanmax(throw)) if np.isfinite(throw).any() else np.nan
            )
        if np.isfinite(d_max_m) and d_max_m > d_min_m:
            frac[:] = fraction_below_detection(detection_throw_m, d_min=d_min_m, d_max=d_max_m, exponent_c=exponent_c)
            s_corr = corrected_sum(sum_ha, frac)
            with np.errstate(divide="ignore", invalid="ignore"):
                l0c = L1 - s_corr
                e_corr = np.where(l0c > 0, s_corr / l0c, np.nan)
                b_corr = np.where(l0c > 0, L1 / l0c, np.nan)
            e_corr[~has_c] = np.nan
        else:
            warnings.warn(
                f"sub-resolution correction skipped: largest throw ({d_max_m!r} m) is not above d_min_m "
                f"({d_min_m:g} m).",
                FaultmapWarning,
                stacklevel=2,
            )

    # ---- ends inside the population: extend each end outwards and look for faults beyond it
    ends_side = _ends_inside(tgeoms, fgeoms, tree)

    # ---- warnings
    if (~has_c).any():
        warnings.warn(
            f"transect {_ids(tid[~has_c])}: crosses no fault; sums are zero (status 'no_crossing'). "
            "Check its position or the faults layer.",
            FaultmapWarning,
            stacklevel=2,
        )
    if (status == "zone_undefined").any():
        warnings.warn(
            f"transect {_ids(tid[status == 'zone_undefined'])}: faulted zone has zero length (one crossing, "
            "no margin); give margin_m or use zone='full'.",
            FaultmapWarning,
            stacklevel=2,
        )
    if (status == "overextended").any():
        warnings.warn(
            f"transect {_ids(tid[status == 'overextended'])}: summed heave exceeds the zone length, so no "
            "restored length exists; check dips and throws or widen the zone.",
            FaultmapWarning,
            stacklevel=2,
        )
    inside = ends_side != ""
    if inside.any():
        warnings.warn(
            f"transect {_ids(tid[inside])}: ends inside the fault population (faults continue beyond its "
            "end); its sums miss those faults (flag 'ends_inside'). Extend the transect.",
            FaultmapWarning,
            stacklevel=2,
        )

    coords = shapely.get_coordinates(tgeoms, return_index=True)
    c_xy, c_idx = coords
    first_v = np.r_[0, np.flatnonzero(np.diff(c_idx)) + 1]
    last_v = np.r_[first_v[1:] - 1, len(c_idx) - 1]
    az = _azimuth_deg(c_xy[last_v, 0] - c_xy[first_v, 0], c_xy[last_v, 1] - c_xy[first_v, 1])

    out["length_m"] = tlen
    out["azimuth_deg"] = az
    out["n_crossings"] = n_cross
    out["n_faults"] = n_faults
    out["zone"] = zone
    out["margin_m"] = margin_used if zone == "faulted" else 0.0
    out["zone_length_m"] = L1
    out["restored_length_m"] = np.where(ok_len | ~has_c, L0, np.nan)
    out["sum_heave_m"] = sum_h
    out["sum_heave_err_m"] = 0.5 * (p["h84"] - p["h16"])
    out["sum_heave_along_m"] = sum_ha
    out["sum_heave_along_err_m"] = 0.5 * (p["a84"] - p["a16"])
    out["extension"] = ext
    out["extension_p16"] = p["e16"]
    out["extension_p50"] = p["e50"]
    out["extension_p84"] = p["e84"]
    out["beta"] = beta
    out["beta_p16"] = p["b16"]
    out["beta_p84"] = p["b84"]
    out["extension_present"] = ext_present
    out["n_draws_overextended"] = n_over
    out["n_default_dip"] = n_default
    out["n_throw_fallback"] = n_fallback
    out["ends_inside"] = inside
    out["ends_inside_side"] = ends_side
    out["status"] = status
    out["fraction_below_detection"] = frac
    out["sum_heave_along_corrected_m"] = s_corr
    out["extension_corrected"] = e_corr
    out["beta_corrected"] = b_corr
    return out, crossings
