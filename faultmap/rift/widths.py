"""Sections perpendicular to the rift axis and the rift width on each.

Two widths per section: between the outermost faults above a throw
threshold, and across the central fraction of the cumulative heave. Pure
functions in the projected metric working CRS, no file I/O.
"""

from __future__ import annotations

import math
import warnings

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely
from shapely.geometry import LineString

from faultmap.errors import FaultmapWarning, ParameterError
from faultmap.rift.axis_frame import axis_coordinates, axis_point_direction
from faultmap.rift.heave import _check_faults, _fault_ids, _pieces, _weighted_quantiles

__all__ = ["rift_sections"]


def _width_class(width_km: np.ndarray, narrow_max_km: float, wide_min_km: float) -> np.ndarray:
    out = np.full(width_km.shape, "indeterminate", dtype=object)
    out[width_km <= narrow_max_km] = "narrow"
    out[width_km >= wide_min_km] = "wide"
    return out


def rift_sections(
    faults: gpd.GeoDataFrame,
    axis: LineString,
    *,
    spacing_m: float | None = None,
    min_throw_m: float | None = None,
    heave_fraction: float = 0.9,
    half_length_m: float | None = None,
    narrow_max_km: float = 100.0,
    wide_min_km: float = 175.0,
) -> gpd.GeoDataFrame:
    """Sections perpendicular to the axis and the rift width on each.

    Parameters
    ----------
    faults : GeoDataFrame
        Fault traces in the working CRS, with ``max_throw_m`` and
        ``heave_integral_m2`` (after the throw tool).
    axis : LineString
        Rift axis (from :func:`~faultmap.rift.axis.rift_axis`).
    spacing_m : float, optional
        Distance between sections along the axis, m; each section owns the
        along-axis band of this width centred on it. Default: the faults'
        along-axis extent / 20.
    min_throw_m : float, optional
        Faults whose ``max_throw_m`` is below this do not count for the
        outermost-fault width, m. Default: a tenth of the largest
        ``max_throw_m``. All faults count when ``max_throw_m`` is missing.
    heave_fraction : float
        Central fraction of the cumulative heave for ``width_heave90_km``
        (default 0.9).
    half_length_m : float, optional
        Half-length of the drawn section lines, m; default 1.1 x the largest
        across-axis distance of any fault.
    narrow_max_km, wide_min_km : float
        Width thresholds of the per-section ``class`` (see
        :func:`~faultmap.rift.classification.classify_rift`).

    Returns
    -------
    GeoDataFrame
        ``rift_sections``: one LineString per section, perpendicular to the
        local axis, with ``section_id``, ``along_m`` (section centre along the
        axis), ``centre_x_m``, ``centre_y_m``, ``azimuth_deg`` (across-axis
        direction, towards positive across), ``band_m``, ``width_km``
        (outermost faults above ``min_throw_m``), ``across_min_m``,
        ``across_max_m``, ``width_heave90_km``, ``heave_lo_m``,
        ``heave_hi_m``, ``n_faults`` (faults counted for ``width_km``),
        ``n_faults_all``, ``fault_ids`` (comma-separated ids counted),
        ``heave_m2`` (heave integral within the band), ``class``.

    Notes
    -----
    Traces are cut into pieces shorter than a quarter of the spacing; a piece
    belongs to the section whose along-axis band holds its midpoint, so every
    fault that lies in the band counts, crossed by the section line or not.
    ``width_km`` is the across-axis distance between the outermost piece ends
    of faults above the throw threshold (at least two faults; NaN otherwise).
    ``width_heave90_km`` spans the central ``heave_fraction`` of the
    cumulative heave across the band (weighted quantiles of piece midpoints;
    heave is spread uniformly along each trace). Widths of this kind are
    common practice in rift studies; the exact construction is ours.
    """
    faults = _check_faults(faults)
    if not 0.0 < heave_fraction < 1.0:
        raise ParameterError("heave_fraction must be between 0 and 1 (exclusive)")
    if narrow_max_km >= wide_min_km:
        raise ParameterError("narrow_max_km must be smaller than wide_min_km")
    ids = _fault_ids(faults)
    # along-axis extent of the population (coarse pieces) to set the spacing
    xy_all = shapely.get_coordinates(np.asarray(faults.geometry.values))
    s_all, n_all = axis_coordinates(axis, xy_all[:, 0], xy_all[:, 1])
    span = float(s_all.max() - s_all.min())
    if spacing_m is None:
        spacing_m = max(span / 20.0, 1.0)
    spacing_m = float(spacing_m)
    if spacing_m <= 0:
        raise ParameterError("spacing_m must be positive")
    pc = _pieces(faults, spacing_m / 4.0, "heave")
    s_mid, n_mid = axis_coordinates(axis, pc["mid"][:, 0], pc["mid"][:, 1])
    _, n0 = axis_coordinates(axis, pc["p0"][:, 0], pc["p0"][:, 1])
    _, n1 = axis_coordinates(axis, pc["p1"][:, 0], pc["p1"][:, 1])
    lo, hi = float(s_mid.min()), float(s_mid.max())
    nsec = max(1, int(math.ceil((hi - lo) / spacing_m - 1e-9)))
    start = 0.5 * (lo + hi) - 0.5 * nsec * spacing_m
    band = np.clip(np.floor((s_mid - start) / spacing_m).astype(np.int64), 0, nsec - 1)
    centres = start + (np.arange(nsec) + 0.5) * spacing_m

    throw = np.asarray(faults["max_throw_m"], dtype=float) if "max_throw_m" in faults else np.full(len(faults), np.nan)
    if not np.any(np.isfinite(throw)):
        warnings.warn("faults have no max_throw_m: every fault counts for the rift width (run the throw tool first)", FaultmapWarning, stacklevel=2)
        above_fault = np.ones(len(faults), dtype=bool)
    else:
        if min_throw_m is None:
            min_throw_m = 0.1 * float(np.nanmax(throw))
        above_fault = np.isfinite(throw) & (throw >= float(min_throw_m))
    above = above_fault[pc["fault"]]

    q_lo = 0.5 * (1.0 - heave_fraction)
    rows = []
    for k in range(nsec):  # a loop over sections (tens), vectorised inside
        m = band == k
        mc = m & above
        counted = np.unique(pc["fault"][mc])
        all_f = np.unique(pc["fault"][m])
        if counted.size >= 2:
            a_min = float(min(n0[mc].min(), n1[mc].min()))
            a_max = float(max(n0[mc].max(), n1[mc].max()))
            width = (a_max - a_min) / 1000.0
        else:
            a_min = a_max = width = np.nan
        ql, qh = _weighted_quantiles(n_mid[m], pc["w_heave"][m], np.array([q_lo, 1.0 - q_lo]))
        w90 = (qh - ql) / 1000.0 if all_f.size >= 2 else np.nan
        rows.append(
            {
                "section_id": k + 1,
                "along_m": float(centres[k]),
                "band_m": spacing_m,
                "width_km": width,
                "across_min_m": a_min,
                "across_max_m": a_max,
                "width_heave90_km": w90,
                "heave_lo_m": ql,
                "heave_hi_m": qh,
                "n_faults": int(counted.size),
                "n_faults_all": int(all_f.size),
                "fault_ids": ",".join(str(i) for i in np.sort(ids[counted])),
                "heave_m2": float(pc["w_heave"][m].sum()),
            }
        )
    df = pd.DataFrame(rows)
    p, t = axis_point_direction(axis, centres, smooth_m=0.5 * spacing_m)
    normal = np.column_stack([t[:, 1], -t[:, 0]])
    if half_length_m is None:
        half_length_m = 1.1 * float(np.max(np.abs(n_all)))
    half_length_m = max(float(half_length_m), 1.0)
    a = p - half_length_m * normal
    b = p + half_length_m * normal
    lines = shapely.linestrings(np.stack([a, b], axis=1))
    df.insert(2, "centre_x_m", p[:, 0])
    df.insert(3, "centre_y_m", p[:, 1])
    df.insert(4, "azimuth_deg", np.degrees(np.arctan2(normal[:, 0], normal[:, 1])) % 360.0)
    df["min_throw_m"] = float(min_throw_m) if min_throw_m is not None else np.nan
    df["class"] = _width_class(df["width_km"].to_numpy(float), narrow_max_km, wide_min_km)
    return gpd.GeoDataFrame(df, geometry=lines, crs=faults.crs)

