"""The rift axis: fitted to a fault population (it may bend) or taken from a user line.

The axis is oriented along the mean strike (0-180 deg), the axial mean of
the heave- or length-weighted trace pieces; its shape and position follow
kernel-smoothed local strikes and across-axis centroids of the pieces
(:func:`fit_rift_axis`). Pure functions in the projected metric working
CRS, no file I/O.
"""

from __future__ import annotations

import math
from typing import Literal

import geopandas as gpd
import numpy as np
from shapely.geometry import LineString

from faultmap.errors import AnalysisError, GeometryError, ParameterError
from faultmap.numerics.directions import axial_mean_deg as _axial_mean
from faultmap.numerics.directions import axial_resultant_length
from faultmap.rift.axis_frame import _axis_arrays, axis_coordinates, axis_point_direction
from faultmap.rift.heave import _check_faults, _choose_weight, _pieces, _weighted_quantiles

__all__ = ["axial_mean_deg", "fit_rift_axis", "rift_axis"]


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
    az = np.asarray(angles_deg, dtype=float)[ok]
    if axial_resultant_length(az, w[ok]) < 1e-9:
        raise AnalysisError("fault strikes have no preferred direction: give the rift axis as a line")
    return float(_axial_mean(az, w[ok])[0])


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
        heave weighting (see :func:`~faultmap.rift.heave.fault_heave_m2`).
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

