"""Throw, heave and vertical separation along fault traces, from a DEM.

The measurement, station by station (all stations of a batch at once):

1. Stations every ``station_spacing_m`` along each trace, with the trace
   normal smoothed over ``normal_window_m`` (:mod:`faultmap.stations`).
2. A profile across the trace at each station, sampled every
   ``sample_step_m`` (about one pixel) by bilinear interpolation of the DEM;
   voids stay NaN. Where another trace crosses a profile, that side stops
   short of the crossing so a neighbour's scarp never enters the fit.
3. On each side, outside a scarp zone that widens to where the profile
   departs from the far-field surface, a robust straight line (iteratively
   reweighted least squares, Tukey biweight by default) fits the ground
   surface over 2-3 scarp widths; both lines are projected to the trace.
   Their difference is the vertical separation; the Caskey (1995) relation
   turns it into throw using the surface slope and the fault dip.
4. Per fault: a robust, smoothed along-strike throw profile gives the
   maximum throw and its position, the mean throw, the along-strike heave
   integral and tip gradients; the down-thrown side is inferred from the
   DEM where the dip direction is unknown.
5. Along linked systems, throw minima between segments mark linkage zones.

Everything here is a pure function of arrays / GeoDataFrames and a lazy
:class:`faultmap.io.dem.Dem` (which reads windows of the raster on demand);
batches are independent so that an engine can run them anywhere.
"""

from __future__ import annotations

import math
import warnings as _warnings
from collections.abc import Callable
from dataclasses import asdict, dataclass, replace
from typing import Any

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely
from scipy import ndimage

from faultmap.errors import CRSError, InputError, ParameterError
from faultmap.stations import (
    StationSet,
    crossing_limits,
    place_stations,
    side_signs,
    station_distances,
    strike_axis_deg,
)

__all__ = [
    "ThrowParams",
    "ThrowBatch",
    "ThrowResult",
    "STATUS_VALUES",
    "resolve_params",
    "separation_from_throw",
    "throw_from_separation",
    "robust_line_fits",
    "fit_profile_matrix",
    "measure_profiles",
    "measure_batch",
    "plan_batches",
    "finalise_stations",
    "infer_downthrown_side",
    "summarise_faults",
    "linkage_zones",
    "system_profile",
    "measure_throw",
]

#: Station status values, in order of precedence.
STATUS_VALUES = ("ok", "outside", "truncated", "nodata", "poor_fit")

_F32 = np.float32


# ---------------------------------------------------------------------------
# Caskey (1995): vertical separation <-> throw
# ---------------------------------------------------------------------------
def separation_from_throw(throw_m, *, dip_deg, surface_slope_deg):
    """Vertical separation of a planar ground surface offset by a dip-slip fault.

    Parameters
    ----------
    throw_m : array_like
        Throw (vertical component of the dip slip), metres.
    dip_deg : array_like
        Fault dip, degrees (0 < dip <= 90).
    surface_slope_deg : array_like
        Slope of the ground surface in the dip direction, degrees, positive
        when the surface descends towards the hanging wall (the usual
        range-front case), negative when it rises towards it.

    Returns
    -------
    ndarray
        Vertical separation measured at the fault, metres.

    Notes
    -----
    Caskey (1995, J. Struct. Geol. 17): with the hanging wall moved down by
    the throw T and away by the heave h = T / tan(dip),
    VS = T - h tan(theta) when the surface slopes down in the dip direction,
    VS = T + h tan(theta) the other way. One formula covers both with a
    signed slope: VS = T (1 - tan(theta) / tan(dip)).
    """
    t = np.asarray(throw_m, dtype=float)
    td = np.tan(np.radians(np.asarray(dip_deg, dtype=float)))
    ts = np.tan(np.radians(np.asarray(surface_slope_deg, dtype=float)))
    return t * (1.0 - ts / td)


def throw_from_separation(vert_sep_m, *, dip_deg, surface_slope_deg):
    """Throw from the vertical separation of a planar surface.

    The inverse of :func:`separation_from_throw`.

    Notes
    -----
    Caskey (1995): T = VS tan(dip) / (tan(dip) - tan(theta)), theta the
    surface slope, positive descending towards the hanging wall.
    """
    vs = np.asarray(vert_sep_m, dtype=float)
    td = np.tan(np.radians(np.asarray(dip_deg, dtype=float)))
    ts = np.tan(np.radians(np.asarray(surface_slope_deg, dtype=float)))
    with np.errstate(divide="ignore", invalid="ignore"):
        return vs * td / (td - ts)


# ---------------------------------------------------------------------------
# Parameters
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class ThrowParams:
    """Resolved measurement parameters (all lengths in metres).

    Build with :func:`resolve_params`, which adapts the unset ones to the
    DEM's pixel size and checks ranges.
    """

    pixel_size_m: float
    sample_step_m: float
    station_spacing_m: float
    normal_window_m: float
    scarp_halfwidth_m: float
    profile_half_length_m: float | None
    min_half_length_m: float
    max_half_length_m: float
    length_fraction: float
    far_field_widths: float
    min_far_field_m: float
    min_samples_per_side: int
    robust_loss: str
    robust_tuning: float
    robust_iterations: int
    scarp_iterations: int
    scarp_tolerance_frac: float
    crossing_margin_m: float
    memory_budget_mb: float
    smooth_stations: float | None
    min_caskey_factor: float
    min_inlier_fraction: float
    min_stations: int = 24

    @property
    def adaptive(self) -> bool:
        """Whether profile half-lengths adapt per fault and per station."""
        return self.profile_half_length_m is None

    def half_length_for(self, length_m) -> np.ndarray:
        """First-pass profile half-length of faults of these lengths, metres.

        Fixed when ``profile_half_length_m`` is set; otherwise
        ``length_fraction`` of the trace length, kept between
        ``min_half_length_m`` and ``max_half_length_m`` (stations whose
        scarp turns out wider are measured again with longer profiles).
        """
        L = np.asarray(length_m, dtype=float)
        if self.profile_half_length_m is not None:
            return np.full(L.shape, float(self.profile_half_length_m))
        return np.clip(self.length_fraction * L, self.min_half_length_m, self.max_half_length_m)

    def spacing_for(self, length_m) -> np.ndarray:
        """Station spacing of faults of these lengths, metres.

        ``station_spacing_m``, reduced on short faults so that each carries
        at least ``min_stations`` stations, but never under 2 pixels.
        """
        L = np.asarray(length_m, dtype=float)
        return np.clip(L / self.min_stations, 2.0 * self.pixel_size_m, self.station_spacing_m).astype(float)

    def as_dict(self) -> dict:
        """Plain dict of the parameters (for run_info)."""
        return asdict(self)


def _check_number(name, value, *, lo=None, hi=None, lo_open=False, integer=False):
    if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)):
        raise ParameterError(f"parameter '{name}' must be a number, got {value!r}.")
    v = float(value)
    if not math.isfinite(v):
        raise ParameterError(f"parameter '{name}' must be finite, got {value!r}.")
    if integer and not v.is_integer():
        raise ParameterError(f"parameter '{name}' must be a whole number, got {value!r}.")
    if lo is not None and (v < lo or (lo_open and v <= lo)):
        raise ParameterError(f"parameter '{name}' must be {'>' if lo_open else '>='} {lo:g}, got {v:g}.")
    if hi is not None and v > hi:
        raise ParameterError(f"parameter '{name}' must be <= {hi:g}, got {v:g}.")
    return int(v) if integer else v


def resolve_params(
    pixel_size_m: float,
    *,
    station_spacing_m: float | None = None,
    profile_half_length_m: float | None = None,
    scarp_halfwidth_m: float | None = None,
    normal_window_m: float | None = None,
    min_samples_per_side: int = 10,
    robust_loss: str = "tukey",
    robust_tuning: float | None = None,
    robust_iterations: int = 3,
    scarp_iterations: int = 3,
    far_field_widths: float = 2.5,
    max_half_length_m: float | None = None,
    memory_budget_mb: float = 512.0,
    smooth_stations: float | None = None,
    min_stations_per_fault: int = 24,
    sample_step_m: float | None = None,
) -> ThrowParams:
    """Check the user's parameters and adapt the unset ones to the DEM.

    Parameters
    ----------
    pixel_size_m : float
        DEM pixel size, metres.
    station_spacing_m : float, optional
        Distance between stations along a trace; default 10 pixels, never
        under 2 pixels.
    profile_half_length_m : float, optional
        Fixed profile half-length. Default: adapted per fault (10 % of the
        trace length, 40 to 400 pixels) and lengthened per station where the
        scarp is broad, so that 2-3 scarp widths of undisturbed surface are
        reached on each side.
    scarp_halfwidth_m : float, optional
        Smallest half-width of the scarp zone left out of the fits; default
        3 pixels. Widened per station and side where the profile departs
        from the far-field surface farther out.
    normal_window_m : float, optional
        Trace length over which the station normal is averaged; default
        twice the station spacing, at least 20 pixels.
    min_samples_per_side : int
        Fewest valid samples a side's fit may use (>= 3).
    robust_loss : {"tukey", "huber", "none"}
        Weight function of the iteratively reweighted line fits.
    robust_tuning : float, optional
        Tuning constant in units of the robust residual scale; default 4.685
        (Tukey) or 1.345 (Huber), 95 % efficiency under Gaussian noise
        (Holland & Welsch 1977).
    robust_iterations : int
        Reweighting iterations per fit.
    scarp_iterations : int
        Scarp-zone refinements (each re-detects the scarp edges and refits).
    far_field_widths : float
        Undisturbed surface fitted on each side, in scarp widths.
    max_half_length_m : float, optional
        Longest profile half-length the adaptation may reach; default 400
        pixels.
    memory_budget_mb : float
        Memory for DEM windows and sample arrays of one batch, MB.
    smooth_stations : float, optional
        Gaussian smoothing of the along-strike profile, in station spacings
        (0 = none); default chosen per fault by cross-validation.
    min_stations_per_fault : int
        Short faults get a finer spacing so that each carries at least this
        many stations (the spacing stays at least 2 pixels): the apex of a
        peaked profile is then sampled closely enough.
    sample_step_m : float, optional
        Sample spacing along profiles; default one pixel.

    Returns
    -------
    ThrowParams

    Raises
    ------
    ParameterError
        A value is of the wrong type, out of range or inconsistent with the
        others (for example a spacing under 2 pixels or a profile too short
        for the scarp zone plus the samples a fit needs).
    """
    px = _check_number("pixel_size_m", pixel_size_m, lo=0, lo_open=True)
    step = px if sample_step_m is None else _check_number("sample_step_m", sample_step_m, lo=0, lo_open=True)
    if step < 0.25 * px or step > 2.0 * px:
        raise ParameterError(
            f"parameter 'sample_step_m' {step:g} m should be about one pixel ({px:g} m); use {px:g}."
        )
    if station_spacing_m is None:
        spacing = 10.0 * px
    else:
        spacing = _check_number("station_spacing_m", station_spacing_m, lo=0, lo_open=True)
        if spacing < 2.0 * px:
            raise ParameterError(
                f"parameter 'station_spacing_m' {spacing:g} m is under 2 DEM pixels ({2 * px:g} m): "
                "stations would repeat the same pixels; use at least 2 pixels (default 10)."
            )
        if spacing > 1e5 * px:
            raise ParameterError(
                f"parameter 'station_spacing_m' {spacing:g} m is over 100000 pixels; use a spacing of a few "
                "to a few hundred pixels (default 10)."
            )
    if normal_window_m is None:
        nwin = max(2.0 * spacing, 20.0 * px)
    else:
        nwin = _check_number("normal_window_m", normal_window_m, lo=0, lo_open=True)
        if nwin < px:
            raise ParameterError(
                f"parameter 'normal_window_m' {nwin:g} m is under one pixel; use at least {px:g} m "
                "(default: twice the station spacing)."
            )
    w0 = (
        3.0 * px if scarp_halfwidth_m is None else _check_number("scarp_halfwidth_m", scarp_halfwidth_m, lo=0)
    )
    w0 = max(w0, step)
    nmin = _check_number("min_samples_per_side", min_samples_per_side, lo=3, hi=10000, integer=True)
    if robust_loss not in ("tukey", "huber", "none"):
        raise ParameterError(
            f"parameter 'robust_loss' must be 'tukey', 'huber' or 'none', got {robust_loss!r}."
        )
    if robust_tuning is None:
        tuning = 4.685 if robust_loss == "tukey" else 1.345
    else:
        tuning = _check_number("robust_tuning", robust_tuning, lo=0.5, hi=20.0)
    iters = _check_number("robust_iterations", robust_iterations, lo=0, hi=50, integer=True)
    sc_it = _check_number("scarp_iterations", scarp_iterations, lo=0, hi=10, integer=True)
    ffw = _check_number("far_field_widths", far_field_widths, lo=0.5, hi=20.0)
    far_min = max(2.0 * nmin, 20.0) * step
    budget = _check_number("memory_budget_mb", memory_budget_mb, lo=16.0)
    min_st = _check_number("min_stations_per_fault", min_stations_per_fault, lo=1, hi=1000, integer=True)
    smooth = (
        None
        if smooth_stations is None
        else _check_number("smooth_stations", smooth_stations, lo=0.0, hi=20.0)
    )
    need = w0 + (nmin + 1) * step
    hmax = (
        400.0 * px
        if max_half_length_m is None
        else _check_number("max_half_length_m", max_half_length_m, lo=0, lo_open=True)
    )
    if profile_half_length_m is not None:
        H = _check_number("profile_half_length_m", profile_half_length_m, lo=0, lo_open=True)
        if H < need:
            raise ParameterError(
                f"parameter 'profile_half_length_m' {H:g} m leaves fewer than {nmin} samples beyond the "
                f"scarp zone ({w0:g} m); use at least {need:g} m or leave it unset (adapted)."
            )
        if H > 1e5 * px:
            raise ParameterError(
                f"parameter 'profile_half_length_m' {H:g} m is over 100000 pixels; use a few hundred pixels at most."
            )
        hmax = max(hmax, H)
        hmin = H
    else:
        H = None
        hmin = max(40.0 * px, w0 + far_min + 2 * step)
        if hmax < hmin:
            raise ParameterError(
                f"parameter 'max_half_length_m' {hmax:g} m is shorter than the shortest useful profile "
                f"({hmin:g} m); raise it or leave it unset."
            )
    return ThrowParams(
        pixel_size_m=px,
        sample_step_m=step,
        station_spacing_m=spacing,
        normal_window_m=nwin,
        scarp_halfwidth_m=w0,
        profile_half_length_m=H,
        min_half_length_m=hmin,
        max_half_length_m=hmax,
        length_fraction=0.1,
        far_field_widths=ffw,
        min_far_field_m=far_min,
        min_samples_per_side=nmin,
        robust_loss=robust_loss,
        robust_tuning=tuning,
        robust_iterations=iters,
        scarp_iterations=sc_it,
        scarp_tolerance_frac=0.02,
        crossing_margin_m=w0,
        memory_budget_mb=budget,
        smooth_stations=smooth,
        min_caskey_factor=0.25,
        min_stations=min_st,
        min_inlier_fraction=0.5,
    )


