"""Horizontal strain from fault heaves by Kostrov summation.

Pure functions: GeoDataFrames in, GeoDataFrames out; nothing here touches
files. The tool wrapper is ``faultmap/extension/strain_tool.py``.

Main entry points
-----------------
:func:`fault_pieces`
    Every trace cut into short straight pieces carrying heave (one
    vectorised pass; pieces are split at vertices, stations, tips and,
    for a grid, at every cell border).
:func:`kostrov_grid`
    Strain tensors on a regular grid of square cells.
:func:`kostrov_polygons`
    Strain tensors in user polygons.
:func:`fault_moment_sum`
    The same sum from the faults' along-strike heave integrals (the check
    route: area-weighted cell tensors must add up to it).
:func:`principal_strains`
    Principal values and azimuth of 2-D symmetric tensors.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from typing import Any

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely

from faultmap.errors import FaultmapWarning, GeometryError, InputError, ParameterError
from faultmap.extension.transect_measure import (
    _check_faults,
    _check_rake,
    _ids,
    _in_faults_crs,
    _rake_factor,
    throw_at,
)

__all__ = [
    "principal_strains",
    "fault_pieces",
    "kostrov_grid",
    "kostrov_polygons",
    "fault_moment_sum",
    "whole_area_strain",
    "KostrovTile",
    "faults_with_throw",
    "plan_kostrov_tiles",
    "kostrov_tile",
    "gather_kostrov_tiles",
]

_TENSOR_COLS = ("exx", "eyy", "exy", "e1", "e2", "e1_azimuth_deg", "ezz")


def principal_strains(
    exx: np.ndarray, eyy: np.ndarray, exy: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Principal values, azimuth of the most extensional axis, and vertical strain.

    Parameters
    ----------
    exx, eyy, exy : array_like
        Components of symmetric horizontal strain tensors in (E, N)
        coordinates, extension positive (dimensionless).

    Returns
    -------
    e1, e2 : numpy.ndarray
        Most and least extensional principal strains (e1 >= e2).
    e1_azimuth_deg : numpy.ndarray
        Azimuth of the e1 axis, degrees clockwise from grid north, [0, 180);
        NaN where the tensor is isotropic (e1 == e2).
    ezz : numpy.ndarray
        Vertical strain from volume conservation, -(exx + eyy).

    Notes
    -----
    Eigenvalues of a 2x2 symmetric tensor: mean +- sqrt(((exx - eyy)/2)^2 +
    exy^2); the e1 axis makes the angle 0.5 atan2(2 exy, exx - eyy) with
    east, counter-clockwise (standard linear algebra). Azimuth = 90 deg
    minus that angle.
    """
    exx, eyy, exy = (np.asarray(a, dtype=float) for a in (exx, eyy, exy))
    mean = 0.5 * (exx + eyy)
    rad = np.hypot(0.5 * (exx - eyy), exy)
    e1, e2 = mean + rad, mean - rad
    theta = 0.5 * np.arctan2(2.0 * exy, exx - eyy)
    az = (90.0 - np.degrees(theta)) % 180.0
    scale = np.maximum(np.abs(e1), np.abs(e2))
    az = np.where(rad > 1e-12 * np.where(scale > 0, scale, 1.0), az, np.nan)
    return e1, e2, az, -(exx + eyy)


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
        Throw stations (see :func:`faultmap.extension.transects.throw_at`).
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
    the heave profile exactly. Map-view Kostrov weights (methods.md,
    derived from Kostrov 1974): a dip-slip fault of heave h over length L
    contributes L h (m m), m the unit dip-direction vector (E, N); a rake
    adds L ss (m s + s m) / 2 with ss = T cos(rake) / (|sin(rake)| sin(dip))
    the horizontal strike-slip, s the strike unit vector.
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


