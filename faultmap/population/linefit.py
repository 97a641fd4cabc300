"""Straight-line fits of log10 displacement on log10 length, with bootstrap intervals.

Pure functions: arrays in, fitted lines out. No file I/O, no printing, no
global state. The fits are of ``log10 D = log10 gamma + n log10 L`` (D and L
in metres); :mod:`faultmap.population.scaling` builds the population and calls them.

Three line fits are offered:

* ``ols``: ordinary least squares of log D on log L (displacement predicted
  from length; scatter in D only).
* ``rma``: reduced major axis (geometric-mean regression), slope
  ``sign(r) sd(y) / sd(x)`` (Sokal & Rohlf, Biometry; common textbook
  identity), symmetric in the two variables.
* ``york``: errors-in-variables straight line of York et al. (2004, Am. J.
  Phys. 72, 367-375) with the throw errors ``max_throw_err_m`` (in log
  space ``sigma_y = err / (D ln 10)``) and a relative length error
  (``length_rel_err``, default 5 %, our choice) on the lengths.

Confidence intervals are seeded non-parametric bootstrap percentiles over
the faults (Efron & Tibshirani 1993, common practice). The resamples are
drawn and fitted in blocks of rows (the same random stream as one draw, so
the same numbers), which bounds the memory; unless the caller gives their
number, :func:`bootstrap_replicates` bounds the work too (1000 resamples up
to 2000 faults, then a fixed budget of ``BOOT_BUDGET`` resampled values,
never fewer than ``BOOT_MIN``).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from faultmap.errors import InputError, ParameterError

__all__ = [
    "MODELS",
    "LineFit",
    "ols_line",
    "rma_line",
    "york_fit",
    "fit_line",
    "fit_displacement_length",
    "bootstrap_replicates",
    "BOOT_BUDGET",
    "BOOT_MAX",
    "BOOT_MIN",
]

#: Line-fit models, in the order they are reported.
MODELS: tuple[str, ...] = ("ols", "rma", "york")

_LN10 = float(np.log(10.0))

#: Resampled values (resamples x faults) of the automatic bootstrap rule.
BOOT_BUDGET: int = 2_000_000
#: Resamples of the automatic rule: at most (the former fixed default) ...
BOOT_MAX: int = 1000
#: ... and at least (Efron & Tibshirani 1993: some 200 suffice for a standard error).
BOOT_MIN: int = 200
_BOOT_BLOCK = 4_000_000  # resampled values fitted at once (memory bound)


def bootstrap_replicates(n: int, *, bootstrap_n: int | None = None) -> int:
    """Return the number of bootstrap resamples of a line fit.

    Parameters
    ----------
    n : int
        Number of faults (units) fitted.
    bootstrap_n : int, optional
        Given by the user: used exactly. None (default): the automatic rule.

    Returns
    -------
    int
        ``bootstrap_n`` when given; otherwise
        ``min(BOOT_MAX, max(BOOT_MIN, BOOT_BUDGET // n))``: 1000 resamples up
        to 2000 faults, then ``2e6 / n``, never fewer than 200.

    Notes
    -----
    Our rule. Efron & Tibshirani (1993, *An Introduction to the Bootstrap*,
    ch. 6 and 13): about 200 resamples suffice for a bootstrap standard
    error, percentile intervals want more (of order 1000); with many faults
    the intervals are narrow and the Monte Carlo error of their ends, which
    shrinks as ``1 / sqrt(B)``, stays small next to them. The number used is
    reported (``bootstrap_n_used``).
    """
    if bootstrap_n is not None:
        if bootstrap_n < 0:
            raise ParameterError(f"bootstrap_n={bootstrap_n} must be >= 0")
        return int(bootstrap_n)
    return int(min(BOOT_MAX, max(BOOT_MIN, BOOT_BUDGET // max(1, int(n)))))


def _check_choice(name: str, value: str, choices: Sequence[str]) -> None:
    if value not in choices:
        raise ParameterError(f"{name}={value!r} is not allowed: use one of {', '.join(choices)}")


# --------------------------------------------------------------------------
# Result container
# --------------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class LineFit:
    """One straight-line fit of log10 D on log10 L.

    Attributes
    ----------
    model : str
        ``ols``, ``rma`` or ``york``.
    fitted : bool
        False when the data cannot support a fit; ``reason`` says why.
    reason : str
        Empty when fitted.
    exponent : float
        Slope n of log10 D against log10 L.
    log10_gamma : float
        Intercept, log10 of gamma with D and L in metres.
    r2 : float
        Squared Pearson correlation of log10 L and log10 D.
    n : int
        Number of faults (units) used.
    exponent_se, log10_gamma_se : float
        Analytic standard errors (OLS: textbook; RMA: sd-ratio approximation;
        York: York et al. 2004 eq. 13); NaN when not available.
    mswd : float
        York fits: mean squared weighted deviation S / (N - 2); NaN otherwise.
    boot_exponent, boot_log10_gamma : numpy.ndarray
        Bootstrap replicates (NaN for degenerate resamples).
    ci_level : float
        Two-sided confidence level of the percentile intervals.
    """

    model: str
    fitted: bool
    reason: str = ""
    exponent: float = float("nan")
    log10_gamma: float = float("nan")
    r2: float = float("nan")
    n: int = 0
    exponent_se: float = float("nan")
    log10_gamma_se: float = float("nan")
    mswd: float = float("nan")
    boot_exponent: np.ndarray = field(default_factory=lambda: np.empty(0))
    boot_log10_gamma: np.ndarray = field(default_factory=lambda: np.empty(0))
    ci_level: float = 0.95

    @property
    def gamma(self) -> float:
        """Gamma of ``D = gamma L**n`` (D, L in metres)."""
        return float(10.0**self.log10_gamma)

    def _pct(self, values: np.ndarray) -> tuple[float, float]:
        ok = np.isfinite(values)
        if ok.sum() < 2:
            return float("nan"), float("nan")
        a = 100.0 * (1.0 - self.ci_level) / 2.0
        lo, hi = np.percentile(values[ok], [a, 100.0 - a])
        return float(lo), float(hi)

    @property
    def bootstrap_n_used(self) -> int:
        """Number of bootstrap resamples drawn (degenerate ones included, as NaN)."""
        return int(self.boot_exponent.size)

    @property
    def exponent_ci(self) -> tuple[float, float]:
        """Bootstrap percentile interval of the exponent."""
        return self._pct(self.boot_exponent)

    @property
    def gamma_ci(self) -> tuple[float, float]:
        """Bootstrap percentile interval of gamma (m^(1-n))."""
        lo, hi = self._pct(self.boot_log10_gamma)
        return float(10.0**lo), float(10.0**hi)

    @property
    def exponent_boot_sd(self) -> float:
        """Standard deviation of the bootstrap exponents."""
        ok = np.isfinite(self.boot_exponent)
        return float(np.std(self.boot_exponent[ok], ddof=1)) if ok.sum() > 1 else float("nan")

    def predict(self, length_m: Any) -> np.ndarray:
        """Displacement (m) predicted at ``length_m`` (m)."""
        length_m = np.asarray(length_m, dtype=float)
        return 10.0 ** (self.log10_gamma + self.exponent * np.log10(length_m))

    def band(self, length_m: Any) -> tuple[np.ndarray, np.ndarray]:
        """Pointwise bootstrap confidence band (m) of the fitted line.

        Parameters
        ----------
        length_m : array_like
            Lengths (m) at which to evaluate the band.

        Returns
        -------
        lo, hi : numpy.ndarray
            Lower and upper displacement (m) at ``ci_level``.
        """
        x = np.log10(np.asarray(length_m, dtype=float))
        ok = np.isfinite(self.boot_exponent) & np.isfinite(self.boot_log10_gamma)
        if ok.sum() < 2:
            nan = np.full(x.shape, np.nan)
            return nan, nan.copy()
        pred = self.boot_log10_gamma[ok, None] + self.boot_exponent[ok, None] * x[None, :]
        a = 100.0 * (1.0 - self.ci_level) / 2.0
        lo, hi = np.percentile(pred, [a, 100.0 - a], axis=0)
        return 10.0**lo, 10.0**hi


# --------------------------------------------------------------------------
# Line fits (vectorised over a leading batch axis for the bootstrap)
# --------------------------------------------------------------------------
def _centred_sums(x: Any, y: Any) -> tuple[np.ndarray, ...]:
    """Means (last axis kept) and centred sums Sxx, Syy, Sxy along the last axis."""
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    xm = x.mean(axis=-1, keepdims=True)
    ym = y.mean(axis=-1, keepdims=True)
    sxx = ((x - xm) ** 2).sum(axis=-1)
    syy = ((y - ym) ** 2).sum(axis=-1)
    sxy = ((x - xm) * (y - ym)).sum(axis=-1)
    return xm, ym, sxx, syy, sxy


def ols_line(x: Any, y: Any) -> tuple[np.ndarray, np.ndarray]:
    """Ordinary least-squares line of y on x along the last axis.

    Parameters
    ----------
    x, y : array_like
        Same shape (..., n).

    Returns
    -------
    slope, intercept : numpy.ndarray
        Shape (...); NaN where x has no spread.

    Notes
    -----
    slope = Sxy / Sxx, intercept = mean(y) - slope mean(x) (textbook).
    """
    xm, ym, sxx, _, sxy = _centred_sums(x, y)
    with np.errstate(invalid="ignore", divide="ignore"):
        b = np.where(sxx > 1e-300, sxy / np.where(sxx > 1e-300, sxx, 1.0), np.nan)
    a = ym[..., 0] - b * xm[..., 0]
    return b, a


def rma_line(x: Any, y: Any) -> tuple[np.ndarray, np.ndarray]:
    """Reduced major axis (geometric mean) line along the last axis.

    Parameters
    ----------
    x, y : array_like
        Same shape (..., n).

    Returns
    -------
    slope, intercept : numpy.ndarray
        NaN where x or y has no spread.

    Notes
    -----
    slope = sign(r) sd(y) / sd(x); the line passes through the means
    (Sokal & Rohlf, Biometry; common textbook identity).
    """
    xm, ym, sxx, syy, sxy = _centred_sums(x, y)
    ok = (sxx > 1e-300) & (syy > 1e-300)
    with np.errstate(invalid="ignore", divide="ignore"):
        b = np.where(ok, np.sign(sxy) * np.sqrt(syy / np.where(ok, sxx, 1.0)), np.nan)
    a = ym[..., 0] - b * xm[..., 0]
    return b, a


def york_fit(
    x: Any,
    y: Any,
    sigma_x: Any,
    sigma_y: Any,
    *,
    r: Any = 0.0,
    tol: float = 1e-12,
    max_iter: int = 200,
) -> dict[str, np.ndarray]:
    """Best straight line with errors in both variables (York et al. 2004).

    Parameters
    ----------
    x, y : array_like
        Data, shape (..., n); leading axes are independent problems.
    sigma_x, sigma_y : array_like
        1-sigma errors of x and y (broadcast to x). Zero is allowed in one of
        the two (e.g. ``sigma_x = 0`` gives weighted least squares of y on x).
    r : array_like, optional
        Correlation of the x and y errors (default 0).
    tol : float
        Convergence tolerance on the slope.
    max_iter : int
        Iteration cap.

    Returns
    -------
    dict
        ``slope``, ``intercept``, ``slope_se``, ``intercept_se``, ``mswd``
        (S / (n - 2)), ``converged`` (bool), ``n_iter``; arrays of shape (...).

    Notes
    -----
    York, D., Evensen, N. M., Martinez, M. L. & De Basabe Delgado, J. (2004),
    Unified equations for the slope, intercept, and standard errors of the
    best straight line, Am. J. Phys. 72, 367-375, section III steps 1-8,
    written with variances instead of weights so that a zero error is
    allowed. The standard errors are York's (not scaled by the MSWD).
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    vx = np.broadcast_to(np.asarray(sigma_x, dtype=float) ** 2, x.shape)
    vy = np.broadcast_to(np.asarray(sigma_y, dtype=float) ** 2, x.shape)
    cxy = np.broadcast_to(np.asarray(r, dtype=float), x.shape) * np.sqrt(vx * vy)
    n = x.shape[-1]
    b, _ = ols_line(x, y)
    b = np.where(np.isfinite(b), b, 0.0)
    converged = np.zeros(b.shape, dtype=bool)
    n_iter = 0
    with np.errstate(invalid="ignore", divide="ignore"):
        for _ in range(max_iter):
            n_iter += 1
            bb = b[..., None]
            W = 1.0 / (vy + bb**2 * vx - 2.0 * bb * cxy)
            sw = W.sum(axis=-1, keepdims=True)
            X = (W * x).sum(axis=-1, keepdims=True) / sw
            Y = (W * y).sum(axis=-1, keepdims=True) / sw
            U = x - X
            V = y - Y
            beta = W * (U * vy + bb * V * vx - (bb * U + V) * cxy)
            b_new = (W * beta * V).sum(axis=-1) / (W * beta * U).sum(axis=-1)
            done = np.abs(b_new - b) <= tol * np.maximum(1.0, np.abs(b_new))
            b = np.where(np.isfinite(b_new), b_new, b)
            converged = done | converged
            if np.all(converged):
                break
        bb = b[..., None]
        W = 1.0 / (vy + bb**2 * vx - 2.0 * bb * cxy)
        sw = W.sum(axis=-1, keepdims=True)
        X = (W * x).sum(axis=-1, keepdims=True) / sw
        Y = (W * y).sum(axis=-1, keepdims=True) / sw
        U = x - X
        V = y - Y
        beta = W * (U * vy + bb * V * vx - (bb * U + V) * cxy)
        a = Y[..., 0] - b * X[..., 0]
        xadj = X + beta
        xbar = (W * xadj).sum(axis=-1, keepdims=True) / sw
        u = xadj - xbar
        var_b = 1.0 / (W * u**2).sum(axis=-1)
        var_a = 1.0 / sw[..., 0] + xbar[..., 0] ** 2 * var_b
        S = (W * (y - bb * x - a[..., None]) ** 2).sum(axis=-1)
        mswd = S / (n - 2) if n > 2 else np.full(b.shape, np.nan)
    return {
        "slope": b,
        "intercept": a,
        "slope_se": np.sqrt(var_b),
        "intercept_se": np.sqrt(var_a),
        "mswd": mswd,
        "converged": converged,
        "n_iter": np.asarray(n_iter),
    }


def _not_fitted(model: str, reason: str, n: int, ci_level: float) -> LineFit:
    return LineFit(model=model, fitted=False, reason=reason, n=n, ci_level=ci_level)


def _log_errors(
    length_m: np.ndarray, disp_m: np.ndarray, disp_err_m: np.ndarray | None, length_rel_err: float
) -> tuple[np.ndarray, np.ndarray, str]:
    """log10-space errors for York; returns (sx, sy, note)."""
    note = ""
    n = disp_m.size
    if disp_err_m is None:
        return np.full(n, np.nan), np.full(n, np.nan), "no throw errors"
    e = np.asarray(disp_err_m, dtype=float)
    rel = e / disp_m
    ok = np.isfinite(rel) & (rel > 0)
    if not ok.any():
        return np.full(n, np.nan), np.full(n, np.nan), "no usable throw errors"
    if not ok.all():
        fill = float(np.median(rel[ok]))
        note = f"{int((~ok).sum())} fault(s) without a throw error: median relative error {fill:.3g} used"
        rel = np.where(ok, rel, fill)
    rel = np.maximum(rel, 0.01)  # floor: 1 % relative error (our choice)
    sy = rel / _LN10
    sx = np.full(n, max(length_rel_err, 0.0) / _LN10)
    return sx, sy, note


def _boot_block(
    model: str, x: np.ndarray, y: np.ndarray, idx: np.ndarray, sx: np.ndarray | None, sy: np.ndarray | None
) -> tuple[np.ndarray, np.ndarray]:
    """Slopes and intercepts of the resamples ``idx`` (rows: resamples of x, y)."""
    X, Y = x[idx], y[idx]
    if model == "ols":
        return ols_line(X, Y)
    if model == "rma":
        return rma_line(X, Y)
    res = york_fit(X, Y, sx[idx], sy[idx])
    bad = ~res["converged"] | (np.ptp(X, axis=1) <= 1e-12)
    return np.where(bad, np.nan, res["slope"]), np.where(bad, np.nan, res["intercept"])


def fit_line(
    length_m: Any,
    disp_m: Any,
    *,
    model: str = "ols",
    disp_err_m: Any = None,
    length_rel_err: float = 0.05,
    bootstrap_n: int | None = None,
    ci_level: float = 0.95,
    seed: int = 0,
) -> LineFit:
    """Fit ``log10 D = log10 gamma + n log10 L`` with one model.

    Parameters
    ----------
    length_m, disp_m : array_like
        Lengths and maximum displacements (m), positive and finite.
    model : {'ols', 'rma', 'york'}
        Line-fit model (see module notes).
    disp_err_m : array_like, optional
        1-sigma displacement errors (m); required for ``york``.
    length_rel_err : float
        Relative 1-sigma length error used by ``york`` (default 0.05).
    bootstrap_n : int, optional
        Number of bootstrap resamples, used exactly when given (0 disables
        the intervals). None (default): :func:`bootstrap_replicates` (1000
        up to 2000 faults, then fewer, never fewer than 200).
    ci_level : float
        Two-sided level of the percentile intervals (0-1).
    seed : int
        Seed of the bootstrap generator.

    Returns
    -------
    LineFit
        ``fitted`` is False, with a ``reason``, for fewer than 3 faults,
        identical lengths or displacements, non-positive values, or (york)
        no usable errors.

    Notes
    -----
    OLS and RMA: Sokal & Rohlf (Biometry). York: York et al. (2004).
    Bootstrap: resampling of faults with replacement, percentile intervals
    (Efron & Tibshirani 1993; common practice). Resamples are drawn and
    fitted in blocks of at most ``_BOOT_BLOCK`` values; the blocks take
    consecutive draws of one generator, so the indices are those of a single
    ``(bootstrap_n, n)`` draw.
    """
    _check_choice("model", model, MODELS)
    if not 0.0 < ci_level < 1.0:
        raise ParameterError(f"ci_level={ci_level} must be between 0 and 1 (e.g. 0.95)")
    if bootstrap_n is not None and bootstrap_n < 0:
        raise ParameterError(f"bootstrap_n={bootstrap_n} must be >= 0")
    L = np.asarray(length_m, dtype=float).ravel()
    D = np.asarray(disp_m, dtype=float).ravel()
    if L.shape != D.shape:
        raise InputError("length_m and disp_m must have the same length")
    E = None if disp_err_m is None else np.asarray(disp_err_m, dtype=float).ravel()
    ok = np.isfinite(L) & np.isfinite(D) & (L > 0) & (D > 0)
    n = int(ok.sum())
    if n < 3:
        return _not_fitted(
            model,
            f"only {n} fault(s) with positive length and displacement; at least 3 are needed",
            n,
            ci_level,
        )
    x = np.log10(L[ok])
    y = np.log10(D[ok])
    if np.ptp(x) <= 1e-12:
        return _not_fitted(model, "all lengths are identical: the slope is undefined", n, ci_level)
    if np.ptp(y) <= 1e-12 and model == "rma":
        return _not_fitted(model, "all displacements are identical: RMA slope is undefined", n, ci_level)
    r = float(np.corrcoef(x, y)[0, 1]) if np.ptp(y) > 0 else 0.0
    r2 = r * r
    mswd = float("nan")
    sx = sy = None
    if model == "york":
        sx, sy, note = _log_errors(L[ok], D[ok], None if E is None else E[ok], length_rel_err)
        if not np.all(np.isfinite(sy)):
            return _not_fitted(
                model, f"{note or 'no throw errors'}: York fit needs max_throw_err_m", n, ci_level
            )
        res = york_fit(x, y, sx, sy)
        b, a = float(res["slope"]), float(res["intercept"])
        b_se, a_se = float(res["slope_se"]), float(res["intercept_se"])
        mswd = float(res["mswd"])
    elif model == "ols":
        b, a = (float(v) for v in ols_line(x, y))
        resid = y - (a + b * x)
        s2 = float(resid @ resid) / (n - 2) if n > 2 else float("nan")
        sxx = float(((x - x.mean()) ** 2).sum())
        b_se = float(np.sqrt(s2 / sxx))
        a_se = float(np.sqrt(s2 * (1.0 / n + x.mean() ** 2 / sxx)))
    else:
        b, a = (float(v) for v in rma_line(x, y))
        # approximate SE of the RMA slope: |b| sqrt((1 - r^2) / n) (from memory)
        b_se = abs(b) * np.sqrt((1.0 - r2) / n)
        a_se = float("nan")

    n_boot = bootstrap_replicates(n, bootstrap_n=bootstrap_n)
    boot_b = np.empty(0)
    boot_a = np.empty(0)
    if n_boot > 0:
        boot_b = np.empty(n_boot)
        boot_a = np.empty(n_boot)
        rng = np.random.default_rng(seed)
        step = max(1, _BOOT_BLOCK // n)
        for r0 in range(0, n_boot, step):  # blocks of resamples (memory bound)
            r1 = min(n_boot, r0 + step)
            idx = rng.integers(0, n, size=(r1 - r0, n))
            boot_b[r0:r1], boot_a[r0:r1] = _boot_block(model, x, y, idx, sx, sy)
    return LineFit(
        model=model,
        fitted=True,
        reason="",
        exponent=b,
        log10_gamma=a,
        r2=r2,
        n=n,
        exponent_se=float(b_se),
        log10_gamma_se=float(a_se),
        mswd=mswd,
        boot_exponent=np.asarray(boot_b, float),
        boot_log10_gamma=np.asarray(boot_a, float),
        ci_level=ci_level,
    )


def fit_displacement_length(
    population: pd.DataFrame,
    *,
    models: Sequence[str] = MODELS,
    bootstrap_n: int | None = None,
    ci_level: float = 0.95,
    seed: int = 0,
    length_rel_err: float = 0.05,
) -> dict[str, LineFit]:
    """Fit every requested model to the ``used`` units of a population.

    Parameters
    ----------
    population : pandas.DataFrame
        Output of :func:`~faultmap.population.dl_units.displacement_population` (``length_m``, ``disp_m``,
        ``disp_err_m``, ``used``).
    models : sequence of str
        Any of ``ols``, ``rma``, ``york``.
    bootstrap_n, ci_level, seed, length_rel_err
        See :func:`fit_line` (``bootstrap_n`` None: the automatic rule of
        :func:`bootstrap_replicates`). Every model uses the same seed, hence
        the same resamples.

    Returns
    -------
    dict of str to LineFit

    Notes
    -----
    See :func:`fit_line` for the methods and sources.
    """
    used = population[population["used"].to_numpy(bool)] if "used" in population else population
    L = used["length_m"].to_numpy(float)
    D = used["disp_m"].to_numpy(float)
    E = used["disp_err_m"].to_numpy(float) if "disp_err_m" in used else None
    return {
        m: fit_line(
            L,
            D,
            model=m,
            disp_err_m=E,
            length_rel_err=length_rel_err,
            bootstrap_n=bootstrap_n,
            ci_level=ci_level,
            seed=seed,
        )
        for m in models
    }
