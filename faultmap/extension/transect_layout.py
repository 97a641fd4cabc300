"""Transects placed automatically across a fault population.

Pure functions: GeoDataFrames in, GeoDataFrames out; nothing here touches
files. The ``transect`` tool uses them when no transects are given.

Main entry points
-----------------
:func:`mean_strike_deg`
    Length-weighted axial mean strike of a fault population.
:func:`auto_transects`
    Transects perpendicular to the mean strike at a regular spacing.
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import shapely

from faultmap.errors import AnalysisError, InputError, ParameterError
from faultmap.extension.fault_inputs import _check_faults
from faultmap.numerics.directions import axial_mean_deg, axial_resultant_length, segment_azimuths

__all__ = ["mean_strike_deg", "auto_transects"]


def mean_strike_deg(faults: gpd.GeoDataFrame) -> float:
    """Length-weighted axial mean strike of a fault population, degrees 0-180.

    Parameters
    ----------
    faults : geopandas.GeoDataFrame
        Fault traces (LineStrings) in a projected metric CRS.

    Returns
    -------
    float
        Mean strike, degrees clockwise from grid north, in [0, 180).

    Raises
    ------
    AnalysisError
        If the traces have no preferred strike (e.g. two equal orthogonal sets).

    Notes
    -----
    Strikes are axial data (a strike and its opposite are the same line), so
    the mean is taken on doubled angles (Mardia & Jupp 2000, axial data;
    common practice): every trace segment contributes its length times
    (cos 2a, sin 2a); the mean strike is half the angle of the resultant.
    Digitising direction does not matter.
    """
    _, az, seg_len = segment_azimuths(np.asarray(faults.geometry.values, dtype=object))
    if axial_resultant_length(az, seg_len) < 1e-9:
        raise AnalysisError("fault traces have no preferred strike; give the transect azimuth explicitly.")
    return float(axial_mean_deg(az, seg_len)[0])


def auto_transects(
    faults: gpd.GeoDataFrame,
    *,
    spacing_m: float,
    margin_m: float | None = None,
    azimuth_deg: float | None = None,
    max_transects: int = 10000,
) -> gpd.GeoDataFrame:
    """Straight transects across the whole fault population at a regular spacing.

    Parameters
    ----------
    faults : geopandas.GeoDataFrame
        Fault traces (LineStrings) in a projected metric CRS.
    spacing_m : float
        Distance between neighbouring transects along strike, m (> 0).
    margin_m : float, optional
        Length added beyond the outermost fault at each end, m (>= 0).
        Default: the median across-strike gap between neighbouring trace
        midpoints (one typical fault spacing), at least 1 % of the
        population's extent.
    azimuth_deg : float, optional
        Transect azimuth, degrees. Default: perpendicular to the
        length-weighted axial mean strike (:func:`mean_strike_deg`).
    max_transects : int
        Safety limit on the number of transects.

    Returns
    -------
    geopandas.GeoDataFrame
        LineStrings with ``transect_id`` (1..n), ``azimuth_deg`` (0-180,
        start to end), ``position_m`` (along-strike position of the transect
        relative to the population's centre), ``margin_m`` and
        ``source = 'auto'``; same CRS as ``faults``.

    Raises
    ------
    ParameterError
        Non-positive spacing, negative margin, or more transects than
        ``max_transects``.

    Notes
    -----
    Transects are centred on the population along strike and run from the
    outermost fault on one side to the outermost on the other, plus the
    margin, so none ends inside the population (common practice).
    """
    if spacing_m is None or not np.isfinite(spacing_m) or spacing_m <= 0:
        raise ParameterError(f"spacing_m must be a positive distance in m, got {spacing_m!r}.")
    if margin_m is not None and (not np.isfinite(margin_m) or margin_m < 0):
        raise ParameterError(f"margin_m must be >= 0 m, got {margin_m!r}.")
    fid, geoms = _check_faults(faults)
    if len(geoms) == 0:
        raise InputError("faults layer is empty; nothing to place transects across.")
    strike = mean_strike_deg(faults) if azimuth_deg is None else (float(azimuth_deg) - 90.0) % 180.0
    az = (strike + 90.0) % 180.0
    t_hat = np.array([np.sin(np.radians(az)), np.cos(np.radians(az))])
    s_hat = np.array([np.sin(np.radians(strike)), np.cos(np.radians(strike))])
    coords = shapely.get_coordinates(geoms)
    pt, ps = coords @ t_hat, coords @ s_hat
    tmin, tmax, smin, smax = pt.min(), pt.max(), ps.min(), ps.max()
    if margin_m is None:
        # one typical across-strike fault spacing (median gap between trace midpoints), at least 1 % of the extent
        mid = shapely.get_coordinates(shapely.line_interpolate_point(geoms, 0.5, normalized=True)) @ t_hat
        gaps = np.diff(np.sort(mid))
        gaps = gaps[gaps > 0]
        typical = float(np.median(gaps)) if gaps.size else 0.0
        margin_m = max(typical, 0.01 * max(tmax - tmin, smax - smin), 1.0)
    extent = smax - smin
    n = max(1, int(np.floor(extent / spacing_m)))
    if n > max_transects:
        raise ParameterError(
            f"spacing_m {spacing_m:g} m gives {n} transects (limit {max_transects}); use a larger spacing."
        )
    offset = 0.5 * (extent - n * spacing_m) if extent >= spacing_m else 0.5 * extent - 0.5 * spacing_m
    s_pos = smin + offset + (np.arange(n) + 0.5) * spacing_m
    start = s_pos[:, None] * s_hat + (tmin - margin_m) * t_hat
    end = s_pos[:, None] * s_hat + (tmax + margin_m) * t_hat
    lines = shapely.linestrings(np.stack([start, end], axis=1))
    centre = 0.5 * (smin + smax)
    return gpd.GeoDataFrame(
        {
            "transect_id": np.arange(1, n + 1),
            "azimuth_deg": np.full(n, az),
            "position_m": s_pos - centre,
            "margin_m": np.full(n, float(margin_m)),
            "source": np.full(n, "auto", dtype=object),
        },
        geometry=lines,
        crs=faults.crs,
    )
