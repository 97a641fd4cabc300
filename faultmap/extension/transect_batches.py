"""Transects measured in independent batches by the run's engine.

:func:`~faultmap.extension.transect_measure.measure_transects` split so that
batches can run anywhere (threads, processes, a cluster) and give the same
result whatever the batch size: what depends on the whole layer is fixed once,
each transect carries only the traces that can touch it and its own random
stream. Nothing here touches files.

Main entry points
-----------------
:class:`TransectBatch`
    Some transects and the traces that can touch them.
:func:`plan_transect_batches`
    The layer split into batches.
:func:`transect_seed`
    Seed of one transect's random stream.
:func:`measure_transect_batch`
    One batch measured (what an engine maps over batches).
:func:`gather_transect_batches`, :func:`merge_messages`
    The batches' results assembled, their warnings merged.
"""

from __future__ import annotations

import re
import threading
import warnings
from dataclasses import dataclass
from typing import Any

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely

from faultmap.errors import ParameterError
from faultmap.extension.fault_inputs import _check_faults, _col, _in_faults_crs
from faultmap.extension.throw_profiles import throw_at
from faultmap.extension.transect_geometry import _crossing_positions, _end_rays, _transect_lines
from faultmap.extension.transect_measure import _validate_params, measure_transects

__all__ = [
    "TransectBatch",
    "plan_transect_batches",
    "transect_seed",
    "measure_transect_batch",
    "gather_transect_batches",
    "merge_messages",
]


#: Columns of the faults layer the transect sums need (others are not sent to workers).
_BATCH_FAULT_COLS = (
    "fault_id", "dip_deg", "dip_source", "dip_dir_deg", "dip_dir_source", "rake_deg", "max_throw_m",
    "max_throw_err_m", "max_throw_dist_m", "dip_min_deg", "dip_max_deg",
)
_BATCH_STATION_COLS = ("fault_id", "dist_m", "throw_m", "throw_err_m", "status")
_CAPTURE_LOCK = threading.Lock()
_MSG = re.compile(r"^(transect|fault) (.+?): (.+)$", re.S)


@dataclass(frozen=True)
class TransectBatch:
    """Some transects and the traces that can touch them: one independent unit of work.

    Attributes
    ----------
    faults : geopandas.GeoDataFrame
        Traces crossing these transects or lying beyond their ends along
        their end segments (only the columns the sums need).
    stations : pandas.DataFrame or None
        Throw stations of those traces.
    transects : geopandas.GeoDataFrame
        The transects (``transect_id`` set, in the faults' CRS).
    positions : tuple of int
        Position of each transect in the whole layer (its random stream).
    fault_ids : tuple of tuple
        Per transect, the fault ids that can touch it.
    options : dict
        Keyword options of :func:`measure_transects` (with ``margin_m`` and
        ``d_max_m`` fixed for the whole layer, and the layer's ``seed``).
    """

    faults: Any
    stations: Any
    transects: Any
    positions: tuple
    fault_ids: tuple
    options: dict


