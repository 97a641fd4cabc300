"""Throw, heave and vertical separation along fault traces, from a DEM.

The measurement, station by station (all stations of a batch at once):

1. Stations every ``station_spacing_m`` along each trace, with the trace
   normal smoothed over ``normal_window_m`` (:mod:`faultmap.throw.stations`).
2. A profile across the trace at each station, sampled every
   ``sample_step_m`` (about one pixel) by bilinear interpolation of the DEM;
   voids stay NaN. Where another trace crosses a profile, that side stops
   short of the crossing so a neighbour's scarp never enters the fit.
3. On each side, outside a scarp zone that widens to where the profile
   departs from the far-field surface, a robust straight line (iteratively
   reweighted least squares, Tukey biweight by default) fits the ground
   surface over 2-3 scarp widths; both lines are projected to the trace.
   Their difference is the vertical separation; the Caskey (1995) relation
   turns it into throw using the surface slope and the fault dip.
4. Per fault: a robust, smoothed along-strike throw profile gives the
   maximum throw and its position, the mean throw, the along-strike heave
   integral and tip gradients; the down-thrown side is inferred from the
   DEM where the dip direction is unknown.
5. Along linked systems, throw minima between segments mark linkage zones.

Everything here is a pure function of arrays / GeoDataFrames and a lazy
:class:`faultmap.io.dem.Dem` (which reads windows of the raster on demand);
batches are independent so that an engine can run them anywhere.

This module holds the step itself (:func:`measure_throw`), the down-thrown
side and the conversion of raw separations to throws; the parts live in
modules named for what they compute (their public names are listed in
:mod:`faultmap.throw`):

* :mod:`faultmap.throw.params`: parameters, checked and adapted to the DEM;
* :mod:`faultmap.throw.stations`: stations, normals, crossing traces;
* :mod:`faultmap.throw.profiles`: sampling the DEM along profiles, per-station fits;
* :mod:`faultmap.throw.scarp_fit`: scarp zone and far-field fits, Caskey (1995);
* :mod:`faultmap.throw.robust_lines`: robust straight-line fits of many lines at once;
* :mod:`faultmap.throw.batches`: tiles of the DEM as independent batches;
* :mod:`faultmap.throw.smoothing`: smoothed along-strike profiles;
* :mod:`faultmap.throw.fault_summaries`: per-fault figures (maximum, mean throw, heave integral);
* :mod:`faultmap.throw.linkage`: linkage zones of linked systems.

The innermost loops run as compiled kernels (numba), each beside the array
code it repeats (``profiles_jit``, ``robust_lines_jit``, ``scarp_fit_jit``,
``stations_jit``, ``smoothing_jit``; shared setup in
:mod:`faultmap.numerics.jit`); :func:`compiled_on_disk` says whether they
are compiled yet.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely

from faultmap.engine import old_objects_frozen
from faultmap.errors import CRSError, InputError, ParameterError
from faultmap.numerics import jit
from faultmap.scarps.fault_degradation import STATION_KT_COLUMNS, station_kappa_t, summarise_degradation
from faultmap.throw.batches import RAW_COLUMNS as _RAW_COLUMNS  # profile fits and kappa t
from faultmap.throw.batches import _raw_frame, _side_signs_for, plan_batches, run_batch
from faultmap.throw.fault_summaries import summarise_faults
from faultmap.throw.linkage import linkage_zones
from faultmap.throw.params import ThrowParams, resolve_params
from faultmap.throw.stations import StationSet, place_stations
from faultmap.traces.conditioning import _ids

__all__ = [
    "ThrowResult",
    "STATUS_VALUES",
    "finalise_stations",
    "infer_downthrown_side",
    "measure_throw",
]

#: Station status values, in order of precedence.
STATUS_VALUES = ("ok", "outside", "truncated", "nodata", "poor_fit")


# ---------------------------------------------------------------------------
# From raw separations to throws; down-thrown side
# ---------------------------------------------------------------------------
def infer_downthrown_side(fault_id, vs_plus, ok, err=None) -> pd.DataFrame:
    """Which side of each fault is down, from the signs of its separations.

    Parameters
    ----------
    fault_id : array_like of int
        Fault of each station.
    vs_plus : array_like of float
        Surface on the - side minus surface on the + side at the trace, m.
    ok : array_like of bool
        Stations whose fit is usable.
    err : array_like of float, optional
        Standard error of each separation, m (default: equal weights).

    Returns
    -------
    pandas.DataFrame
        Indexed by fault_id: ``down_sign`` (+1: the + side is down, -1: the
        - side is, 0: unknown), ``confidence`` (fraction of usable stations
        whose separation has that sign) and ``n`` (usable stations).

    Notes
    -----
    The side is the sign of the inverse-variance weighted mean separation
    over the trace, so a few stations disturbed by a neighbour (large
    errors) cannot outvote the rest; the confidence is the agreeing
    fraction of stations (common practice).
    """
    fid = np.asarray(fault_id)
    use = np.asarray(ok, dtype=bool) & np.isfinite(vs_plus)
    v = np.where(use, np.asarray(vs_plus, dtype=float), np.nan)
    if err is None:
        w = np.where(use, 1.0, 0.0)
    else:
        e = np.asarray(err, dtype=float)
        floor = np.nanmedian(e[use]) * 0.1 if use.any() and np.isfinite(e[use]).any() else 1e-3
        e = np.maximum(np.where(np.isfinite(e), e, np.inf), max(floor, 1e-6))
        w = np.where(use, 1.0 / e**2, 0.0)
    ids, g = np.unique(fid, return_inverse=True)
    g = g.ravel()
    k = ids.size
    total = np.bincount(g, np.nan_to_num(v) * w, minlength=k)
    has = ~np.isnan(v)
    n = np.bincount(g[has], minlength=k)
    sign = np.sign(total).astype(int)
    agree = np.bincount(g[has], (np.sign(v[has]) == sign[g[has]]).astype(float), minlength=k)
    with np.errstate(invalid="ignore", divide="ignore"):
        frac = np.where(n > 0, agree / n, 0.0)
    sign[n == 0] = 0
    return pd.DataFrame({"down_sign": sign, "confidence": frac, "n": n}, index=pd.Index(ids, name="fault_id"))


def finalise_stations(raw: pd.DataFrame, faults: pd.DataFrame, hw_sign) -> pd.DataFrame:
    """Turn raw separations into throws, heaves and statuses.

    Parameters
    ----------
    raw : pandas.DataFrame
        From :func:`measure_batch` (all batches concatenated).
    faults : pandas.DataFrame
        ``fault_id`` and ``dip_deg`` of every fault.
    hw_sign : mapping or Series
        fault_id -> +1 if the + side is the hanging wall, -1 if the - side.

    Returns
    -------
    pandas.DataFrame
        Adds ``vert_sep_m`` (footwall minus hanging-wall surface at the
        trace), ``vert_sep_err_m``, ``throw_m``, ``throw_err_m``, ``heave_m``,
        ``surface_slope_deg`` (positive descending towards the hanging
        wall), ``planarity_err_m``, ``n_fw``, ``n_hw``, ``scarp_width_m``,
        ``profile_azimuth_deg`` (towards the hanging wall) and ``status``.

    Notes
    -----
    Throw from vertical separation by Caskey (1995), with the surface slope
    fitted on the profile (the average of the two sides, inverse-variance
    weighted); heave = throw / tan(dip). The error of the throw propagates
    those of the separation and of the slope to first order, and adds in
    quadrature ``planarity_err_m``: half the difference of the two sides'
    slopes times the mean distance of the fitted stretches from the trace,
    our own estimate of how far a non-planar surface (relief, rollover) may
    shift the projected levels (zero for a planar surface).
    """
    df = raw.copy(deep=False)  # new columns only: the caller's frame is never written (tested)
    fid = df["fault_id"].to_numpy()
    at = pd.Index(faults["fault_id"].to_numpy()).get_indexer(fid)
    dip = np.where(at >= 0, faults["dip_deg"].to_numpy(dtype=float)[at], np.nan)
    hw = pd.Series(hw_sign)
    at = pd.Index(hw.index).get_indexer(fid)
    s = np.where(at >= 0, hw.to_numpy(dtype=float)[at], np.nan)
    s = np.where(np.isnan(s), 1.0, s)
    s = np.where(s == 0, 1.0, s)
    vs = s * df["vs_plus_m"].to_numpy(dtype=float)
    b = s * df["slope_plus"].to_numpy(dtype=float)  # dz/du towards the hanging wall
    se_vs = df["vs_se_m"].to_numpy(dtype=float)
    se_b = df["slope_se"].to_numpy(dtype=float)
    td = np.tan(np.radians(dip))
    plan = df["planarity_m"].to_numpy(dtype=float) if "planarity_m" in df.columns else np.zeros(len(df))
    plan = np.nan_to_num(plan)
    with np.errstate(divide="ignore", invalid="ignore"):
        f = 1.0 + b / td
        T = vs / f
        se_T = np.sqrt((se_vs / f) ** 2 + (vs * se_b / (f * f * td)) ** 2 + (plan / f) ** 2)
    geo = df["geo_status"].to_numpy(dtype=object)
    poor = df["poor"].to_numpy(dtype=bool) | ~(f >= 0.25) | ~np.isfinite(T)
    fitm = geo == ""  # 'ok' or 'poor_fit'
    okm = fitm & ~poor
    status = geo.copy()
    status[okm] = "ok"
    status[fitm & poor] = "poor_fit"
    fitted = fitm | (geo == "truncated")
    df["vert_sep_m"] = np.where(fitm, vs, np.nan)
    df["vert_sep_err_m"] = np.where(fitm, se_vs, np.nan)
    df["throw_m"] = np.where(okm, T, np.nan)
    df["throw_err_m"] = np.where(okm, se_T, np.nan)
    df["heave_m"] = np.where(okm, T / td, np.nan)
    df["planarity_err_m"] = np.where(fitm, plan, np.nan)
    df["surface_slope_deg"] = np.where(fitm, np.degrees(np.arctan(-b)), np.nan)
    nm, npl = df["n_minus"].to_numpy(dtype=float), df["n_plus"].to_numpy(dtype=float)
    df["n_fw"] = np.where(s > 0, nm, npl).astype(float)
    df["n_hw"] = np.where(s > 0, npl, nm).astype(float)
    df["scarp_width_m"] = np.where(
        fitted, df["w_minus_m"].to_numpy(float) + df["w_plus_m"].to_numpy(float), np.nan
    )
    df["fit_rmse_m"] = np.where(fitm, df["fit_rmse_m"].to_numpy(float), np.nan)
    df["profile_azimuth_deg"] = (
        np.degrees(np.arctan2(s * df["nx"].to_numpy(float), s * df["ny"].to_numpy(float))) % 360.0
    )
    df["status"] = status
    return station_kappa_t(df)  # kappa t fields of the scarp degradation fit (faultmap.scarps)


# ---------------------------------------------------------------------------
# The whole step
# ---------------------------------------------------------------------------
@dataclass
class ThrowResult:
    """What :func:`measure_throw` returns.

    Attributes
    ----------
    faults : geopandas.GeoDataFrame
        Input faults with the throw fields, inferred dip directions and
        ``dip_dir_confidence``.
    stations : geopandas.GeoDataFrame
        The ``throw_stations`` layer (Point geometry on the trace).
    linkage_zones : geopandas.GeoDataFrame
        The ``linkage_zones`` layer.
    warnings : list of str
    params : ThrowParams
        The parameters used (adapted values filled in).
    n_samples : int
        Profile samples taken (for throughput figures).
    n_batches : int
        Spatial batches the work was split into.
    """

    faults: gpd.GeoDataFrame
    stations: gpd.GeoDataFrame
    linkage_zones: gpd.GeoDataFrame
    warnings: list
    params: ThrowParams
    n_samples: int = 0
    n_batches: int = 0


STATION_COLUMNS = (
    "fault_id",
    "dist_m",
    "throw_m",
    "throw_err_m",
    "vert_sep_m",
    "vert_sep_err_m",
    "planarity_err_m",
    "heave_m",
    "status",
    "throw_smooth_m",
    "throw_smooth_err_m",
    "outlier",
    "surface_slope_deg",
    "scarp_width_m",
    "fit_rmse_m",
    "n_fw",
    "n_hw",
    "profile_azimuth_deg",
    "profile_half_length_m",
) + STATION_KT_COLUMNS  # scarp degradation (faultmap.scarps)


def _check_faults(faults) -> gpd.GeoDataFrame:
    if not isinstance(faults, gpd.GeoDataFrame):
        raise InputError("faults must be a GeoDataFrame of LineString traces (run prepare first).")
    if len(faults) == 0:
        raise InputError("faults: the layer has no traces; give at least one fault trace.")
    if "fault_id" not in faults.columns:
        raise InputError("faults: no 'fault_id' column; run prepare first (it numbers the traces).")
    ids = faults["fault_id"].to_numpy()
    if pd.Series(ids).duplicated().any():
        dup = pd.Series(ids)[pd.Series(ids).duplicated()].iloc[0]
        raise InputError(f"faults: fault_id {dup} appears more than once; fault ids must be unique.")
    geoms = faults.geometry.to_numpy()
    types = shapely.get_type_id(geoms)
    bad = (types != 1) | shapely.is_empty(geoms)
    if bad.any():
        raise InputError(
            f"faults: feature with fault_id {ids[np.flatnonzero(bad)[0]]} is not a single LineString; run prepare first."
        )
    f = faults.copy()
    if "dip_deg" not in f.columns:
        f["dip_deg"] = 60.0
    dip = f["dip_deg"].to_numpy(dtype=float)
    if not np.all((dip > 0) & (dip <= 90)):
        i = int(np.flatnonzero(~((dip > 0) & (dip <= 90)))[0])
        raise InputError(f"faults: fault {ids[i]} has dip {dip[i]} outside (0, 90] degrees; fix its dip.")
    if "dip_dir_deg" not in f.columns:
        f["dip_dir_deg"] = np.nan
    if "dip_dir_source" not in f.columns:
        f["dip_dir_source"] = np.where(
            np.isfinite(f["dip_dir_deg"].to_numpy(dtype=float)), "attribute", "unknown"
        )
    return f


@old_objects_frozen()
def measure_throw(
    faults: gpd.GeoDataFrame,
    dem,
    *,
    params: ThrowParams | None = None,
    mapper: Callable | None = None,
    progress: Callable | None = None,
    min_batches: int = 1,
    **param_kwargs,
) -> ThrowResult:
    """Throw, heave and vertical separation along every fault trace.

    Parameters
    ----------
    faults : geopandas.GeoDataFrame
        The ``faults`` layer after ``prepare`` (``fault_id``, LineString
        geometry in the DEM's CRS, ``dip_deg``, ``dip_dir_deg`` (NaN =
        unknown), optionally ``censored``, ``system_id``, ``strike_deg``).
    dem : faultmap.io.dem.Dem
        Lazy DEM in the same projected metric CRS.
    params : ThrowParams, optional
        Resolved parameters; otherwise built from ``param_kwargs`` with
        :func:`resolve_params` and the DEM's pixel size.
    mapper : callable, optional
        ``mapper(func, batches, progress) -> list`` running ``func`` over
        the batches in order (e.g. :meth:`faultmap.engine.Engine.map`);
        default a plain loop.
    progress : callable, optional
        ``progress(iterable, total) -> iterable`` wrapper (progress bar).
    min_batches : int
        Split the DEM into at least this many tiles (for parallel engines);
        results do not depend on it.
    **param_kwargs
        Parameters of :func:`resolve_params`.

    Returns
    -------
    ThrowResult

    Raises
    ------
    InputError
        No trace overlaps the DEM, or the faults are not usable.
    CRSError
        The faults and the DEM are in different CRSs.
    ParameterError
        Parameters out of range.

    Notes
    -----
    See the module docstring and ``docs/methods/throw.md``. Vertical
    separation to throw: Caskey (1995); scarp-profile fitting: McCalpin
    (1987), Avouac (1993); robust fits: Holland & Welsch (1977).
    """
    f = _check_faults(faults)
    if f.crs is not None and getattr(dem, "crs", None) is not None:
        from pyproj import CRS

        if not CRS.from_user_input(f.crs).equals(CRS.from_user_input(dem.crs)):
            raise CRSError(
                "faults and DEM are in different CRSs; reproject the traces to the DEM's CRS (prepare does)."
            )
    if params is None:
        params = resolve_params(dem.pixel_size, **param_kwargs)
    elif param_kwargs:
        raise ParameterError("give either params or individual parameters, not both.")
    warns: list[str] = []
    lines = f.geometry.to_numpy()
    dem_box = shapely.box(*dem.bounds)
    over = shapely.intersects(lines, dem_box)
    if not over.any():
        b = dem.bounds
        tb = f.total_bounds
        raise InputError(
            f"no fault trace overlaps the DEM (DEM x {b[0]:.0f}..{b[2]:.0f}, y {b[1]:.0f}..{b[3]:.0f}; "
            f"traces x {tb[0]:.0f}..{tb[2]:.0f}, y {tb[1]:.0f}..{tb[3]:.0f}); check both are in the same CRS and area."
        )
    if (~over).any():
        ids = f["fault_id"].to_numpy()[~over]
        warns.append(
            f"{int((~over).sum())} fault(s) lie wholly outside the DEM (fault ids {_ids(ids)}); their stations are 'outside'."
        )
    b = shapely.bounds(lines)  # within the (axis-aligned) DEM box <=> bounds inside it
    xmin, ymin, xmax, ymax = dem.bounds
    partly = over & ~((b[:, 0] >= xmin) & (b[:, 1] >= ymin) & (b[:, 2] <= xmax) & (b[:, 3] <= ymax))
    if partly.any():
        warns.append(
            f"{int(partly.sum())} fault(s) run off the DEM edge (fault ids {_ids(f['fault_id'].to_numpy()[partly])}); stations beyond it are 'outside'."
        )
    batches = plan_batches(f, dem, params, min_batches=min_batches)
    from functools import partial

    func = partial(run_batch, dem=dem, params=params)
    if mapper is None:
        it = batches if progress is None else progress(batches, len(batches))
        outs = [func(b) for b in it]
    else:
        outs = mapper(func, batches, progress)
    frames = [o[0] for o in outs]
    for o in outs:
        warns.extend(o[1])
    raw = (
        pd.concat(frames, ignore_index=True)
        if frames
        else _raw_frame(StationSet(*(np.zeros(0),) * 6), np.zeros(0), {k: np.zeros(0) for k in _RAW_COLUMNS})
    )
    # faults wholly outside the DEM still get their stations, all 'outside'
    if (~over).any():
        sub = f.loc[~over].reset_index(drop=True)
        side = _side_signs_for(sub)
        st = place_stations(
            sub.geometry.to_numpy(),
            spacing_m=params.spacing_for(shapely.length(sub.geometry.to_numpy())),
            normal_window_m=params.normal_window_m,
            side_sign=side,
        )
        res = {k: np.full(len(st), np.nan) for k in _RAW_COLUMNS}
        res["geo_status"] = np.full(len(st), "outside", dtype=object)
        res["poor"] = np.zeros(len(st), dtype=bool)
        res["wants_m"] = np.zeros(len(st))
        res["samples"] = np.zeros(len(st))
        raw = pd.concat([raw, _raw_frame(st, sub["fault_id"].to_numpy(), res)], ignore_index=True)
    order = np.lexsort((raw["dist_m"].to_numpy(dtype=float), raw["fault_id"].to_numpy()))  # stable
    raw = raw.take(order).reset_index(drop=True)
    n_samples = int(np.nansum(raw["samples"].to_numpy(dtype=float)))

    # --- down-thrown side
    pre_ok = (raw["geo_status"].to_numpy() == "") & ~raw["poor"].to_numpy(dtype=bool)
    sides = infer_downthrown_side(
        raw["fault_id"].to_numpy(),
        raw["vs_plus_m"].to_numpy(dtype=float),
        pre_ok,
        np.hypot(
            raw["vs_se_m"].to_numpy(dtype=float), np.nan_to_num(raw["planarity_m"].to_numpy(dtype=float))
        ),
    )
    dd = f["dip_dir_deg"].to_numpy(dtype=float)
    known = np.isfinite(dd)
    fid = f["fault_id"].to_numpy()
    hw_sign = pd.Series(1.0, index=fid)
    conf = pd.Series(np.nan, index=fid)
    down = sides["down_sign"].reindex(fid).fillna(0).to_numpy()
    cfd = sides["confidence"].reindex(fid).fillna(0.0).to_numpy()
    nst = sides["n"].reindex(fid).fillna(0).to_numpy()
    # attribute faults: + side is the hanging wall by construction; check the DEM agrees
    disagree = known & (down < 0) & (cfd >= 0.7) & (nst >= 3)
    for i in np.flatnonzero(disagree):
        warns.append(
            f"fault {fid[i]}: the DEM shows the other side down-thrown ({cfd[i]:.0%} of {int(nst[i])} stations) "
            f"than its dip direction {dd[i]:.0f} deg says; check the dip_dir attribute (throws there come out negative)."
        )
    conf[known] = np.where(down[known] == 0, np.nan, np.where(down[known] > 0, cfd[known], 1.0 - cfd[known]))
    unk = ~known
    hw = np.where(down < 0, -1.0, 1.0)
    hw_sign[unk] = hw[unk]
    conf[unk] = np.where(down[unk] == 0, np.nan, cfd[unk])
    nodir = unk & (down == 0)
    if nodir.any():
        warns.append(
            f"dip direction unknown and not measurable from the DEM for fault ids {_ids(fid[nodir])}; "
            "give a dip_dir attribute."
        )
    weak = unk & (down != 0) & (cfd < 0.7)
    if weak.any():
        warns.append(
            f"down-thrown side inferred with low confidence (< 70 % of stations agree) for fault ids {_ids(fid[weak])}."
        )
    st = finalise_stations(raw, f, hw_sign)
    # dip direction of inferred faults: the mean profile azimuth towards the hanging wall
    f = f.copy()
    f["dip_dir_source"] = f["dip_dir_source"].astype(object)
    if unk.any():
        s_f = st["fault_id"].map(hw_sign).to_numpy(dtype=float)
        vx = s_f * st["nx"].to_numpy(float)
        vy = s_f * st["ny"].to_numpy(float)
        gx = pd.Series(vx).groupby(st["fault_id"].to_numpy()).sum()
        gy = pd.Series(vy).groupby(st["fault_id"].to_numpy()).sum()
        az = (np.degrees(np.arctan2(gx, gy)) % 360.0).reindex(fid).to_numpy()
        upd = unk & (down != 0)
        if "strike_deg" in f.columns:
            # keep prepare's strike line; pick the perpendicular on the hanging-wall side
            sk = f["strike_deg"].to_numpy(dtype=float)
            cand = (sk + 90.0) % 360.0
            diff = np.abs(((cand - az) + 180.0) % 360.0 - 180.0)
            new_dd = np.where(np.isfinite(sk), np.where(diff <= 90.0, cand, (sk - 90.0) % 360.0), az)
            new_sk = (new_dd - 90.0) % 360.0
            f.loc[upd, "strike_deg"] = new_sk[upd]
        else:
            new_dd = az
        f.loc[upd, "dip_dir_deg"] = new_dd[upd]
        f.loc[upd, "dip_dir_source"] = "dem"
        f.loc[unk & ~upd, "dip_dir_source"] = "unknown"
    f["dip_dir_confidence"] = conf.reindex(fid).to_numpy(dtype=float)
    # --- summaries
    if mapper is None:
        f, st = summarise_faults(f, st, smooth_stations=params.smooth_stations)
    else:
        # chunks of whole faults through the same engine: about one per worker thread (half the
        # batches asked for; each chunk is small, so more would mostly cost task overhead)
        n_chunks = max(2, min_batches // 2)
        f, st = summarise_faults(
            f,
            st,
            smooth_stations=params.smooth_stations,
            mapper=lambda fn, items: mapper(fn, items, None),
            chunk_stations=max(1024, -(-len(st) // n_chunks)),
        )
    f = summarise_degradation(f, st)  # per-fault kappa t (faultmap.scarps)
    if "censored" not in f.columns:
        f["censored"] = False
    f["censored"] = f["censored"].astype(bool)
    nok = f["n_stations_ok"].to_numpy()
    none_ok = over & (nok == 0)
    if none_ok.any():
        warns.append(f"no usable station on fault ids {_ids(fid[none_ok])}: see throw_stations status.")
    lz = linkage_zones(f, st, step_m=params.station_spacing_m)
    geom = gpd.points_from_xy(st["x"], st["y"], crs=f.crs)
    st["profile_half_length_m"] = st["half_length_m"]
    stations = gpd.GeoDataFrame(st[list(STATION_COLUMNS)], geometry=geom, crs=f.crs)
    return ThrowResult(
        faults=f, stations=stations, linkage_zones=lz, warnings=warns, params=params, n_samples=n_samples,
        n_batches=len(batches),
    )


def compiled_on_disk() -> bool | None:
    """Whether numba's on-disk cache already holds the throw step's compiled kernels.

    ``False`` means the next run compiles them (about 18 s, once per
    environment); ``None`` when it cannot tell (numba's cache layout is not
    a public interface). Always ``True`` when the kernels are disabled
    (:func:`faultmap.numerics.jit.compiled_on_disk`).
    """
    # kernels of every compiled module the step runs
    from faultmap.scarps.diffusion_jit import fit_rows  # the scarp degradation fit (on by default)
    from faultmap.throw.profiles_jit import _bilinear_rows
    from faultmap.throw.robust_lines_jit import _converge
    from faultmap.throw.scarp_fit_jit import _gradients
    from faultmap.throw.smoothing_jit import _cv_choice, _final_fit
    from faultmap.throw.stations_jit import _grid_query

    return jit.compiled_on_disk(
        (_bilinear_rows, _gradients, _cv_choice, _final_fit, _converge, _grid_query, fit_rows)
    )
