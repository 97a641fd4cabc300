"""Alternatives to a power-law tail and Vuong's likelihood-ratio test.

Exponential and log-normal distributions truncated at the power law's
``x_min``, fitted by maximum likelihood, and Vuong's test (Vuong 1989) as
used by Clauset, Shalizi & Newman (2009, section 5.1): the normalised ratio
``R / (sigma sqrt(n))`` (positive favours the power law) and the two-sided
p-value ``erfc(|R| / sqrt(2 n sigma^2))``. The public names are
listed in :mod:`faultmap.population`.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from scipy import optimize, special

__all__ = ["fit_exponential", "fit_lognormal", "vuong_test", "compare_alternatives"]


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
