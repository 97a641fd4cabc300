"""Bootstrap goodness of fit of a power-law tail (Clauset, Shalizi & Newman 2009, section 4.1).

The p-value is the fraction of synthetic data sets whose KS distance (after
their own full fit, x_min scan included) is at least the observed one; all
synthetic sets are scanned at once with the vectorised scan of
:mod:`faultmap.population.powerlaw_fit`. The public names are listed in
:mod:`faultmap.population`.

Work and precision: one synthetic set costs about ``n x C`` KS evaluations
(``n`` values, ``C`` x_min candidates), so a fixed number of sets makes the
test grow with the sample. :func:`gof_replicates` chooses the number of sets
from a fixed budget of ``GOF_BUDGET`` evaluations (at most ``GOF_MAX``, at
least ``GOF_MIN``) when the caller does not give one; the Monte Carlo
standard error of the p-value, ``sqrt(p (1 - p) / B)``, is reported beside
it (:func:`gof_p_se`). Clauset, Shalizi & Newman (2009, SIAM Review 51,
sec. 4.1): B sets give p to about ``1 / (2 sqrt(B))``; ``B = 1 / (4 eps^2)``
sets give accuracy ``eps``, so ``GOF_MIN = 100`` keeps p within about 0.05.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from faultmap.errors import ParameterError
from faultmap.population.powerlaw_fit import _CHUNK_ELEMS, _candidate_positions, _scan_sorted, ks_distance

__all__ = ["power_law_gof", "gof_replicates", "gof_p_se", "GOF_BUDGET", "GOF_MAX", "GOF_MIN"]

#: KS evaluations (values x candidates x synthetic sets) of the automatic rule.
GOF_BUDGET: int = 100_000_000
#: Synthetic sets of the automatic rule: at most (the former fixed default) ...
GOF_MAX: int = 1000
#: ... and at least: 1 / (4 eps^2) for eps = 0.05 (Clauset et al. 2009, sec. 4.1).
GOF_MIN: int = 100


def gof_replicates(
    n: int, *, gof_n: int | None = None, min_tail: int = 5, max_candidates: int | None = 200
) -> int:
    """Return the number of synthetic data sets of the goodness-of-fit test.

    Parameters
    ----------
    n : int
        Number of observed values (whole sample).
    gof_n : int, optional
        Given by the user: used exactly. None (default): the automatic rule.
    min_tail, max_candidates
        Scan options (they set the number ``C`` of x_min candidates tried on
        each synthetic set).

    Returns
    -------
    int
        ``gof_n`` when given; otherwise
        ``min(GOF_MAX, max(GOF_MIN, GOF_BUDGET // (n C)))``: 1000 sets up to
        ``n C = 10^5`` (n = 500 with the default 200 candidates), then a
        fixed budget of KS evaluations, never fewer than 100 sets.

    Notes
    -----
    Our rule. Its floor follows Clauset, Shalizi & Newman (2009), sec. 4.1:
    ``B = 1 / (4 eps^2)`` sets give the p-value to about ``eps`` (0.05 for
    B = 100). Beyond ``n C = 10^6`` the test costs ``GOF_MIN n C``
    evaluations: linear in n.
    """
    if gof_n is not None:
        if gof_n < 0:
            raise ParameterError(f"gof_n={gof_n} must be >= 0")
        return int(gof_n)
    c = max(1, _candidate_positions(int(n), min_tail, max_candidates).size)
    work = max(1, int(n) * c)
    return int(min(GOF_MAX, max(GOF_MIN, GOF_BUDGET // work)))


def gof_p_se(p: float, n_sets: int) -> float:
    """Monte Carlo standard error of a bootstrap p-value.

    Parameters
    ----------
    p : float
        The p-value (fraction of synthetic sets, 0-1).
    n_sets : int
        Number of synthetic sets B it was computed from.

    Returns
    -------
    float
        ``sqrt(p (1 - p) / B)`` (binomial proportion); NaN when p is NaN or
        B < 1.

    Notes
    -----
    Clauset, Shalizi & Newman (2009), sec. 4.1: the p-value is a fraction
    of B independent sets, so its sampling error is binomial; at most
    ``1 / (2 sqrt(B))`` (at p = 0.5). At p = 0 or 1 it is 0: read it then
    as "p below (or above) about 1 / B".
    """
    if n_sets < 1 or not np.isfinite(p):
        return float("nan")
    return float(np.sqrt(p * (1.0 - p) / n_sets))


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
