"""Batches of the throw measurement: tiles of the DEM, each a pure, picklable unit of work.

:func:`plan_batches` splits the stations into square tiles of the DEM sized
from the memory budget; :func:`run_batch` / :func:`measure_batch` measure the
stations of one tile on one window of the DEM (read once, split only when it
exceeds the budget), lengthening the profiles of stations whose scarp turns
out broad. A batch depends only on (trace geometries, DEM path and metadata,
tile, parameters), so an engine may run batches in threads or on Dask workers
and in any order.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Any

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely

from faultmap.scarps.profile_degradation import RAW_COLUMNS as _KT_COLUMNS
from faultmap.scarps.profile_degradation import DegradationCollector
from faultmap.throw.params import ThrowParams
from faultmap.throw.profiles import RAW_COLUMNS as _PROFILE_COLUMNS
from faultmap.throw.profiles import measure_profiles
from faultmap.throw.stations import (
    StationSet,
    crossing_limits,
    place_stations,
    side_signs,
)

__all__ = ["ThrowBatch", "plan_batches", "run_batch", "measure_batch", "min_batches_for", "RAW_COLUMNS"]

#: Raw station fields of a batch: the profile fits and the scarp degradation (kappa t).
RAW_COLUMNS = _PROFILE_COLUMNS + _KT_COLUMNS
_RAW_COLUMNS = RAW_COLUMNS

_F32 = np.float32
#: A window of up to this many pixels is read at once rather than in pieces (a read of this size
#: costs about as much as the fixed overhead of measuring a separate group).
_SMALL_READ_PX = 4_000_000


@dataclass(frozen=True)
class ThrowBatch:
    """One independent unit of work: the stations of some faults inside one tile.

    Attributes
    ----------
    traces : geopandas.GeoDataFrame
        ``fault_id``, ``geometry``, ``dip_deg``, ``dip_dir_deg`` of the faults
        measured here and of every trace near enough to cross their profiles.
    fault_ids : tuple of int
        Faults whose stations in this tile are measured.
    tile : tuple
        (x0, y0, size_m, ix, iy): tile grid origin, tile size and index.
    dem_bounds : tuple
        (xmin, ymin, xmax, ymax) of the DEM, for clamping stations to tiles.
    """

    traces: Any
    fault_ids: tuple
    tile: tuple
    dem_bounds: tuple


def _tile_index(x, y, tile, dem_bounds):
    x0, y0, size, _, _ = tile
    xmin, ymin, xmax, ymax = dem_bounds
    xc = np.clip(x, xmin, xmax)
    yc = np.clip(y, ymin, ymax)
    ix = np.floor((xc - x0) / size).astype(np.int64)
    iy = np.floor((yc - y0) / size).astype(np.int64)
    nx = max(1, int(math.ceil((xmax - x0) / size)))
    ny = max(1, int(math.ceil((ymax - y0) / size)))
    return np.clip(ix, 0, nx - 1), np.clip(iy, 0, ny - 1)


def _side_signs_for(traces) -> np.ndarray:
    dd = traces["dip_dir_deg"].to_numpy(dtype=float) if "dip_dir_deg" in traces.columns else None
    return side_signs(traces.geometry.to_numpy(), dd)


def measure_batch(
    traces: gpd.GeoDataFrame, dem, params: ThrowParams, *, fault_ids=None, tile=None, dem_bounds=None
):
    """Measure the stations of some faults on one window of the DEM.

    A pure function of the trace geometries, the DEM (path and metadata),
    the tile and the parameters, so an engine may run batches anywhere and
    in any order.

    Parameters
    ----------
    traces : geopandas.GeoDataFrame
        ``fault_id``, geometry, ``dip_deg`` and ``dip_dir_deg`` (NaN where
        unknown) of the measured faults and of every trace that may cross
        their profiles.
    dem : faultmap.io.dem.Dem
        Lazy DEM (picklable: path and metadata only).
    params : ThrowParams
    fault_ids : sequence of int, optional
        Faults to measure (default: all in ``traces``).
    tile : tuple, optional
        (x0, y0, size_m, ix, iy): only stations falling in this tile (after
        clamping to the DEM) are measured.
    dem_bounds : tuple, optional
        DEM bounds used for clamping (default ``dem.bounds``).

    Returns
    -------
    stations : pandas.DataFrame
        Raw station results: ``fault_id``, ``dist_m``, ``x``, ``y``, ``nx``,
        ``ny`` (+ side normal) and the fields of :func:`measure_profiles`.
    warnings : list of str
    """
    warn: list[str] = []
    traces = traces.reset_index(drop=True)
    lines = traces.geometry.to_numpy()
    ids = traces["fault_id"].to_numpy()
    measure = np.ones(len(traces), dtype=bool) if fault_ids is None else np.isin(ids, np.asarray(fault_ids))
    side = _side_signs_for(traces)
    L = shapely.length(lines)
    mi = np.flatnonzero(measure)
    st = place_stations(
        lines[mi],
        spacing_m=params.spacing_for(L[mi]),
        normal_window_m=params.normal_window_m,
        side_sign=side[mi],
    )
    st = StationSet(mi[st.line], st.dist_m, st.x, st.y, st.nx, st.ny)
    bounds = dem.bounds if dem_bounds is None else dem_bounds
    if tile is not None:
        ix, iy = _tile_index(st.x, st.y, tile, bounds)
        st = st.take((ix == tile[3]) & (iy == tile[4]))
    n = len(st)
    if n == 0:
        return _raw_frame(st, ids, {k: np.zeros(0) for k in _RAW_COLUMNS}), warn
    H1 = params.half_length_for(L)[st.line]
    own_excl = max(0.5 * params.normal_window_m, 2.0 * params.scarp_halfwidth_m)
    cl = dict(line_ids=ids, own_exclusion_m=own_excl)
    lim_m, lim_p = crossing_limits(st, H1, lines, station_ids=ids[st.line], **cl)
    t = dem.transform
    box = (
        bounds[0] + 0.5 * abs(t.a),
        bounds[1] + 0.5 * abs(t.e),
        bounds[2] - 0.5 * abs(t.a),
        bounds[3] - 0.5 * abs(t.e),
    )
    # pass 1: one read for the batch (split only when it exceeds the memory budget)
    window = _read_for(dem, st, H1, params)
    res = _measure_on_window(dem, st, H1, lim_m, lim_p, params, box, window)
    if params.adaptive:
        wants = res["wants_m"]
        redo = np.flatnonzero((wants > 0) & (H1 < params.max_half_length_m))
        if redo.size:
            # pass 2: longer profiles where the scarp turned out broad; profiles still inside the
            # first window reuse it, the others are read together when that window is small, else
            # in spatial groups
            px = dem.pixel_size
            H2 = np.minimum(np.ceil(wants[redo] * 1.25 / (8 * px)) * 8 * px, params.max_half_length_m)
            H2 = np.maximum(H2, H1[redo])
            sr = st.take(redo)
            lm2, lp2 = crossing_limits(sr, H2, lines, station_ids=ids[sr.line], **cl)
            inside = np.zeros(redo.size, dtype=bool)
            if window is not None:
                wb = window[2]
                ex, ey = np.abs(sr.nx) * H2, np.abs(sr.ny) * H2
                inside = (
                    (sr.x - ex >= wb[0]) & (sr.y - ey >= wb[1]) & (sr.x + ex <= wb[2]) & (sr.y + ey <= wb[3])
                )
            grp = np.full(redo.size, -1, dtype=np.int64)
            out_i = np.flatnonzero(~inside)
            if out_i.size and _window_pixels(dem, _profile_bounds(sr.take(out_i), H2[out_i])) <= min(
                _SMALL_READ_PX, params.memory_budget_mb * 1e6 * 0.4 / 4.0
            ):
                grp[out_i] = 0  # one small read for all of them
            elif out_i.size:
                cell = 2.0 * float(np.max(H2[out_i]))
                gx = np.floor(sr.x[out_i] / cell).astype(np.int64)
                gy = np.floor(sr.y[out_i] / cell).astype(np.int64)
                _, g = np.unique(np.c_[gx, gy], axis=0, return_inverse=True)
                grp[out_i] = g.ravel()
            res2 = {k: np.empty(redo.size, dtype=res[k].dtype) for k in _RAW_COLUMNS}
            for gi in range(-1, int(grp.max()) + 1):
                sel = np.flatnonzero(grp == gi)
                if sel.size == 0:
                    continue
                r = _measure_on_window(
                    dem, sr.take(sel), H2[sel], lm2[sel], lp2[sel], params, box, window if gi < 0 else None
                )
                for k in _RAW_COLUMNS:
                    res2[k][sel] = r[k]
            taken = res["samples"][redo] + res2["samples"]
            for k in _RAW_COLUMNS:
                res[k][redo] = res2[k]
            res["samples"][redo] = taken
    return _raw_frame(st, ids, res), warn


def _profile_bounds(st: StationSet, H):
    ex = np.abs(st.nx) * H
    ey = np.abs(st.ny) * H
    return (
        float(np.min(st.x - ex)),
        float(np.min(st.y - ey)),
        float(np.max(st.x + ex)),
        float(np.max(st.y + ey)),
    )


def _window_pixels(dem, bnds) -> float:
    px = dem.pixel_size
    return ((bnds[2] - bnds[0]) / px + 8) * ((bnds[3] - bnds[1]) / px + 8)


def _read_for(dem, st: StationSet, H, params):
    """Read the window covering these profiles, or None when it exceeds the memory budget."""
    from faultmap.io.dem import read_window_array

    if len(st) == 0:
        return None
    bnds = _profile_bounds(st, np.asarray(H, dtype=float))
    if _window_pixels(dem, bnds) > params.memory_budget_mb * 1e6 * 0.4 / 4.0:
        return None
    arr, wt, _ = read_window_array(
        dem, bnds, pad_pixels=3, cache_mb=int(min(64, max(4, params.memory_budget_mb / 8)))
    )
    return (arr, wt, bnds)


def _measure_on_window(dem, st: StationSet, H, lim_m, lim_p, params, box, window=None):
    """Measure these stations on ``window`` (arr, transform, bounds) if it covers them, else read one."""
    H = np.asarray(H, dtype=float)
    bnds = _profile_bounds(st, H)
    if window is not None:
        wb = window[2]
        if not (bnds[0] >= wb[0] and bnds[1] >= wb[1] and bnds[2] <= wb[2] and bnds[3] <= wb[3]):
            window = None
    if window is None:
        if _window_pixels(dem, bnds) > params.memory_budget_mb * 1e6 * 0.4 / 4.0 and len(st) > 1:
            # split the stations spatially until each window fits the budget
            wide = (bnds[2] - bnds[0]) >= (bnds[3] - bnds[1])
            order = np.lexsort((st.y, st.x)) if wide else np.lexsort((st.x, st.y))
            half = len(st) // 2
            res = None
            for p in (order[:half], order[half:]):
                r = _measure_on_window(dem, st.take(p), H[p], lim_m[p], lim_p[p], params, box)
                if res is None:
                    res = {k: np.empty(len(st), dtype=v.dtype) for k, v in r.items()}
                for k in r:
                    res[k][p] = r[k]
            return res
        window = _read_for(dem, st, H, _unbounded(params))
    arr, wt, _ = window
    kt = _degradation_collector(len(st), params)
    if arr.size == 0:
        r = measure_profiles(
            np.full((2, 2), np.nan, dtype=_F32), dem.transform, st, H, lim_m, lim_p, params, raster_box=box
        )
        r["geo_status"][:] = "outside"
        return {**r, **{k: np.full(len(st), np.nan) for k in _KT_COLUMNS}}
    r = measure_profiles(arr, wt, st, H, lim_m, lim_p, params, raster_box=box, on_chunk=kt)
    return {**r, **(kt.result() if kt is not None else {k: np.full(len(st), np.nan) for k in _KT_COLUMNS})}


def _degradation_collector(n, params):
    """Return the scarp degradation fit on the same profiles (faultmap.scarps), or None when switched off."""
    if not getattr(params, "degradation", False):
        return None
    return DegradationCollector(
        n, step_m=params.sample_step_m, pixel_size_m=params.pixel_size_m, n_events=params.n_events
    )


def _unbounded(params):
    """Return the same parameters with no budget limit (for a single station's window)."""
    return replace(params, memory_budget_mb=float("inf"))


def _raw_frame(st: StationSet, ids, res) -> pd.DataFrame:
    df = pd.DataFrame(
        {
            "fault_id": np.asarray(ids)[st.line].astype(np.int64) if len(st) else np.zeros(0, dtype=np.int64),
            "dist_m": st.dist_m,
            "x": st.x,
            "y": st.y,
            "nx": st.nx,
            "ny": st.ny,
        }
    )
    for k in _RAW_COLUMNS:
        df[k] = res[k]
    return df


def min_batches_for(engine) -> int:
    """Fewest throw batches worth planning for an engine (results never depend on it).

    One batch for a sequential run; two per thread in-process (the tiles'
    windows overlap by a profile length, so more tiles read more of the
    DEM, while two per thread still balance uneven tiles); four per worker
    thread on Dask (the scheduler balances them over the workers).
    """
    if engine is None:
        return 1
    n = int(getattr(engine, "parallelism", 1))
    if n <= 1:
        return 1
    return (2 if getattr(engine, "kind", "in-process") == "in-process" else 4) * n


def plan_batches(
    faults: gpd.GeoDataFrame, dem, params: ThrowParams, *, min_batches: int = 1
) -> list[ThrowBatch]:
    """Split the work into spatial tiles that fit the memory budget.

    Stations are assigned to a grid of square tiles (clamped to the DEM);
    each tile's batch carries the faults whose trace meets the tile (the
    edge tiles reaching out beyond the DEM) plus every trace that can cross
    their profiles, and measures the stations in the tile. Tiles are sized so that one
    window (tile plus the longest profile on each side) holds under 40 % of
    ``memory_budget_mb`` as float32, and small enough that the DEM gives at
    least ``min_batches`` tiles (so that several workers have work; tiles are
    never under 64 pixels). Results do not depend on the tiling.

    Returns
    -------
    list of ThrowBatch
        In row-major tile order.
    """
    faults = faults.reset_index(drop=True)
    lines = faults.geometry.to_numpy()
    ids = faults["fault_id"].to_numpy()
    bounds = dem.bounds
    px = dem.pixel_size
    pad = params.max_half_length_m + 4 * px
    side_px = math.sqrt(params.memory_budget_mb * 1e6 * 0.4 / 4.0)
    size = max(64.0 * px, side_px * px - 2.0 * pad)
    xmin, ymin, xmax, ymax = bounds
    if min_batches > 1:
        per_side = math.ceil(math.sqrt(min_batches))
        size = min(size, max(64.0 * px, max(xmax - xmin, ymax - ymin) / per_side))
    # a tile grid no finer than needed: equal tiles covering the DEM
    ntx = max(1, int(math.ceil((xmax - xmin) / size)))
    nty = max(1, int(math.ceil((ymax - ymin) / size)))
    size = max((xmax - xmin) / ntx, (ymax - ymin) / nty)
    grid = (xmin, ymin, size)
    # faults whose trace meets a tile: a superset of those with stations in it (a batch keeps only
    # its tile's stations). Stations beyond the DEM are clamped into the edge tiles, so those tiles
    # reach out without limit (in practice 1e9 m) on their outer sides.
    far = 1e9
    tx_all, ty_all = np.meshgrid(np.arange(ntx), np.arange(nty))
    tx_all, ty_all = tx_all.ravel(), ty_all.ravel()
    bx0 = np.where(tx_all == 0, xmin - far, xmin + tx_all * size)
    bx1 = np.where(tx_all == ntx - 1, xmax + far, xmin + (tx_all + 1) * size)
    by0 = np.where(ty_all == 0, ymin - far, ymin + ty_all * size)
    by1 = np.where(ty_all == nty - 1, ymax + far, ymin + (ty_all + 1) * size)
    tree = shapely.STRtree(lines)
    ti, li = tree.query(shapely.box(bx0, by0, bx1, by1), predicate="intersects")
    key = ty_all[ti] * ntx + tx_all[ti]
    order = np.lexsort((li, key))
    key_s, line_s = key[order], li[order]
    # context: every trace within a profile length of a tile (bounding boxes), all tiles at once
    ci, cl = tree.query(
        shapely.box(
            xmin + tx_all * size - pad,
            ymin + ty_all * size - pad,
            xmin + (tx_all + 1) * size + pad,
            ymin + (ty_all + 1) * size + pad,
        )
    )
    ckey = ty_all[ci] * ntx + tx_all[ci]
    corder = np.argsort(ckey, kind="stable")
    ckey_s, cl_s = ckey[corder], cl[corder]
    base = faults[["fault_id", "geometry", "dip_deg", "dip_dir_deg"]]
    batches = []
    for k in np.unique(key_s):
        members = np.unique(line_s[key_s == k])
        tx, ty = int(k % ntx), int(k // ntx)
        a, b = np.searchsorted(ckey_s, [k, k + 1])
        keep = np.union1d(cl_s[a:b], members)
        sub = base.iloc[keep]
        batches.append(
            ThrowBatch(
                traces=sub,
                fault_ids=tuple(int(i) for i in ids[members]),
                tile=(*grid, tx, ty),
                dem_bounds=tuple(bounds),
            )
        )
    return batches


def run_batch(batch: ThrowBatch, dem, params: ThrowParams):
    """Run one :class:`ThrowBatch` (what an engine maps over batches)."""
    return measure_batch(
        batch.traces, dem, params, fault_ids=batch.fault_ids, tile=batch.tile, dem_bounds=batch.dem_bounds
    )
