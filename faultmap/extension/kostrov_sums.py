"""Horizontal strain from fault heaves by Kostrov summation, on a grid or in polygons.

Pure functions: GeoDataFrames in, GeoDataFrames out; nothing here touches
files. The tool wrapper is ``faultmap/extension/strain_tool.py``; it sums the
grid in tiles (:mod:`faultmap.extension.kostrov_tiles`, the same cells).

Main entry points
-----------------
:func:`kostrov_grid`
    Strain tensors on a regular grid of square cells.
:func:`kostrov_polygons`
    Strain tensors in user polygons.
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely

from faultmap.errors import GeometryError, ParameterError
from faultmap.extension.fault_inputs import _check_faults, _ids, _in_faults_crs
from faultmap.extension.kostrov_pieces import (
    _cell_grid,
    _check_cell_size,
    _check_piece,
    _default_flags,
    fault_pieces,
)
from faultmap.extension.strain_tensors import _tensor_frame

__all__ = ["kostrov_grid", "kostrov_polygons"]


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
    ``docs/methods/extension.md``; the layer thickness cancels), m the unit
    dip-direction vector (E, N); ezz = -(exx + eyy) from volume
    conservation. Each trace is split where it crosses a cell border, so
    every piece lies in one cell and sum_cells A_c eps_c equals the sum over
    faults of the along-strike heave integral times m m (checked by
    :func:`~faultmap.extension.strain_tensors.fault_moment_sum`). Cells are
    assigned by integer arithmetic on piece midpoints in one pass.
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
