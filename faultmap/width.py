"""Rift axis, width along the axis and narrow/wide classification.

Everything here works in the projected, metric working CRS of the ``faults``
GeoDataFrame (see ``DEVELOPERS.md``). Azimuths are degrees clockwise from
grid north. The rift axis is oriented along the mean strike (0-180 deg); the
across-axis coordinate is positive to the right of the axis direction
(towards azimuth axis + 90 deg).

The narrow/wide rule is ours (no published single-number criterion exists);
it is stated in :func:`classify_rift`, in ``docs/methods/width.md`` and in the
``reasons`` field of every result.
"""

from __future__ import annotations

import math
import warnings
from typing import Literal

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely
from shapely.geometry import LineString

from faultmap.errors import (
    AnalysisError,
    FaultmapWarning,
    GeometryError,
    InputError,
    ParameterError,
)

__all__ = [
    "BUCK_MODES",
    "axial_mean_deg",
    "fault_heave_m2",
    "axis_coordinates",
    "axis_point_direction",
    "fit_rift_axis",
    "rift_axis",
    "rift_sections",
    "heave_concentration",
    "classify_rift",
]

#: Buck (1991, JGR 96) modes of lithospheric extension: typical surface heat
#: flow (mW/m2) and crustal thickness (km) at the onset of rifting.
BUCK_MODES: dict[str, dict[str, float]] = {
    "narrow": {"heat_flow_mw_m2": 60.0, "crust_thickness_km": 30.0},
    "wide": {"heat_flow_mw_m2": 80.0, "crust_thickness_km": 40.0},
    "core_complex": {"heat_flow_mw_m2": 100.0, "crust_thickness_km": 50.0},
}

#: Weights of the evidence scores in the classification rule (ours).
EVIDENCE_WEIGHTS: dict[str, float] = {
    "width": 2.0,
    "localisation": 1.0,
    "heat_flow": 0.5,
    "crust": 0.5,
}


# ---------------------------------------------------------------------------
# small helpers
# ---------------------------------------------------------------------------


def axial_mean_deg(angles_deg: np.ndarray, weights: np.ndarray | None = None) -> float:
    """Weighted mean of axial directions (lines without sense), 0-180 deg.

    Parameters
    ----------
    angles_deg : array_like
        Azimuths in degrees; ``a`` and ``a + 180`` are the same line.
    weights : array_like, optional
        Non-negative weights (e.g. trace length in m or heave integral in m2).

    Returns
    -------
    float
        Mean azimuth in [0, 180) degrees.

    Notes
    -----
    Doubled-angle mean of axial data (Mardia & Jupp 2000, *Directional
    Statistics*, sec. 9.3; common practice for strike data).
    """
    a = np.radians(np.asarray(angles_deg, dtype=float)) * 2.0
    w = np.ones_like(a) if weights is None else np.asarray(weights, dtype=float)
    ok = np.isfinite(a) & np.isfinite(w) & (w > 0)
    if not ok.any():
        raise AnalysisError("no fault with a usable strike and weight: check the traces and their heave")
    c = float(np.sum(w[ok] * np.cos(a[ok])))
    s = float(np.sum(w[ok] * np.sin(a[ok])))
    if math.hypot(c, s) < 1e-9 * float(np.sum(w[ok])):
        raise AnalysisError("fault strikes have no preferred direction: give the rift axis as a line")
    return (math.degrees(math.atan2(s, c)) / 2.0) % 180.0


def fault_heave_m2(faults: gpd.GeoDataFrame) -> tuple[np.ndarray, list[str]]:
    """Heave integral per fault (m2) with documented fallbacks.

    Parameters
    ----------
    faults : GeoDataFrame
        Fault traces (see DEVELOPERS.md); uses ``heave_integral_m2`` and, where
        it is missing, ``mean_throw_m`` or ``max_throw_m`` with ``dip_deg``.

    Returns
    -------
    heave : ndarray
        Along-strike heave integral per row, m2 (0 where nothing is known).
    warnings : list of str
        One message per fallback used.

    Notes
    -----
    Fallbacks (geometry): heave = throw / tan(dip); the integral is the mean
    heave times the trace length; when only the maximum throw is known, the
    mean throw is taken as half of it (a triangular throw profile, common
    practice).
    """
    n = len(faults)
    length = shapely.length(np.asarray(faults.geometry.values))
    dip = np.asarray(faults["dip_deg"], dtype=float) if "dip_deg" in faults else np.full(n, 60.0)
    dip = np.where(np.isfinite(dip) & (dip > 0), dip, 60.0)
    tan_dip = np.tan(np.radians(dip))
    out = np.full(n, np.nan)
    msgs: list[str] = []
    if "heave_integral_m2" in faults:
        out = np.asarray(faults["heave_integral_m2"], dtype=float).copy()
    miss = ~np.isfinite(out)
    if miss.any() and "mean_throw_m" in faults:
        alt = np.asarray(faults["mean_throw_m"], dtype=float) / tan_dip * length
        use = miss & np.isfinite(alt)
        out[use] = alt[use]
        if use.any():
            msgs.append(f"{int(use.sum())} fault(s) without heave_integral_m2: used mean_throw_m / tan(dip) x length")
        miss = ~np.isfinite(out)
    if miss.any() and "max_throw_m" in faults:
        alt = 0.5 * np.asarray(faults["max_throw_m"], dtype=float) / tan_dip * length
        use = miss & np.isfinite(alt)
        out[use] = alt[use]
        if use.any():
            msgs.append(f"{int(use.sum())} fault(s) without heave: used half of max_throw_m / tan(dip) x length")
        miss = ~np.isfinite(out)
    if miss.any():
        msgs.append(f"{int(miss.sum())} fault(s) have no throw or heave: they carry no heave weight (run the throw tool first)")
        out[miss] = 0.0
    return np.clip(out, 0.0, None), msgs


