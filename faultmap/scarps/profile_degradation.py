"""Kappa t at every throw station, from the profiles the throw step has just sampled.

:func:`station_degradation` takes one sample matrix of the throw step (each
station's - and + side rows) and its far-field fits, cuts a window around
each scarp (the scarp zone and its fitted far field, at most three zone
widths each side), and fits the diffusion model
(:func:`faultmap.scarps.diffusion.fit_diffusion_profiles`) to all of them
at once, then applies the resolution rule (:func:`resolution_codes`).
:class:`DegradationCollector` gathers the results of a batch's matrices.
"""

from __future__ import annotations

import math

import numpy as np

from faultmap.scarps.diffusion import fit_diffusion_profiles, interpolation_kappa_t_m2

__all__ = ["RAW_COLUMNS", "station_degradation", "resolution_codes", "DegradationCollector"]

#: Raw station fields added to the throw step's (``kt_code``: see ``diffusion.CODE_NAMES``).
RAW_COLUMNS = ("kt_m2", "kt_se_m2", "kt_bound_m2", "kt_rmse_m", "kt_code")

#: A kappa t is resolved when the scarp's diffusion length sqrt(kappa t) is at least this many pixels.
RESOLVED_SQRT_KT_PX = 0.5
#: Standard deviation of the interpolation bias over sub-pixel positions, in units of p^2 (derived).
_PHASE_SD = math.sqrt(1.0 / 120.0 - 1.0 / 144.0)
#: Scarp windows of widths within this factor share a matrix.
_W_GROWTH = 1.5


def resolution_codes(kt_m2, kt_se_m2, *, pixel_size_m, offset_m, offset_se_m, rmse_m, noise_m, window_m):
    """Code and bound of each kappa t: measured, fresher than (upper bound), broader than (lower bound).

    Parameters
    ----------
    kt_m2, kt_se_m2 : ndarray
        Kappa t after the interpolation correction and its 1-sigma error, m^2.
    pixel_size_m : float
    offset_m, offset_se_m : ndarray
        Fitted offset across the scarp and its error, m.
    rmse_m, noise_m : ndarray
        RMS misfit of the diffusion fit and of the throw step's far-field lines, m.
    window_m : ndarray
        Half-width of the fitted window (the shorter side), m.

    Returns
    -------
    code : ndarray of int
        0 ok, 1 unresolved (kappa t at most ``bound``), 2 broad (at least
        ``bound``), 3 poor_fit, 4 no_scarp.
    bound : ndarray
        Upper bound (code 1) or lower bound (code 2), m^2; NaN otherwise.

    Notes
    -----
    The resolution rule (ours, from the sampling): a scarp whose diffusion
    length sqrt(kappa t) is under half a pixel is narrower than the DEM can
    show; the profile then looks as broad as the pixels make it, so the fit
    can only say the scarp is at most that degraded: an upper bound on kappa t
    ("fresher than"), max(kappa t + 2 sigma, (p / 2)^2). It is an upper
    bound on the morphologic age too. Where the scarp's slope reaches the
    ends of the window (3 widths 2 sqrt(kappa t) beyond the fitted window's
    shorter side), the far field is not seen and the fit is a lower bound.
    """
    kt = np.asarray(kt_m2, float)
    se = np.asarray(kt_se_m2, float)
    p = float(pixel_size_m)
    code = np.zeros(kt.shape, dtype=np.int64)
    bound = np.full(kt.shape, np.nan)
    with np.errstate(invalid="ignore"):
        no_scarp = ~(np.abs(offset_m) > 3.0 * offset_se_m) | ~(np.abs(offset_m) > 3.0 * noise_m)
        poor = (
            ~np.isfinite(kt)
            | ~np.isfinite(se)
            | (rmse_m > np.maximum(2.0 * noise_m, 0.05 * np.abs(offset_m)))
        )
        broad = 3.0 * np.sqrt(np.maximum(kt, 0.0)) * 2.0 > window_m
        small = (np.sqrt(np.maximum(kt, 0.0)) < RESOLVED_SQRT_KT_PX * p) | (kt < 2.0 * se)
    code[small] = 1
    bound[small] = np.maximum(kt[small] + 2.0 * se[small], (RESOLVED_SQRT_KT_PX * p) ** 2)
    code[broad & ~small] = 2
    bound[broad & ~small] = kt[broad & ~small]
    code[poor] = 3
    code[no_scarp] = 4
    bound[poor | no_scarp] = np.nan
    return code, bound


def _window_bins(W):
    """Group station indices by window size (ratio under ``_W_GROWTH`` within a group)."""
    key = np.floor(np.log(np.maximum(W, 1)) / np.log(_W_GROWTH)).astype(np.int64)
    order = np.argsort(key, kind="stable")
    ks = key[order]
    cuts = np.flatnonzero(np.diff(ks)) + 1
    return np.split(order, cuts)


