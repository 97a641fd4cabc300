"""Continuous power law: the fit result type, maximum-likelihood exponent and the x_min scan by KS distance.

``p(x) = (alpha - 1) / x_min * (x / x_min)**(-alpha)`` for ``x >= x_min``,
fitted as in Clauset, Shalizi & Newman (2009, SIAM Review 51, 661-703):
the exponent ``alpha = 1 + n / sum(ln(x_i / x_min))`` with standard error
``(alpha - 1) / sqrt(n)`` (their eqs. 3.1 and 3.2), and ``x_min`` chosen to
minimise the Kolmogorov-Smirnov distance between the tail data and the
fitted law (their section 3.3).

The x_min scan is vectorised: for sorted samples (one row each), suffix sums
of ``ln x`` give alpha for every candidate at once, and the KS distance of
every candidate is a masked maximum over a (rows, candidates, n) array that
is processed in memory-bounded chunks. The fit result type
:class:`PowerLawFit` lives here too; public names are listed in :mod:`faultmap.population`.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy import special

from faultmap.errors import InputError, ParameterError

__all__ = ["power_law_mle", "ks_distance", "scan_x_min"]

_CHUNK_ELEMS = 2_000_000  # elements of the (rows, candidates, n) KS array per chunk
_CAND_GROUP = 8  # x_min candidates of neighbouring rank handled together in the KS scan


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


def _ks_blocks(
    L: np.ndarray, Li: np.ndarray, alpha: np.ndarray, pos: np.ndarray, m: np.ndarray, D: np.ndarray
) -> None:
    """Fill D (B, C) with the KS distance of every row and candidate (in place).

    Parameters
    ----------
    L : numpy.ndarray
        (B, n) ln of the row-sorted samples.
    Li : numpy.ndarray
        (B, C) ln x_min of each candidate.
    alpha : numpy.ndarray
        (B, C) MLE exponent of each candidate (NaN where not valid).
    pos : numpy.ndarray
        (C,) ascending candidate rank positions.
    m : numpy.ndarray
        (C,) tail sizes ``n - pos`` (float).
    D : numpy.ndarray
        (B, C) output, written in place.

    Notes
    -----
    Candidates are taken in small groups of neighbouring ranks so that each
    group works only on the columns of its longest tail (``j >= pos[first]``):
    the values below a candidate are not part of its KS distance, so about
    half of the (rows, candidates, n) work is skipped. Each element is
    computed with the same operations as the straightforward masked maximum,
    so the distances are the same to the last bit. Blocks hold at most
    ``_CHUNK_ELEMS`` elements.
    """
    B, n = L.shape
    C = pos.size
    c_step = max(1, min(C, _CAND_GROUP, _CHUNK_ELEMS // n))
    for c0 in range(0, C, c_step):
        c1 = min(C, c0 + c_step)
        p0 = int(pos[c0])
        w = n - p0  # columns of the group's longest tail
        k = np.arange(p0, n)[None, :] - pos[c0:c1, None]  # (c, w) rank in each tail
        outside = k < 0
        kk = np.where(outside, 0, k).astype(float)
        mm = m[c0:c1, None]
        up = (kk + 1.0) / mm
        lo = kk / mm
        r_step = max(1, _CHUNK_ELEMS // ((c1 - c0) * w))
        for r0 in range(0, B, r_step):
            r1 = min(B, r0 + r_step)
            a = alpha[r0:r1, c0:c1]
            F = np.subtract(L[r0:r1, None, p0:], Li[r0:r1, c0:c1, None])  # (r, c, w)
            with np.errstate(invalid="ignore", over="ignore"):
                np.multiply(1.0 - a[:, :, None], F, out=F)
                np.expm1(F, out=F)
            np.negative(F, out=F)  # model CDF
            d = np.subtract(up[None], F)
            np.subtract(F, lo[None], out=F)
            np.maximum(d, F, out=d)
            if outside.any():
                np.copyto(d, -np.inf, where=outside[None])
            D[r0:r1, c0:c1] = d.max(axis=2)


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
        _ks_blocks(L, Li, alpha, pos, m, D)
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
        Number of bootstrap data sets used for ``gof_p``.
    gof_p_se : float
        Monte Carlo standard error of ``gof_p``, ``sqrt(p (1 - p) / gof_n)``
        (Clauset et al. 2009, sec. 4.1); NaN when the test was not run.
    gof_rule : str
        ``given`` (``gof_n`` set by the caller) or ``auto`` (chosen by
        :func:`~faultmap.population.powerlaw_gof.gof_replicates`).
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
    gof_p_se: float = float("nan")
    gof_rule: str = ""
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
