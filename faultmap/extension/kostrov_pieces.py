"""Fault traces cut into straight pieces carrying heave, for Kostrov summation.

Pure functions; nothing here touches files. The pieces are what
:mod:`faultmap.extension.kostrov_sums` (grid, polygons) and
:mod:`faultmap.extension.kostrov_tiles` (the grid in tiles) add up; the cell
grid both use is fixed here too.

Main entry points
-----------------
:func:`fault_pieces`
    Every trace cut into short straight pieces carrying heave and their
    Kostrov weights (one vectorised pass; pieces are split at vertices,
    stations, tips and, for a grid, at every cell border).
"""

from __future__ import annotations

import warnings

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely

from faultmap.errors import FaultmapWarning, InputError, ParameterError
from faultmap.extension.fault_inputs import _check_faults, _check_rake, _ids, _rake_factor
from faultmap.extension.throw_profiles import throw_at

__all__ = ["fault_pieces"]


def _check_cell_size(cell_size_m: float) -> None:
    if cell_size_m is None or isinstance(cell_size_m, bool) or not np.isfinite(cell_size_m) or cell_size_m <= 0:
        raise ParameterError(f"cell_size_m must be a positive distance in m, got {cell_size_m!r}.")


def _check_piece(piece_length_m: float | None) -> None:
    if piece_length_m is not None and (not np.isfinite(piece_length_m) or piece_length_m <= 0):
        raise ParameterError(f"piece_length_m must be a positive distance in m, got {piece_length_m!r}.")


def _cell_grid(faults: gpd.GeoDataFrame, cell_size_m: float, *, keep_empty: bool, max_cells: int):
    """Fault ids and lines, and the cell grid over them: (fid, geoms, c, x0, y0, nx, ny).

    The origin is the lower-left bound of the traces floored to a multiple
    of the cell size ``c`` (m); ``nx`` by ``ny`` cells cover them.
    """
    c = float(cell_size_m)
    fid, geoms = _check_faults(faults)
    if len(geoms) == 0:
        raise InputError("faults layer is empty; nothing to sum.")
    xmin, ymin, xmax, ymax = shapely.total_bounds(geoms)
    x0, y0 = np.floor(xmin / c) * c, np.floor(ymin / c) * c
    nx = int(np.floor((xmax - x0) / c)) + 1
    ny = int(np.floor((ymax - y0) / c)) + 1
    if keep_empty and nx * ny > max_cells:
        raise ParameterError(f"cell_size_m {c:g} m gives {nx * ny} cells (limit {max_cells}); use larger cells.")
    return fid, geoms, c, x0, y0, nx, ny


def _grid_breaks(
    p0: np.ndarray, p1: np.ndarray, seg_f: np.ndarray, seg_d0: np.ndarray, seg_len: np.ndarray,
    origin: np.ndarray, cell: float,
) -> tuple[np.ndarray, np.ndarray]:
    """Distances along faults where segments cross grid lines x = X0 + k c and y = Y0 + k c."""
    fs, ds = [], []
    for axis in (0, 1):
        a0, a1 = p0[:, axis] - origin[axis], p1[:, axis] - origin[axis]
        lo = np.ceil(np.minimum(a0, a1) / cell)
        hi = np.floor(np.maximum(a0, a1) / cell)
        moving = a1 != a0
        cnt = np.where(moving, np.maximum(hi - lo + 1, 0), 0).astype(np.int64)
        if cnt.sum() == 0:
            continue
        seg = np.repeat(np.arange(len(a0)), cnt)
        k = lo[seg] + (np.arange(cnt.sum()) - np.repeat(np.cumsum(cnt) - cnt, cnt))
        t = (k * cell - a0[seg]) / (a1[seg] - a0[seg])
        fs.append(seg_f[seg])
        ds.append(seg_d0[seg] + np.clip(t, 0.0, 1.0) * seg_len[seg])
    if not fs:
        return np.zeros(0, dtype=np.int64), np.zeros(0)
    return np.concatenate(fs), np.concatenate(ds)