def station_degradation(Z, fits, *, step_m, pixel_size_m, n_events: int = 1) -> dict:
    """Kappa t of every station of one sample matrix of the throw step.

    Parameters
    ----------
    Z : ndarray, shape (2 m, K)
        Row ``i`` the - side of station ``i``, row ``m + i`` its + side,
        column ``j`` at ``j + 1`` steps from the trace (NaN = void).
    fits : dict of ndarray
        The throw step's far-field fits of those rows
        (:func:`faultmap.throw.scarp_fit.fit_profile_matrix`: ``w``, ``hi``,
        ``rms``).
    step_m : float
        Sample spacing, m.
    pixel_size_m : float
        DEM pixel size, m.
    n_events : int
        Events the scarps grew in (:func:`faultmap.scarps.diffusion.scarp_shape`).

    Returns
    -------
    dict of ndarray, shape (m,)
        ``kt_m2`` (kappa t less the interpolation's p^2 / 12, not below
        0), ``kt_se_m2`` (the fit's error and the interpolation's
        dependence on the sub-pixel position, 0.0373 p^2, in quadrature), ``kt_bound_m2``, ``kt_rmse_m`` and ``kt_code``
        (:func:`resolution_codes`).
    """
    Z = np.asarray(Z)
    R2, K = Z.shape
    m = R2 // 2
    out = {k: np.full(m, np.nan) for k in RAW_COLUMNS}
    if m == 0:
        return out
    w = np.nan_to_num(np.asarray(fits["w"], float))
    hi = np.nan_to_num(np.asarray(fits["hi"], float))
    # window per side: the scarp zone and its far field, at most three zone widths, within the fit window
    wside = np.minimum(np.floor(hi), np.maximum(3.0 * w, w + 20.0))
    wside = np.clip(wside, 0, K).astype(np.int64)
    Wst = np.maximum(wside[:m], wside[m:])
    rms = np.asarray(fits["rms"], float)
    noise = np.fmax(rms[:m], rms[m:])  # the noisier side's far-field misfit (NaN only where both are)
    use = (wside[:m] >= 5) & (wside[m:] >= 5)
    idx = np.flatnonzero(use)
    for grp in _window_bins(Wst[idx]) if idx.size else []:
        g = idx[grp]
        Kc = int(Wst[g].max())
        cols = np.arange(Kc)
        zm = Z[g, :Kc].astype(float)
        zp = Z[m + g, :Kc].astype(float)
        zm = np.where(cols[None, :] < wside[g, None], zm, np.nan)
        zp = np.where(cols[None, :] < wside[m + g, None], zp, np.nan)
        Zc = np.concatenate([zm[:, ::-1], zp], axis=1)
        x = np.concatenate([-(cols[::-1] + 1.0), cols + 1.0]) * step_m
        s0 = np.maximum(0.5 * (w[g] + w[m + g]) * step_m / 1.8, step_m)
        fit = fit_diffusion_profiles(x, Zc, s0_m=s0, n_events=n_events)
        kt = np.maximum(fit["kappa_t_m2"] - interpolation_kappa_t_m2(pixel_size_m), 0.0)
        # the interpolation's bias depends on where the samples fall within the pixels: u (p - u) / 2 for
        # u uniform in [0, p] has standard deviation p^2 sqrt(1/120 - 1/144) = 0.0373 p^2 (derived)
        se = np.hypot(fit["kappa_t_se_m2"], _PHASE_SD * pixel_size_m**2)
        code, bound = resolution_codes(
            kt,
            se,
            pixel_size_m=pixel_size_m,
            offset_m=fit["offset_m"],
            offset_se_m=fit["offset_se_m"],
            rmse_m=fit["rmse_m"],
            noise_m=noise[g],
            window_m=np.minimum(wside[g], wside[m + g]) * step_m,
        )
        out["kt_m2"][g] = kt
        out["kt_se_m2"][g] = se
        out["kt_bound_m2"][g] = bound
        out["kt_rmse_m"][g] = fit["rmse_m"]
        out["kt_code"][g] = code
    return out


class DegradationCollector:
    """Gathers :func:`station_degradation` over the sample matrices of one window of the throw step.

    Called as ``collector(sel, Z, fits)`` by :func:`faultmap.throw.profiles.measure_profiles`
    for each matrix (``sel`` the stations of that matrix); :meth:`result` gives the raw columns.
    """

    def __init__(self, n: int, *, step_m: float, pixel_size_m: float, n_events: int = 1):
        """Prepare the columns of ``n`` stations (NaN until a matrix fills them)."""
        self.out = {k: np.full(n, np.nan) for k in RAW_COLUMNS}
        self.kw = dict(step_m=step_m, pixel_size_m=pixel_size_m, n_events=n_events)

    def __call__(self, sel, Z, fits) -> None:
        """Fit the stations ``sel`` of one sample matrix and store their columns."""
        r = station_degradation(Z, fits, **self.kw)
        for k in RAW_COLUMNS:
            self.out[k][sel] = r[k]

    def result(self) -> dict:
        """Return the raw columns, one value per station (NaN where not fitted)."""
        return self.out