def _tensor_frame(mxx: np.ndarray, myy: np.ndarray, mxy: np.ndarray, area: np.ndarray) -> dict[str, np.ndarray]:
    with np.errstate(divide="ignore", invalid="ignore"):
        exx, eyy, exy = mxx / area, myy / area, mxy / area
    e1, e2, az, ezz = principal_strains(exx, eyy, exy)
    return {"exx": exx, "eyy": eyy, "exy": exy, "e1": e1, "e2": e2, "e1_azimuth_deg": az, "ezz": ezz}


def _summary(pieces: pd.DataFrame, mask: np.ndarray, area_m2: float) -> dict[str, float]:
    m = [float(pieces[c].to_numpy()[mask].sum()) for c in ("mxx", "myy", "mxy")]
    t = _tensor_frame(*(np.array([v]) for v in m), np.array([area_m2]))
    out = {k: float(v[0]) for k, v in t.items()}
    out.update(
        area_m2=float(area_m2),
        n_faults=int(np.unique(pieces["fault_id"].to_numpy()[mask]).size),
        moment_xx_m2=m[0],
        moment_yy_m2=m[1],
        moment_xy_m2=m[2],
    )
    return out


def kostrov_grid(
    faults: gpd.GeoDataFrame,
    stations: gpd.GeoDataFrame | None = None,
    *,
    cell_size_m: float,
    keep_empty: bool = False,
    piece_length_m: float | None = None,
    rake_deg: float | None = None,
    default_dip_deg: float = 60.0,
    max_cells: int = 4_000_000,
) -> tuple[gpd.GeoDataFrame, dict[str, float]]:
    """Horizontal strain tensors on a regular grid by Kostrov summation.

    Parameters
    ----------
    faults, stations : geopandas.GeoDataFrame
        As for :func:`fault_pieces`.
    cell_size_m : float
        Side of the square cells, m (> 0). The grid origin is aligned to
        multiples of the cell size, so runs on overlapping areas share cells.
    keep_empty : bool
        Keep cells without faults (zero strain) instead of leaving them out.
    piece_length_m : float, optional
        Longest piece, m (default cell_size_m / 10; only matters for the
        curved fallback throw profile, since pieces are clipped exactly at
        cell borders).
    rake_deg, default_dip_deg
        As for :func:`fault_pieces`.
    max_cells : int
        Safety limit on the number of grid cells (with ``keep_empty``) or
        occupied cells.

    Returns
    -------
    cells : geopandas.GeoDataFrame
        Square Polygons with ``cell_id``, ``col``, ``row``, ``area_m2``,
        ``exx``, ``eyy``, ``exy``, ``e1``, ``e2``, ``e1_azimuth_deg``,
        ``ezz``, ``n_faults``, ``n_default_dip`` (faults with a default dip)
        and ``sum_lh_m2`` (sum of piece length times heave).
    whole : dict
        Whole-area tensor: the moment of all pieces divided by the total area
        of the returned cells (``area_m2``), with the same keys plus
        ``n_faults`` and ``moment_xx_m2``, ``moment_yy_m2``, ``moment_xy_m2``.

    Raises
    ------
    ParameterError
        Non-positive cell size, or too many cells.

    Notes
    -----
    eps = (1/A) sum_k L_k h_k (m_k m_k), the map-view form of Kostrov
    (1974) summation for dip-slip faults through a layer (derived in
    methods.md; the layer thickness cancels), m the unit dip-direction
    vector (E, N); ezz = -(exx + eyy) from volume conservation. Each trace
    is split where it crosses a cell border, so every piece lies in one cell
    and sum_cells A_c eps_c equals the sum over faults of the along-strike
    heave integral times m m (checked by :func:`fault_moment_sum`). Cells
    are assigned by integer arithmetic on piece midpoints in one pass.
    """
    _check_cell_size(cell_size_m)
    _check_piece(piece_length_m)
    fid, geoms, c, x0, y0, nx, ny = _cell_grid(faults, cell_size_m, keep_empty=keep_empty, max_cells=max_cells)
    pieces = fault_pieces(
        faults, stations, piece_length_m=piece_length_m if piece_length_m is not None else c / 10.0,
        grid_origin=(x0, y0), cell_size_m=c, rake_deg=rake_deg, default_dip_deg=default_dip_deg,
    )
    ix = np.clip(np.floor((pieces["x_m"].to_numpy() - x0) / c).astype(np.int64), 0, nx - 1)
    iy = np.clip(np.floor((pieces["y_m"].to_numpy() - y0) / c).astype(np.int64), 0, ny - 1)
    key = iy * nx + ix
    ncell = nx * ny
    cells_k = np.arange(ncell) if keep_empty else np.unique(key)
    if len(cells_k) > max_cells:
        raise ParameterError(f"cell_size_m {c:g} m gives {len(cells_k)} cells (limit {max_cells}); use larger cells.")
    pos = np.searchsorted(cells_k, key)
    n = len(cells_k)
    sums = {col: np.bincount(pos, weights=pieces[col].to_numpy(), minlength=n) for col in ("mxx", "myy", "mxy")}
    lh = np.bincount(pos, weights=(pieces["length_m"] * pieces["heave_m"]).to_numpy(), minlength=n)
    fp = pieces["fault_pos"].to_numpy().astype(np.int64)
    pair = np.unique(pos * (len(geoms) + 1) + fp)
    pair_cell = pair // (len(geoms) + 1)
    n_faults = np.bincount(pair_cell, minlength=n)
    n_default = np.bincount(pair_cell, weights=_default_flags(pieces, pos, fp, pair, len(geoms)), minlength=n).astype(int)
    col, row = cells_k % nx, cells_k // nx
    area = np.full(n, c * c)
    polys = shapely.box(x0 + col * c, y0 + row * c, x0 + (col + 1) * c, y0 + (row + 1) * c)
    data = {"cell_id": cells_k + 1, "col": col, "row": row, "area_m2": area}
    data.update(_tensor_frame(sums["mxx"], sums["myy"], sums["mxy"], area))
    data.update(n_faults=n_faults, n_default_dip=n_default, sum_lh_m2=lh)
    cells = gpd.GeoDataFrame(data, geometry=polys, crs=faults.crs)
    whole = _summary(pieces, np.ones(len(pieces), dtype=bool), float(area.sum()))
    return cells, whole