def _check_faults(faults: gpd.GeoDataFrame) -> gpd.GeoDataFrame:
    if not isinstance(faults, gpd.GeoDataFrame):
        raise InputError("faults must be a GeoDataFrame of LineStrings in the working CRS")
    if faults.crs is not None and faults.crs.is_geographic:
        raise InputError("faults are in a geographic CRS: reproject them to a projected metric CRS first")
    geom = np.asarray(faults.geometry.values)
    ok = ~(shapely.is_missing(geom) | shapely.is_empty(geom))
    types = shapely.get_type_id(geom)
    bad = ok & ~np.isin(types, (1, 5))
    if bad.any():
        raise GeometryError("faults must be LineStrings or MultiLineStrings: found other geometry types")
    if not ok.all():
        warnings.warn(f"{int((~ok).sum())} fault(s) with empty geometry ignored", FaultmapWarning, stacklevel=3)
        faults = faults.loc[ok]
    if len(faults) == 0:
        raise InputError("no fault traces to analyse: the faults layer is empty")
    return faults


def _fault_ids(faults: gpd.GeoDataFrame) -> np.ndarray:
    if "fault_id" in faults:
        return np.asarray(faults["fault_id"]).astype(np.int64)
    return np.arange(1, len(faults) + 1, dtype=np.int64)


def _pieces(faults: gpd.GeoDataFrame, max_piece_m: float, weight: str) -> dict[str, np.ndarray]:
    """Split traces into short straight pieces (vectorised)."""
    geoms = shapely.segmentize(np.asarray(faults.geometry.values), max_piece_m)
    parts, part_fault = shapely.get_parts(geoms, return_index=True)
    coords, cidx = shapely.get_coordinates(parts, return_index=True)
    same = cidx[1:] == cidx[:-1]
    p0 = coords[:-1][same]
    p1 = coords[1:][same]
    fidx = part_fault[cidx[:-1][same]]
    d = p1 - p0
    plen = np.hypot(d[:, 0], d[:, 1])
    keep = plen > 0
    p0, p1, fidx, plen, d = p0[keep], p1[keep], fidx[keep], plen[keep], d[keep]
    flen = shapely.length(np.asarray(faults.geometry.values))
    heave, _ = fault_heave_m2(faults)
    frac = plen / flen[fidx]
    w_heave = heave[fidx] * frac
    w = w_heave if weight == "heave" else plen
    return {
        "p0": p0,
        "p1": p1,
        "mid": 0.5 * (p0 + p1),
        "length": plen,
        "fault": fidx,
        "w": w,
        "w_heave": w_heave,
        "azimuth": np.degrees(np.arctan2(d[:, 0], d[:, 1])) % 180.0,
    }


def _choose_weight(faults: gpd.GeoDataFrame, weight: str) -> str:
    if weight not in ("heave", "length"):
        raise ParameterError(f"weight must be 'heave' or 'length', not {weight!r}")
    if weight == "heave":
        heave, msgs = fault_heave_m2(faults)
        if not np.any(heave > 0):
            warnings.warn("no fault has a heave: axis weighted by trace length instead", FaultmapWarning, stacklevel=3)
            return "length"
        for m in msgs:
            warnings.warn(m, FaultmapWarning, stacklevel=3)
    return weight


# ---------------------------------------------------------------------------
# axis frame
# ---------------------------------------------------------------------------


