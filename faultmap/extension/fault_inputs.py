"""Input checks and small helpers shared by the transect sums and Kostrov summation.

Private helpers of the ``faultmap.extension`` modules (the transect sums, the
throw profiles, the Kostrov pieces, sums and tiles): the faults layer and any
other layer checked (ids, columns, geometry, a projected metric CRS), the rake
checked and turned into a strike-slip factor, ids listed for messages.
Nothing here touches files.
"""

from __future__ import annotations

from collections.abc import Sequence

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely

from faultmap.errors import CRSError, GeometryError, InputError, ParameterError


def _ids(values: Sequence) -> str:
    """Compact list of ids for messages."""
    vals = [str(v) for v in values]
    return ", ".join(vals[:10]) + (f" and {len(vals) - 10} more" if len(vals) > 10 else "")


def _check_crs_metric(crs, what: str) -> None:
    if crs is not None and crs.is_geographic:
        raise CRSError(f"{what} are in geographic CRS {crs.name}; reproject to a projected metric CRS first.")


def _as_lines(gdf: gpd.GeoDataFrame, ids: np.ndarray, what: str) -> np.ndarray:
    """Geometries of ``gdf`` as a numpy array of LineStrings (single-part MultiLineStrings merged)."""
    geoms = np.asarray(gdf.geometry.values, dtype=object)
    missing = shapely.is_missing(geoms) | shapely.is_empty(geoms)
    if missing.any():
        raise GeometryError(f"{what} {_ids(ids[missing])}: empty geometry; remove or redraw these features.")
    tid = shapely.get_type_id(geoms)
    multi = tid == 5
    if multi.any():
        geoms = geoms.copy()
        geoms[multi] = shapely.line_merge(geoms[multi])
        tid = shapely.get_type_id(geoms)
    bad = tid != 1
    if bad.any():
        raise GeometryError(
            f"{what} {_ids(ids[bad])}: geometry is not a single LineString; split or merge these features."
        )
    return geoms


def _in_faults_crs(layer, faults: gpd.GeoDataFrame, what: str, kind: str, *, reproject: bool):
    """``layer`` checked as a GeoDataFrame, in the faults' CRS (reprojected if allowed), metric."""
    if not isinstance(layer, gpd.GeoDataFrame):
        raise InputError(f"{what} must be a GeoDataFrame of {kind}.")
    if layer.crs != faults.crs:
        if reproject and layer.crs is not None and faults.crs is not None:
            layer = layer.to_crs(faults.crs)
        else:
            raise CRSError(
                f"{what} CRS ({getattr(layer.crs, 'name', None)}) differs from the faults CRS "
                f"({getattr(faults.crs, 'name', None)}); reproject the {what} (reproject=True)."
            )
    _check_crs_metric(layer.crs, what)
    return layer


def _check_faults(faults: gpd.GeoDataFrame) -> tuple[np.ndarray, np.ndarray]:
    """Validate the faults layer; return (fault_id array, LineString array)."""
    if not isinstance(faults, gpd.GeoDataFrame):
        raise InputError("faults must be a GeoDataFrame of LineStrings.")
    for col in ("fault_id", "dip_deg"):
        if col not in faults.columns:
            raise InputError(f"faults layer has no '{col}' column; run the prepare and throw tools first.")
    _check_crs_metric(faults.crs, "fault traces")
    fid = faults["fault_id"].to_numpy()
    if pd.Index(fid).has_duplicates:
        dup = pd.Index(fid)[pd.Index(fid).duplicated()].unique()
        raise InputError(f"faults: duplicate fault_id {_ids(dup)}; fault ids must be unique.")
    return fid, _as_lines(faults, fid, "fault")


def _col(df: pd.DataFrame, name: str, default, dtype=float) -> np.ndarray:
    if name in df.columns:
        return df[name].to_numpy(dtype=dtype)
    return np.full(len(df), default, dtype=dtype)


def _rake_factor(rake: np.ndarray) -> np.ndarray:
    """Factor k = cos(rake) / |sin(rake)|, so that the horizontal strike slip is T k / sin(dip) (0 for dip slip)."""
    r = np.radians(rake)
    k = np.cos(r) / np.abs(np.sin(r))
    return np.where(np.abs(rake + 90.0) < 1e-9, 0.0, k)


def _check_rake(rake: np.ndarray, where: str) -> None:
    bad = np.isfinite(rake) & ((rake < -170.0) | (rake > -10.0))
    if bad.any():
        raise ParameterError(
            f"{where}: rake must lie between -170 and -10 deg for a normal fault (Aki-Richards convention, "
            f"-90 = pure dip slip), got {rake[bad][0]:g}."
        )