# ---------------------------------------------------------------------------
# Robust line fits, batched over the rows of a matrix
# ---------------------------------------------------------------------------
def _wls(W, Zc, D, D2, ones):
    """Closed-form weighted line fits z = a + b d for every row."""
    sw = (W @ ones).astype(float)
    sd = (W @ D).astype(float)
    sdd = (W @ D2).astype(float)
    WZ = W * Zc
    sz = (WZ @ ones).astype(float)
    sdz = (WZ @ D).astype(float)
    det = sw * sdd - sd * sd
    with np.errstate(divide="ignore", invalid="ignore"):
        ok = (sw > 1.5) & (det > 1e-9 * np.maximum(sw * sdd, 1e-30))
        b = np.where(ok, (sw * sdz - sd * sz) / det, np.nan)
        a = np.where(ok, (sz - b * sd) / sw, np.nan)
    return a, b, sw, sd, sdd, det


def _residuals(Zc, a, b, D, out=None):
    out = np.multiply(b.astype(_F32)[:, None], D[None, :], out=out)
    np.add(out, a.astype(_F32)[:, None], out=out)
    np.subtract(Zc, out, out=out)
    return out


def _row_median_abs(R, M):
    """Median of |R| over the True entries of M, per row (NaN where none)."""
    A = np.where(M, np.abs(R), np.float32(np.inf))
    A.sort(axis=1)
    cnt = M.sum(axis=1)
    idx = np.clip((cnt - 1) // 2, 0, R.shape[1] - 1)
    med = np.take_along_axis(A, idx[:, None], axis=1)[:, 0].astype(float)
    med[cnt == 0] = np.nan
    return med


def robust_line_fits(
    Z,
    M,
    D,
    *,
    loss: str = "tukey",
    tuning: float = 4.685,
    iterations: int = 3,
    scale_floor: float = 1e-3,
    init: tuple[np.ndarray, np.ndarray] | None = None,
) -> dict:
    """Robust straight-line fits ``z = a + b d``, one per row, as array operations.

    Parameters
    ----------
    Z : ndarray, shape (rows, k)
        Values (float32 is fastest); entries outside ``M`` are ignored (may
        be NaN).
    M : ndarray of bool, shape (rows, k)
        Which samples each row's fit may use.
    D : ndarray, shape (k,)
        Abscissa shared by all rows.
    loss : {"tukey", "huber", "none"}
        Weight function of the iteratively reweighted least squares.
    tuning : float
        Tuning constant in units of the robust scale (Tukey 4.685, Huber 1.345).
    iterations : int
        Reweighting iterations.
    scale_floor : float
        Smallest residual scale (same unit as Z), so that noise-free data do
        not turn every sample into an outlier.
    init : (a, b), optional
        Starting lines (warm start); default ordinary least squares.

    Returns
    -------
    dict
        ``a``, ``b`` (intercept at d = 0 and slope), ``var_a``, ``var_b``,
        ``cov_ab`` (inflated for serial correlation), ``scale`` (robust
        residual scale), ``rms`` (weighted RMS of the residuals), ``n``
        (samples available), ``inliers`` (sum of final weights), ``W``
        (final weights) and ``R`` (final residuals).

    Notes
    -----
    Iteratively reweighted least squares with Tukey's biweight or Huber's
    weights (Holland & Welsch 1977, Commun. Statist. A6; Huber 1981, Robust
    Statistics); the residual scale is the normalised median absolute
    deviation (1.4826 MAD), re-estimated half-way. Each iteration is one
    closed-form weighted least-squares line per row: the normal equations'
    sums are matrix-vector products over the (rows, k) weight matrix.
    Standard errors come from the weighted residual variance and are
    inflated by (1 + rho) / (1 - rho), rho the lag-one autocorrelation of
    the residuals (effective sample size of an AR(1) series; Bayley &
    Hammersley 1946), because neighbouring DEM samples are not independent.
    """
    Z = np.asarray(Z)
    if Z.dtype != _F32:
        Z = Z.astype(_F32)
    M = np.asarray(M, dtype=bool)
    Z0 = np.where(M, Z, _F32(0.0)).astype(_F32, copy=False)
    return _robust_fit(
        Z0,
        M,
        np.asarray(D, dtype=_F32),
        loss=loss,
        tuning=tuning,
        iterations=iterations,
        scale_floor=scale_floor,
        init=init,
    )


def _finite_or(v, fill=0.0):
    return np.where(np.isfinite(v), v, fill)


def _robust_fit(
    Z0, M, D, *, loss, tuning, iterations, scale_floor=1e-3, init=None, scale=None, autocorr=True
):
    """Run :func:`robust_line_fits` on a matrix already zero outside ``M`` (float32).

    ``scale`` (per row) skips the MAD estimate; ``autocorr=False`` skips the
    serial-correlation inflation of the variances (for intermediate fits).
    """
    R2 = Z0.shape[0]
    Wfull = M.astype(_F32)
    n = (Wfull @ np.ones(M.shape[1], dtype=_F32)).astype(np.int64)
    cols = np.flatnonzero(np.ones(R2, dtype=_F32) @ Wfull)
    nan = np.full(R2, np.nan)
    if cols.size == 0:
        return {
            "a": nan,
            "b": nan.copy(),
            "var_a": nan.copy(),
            "var_b": nan.copy(),
            "cov_ab": nan.copy(),
            "scale": np.full(R2, scale_floor),
            "rms": nan.copy(),
            "n": n,
            "inliers": np.zeros(R2),
        }
    c0, c1 = int(cols[0]), int(cols[-1]) + 1
    Zc = Z0[:, c0:c1]
    Mc = M[:, c0:c1]
    Wm = Wfull[:, c0:c1]
    D = D[c0:c1]
    D2 = D * D
    ones = np.ones(D.shape, dtype=_F32)
    if init is None:
        a, b, sw, sd, sdd, det = _wls(Wm, Zc, D, D2, ones)
    else:
        a, b = (np.asarray(v, dtype=float).copy() for v in init)
        bad = ~(np.isfinite(a) & np.isfinite(b))
        if bad.any():
            a0, b0, *_ = _wls(Wm[bad], Zc[bad], D, D2, ones)
            a[bad], b[bad] = a0, b0
    W = Wm
    R = np.empty(Zc.shape, dtype=_F32)
    fixed = scale is not None
    if fixed:
        scale = np.maximum(np.where(np.isfinite(scale), scale, scale_floor), scale_floor)
        inv = (1.0 / (tuning * scale)).astype(_F32)
    last = None
    if loss != "none" and int(iterations) > 0:
        for _ in range(int(iterations)):
            _residuals(Zc, _finite_or(a), _finite_or(b), D, out=R)
            if not fixed:
                # MAD about the current lines, every iteration: a start dragged by many outliers
                # (gullies) then still converges to the inliers' scale
                scale = np.maximum(1.4826 * _row_median_abs(R, Mc), scale_floor)
                inv = (1.0 / (tuning * scale)).astype(_F32)
            U = np.multiply(R, inv[:, None])
            if loss == "tukey":
                np.multiply(U, U, out=U)
                np.subtract(_F32(1.0), U, out=U)
                np.maximum(U, _F32(0.0), out=U)
                np.multiply(U, U, out=U)
            else:  # huber: min(1, c s / |r|)
                np.abs(U, out=U)
                np.maximum(U, _F32(1.0), out=U)
                np.divide(_F32(1.0), U, out=U)
            np.multiply(U, Wm, out=U)
            W = U
            a_new, b_new, sw, sd, sdd, det = _wls(W, Zc, D, D2, ones)
            keep = np.isfinite(a_new)
            a = np.where(keep, a_new, a)
            b = np.where(keep, b_new, b)
            last = (sw, sd, sdd, det)
        sw, sd, sdd, det = last
    elif init is not None:
        a, b, sw, sd, sdd, det = _wls(W, Zc, D, D2, ones)
    _residuals(Zc, _finite_or(a), _finite_or(b), D, out=R)
    WR = W * R
    ssr = ((WR * R) @ ones).astype(float)
    if autocorr and WR.shape[1] > 1:
        lag = ((WR[:, 1:] * WR[:, :-1]) @ ones[1:]).astype(float)
        wlag = ((W[:, 1:] * W[:, :-1]) @ ones[1:]).astype(float)
    else:
        lag = np.zeros(R2)
        wlag = np.ones(R2)
    with np.errstate(divide="ignore", invalid="ignore"):
        rms = np.sqrt(ssr / sw)
        s2 = ssr / np.maximum(sw - 2.0, 1.0)
        # lag-1 autocorrelation of the weighted residuals
        rho = np.clip(np.where(ssr > 0, lag / ssr * sw / np.maximum(wlag, 1e-12), 0.0), 0.0, 0.92)
        infl = (1.0 + rho) / (1.0 - rho)
        var_a = s2 * sdd / det * infl
        var_b = s2 * sw / det * infl
        cov_ab = -s2 * sd / det * infl
    if scale is None:
        scale = np.maximum(_finite_or(rms, scale_floor), scale_floor)
    bad = ~(sw > 1.5) | ~(det > 0)
    for arr in (a, b, var_a, var_b, cov_ab, rms):
        arr[bad] = np.nan
    return {
        "a": a,
        "b": b,
        "var_a": var_a,
        "var_b": var_b,
        "cov_ab": cov_ab,
        "scale": np.asarray(scale, dtype=float),
        "rms": rms,
        "n": n,
        "inliers": sw,
    }


# ---------------------------------------------------------------------------
# Fitting the two sides of many profiles at once
# ---------------------------------------------------------------------------
def _profile_gradients(Zc, valid, lim):
    """Smoothed outward gradient of each row and a robust background slope.

    Returns ``g`` (rows, k): central difference over 4 steps (2 at the
    ends), NaN at voids, and ``bg`` (rows,): median of every second
    gradient within the usable part of the row, the far-field slope a scarp
    stands out from (robust to a scarp or a neighbour's feature covering
    under half of the row).
    """
    R2, K = Zc.shape
    Zf = np.where(valid, Zc, np.float32(np.nan))
    g = np.full((R2, K), np.nan, dtype=_F32)
    g[:, 2:-2] = (Zf[:, 4:] - Zf[:, :-4]) * _F32(0.25)
    g[:, 1] = (Zf[:, 2] - Zf[:, 0]) * _F32(0.5)
    g[:, -2] = (Zf[:, -1] - Zf[:, -3]) * _F32(0.5)
    sub = g[:, 1::2].copy()
    dsub = np.arange(2, K + 1, 2, dtype=float)[: sub.shape[1]]
    sub[dsub[None, :] > lim[:, None]] = np.nan
    fin = np.isfinite(sub)
    cnt = fin.sum(axis=1)
    sub[~fin] = np.inf
    sub.sort(axis=1)
    lo = np.clip((cnt - 1) // 2, 0, sub.shape[1] - 1)
    hi = np.clip(cnt // 2, 0, sub.shape[1] - 1)
    bg = 0.5 * (
        np.take_along_axis(sub, lo[:, None], axis=1)[:, 0]
        + np.take_along_axis(sub, hi[:, None], axis=1)[:, 0]
    )
    bg = np.where(cnt > 0, bg, 0.0).astype(_F32)
    return g, bg, Zf[:, 0]


def _scarp_edges(g, bg, z_first, scale, up, lim, n, m_run, grad_frac=0.25):
    """Where each side's scarp ends, from the excess gradient of the profile.

    A sample is undisturbed when the profile's gradient there, taken towards
    the other side's level and in excess of the row's background slope, is
    under ``grad_frac`` of the scarp's peak gradient and under three noise
    deviations of a 4-step difference. The peak is the larger of the jump
    across the trace and the steepest excess among the first five samples
    of either side. The edge is the first sample from which ``m_run``
    consecutive samples are undisturbed (a run test, robust to isolated
    spikes).

    Returns found (bool per row) and the edge distance in steps.
    """
    R2, K = g.shape
    upf = up.astype(_F32)
    ex = (g - bg[:, None]) * upf[:, None]
    cross = (z_first[:n] - z_first[n:]) * 0.5 * up[:n]
    with _warnings.catch_warnings():
        _warnings.simplefilter("ignore", RuntimeWarning)
        near = np.nanmax(np.concatenate([ex[:n, 1:6], ex[n:, 1:6]], axis=1), axis=1)
    peak = np.fmax(np.nan_to_num(cross, nan=0.0), np.nan_to_num(near, nan=0.0))
    thr = np.maximum(grad_frac * np.concatenate([peak, peak]), 1.06 * scale).astype(_F32)
    bad = ~(ex < thr[:, None])  # NaN (void, or the unsmoothed ends) counts as disturbed
    cb = np.zeros((R2, K + 1), dtype=np.int32)
    np.cumsum(bad, axis=1, out=cb[:, 1:])
    run_ok = (cb[:, m_run:] - cb[:, :-m_run]) == 0
    run_ok &= (np.arange(1, K - m_run + 2, dtype=float) + (m_run - 1))[None, :] <= lim[:, None]
    found = run_ok.any(axis=1)
    first = np.argmax(run_ok, axis=1)
    return found, (first + 1).astype(float)


def fit_profile_matrix(
    Z,
    lim_steps,
    *,
    w0_steps: float,
    far_min_steps: float,
    far_field_widths: float = 2.5,
    min_samples: int = 10,
    loss: str = "tukey",
    tuning: float = 4.685,
    iterations: int = 3,
    scarp_iterations: int = 3,
    tolerance_frac: float = 0.02,
) -> dict:
    """Fit the far-field surfaces on both sides of many profiles.

    Parameters
    ----------
    Z : ndarray, shape (2 n, k)
        Profile samples. Row ``i < n`` is the - side of station ``i`` and row
        ``n + i`` its + side, each ordered outwards: column ``j`` lies
        ``j + 1`` steps from the trace. NaN = void or outside the raster.
    lim_steps : ndarray, shape (2 n,)
        Farthest usable distance of each side, in steps (profile end or a
        crossing trace).
    w0_steps : float
        Smallest scarp half-width, steps.
    far_min_steps : float
        Shortest stretch of far-field surface fitted on a side, steps.
    far_field_widths : float
        Far-field stretch in scarp widths (McCalpin 1987 practice: 2-3).
    min_samples : int
        Samples a side needs for its fit to be kept.
    loss, tuning, iterations
        Robust fit settings (:func:`robust_line_fits`).
    scarp_iterations : int
        Times the scarp edges are re-detected and the lines refitted.
    tolerance_frac : float
        A sample departs from its side's line when it lies towards the other
        side by more than ``max(3 scale, tolerance_frac |VS|)``.

    Returns
    -------
    dict of ndarray
        Per row (2 n): ``a`` (surface at the trace, Z units), ``b`` (slope
        outwards, Z units per step), ``var_a``, ``var_b``, ``scale``,
        ``rms``, ``n_used``, ``inlier_frac``, ``w`` (inner edge of the fit
        window, steps), ``hi`` (outer edge), ``edge_found`` (bool),
        ``need`` (half-length in steps a full-quality fit would need).
        Per station (n): ``vs`` (- side minus + side at the trace).

    Notes
    -----
    Scarp-profile practice (McCalpin 1987; Avouac 1993, J. Geophys. Res. 98,
    from memory): fit the footwall and hanging-wall surfaces beyond the
    scarp, over 2-3 scarp widths of undisturbed surface, and project both to
    the fault. The scarp edge on a side is the first sample, going outwards,
    from which three consecutive samples stay within tolerance of that
    side's line (a run test, robust to isolated noise spikes).
    """
    Z = np.asarray(Z, dtype=_F32)
    R2, K = Z.shape
    n = R2 // 2
    lim = np.minimum(np.asarray(lim_steps, dtype=float), K)
    valid = np.isfinite(Z)
    # reference elevation per station keeps float32 sums well conditioned
    h = min(3, K)
    head = np.concatenate([Z[:n, :h], Z[n:, :h]], axis=1)
    with np.errstate(all="ignore"), _warnings.catch_warnings():
        _warnings.simplefilter("ignore", RuntimeWarning)
        ref = np.nanmean(head, axis=1)
        miss = ~np.isfinite(ref)
        if miss.any():
            ref[miss] = np.nanmean(np.concatenate([Z[:n][miss], Z[n:][miss]], axis=1), axis=1)
    ref = np.nan_to_num(ref).astype(_F32)
    ref2 = np.concatenate([ref, ref])
    Zc = Z - ref2[:, None]
    D = np.arange(1, K + 1, dtype=_F32)
    w = np.full(R2, float(w0_steps))
    m_run = 3
    edge_found = np.ones(R2, dtype=bool)
    init = None
    fit = None
    n_it = int(scarp_iterations)
    grads = _profile_gradients(Zc, valid, lim) if (n_it > 0 and K >= 10) else None
    Z0 = np.where(valid, Zc, _F32(0.0))
    prev_sig = np.zeros(n, dtype=bool)
    prev_q = np.zeros(n, dtype=_F32)
    it = 0
    while True:
        if it == 0 and n_it > 0:
            # coarse start: the outer half of each side, so a scarp of any width up to half the
            # profile leaves the first lines undisturbed
            lo = np.maximum(float(w0_steps), 0.5 * lim)
            hi = lim.copy()
            lo = np.where(hi - lo + 1 < min_samples, np.maximum(float(w0_steps), hi - min_samples + 1), lo)
        else:
            W_sc = w[:n] + w[n:]
            far = np.maximum(far_field_widths * W_sc, far_min_steps)
            lo = w
            hi = np.minimum(lim, w + np.concatenate([far, far]))
        # only the columns some row's window reaches take part (windows are contiguous ranges)
        c0 = int(max(0, math.floor(np.min(lo)) - 1))
        c1 = int(min(K, math.ceil(np.max(hi))))
        c1 = max(c1, c0 + 1)
        Dc = D[c0:c1]
        M = np.zeros((R2, K), dtype=bool)
        M[:, c0:c1] = valid[:, c0:c1] & (Dc[None, :] >= lo[:, None]) & (Dc[None, :] <= hi[:, None])
        coarse = it == 0 and n_it > 0
        fit = _robust_fit(
            Z0[:, c0:c1],
            M[:, c0:c1],
            Dc,
            loss=loss,
            tuning=tuning,
            iterations=1 if coarse else iterations,
            init=init,
            autocorr=not coarse,
        )
        init = (fit["a"], fit["b"])
        if it >= n_it:
            break
        a = fit["a"]
        vs = a[:n] - a[n:]
        se = np.sqrt(fit["var_a"][:n] + fit["var_a"][n:])
        sc = fit["scale"]
        noise = np.maximum(sc[:n], sc[n:])
        with np.errstate(invalid="ignore"):
            signif = (np.abs(vs) > 4.0 * se) & (np.abs(vs) > 4.0 * noise)
        q = np.sign(np.nan_to_num(vs)).astype(_F32)
        up = np.concatenate([q, -q])  # +1 on the higher (footwall) side, -1 on the lower
        # the gradients are fixed, so edges change only where the up side or the significance did
        todo = signif & (~prev_sig | (q != prev_q)) if it > 0 else signif
        found = np.ones(R2, dtype=bool)
        edge = np.full(R2, float(w0_steps))
        if it > 0 and not todo.any():
            break  # the fit just made already used the final windows
        if grads is not None and todo.any():
            si = np.flatnonzero(todo)
            rows = np.concatenate([si, si + n])
            g, bg, zf = grads
            f_s, e_s = _scarp_edges(
                g[rows], bg[rows], zf[rows], sc[rows], up[rows], lim[rows], si.size, m_run
            )
            found[rows] = f_s
            edge[rows] = e_s
        prev_sig, prev_q = signif, q
        failed = ~np.isfinite(vs)
        fail2 = np.concatenate([failed, failed])
        margin = np.maximum(1.0, 0.5 * edge)
        w_new = np.where(found, np.maximum(float(w0_steps), edge + margin), np.maximum(lim, w))
        # a side whose fit failed keeps its window (and its verdict) from the pass before
        # scarp zones only widen: a later, noisier verdict never shrinks a zone already seen
        keep = fail2 | ~np.concatenate([todo, todo])
        w_new = np.where(keep, w, np.maximum(w, w_new))
        edge_found = np.where(keep, edge_found, found)
        if it > 0 and np.array_equal(w_new, w):
            break  # the fit just made already used these windows
        w = w_new
        it += 1
    n_used = fit["n"]
    with np.errstate(divide="ignore", invalid="ignore"):
        inl = np.where(n_used > 0, fit["inliers"] / n_used, 0.0)
    W_sc = w[:n] + w[n:]
    far = np.maximum(far_field_widths * W_sc, far_min_steps)
    need = w + np.concatenate([far, far])
    a = fit["a"] + np.concatenate([ref, ref]).astype(float)
    return {
        "a": a,
        "b": fit["b"],
        "var_a": fit["var_a"],
        "var_b": fit["var_b"],
        "scale": fit["scale"],
        "rms": fit["rms"],
        "n_used": n_used,
        "inlier_frac": inl,
        "w": w,
        "hi": hi,
        "edge_found": edge_found,
        "need": need,
        "vs": a[:n] - a[n:],
        "ssr": fit["rms"] ** 2 * fit["inliers"],
        "sw": fit["inliers"],
    }


# ---------------------------------------------------------------------------
# Profiles on a DEM window
# ---------------------------------------------------------------------------
def _ray_exit(x, y, dx, dy, box):
    """Distance along (dx, dy) from (x, y) to the exit of the box (inf-safe); -1 if starting outside."""
    xmin, ymin, xmax, ymax = box
    with np.errstate(divide="ignore", invalid="ignore"):
        tx = np.where(dx > 0, (xmax - x) / dx, np.where(dx < 0, (xmin - x) / dx, np.inf))
        ty = np.where(dy > 0, (ymax - y) / dy, np.where(dy < 0, (ymin - y) / dy, np.inf))
    t = np.minimum(tx, ty)
    inside = (x >= xmin) & (x <= xmax) & (y >= ymin) & (y <= ymax)
    return np.where(inside, t, -1.0)


_RAW_COLUMNS = (
    "vs_plus_m",
    "vs_se_m",
    "slope_plus",
    "slope_se",
    "fit_rmse_m",
    "n_minus",
    "n_plus",
    "w_minus_m",
    "w_plus_m",
    "half_length_m",
    "lim_minus_m",
    "lim_plus_m",
    "geo_status",
    "poor",
    "wants_m",
    "samples",
    "planarity_m",
)


def measure_profiles(
    arr: np.ndarray,
    transform,
    stations: StationSet,
    half_length_m,
    lim_minus_m,
    lim_plus_m,
    params: ThrowParams,
    *,
    raster_box=None,
    chunk_elements: int = 196_608,
) -> dict:
    """Sample and fit the profiles of many stations on one DEM window.

    Parameters
    ----------
    arr : ndarray, shape (rows, cols)
        DEM window, metres, NaN = void (float32 is fastest).
    transform : affine.Affine
        Pixel-corner transform of ``arr``.
    stations : StationSet
        Origins and + side normals.
    half_length_m : array_like
        Profile half-length per station, metres.
    lim_minus_m, lim_plus_m : array_like
        Distance to the nearest crossing trace on each side (inf if none).
    params : ThrowParams
    raster_box : tuple, optional
        (xmin, ymin, xmax, ymax) of the full raster's pixel centres; samples
        beyond it count as outside the DEM (default: the window's).
    chunk_elements : int
        Samples per array operation (cache-sized chunks).

    Returns
    -------
    dict of ndarray
        Raw per-station results (the + side assumed to be the hanging wall):
        ``vs_plus_m`` (- side minus + side surface at the trace), its
        ``vs_se_m``, ``slope_plus`` (surface slope towards the + side, m/m)
        and ``slope_se``, ``fit_rmse_m``, ``n_minus``/``n_plus`` (samples
        used), ``w_minus_m``/``w_plus_m`` (scarp half-widths),
        ``geo_status`` (``''``, ``outside``, ``truncated``, ``nodata``),
        ``poor`` (bool), ``wants_m`` (half-length a full fit would need, or
        0).
    """
    n = len(stations)
    step = params.sample_step_m
    px_t = transform
    H = np.broadcast_to(np.asarray(half_length_m, dtype=float), (n,))
    lim_m = np.broadcast_to(np.asarray(lim_minus_m, dtype=float), (n,))
    lim_p = np.broadcast_to(np.asarray(lim_plus_m, dtype=float), (n,))
    out = {k: np.full(n, np.nan) for k in _RAW_COLUMNS}
    out["geo_status"] = np.full(n, "", dtype=object)
    out["poor"] = np.zeros(n, dtype=bool)
    out["wants_m"] = np.zeros(n)
    out["samples"] = np.zeros(n)
    out["half_length_m"] = H.astype(float).copy()
    if n == 0:
        return out
    if raster_box is None:
        rows, cols = arr.shape
        x0 = px_t.c + 0.5 * px_t.a
        x1 = px_t.c + (cols - 0.5) * px_t.a
        y0 = px_t.f + 0.5 * px_t.e
        y1 = px_t.f + (rows - 0.5) * px_t.e
        raster_box = (min(x0, x1), min(y0, y1), max(x0, x1), max(y0, y1))
    margin = params.crossing_margin_m
    # usable limit per side: profile end, or a crossing minus a margin for the neighbour's scarp
    lm = np.minimum(H, lim_m - margin)
    lp = np.minimum(H, lim_p - margin)
    trunc_m = lim_m - margin < H
    trunc_p = lim_p - margin < H
    K_all = np.maximum(np.ceil(H / step - 1e-9).astype(np.int64), 3)
    # group stations by profile length so each chunk is one rectangular matrix
    levels = np.unique(K_all)
    for K in levels:
        sel_all = np.flatnonzero(K_all == K)
        per = max(1, int(chunk_elements // (2 * K)))
        for c0 in range(0, sel_all.size, per):
            sel = sel_all[c0 : c0 + per]
            res = _measure_chunk(
                arr,
                px_t,
                stations.x[sel],
                stations.y[sel],
                stations.nx[sel],
                stations.ny[sel],
                int(K),
                lm[sel] / step,
                lp[sel] / step,
                params,
            )
            m = sel.size
            out["samples"][sel] = 2 * K
            a, b, va, vb = res["a"], res["b"], res["var_a"], res["var_b"]
            vs = a[:m] - a[m:]
            out["vs_plus_m"][sel] = vs
            out["vs_se_m"][sel] = np.sqrt(va[:m] + va[m:])
            # slopes towards the + side: the - side's outward slope changes sign
            bm, bp = -b[:m] / step, b[m:] / step
            vbm, vbp = vb[:m] / step**2, vb[m:] / step**2
            with np.errstate(divide="ignore", invalid="ignore"):
                wm_, wp_ = 1.0 / vbm, 1.0 / vbp
                both = np.isfinite(wm_) & np.isfinite(wp_) & (wm_ > 0) & (wp_ > 0)
                slope = np.where(both, (wm_ * bm + wp_ * bp) / (wm_ + wp_), np.where(np.isfinite(bm), bm, bp))
                slope_se = np.where(
                    both, np.sqrt(1.0 / (wm_ + wp_)), np.where(np.isfinite(vbm), np.sqrt(vbm), np.sqrt(vbp))
                )
                out["fit_rmse_m"][sel] = np.sqrt(
                    (res["ssr"][:m] + res["ssr"][m:]) / (res["sw"][:m] + res["sw"][m:])
                )
            out["slope_plus"][sel] = slope
            out["slope_se"][sel] = slope_se
            # non-planarity: the two sides disagree on the surface slope; over the lever arm from the
            # fitted stretches to the trace that makes the projected levels uncertain by about
            # half the slope difference times the mean distance of the stretches
            arm = 0.25 * (res["w"][:m] + res["hi"][:m] + res["w"][m:] + res["hi"][m:]) * step
            out["planarity_m"][sel] = 0.5 * np.abs(bm - bp) * arm
            out["n_minus"][sel] = res["n_used"][:m]
            out["n_plus"][sel] = res["n_used"][m:]
            out["w_minus_m"][sel] = res["w"][:m] * step
            out["w_plus_m"][sel] = res["w"][m:] * step
            # --- status of each side
            nmin = params.min_samples_per_side
            wv = res["w"]
            hi = res["hi"]
            count_geom = np.floor(hi + 1e-9) - np.ceil(wv - 1e-9) + 1  # samples in [w, hi]
            xs = np.concatenate([stations.x[sel], stations.x[sel]])
            ys = np.concatenate([stations.y[sel], stations.y[sel]])
            dx = np.concatenate([-stations.nx[sel], stations.nx[sel]])
            dy = np.concatenate([-stations.ny[sel], stations.ny[sel]])
            t_exit = _ray_exit(xs, ys, dx, dy, raster_box) / step
            count_in = np.floor(np.minimum(hi, t_exit) + 1e-9) - np.ceil(wv - 1e-9) + 1
            trunc = np.concatenate([trunc_m[sel], trunc_p[sel]])
            side_trunc = trunc & (count_geom < nmin)
            # a side is outside only where the raster edge, not a crossing, cuts it short
            side_out = (count_in < nmin) & (t_exit < hi)
            side_void = res["n_used"] < nmin
            st_out = (t_exit[:m] < 0) | side_out[:m] | side_out[m:]
            st_trunc = side_trunc[:m] | side_trunc[m:]
            st_void = side_void[:m] | side_void[m:]
            geo = np.where(
                st_out, "outside", np.where(st_trunc, "truncated", np.where(st_void, "nodata", ""))
            )
            out["geo_status"][sel] = geo
            inl_bad = res["inlier_frac"] < params.min_inlier_fraction
            edge_bad = ~res["edge_found"]
            out["poor"][sel] = inl_bad[:m] | inl_bad[m:] | edge_bad[:m] | edge_bad[m:]
            # stations whose scarp needs a longer profile than sampled (and not cut by a neighbour)
            need = res["need"] * step
            Hs = np.concatenate([H[sel], H[sel]])
            want = (need > Hs * 1.02) & ~trunc
            wants = np.where(
                want[:m] | want[m:],
                np.maximum(np.where(want[:m], need[:m], 0), np.where(want[m:], need[m:], 0)),
                0.0,
            )
            out["wants_m"][sel] = wants
    out["lim_minus_m"] = np.asarray(lim_m, dtype=float).copy()
    out["lim_plus_m"] = np.asarray(lim_p, dtype=float).copy()
    return out


def _measure_chunk(arr, t, x, y, nx, ny, K, lim_m_steps, lim_p_steps, params):
    """Sample one chunk of profiles (both sides) and fit them."""
    m = x.size
    step = params.sample_step_m
    inv_a, inv_e = 1.0 / t.a, 1.0 / t.e
    col0 = (x - t.c) * inv_a - 0.5
    row0 = (y - t.f) * inv_e - 0.5
    dcol = np.concatenate([-nx, nx]) * (step * inv_a)
    drow = np.concatenate([-ny, ny]) * (step * inv_e)
    Dk = np.arange(1, K + 1, dtype=float)
    coords = np.empty((2, 2 * m, K))
    np.multiply(drow[:, None], Dk[None, :], out=coords[0])
    coords[0] += np.concatenate([row0, row0])[:, None]
    np.multiply(dcol[:, None], Dk[None, :], out=coords[1])
    coords[1] += np.concatenate([col0, col0])[:, None]
    Z = ndimage.map_coordinates(
        arr, coords, order=1, mode="constant", cval=np.nan, prefilter=False, output=_F32
    )
    del coords
    lim = np.concatenate([lim_m_steps, lim_p_steps])
    return fit_profile_matrix(
        Z,
        lim,
        w0_steps=params.scarp_halfwidth_m / step,
        far_min_steps=params.min_far_field_m / step,
        far_field_widths=params.far_field_widths,
        min_samples=params.min_samples_per_side,
        loss=params.robust_loss,
        tuning=params.robust_tuning,
        iterations=params.robust_iterations,
        scarp_iterations=params.scarp_iterations,
        tolerance_frac=params.scarp_tolerance_frac,
    )


# ---------------------------------------------------------------------------
# Batches
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class ThrowBatch:
    """One independent unit of work: the stations of some faults inside one tile.

    Attributes
    ----------
    traces : geopandas.GeoDataFrame
        ``fault_id``, ``geometry``, ``dip_deg``, ``dip_dir_deg`` of the faults
        measured here and of every trace near enough to cross their profiles.
    fault_ids : tuple of int
        Faults whose stations in this tile are measured.
    tile : tuple
        (x0, y0, size_m, ix, iy): tile grid origin, tile size and index.
    dem_bounds : tuple
        (xmin, ymin, xmax, ymax) of the DEM, for clamping stations to tiles.
    """

    traces: Any
    fault_ids: tuple
    tile: tuple
    dem_bounds: tuple


def _tile_index(x, y, tile, dem_bounds):
    x0, y0, size, _, _ = tile
    xmin, ymin, xmax, ymax = dem_bounds
    xc = np.clip(x, xmin, xmax)
    yc = np.clip(y, ymin, ymax)
    ix = np.floor((xc - x0) / size).astype(np.int64)
    iy = np.floor((yc - y0) / size).astype(np.int64)
    nx = max(1, int(math.ceil((xmax - x0) / size)))
    ny = max(1, int(math.ceil((ymax - y0) / size)))
    return np.clip(ix, 0, nx - 1), np.clip(iy, 0, ny - 1)


def _side_signs_for(traces) -> np.ndarray:
    dd = traces["dip_dir_deg"].to_numpy(dtype=float) if "dip_dir_deg" in traces.columns else None
    return side_signs(traces.geometry.to_numpy(), dd)


def measure_batch(
    traces: gpd.GeoDataFrame, dem, params: ThrowParams, *, fault_ids=None, tile=None, dem_bounds=None
):
    """Measure the stations of some faults on one window of the DEM.

    A pure function of the trace geometries, the DEM (path and metadata),
    the tile and the parameters, so an engine may run batches anywhere and
    in any order.

    Parameters
    ----------
    traces : geopandas.GeoDataFrame
        ``fault_id``, geometry, ``dip_deg`` and ``dip_dir_deg`` (NaN where
        unknown) of the measured faults and of every trace that may cross
        their profiles.
    dem : faultmap.io.dem.Dem
        Lazy DEM (picklable: path and metadata only).
    params : ThrowParams
    fault_ids : sequence of int, optional
        Faults to measure (default: all in ``traces``).
    tile : tuple, optional
        (x0, y0, size_m, ix, iy): only stations falling in this tile (after
        clamping to the DEM) are measured.
    dem_bounds : tuple, optional
        DEM bounds used for clamping (default ``dem.bounds``).

    Returns
    -------
    stations : pandas.DataFrame
        Raw station results: ``fault_id``, ``dist_m``, ``x``, ``y``, ``nx``,
        ``ny`` (+ side normal) and the fields of :func:`measure_profiles`.
    warnings : list of str
    """
    warn: list[str] = []
    traces = traces.reset_index(drop=True)
    lines = traces.geometry.to_numpy()
    ids = traces["fault_id"].to_numpy()
    measure = np.ones(len(traces), dtype=bool) if fault_ids is None else np.isin(ids, np.asarray(fault_ids))
    side = _side_signs_for(traces)
    L = shapely.length(lines)
    mi = np.flatnonzero(measure)
    st = place_stations(
        lines[mi],
        spacing_m=params.spacing_for(L[mi]),
        normal_window_m=params.normal_window_m,
        side_sign=side[mi],
    )
    st = StationSet(mi[st.line], st.dist_m, st.x, st.y, st.nx, st.ny)
    bounds = dem.bounds if dem_bounds is None else dem_bounds
    if tile is not None:
        ix, iy = _tile_index(st.x, st.y, tile, bounds)
        st = st.take((ix == tile[3]) & (iy == tile[4]))
    n = len(st)
    if n == 0:
        return _raw_frame(st, ids, {k: np.zeros(0) for k in _RAW_COLUMNS}), warn
    H1 = params.half_length_for(L)[st.line]
    own_excl = max(0.5 * params.normal_window_m, 2.0 * params.scarp_halfwidth_m)
    cl = dict(line_ids=ids, own_exclusion_m=own_excl)
    lim_m, lim_p = crossing_limits(st, H1, lines, station_ids=ids[st.line], **cl)
    t = dem.transform
    box = (
        bounds[0] + 0.5 * abs(t.a),
        bounds[1] + 0.5 * abs(t.e),
        bounds[2] - 0.5 * abs(t.a),
        bounds[3] - 0.5 * abs(t.e),
    )
    # pass 1: one read for the batch (split only when it exceeds the memory budget)
    window = _read_for(dem, st, H1, params)
    res = _measure_on_window(dem, st, H1, lim_m, lim_p, params, box, window)
    if params.adaptive:
        wants = res["wants_m"]
        redo = np.flatnonzero((wants > 0) & (H1 < params.max_half_length_m))
        if redo.size:
            # pass 2: longer profiles where the scarp turned out broad; profiles still inside the
            # first window reuse it, the others are read in small spatial groups
            px = dem.pixel_size
            H2 = np.minimum(np.ceil(wants[redo] * 1.25 / (8 * px)) * 8 * px, params.max_half_length_m)
            H2 = np.maximum(H2, H1[redo])
            sr = st.take(redo)
            lm2, lp2 = crossing_limits(sr, H2, lines, station_ids=ids[sr.line], **cl)
            inside = np.zeros(redo.size, dtype=bool)
            if window is not None:
                wb = window[2]
                ex, ey = np.abs(sr.nx) * H2, np.abs(sr.ny) * H2
                inside = (
                    (sr.x - ex >= wb[0]) & (sr.y - ey >= wb[1]) & (sr.x + ex <= wb[2]) & (sr.y + ey <= wb[3])
                )
            grp = np.full(redo.size, -1, dtype=np.int64)
            out_i = np.flatnonzero(~inside)
            if out_i.size:
                cell = 2.0 * float(np.max(H2[out_i]))
                gx = np.floor(sr.x[out_i] / cell).astype(np.int64)
                gy = np.floor(sr.y[out_i] / cell).astype(np.int64)
                _, g = np.unique(np.c_[gx, gy], axis=0, return_inverse=True)
                grp[out_i] = g.ravel()
            res2 = {k: np.empty(redo.size, dtype=res[k].dtype) for k in _RAW_COLUMNS}
            for gi in range(-1, int(grp.max()) + 1):
                sel = np.flatnonzero(grp == gi)
                if sel.size == 0:
                    continue
                r = _measure_on_window(
                    dem, sr.take(sel), H2[sel], lm2[sel], lp2[sel], params, box, window if gi < 0 else None
                )
                for k in _RAW_COLUMNS:
                    res2[k][sel] = r[k]
            taken = res["samples"][redo] + res2["samples"]
            for k in _RAW_COLUMNS:
                res[k][redo] = res2[k]
            res["samples"][redo] = taken
    return _raw_frame(st, ids, res), warn


def _profile_bounds(st: StationSet, H):
    ex = np.abs(st.nx) * H
    ey = np.abs(st.ny) * H
    return (
        float(np.min(st.x - ex)),
        float(np.min(st.y - ey)),
        float(np.max(st.x + ex)),
        float(np.max(st.y + ey)),
    )


def _window_pixels(dem, bnds) -> float:
    px = dem.pixel_size
    return ((bnds[2] - bnds[0]) / px + 8) * ((bnds[3] - bnds[1]) / px + 8)


def _read_for(dem, st: StationSet, H, params):
    """Read the window covering these profiles, or None when it exceeds the memory budget."""
    from faultmap.io.dem import read_window_array

    if len(st) == 0:
        return None
    bnds = _profile_bounds(st, np.asarray(H, dtype=float))
    if _window_pixels(dem, bnds) > params.memory_budget_mb * 1e6 * 0.4 / 4.0:
        return None
    arr, wt, _ = read_window_array(
        dem, bnds, pad_pixels=3, cache_mb=int(min(64, max(4, params.memory_budget_mb / 8)))
    )
    return (arr, wt, bnds)


def _measure_on_window(dem, st: StationSet, H, lim_m, lim_p, params, box, window=None):
    """Measure these stations on ``window`` (arr, transform, bounds) if it covers them, else read one."""
    H = np.asarray(H, dtype=float)
    bnds = _profile_bounds(st, H)
    if window is not None:
        wb = window[2]
        if not (bnds[0] >= wb[0] and bnds[1] >= wb[1] and bnds[2] <= wb[2] and bnds[3] <= wb[3]):
            window = None
    if window is None:
        if _window_pixels(dem, bnds) > params.memory_budget_mb * 1e6 * 0.4 / 4.0 and len(st) > 1:
            # split the stations spatially until each window fits the budget
            wide = (bnds[2] - bnds[0]) >= (bnds[3] - bnds[1])
            order = np.lexsort((st.y, st.x)) if wide else np.lexsort((st.x, st.y))
            half = len(st) // 2
            res = None
            for p in (order[:half], order[half:]):
                r = _measure_on_window(dem, st.take(p), H[p], lim_m[p], lim_p[p], params, box)
                if res is None:
                    res = {k: np.empty(len(st), dtype=v.dtype) for k, v in r.items()}
                for k in r:
                    res[k][p] = r[k]
            return res
        window = _read_for(dem, st, H, _unbounded(params))
    arr, wt, _ = window
    if arr.size == 0:
        r = measure_profiles(
            np.full((2, 2), np.nan, dtype=_F32), dem.transform, st, H, lim_m, lim_p, params, raster_box=box
        )
        r["geo_status"][:] = "outside"
        return r
    return measure_profiles(arr, wt, st, H, lim_m, lim_p, params, raster_box=box)


def _unbounded(params):
    """Return the same parameters with no budget limit (for a single station's window)."""
    return replace(params, memory_budget_mb=float("inf"))


def _raw_frame(st: StationSet, ids, res) -> pd.DataFrame:
    df = pd.DataFrame(
        {
            "fault_id": np.asarray(ids)[st.line].astype(np.int64) if len(st) else np.zeros(0, dtype=np.int64),
            "dist_m": st.dist_m,
            "x": st.x,
            "y": st.y,
            "nx": st.nx,
            "ny": st.ny,
        }
    )
    for k in _RAW_COLUMNS:
        df[k] = res[k]
    return df


def plan_batches(faults: gpd.GeoDataFrame, dem, params: ThrowParams) -> list[ThrowBatch]:
    """Split the work into spatial tiles that fit the memory budget.

    Stations are assigned to a grid of square tiles (clamped to the DEM);
    each tile's batch carries the faults with stations in it plus every
    trace that can cross their profiles. Tiles are sized so that one
    window (tile plus the longest profile on each side) holds under 40 % of
    ``memory_budget_mb`` as float32.

    Returns
    -------
    list of ThrowBatch
        In row-major tile order.
    """
    faults = faults.reset_index(drop=True)
    lines = faults.geometry.to_numpy()
    ids = faults["fault_id"].to_numpy()
    bounds = dem.bounds
    px = dem.pixel_size
    pad = params.max_half_length_m + 4 * px
    side_px = math.sqrt(params.memory_budget_mb * 1e6 * 0.4 / 4.0)
    size = max(64.0 * px, side_px * px - 2.0 * pad)
    xmin, ymin, xmax, ymax = bounds
    # a tile grid no finer than needed: equal tiles covering the DEM
    ntx = max(1, int(math.ceil((xmax - xmin) / size)))
    nty = max(1, int(math.ceil((ymax - ymin) / size)))
    size = max((xmax - xmin) / ntx, (ymax - ymin) / nty)
    grid = (xmin, ymin, size)
    side = _side_signs_for(faults)
    line, dist = station_distances(shapely.length(lines), params.spacing_for(shapely.length(lines)))
    pts = shapely.get_coordinates(shapely.line_interpolate_point(lines[line], dist))
    ix, iy = _tile_index(pts[:, 0], pts[:, 1], (*grid, 0, 0), bounds)
    key = iy * ntx + ix
    order = np.lexsort((line, key))
    key_s, line_s = key[order], line[order]
    tree = shapely.STRtree(lines)
    batches = []
    for k in np.unique(key_s):
        members = np.unique(line_s[key_s == k])
        tx, ty = int(k % ntx), int(k // ntx)
        tb = (
            xmin + tx * size - pad,
            ymin + ty * size - pad,
            xmin + (tx + 1) * size + pad,
            ymin + (ty + 1) * size + pad,
        )
        # context: traces near the tile and near the measured traces' own extent within it
        near = tree.query(shapely.box(*tb))
        keep = np.union1d(near, members)
        sub = faults.iloc[keep][["fault_id", "geometry", "dip_deg", "dip_dir_deg"]].copy()
        batches.append(
            ThrowBatch(
                traces=sub,
                fault_ids=tuple(int(i) for i in ids[members]),
                tile=(*grid, tx, ty),
                dem_bounds=tuple(bounds),
            )
        )
    del side
    return batches


def run_batch(batch: ThrowBatch, dem, params: ThrowParams):
    """Run one :class:`ThrowBatch` (what an engine maps over batches)."""
    return measure_batch(
        batch.traces, dem, params, fault_ids=batch.fault_ids, tile=batch.tile, dem_bounds=batch.dem_bounds
    )


# ---------------------------------------------------------------------------
# From raw separations to throws; down-thrown side
# ---------------------------------------------------------------------------
def infer_downthrown_side(fault_id, vs_plus, ok, err=None) -> pd.DataFrame:
    """Which side of each fault is down, from the signs of its separations.

    Parameters
    ----------
    fault_id : array_like of int
        Fault of each station.
    vs_plus : array_like of float
        Surface on the - side minus surface on the + side at the trace, m.
    ok : array_like of bool
        Stations whose fit is usable.
    err : array_like of float, optional
        Standard error of each separation, m (default: equal weights).

    Returns
    -------
    pandas.DataFrame
        Indexed by fault_id: ``down_sign`` (+1: the + side is down, -1: the
        - side is, 0: unknown), ``confidence`` (fraction of usable stations
        whose separation has that sign) and ``n`` (usable stations).

    Notes
    -----
    The side is the sign of the inverse-variance weighted mean separation
    over the trace, so a few stations disturbed by a neighbour (large
    errors) cannot outvote the rest; the confidence is the agreeing
    fraction of stations (common practice).
    """
    fid = np.asarray(fault_id)
    use = np.asarray(ok, dtype=bool) & np.isfinite(vs_plus)
    v = np.where(use, np.asarray(vs_plus, dtype=float), np.nan)
    if err is None:
        w = np.where(use, 1.0, 0.0)
    else:
        e = np.asarray(err, dtype=float)
        floor = np.nanmedian(e[use]) * 0.1 if use.any() and np.isfinite(e[use]).any() else 1e-3
        e = np.maximum(np.where(np.isfinite(e), e, np.inf), max(floor, 1e-6))
        w = np.where(use, 1.0 / e**2, 0.0)
    df = pd.DataFrame({"fault_id": fid, "v": v, "wv": np.nan_to_num(v) * w})
    g = df.groupby("fault_id")
    total = g["wv"].sum()
    n = g["v"].count()
    sign = pd.Series(np.sign(total.to_numpy()).astype(int), index=total.index)
    agree = df.assign(s=np.sign(df["v"]), t=df["fault_id"].map(sign)).query("v == v")
    frac = (agree["s"] == agree["t"]).groupby(agree["fault_id"]).mean()
    out = pd.DataFrame({"down_sign": sign, "confidence": frac.reindex(sign.index).fillna(0.0), "n": n})
    out.loc[out["n"] == 0, "down_sign"] = 0
    return out


def finalise_stations(raw: pd.DataFrame, faults: pd.DataFrame, hw_sign) -> pd.DataFrame:
    """Turn raw separations into throws, heaves and statuses.

    Parameters
    ----------
    raw : pandas.DataFrame
        From :func:`measure_batch` (all batches concatenated).
    faults : pandas.DataFrame
        ``fault_id`` and ``dip_deg`` of every fault.
    hw_sign : mapping or Series
        fault_id -> +1 if the + side is the hanging wall, -1 if the - side.

    Returns
    -------
    pandas.DataFrame
        Adds ``vert_sep_m`` (footwall minus hanging-wall surface at the
        trace), ``vert_sep_err_m``, ``throw_m``, ``throw_err_m``, ``heave_m``,
        ``surface_slope_deg`` (positive descending towards the hanging
        wall), ``planarity_err_m``, ``n_fw``, ``n_hw``, ``scarp_width_m``,
        ``profile_azimuth_deg`` (towards the hanging wall) and ``status``.

    Notes
    -----
    Throw from vertical separation by Caskey (1995), with the surface slope
    fitted on the profile (the average of the two sides, inverse-variance
    weighted); heave = throw / tan(dip). The error of the throw propagates
    those of the separation and of the slope to first order, and adds in
    quadrature ``planarity_err_m``: half the difference of the two sides'
    slopes times the mean distance of the fitted stretches from the trace,
    our own estimate of how far a non-planar surface (relief, rollover) may
    shift the projected levels (zero for a planar surface).
    """
    df = raw.copy()
    dip = df["fault_id"].map(
        pd.Series(faults["dip_deg"].to_numpy(dtype=float), index=faults["fault_id"].to_numpy())
    )
    s = df["fault_id"].map(pd.Series(hw_sign)).fillna(1.0).to_numpy(dtype=float)
    s = np.where(s == 0, 1.0, s)
    vs = s * df["vs_plus_m"].to_numpy(dtype=float)
    b = s * df["slope_plus"].to_numpy(dtype=float)  # dz/du towards the hanging wall
    se_vs = df["vs_se_m"].to_numpy(dtype=float)
    se_b = df["slope_se"].to_numpy(dtype=float)
    td = np.tan(np.radians(dip.to_numpy(dtype=float)))
    plan = df["planarity_m"].to_numpy(dtype=float) if "planarity_m" in df.columns else np.zeros(len(df))
    plan = np.nan_to_num(plan)
    with np.errstate(divide="ignore", invalid="ignore"):
        f = 1.0 + b / td
        T = vs / f
        se_T = np.sqrt((se_vs / f) ** 2 + (vs * se_b / (f * f * td)) ** 2 + (plan / f) ** 2)
    geo = df["geo_status"].to_numpy(dtype=object)
    poor = df["poor"].to_numpy(dtype=bool) | ~(f >= 0.25) | ~np.isfinite(T)
    status = np.where(geo != "", geo, np.where(poor, "poor_fit", "ok"))
    fitted = (geo == "") | (geo == "truncated")
    okm = status == "ok"
    df["vert_sep_m"] = np.where(np.isin(status, ("ok", "poor_fit")), vs, np.nan)
    df["vert_sep_err_m"] = np.where(np.isin(status, ("ok", "poor_fit")), se_vs, np.nan)
    df["throw_m"] = np.where(okm, T, np.nan)
    df["throw_err_m"] = np.where(okm, se_T, np.nan)
    df["heave_m"] = np.where(okm, T / td, np.nan)
    df["planarity_err_m"] = np.where(np.isin(status, ("ok", "poor_fit")), plan, np.nan)
    df["surface_slope_deg"] = np.where(np.isin(status, ("ok", "poor_fit")), np.degrees(np.arctan(-b)), np.nan)
    nm, npl = df["n_minus"].to_numpy(dtype=float), df["n_plus"].to_numpy(dtype=float)
    df["n_fw"] = np.where(s > 0, nm, npl).astype(float)
    df["n_hw"] = np.where(s > 0, npl, nm).astype(float)
    df["scarp_width_m"] = np.where(
        fitted, df["w_minus_m"].to_numpy(float) + df["w_plus_m"].to_numpy(float), np.nan
    )
    df["fit_rmse_m"] = np.where(np.isin(status, ("ok", "poor_fit")), df["fit_rmse_m"].to_numpy(float), np.nan)
    df["profile_azimuth_deg"] = (
        np.degrees(np.arctan2(s * df["nx"].to_numpy(float), s * df["ny"].to_numpy(float))) % 360.0
    )
    df["status"] = status
    return df


# ---------------------------------------------------------------------------
# Per-fault summaries
# ---------------------------------------------------------------------------
def _shift(v, j, same_group):
    """V shifted by j positions (NaN across group boundaries)."""
    out = np.full(v.shape, np.nan)
    n = v.size
    if j == 0:
        return v.astype(float).copy()
    if abs(j) >= n:
        return out
    if j > 0:
        out[:-j] = np.where(same_group[j][: n - j], v[j:], np.nan)
    else:
        k = -j
        out[k:] = np.where(same_group[k][: n - k], v[: n - k], np.nan)
    return out


def _nan_row_median(A):
    """Median of the finite values of each row (NaN where none), by one sort."""
    fin = np.isfinite(A)
    cnt = fin.sum(axis=1)
    S = np.sort(np.where(fin, A, np.inf), axis=1)
    lo = np.clip((cnt - 1) // 2, 0, A.shape[1] - 1)
    hi = np.clip(cnt // 2, 0, A.shape[1] - 1)
    with np.errstate(invalid="ignore"):
        med = 0.5 * (
            np.take_along_axis(S, lo[:, None], 1)[:, 0] + np.take_along_axis(S, hi[:, None], 1)[:, 0]
        )
    return np.where(cnt > 0, med, np.nan)


def _hampel(group, T, se):
    """Hampel identifier: stations more than 3 robust deviations from the running median of 5."""
    n = T.size
    same = {
        j: np.r_[group[j:] == group[:-j], np.zeros(j, dtype=bool)] if j < n else np.zeros(n, dtype=bool)
        for j in (1, 2)
    }
    stack = np.stack([_shift(T, j, same) for j in range(-2, 3)], axis=1)
    med = _nan_row_median(stack)
    mad = 1.4826 * _nan_row_median(np.abs(stack - med[:, None]))
    cnt = np.isfinite(stack).sum(axis=1)
    tol = 3.0 * np.sqrt(mad**2 + np.nan_to_num(se) ** 2)
    return np.isfinite(T) & (cnt >= 4) & (np.abs(T - med) > tol)


def _neighbourhood(group, Tc, sec, J):
    """Values and errors of the stations within J positions of each station (same fault), (n, 2J+1)."""
    n = Tc.size
    offs = np.arange(-J, J + 1)
    idx = np.arange(n)[:, None] + offs[None, :]
    idxc = np.clip(idx, 0, max(n - 1, 0))
    same = (
        (idx >= 0) & (idx < n) & (group[idxc] == group[:, None])
        if n
        else np.zeros((0, offs.size), dtype=bool)
    )
    V = np.where(same, Tc[idxc], np.nan) if n else np.zeros((0, offs.size))
    E = np.where(same, sec[idxc], np.nan) if n else np.zeros((0, offs.size))
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        fin = np.isfinite(V) & np.isfinite(E)
        E2 = np.where(fin, E * E, 0.0)
        base = np.where(fin, 1.0 / E2, 0.0)
    return offs.astype(float), np.where(fin, V, 0.0), E2, base


def _local_fit(group, Tc, sec, sigma, exclude: int = -1, nb=None, stats: bool = True):
    """Local regression of station values within groups (Gaussian kernel sigma, in stations).

    Stations within ``exclude`` positions of the target (itself included)
    get no weight: ``exclude=1`` predicts each station from the others
    beyond its immediate neighbours (h-block cross-validation). ``nb`` is a
    precomputed :func:`_neighbourhood` wide enough for ``sigma`` (its rows
    may be a subset of the stations, matching ``Tc``). ``stats=False``
    skips the errors (returned as NaN).

    Returns the smoothed values, their standard errors, the leave-one-out
    residuals and the local polynomial coefficients (n, 3).
    """
    J = max(2, exclude + 3, int(math.ceil(3.0 * sigma)))
    if nb is None or nb[0].size < 2 * J + 1:
        nb = _neighbourhood(group, Tc, sec, J)
    x, Vz, E2, base = nb
    if x.size > 2 * J + 1:  # only the columns the kernel reaches
        keep = np.abs(x) <= J
        x, Vz, E2, base = x[keep], Vz[:, keep], E2[:, keep], base[:, keep]
    kern = np.exp(-0.5 * (x / sigma) ** 2)
    kern[(np.abs(x) <= exclude) | (np.abs(x) > J)] = 0.0
    W = base * kern[None, :]
    S = np.stack([W @ x**p for p in range(5)], axis=1)  # sums of w x^k, k = 0..4
    WV = W * Vz
    B = np.stack([WV @ x**p for p in range(3)], axis=1)  # sums of w x^k y, k = 0..2
    # degree per station: quadratic with >= 2 stations on both sides, linear with stations on one
    # side only or 1 on a side (boundary behaviour of local regression, Cleveland 1979), else constant
    present = (W > 0).astype(float)
    nl = present @ (x < 0)
    nr = present @ (x > 0)
    quad = (nl >= 2) & (nr >= 2)
    lin = ~quad & (nl + nr >= 2)
    # inverse of the symmetric 3x3 moment matrix [[s0 s1 s2] [s1 s2 s3] [s2 s3 s4]] by cofactors
    s0, s1, s2, s3, s4 = (S[:, k] for k in range(5))
    c00 = s2 * s4 - s3 * s3
    c01 = s2 * s3 - s1 * s4
    c02 = s1 * s3 - s2 * s2
    c11 = s0 * s4 - s2 * s2
    c12 = s1 * s2 - s0 * s3
    c22 = s0 * s2 - s1 * s1
    with np.errstate(all="ignore"):
        det = s0 * c00 + s1 * c01 + s2 * c02
        okq = quad & (np.abs(det) > 1e-9 * np.abs(s0 * c00))
        inv = (
            np.stack(
                [np.stack([c00, c01, c02], 1), np.stack([c01, c11, c12], 1), np.stack([c02, c12, c22], 1)], 1
            )
            / det[:, None, None]
        )
        det2 = s0 * s2 - s1 * s1
        okl = (lin | (quad & ~okq)) & (np.abs(det2) > 1e-9 * np.abs(s0 * s2))
    inv = np.where(okq[:, None, None], inv, 0.0)
    inv[okl, 0, 0] = s2[okl] / det2[okl]
    inv[okl, 0, 1] = inv[okl, 1, 0] = -s1[okl] / det2[okl]
    inv[okl, 1, 1] = s0[okl] / det2[okl]
    okc = ~okq & ~okl & (s0 > 0)
    inv[okc, 0, 0] = 1.0 / s0[okc]  # local constant where no slope is determined
    # first row of the inverse: the equivalent kernel of the value at x = 0
    c = inv[:, 0, :].copy()
    Ts = (c * B).sum(axis=1)
    coef = np.einsum("nij,nj->ni", inv, B)
    empty = ~(S[:, 0] > 0)
    if not stats:
        Ts[empty] = np.nan
        return Ts, np.full(Ts.size, np.nan), None, coef
    ones = np.ones(x.size)
    P = np.stack([ones, x, x * x])  # (3, m): polynomial terms at the offsets (BLAS products below)
    L = (c @ P) * W
    var = (L * L * E2) @ ones
    K = W * E2  # the kernel weight where the station exists
    R = Vz - coef @ P
    chi = (W * R * R) @ ones  # W is 0 where no station
    sk = K @ ones
    sk2 = (K * K) @ ones
    with np.errstate(invalid="ignore", divide="ignore"):
        neff = sk**2 / sk2
        p = np.where(okq, 3.0, np.where(okl, 2.0, 1.0))
        # reduced chi-square of the local fit (Birge ratio): inflate the errors where the
        # stations scatter more than their own errors say (model error, common practice)
        red = np.where(neff - p > 0.5, chi / sk * neff / (neff - p), 1.0)
        se_s = np.sqrt(var * np.maximum(red, 1.0))
    # leave-one-out residual of a linear smoother: (y - yhat) / (1 - L_ii) (Cleveland & Devlin 1988)
    lii = c[:, 0] * W[:, int(np.flatnonzero(x == 0)[0])]
    with np.errstate(invalid="ignore", divide="ignore"):
        loo = (Tc - Ts) / np.maximum(1.0 - lii, 0.05)
    Ts[empty] = np.nan
    se_s[empty] = np.nan
    return Ts, se_s, loo, coef


#: h-block cross-validation half-width (stations left out on each side of the predicted one).
_CV_BLOCK = 1
#: Standard errors of the CV score a wider kernel may lose (0 = the best score wins).
_CV_SE = 0.0

#: Candidate smoothing widths (Gaussian sigma, in stations) chosen per fault by cross-validation.
SMOOTHING_CANDIDATES = (0.6, 0.9, 1.3, 2.0, 3.0)


def _smooth_profiles(group, T, se, sigma, *, chunk: int = 8192):
    """Smooth the along-strike profiles in chunks of whole faults (bounded memory).

    See :func:`_smooth_chunk`; ``group`` must be sorted (stations of a fault
    contiguous), and each chunk holds whole faults, so the result does not
    depend on the chunking.
    """
    n = T.size
    if n <= chunk:
        return _smooth_chunk(group, T, se, sigma)
    starts = np.flatnonzero(np.r_[True, group[1:] != group[:-1]])
    cuts = [0]
    for st0 in starts[1:]:
        if st0 - cuts[-1] >= chunk:
            cuts.append(int(st0))
    cuts.append(n)
    # the error floor of the whole set, as an unchunked run would use
    fin = np.isfinite(se) & (se > 0)
    floor = float(np.median(se[fin])) * 0.1 if fin.any() else 1e-3
    parts = [
        _smooth_chunk(group[a:b], T[a:b], se[a:b], sigma, floor=floor)
        for a, b in zip(cuts[:-1], cuts[1:], strict=True)
    ]
    out = [np.concatenate([p[k] for p in parts]) for k in range(4)]
    return (*out, np.concatenate([p[4] for p in parts], axis=0))


def _smooth_chunk(group, T, se, sigma, *, floor=None):
    """Robust local-regression smoothing of equally spaced station values within groups.

    Parameters
    ----------
    group : ndarray of int
        Fault of each station (stations sorted by fault and distance).
    T, se : ndarray
        Station values and standard errors (NaN where unusable).
    sigma : float or None
        Gaussian kernel sigma in stations; ``None`` chooses it per fault
        among :data:`SMOOTHING_CANDIDATES` by leave-one-out cross-validation;
        0 returns the stations as they are.

    Returns
    -------
    smoothed, smoothed_err, outlier, sigma_used : ndarray
    coef : ndarray, shape (n, 3)
        The local polynomial at each station (value, slope, curvature per
        station spacing), for locating a maximum between stations.

    Notes
    -----
    Hampel (1974, J. Am. Statist. Assoc. 69) identifier (running median of
    5, 3 robust deviations), then locally weighted regression (Cleveland
    1979, J. Am. Statist. Assoc. 74) with Gaussian kernel weights times
    inverse variances: quadratic with two stations on both sides, linear
    near the ends. A quadratic is reproduced exactly, so the peak of a
    smooth profile is not flattened as by a moving average. The width is
    chosen per fault from the inverse-variance weighted prediction error of
    each station from the others beyond its neighbours (h-block
    cross-validation of the smoother, h = 1: Burman, Chow & Nolan 1994,
    Biometrika 81; Cleveland & Devlin 1988, J. Am. Statist. Assoc. 83): a
    noisy plateau gets a wide kernel, an apex the stations resolve a narrow
    one. The maximum is then refined up to half a station either way on the
    local polynomial (:func:`_vertex_between_stations`). The error is the propagated
    station error, inflated by the local reduced chi-square where stations
    scatter more than their errors say.
    """
    outlier = _hampel(group, T, se)
    Tc = np.where(outlier, np.nan, T)
    sec = np.where(np.isfinite(se) & (se > 0), se, np.nan)
    if floor is None:
        floor = float(np.nanmedian(sec)) * 0.1 if np.isfinite(sec).any() else 1e-3
    sec = np.maximum(np.nan_to_num(sec, nan=np.inf), max(floor, 1e-6))
    if sigma is not None and sigma <= 0:
        coef = np.c_[Tc, np.zeros(T.size), np.zeros(T.size)]
        return Tc, np.where(np.isfinite(Tc), sec, np.nan), outlier, np.zeros(T.size), coef
    if sigma is not None:
        Ts, se_s, _, coef = _local_fit(group, Tc, sec, float(sigma))
        return Ts, se_s, outlier, np.full(T.size, float(sigma)), coef
    g0 = int(group.min()) if group.size else 0
    group = group - g0  # chunks carry global fault indices
    n_g = int(group.max()) + 1 if group.size else 0
    nb = _neighbourhood(group, Tc, sec, max(2, int(math.ceil(3.0 * max(SMOOTHING_CANDIDATES)))))
    fits = []
    scores = []
    ses = []
    for sg in SMOOTHING_CANDIDATES:
        Ts, _, _, coef = _local_fit(group, Tc, sec, sg, nb=nb, stats=False)
        # h-block cross-validation (h = 1; Burman, Chow & Nolan 1994, Biometrika 81): neighbouring
        # stations share relief and DEM errors, so each is predicted without its two neighbours,
        # or correlated errors would reward too narrow a kernel
        pred = _local_fit(group, Tc, sec, sg, exclude=_CV_BLOCK, nb=nb, stats=False)[0]
        z2 = ((Tc - pred) / sec) ** 2
        good = np.isfinite(z2)
        cnt = np.bincount(group[good], minlength=n_g)
        with np.errstate(invalid="ignore", divide="ignore"):
            m1 = np.bincount(group[good], z2[good], minlength=n_g) / cnt
            m2 = np.bincount(group[good], z2[good] ** 2, minlength=n_g) / cnt
            ses.append(np.sqrt(np.maximum(m2 - m1 * m1, 0.0) / np.maximum(cnt - 1, 1)))
        scores.append(m1)
        fits.append((Ts, coef))
    sc = np.vstack(scores)
    sc[~np.isfinite(sc)] = np.inf
    se_sc = np.vstack(ses)
    imin = np.argmin(sc, axis=0)
    cols = np.arange(n_g)
    # the widest kernel whose score is within _CV_SE standard errors of the best (with _CV_SE = 1 the
    # one-standard-error rule of Breiman et al. 1984; 0 keeps the best score, which peaked profiles
    # need: wider kernels cut their apex)
    limit = sc[imin, cols] + _CV_SE * np.nan_to_num(se_sc[imin, cols])
    ok_w = sc <= limit[None, :]
    best = (len(SMOOTHING_CANDIDATES) - 1) - np.argmax(ok_w[::-1], axis=0)
    # a fault with nothing to cross-validate takes the middle width
    best[~np.isfinite(sc).any(axis=0)] = len(SMOOTHING_CANDIDATES) // 2
    pick = best[group] if group.size else np.zeros(0, dtype=int)
    Ts = np.choose(pick, [f[0] for f in fits]) if group.size else np.zeros(0)
    coef = (
        np.stack([np.choose(pick, [f[1][:, k] for f in fits]) for k in range(3)], axis=1)
        if group.size
        else np.zeros((0, 3))
    )
    # errors only for the width each fault uses, on the rows of those faults
    se_s = np.full(T.size, np.nan)
    for k in np.unique(pick):
        rows = np.flatnonzero(pick == k)
        sub = (nb[0], nb[1][rows], nb[2][rows], nb[3][rows])
        se_s[rows] = _local_fit(group[rows], Tc[rows], sec[rows], SMOOTHING_CANDIDATES[k], nb=sub)[1]
    return Ts, se_s, outlier, np.asarray(SMOOTHING_CANDIDATES)[pick], coef


def _vertex_between_stations(i, g, d, T, se, usable, coef, key):
    """Refine maxima at stations ``i`` with the local polynomial up to half a station either way.

    A peak that falls between two stations is under-sampled by both; the
    local quadratic fitted at the highest station is evaluated at its vertex
    (or at half a station towards the higher neighbour), only towards
    neighbours that were measured, and never above what the stations involved
    allow (raw throw + 2 sigma). Returns the value and its distance along
    the trace.
    """
    n = d.size
    val = key[i].copy()
    pos = d[i].copy()
    if i.size == 0:
        return val, pos
    nb_l = i - 1
    nb_r = i + 1
    has_l = (nb_l >= 0) & (g[np.maximum(nb_l, 0)] == g[i]) & usable[np.maximum(nb_l, 0)]
    has_r = (nb_r < n) & (g[np.minimum(nb_r, n - 1)] == g[i]) & usable[np.minimum(nb_r, n - 1)]
    sp_l = np.where(has_l, d[i] - d[np.maximum(nb_l, 0)], np.nan)
    sp_r = np.where(has_r, d[np.minimum(nb_r, n - 1)] - d[i], np.nan)
    c0, c1, c2 = coef[i, 0], coef[i, 1], coef[i, 2]
    lo = np.where(has_l, -0.5, 0.0)
    hi = np.where(has_r, 0.5, 0.0)
    with np.errstate(invalid="ignore", divide="ignore"):
        xv = np.where(c2 < 0, -c1 / (2.0 * c2), 0.0)
    xv = np.clip(np.nan_to_num(xv), lo, hi)
    cand = np.stack([lo, hi, xv], axis=1)
    pv = c0[:, None] + c1[:, None] * cand + c2[:, None] * cand * cand
    k = np.nanargmax(np.where(np.isfinite(pv), pv, -np.inf), axis=1)
    xb = cand[np.arange(i.size), k]
    vb = pv[np.arange(i.size), k]
    cap_self = T[i] + 2.0 * se[i]
    cap_l = np.where(has_l, T[np.maximum(nb_l, 0)] + 2.0 * se[np.maximum(nb_l, 0)], -np.inf)
    cap_r = np.where(has_r, T[np.minimum(nb_r, n - 1)] + 2.0 * se[np.minimum(nb_r, n - 1)], -np.inf)
    cap = np.where(
        xb < 0, np.maximum(cap_self, cap_l), np.where(xb > 0, np.maximum(cap_self, cap_r), cap_self)
    )
    vb = np.minimum(vb, cap)
    better = np.isfinite(vb) & (vb > val)
    val = np.where(better, vb, val)
    step = np.where(xb < 0, sp_l, sp_r)
    pos = np.where(better & (xb != 0), d[i] + xb * np.nan_to_num(step), pos)
    return val, pos


def _grouped_trapz(group, d, v, L, n_groups):
    """Integral over [0, L_g] of the piecewise-linear curve through (d, v), 0 at both ends."""
    g = np.concatenate([np.arange(n_groups), group, np.arange(n_groups)])
    dd = np.concatenate([np.zeros(n_groups), d, L])
    vv = np.concatenate([np.zeros(n_groups), v, np.zeros(n_groups)])
    o = np.lexsort((dd, g))
    g, dd, vv = g[o], dd[o], vv[o]
    same = g[1:] == g[:-1]
    seg = 0.5 * (vv[1:] + vv[:-1]) * (dd[1:] - dd[:-1])
    return np.bincount(g[1:][same], seg[same], minlength=n_groups)


def summarise_faults(
    faults: gpd.GeoDataFrame, stations: pd.DataFrame, *, smooth_stations: float | None = None
) -> tuple[gpd.GeoDataFrame, pd.DataFrame]:
    """Per-fault throw figures from the station throws.

    Parameters
    ----------
    faults : geopandas.GeoDataFrame
        ``fault_id``, geometry (for lengths), ``dip_deg``.
    stations : pandas.DataFrame
        Finalised stations (:func:`finalise_stations`).
    smooth_stations : float, optional
        Gaussian kernel sigma in station spacings (0 = raw stations);
        default chosen per fault by cross-validation.

    Returns
    -------
    faults : geopandas.GeoDataFrame
        With ``max_throw_m``, ``max_throw_err_m``, ``max_throw_dist_m``,
        ``mean_throw_m``, ``heave_integral_m2``, ``tip_gradient_max``,
        ``tip_gradient_min``, ``n_stations``, ``n_stations_ok``.
    stations : pandas.DataFrame
        With ``throw_smooth_m``, ``throw_smooth_err_m`` and ``outlier``.

    Notes
    -----
    The maximum is taken on the along-strike profile smoothed with a
    Gaussian kernel (inverse-variance weighted) after a Hampel filter
    (running median of 5, 3 robust deviations; Hampel 1974) has set aside
    isolated outliers, so one noisy station cannot make the maximum. Its
    error is the larger of the propagated station errors and the local
    scatter about the smooth curve. Mean throw and the heave integral
    integrate the piecewise-linear profile through the usable stations,
    tapering to zero at both tips (displacement vanishes at a fault tip;
    Walsh & Watterson 1988, from memory), so faults cut by the DEM edge are
    under-estimated (they are flagged ``censored``). Tip gradients fit
    throw = g x through the tip over the stations within a quarter of the
    length of each tip.
    """
    f = faults.copy()
    st = stations.sort_values(["fault_id", "dist_m"], kind="stable").reset_index(drop=True)
    fid = f["fault_id"].to_numpy()
    pos = pd.Series(np.arange(len(f)), index=fid)
    g = st["fault_id"].map(pos).to_numpy()
    known = ~pd.isna(g)
    st = st.loc[known].reset_index(drop=True)
    g = g[known].astype(np.int64)
    L = shapely.length(f.geometry.to_numpy())
    T = st["throw_m"].to_numpy(dtype=float)
    se = st["throw_err_m"].to_numpy(dtype=float)
    hv = st["heave_m"].to_numpy(dtype=float)
    d = st["dist_m"].to_numpy(dtype=float)
    ok = (st["status"].to_numpy() == "ok") & np.isfinite(T)
    Ts, se_s, outl, sg, coef = _smooth_profiles(
        g,
        np.where(ok, T, np.nan),
        np.where(ok, se, np.nan),
        None if smooth_stations is None else float(smooth_stations),
    )
    st["throw_smooth_m"] = Ts
    st["throw_smooth_err_m"] = se_s
    st["outlier"] = outl
    nF = len(f)
    # maximum of the smoothed profile per fault
    # the maximum is read where the profile is measured (an ok station), never in a gap
    # and no higher than the station's own measurement allows (raw throw + 2 sigma), so the
    # noise of a smoothed end point cannot make the maximum
    cap = np.minimum(Ts, T + 2.0 * se)
    key = np.where(np.isfinite(cap) & ok & ~outl, cap, -np.inf)
    o = np.lexsort((key, g))
    last = np.r_[g[o][1:] != g[o][:-1], True] if o.size else np.zeros(0, dtype=bool)
    best = o[last]
    mx = np.full(nF, np.nan)
    mx_err = np.full(nF, np.nan)
    mx_d = np.full(nF, np.nan)
    has = np.isfinite(key[best])
    bi = best[has]
    val, dpos = _vertex_between_stations(bi, g, d, T, se, ok & ~outl, coef, key)
    mx[g[bi]] = val
    mx_err[g[bi]] = se_s[bi]
    mx_d[g[bi]] = dpos
    n_ok = np.bincount(g[ok], minlength=nF)
    n_all = np.bincount(g, minlength=nF)
    okc = ok & ~outl
    throw_int = _grouped_trapz(g[okc], d[okc], T[okc], L, nF)
    heave_int = _grouped_trapz(g[okc], d[okc], hv[okc], L, nF)
    none = np.bincount(g[okc], minlength=nF) == 0
    mean_t = np.where(none, np.nan, throw_int / np.where(L > 0, L, np.nan))
    heave_int = np.where(none, np.nan, heave_int)
    # tip gradients
    x0 = d
    x1 = L[g] - d
    near0 = okc & (x0 <= 0.25 * L[g])
    near1 = okc & (x1 <= 0.25 * L[g])
    with np.errstate(invalid="ignore", divide="ignore"):
        g0 = np.bincount(g[near0], (x0 * T)[near0], minlength=nF) / np.bincount(
            g[near0], (x0 * x0)[near0], minlength=nF
        )
        g1 = np.bincount(g[near1], (x1 * T)[near1], minlength=nF) / np.bincount(
            g[near1], (x1 * x1)[near1], minlength=nF
        )
    g0[np.bincount(g[near0], minlength=nF) < 2] = np.nan
    g1[np.bincount(g[near1], minlength=nF) < 2] = np.nan
    with _warnings.catch_warnings():
        _warnings.simplefilter("ignore", RuntimeWarning)
        f["max_throw_m"] = mx
        f["max_throw_err_m"] = mx_err
        f["max_throw_dist_m"] = mx_d
        f["mean_throw_m"] = mean_t
        f["heave_integral_m2"] = heave_int
        f["tip_gradient_max"] = np.fmax(g0, g1)
        f["tip_gradient_min"] = np.fmin(g0, g1)
    used = np.full(nF, np.nan)
    used[g] = sg
    f["smooth_stations_used"] = used
    f["n_stations"] = n_all.astype(np.int64)
    f["n_stations_ok"] = n_ok.astype(np.int64)
    return f, st


# ---------------------------------------------------------------------------
# Linkage zones
# ---------------------------------------------------------------------------
def _station_lookup(stations: pd.DataFrame) -> dict:
    """fault_id -> (x, y, throw, error) arrays of the usable stations (smoothed throw where given)."""
    tcol = "throw_smooth_m" if "throw_smooth_m" in stations.columns else "throw_m"
    ecol = "throw_smooth_err_m" if "throw_smooth_err_m" in stations.columns else "throw_err_m"
    t = stations[tcol].to_numpy(dtype=float)
    use = (stations["status"].to_numpy() == "ok") & np.isfinite(t)
    if "x" in stations.columns:
        xs, ys = stations["x"].to_numpy(dtype=float), stations["y"].to_numpy(dtype=float)
    else:
        xs, ys = stations.geometry.x.to_numpy(), stations.geometry.y.to_numpy()
    fid = stations["fault_id"].to_numpy()[use]
    xs, ys, t = xs[use], ys[use], t[use]
    e = np.nan_to_num(stations[ecol].to_numpy(dtype=float)[use])
    if fid.size == 0:
        return {}
    o = np.argsort(fid, kind="stable")
    fid, xs, ys, t, e = fid[o], xs[o], ys[o], t[o], e[o]
    keys, starts = np.unique(fid, return_index=True)
    ends = np.r_[starts[1:], fid.size]
    return {int(k): (xs[a:b], ys[a:b], t[a:b], e[a:b]) for k, a, b in zip(keys, starts, ends, strict=True)}


def system_profile(
    faults_sys, stations: pd.DataFrame, *, step_m: float | None = None, _lookup: dict | None = None
) -> dict | None:
    """Sum the throw of the segments of one linked system along its strike axis.

    Parameters
    ----------
    faults_sys : geopandas.GeoDataFrame
        The segments (``fault_id``, geometry) of one system.
    stations : pandas.DataFrame
        Finalised stations with ``x``, ``y`` (or Point geometry), ``status``,
        ``throw_smooth_m`` (or ``throw_m``) and its error.
    step_m : float, optional
        Spacing of the summed profile.

    Returns
    -------
    dict or None
        ``axis`` (unit vector of the strike axis), ``axis_deg``, ``centre``,
        ``grid`` (positions on the axis, m), ``total`` (summed throw, m),
        ``var`` (its variance) and ``segments``: (fault_id, line, positions,
        throws, errors) with each segment's profile tied to zero at its
        tips. None when fewer than two segments have usable stations.
    """
    lookup = _station_lookup(stations) if _lookup is None else _lookup
    lines = faults_sys.geometry.to_numpy()
    ax_deg = float(_axial_mean(strike_axis_deg(lines), shapely.length(lines)))
    ax = math.radians(ax_deg)
    ux, uy = math.sin(ax), math.cos(ax)
    c = shapely.get_coordinates(shapely.centroid(shapely.union_all(lines)))[0]
    prof = []
    for fid, line in zip(faults_sys["fault_id"].to_numpy(), lines, strict=True):
        got = lookup.get(int(fid))
        if got is None:
            continue
        xs, ys, t, e = got
        tips = shapely.get_coordinates(line)[[0, -1]]
        a = (xs - c[0]) * ux + (ys - c[1]) * uy
        at = (tips[:, 0] - c[0]) * ux + (tips[:, 1] - c[1]) * uy
        sa = np.r_[at.min(), a, at.max()]
        tv = np.r_[0.0, t, 0.0]
        ev = np.r_[0.0, e, 0.0]
        o = np.argsort(sa, kind="stable")
        prof.append((int(fid), line, sa[o], tv[o], np.nan_to_num(ev[o])))
    if len(prof) < 2:
        return None
    lo = min(p[2][0] for p in prof)
    hi = max(p[2][-1] for p in prof)
    diffs = [np.diff(p[2][1:-1]) for p in prof if p[2].size > 3]
    step = step_m or (float(np.median(np.concatenate(diffs))) if diffs else (hi - lo) / 50.0)
    step = max(step, (hi - lo) / 5000.0, 1e-6)
    grid = np.arange(lo, hi + step, step)
    tot = np.zeros(grid.size)
    var = np.zeros(grid.size)
    for _, _, sa, tv, ev in prof:
        inside = (grid >= sa[0]) & (grid <= sa[-1])
        tot += np.where(inside, np.interp(grid, sa, tv), 0.0)
        var += np.where(inside, np.interp(grid, sa, ev) ** 2, 0.0)
    return {
        "axis": (ux, uy),
        "axis_deg": ax_deg,
        "centre": c,
        "grid": grid,
        "total": tot,
        "var": var,
        "segments": prof,
    }


def linkage_zones(
    faults: gpd.GeoDataFrame, stations: pd.DataFrame, *, step_m: float | None = None
) -> gpd.GeoDataFrame:
    """Throw minima between the segments of linked fault systems.

    Parameters
    ----------
    faults : geopandas.GeoDataFrame
        ``fault_id``, ``system_id``, geometry.
    stations : pandas.DataFrame
        Finalised stations with ``throw_smooth_m`` (or ``throw_m``),
        ``throw_err_m``, ``x``, ``y``, ``status``.
    step_m : float, optional
        Spacing of the system's aggregate profile (default: the median
        station spacing).

    Returns
    -------
    geopandas.GeoDataFrame
        Points, one per minimum between neighbouring segments: ``system_id``,
        ``fault_ids`` ("a,b"), ``along_m`` (position on the system's strike
        axis), ``throw_min_m`` (summed throw of the segments at the
        minimum), ``throw_left_m``, ``throw_right_m`` (neighbouring maxima),
        ``deficit_m`` (mean of the maxima minus the minimum),
        ``deficit_frac``, ``deficit_err_m`` and ``significant``
        (deficit > 2 errors).

    Notes
    -----
    Segments of a linked system share displacement; where they overlap or
    link, the summed throw profile typically shows a deficit (relay ramps;
    Peacock & Sanderson 1991, J. Struct. Geol. 13, from memory). The summed
    throw of all segments is built on the system's strike axis (each
    segment's profile tapering to zero at its tips), and the lowest point
    between the maxima of each pair of neighbouring segments is reported.
    """
    cols = [
        "system_id",
        "fault_ids",
        "along_m",
        "throw_min_m",
        "throw_left_m",
        "throw_right_m",
        "deficit_m",
        "deficit_frac",
        "deficit_err_m",
        "significant",
    ]
    empty = gpd.GeoDataFrame(
        {c: [] for c in cols}, geometry=gpd.GeoSeries([], crs=faults.crs), crs=faults.crs
    )
    if "system_id" not in faults.columns or len(stations) == 0:
        return empty
    sysid = faults["system_id"].to_numpy()
    counts = pd.Series(sysid).value_counts()
    multi = counts.index[counts.to_numpy() > 1]
    rows = []
    geoms = []
    lookup = _station_lookup(stations)
    by_sys = {k: v for k, v in faults.loc[faults["system_id"].isin(multi)].groupby("system_id")}
    for sid in sorted(multi):
        sp = system_profile(by_sys[sid], stations, step_m=step_m, _lookup=lookup)
        if sp is None:
            continue
        grid, tot, var = sp["grid"], sp["total"], sp["var"]
        c, (ux, uy) = sp["centre"], sp["axis"]
        prof = sp["segments"]
        # neighbouring segments ordered by the position of their maxima
        peaks = sorted(((p[2][np.argmax(p[3])], p) for p in prof), key=lambda t: t[0])
        for (sa_pos, pa), (sb_pos, pb) in zip(peaks[:-1], peaks[1:], strict=True):
            between = (grid >= sa_pos) & (grid <= sb_pos)
            if between.sum() < 3:
                continue
            idx = np.flatnonzero(between)
            k = idx[np.argmin(tot[idx])]
            left = idx[idx <= k]
            right = idx[idx >= k]
            tl, tr = tot[left].max(), tot[right].max()
            tmin = tot[k]
            if not (tmin < tl and tmin < tr):
                continue
            deficit = 0.5 * (tl + tr) - tmin
            err = math.sqrt(
                var[k] + 0.25 * (var[left[np.argmax(tot[left])]] + var[right[np.argmax(tot[right])]])
            )
            p_axis = shapely.points(c[0] + grid[k] * ux, c[1] + grid[k] * uy)
            qa = shapely.line_interpolate_point(pa[1], shapely.line_locate_point(pa[1], p_axis))
            qb = shapely.line_interpolate_point(pb[1], shapely.line_locate_point(pb[1], p_axis))
            qa, qb = shapely.get_coordinates(qa)[0], shapely.get_coordinates(qb)[0]
            geoms.append(shapely.points(0.5 * (qa[0] + qb[0]), 0.5 * (qa[1] + qb[1])))
            a_id, b_id = sorted((pa[0], pb[0]))
            rows.append(
                {
                    "system_id": int(sid),
                    "fault_ids": f"{a_id},{b_id}",
                    "along_m": float(grid[k]),
                    "throw_min_m": float(tmin),
                    "throw_left_m": float(tl),
                    "throw_right_m": float(tr),
                    "deficit_m": float(deficit),
                    "deficit_frac": float(deficit / (0.5 * (tl + tr))) if tl + tr > 0 else np.nan,
                    "deficit_err_m": float(err),
                    "significant": bool(deficit > 2.0 * err),
                }
            )
    if not rows:
        return empty
    return gpd.GeoDataFrame(rows, geometry=geoms, crs=faults.crs)


def _axial_mean(axes_deg, weights) -> float:
    a2 = np.radians(2.0 * np.asarray(axes_deg, dtype=float))
    w = np.asarray(weights, dtype=float)
    return (
        math.degrees(math.atan2(float((w * np.sin(a2)).sum()), float((w * np.cos(a2)).sum()))) / 2.0
    ) % 180.0


# ---------------------------------------------------------------------------
# The whole step
# ---------------------------------------------------------------------------
@dataclass
class ThrowResult:
    """What :func:`measure_throw` returns.

    Attributes
    ----------
    faults : geopandas.GeoDataFrame
        Input faults with the throw fields, inferred dip directions and
        ``dip_dir_confidence``.
    stations : geopandas.GeoDataFrame
        The ``throw_stations`` layer (Point geometry on the trace).
    linkage_zones : geopandas.GeoDataFrame
        The ``linkage_zones`` layer.
    warnings : list of str
    params : ThrowParams
        The parameters used (adapted values filled in).
    n_samples : int
        Profile samples taken (for throughput figures).
    """

    faults: gpd.GeoDataFrame
    stations: gpd.GeoDataFrame
    linkage_zones: gpd.GeoDataFrame
    warnings: list
    params: ThrowParams
    n_samples: int = 0


STATION_COLUMNS = (
    "fault_id",
    "dist_m",
    "throw_m",
    "throw_err_m",
    "vert_sep_m",
    "vert_sep_err_m",
    "planarity_err_m",
    "heave_m",
    "status",
    "throw_smooth_m",
    "throw_smooth_err_m",
    "outlier",
    "surface_slope_deg",
    "scarp_width_m",
    "fit_rmse_m",
    "n_fw",
    "n_hw",
    "profile_azimuth_deg",
    "profile_half_length_m",
)


def _check_faults(faults) -> gpd.GeoDataFrame:
    if not isinstance(faults, gpd.GeoDataFrame):
        raise InputError("faults must be a GeoDataFrame of LineString traces (run prepare first).")
    if len(faults) == 0:
        raise InputError("faults: the layer has no traces; give at least one fault trace.")
    if "fault_id" not in faults.columns:
        raise InputError("faults: no 'fault_id' column; run prepare first (it numbers the traces).")
    ids = faults["fault_id"].to_numpy()
    if pd.Series(ids).duplicated().any():
        dup = pd.Series(ids)[pd.Series(ids).duplicated()].iloc[0]
        raise InputError(f"faults: fault_id {dup} appears more than once; fault ids must be unique.")
    geoms = faults.geometry.to_numpy()
    types = shapely.get_type_id(geoms)
    bad = (types != 1) | shapely.is_empty(geoms)
    if bad.any():
        raise InputError(
            f"faults: feature with fault_id {ids[np.flatnonzero(bad)[0]]} is not a single LineString; run prepare first."
        )
    f = faults.copy()
    if "dip_deg" not in f.columns:
        f["dip_deg"] = 60.0
    dip = f["dip_deg"].to_numpy(dtype=float)
    if not np.all((dip > 0) & (dip <= 90)):
        i = int(np.flatnonzero(~((dip > 0) & (dip <= 90)))[0])
        raise InputError(f"faults: fault {ids[i]} has dip {dip[i]} outside (0, 90] degrees; fix its dip.")
    if "dip_dir_deg" not in f.columns:
        f["dip_dir_deg"] = np.nan
    if "dip_dir_source" not in f.columns:
        f["dip_dir_source"] = np.where(
            np.isfinite(f["dip_dir_deg"].to_numpy(dtype=float)), "attribute", "unknown"
        )
    return f


def measure_throw(
    faults: gpd.GeoDataFrame,
    dem,
    *,
    params: ThrowParams | None = None,
    mapper: Callable | None = None,
    progress: Callable | None = None,
    **param_kwargs,
) -> ThrowResult:
    """Throw, heave and vertical separation along every fault trace.

    Parameters
    ----------
    faults : geopandas.GeoDataFrame
        The ``faults`` layer after ``prepare`` (``fault_id``, LineString
        geometry in the DEM's CRS, ``dip_deg``, ``dip_dir_deg`` (NaN =
        unknown), optionally ``censored``, ``system_id``, ``strike_deg``).
    dem : faultmap.io.dem.Dem
        Lazy DEM in the same projected metric CRS.
    params : ThrowParams, optional
        Resolved parameters; otherwise built from ``param_kwargs`` with
        :func:`resolve_params` and the DEM's pixel size.
    mapper : callable, optional
        ``mapper(func, batches, progress) -> list`` running ``func`` over
        the batches in order (e.g. :meth:`faultmap.engine.Engine.map`);
        default a plain loop.
    progress : callable, optional
        ``progress(iterable, total) -> iterable`` wrapper (progress bar).
    **param_kwargs
        Parameters of :func:`resolve_params`.

    Returns
    -------
    ThrowResult

    Raises
    ------
    InputError
        No trace overlaps the DEM, or the faults are not usable.
    CRSError
        The faults and the DEM are in different CRSs.
    ParameterError
        Parameters out of range.

    Notes
    -----
    See the module docstring and ``docs/methods/throw.md``. Vertical
    separation to throw: Caskey (1995); scarp-profile fitting: McCalpin
    (1987), Avouac (1993); robust fits: Holland & Welsch (1977).
    """
    f = _check_faults(faults)
    if f.crs is not None and getattr(dem, "crs", None) is not None:
        from pyproj import CRS

        if not CRS.from_user_input(f.crs).equals(CRS.from_user_input(dem.crs)):
            raise CRSError(
                "faults and DEM are in different CRSs; reproject the traces to the DEM's CRS (prepare does)."
            )
    if params is None:
        params = resolve_params(dem.pixel_size, **param_kwargs)
    elif param_kwargs:
        raise ParameterError("give either params or individual parameters, not both.")
    warns: list[str] = []
    lines = f.geometry.to_numpy()
    dem_box = shapely.box(*dem.bounds)
    over = shapely.intersects(lines, dem_box)
    if not over.any():
        b = dem.bounds
        tb = f.total_bounds
        raise InputError(
            f"no fault trace overlaps the DEM (DEM x {b[0]:.0f}..{b[2]:.0f}, y {b[1]:.0f}..{b[3]:.0f}; "
            f"traces x {tb[0]:.0f}..{tb[2]:.0f}, y {tb[1]:.0f}..{tb[3]:.0f}); check both are in the same CRS and area."
        )
    if (~over).any():
        ids = f["fault_id"].to_numpy()[~over]
        warns.append(
            f"{int((~over).sum())} fault(s) lie wholly outside the DEM (fault ids {_ids(ids)}); their stations are 'outside'."
        )
    partly = over & ~shapely.within(lines, dem_box)
    if partly.any():
        warns.append(
            f"{int(partly.sum())} fault(s) run off the DEM edge (fault ids {_ids(f['fault_id'].to_numpy()[partly])}); stations beyond it are 'outside'."
        )
    batches = plan_batches(f, dem, params)
    from functools import partial

    func = partial(run_batch, dem=dem, params=params)
    if mapper is None:
        it = batches if progress is None else progress(batches, len(batches))
        outs = [func(b) for b in it]
    else:
        outs = mapper(func, batches, progress)
    frames = [o[0] for o in outs]
    for o in outs:
        warns.extend(o[1])
    raw = (
        pd.concat(frames, ignore_index=True)
        if frames
        else _raw_frame(StationSet(*(np.zeros(0),) * 6), np.zeros(0), {k: np.zeros(0) for k in _RAW_COLUMNS})
    )
    # faults wholly outside the DEM still get their stations, all 'outside'
    if (~over).any():
        sub = f.loc[~over].reset_index(drop=True)
        side = _side_signs_for(sub)
        st = place_stations(
            sub.geometry.to_numpy(),
            spacing_m=params.spacing_for(shapely.length(sub.geometry.to_numpy())),
            normal_window_m=params.normal_window_m,
            side_sign=side,
        )
        res = {k: np.full(len(st), np.nan) for k in _RAW_COLUMNS}
        res["geo_status"] = np.full(len(st), "outside", dtype=object)
        res["poor"] = np.zeros(len(st), dtype=bool)
        res["wants_m"] = np.zeros(len(st))
        res["samples"] = np.zeros(len(st))
        raw = pd.concat([raw, _raw_frame(st, sub["fault_id"].to_numpy(), res)], ignore_index=True)
    raw = raw.sort_values(["fault_id", "dist_m"], kind="stable").reset_index(drop=True)
    n_samples = int(np.nansum(raw["samples"].to_numpy(dtype=float)))

    # --- down-thrown side
    pre_ok = (raw["geo_status"].to_numpy() == "") & ~raw["poor"].to_numpy(dtype=bool)
    sides = infer_downthrown_side(
        raw["fault_id"].to_numpy(),
        raw["vs_plus_m"].to_numpy(dtype=float),
        pre_ok,
        np.hypot(
            raw["vs_se_m"].to_numpy(dtype=float), np.nan_to_num(raw["planarity_m"].to_numpy(dtype=float))
        ),
    )
    dd = f["dip_dir_deg"].to_numpy(dtype=float)
    known = np.isfinite(dd)
    fid = f["fault_id"].to_numpy()
    hw_sign = pd.Series(1.0, index=fid)
    conf = pd.Series(np.nan, index=fid)
    down = sides["down_sign"].reindex(fid).fillna(0).to_numpy()
    cfd = sides["confidence"].reindex(fid).fillna(0.0).to_numpy()
    nst = sides["n"].reindex(fid).fillna(0).to_numpy()
    # attribute faults: + side is the hanging wall by construction; check the DEM agrees
    disagree = known & (down < 0) & (cfd >= 0.7) & (nst >= 3)
    for i in np.flatnonzero(disagree):
        warns.append(
            f"fault {fid[i]}: the DEM shows the other side down-thrown ({cfd[i]:.0%} of {int(nst[i])} stations) "
            f"than its dip direction {dd[i]:.0f} deg says; check the dip_dir attribute (throws there come out negative)."
        )
    conf[known] = np.where(down[known] == 0, np.nan, np.where(down[known] > 0, cfd[known], 1.0 - cfd[known]))
    unk = ~known
    hw = np.where(down < 0, -1.0, 1.0)
    hw_sign[unk] = hw[unk]
    conf[unk] = np.where(down[unk] == 0, np.nan, cfd[unk])
    nodir = unk & (down == 0)
    if nodir.any():
        warns.append(
            f"dip direction unknown and not measurable from the DEM for fault ids {_ids(fid[nodir])}; "
            "give a dip_dir attribute."
        )
    weak = unk & (down != 0) & (cfd < 0.7)
    if weak.any():
        warns.append(
            f"down-thrown side inferred with low confidence (< 70 % of stations agree) for fault ids {_ids(fid[weak])}."
        )
    st = finalise_stations(raw, f, hw_sign)
    # dip direction of inferred faults: the mean profile azimuth towards the hanging wall
    f = f.copy()
    f["dip_dir_source"] = f["dip_dir_source"].astype(object)
    if unk.any():
        s_f = st["fault_id"].map(hw_sign).to_numpy(dtype=float)
        vx = s_f * st["nx"].to_numpy(float)
        vy = s_f * st["ny"].to_numpy(float)
        gx = pd.Series(vx).groupby(st["fault_id"].to_numpy()).sum()
        gy = pd.Series(vy).groupby(st["fault_id"].to_numpy()).sum()
        az = (np.degrees(np.arctan2(gx, gy)) % 360.0).reindex(fid).to_numpy()
        upd = unk & (down != 0)
        if "strike_deg" in f.columns:
            # keep prepare's strike line; pick the perpendicular on the hanging-wall side
            sk = f["strike_deg"].to_numpy(dtype=float)
            cand = (sk + 90.0) % 360.0
            diff = np.abs(((cand - az) + 180.0) % 360.0 - 180.0)
            new_dd = np.where(np.isfinite(sk), np.where(diff <= 90.0, cand, (sk - 90.0) % 360.0), az)
            new_sk = (new_dd - 90.0) % 360.0
            f.loc[upd, "strike_deg"] = new_sk[upd]
        else:
            new_dd = az
        f.loc[upd, "dip_dir_deg"] = new_dd[upd]
        f.loc[upd, "dip_dir_source"] = "dem"
        f.loc[unk & ~upd, "dip_dir_source"] = "unknown"
    f["dip_dir_confidence"] = conf.reindex(fid).to_numpy(dtype=float)
    # --- summaries
    f, st = summarise_faults(f, st, smooth_stations=params.smooth_stations)
    if "censored" not in f.columns:
        f["censored"] = False
    f["censored"] = f["censored"].astype(bool)
    nok = f["n_stations_ok"].to_numpy()
    none_ok = over & (nok == 0)
    if none_ok.any():
        warns.append(f"no usable station on fault ids {_ids(fid[none_ok])}: see throw_stations status.")
    lz = linkage_zones(f, st, step_m=params.station_spacing_m)
    geom = gpd.points_from_xy(st["x"], st["y"], crs=f.crs)
    st["profile_half_length_m"] = st["half_length_m"]
    stations = gpd.GeoDataFrame(st[list(STATION_COLUMNS)].copy(), geometry=geom, crs=f.crs)
    return ThrowResult(
        faults=f, stations=stations, linkage_zones=lz, warnings=warns, params=params, n_samples=n_samples
    )


def _ids(values, limit: int = 10) -> str:
    v = [str(x) for x in np.asarray(values)[:limit]]
    return ", ".join(v) + (" ..." if len(values) > limit else "")