def _axis_arrays(axis: LineString) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    if not isinstance(axis, LineString) or axis.is_empty or axis.length <= 0:
        raise GeometryError("the rift axis must be a non-empty LineString of positive length")
    xy = np.asarray(axis.coords, dtype=float)[:, :2]
    seg = np.diff(xy, axis=0)
    slen = np.hypot(seg[:, 0], seg[:, 1])
    keep = np.concatenate([[True], slen > 0])
    xy = xy[keep]
    seg = np.diff(xy, axis=0)
    slen = np.hypot(seg[:, 0], seg[:, 1])
    cum = np.concatenate([[0.0], np.cumsum(slen)])
    return xy, seg / slen[:, None], slen, cum


def axis_point_direction(axis: LineString, along_m: np.ndarray, *, smooth_m: float | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Points and unit tangents of the axis at along-axis distances.

    Parameters
    ----------
    axis : LineString
        Rift axis in the working CRS.
    along_m : array_like
        Distances along the axis from its first vertex, m. Values outside
        [0, length] are extrapolated along the end segments.
    smooth_m : float, optional
        Half-window (m) of the central difference giving the tangent; default
        1 % of the axis length.

    Returns
    -------
    xy : ndarray, shape (n, 2)
        Points on the (extended) axis, m.
    tangent : ndarray, shape (n, 2)
        Unit tangent (east, north) components.
    """
    xy, t, _, cum = _axis_arrays(axis)
    s = np.atleast_1d(np.asarray(along_m, dtype=float))

    def at(sv: np.ndarray) -> np.ndarray:
        k = np.clip(np.searchsorted(cum, sv, side="right") - 1, 0, len(t) - 1)
        return xy[k] + t[k] * (sv - cum[k])[:, None]

    h = 0.01 * cum[-1] if smooth_m is None else float(smooth_m)
    tan = at(s + h) - at(s - h)
    tan /= np.hypot(tan[:, 0], tan[:, 1])[:, None]
    return at(s), tan


def axis_coordinates(axis: LineString, x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Along- and across-axis coordinates of points in a (curved) axis frame.

    Parameters
    ----------
    axis : LineString
        Rift axis in the working CRS.
    x, y : array_like
        Point coordinates in the working CRS, m.

    Returns
    -------
    along_m : ndarray
        Distance along the axis of the nearest axis point, m; points beyond an
        end are measured along the extended end segment (negative before the
        start, beyond the length after the end).
    across_m : ndarray
        Signed perpendicular distance, m, positive to the right of the axis
        direction.
    """
    xy, t, _, cum = _axis_arrays(axis)
    px = np.asarray(x, dtype=float).ravel()
    py = np.asarray(y, dtype=float).ravel()
    s = shapely.line_locate_point(axis, shapely.points(px, py))
    k = np.clip(np.searchsorted(cum, s, side="right") - 1, 0, len(t) - 1)
    q = xy[k] + t[k] * (s - cum[k])[:, None]
    dx = px - q[:, 0]
    dy = py - q[:, 1]
    tk = t[k]
    across = dx * tk[:, 1] - dy * tk[:, 0]
    ext = dx * tk[:, 0] + dy * tk[:, 1]
    at_end = (s <= 0.0) | (s >= cum[-1])
    along = s + np.where(at_end, ext, 0.0)
    return along, across


def _binned(s: np.ndarray, w: np.ndarray, cols: list[np.ndarray], bin_m: float) -> tuple[np.ndarray, np.ndarray, list[np.ndarray]]:
    """Weighted bin centroids of s and weighted bin means of cols (np.bincount)."""
    b = np.floor((s - s.min()) / bin_m).astype(np.int64)
    nb = int(b.max()) + 1
    wb = np.bincount(b, weights=w, minlength=nb)
    has = wb > 0
    sb = np.bincount(b, weights=w * s, minlength=nb)[has] / wb[has]
    means = [np.bincount(b, weights=w * c, minlength=nb)[has] / wb[has] for c in cols]
    return sb, wb[has], means


def _kernel(sb: np.ndarray, wb: np.ndarray, nodes: np.ndarray, h: float) -> np.ndarray:
    """Gaussian kernel weights (nodes x bins) times bin weights."""
    return wb[None, :] * np.exp(-0.5 * ((sb[None, :] - nodes[:, None]) / h) ** 2)


def _axis_pass(
    s: np.ndarray, n: np.ndarray, dev_deg: np.ndarray, w: np.ndarray, nodes: np.ndarray, h: float, h_pos: float, bin_m: float
) -> np.ndarray:
    """Across-axis offsets of a new axis at nodes, in the current frame.

    Shape from the smoothed local strike deviation (integrated slope),
    position from the smoothed across-axis centroids of the residuals.
    """
    two = np.radians(2.0 * dev_deg)
    sb, wb, (cb, snb) = _binned(s, w, [np.cos(two), np.sin(two)], bin_m)
    k = _kernel(sb, wb, nodes, h)
    dev = 0.5 * np.arctan2(k @ snb, k @ cb)
    slope = np.tan(np.clip(dev, -math.radians(60.0), math.radians(60.0)))
    shape = np.concatenate([[0.0], np.cumsum(0.5 * (slope[1:] + slope[:-1]) * np.diff(nodes))])
    resid = n - np.interp(s, nodes, shape)
    sb, wb, (rb,) = _binned(s, w, [resid], bin_m)
    k = _kernel(sb, wb, nodes, h_pos)
    ks = k.sum(1)
    off = np.where(ks > 0, (k @ rb) / np.where(ks > 0, ks, 1.0), np.average(rb, weights=wb))
    return shape + off


def fit_rift_axis(
    faults: gpd.GeoDataFrame,
    *,
    weight: Literal["heave", "length"] = "heave",
    smoothing_m: float | None = None,
    n_iter: int = 1,
    n_vertices: int = 201,
) -> LineString:
    """Fit a (possibly bending) rift axis to a fault population.

    Parameters
    ----------
    faults : GeoDataFrame
        Fault traces, projected metric CRS; ``heave_integral_m2`` is used for
        heave weighting (see :func:`fault_heave_m2`).
    weight : {'heave', 'length'}
        Weight of each trace piece: its share of the fault's heave integral
        (m2), or its length (m).
    smoothing_m : float, optional
        Gaussian bandwidth (m) of the along-axis smoothing of the local
        strike (the centroids use twice it); default the larger of one eighth
        of the population's along-axis extent and half its across-axis
        spread (5-95 % of the weight about a straight fit), and the centroid
        bandwidth at least that spread, so that the curved frame stays
        single-valued for wide rifts.
    n_iter : int
        Refinements in the curved frame of the previous axis (default 1).
    n_vertices : int
        Vertices of the returned axis.

    Returns
    -------
    LineString
        Axis from the first to the last along-axis extent of the faults,
        oriented along the mean strike (azimuth 0-180 deg).

    Notes
    -----
    1. The first axis direction is the weighted axial mean strike
       (doubled-angle mean, Mardia & Jupp 2000) of the trace pieces, through
       their weighted centre.
    2. In that frame, pieces are binned by along-axis coordinate
       (np.bincount). The shape of the axis follows the Gaussian-kernel
       smoothed local strike of the pieces (its deviation from the frame,
       integrated along the axis); its position follows the kernel-smoothed
       weighted across-axis centroids of the residuals (Nadaraya 1964,
       Watson 1964 kernel regression) with twice the bandwidth.
    3. ``n_iter`` times, the pieces are re-projected in the curved frame of
       the previous axis and step 2 moves the axis along its local normal,
       so that a bending rift is followed.
    The procedure is ours; it assumes the faults strike roughly parallel to
    the rift (common practice for rift-bounding normal faults). Oblique
    (en echelon) fault sets give an axis along their mean strike; give the
    axis as a line in that case.
    """
    faults = _check_faults(faults)
    weight = _choose_weight(faults, weight)
    return _fit_axis(faults, weight=weight, smoothing_m=smoothing_m, n_iter=n_iter, n_vertices=n_vertices)[0]


def _fit_axis(
    faults: gpd.GeoDataFrame, *, weight: str, smoothing_m: float | None, n_iter: int, n_vertices: int
) -> tuple[LineString, float]:
    if n_iter < 0 or n_vertices < 2:
        raise ParameterError("n_iter must be >= 0 and n_vertices >= 2")
    if smoothing_m is not None and not smoothing_m > 0:
        raise ParameterError("smoothing_m must be positive")
    bounds = faults.total_bounds
    extent = float(math.hypot(bounds[2] - bounds[0], bounds[3] - bounds[1]))
    pc = _pieces(faults, max(extent / 400.0, 1.0), weight)
    w = pc["w"]
    keep = w > 0
    if not keep.any():
        raise AnalysisError("fault pieces carry no weight: check heave_integral_m2 or use weight='length'")
    mid, az, w = pc["mid"][keep], pc["azimuth"][keep], w[keep]
    ends = np.concatenate([pc["p0"][keep], pc["p1"][keep]])
    theta = axial_mean_deg(az, w)
    u = np.array([math.sin(math.radians(theta)), math.cos(math.radians(theta))])
    r = np.array([u[1], -u[0]])
    c = np.average(mid, axis=0, weights=w)
    s = (mid - c) @ u
    n = (mid - c) @ r
    se = (ends - c) @ u
    lo, hi = float(se.min()), float(se.max())
    span = hi - lo
    if span <= 0:
        raise AnalysisError("faults have no along-axis extent: give the rift axis as a line")
    if smoothing_m is None:
        q5, q95 = _weighted_quantiles(n - np.polyval(np.polyfit(s, n, 1, w=np.sqrt(w)), s), w, np.array([0.05, 0.95]))
        spread = float(q95 - q5)
        h = max(span / 8.0, 0.5 * spread)
        h_pos = max(2.0 * h, spread)
    else:
        h = float(smoothing_m)
        h_pos = 2.0 * h
    bin_m = max(h / 8.0, span / 2000.0)
    nodes = np.linspace(lo, hi, n_vertices)
    dev = (az - theta + 90.0) % 180.0 - 90.0
    off = _axis_pass(s, n, dev, w, nodes, h, h_pos, bin_m)
    axis = LineString(c + nodes[:, None] * u + off[:, None] * r)
    for _ in range(int(n_iter)):
        s, n = axis_coordinates(axis, mid[:, 0], mid[:, 1])
        se, _ = axis_coordinates(axis, ends[:, 0], ends[:, 1])
        _, tan_s = axis_point_direction(axis, s, smooth_m=h / 8.0)
        frame_az = np.degrees(np.arctan2(tan_s[:, 0], tan_s[:, 1]))
        dev = (az - frame_az + 90.0) % 180.0 - 90.0
        lo, hi = float(se.min()), float(se.max())
        nodes = np.linspace(lo, hi, n_vertices)
        off = _axis_pass(s, n, dev, w, nodes, h, h_pos, bin_m)
        p, t = axis_point_direction(axis, nodes, smooth_m=h / 8.0)
        normal = np.column_stack([t[:, 1], -t[:, 0]])
        axis = LineString(p + off[:, None] * normal)
    return axis, h


def rift_axis(
    faults: gpd.GeoDataFrame,
    *,
    line: LineString | None = None,
    weight: Literal["heave", "length"] = "heave",
    smoothing_m: float | None = None,
    n_iter: int = 1,
) -> gpd.GeoDataFrame:
    """Build the ``rift_axis`` layer: fitted to the faults or taken from a user line.

    Parameters
    ----------
    faults : GeoDataFrame
        Fault traces in the working CRS.
    line : LineString, optional
        User-drawn axis (working CRS). When given it is used as is, reversed
        if needed so that it runs along the 0-180 deg half of its mean
        direction.
    weight, smoothing_m, n_iter
        See :func:`fit_rift_axis`.

    Returns
    -------
    GeoDataFrame
        One row: ``axis_id``, ``source`` (``faults`` or ``user``),
        ``weight``, ``smoothing_m``, ``length_m``, ``mean_strike_deg`` (of
        the faults, weighted), ``axis_azimuth_deg`` (start to end), geometry.

    Notes
    -----
    See :func:`fit_rift_axis` for the method and its sources.
    """
    faults = _check_faults(faults)
    weight_used = _choose_weight(faults, weight)
    pc = _pieces(faults, 1e12, weight_used)
    strike = axial_mean_deg(pc["azimuth"], pc["w"]) if np.any(pc["w"] > 0) else float("nan")
    if line is None:
        geom, smoothing_m = _fit_axis(faults, weight=weight_used, smoothing_m=smoothing_m, n_iter=n_iter, n_vertices=201)
        source = "faults"
    else:
        if not isinstance(line, LineString):
            raise GeometryError("the user rift axis must be a single LineString")
        _axis_arrays(line)
        xy = np.asarray(line.coords)[:, :2]
        d = xy[-1] - xy[0]
        az = math.degrees(math.atan2(d[0], d[1])) % 360.0
        geom = LineString(xy[::-1]) if 90.0 < az <= 270.0 else LineString(xy)
        source = "user"
    xy = np.asarray(geom.coords)
    d = xy[-1] - xy[0]
    return gpd.GeoDataFrame(
        {
            "axis_id": [1],
            "source": [source],
            "weight": [weight_used],
            "smoothing_m": [float(smoothing_m) if smoothing_m is not None else np.nan],
            "length_m": [float(geom.length)],
            "mean_strike_deg": [strike],
            "axis_azimuth_deg": [math.degrees(math.atan2(d[0], d[1])) % 360.0],
        },
        geometry=[geom],
        crs=faults.crs,
    )


# ---------------------------------------------------------------------------
# sections and widths
# ---------------------------------------------------------------------------


def _weighted_quantiles(v: np.ndarray, w: np.ndarray, q: np.ndarray) -> np.ndarray:
    ok = np.isfinite(v) & (w > 0)
    if not ok.any():
        return np.full(len(q), np.nan)
    order = np.argsort(v[ok])
    vs = v[ok][order]
    ws = w[ok][order]
    cum = np.cumsum(ws)
    f = (cum - 0.5 * ws) / cum[-1]
    return np.interp(q, f, vs)


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
        Rift axis (from :func:`rift_axis`).
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
        :func:`classify_rift`).

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