def _default_flags(pieces: pd.DataFrame, pos: np.ndarray, fp: np.ndarray, pair: np.ndarray, nf: int) -> np.ndarray:
    """1.0 for each unique (cell, fault) pair whose fault has a default dip."""
    if len(pair) == 0:
        return np.zeros(0)
    is_default = np.zeros(nf, dtype=bool)
    is_default[fp] = pieces["dip_source"].to_numpy() != "attribute"
    return is_default[pair % (nf + 1)].astype(float)


def kostrov_polygons(
    faults: gpd.GeoDataFrame,
    stations: gpd.GeoDataFrame | None,
    polygons: gpd.GeoDataFrame,
    *,
    piece_length_m: float | None = None,
    rake_deg: float | None = None,
    default_dip_deg: float = 60.0,
    reproject: bool = False,
) -> tuple[gpd.GeoDataFrame, dict[str, float]]:
    """Horizontal strain tensors in user polygons by Kostrov summation.

    Parameters
    ----------
    faults, stations : geopandas.GeoDataFrame
        As for :func:`fault_pieces`.
    polygons : geopandas.GeoDataFrame
        Polygons or MultiPolygons (same CRS as ``faults``, or any CRS with
        ``reproject=True``); a ``polygon_id`` column is kept, else ids 1..n.
        Overlapping polygons each receive the pieces inside them.
    piece_length_m : float, optional
        Longest piece, m; pieces are assigned to a polygon by their midpoint.
        Default: 1/50 of the square root of the smallest polygon area.
    rake_deg, default_dip_deg
        As for :func:`fault_pieces`.
    reproject : bool
        Reproject the polygons to the faults' CRS instead of raising.

    Returns
    -------
    cells : geopandas.GeoDataFrame
        The polygons with ``polygon_id``, ``area_m2``, the tensor fields of
        :func:`kostrov_grid`, ``n_faults`` and ``sum_lh_m2``.
    whole : dict
        Tensor over the union of the polygons (each piece counted once).

    Notes
    -----
    Same summation as :func:`kostrov_grid` (Kostrov 1974, map-view form);
    pieces are matched to polygons with one vectorised STRtree query.
    Pieces straddling a polygon border are assigned whole, by midpoint: the
    error is at most one piece length per border crossing.
    """
    _check_piece(piece_length_m)
    fid, geoms = _check_faults(faults)
    polygons = _in_faults_crs(polygons, faults, "polygons", "Polygons", reproject=reproject)
    out = polygons.copy()
    if "polygon_id" in out.columns:
        pid = out["polygon_id"].to_numpy()
    else:
        pid = np.arange(1, len(out) + 1)
        out["polygon_id"] = pid
    pg = np.asarray(out.geometry.values, dtype=object)
    tid = shapely.get_type_id(pg)
    area = shapely.area(pg)
    bad = ~np.isin(tid, (3, 6)) | ~(area > 0)
    if bad.any():
        raise GeometryError(f"polygon {_ids(pid[bad])}: not a Polygon with a positive area; fix or remove it.")
    if piece_length_m is None:
        piece_length_m = float(np.sqrt(area.min())) / 50.0
    pieces = fault_pieces(
        faults, stations, piece_length_m=piece_length_m, rake_deg=rake_deg, default_dip_deg=default_dip_deg
    )
    pts = shapely.points(pieces["x_m"].to_numpy(), pieces["y_m"].to_numpy())
    tree = shapely.STRtree(pg)
    qi, qp = tree.query(pts, predicate="within")
    n = len(pg)
    sums = {col: np.bincount(qp, weights=pieces[col].to_numpy()[qi], minlength=n) for col in ("mxx", "myy", "mxy")}
    lh = np.bincount(qp, weights=(pieces["length_m"] * pieces["heave_m"]).to_numpy()[qi], minlength=n)
    fp = pieces["fault_pos"].to_numpy().astype(np.int64)
    pair = np.unique(qp * (len(geoms) + 1) + fp[qi])
    n_faults = np.bincount(pair // (len(geoms) + 1), minlength=n)
    n_default = np.bincount(
        pair // (len(geoms) + 1), weights=_default_flags(pieces, qp, fp, pair, len(geoms)), minlength=n
    ).astype(int)
    out["area_m2"] = area
    for k, v in _tensor_frame(sums["mxx"], sums["myy"], sums["mxy"], area).items():
        out[k] = v
    out["n_faults"] = n_faults
    out["n_default_dip"] = n_default
    out["sum_lh_m2"] = lh
    inside = np.zeros(len(pieces), dtype=bool)
    inside[qi] = True
    whole = _summary(pieces, inside, float(shapely.area(shapely.union_all(pg))))
    return out, whole


def fault_moment_sum(faults: gpd.GeoDataFrame, *, rake_deg: float | None = None) -> np.ndarray:
    """Sum over faults of the along-strike heave integral times the dip-direction dyad.

    Parameters
    ----------
    faults : geopandas.GeoDataFrame
        With ``heave_integral_m2`` (integral of heave along strike, m^2),
        ``dip_dir_deg`` and ``dip_deg``; optional ``rake_deg``.
    rake_deg : float, optional
        Rake for all faults (default: column, else -90).

    Returns
    -------
    numpy.ndarray
        2x2 moment tensor (E, N), m^2: sum_f I_f (m_f m_f) (+ strike-slip
        part). Dividing by an area gives the Kostrov strain of that area.

    Raises
    ------
    InputError
        If ``heave_integral_m2`` is missing or a fault with a heave has no
        dip direction.

    Notes
    -----
    The second route of the Kostrov (1974) sum: for dip slip the strain of
    an area holding whole faults is (1/A) sum_f I_f (m_f m_f), I_f the
    along-strike integral of heave. The strike-slip part uses
    I_ss = I_h cos(rake) / (|sin(rake)| cos(dip)), since ss / h =
    cos(rake) / (|sin(rake)| cos(dip)).
    """
    for col in ("heave_integral_m2", "dip_dir_deg", "dip_deg"):
        if col not in faults.columns:
            raise InputError(f"faults layer has no '{col}' column; run the throw tool first.")
    integ = faults["heave_integral_m2"].to_numpy(dtype=float)
    dd = faults["dip_dir_deg"].to_numpy(dtype=float)
    dip = faults["dip_deg"].to_numpy(dtype=float)
    use = np.isfinite(integ) & (integ != 0)
    if (use & ~np.isfinite(dd)).any():
        raise InputError(
            f"fault {_ids(faults['fault_id'].to_numpy()[use & ~np.isfinite(dd)])}: no dip direction; "
            "the fault-sum route needs dip_dir_deg."
        )
    rake = (
        faults["rake_deg"].to_numpy(dtype=float) if (rake_deg is None and "rake_deg" in faults.columns)
        else np.full(len(faults), np.nan if rake_deg is None else float(rake_deg))
    )
    _check_rake(rake, "rake_deg")
    rake = np.where(np.isfinite(rake), rake, -90.0)
    integ, dd, dip, rake = integ[use], dd[use], dip[use], rake[use]
    mr = np.radians(dd)
    m = np.stack([np.sin(mr), np.cos(mr)], axis=1)
    s = np.stack([-np.cos(mr), np.sin(mr)], axis=1)
    iss = integ * _rake_factor(rake) / np.cos(np.radians(dip))
    mm = np.einsum("k,ki,kj->ij", integ, m, m)
    ms = np.einsum("k,ki,kj->ij", iss, m, s)
    return mm + 0.5 * (ms + ms.T)


def whole_area_strain(moment_m2: np.ndarray, area_m2: float) -> dict[str, float]:
    """Strain tensor and principal values of a 2x2 moment sum spread over an area.

    Parameters
    ----------
    moment_m2 : numpy.ndarray
        2x2 symmetric moment tensor (E, N), m^2 (e.g. from
        :func:`fault_moment_sum`).
    area_m2 : float
        Map area, m^2 (> 0).

    Returns
    -------
    dict
        ``exx``, ``eyy``, ``exy``, ``e1``, ``e2``, ``e1_azimuth_deg``, ``ezz``.

    Notes
    -----
    eps = M / A (Kostrov 1974, map-view form; see :func:`kostrov_grid`).
    """
    if not np.isfinite(area_m2) or area_m2 <= 0:
        raise ParameterError(f"area_m2 must be positive, got {area_m2!r}.")
    mm = np.asarray(moment_m2, dtype=float)
    t = _tensor_frame(np.array([mm[0, 0]]), np.array([mm[1, 1]]), np.array([0.5 * (mm[0, 1] + mm[1, 0])]), np.array([area_m2]))
    return {k: float(v[0]) for k, v in t.items()}


# --------------------------------------------------------------------------- tiles (engine batches)
#: Columns of the faults layer a Kostrov tile needs (others are not sent to workers).
_TILE_FAULT_COLS = (
    "fault_id", "dip_deg", "dip_source", "dip_dir_deg", "rake_deg", "max_throw_m", "max_throw_err_m",
    "max_throw_dist_m",
)
_TILE_STATION_COLS = ("fault_id", "dist_m", "throw_m", "throw_err_m", "status")


@dataclass(frozen=True)
class KostrovTile:
    """One independent unit of the Kostrov grid: a block of cells and the traces crossing it.

    Attributes
    ----------
    faults : geopandas.GeoDataFrame
        Traces that intersect the tile (only the columns the sum needs).
    stations : pandas.DataFrame or None
        Their throw stations (no geometry unless ``dist_m`` is missing).
    grid : tuple
        (x0, y0, cell_size_m, nx, ny) of the whole grid.
    cols, rows : tuple of int
        Half-open ranges [c0, c1) and [r0, r1) of the grid cells in this tile.
    piece_length_m : float
        Longest piece, m.
    rake_deg : float or None
    default_dip_deg : float
    """

    faults: Any
    stations: Any
    grid: tuple
    cols: tuple
    rows: tuple
    piece_length_m: float
    rake_deg: float | None
    default_dip_deg: float


def faults_with_throw(faults: gpd.GeoDataFrame, stations: pd.DataFrame | None) -> np.ndarray:
    """Which faults have a known throw for :func:`faultmap.extension.transects.throw_at`.

    Parameters
    ----------
    faults : geopandas.GeoDataFrame
        With ``fault_id`` and optionally ``max_throw_m``.
    stations : pandas.DataFrame or None
        Throw stations (``fault_id``, ``throw_m``, optionally ``status``,
        ``dist_m``).

    Returns
    -------
    numpy.ndarray of bool
        True where the fault has an ok station with a finite throw, or a
        finite ``max_throw_m`` (the fallback profile).
    """
    fid = faults["fault_id"].to_numpy()
    has = np.zeros(len(faults), dtype=bool)
    if stations is not None and len(stations) and "throw_m" in stations.columns:
        ok = np.isfinite(stations["throw_m"].to_numpy(dtype=float))
        if "status" in stations.columns:
            ok &= stations["status"].astype(str).to_numpy() == "ok"
        if "dist_m" in stations.columns:
            ok &= np.isfinite(stations["dist_m"].to_numpy(dtype=float))
        has |= np.isin(fid, stations["fault_id"].to_numpy()[ok])
    if "max_throw_m" in faults.columns:
        has |= np.isfinite(faults["max_throw_m"].to_numpy(dtype=float))
    return has


def plan_kostrov_tiles(
    faults: gpd.GeoDataFrame,
    stations: gpd.GeoDataFrame | None = None,
    *,
    cell_size_m: float,
    tile_cells: int = 64,
    keep_empty: bool = False,
    piece_length_m: float | None = None,
    rake_deg: float | None = None,
    default_dip_deg: float = 60.0,
    max_cells: int = 4_000_000,
) -> tuple[list[KostrovTile], dict]:
    """Split the Kostrov grid of :func:`kostrov_grid` into square tiles of cells.

    The grid is the one :func:`kostrov_grid` uses (origin at multiples of
    the cell size below the traces' lower-left corner). Each tile carries the
    traces that intersect it and their stations; since traces are cut at
    every cell border, the pieces of a tile's cells come only from those
    traces, so the tiles are independent and any tiling gives the same cells.

    Parameters
    ----------
    faults, stations, cell_size_m, keep_empty, piece_length_m, rake_deg, default_dip_deg, max_cells
        As for :func:`kostrov_grid`.
    tile_cells : int
        Side of a tile, in cells (>= 1).

    Returns
    -------
    tiles : list of KostrovTile
        Tiles holding at least one trace, in row-major order.
    grid : dict
        ``x0``, ``y0``, ``cell_size_m``, ``nx``, ``ny``, ``keep_empty``,
        ``max_cells``, ``crs`` for :func:`gather_kostrov_tiles`.

    Notes
    -----
    Faults without a known throw are left out here, with the warning
    :func:`fault_pieces` gives, so that tiles never warn. Kostrov (1974).
    """
    _check_cell_size(cell_size_m)
    _check_piece(piece_length_m)
    if isinstance(tile_cells, bool) or int(tile_cells) != tile_cells or tile_cells < 1:
        raise ParameterError(f"tile_cells must be a whole number >= 1, got {tile_cells!r}.")
    tile_cells = int(tile_cells)
    if rake_deg is not None:
        _check_rake(np.array([float(rake_deg)]), "rake_deg")
    fid, geoms, c, x0, y0, nx, ny = _cell_grid(faults, cell_size_m, keep_empty=keep_empty, max_cells=max_cells)
    grid = {
        "x0": float(x0), "y0": float(y0), "cell_size_m": c, "nx": nx, "ny": ny,
        "keep_empty": bool(keep_empty), "max_cells": int(max_cells), "crs": faults.crs,
    }
    dip = faults["dip_deg"].to_numpy(dtype=float)
    dip = np.where(np.isfinite(dip), dip, default_dip_deg)
    bad = (dip <= 0) | (dip > 90)
    if bad.any():
        raise InputError(f"fault {_ids(fid[bad])}: dip_deg outside (0, 90]; fix the dip attribute.")
    has = faults_with_throw(faults, stations)
    if (~has).any():
        warnings.warn(
            f"fault {_ids(np.unique(fid[~has]))}: no throw known (no ok station and no max_throw_m); "
            "left out of the strain sums. Run the throw tool on these faults.",
            FaultmapWarning,
            stacklevel=2,
        )
    keep_cols = [k for k in _TILE_FAULT_COLS if k in faults.columns]
    f = faults.loc[has, keep_cols + [faults.geometry.name]]
    f = gpd.GeoDataFrame(f, geometry=faults.geometry.name, crs=faults.crs).reset_index(drop=True)
    st = None
    if stations is not None and len(stations):
        cols = [k for k in _TILE_STATION_COLS if k in stations.columns]
        st = pd.DataFrame(stations[cols]) if "dist_m" in stations.columns else stations[cols + [stations.geometry.name]]
        st = st[np.isin(st["fault_id"].to_numpy(), f["fault_id"].to_numpy())].reset_index(drop=True)
    piece = float(piece_length_m) if piece_length_m is not None else c / 10.0
    if len(f) == 0:
        return [], grid
    fg = np.asarray(f.geometry.values, dtype=object)
    tree = shapely.STRtree(fg)
    st_fid = st["fault_id"].to_numpy() if st is not None else None
    tiles = []
    for r0 in range(0, ny, tile_cells):
        r1 = min(r0 + tile_cells, ny)
        for c0 in range(0, nx, tile_cells):
            c1 = min(c0 + tile_cells, nx)
            box = shapely.box(x0 + c0 * c, y0 + r0 * c, x0 + c1 * c, y0 + r1 * c)
            hit = np.unique(tree.query(box, predicate="intersects"))
            if hit.size == 0:
                continue
            sub = f.iloc[hit].reset_index(drop=True)
            sst = None
            if st is not None:
                sst = st[np.isin(st_fid, sub["fault_id"].to_numpy())].reset_index(drop=True)
            tiles.append(KostrovTile(sub, sst, (float(x0), float(y0), c, nx, ny), (c0, c1), (r0, r1), piece,
                                     rake_deg, float(default_dip_deg)))
    return tiles, grid


def kostrov_tile(tile: KostrovTile) -> dict[str, np.ndarray]:
    """Moment sums of the cells of one tile (what an engine maps over tiles).

    Parameters
    ----------
    tile : KostrovTile

    Returns
    -------
    dict
        ``key`` (cell number row * nx + col, sorted), ``mxx``, ``myy``,
        ``mxy`` (moment sums, m^2), ``lh`` (sum of length x heave, m^2),
        ``n_faults``, ``n_default_dip`` per occupied cell, and
        ``fault_ids`` (faults with pieces in the tile).

    Notes
    -----
    The same pieces and sums as :func:`kostrov_grid` (Kostrov 1974, map-view
    form), restricted to the pieces whose midpoints fall in the tile.
    """
    x0, y0, c, nx, ny = tile.grid
    pieces = fault_pieces(
        tile.faults, tile.stations, piece_length_m=tile.piece_length_m, grid_origin=(x0, y0), cell_size_m=c,
        rake_deg=tile.rake_deg, default_dip_deg=tile.default_dip_deg,
    )
    ix = np.clip(np.floor((pieces["x_m"].to_numpy() - x0) / c).astype(np.int64), 0, nx - 1)
    iy = np.clip(np.floor((pieces["y_m"].to_numpy() - y0) / c).astype(np.int64), 0, ny - 1)
    inside = (ix >= tile.cols[0]) & (ix < tile.cols[1]) & (iy >= tile.rows[0]) & (iy < tile.rows[1])
    pieces = pieces.loc[inside].reset_index(drop=True)
    key = (iy * nx + ix)[inside]
    cells_k = np.unique(key)
    pos = np.searchsorted(cells_k, key)
    n = len(cells_k)
    out: dict[str, np.ndarray] = {"key": cells_k}
    for col in ("mxx", "myy", "mxy"):
        out[col] = np.bincount(pos, weights=pieces[col].to_numpy(), minlength=n)
    out["lh"] = np.bincount(pos, weights=(pieces["length_m"] * pieces["heave_m"]).to_numpy(), minlength=n)
    nf = len(tile.faults)
    fp = pieces["fault_pos"].to_numpy().astype(np.int64)
    pair = np.unique(pos * (nf + 1) + fp)
    out["n_faults"] = np.bincount(pair // (nf + 1), minlength=n)
    out["n_default_dip"] = np.bincount(
        pair // (nf + 1), weights=_default_flags(pieces, pos, fp, pair, nf), minlength=n
    ).astype(int)
    out["fault_ids"] = np.unique(pieces["fault_id"].to_numpy())
    return out


def gather_kostrov_tiles(parts: list[dict], grid: dict) -> tuple[gpd.GeoDataFrame, dict[str, float]]:
    """Assemble tile sums into the cells and whole-area tensor of :func:`kostrov_grid`.

    Parameters
    ----------
    parts : list of dict
        :func:`kostrov_tile` results, in any order.
    grid : dict
        From :func:`plan_kostrov_tiles`.

    Returns
    -------
    cells, whole
        As :func:`kostrov_grid` returns them (cells sorted by ``cell_id``).

    Raises
    ------
    ParameterError
        More occupied cells than ``max_cells``.
    """
    x0, y0, c, nx, ny = grid["x0"], grid["y0"], grid["cell_size_m"], grid["nx"], grid["ny"]
    names = ("mxx", "myy", "mxy", "lh", "n_faults", "n_default_dip")
    if parts:
        key = np.concatenate([p["key"] for p in parts]).astype(np.int64)
        vals = {k: np.concatenate([np.asarray(p[k]) for p in parts]) for k in names}
        fault_ids = np.unique(np.concatenate([np.asarray(p["fault_ids"]) for p in parts]))
    else:
        key = np.zeros(0, dtype=np.int64)
        vals = {k: np.zeros(0) for k in names}
        fault_ids = np.zeros(0)
    order = np.argsort(key, kind="stable")
    key = key[order]
    vals = {k: v[order] for k, v in vals.items()}
    if grid["keep_empty"]:
        cells_k = np.arange(nx * ny)
        full = {k: np.zeros(nx * ny, dtype=float if k in ("mxx", "myy", "mxy", "lh") else np.int64) for k in names}
        for k in names:
            full[k][key] = vals[k]
        vals = full
    else:
        cells_k = key
    if len(cells_k) > grid["max_cells"]:
        raise ParameterError(
            f"cell_size_m {c:g} m gives {len(cells_k)} cells (limit {grid['max_cells']}); use larger cells."
        )
    n = len(cells_k)
    col, row = cells_k % nx, cells_k // nx
    area = np.full(n, c * c)
    polys = shapely.box(x0 + col * c, y0 + row * c, x0 + (col + 1) * c, y0 + (row + 1) * c)
    data = {"cell_id": cells_k + 1, "col": col, "row": row, "area_m2": area}
    data.update(_tensor_frame(vals["mxx"], vals["myy"], vals["mxy"], area))
    data.update(
        n_faults=vals["n_faults"].astype(np.int64), n_default_dip=vals["n_default_dip"].astype(int),
        sum_lh_m2=vals["lh"].astype(float),
    )
    cells = gpd.GeoDataFrame(data, geometry=polys, crs=grid["crs"])
    m = [float(vals[k].sum()) for k in ("mxx", "myy", "mxy")]
    t = _tensor_frame(*(np.array([v]) for v in m), np.array([float(area.sum())]))
    whole = {k: float(v[0]) for k, v in t.items()}
    whole.update(
        area_m2=float(area.sum()), n_faults=int(fault_ids.size), moment_xx_m2=m[0], moment_yy_m2=m[1],
        moment_xy_m2=m[2],
    )
    return cells, whole
