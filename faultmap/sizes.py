"""Size distributions of fault populations (lengths, maximum throws).

Continuous power law ``p(x) = (alpha - 1) / x_min * (x / x_min)**(-alpha)``
for ``x >= x_min``, fitted as in Clauset, Shalizi & Newman (2009, SIAM
Review 51, 661-703):

* maximum-likelihood exponent ``alpha = 1 + n / sum(ln(x_i / x_min))`` with
  standard error ``(alpha - 1) / sqrt(n)`` (their eqs. 3.1 and 3.2);
* ``x_min`` chosen to minimise the Kolmogorov-Smirnov distance between the
  tail data and the fitted law (their section 3.3);
* goodness of fit by a semi-parametric bootstrap (their section 4.1): the
  p-value is the fraction of synthetic data sets whose KS distance (after
  their own full fit, x_min scan included) is at least the observed one;
* Vuong's likelihood-ratio test against the exponential and log-normal
  distributions truncated at the same ``x_min`` (their section 5.1): the
  normalised ratio ``R / (sigma sqrt(n))`` (positive favours the power law)
  and the two-sided p-value ``erfc(|R| / sqrt(2 n sigma^2))``.

The x_min scan is vectorised: for sorted samples (one row each), suffix sums
of ``ln x`` give alpha for every candidate at once, and the KS distance of
every candidate is a masked maximum over a (rows, candidates, n) array that
is processed in memory-bounded chunks.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
from scipy import optimize, special

from faultmap.errors import InputError, ParameterError

__all__ = [
    "PowerLawFit",
    "SizeResult",
    "power_law_mle",
    "ks_distance",
    "scan_x_min",
    "power_law_gof",
    "fit_exponential",
    "fit_lognormal",
    "vuong_test",
    "compare_alternatives",
    "fit_power_law",
    "ccdf",
    "detection_effects",
    "analyse_sizes",
]

_CHUNK_ELEMS = 2_000_000  # elements of the (rows, candidates, n) KS array per chunk


@dataclass(frozen=True, eq=False)
class PowerLawFit:
    """A power-law fit of one variable, with its tests.

    Attributes
    ----------
    variable : str
        Name of the fitted variable (e.g. ``length_m``).
    fitted : bool
        False when the data cannot support a fit; ``reason`` says why.
    reason : str
        Empty when fitted.
    alpha, se : float
        Exponent of the density and its standard error.
    x_min : float
        Lower bound of the power-law tail (unit of the variable).
    n, n_tail : int
        Number of values, and of values >= x_min.
    ks_d : float
        KS distance of the tail to the fitted law.
    gof_p : float
        Bootstrap goodness-of-fit p-value (NaN if not computed);
        p <= 0.1 rules the power law out (Clauset et al. 2009).
    gof_n : int
        Number of bootstrap data sets.
    lr_exponential, p_exponential, llr_exponential : float
        Vuong test against the exponential: normalised ratio, p-value and
        raw log-likelihood ratio (positive favours the power law).
    lr_lognormal, p_lognormal, llr_lognormal : float
        The same against the log-normal.
    exp_rate : float
        Rate of the fitted truncated exponential (1 / unit).
    lognormal_mu, lognormal_sigma : float
        Parameters of the fitted truncated log-normal (of ln x).
    values : numpy.ndarray
        Sorted values the fit saw.
    """

    variable: str
    fitted: bool
    reason: str = ""
    alpha: float = float("nan")
    se: float = float("nan")
    x_min: float = float("nan")
    n: int = 0
    n_tail: int = 0
    ks_d: float = float("nan")
    gof_p: float = float("nan")
    gof_n: int = 0
    lr_exponential: float = float("nan")
    p_exponential: float = float("nan")
    llr_exponential: float = float("nan")
    lr_lognormal: float = float("nan")
    p_lognormal: float = float("nan")
    llr_lognormal: float = float("nan")
    exp_rate: float = float("nan")
    lognormal_mu: float = float("nan")
    lognormal_sigma: float = float("nan")
    values: np.ndarray = field(default_factory=lambda: np.empty(0))

    def ccdf_model(self, x: Any, model: str = "power_law") -> np.ndarray:
        """P(X >= x) of a fitted model, scaled to the whole sample.

        Parameters
        ----------
        x : array_like
            Values >= x_min.
        model : {'power_law', 'exponential', 'lognormal'}

        Returns
        -------
        numpy.ndarray
            ``(n_tail / n) * S(x) / S(x_min)``; NaN below x_min.
        """
        x = np.asarray(x, dtype=float)
        frac = self.n_tail / self.n if self.n else np.nan
        with np.errstate(divide="ignore", invalid="ignore"):
            if model == "power_law":
                s = (x / self.x_min) ** (1.0 - self.alpha)
            elif model == "exponential":
                s = np.exp(-self.exp_rate * (x - self.x_min))
            elif model == "lognormal":
                z = (np.log(x) - self.lognormal_mu) / self.lognormal_sigma
                z0 = (np.log(self.x_min) - self.lognormal_mu) / self.lognormal_sigma
                s = np.exp(special.log_ndtr(-z) - special.log_ndtr(-z0))
            else:
                raise ParameterError(f"model={model!r}: use power_law, exponential or lognormal")
        return np.where(x >= self.x_min, frac * s, np.nan)


@dataclass(frozen=True, eq=False)
class SizeResult:
    """Output of :func:`analyse_sizes`.

    Attributes
    ----------
    fits : dict of str to PowerLawFit
        By variable name.
    data : dict of str to numpy.ndarray
        Values fitted, by variable name.
    table : pandas.DataFrame
        Rows for the ``scaling`` layer (``model='power_law'``).
    warnings : list of str
    """

    fits: dict
    data: dict
    table: pd.DataFrame
    warnings: list


# --------------------------------------------------------------------------
# Power-law core
# --------------------------------------------------------------------------
def power_law_mle(x: Any, x_min: float) -> tuple[float, float, int]:
    """Continuous power-law exponent by maximum likelihood.

    Parameters
    ----------
    x : array_like
        Positive values; those below ``x_min`` are ignored.
    x_min : float
        Lower bound of the power-law range (same unit as x), > 0.

    Returns
    -------
    alpha : float
        ``1 + n / sum(ln(x_i / x_min))``.
    se : float
        ``(alpha - 1) / sqrt(n)``.
    n_tail : int
        Number of values >= x_min.

    Notes
    -----
    Clauset, Shalizi & Newman (2009), eqs. 3.1 and 3.2.
    """
    if not (np.isfinite(x_min) and x_min > 0):
        raise ParameterError(f"x_min={x_min} must be a positive number")
    x = np.asarray(x, dtype=float)
    t = x[np.isfinite(x) & (x >= x_min)]
    n = int(t.size)
    s = float(np.sum(np.log(t / x_min)))
    if n == 0 or s <= 0:
        return float("nan"), float("nan"), n
    alpha = 1.0 + n / s
    return alpha, (alpha - 1.0) / np.sqrt(n), n


def ks_distance(x: Any, x_min: float, alpha: float) -> float:
    """Two-sided KS distance between the tail of x and a power law.

    Parameters
    ----------
    x : array_like
        Values; those below ``x_min`` are ignored.
    x_min, alpha : float
        Power-law parameters.

    Returns
    -------
    float
        ``max |S(x) - P(x)|`` over the tail, S the empirical and P the model
        cumulative distribution (Clauset et al. 2009, eq. 3.9).
    """
    t = np.sort(np.asarray(x, dtype=float))
    t = t[t >= x_min]
    m = t.size
    if m == 0:
        return float("nan")
    F = -np.expm1((1.0 - alpha) * np.log(t / x_min))
    k = np.arange(m)
    return float(max(np.max((k + 1) / m - F), np.max(F - k / m)))


def _candidate_positions(
    n: int, min_tail: int, max_candidates: int | None, xs: np.ndarray | None = None
) -> np.ndarray:
    """Rank positions tried as x_min (tail = xs[i:], at least min_tail long)."""
    last = n - min_tail
    if last < 0:
        return np.empty(0, dtype=np.int64)
    pos = np.arange(last + 1)
    if xs is not None:  # observed data: first occurrence of each value only
        keep = np.ones(pos.size, dtype=bool)
        keep[1:] = xs[pos[1:]] != xs[pos[1:] - 1]
        pos = pos[keep]
    if max_candidates is not None and pos.size > max_candidates:
        pick = np.unique(np.round(np.linspace(0, pos.size - 1, max_candidates)).astype(np.int64))
        pos = pos[pick]
    return pos.astype(np.int64)


def _scan_sorted(xs: np.ndarray, pos: np.ndarray) -> tuple[np.ndarray, ...]:
    """Vectorised x_min scan of row-sorted samples.

    Parameters
    ----------
    xs : numpy.ndarray
        (B, n), each row sorted ascending, positive.
    pos : numpy.ndarray
        (C,) candidate rank positions.

    Returns
    -------
    x_min, alpha, ks, n_tail : numpy.ndarray
        (B,) best candidate of each row (NaN / 0 where none is valid).
    """
    B, n = xs.shape
    C = pos.size
    L = np.log(xs)
    S = np.cumsum(L[:, ::-1], axis=1)[:, ::-1]  # suffix sums of ln x
    m = (n - pos).astype(float)  # (C,)
    Li = L[:, pos]  # (B, C)
    denom = S[:, pos] - m[None, :] * Li
    valid = denom > 1e-12 * np.maximum(1.0, np.abs(S[:, pos]))
    if C:
        tie = np.zeros((B, C), dtype=bool)
        nz = pos > 0
        tie[:, nz] = xs[:, pos[nz]] == xs[:, pos[nz] - 1]
        valid &= ~tie
    with np.errstate(divide="ignore", invalid="ignore"):
        alpha = np.where(valid, 1.0 + m[None, :] / np.where(valid, denom, 1.0), np.nan)
    D = np.full((B, C), np.inf)
    if C and n:
        j = np.arange(n)
        step = max(1, _CHUNK_ELEMS // n)
        c_step = min(C, step)
        r_step = max(1, step // c_step)
        for c0 in range(0, C, c_step):
            cs = slice(c0, min(C, c0 + c_step))
            k = j[None, :] - pos[cs, None]  # (c, n)
            inside = k >= 0
            kk = np.where(inside, k, 0).astype(float)
            mm = m[cs, None]
            up = (kk + 1.0) / mm
            lo = kk / mm
            for r0 in range(0, B, r_step):
                rs = slice(r0, min(B, r0 + r_step))
                a = alpha[rs, cs]
                dL = L[rs, None, :] - Li[rs, cs, None]  # (r, c, n)
                with np.errstate(invalid="ignore", over="ignore"):
                    F = -np.expm1((1.0 - a[:, :, None]) * dL)
                d = np.maximum(up[None] - F, F - lo[None])
                d = np.where(inside[None], d, -np.inf)
                D[rs, cs] = d.max(axis=2)
    D = np.where(valid & np.isfinite(D), D, np.inf)
    if C == 0:
        nan = np.full(B, np.nan)
        return nan, nan.copy(), nan.copy(), np.zeros(B, dtype=np.int64)
    best = np.argmin(D, axis=1)
    rows = np.arange(B)
    ok = np.isfinite(D[rows, best])
    x_min = np.where(ok, xs[rows, pos[best]], np.nan)
    a_best = np.where(ok, alpha[rows, best], np.nan)
    d_best = np.where(ok, D[rows, best], np.nan)
    n_tail = np.where(ok, n - pos[best], 0).astype(np.int64)
    return x_min, a_best, d_best, n_tail


def scan_x_min(
    x: Any,
    *,
    min_tail: int = 5,
    max_candidates: int | None = 200,
) -> tuple[float, float, float, int]:
    """Choose x_min by minimising the KS distance (Clauset et al. 2009).

    Parameters
    ----------
    x : array_like
        Positive finite values.
    min_tail : int
        Smallest tail tried (>= 2; the largest value is never an x_min).
    max_candidates : int or None
        Cap on the number of candidate x_min values (evenly spaced in rank
        among the distinct values); None tries every distinct value.

    Returns
    -------
    x_min, alpha, ks_d : float
    n_tail : int

    Notes
    -----
    Clauset, Shalizi & Newman (2009), section 3.3. Vectorised: see the
    module notes.
    """
    if min_tail < 2:
        raise ParameterError(f"min_tail={min_tail} must be >= 2")
    xs = np.sort(np.asarray(x, dtype=float).ravel())
    if xs.size == 0 or not np.all(np.isfinite(xs) & (xs > 0)):
        raise InputError("scan_x_min needs positive finite values: drop zeros and NaNs first")
    pos = _candidate_positions(xs.size, min_tail, max_candidates, xs)
    xm, a, d, nt = _scan_sorted(xs[None, :], pos)
    return float(xm[0]), float(a[0]), float(d[0]), int(nt[0])


def power_law_gof(
    x: Any,
    x_min: float,
    alpha: float,
    *,
    gof_n: int = 1000,
    seed: int = 0,
    min_tail: int = 5,
    max_candidates: int | None = 200,
    ks_observed: float | None = None,
) -> tuple[float, np.ndarray]:
    """Bootstrap goodness-of-fit p-value of a power-law fit.

    Parameters
    ----------
    x : array_like
        The observed positive values (whole sample).
    x_min, alpha : float
        The fitted power law.
    gof_n : int
        Number of synthetic data sets.
    seed : int
        Random seed.
    min_tail, max_candidates
        Scan options, as used for the observed fit.
    ks_observed : float, optional
        Observed KS distance (computed if not given).

    Returns
    -------
    p : float
        Fraction of synthetic KS distances >= the observed one.
    ks_synthetic : numpy.ndarray
        (gof_n,) KS distances of the synthetic fits.

    Notes
    -----
    Clauset, Shalizi & Newman (2009), section 4.1: each synthetic value is
    drawn, with probability n_tail / n, from the fitted power law (inverse
    CDF ``x_min (1 - u)^(-1 / (alpha - 1))``) and otherwise uniformly from
    the observed values below x_min; each synthetic set is then fitted with
    the same x_min scan. All data sets are scanned at once (vectorised).
    """
    if gof_n < 1:
        raise ParameterError(f"gof_n={gof_n} must be >= 1")
    xs = np.sort(np.asarray(x, dtype=float).ravel())
    n = xs.size
    below = xs[xs < x_min]
    n_tail = n - below.size
    if ks_observed is None:
        ks_observed = ks_distance(xs, x_min, alpha)
    rng = np.random.default_rng(seed)
    pos = _candidate_positions(n, min_tail, max_candidates)
    out = np.empty(gof_n)
    step = max(1, _CHUNK_ELEMS * 4 // max(1, n * max(1, pos.size)))
    for b0 in range(0, gof_n, step):  # batches of synthetic data sets
        nb = min(step, gof_n - b0)
        from_tail = rng.random((nb, n)) < n_tail / n
        u = rng.random((nb, n))
        pl = x_min * (1.0 - u) ** (-1.0 / (alpha - 1.0))
        if below.size:
            emp = below[rng.integers(0, below.size, size=(nb, n))]
            X = np.where(from_tail, pl, emp)
        else:
            X = pl
        X.sort(axis=1)
        out[b0 : b0 + nb] = _scan_sorted(X, pos)[2]
    ok = np.isfinite(out)
    p = float(np.mean(out[ok] >= ks_observed)) if ok.any() else float("nan")
    return p, out


# --------------------------------------------------------------------------
# Alternatives and the Vuong test
# --------------------------------------------------------------------------
def _power_law_ll(t: np.ndarray, x_min: float, alpha: float) -> np.ndarray:
    return np.log(alpha - 1.0) - np.log(x_min) - alpha * np.log(t / x_min)


def fit_exponential(t: Any, x_min: float) -> tuple[float, np.ndarray]:
    """Exponential truncated at x_min, by maximum likelihood.

    Parameters
    ----------
    t : array_like
        Tail values (>= x_min).
    x_min : float

    Returns
    -------
    rate : float
        ``1 / mean(t - x_min)`` (1 / unit of t).
    loglik : numpy.ndarray
        Per-value log density ``ln(rate) - rate (t - x_min)``.

    Notes
    -----
    Clauset et al. (2009), table 2.1 (shifted exponential; MLE analytic).
    """
    t = np.asarray(t, dtype=float)
    mean = float(np.mean(t - x_min))
    rate = 1.0 / mean if mean > 0 else float("inf")
    return rate, np.log(rate) - rate * (t - x_min)


def fit_lognormal(t: Any, x_min: float) -> tuple[float, float, np.ndarray]:
    """Log-normal truncated at x_min, by maximum likelihood (numerical).

    Parameters
    ----------
    t : array_like
        Tail values (>= x_min).
    x_min : float

    Returns
    -------
    mu, sigma : float
        Mean and standard deviation of ln x of the untruncated law.
    loglik : numpy.ndarray
        Per-value log density, normalised on [x_min, inf).

    Notes
    -----
    Clauset et al. (2009), table 2.1. Optimised with L-BFGS-B over
    (mu, ln sigma) from two starts (tail moments and a heavy-tailed start).
    """
    t = np.asarray(t, dtype=float)
    lt = np.log(t)
    l0 = float(np.log(x_min))

    def ll(p: np.ndarray) -> np.ndarray:
        mu, ls = p
        s = np.exp(ls)
        z = (lt - mu) / s
        return -lt - ls - 0.5 * np.log(2 * np.pi) - 0.5 * z * z - special.log_ndtr((mu - l0) / s)

    def nll(p: np.ndarray) -> float:
        v = -np.sum(ll(p))
        return float(v) if np.isfinite(v) else 1e300

    m0 = float(np.mean(lt))
    s0 = float(max(np.std(lt), 1e-3))
    spread = max(float(np.ptp(lt)), 1.0)
    bounds = [
        (l0 - 20.0 * spread - 10.0, float(lt.max()) + 10.0 * spread),
        (np.log(1e-4), np.log(50.0 * spread)),
    ]
    best = None
    for start in ([m0, np.log(s0)], [l0 - 2.0 * spread, np.log(2.0 * spread)]):
        r = optimize.minimize(nll, np.asarray(start), method="L-BFGS-B", bounds=bounds)
        if best is None or r.fun < best.fun:
            best = r
    mu, ls = best.x
    return float(mu), float(np.exp(ls)), ll(best.x)


def vuong_test(loglik1: Any, loglik2: Any) -> tuple[float, float, float]:
    """Vuong's likelihood-ratio test for non-nested models.

    Parameters
    ----------
    loglik1, loglik2 : array_like
        Per-value log-likelihoods under models 1 and 2.

    Returns
    -------
    normalised : float
        ``R / (sigma sqrt(n))``; positive favours model 1.
    p : float
        ``erfc(|R| / sqrt(2 n sigma^2))``: small p means the sign is
        significant.
    R : float
        Raw log-likelihood ratio ``sum(l1 - l2)``.

    Notes
    -----
    Vuong (1989); Clauset, Shalizi & Newman (2009), section 5.1, eq. 5.4.
    """
    d = np.asarray(loglik1, dtype=float) - np.asarray(loglik2, dtype=float)
    n = d.size
    if n == 0:
        return float("nan"), float("nan"), float("nan")
    R = float(np.sum(d))
    sd = float(np.std(d))
    if sd == 0:
        return (float("inf") * np.sign(R) if R else 0.0), (0.0 if R else 1.0), R
    return R / (sd * np.sqrt(n)), float(special.erfc(abs(R) / np.sqrt(2.0 * n * sd * sd))), R


def compare_alternatives(x: Any, x_min: float, alpha: float) -> dict[str, float]:
    """Power law against exponential and log-normal above x_min.

    Parameters
    ----------
    x : array_like
        Values (those below x_min ignored).
    x_min, alpha : float
        The fitted power law.

    Returns
    -------
    dict
        ``lr_exponential``, ``p_exponential``, ``llr_exponential``,
        ``lr_lognormal``, ``p_lognormal``, ``llr_lognormal``, ``exp_rate``,
        ``lognormal_mu``, ``lognormal_sigma``.

    Notes
    -----
    Clauset, Shalizi & Newman (2009), section 5 (Vuong test).
    """
    t = np.asarray(x, dtype=float)
    t = t[t >= x_min]
    llp = _power_law_ll(t, x_min, alpha)
    rate, lle = fit_exponential(t, x_min)
    mu, sg, lll = fit_lognormal(t, x_min)
    le, pe, re = vuong_test(llp, lle)
    ll_, pl_, rl = vuong_test(llp, lll)
    return {
        "lr_exponential": le,
        "p_exponential": pe,
        "llr_exponential": re,
        "lr_lognormal": ll_,
        "p_lognormal": pl_,
        "llr_lognormal": rl,
        "exp_rate": rate,
        "lognormal_mu": mu,
        "lognormal_sigma": sg,
    }


def fit_power_law(
    x: Any,
    *,
    variable: str = "",
    x_min: float | None = None,
    min_tail: int = 5,
    max_candidates: int | None = 200,
    gof_n: int = 1000,
    seed: int = 0,
    compare: bool = True,
) -> PowerLawFit:
    """Fit a continuous power law to the tail of x (Clauset et al. 2009).

    Parameters
    ----------
    x : array_like
        Values (non-positive and non-finite values are dropped).
    variable : str
        Name stored on the result.
    x_min : float, optional
        Fixed lower bound; default: chosen by the KS scan.
    min_tail, max_candidates
        See :func:`scan_x_min`.
    gof_n : int
        Bootstrap data sets for the goodness-of-fit p-value (0 skips it).
    seed : int
        Random seed of the bootstrap.
    compare : bool
        Run the Vuong tests against exponential and log-normal.

    Returns
    -------
    PowerLawFit
        ``fitted`` False (with a reason) for fewer than ``min_tail`` positive
        values or fewer than two distinct values.

    Notes
    -----
    Clauset, Shalizi & Newman (2009): MLE eqs. 3.1-3.2, x_min by KS
    (section 3.3), goodness of fit (4.1), Vuong test (5.1).
    """
    v = np.asarray(x, dtype=float).ravel()
    v = np.sort(v[np.isfinite(v) & (v > 0)])
    n = int(v.size)
    if n < max(min_tail, 2):
        return PowerLawFit(
            variable=variable,
            fitted=False,
            n=n,
            values=v,
            reason=f"only {n} positive value(s); at least {max(min_tail, 2)} needed",
        )
    if np.unique(v).size < 2:
        return PowerLawFit(
            variable=variable,
            fitted=False,
            n=n,
            values=v,
            reason="all values are identical: no distribution to fit",
        )
    if x_min is None:
        xm, alpha, d, nt = scan_x_min(v, min_tail=min_tail, max_candidates=max_candidates)
        if not np.isfinite(xm):
            return PowerLawFit(
                variable=variable,
                fitted=False,
                n=n,
                values=v,
                reason="no valid x_min candidate (too few distinct values)",
            )
        se = (alpha - 1.0) / np.sqrt(nt)
    else:
        xm = float(x_min)
        alpha, se, nt = power_law_mle(v, xm)
        if nt < 2 or not np.isfinite(alpha):
            return PowerLawFit(
                variable=variable,
                fitted=False,
                n=n,
                values=v,
                reason=f"fewer than 2 distinct values above x_min={xm:g}",
            )
        d = ks_distance(v, xm, alpha)
    gof_p = float("nan")
    if gof_n > 0:
        gof_p, _ = power_law_gof(
            v,
            xm,
            alpha,
            gof_n=gof_n,
            seed=seed,
            min_tail=min_tail,
            max_candidates=max_candidates,
            ks_observed=d,
        )
    alt: dict[str, float] = {}
    if compare:
        alt = compare_alternatives(v, xm, alpha)
    return PowerLawFit(
        variable=variable,
        fitted=True,
        alpha=float(alpha),
        se=float(se),
        x_min=float(xm),
        n=n,
        n_tail=int(nt),
        ks_d=float(d),
        gof_p=gof_p,
        gof_n=int(gof_n),
        values=v,
        **alt,
    )


def ccdf(x: Any) -> tuple[np.ndarray, np.ndarray]:
    """Empirical complementary cumulative distribution P(X >= x).

    Parameters
    ----------
    x : array_like
        Values (non-finite dropped).

    Returns
    -------
    xs, p : numpy.ndarray
        Sorted values and ``P(X >= xs)`` = (n - rank) / n.
    """
    v = np.sort(np.asarray(x, dtype=float).ravel())
    v = v[np.isfinite(v)]
    n = v.size
    return v, (n - np.arange(n)) / n if n else np.empty(0)


def detection_effects(
    x: Any,
    fit: PowerLawFit,
    *,
    detection_limit: float | None,
) -> dict[str, Any]:
    """How the detection limit bears on the smallest faults.

    Parameters
    ----------
    x : array_like
        Values of the variable (same unit as the limit).
    fit : PowerLawFit
        The power-law fit of x.
    detection_limit : float or None
        Smallest value the data resolve (e.g. the detection throw of the
        DEM, m); None or NaN skips the report.

    Returns
    -------
    dict
        ``detection_limit``, ``n_below_detection``, ``frac_below_detection``,
        ``n_between_detection_and_x_min``, ``x_min_over_detection``,
        ``detection_note``.

    Notes
    -----
    Our rule (stated in the note): when x_min is less than twice the
    detection limit, the smallest faults are likely under-counted
    (truncation; common practice) and alpha may be biased low.
    """
    v = np.asarray(x, dtype=float)
    v = v[np.isfinite(v)]
    out: dict[str, Any] = {
        "detection_limit": np.nan,
        "n_below_detection": np.nan,
        "frac_below_detection": np.nan,
        "n_between_detection_and_x_min": np.nan,
        "x_min_over_detection": np.nan,
        "detection_note": "",
    }
    if detection_limit is None or not np.isfinite(detection_limit) or detection_limit <= 0:
        out["detection_note"] = "no detection limit given"
        return out
    nb = int(np.sum(v < detection_limit))
    out.update(
        detection_limit=float(detection_limit),
        n_below_detection=nb,
        frac_below_detection=nb / v.size if v.size else np.nan,
    )
    if fit.fitted:
        ratio = fit.x_min / detection_limit
        out["x_min_over_detection"] = ratio
        out["n_between_detection_and_x_min"] = int(np.sum((v >= detection_limit) & (v < fit.x_min)))
        if ratio < 2.0:
            out["detection_note"] = (
                f"x_min is {ratio:.2g} x the detection limit: the smallest "
                "faults are likely under-counted; read alpha with caution"
            )
        else:
            out["detection_note"] = (
                f"x_min is {ratio:.2g} x the detection limit: the fitted "
                "tail lies above it; the roll-over below x_min is "
                "consistent with truncation"
            )
    else:
        out["detection_note"] = f"{nb} value(s) below the detection limit; no fit"
    return out


def _row(fit: PowerLawFit) -> dict[str, Any]:
    return {
        "model": "power_law",
        "variable": fit.variable,
        "alpha": fit.alpha,
        "se": fit.se,
        "x_min": fit.x_min,
        "n_faults": fit.n,
        "n_tail": fit.n_tail,
        "ks_d": fit.ks_d,
        "gof_p": fit.gof_p,
        "gof_n": fit.gof_n,
        "lr_exponential": fit.lr_exponential,
        "p_exponential": fit.p_exponential,
        "llr_exponential": fit.llr_exponential,
        "lr_lognormal": fit.lr_lognormal,
        "p_lognormal": fit.p_lognormal,
        "llr_lognormal": fit.llr_lognormal,
        "fitted": fit.fitted,
        "reason": fit.reason,
    }


def analyse_sizes(
    population: pd.DataFrame,
    *,
    variables: Sequence[str] = ("length_m", "max_throw_m"),
    include_censored: bool = False,
    detection_limits: Mapping[str, float | None] | None = None,
    min_tail: int = 5,
    max_candidates: int | None = 200,
    gof_n: int = 1000,
    seed: int = 0,
) -> SizeResult:
    """Power-law size distributions of a population, with their caveats.

    Parameters
    ----------
    population : pandas.DataFrame
        One row per fault or system, with the ``variables`` columns and
        optionally ``censored`` (bool).
    variables : sequence of str
        Columns to fit (default lengths and maximum throws, m).
    include_censored : bool
        Keep censored rows in the main fit (default False). The other choice
        is always fitted too (without the bootstrap) and reported as
        ``alpha_incl_censored`` / ``alpha_excl_censored``.
    detection_limits : mapping, optional
        Detection limit per variable (same unit), e.g.
        ``{'max_throw_m': 2.0}``.
    min_tail, max_candidates, gof_n, seed
        See :func:`fit_power_law`.

    Returns
    -------
    SizeResult

    Notes
    -----
    Clauset, Shalizi & Newman (2009). Censored lengths are lower bounds;
    censored throws may miss the true maximum.
    """
    notes: list[str] = []
    detection_limits = dict(detection_limits or {})
    cens = (
        population["censored"].to_numpy(bool)
        if "censored" in population
        else np.zeros(len(population), dtype=bool)
    )
    fits: dict[str, PowerLawFit] = {}
    data: dict[str, np.ndarray] = {}
    rows = []
    for var in variables:  # loop over a couple of variables
        if var not in population:
            raise InputError(f"population lacks column {var!r}: run the throw tool first")
        v = population[var].to_numpy(float)
        main = v if include_censored else v[~cens]
        f = fit_power_law(
            main, variable=var, min_tail=min_tail, max_candidates=max_candidates, gof_n=gof_n, seed=seed
        )
        fits[var] = f
        data[var] = f.values
        row = _row(f)
        if not f.fitted:
            notes.append(f"power law of {var} not fitted: {f.reason}")
        elif f.n < 50:
            notes.append(
                f"power law of {var}: only {f.n} values; the goodness-of-fit and "
                "likelihood-ratio tests have little power at this size"
            )
        other = v[~cens] if include_censored else v
        n_c = int(cens.sum())
        row["n_censored"] = n_c
        row["include_censored"] = include_censored
        if n_c and f.fitted:
            g = fit_power_law(
                other, variable=var, min_tail=min_tail, max_candidates=max_candidates, gof_n=0, compare=False
            )
            a_other = g.alpha if g.fitted else np.nan
            row["alpha_incl_censored"] = f.alpha if include_censored else a_other
            row["alpha_excl_censored"] = a_other if include_censored else f.alpha
        else:
            row["alpha_incl_censored"] = f.alpha
            row["alpha_excl_censored"] = f.alpha
        eff = detection_effects(main, f, detection_limit=detection_limits.get(var))
        row.update(eff)
        if eff["detection_note"] and "caution" in eff["detection_note"]:
            notes.append(f"{var}: {eff['detection_note']}")
        rows.append(row)
    return SizeResult(fits=fits, data=data, table=pd.DataFrame(rows), warnings=notes)