# ---------------------------------------------------------------------------
# classification
# ---------------------------------------------------------------------------


def heave_concentration(
    faults: gpd.GeoDataFrame,
    *,
    top_fraction: float = 0.1,
    by_system: bool = True,
) -> dict[str, float]:
    """How much of the total heave the largest faults (or systems) carry.

    Parameters
    ----------
    faults : GeoDataFrame
        Fault traces with heave (see :func:`fault_heave_m2`).
    top_fraction : float
        Fraction of the largest units whose heave share is reported
        (default 0.1: the top 10 %, at least one unit).
    by_system : bool
        Sum heave over linked systems (``system_id``) first, so that a
        segmented border fault counts as one unit.

    Returns
    -------
    dict
        ``n_units``, ``top_k``, ``top_share`` (share of total heave on the
        ``top_k`` largest units), ``top3_share``, ``gini`` (0 = equal heave on
        every unit, towards 1 = all heave on one unit).

    Notes
    -----
    Gini coefficient (Gini 1912) of the heave per unit, computed as
    ``G = 2 sum(i x_i) / (n sum x) - (n + 1) / n`` on ascending values.
    Using the heave share of the largest faults as a measure of strain
    localisation is common practice (e.g. the "border fault" argument for
    narrow rifts); the thresholds used with it are ours.
    """
    if not 0.0 < top_fraction <= 1.0:
        raise ParameterError("top_fraction must be in (0, 1]")
    heave, _ = fault_heave_m2(faults)
    if by_system and "system_id" in faults:
        sid = pd.Series(np.asarray(faults["system_id"], dtype=float))
        key = sid.where(sid.notna(), -1.0 - np.arange(len(sid)))
        units = pd.Series(heave).groupby(key.to_numpy()).sum().to_numpy()
    else:
        units = heave
    units = np.sort(units[np.isfinite(units)])[::-1]
    n = int(units.size)
    total = float(units.sum())
    k = max(1, int(math.ceil(top_fraction * n - 1e-9)))
    if n == 0 or total <= 0:
        return {"n_units": n, "top_k": k, "top_share": np.nan, "top3_share": np.nan, "gini": np.nan}
    asc = units[::-1]
    i = np.arange(1, n + 1)
    gini = float(2.0 * np.sum(i * asc) / (n * total) - (n + 1.0) / n)
    return {
        "n_units": n,
        "top_k": k,
        "top_share": float(units[:k].sum() / total),
        "top3_share": float(units[:3].sum() / total),
        "gini": gini,
    }


