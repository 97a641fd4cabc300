"""Diffusion model of a degraded fault scarp and its fit to many profiles at once.

A fault scarp degrades like a diffusing step: with the elevation obeying
dz/dt = kappa d2z/dx2, a vertical offset 2A of a surface of slope b relaxes to

    z(x, t) = c + b x + A erf((x - x0) / (2 sqrt(kappa t)))

(Nash 1980; Hanks, Bucknam, Lajoie & Wallace 1984), so the profile's shape
gives the product kappa t (m^2). A scarp that grew in ``n`` equal events,
the latest as old as the recurrence interval, is the mean of ``n`` such
steps of ages t k / n, k = 1..n (linear diffusion superposes); its kappa t
is that of the oldest event, the age of the offset surface.

:func:`fit_diffusion_profiles` fits (c, b, A, x0, kappa t) to every row of a
profile matrix together: a few candidate widths with the linear parameters
solved in closed form, then damped Gauss-Newton steps (Levenberg-Marquardt)
on all five, batched over the rows, with Tukey biweights against gullies
and vegetation. This array code is the reference; when the compiled kernels
are on (:mod:`faultmap.numerics.jit`) the same fit runs row by row in
:func:`faultmap.scarps.diffusion_jit.fit_rows`, in small fixed-size arrays
(agreeing to rounding). Either way the cost is linear in samples.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.special import erf

from faultmap.numerics import jit

__all__ = [
    "scarp_shape",
    "diffusion_profile",
    "fit_diffusion_profiles",
    "interpolation_kappa_t_m2",
    "CODE_NAMES",
]

_SQPI = 2.0 / math.sqrt(math.pi)
#: Fit codes of a station's kappa t (``kt_code``) and their words.
CODE_NAMES = {0: "ok", 1: "unresolved", 2: "broad", 3: "poor_fit", 4: "no_scarp"}


def _roots(n_events: int) -> np.ndarray:
    k = np.arange(1, int(n_events) + 1, dtype=float)
    return np.sqrt(k / float(n_events))


def scarp_shape(u, *, n_events: int = 1):
    """Normalised scarp shape F(u) and its derivative, u = (x - x0) / (2 sqrt(kappa t)).

    Parameters
    ----------
    u : array_like
        Scaled distance across the scarp (dimensionless).
    n_events : int
        Equal offsets at ages t k / n (k = 1..n); 1 = a single event.

    Returns
    -------
    F, dF : ndarray
        F runs from -1 to 1 (erf(u) for one event); dF = dF/du.
    """
    u = np.asarray(u, dtype=float)
    r = _roots(n_events)
    if r.size == 1:
        return erf(u), _SQPI * np.exp(-u * u)
    F = np.zeros_like(u)
    dF = np.zeros_like(u)
    for rk in r:  # a handful of events, each a whole-array operation
        v = u / rk
        F += erf(v)
        dF += _SQPI * np.exp(-v * v) / rk
    return F / r.size, dF / r.size


def diffusion_profile(x_m, *, kappa_t_m2, offset_m, slope=0.0, base_m=0.0, x0_m=0.0, n_events: int = 1):
    """Elevation of a diffusion-degraded scarp (Hanks et al. 1984 form).

    Parameters
    ----------
    x_m : array_like
        Distance across the scarp, m (the side of + x is the one raised by a positive offset).
    kappa_t_m2 : float or array_like
        Diffusivity times age of the (oldest) event, m^2 (> 0).
    offset_m : float or array_like
        Total vertical offset 2A of the far-field surfaces, m.
    slope : float
        Far-field surface slope dz/dx (m/m).
    base_m : float
        Elevation of the mid-point of the scarp, m.
    x0_m : float
        Position of the scarp's mid-point, m.
    n_events : int
        Events the offset grew in (equal, evenly spaced; see the module notes).

    Returns
    -------
    ndarray
        Elevation, m.

    Notes
    -----
    z = c + b x + A F((x - x0) / (2 sqrt(kappa t))), F = erf for one event
    (Nash 1980; Hanks et al. 1984; Andrews & Hanks 1985).
    """
    x = np.asarray(x_m, dtype=float)
    s = 2.0 * np.sqrt(np.asarray(kappa_t_m2, dtype=float))
    F, _ = scarp_shape((x - x0_m) / s, n_events=n_events)
    return base_m + slope * x + 0.5 * np.asarray(offset_m, dtype=float) * F


def interpolation_kappa_t_m2(pixel_size_m: float) -> float:
    """Apparent kappa t that bilinear interpolation of a point-sampled DEM adds, m^2.

    Notes
    -----
    Derived: linear interpolation between samples a pixel p apart misses a
    smooth profile by f''(x) u (p - u) / 2 (u the distance to the sample
    before), on average f'' p^2 / 12 over the positions within a pixel; in
    two dimensions along any azimuth the same (cos^2 + sin^2). Diffusion
    over kappa t adds kappa t f'', so the profile looks older by p^2 / 12.
    """
    return float(pixel_size_m) ** 2 / 12.0


def _lin_solve(W, X, Z, E):
    """Weighted least squares of Z on (1, X, E) per row: coefficients (m, 3) and SSR."""
    sw = W.sum(1)
    sx = (W * X).sum(1)
    se = (W * E).sum(1)
    sxx = (W * X * X).sum(1)
    sxe = (W * X * E).sum(1)
    see = (W * E * E).sum(1)
    WZ = W * Z
    sz = WZ.sum(1)
    sxz = (WZ * X).sum(1)
    sez = (WZ * E).sum(1)
    M = np.stack([np.stack([sw, sx, se], -1), np.stack([sx, sxx, sxe], -1), np.stack([se, sxe, see], -1)], -2)
    rhs = np.stack([sz, sxz, sez], -1)
    M = M + np.eye(3) * 1e-9 * (np.abs(M).max(axis=(1, 2), keepdims=True) + 1e-30)
    coef = np.linalg.solve(M, rhs[..., None])[..., 0]
    res = Z - coef[:, :1] - coef[:, 1:2] * X - coef[:, 2:3] * E
    return coef, (W * res * res).sum(1)


def _jacobian(X, F, dF, u, p):
    """Return the derivatives of the model by (c, b, A, x0, ln s), shape (m, 5, N)."""
    m, N = X.shape
    J = np.empty((m, 5, N))
    J[:, 0] = 1.0
    J[:, 1] = X
    J[:, 2] = F
    aD = p[:, 2:3] * dF
    np.divide(-aD, np.exp(p[:, 4:5]), out=J[:, 3])
    np.multiply(-aD, u, out=J[:, 4])
    return J


def _tukey(res, W0, tuning):
    """Tukey biweights from residuals with a MAD scale per row (zero where W0 is zero)."""
    r = np.where(W0 > 0, np.abs(res), np.inf)
    n = (W0 > 0).sum(1)
    rs = np.sort(r, axis=1)  # the median of each row's valid residuals (infinities sort last)
    lo = rs[np.arange(r.shape[0]), np.maximum((n - 1) // 2, 0)]
    hi_ = rs[np.arange(r.shape[0]), np.maximum(n // 2, 0)]
    mad = 1.4826 * 0.5 * (lo + hi_)
    mad = np.where(np.isfinite(mad) & (mad > 0), mad, 1e-6)
    q = r / (tuning * mad[:, None])
    w = np.where(q < 1.0, (1.0 - q * q) ** 2, 0.0)
    return np.where(W0 > 0, w, 0.0), mad


def fit_diffusion_profiles(
    x_m,
    Z,
    *,
    s0_m,
    n_events: int = 1,
    iterations: int = 6,
    robust: bool = True,
    tuning: float = 4.685,
    x0_max_m=None,
    s_bounds_m=(1e-3, 1e6),
    use_jit: bool = True,
):
    """Fit the diffusion scarp model to many profiles at once.

    Parameters
    ----------
    x_m : ndarray, shape (N,) or (m, N)
        Distance of each column across the scarp, m.
    Z : ndarray, shape (m, N)
        Elevations, m (NaN = no sample).
    s0_m : array_like, shape (m,)
        First guess of the scarp's width 2 sqrt(kappa t), m (candidates at
        0.4, 1 and 2.5 times it are tried first).
    n_events : int
        Events the offset grew in (:func:`scarp_shape`).
    iterations : int
        Damped Gauss-Newton steps.
    robust : bool
        Tukey biweights (tuning constant ``tuning`` robust deviations; Holland
        & Welsch 1977), re-estimated twice during the steps.
    x0_max_m : array_like, optional
        Largest shift of the scarp's mid-point from x = 0, m (default: a
        quarter of the window).
    s_bounds_m : (float, float)
        Limits of the width, m.
    use_jit : bool
        Run the compiled kernel (:func:`faultmap.scarps.diffusion_jit.fit_rows`)
        when the kernels are on; ``False`` runs this array code, the reference.

    Returns
    -------
    dict of ndarray, shape (m,)
        ``kappa_t_m2``, ``kappa_t_se_m2`` (1 sigma, residuals' lag-one
        autocorrelation allowed for as an AR(1) effective sample size;
        Bayley & Hammersley 1946), ``log_kt_se`` (standard error of ln kappa
        t), ``offset_m`` (2A, signed: positive when + x is up), ``offset_se_m``,
        ``x0_m``, ``slope``, ``rmse_m`` (weighted), ``n_used``.

    Notes
    -----
    The model is :func:`diffusion_profile`. The nonlinear parameters are the
    mid-point x0 and ln s (s = 2 sqrt(kappa t), kept positive); the linear
    ones (c, b, A) are first solved in closed form for each candidate width,
    then all five take Levenberg-Marquardt steps (each row its own damping,
    a step kept only where it lowers the weighted misfit).
    """
    Z = np.asarray(Z, dtype=float)
    m, N = Z.shape
    if use_jit and jit.ENABLED:
        return _fit_compiled(x_m, Z, s0_m, n_events, iterations, robust, tuning, x0_max_m, s_bounds_m)
    X = np.broadcast_to(np.asarray(x_m, dtype=float), (m, N))
    W0 = np.isfinite(Z).astype(float)
    Zf = np.where(W0 > 0, Z, 0.0)
    # reference level per row keeps the sums well conditioned
    ref = np.where(W0.sum(1) > 0, Zf.sum(1) / np.maximum(W0.sum(1), 1), 0.0)
    Zf = (Zf - ref[:, None]) * W0
    half = 0.5 * (np.where(W0 > 0, X, -np.inf).max(1) - np.where(W0 > 0, X, np.inf).min(1))
    half = np.where(np.isfinite(half) & (half > 0), half, 1.0)
    x0max = 0.25 * half if x0_max_m is None else np.broadcast_to(np.asarray(x0_max_m, float), (m,))
    s_lo, s_hi = s_bounds_m
    s0 = np.clip(np.asarray(s0_m, dtype=float) * np.ones(m), s_lo, s_hi)
    # --- candidate widths, linear parameters in closed form
    best_ssr = np.full(m, np.inf)
    best = np.zeros((m, 5))
    for f in (0.4, 1.0, 2.5):
        s = np.clip(s0 * f, s_lo, s_hi)
        E, _ = scarp_shape(X / s[:, None], n_events=n_events)
        coef, ssr = _lin_solve(W0, X, Zf, E)
        better = ssr < best_ssr
        best_ssr = np.where(better, ssr, best_ssr)
        best[better] = np.c_[coef, np.zeros(m), np.log(s)][better]
    p = best
    W = W0.copy()
    lam = np.full(m, 1e-3)

    def evaluate(pp):
        s = np.exp(pp[:, 4])
        u = (X - pp[:, 3:4]) / s[:, None]
        F, dF = scarp_shape(u, n_events=n_events)
        r = Zf - pp[:, :1] - pp[:, 1:2] * X - pp[:, 2:3] * F
        return F, dF, u, r

    F, dF, u, r = evaluate(p)
    reweight = {2, 4} if robust else set()
    for it in range(int(iterations)):
        if it in reweight:
            W, _ = _tukey(r, W0, tuning)
        ssr = (W * r * r).sum(1)
        J = _jacobian(X, F, dF, u, p)
        JW = J * W[:, None, :]
        H = np.matmul(JW, J.transpose(0, 2, 1))
        g = np.matmul(JW, r[:, :, None])[..., 0]
        dg = np.diagonal(H, axis1=1, axis2=2)
        Hd = H + lam[:, None, None] * (dg[:, :, None] * np.eye(5) + 1e-12 * np.eye(5))
        try:
            step = np.linalg.solve(Hd, g[..., None])[..., 0]
        except np.linalg.LinAlgError:
            step = np.zeros_like(p)
        step = np.where(np.isfinite(step), step, 0.0)
        step[:, 4] = np.clip(step[:, 4], -1.0, 1.0)
        trial = p + step
        trial[:, 3] = np.clip(trial[:, 3], -x0max, x0max)
        trial[:, 4] = np.clip(trial[:, 4], math.log(s_lo), math.log(s_hi))
        Ft, dFt, ut, rt = evaluate(trial)
        ssr_t = (W * rt * rt).sum(1)
        ok = ssr_t <= ssr
        p = np.where(ok[:, None], trial, p)
        F = np.where(ok[:, None], Ft, F)
        dF = np.where(ok[:, None], dFt, dF)
        u = np.where(ok[:, None], ut, u)
        r = np.where(ok[:, None], rt, r)
        lam = np.where(ok, lam * 0.3, lam * 10.0)
    # --- uncertainty at the solution
    s = np.exp(p[:, 4])
    J = _jacobian(X, F, dF, u, p)
    H = np.matmul(J * W[:, None, :], J.transpose(0, 2, 1))
    sw = W.sum(1)
    ssr = (W * r * r).sum(1)
    dof = np.maximum(sw - 5.0, 1.0)
    sig2 = ssr / dof
    # lag-one autocorrelation of the residuals (neighbouring DEM samples are not independent)
    rw = np.where(W > 0, r, 0.0)
    num = (rw[:, 1:] * rw[:, :-1]).sum(1)
    den = (rw * rw).sum(1)
    with np.errstate(invalid="ignore", divide="ignore"):
        rho = np.clip(np.where(den > 0, num / den, 0.0), 0.0, 0.95)
    infl = (1.0 + rho) / (1.0 - rho)
    H = H + 1e-12 * np.eye(5) * (np.abs(H).max(axis=(1, 2), keepdims=True) + 1e-30)
    with np.errstate(invalid="ignore"):
        cov = np.linalg.pinv(H) * (sig2 * infl)[:, None, None]
    var_th = np.clip(cov[:, 4, 4], 0.0, None)
    kt = 0.25 * s * s
    with np.errstate(invalid="ignore"):
        rmse = np.sqrt(np.where(sw > 0, ssr / sw, np.nan))
    return {
        "kappa_t_m2": kt,
        "kappa_t_se_m2": 2.0 * kt * np.sqrt(var_th),
        "log_kt_se": 2.0 * np.sqrt(var_th),
        "offset_m": 2.0 * p[:, 2],
        "offset_se_m": 2.0 * np.sqrt(np.clip(cov[:, 2, 2], 0.0, None)),
        "x0_m": p[:, 3],
        "slope": p[:, 1],
        "rmse_m": rmse,
        "n_used": W0.sum(1),
    }


def _fit_compiled(x_m, Z, s0_m, n_events, iterations, robust, tuning, x0_max_m, s_bounds_m):
    """Run :func:`faultmap.scarps.diffusion_jit.fit_rows` and return the reference's dict."""
    from faultmap.scarps.diffusion_jit import OUT_FIELDS, fit_rows

    m, N = Z.shape
    x = np.asarray(x_m, dtype=float)
    X = x.reshape(1, N) if x.ndim == 1 else np.ascontiguousarray(np.broadcast_to(x, (m, N)))
    s0 = np.asarray(s0_m, dtype=float) * np.ones(m)
    x0max = (
        np.full(m, np.nan) if x0_max_m is None else np.broadcast_to(np.asarray(x0_max_m, float), (m,)).copy()
    )
    out = fit_rows(
        X,
        np.ascontiguousarray(Z),
        s0,
        _roots(n_events),
        int(iterations),
        bool(robust),
        float(tuning),
        x0max,
        float(s_bounds_m[0]),
        float(s_bounds_m[1]),
    )
    return {k: out[:, i].copy() for i, k in enumerate(OUT_FIELDS)}