def plan_transect_batches(
    faults: gpd.GeoDataFrame,
    stations: gpd.GeoDataFrame | None,
    transects: gpd.GeoDataFrame,
    *,
    batch_size: int = 16,
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
) -> list[TransectBatch]:
    """Split :func:`measure_transects` into independent batches of transects.

    What depends on the whole layer is fixed here, once: the default margin
    (half the median spacing of neighbouring crossings over all transects),
    the largest throw of the population (``d_max_m``), the transect ids.
    Each transect then gets the traces that can touch it (those it crosses
    and those beyond its ends, for the ``ends_inside`` flag) and its own
    random stream, seeded from ``seed`` and its position in the layer, so a
    transect's result does not depend on the batch it falls in.

    Parameters
    ----------
    faults, stations, transects
        As for :func:`measure_transects`.
    batch_size : int
        Transects per batch (>= 1).
    zone, margin_m, rake_deg, default_dip_deg, dip_range_default_deg, dip_range_attribute_deg, n_draws, seed,
    detection_throw_m, exponent_c, d_min_m, d_max_m, reproject
        As for :func:`measure_transects`.

    Returns
    -------
    list of TransectBatch
        In transect order; run each with :func:`measure_transect_batch` and
        assemble with :func:`gather_transect_batches`.

    Notes
    -----
    Same method as :func:`measure_transects` (heave summation; Monte Carlo
    over dips and throws; Marrett & Allmendinger 1992 correction). The
    random draws differ from one call of :func:`measure_transects` on the
    whole layer (each transect has its own stream), not their distribution.
    """
    _validate_params(
        zone, margin_m, n_draws, seed, dip_range_default_deg, dip_range_attribute_deg,
        default_dip_deg, rake_deg, d_min_m,
    )
    if isinstance(batch_size, bool) or int(batch_size) != batch_size or batch_size < 1:
        raise ParameterError(f"batch_size must be a whole number >= 1, got {batch_size!r}.")
    fid, fgeoms = _check_faults(faults)
    transects = _in_faults_crs(transects, faults, "transects", "LineStrings", reproject=reproject)
    tr, tid, tgeoms, tlen = _transect_lines(transects)
    nt = len(tgeoms)
    if nt == 0:
        return []
    crossings = None
    if margin_m is None and zone == "faulted":
        crossings = _crossing_positions(tgeoms, fgeoms)
        ti, _, t_pos, _ = crossings
        gaps = np.diff(t_pos)[ti[1:] == ti[:-1]] if len(ti) > 1 else np.zeros(0)
        gaps = gaps[gaps > 0]
        margin_m = 0.5 * float(np.median(gaps)) if gaps.size else 0.0
    if d_max_m is None and detection_throw_m is not None and exponent_c is not None and np.isfinite(detection_throw_m):
        mt = _col(faults, "max_throw_m", np.nan)
        if np.isfinite(mt).any():
            d_max_m = float(np.nanmax(mt))
        else:
            if crossings is None:
                crossings = _crossing_positions(tgeoms, fgeoms)
            _, fi, _, parts = crossings
            f_dist = shapely.line_locate_point(fgeoms[fi], parts)
            throw = throw_at(faults, stations, fi, f_dist)[0] if len(fi) else np.zeros(0)
            d_max_m = float(np.nanmax(throw)) if np.isfinite(throw).any() else np.nan
    # traces that can touch each transect: crossed, or beyond an end along the end segment
    fcols = [k for k in _BATCH_FAULT_COLS if k in faults.columns]
    f = gpd.GeoDataFrame(faults[fcols + [faults.geometry.name]], geometry=faults.geometry.name, crs=faults.crs)
    f = f.reset_index(drop=True)
    touch: list[np.ndarray] = [np.zeros(0, dtype=np.int64)] * nt
    if len(fgeoms):
        b = np.vstack([shapely.total_bounds(fgeoms), shapely.total_bounds(tgeoms)])
        reach = 2.0 * np.hypot(b[:, 2].max() - b[:, 0].min(), b[:, 3].max() - b[:, 1].min()) + 1.0
        rs, re_ = _end_rays(tgeoms, reach)
        tree = shapely.STRtree(fgeoms)
        qs = [tree.query(g, predicate="intersects") for g in (tgeoms, rs, re_)]
        qt = np.concatenate([q[0] for q in qs])
        qf = np.concatenate([q[1] for q in qs])
        pairs = np.unique(np.c_[qt, qf], axis=0) if len(qt) else np.zeros((0, 2), dtype=np.int64)
        starts = np.searchsorted(pairs[:, 0], np.arange(nt + 1))
        touch = [pairs[starts[k]:starts[k + 1], 1] for k in range(nt)]
    st = None
    if stations is not None and len(stations):
        scols = [k for k in _BATCH_STATION_COLS if k in stations.columns]
        st = pd.DataFrame(stations[scols]) if "dist_m" in stations.columns else stations[scols + [stations.geometry.name]]
    options = dict(
        zone=zone, margin_m=margin_m, rake_deg=rake_deg, default_dip_deg=default_dip_deg,
        dip_range_default_deg=dip_range_default_deg, dip_range_attribute_deg=dip_range_attribute_deg,
        n_draws=int(n_draws), seed=int(seed), detection_throw_m=detection_throw_m, exponent_c=exponent_c,
        d_min_m=d_min_m, d_max_m=d_max_m,
    )
    batches = []
    for s in range(0, nt, int(batch_size)):
        ks = np.arange(s, min(s + int(batch_size), nt))
        rows = np.unique(np.concatenate([touch[k] for k in ks])).astype(np.int64)
        sub = f.iloc[rows].reset_index(drop=True)
        sst = None
        if st is not None:
            sst = st[np.isin(st["fault_id"].to_numpy(), sub["fault_id"].to_numpy())].reset_index(drop=True)
        batches.append(
            TransectBatch(
                faults=sub,
                stations=sst,
                transects=tr.iloc[ks],
                positions=tuple(int(k) for k in ks),
                fault_ids=tuple(tuple(fid[touch[k]].tolist()) for k in ks),
                options=options,
            )
        )
    return batches


def transect_seed(seed: int, position: int) -> int:
    """Seed of one transect's random stream: from the layer's seed and the transect's position.

    Uses :class:`numpy.random.SeedSequence` (independent, reproducible
    streams from (seed, position); numpy's documented way to spawn streams).
    """
    return int(np.random.SeedSequence([int(seed), int(position)]).generate_state(1, dtype=np.uint32)[0])