def _ramp(x: float, narrow_at: float, wide_at: float) -> float:
    """-1 at or beyond narrow_at, +1 at or beyond wide_at, linear between."""
    return float(np.clip(-1.0 + 2.0 * (x - narrow_at) / (wide_at - narrow_at), -1.0, 1.0))


def classify_rift(
    sections: pd.DataFrame,
    faults: gpd.GeoDataFrame,
    *,
    narrow_max_km: float = 100.0,
    wide_min_km: float = 175.0,
    localised_share: float = 0.5,
    distributed_share: float = 0.25,
    top_fraction: float = 0.1,
    min_units: int = 10,
    by_system: bool = True,
    heat_flow_mw_m2: float | None = None,
    crust_thickness_m: float | None = None,
    decision_score: float = 0.33,
    topography: pd.DataFrame | None = None,
) -> pd.DataFrame:
    """Classify a rift as ``narrow``, ``wide`` or ``indeterminate``.

    Parameters
    ----------
    sections : DataFrame
        ``rift_sections`` from :func:`rift_sections` (``width_km``,
        ``width_heave90_km``).
    faults : GeoDataFrame
        Fault traces with heave (for the localisation measure).
    narrow_max_km : float
        Median width at or below which the width evidence says narrow
        (default 100 km; common practice: narrow rifts are under ~100 km).
    wide_min_km : float
        Median width at or above which the width evidence says wide
        (default 175 km, middle of the ~150-200 km found in texts).
    localised_share, distributed_share : float
        Heave share of the top ``top_fraction`` of faults (or systems) at or
        above which extension counts as localised (narrow, default 0.5), and
        at or below which it counts as distributed (wide, default 0.25).
    top_fraction : float
        Fraction of the largest faults/systems used (default 0.1).
    min_units : int
        Fewer faults/systems than this: the localisation evidence is not used.
    by_system : bool
        Group faults by ``system_id`` for the localisation measure.
    heat_flow_mw_m2 : float, optional
        Surface heat flow (mW/m2) at the onset of rifting, if known.
    crust_thickness_m : float, optional
        Crustal thickness (m) before rifting, if known.
    decision_score : float
        Score magnitude needed to decide (default 0.33).
    topography : DataFrame, optional
        Per-section swath features (``topo_width_km``, ``relief_m`` from
        :func:`faultmap.swath.swath_features`), reported but not scored.

    Returns
    -------
    DataFrame
        ``rift_summary``: one row with ``class``, ``score``,
        ``median_width_km``, ``median_width_heave90_km``, ``n_sections``,
        ``n_sections_measured``, the evidence scores (``width_score``,
        ``localisation_score``, ``heat_flow_score``, ``crust_score``; NaN when
        not used), ``top_share``, ``top_k``, ``n_units``, ``top3_share``,
        ``gini``, ``median_topo_width_km``, ``median_relief_m`` and
        ``reasons`` in plain words.

    Notes
    -----
    The rule (ours: no published single-number criterion exists, see
    ``docs/methods/width.md``):

    * Each line of evidence gets a score from -1 (narrow) to +1 (wide),
      linear between its two anchors:
      width: median ``width_km`` from ``narrow_max_km`` to ``wide_min_km``;
      localisation: heave share of the top ``top_fraction`` units from
      ``localised_share`` (-1) to ``distributed_share`` (+1);
      heat flow: 60 to 80 mW/m2 and crust: 30 to 40 km, the narrow- and
      wide-mode values of Buck (1991, JGR 96); Buck's core-complex mode
      (~100 mW/m2, ~50 km) counts as wide-family (+1) and is named.
    * ``score`` = weighted mean of the available scores (weights: width 2,
      localisation 1, heat flow 0.5, crust 0.5).
    * ``narrow`` if score <= -``decision_score``; ``wide`` if score >=
      +``decision_score``; otherwise ``indeterminate``. No measurable width:
      ``indeterminate``.

    The width anchors follow common practice (narrow rifts under ~100 km,
    wide rifts hundreds of km; Buck 1991, Brun 1999).
    """
    if not narrow_max_km < wide_min_km:
        raise ParameterError("narrow_max_km must be smaller than wide_min_km")
    if not 0.0 <= distributed_share < localised_share <= 1.0:
        raise ParameterError("need 0 <= distributed_share < localised_share <= 1")
    if not 0.0 < decision_score <= 1.0:
        raise ParameterError("decision_score must be in (0, 1]")
    widths = np.asarray(sections["width_km"], dtype=float)
    measured = np.isfinite(widths)
    n_sec = int(widths.size)
    n_meas = int(measured.sum())
    med = float(np.median(widths[measured])) if n_meas else float("nan")
    w90 = np.asarray(sections["width_heave90_km"], dtype=float) if "width_heave90_km" in sections else np.full(n_sec, np.nan)
    med90 = float(np.nanmedian(w90)) if np.any(np.isfinite(w90)) else float("nan")
    conc = heave_concentration(faults, top_fraction=top_fraction, by_system=by_system)
    unit = "fault systems" if (by_system and "system_id" in faults) else "faults"

    scores: dict[str, float] = {}
    reasons: list[str] = []
    if n_meas:
        scores["width"] = _ramp(med, narrow_max_km, wide_min_km)
        if med <= narrow_max_km:
            where = f"at or below the {narrow_max_km:g} km narrow limit"
        elif med >= wide_min_km:
            where = f"at or above the {wide_min_km:g} km wide threshold"
        else:
            where = f"between the {narrow_max_km:g} km narrow limit and the {wide_min_km:g} km wide threshold"
        reasons.append(
            f"median width between outermost faults {med:.1f} km over {n_meas} of {n_sec} sections is {where} "
            f"(width score {scores['width']:+.2f}); central-90%-heave width {med90:.1f} km"
        )
    else:
        reasons.append(f"no section of {n_sec} has two faults above the throw threshold, so no width was measured")

    share = conc["top_share"]
    if conc["n_units"] >= min_units and np.isfinite(share):
        scores["localisation"] = _ramp(-share, -localised_share, -distributed_share)
        if share >= localised_share:
            how = f"at or above the {localised_share:.0%} localised level"
        elif share <= distributed_share:
            how = f"at or below the {distributed_share:.0%} distributed level"
        else:
            how = f"between the {distributed_share:.0%} distributed and {localised_share:.0%} localised levels (intermediate localisation)"
        reasons.append(
            f"the {conc['top_k']} largest of {conc['n_units']} {unit} (top {top_fraction:.0%}) carry {share:.0%} of the total heave, "
            f"{how} (localisation score {scores['localisation']:+.2f}; Gini {conc['gini']:.2f})"
        )
    else:
        reasons.append(f"only {conc['n_units']} {unit} (fewer than {min_units}): heave localisation not used")

    nm, wm, cm = BUCK_MODES["narrow"], BUCK_MODES["wide"], BUCK_MODES["core_complex"]
    if heat_flow_mw_m2 is not None and np.isfinite(heat_flow_mw_m2):
        q = float(heat_flow_mw_m2)
        scores["heat_flow"] = _ramp(q, nm["heat_flow_mw_m2"], wm["heat_flow_mw_m2"])
        modes = {k: abs(q - v["heat_flow_mw_m2"]) for k, v in BUCK_MODES.items()}
        near = min(modes, key=modes.get).replace("_", "-")
        reasons.append(
            f"heat flow {q:.0f} mW/m2 is nearest Buck's (1991) {near} mode (narrow ~{nm['heat_flow_mw_m2']:.0f}, wide "
            f"~{wm['heat_flow_mw_m2']:.0f}, core complex ~{cm['heat_flow_mw_m2']:.0f}) (heat-flow score {scores['heat_flow']:+.2f})"
        )
    if crust_thickness_m is not None and np.isfinite(crust_thickness_m):
        tc = float(crust_thickness_m) / 1000.0
        scores["crust"] = _ramp(tc, nm["crust_thickness_km"], wm["crust_thickness_km"])
        modes = {k: abs(tc - v["crust_thickness_km"]) for k, v in BUCK_MODES.items()}
        near = min(modes, key=modes.get).replace("_", "-")
        reasons.append(
            f"crust {tc:.0f} km thick is nearest Buck's (1991) {near} mode (narrow ~{nm['crust_thickness_km']:.0f} km, wide "
            f"~{wm['crust_thickness_km']:.0f} km, core complex ~{cm['crust_thickness_km']:.0f} km) (crust score {scores['crust']:+.2f})"
        )

    topo_w = relief = float("nan")
    if topography is not None and len(topography):
        tw = np.asarray(topography["topo_width_km"], dtype=float)
        rl = np.asarray(topography["relief_m"], dtype=float)
        if np.any(np.isfinite(tw)):
            topo_w = float(np.nanmedian(tw))
            relief = float(np.nanmedian(rl)) if np.any(np.isfinite(rl)) else float("nan")
            reasons.append(f"topographic width crest to crest {topo_w:.1f} km, relief {relief:.0f} m (reported, not scored)")

    if "width" in scores:
        wsum = sum(EVIDENCE_WEIGHTS[k] for k in scores)
        score = sum(EVIDENCE_WEIGHTS[k] * v for k, v in scores.items()) / wsum
        if score <= -decision_score:
            cls = "narrow"
        elif score >= decision_score:
            cls = "wide"
        else:
            cls = "indeterminate"
        verdict = {
            "narrow": f"score {score:+.2f} <= -{decision_score:.2f}: narrow",
            "wide": f"score {score:+.2f} >= +{decision_score:.2f}: wide",
            "indeterminate": f"score {score:+.2f} lies within +-{decision_score:.2f}: indeterminate (the evidence does not decide)",
        }[cls]
    else:
        score = float("nan")
        cls = "indeterminate"
        verdict = "indeterminate: the width could not be measured"
    reasons.append(verdict)
    rule = (
        "rule: each evidence scored -1 (narrow) to +1 (wide); score = weighted mean "
        "(width 2, localisation 1, heat flow 0.5, crust 0.5); "
        f"narrow <= -{decision_score:.2f} < indeterminate < +{decision_score:.2f} <= wide"
    )
    reasons.append(rule)
    return pd.DataFrame(
        [
            {
                "class": cls,
                "score": score,
                "median_width_km": med,
                "median_width_heave90_km": med90,
                "n_sections": n_sec,
                "n_sections_measured": n_meas,
                "width_score": scores.get("width", np.nan),
                "localisation_score": scores.get("localisation", np.nan),
                "heat_flow_score": scores.get("heat_flow", np.nan),
                "crust_score": scores.get("crust", np.nan),
                "top_share": share,
                "top_k": conc["top_k"],
                "n_units": conc["n_units"],
                "top3_share": conc["top3_share"],
                "gini": conc["gini"],
                "median_topo_width_km": topo_w,
                "median_relief_m": relief,
                "narrow_max_km": narrow_max_km,
                "wide_min_km": wide_min_km,
                "reasons": "; ".join(reasons),
            }
        ]
    )
