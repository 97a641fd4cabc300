"""The Kostrov grid summed in independent tiles of cells by the run's engine.

The same cells as :func:`~faultmap.extension.kostrov_sums.kostrov_grid`
whatever the tile size: traces are cut at every cell border, so a tile's cells
need only the traces that cross the tile. Nothing here touches files.

Main entry points
-----------------
:class:`KostrovTile`
    A block of cells and the traces crossing it.
:func:`plan_kostrov_tiles`
    The grid split into tiles.
:func:`kostrov_tile`
    Moment sums of one tile's cells (what an engine maps over tiles).
:func:`gather_kostrov_tiles`
    The tiles' sums assembled into cells and the whole-area tensor.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from typing import Any

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely

from faultmap.errors import FaultmapWarning, InputError, ParameterError
from faultmap.extension.fault_inputs import _check_rake, _ids
from faultmap.extension.kostrov_pieces import (
    _cell_grid,
    _check_cell_size,
    _check_piece,
    _default_flags,
    fault_pieces,
)
from faultmap.extension.strain_tensors import _tensor_frame
from faultmap.extension.throw_profiles import faults_with_throw

__all__ = ["KostrovTile", "plan_kostrov_tiles", "kostrov_tile", "gather_kostrov_tiles"]


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

    The grid is the one :func:`~faultmap.extension.kostrov_sums.kostrov_grid`
    uses (origin at multiples of the cell size below the traces' lower-left
    corner). Each tile carries the traces that intersect it and their
    stations; since traces are cut at every cell border, the pieces of a
    tile's cells come only from those traces, so the tiles are independent
    and any tiling gives the same cells.

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