def measure_transect_batch(batch: TransectBatch) -> tuple[gpd.GeoDataFrame, gpd.GeoDataFrame, list[str]]:
    """Measure one :class:`TransectBatch` (what an engine maps over batches).

    Each transect is measured by :func:`measure_transects` with only the
    traces that can touch it and its own seed (:func:`transect_seed`).

    Returns
    -------
    transects, crossings : geopandas.GeoDataFrame
        As :func:`measure_transects` returns them, for these transects.
    messages : list of str
        Warnings raised while measuring (one transect at a time); merge them
        with :func:`gather_transect_batches`.
    """
    from faultmap.errors import FaultmapWarning as _W

    opts = dict(batch.options)
    seed = opts.pop("seed")
    fids = batch.faults["fault_id"].to_numpy()
    sfid = batch.stations["fault_id"].to_numpy() if batch.stations is not None else None
    touts, couts, msgs = [], [], []
    with _CAPTURE_LOCK:  # warnings state is process-wide: one batch at a time records it
        for k in range(len(batch.transects)):
            ids = np.asarray(batch.fault_ids[k])
            fsub = batch.faults[np.isin(fids, ids)]
            ssub = batch.stations[np.isin(sfid, ids)] if batch.stations is not None else None
            with warnings.catch_warnings(record=True) as caught:
                warnings.simplefilter("always", _W)
                t, c = measure_transects(
                    fsub, ssub, batch.transects.iloc[[k]], seed=transect_seed(seed, batch.positions[k]), **opts
                )
            touts.append(t)
            couts.append(c)
            for w in caught:
                if issubclass(w.category, _W):
                    msgs.append(str(w.message))
                else:
                    warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    return _concat_frames(touts, ignore_index=False), _concat_frames(couts, ignore_index=True), msgs


def _concat_frames(frames: list, *, ignore_index: bool) -> gpd.GeoDataFrame:
    """Concatenate GeoDataFrames, skipping empty ones (keeps the schema of the first)."""
    if not frames:
        return gpd.GeoDataFrame()
    full = [f for f in frames if len(f)]
    if not full:
        return frames[0]
    if len(full) == 1:
        out = full[0]
        return out.reset_index(drop=True) if ignore_index else out
    out = pd.concat(full, ignore_index=ignore_index)
    return gpd.GeoDataFrame(out, geometry=full[0].geometry.name, crs=full[0].crs)


def _merge_ids(texts: list[str], numeric_sort: bool) -> str:
    ids: list[str] = []
    extra = 0
    for t in texts:
        m = re.match(r"^(.*) and (\d+) more$", t)
        if m:
            t, n = m.group(1), int(m.group(2))
            extra += n
        for v in t.split(", "):
            if v not in ids:
                ids.append(v)
    if numeric_sort:
        try:
            ids = sorted(ids, key=float)
        except ValueError:
            pass
    more = len(ids) - 10 + extra
    return ", ".join(ids[:10]) + (f" and {more} more" if more > 0 else "")


def merge_messages(messages: list[str]) -> list[str]:
    """Merge per-transect warnings into one line per kind (``transect 1, 4: ...``).

    Messages naming transects or faults with the same text after the ids are
    joined (transect ids in order, fault ids sorted); other messages are kept
    once, in order.
    """
    groups: dict = {}
    order: list = []
    for m in messages:
        hit = _MSG.match(m)
        key = (hit.group(1), hit.group(3)) if hit else ("", m)
        if key not in groups:
            groups[key] = []
            order.append(key)
        if hit:
            groups[key].append(hit.group(2))
    out = []
    for key in order:
        kind, rest = key
        if not kind:
            out.append(rest)
        else:
            out.append(f"{kind} {_merge_ids(groups[key], numeric_sort=kind == 'fault')}: {rest}")
    return out


def gather_transect_batches(
    outs: list[tuple[gpd.GeoDataFrame, gpd.GeoDataFrame, list[str]]],
) -> tuple[gpd.GeoDataFrame, gpd.GeoDataFrame, list[str]]:
    """Assemble :func:`measure_transect_batch` results given in batch order.

    Returns
    -------
    transects, crossings : geopandas.GeoDataFrame
        In transect order (crossings sorted along each transect).
    messages : list of str
        Merged warnings (:func:`merge_messages`).
    """
    if not outs:
        return gpd.GeoDataFrame(), gpd.GeoDataFrame(), []
    t = _concat_frames([o[0] for o in outs], ignore_index=False)
    c = _concat_frames([o[1] for o in outs], ignore_index=True)
    return t, c, merge_messages([m for o in outs for m in o[2]])