def fault_pieces(
    faults: gpd.GeoDataFrame,
    stations: gpd.GeoDataFrame | None = None,
    *,
    piece_length_m: float | None = None,
    grid_origin: tuple[float, float] | None = None,
    cell_size_m: float | None = None,
    rake_deg: float | None = None,
    default_dip_deg: float = 60.0,
) -> pd.DataFrame:
    """Cut every trace into straight pieces carrying heave and their Kostrov weights.

    Parameters
    ----------
    faults : geopandas.GeoDataFrame
        Fault traces with ``fault_id``, ``dip_deg``, ``dip_dir_deg`` (NaN:
        the local trace normal is used, which gives the same dyad m m), and
        ``max_throw_m`` for faults without ok stations; optional ``rake_deg``.
    stations : geopandas.GeoDataFrame, optional
        Throw stations (see :func:`faultmap.extension.throw_profiles.throw_at`).
    piece_length_m : float, optional
        Longest piece, m. Pieces are also split at every vertex and station,
        at both tips and (with ``cell_size_m``) at every cell border.
    grid_origin : (float, float), optional
        Lower-left corner of the grid, m (with ``cell_size_m``).
    cell_size_m : float, optional
        Grid cell size, m: pieces are split where traces cross cell borders,
        so each piece lies inside one cell.
    rake_deg : float, optional
        Rake of all faults (Aki & Richards, -90 = dip slip); default the
        faults' ``rake_deg`` column, else -90.
    default_dip_deg : float
        Dip used where ``dip_deg`` is NaN.

    Returns
    -------
    pandas.DataFrame
        One row per piece: ``fault_pos`` (position in ``faults``),
        ``fault_id``, ``x_m``, ``y_m`` (midpoint), ``length_m``, ``throw_m``,
        ``heave_m``, ``dip_source`` and ``mxx``, ``myy``, ``mxy`` (the piece's
        horizontal moment L h (m m) plus the symmetric strike-slip part,
        m^2). Pieces without a known throw are dropped (with a warning).

    Notes
    -----
    Throw is piecewise linear between stations (and the tips), and every
    station is a break point, so the midpoint rule over pieces integrates
    the heave profile exactly. Map-view Kostrov weights (Kostrov 1974;
    map-view form derived in ``docs/methods/extension.md``): a dip-slip
    fault of heave h over length L contributes L h (m m), m the unit
    dip-direction vector (E, N); a rake adds L ss (m s + s m) / 2 with
    ss = T cos(rake) / (|sin(rake)| sin(dip)) the horizontal strike-slip,
    s the strike unit vector.
    """
    _check_piece(piece_length_m)
    fid, geoms = _check_faults(faults)
    nf = len(geoms)
    cols = ["fault_pos", "fault_id", "x_m", "y_m", "length_m", "throw_m", "heave_m", "dip_source", "mxx", "myy", "mxy"]
    if nf == 0:
        return pd.DataFrame({c: [] for c in cols})
    length = shapely.length(geoms)
    xy, vf = shapely.get_coordinates(geoms, return_index=True)
    same = vf[1:] == vf[:-1]
    p0, p1, seg_f = xy[:-1][same], xy[1:][same], vf[:-1][same]
    seg_len = np.hypot(*(p1 - p0).T)
    cum = np.cumsum(seg_len)
    seg_counts = np.bincount(seg_f, minlength=nf)
    before = np.r_[0.0, cum][np.cumsum(seg_counts) - seg_counts]
    seg_d0 = cum - seg_len - np.repeat(before, seg_counts)

    gap = 1.0 + 1e-3 * length.max()
    off = np.r_[0.0, np.cumsum(length + gap)[:-1]]
    # vertex keys on the common axis (for midpoint interpolation)
    v_f = np.r_[seg_f, np.arange(nf)]
    v_d = np.r_[seg_d0, length]
    v_x = np.r_[p0[:, 0], p1[np.cumsum(seg_counts) - 1][:, 0]] if len(p0) else np.zeros(0)
    v_y = np.r_[p0[:, 1], p1[np.cumsum(seg_counts) - 1][:, 1]] if len(p0) else np.zeros(0)
    vkey = off[v_f] + v_d
    o = np.argsort(vkey, kind="stable")
    vkey, v_x, v_y = vkey[o], v_x[o], v_y[o]

    bf = [v_f, np.arange(nf)]
    bd = [v_d, np.zeros(nf)]
    if stations is not None and len(stations) and "dist_m" in stations.columns:
        sp = pd.Index(fid).get_indexer(stations["fault_id"].to_numpy())
        sd = stations["dist_m"].to_numpy(dtype=float)
        okk = (sp >= 0) & np.isfinite(sd)
        bf.append(sp[okk])
        bd.append(np.clip(sd[okk], 0.0, length[sp[okk]]))
    if cell_size_m is not None:
        gf, gd = _grid_breaks(p0, p1, seg_f, seg_d0, seg_len, np.asarray(grid_origin, dtype=float), float(cell_size_m))
        bf.append(gf)
        bd.append(gd)
    if piece_length_m is not None:
        cnt = np.floor(length / piece_length_m).astype(np.int64)
        tot = int(cnt.sum())
        if tot > 50_000_000:
            raise ParameterError(f"piece_length_m {piece_length_m:g} m gives {tot} pieces; use a longer piece.")
        ff = np.repeat(np.arange(nf), cnt)
        kk = np.arange(tot) - np.repeat(np.cumsum(cnt) - cnt, cnt) + 1
        bf.append(ff)
        bd.append(kk * piece_length_m)
    bf = np.concatenate(bf).astype(np.int64)
    bd = np.concatenate(bd)
    key = off[bf] + bd
    o = np.argsort(key, kind="stable")
    key, bf = key[o], bf[o]
    tol = 1e-9 * max(length.max(), 1.0)
    a, b = key[:-1], key[1:]
    use = (bf[:-1] == bf[1:]) & (b - a > tol)
    pf = bf[:-1][use]
    pa, pb = a[use] - off[pf], b[use] - off[pf]
    plen = pb - pa
    dmid = 0.5 * (pa + pb)
    kmid = off[pf] + dmid
    x = np.interp(kmid, vkey, v_x)
    y = np.interp(kmid, vkey, v_y)

    throw, _, tsrc = throw_at(faults, stations, pf, dmid)
    dip_f = faults["dip_deg"].to_numpy(dtype=float)
    dsrc_f = (
        faults["dip_source"].astype(str).to_numpy()
        if "dip_source" in faults.columns
        else np.full(nf, "default", dtype=object)
    )
    dsrc_f = np.where(np.isfinite(dip_f), dsrc_f, "default").astype(object)
    dip_f = np.where(np.isfinite(dip_f), dip_f, default_dip_deg)
    bad = (dip_f <= 0) | (dip_f > 90)
    if bad.any():
        raise InputError(f"fault {_ids(fid[bad])}: dip_deg outside (0, 90]; fix the dip attribute.")
    dr = np.radians(dip_f[pf])
    heave = throw / np.tan(dr)

    dd_f = faults["dip_dir_deg"].to_numpy(dtype=float) if "dip_dir_deg" in faults.columns else np.full(nf, np.nan)
    dd = dd_f[pf]
    known = np.isfinite(dd)
    if (~known).any():
        # local trace normal: the segment holding the midpoint (sign irrelevant for m m)
        si = np.clip(np.searchsorted(vkey, kmid) - 1, 0, len(vkey) - 2)
        dx, dy = v_x[si + 1] - v_x[si], v_y[si + 1] - v_y[si]
        dd = dd.copy()
        dd[~known] = (np.degrees(np.arctan2(dx, dy))[~known] + 90.0) % 360.0
    rake_f = (
        faults["rake_deg"].to_numpy(dtype=float) if (rake_deg is None and "rake_deg" in faults.columns)
        else np.full(nf, np.nan if rake_deg is None else float(rake_deg))
    )
    _check_rake(rake_f, "rake_deg")
    rake_f = np.where(np.isfinite(rake_f), rake_f, -90.0)
    k = np.where(known, _rake_factor(rake_f[pf]), 0.0)
    mr = np.radians(dd)
    mE, mN = np.sin(mr), np.cos(mr)
    sE, sN = -np.cos(mr), np.sin(mr)  # strike = dip direction - 90
    w = plen * heave
    ss = plen * throw * k / np.sin(dr)
    mxx = w * mE * mE + ss * mE * sE
    myy = w * mN * mN + ss * mN * sN
    mxy = w * mE * mN + 0.5 * ss * (mE * sN + mN * sE)

    good = np.isfinite(w) & np.isfinite(ss)
    if (~good).any():
        warnings.warn(
            f"fault {_ids(np.unique(fid[pf[~good]]))}: no throw known (no ok station and no max_throw_m); "
            "left out of the strain sums. Run the throw tool on these faults.",
            FaultmapWarning,
            stacklevel=3,
        )
    return pd.DataFrame(
        {
            "fault_pos": pf[good],
            "fault_id": fid[pf[good]],
            "x_m": x[good],
            "y_m": y[good],
            "length_m": plen[good],
            "throw_m": throw[good],
            "heave_m": heave[good],
            "dip_source": dsrc_f[pf[good]],
            "throw_source": tsrc[good],
            "mxx": mxx[good],
            "myy": myy[good],
            "mxy": mxy[good],
        }
    )


def _default_flags(pieces: pd.DataFrame, pos: np.ndarray, fp: np.ndarray, pair: np.ndarray, nf: int) -> np.ndarray:
    """1.0 for each unique (cell, fault) pair whose fault has a default dip."""
    if len(pair) == 0:
        return np.zeros(0)
    is_default = np.zeros(nf, dtype=bool)
    is_default[fp] = pieces["dip_source"].to_numpy() != "attribute"
    return is_default[pair % (nf + 1)].astype(float)
