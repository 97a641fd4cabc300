"""Surface-rupture zones around the screened traces, wider on the hanging wall.

Zone half-widths on the hanging-wall and footwall sides plus the mapping
uncertainty of the traces (given, or from the source map scale). Zone widths
are common practice (from memory), not a code. Pure functions, no file I/O.
Everything here is a screening estimate; see :data:`faultmap.hazard.screening.CAUTION`.
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import shapely

from faultmap.errors import ParameterError
from faultmap.hazard.inputs import _col, _compact, _endpoints, _ids_text, _require, _selected

__all__ = ["mapping_uncertainty_from_scale", "rupture_zones"]


def mapping_uncertainty_from_scale(map_scale_denominator: float, *, line_error_mm: float = 0.5) -> float:
    """Ground uncertainty (m) of a trace digitised from a map of scale 1:denominator.

    Parameters
    ----------
    map_scale_denominator : float
        E.g. 25000 for a 1:25 000 map.
    line_error_mm : float, optional
        Positional error on the printed map, mm (default 0.5 mm, common
        practice for a drawn line; from memory).

    Returns
    -------
    float
        line_error_mm / 1000 * denominator, m (1:25 000 -> 12.5 m).
    """
    if not (map_scale_denominator > 0):
        raise ParameterError("map_scale_denominator must be > 0 (e.g. 25000 for 1:25 000)")
    return line_error_mm / 1000.0 * float(map_scale_denominator)


def rupture_zones(
    faults: gpd.GeoDataFrame,
    *,
    fault_ids: list[int] | tuple[int, ...] | None = None,
    hw_width_m: float = 150.0,
    fw_width_m: float = 75.0,
    mapping_uncertainty_m: float | None = None,
    map_scale_denominator: float | None = None,
) -> tuple[gpd.GeoDataFrame, list[str]]:
    """Surface-rupture zones around the screened traces, wider on the hanging wall.

    Parameters
    ----------
    faults : geopandas.GeoDataFrame
        Faults (projected metric CRS) with ``fault_id`` and ``dip_dir_deg``
        (azimuth towards the hanging wall).
    fault_ids : sequence of int, optional
        Screen these faults instead of those marked active.
    hw_width_m, fw_width_m : float, optional
        Zone half-widths on the hanging-wall and footwall sides, m (defaults
        150 and 75: common practice, from memory; local codes decide).
    mapping_uncertainty_m : float, optional
        Positional uncertainty of the traces, m, added to both sides.
    map_scale_denominator : float, optional
        Source map scale 1:denominator; uncertainty = 0.5 mm at map scale
        (used when ``mapping_uncertainty_m`` is not given). A per-fault
        ``mapping_uncertainty_m`` column, where finite, takes precedence over
        both. With none of them the uncertainty is 0 and a warning says so.

    Returns
    -------
    zones : geopandas.GeoDataFrame
        Layer ``rupture_zones``: ``fault_id``, ``hw_width_m``,
        ``fw_width_m``, ``mapping_uncertainty_m``, ``zone_kind``
        (``asymmetric`` or ``symmetric_no_dip_dir``), ``area_m2``, Polygon
        geometry. The boundary lies ``hw_width_m + mapping_uncertainty_m``
        from the trace on the hanging-wall side and ``fw_width_m +
        mapping_uncertainty_m`` on the footwall side; the tips are rounded
        with the footwall distance.
    warnings : list of str

    Notes
    -----
    The hanging wall is the side the dip direction points to, decided from
    ``dip_dir_deg`` and the trace's end-to-end vector, so the digitising
    direction does not matter. Shapely 2 one-sided buffers
    (``single_sided=True``; positive distance = left of the line) are
    evaluated on arrays of geometries.
    """
    if hw_width_m < 0 or fw_width_m < 0:
        raise ParameterError("hw_width_m and fw_width_m must be >= 0")
    if mapping_uncertainty_m is not None and mapping_uncertainty_m < 0:
        raise ParameterError("mapping_uncertainty_m must be >= 0")
    _require(faults, ("fault_id", "dip_dir_deg"), "rupture zones")
    sel, ids, warns = _selected(faults, fault_ids)
    n = len(sel)
    lines = sel.geometry.to_numpy()

    if mapping_uncertainty_m is not None:
        u_default = float(mapping_uncertainty_m)
    elif map_scale_denominator is not None:
        u_default = mapping_uncertainty_from_scale(map_scale_denominator)
    else:
        u_default = np.nan
    u = _col(sel, "mapping_uncertainty_m")
    u = np.where(np.isfinite(u) & (u >= 0), u, u_default)
    if n and not np.isfinite(u).all():
        warns.append(
            f"fault(s) {_ids_text(ids[~np.isfinite(u)])}: no mapping uncertainty given (mapping_uncertainty_m "
            "or map_scale_denominator); zones include none"
        )
        u = np.where(np.isfinite(u), u, 0.0)

    start, end = _endpoints(lines) if n else (np.empty((0, 2)), np.empty((0, 2)))
    d = end - start
    dlen = np.hypot(d[:, 0], d[:, 1])
    az = np.radians(_col(sel, "dip_dir_deg"))
    # component of the dip-direction unit vector (sin az, cos az) on the left normal (-dy, dx)
    with np.errstate(invalid="ignore", divide="ignore"):
        left = (-d[:, 1] * np.sin(az) + d[:, 0] * np.cos(az)) / dlen
    known = np.isfinite(left) & (np.abs(left) > 0.05)
    if (~known).any():
        warns.append(
            f"fault(s) {_ids_text(ids[~known])}: dip direction unknown or parallel to the trace; "
            "zone drawn symmetric with the hanging-wall width on both sides"
        )
    side = np.where(left > 0, 1.0, -1.0)
    hw = np.full(n, float(hw_width_m)) + u
    fw = np.full(n, float(fw_width_m)) + u
    # symmetric fallback: both sides at max(hw, fw)
    hw_d = np.where(known, hw, np.maximum(hw, fw))
    fw_d = np.where(known, fw, np.maximum(hw, fw))
    if n:
        hw_poly = shapely.buffer(lines, side * hw_d, single_sided=True, cap_style="flat")
        fw_poly = shapely.buffer(lines, -side * fw_d, single_sided=True, cap_style="flat")
        tips = shapely.buffer(lines, np.minimum(hw_d, fw_d), cap_style="round")
        zones = shapely.union(shapely.union(hw_poly, fw_poly), tips)
        zones = shapely.make_valid(zones)
    else:
        zones = np.empty(0, dtype=object)
    out = gpd.GeoDataFrame(
        {
            "fault_id": ids,
            "hw_width_m": np.full(n, float(hw_width_m)),
            "fw_width_m": np.full(n, float(fw_width_m)),
            "mapping_uncertainty_m": u,
            "zone_kind": np.where(known, "asymmetric", "symmetric_no_dip_dir"),
            "area_m2": shapely.area(zones) if n else np.empty(0),
        },
        geometry=zones if n else [],
        crs=faults.crs,
    )
    return out, _compact(warns)

