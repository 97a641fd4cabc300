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

The parts live in modules named for what they compute (public names are
listed in :mod:`faultmap.population`):
:mod:`faultmap.population.powerlaw_fit` (MLE, KS distance, x_min scan),
:mod:`faultmap.population.powerlaw_gof` (bootstrap goodness of fit),
:mod:`faultmap.population.alternatives` (exponential, log-normal, Vuong test) and
:mod:`faultmap.population.detection` (detection-limit effects). This module holds
the population result type, the whole fit and the analysis of a population.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from faultmap.errors import InputError
from faultmap.population.alternatives import compare_alternatives
from faultmap.population.detection import detection_effects
from faultmap.population.powerlaw_fit import PowerLawFit, ks_distance, power_law_mle, scan_x_min
from faultmap.population.powerlaw_gof import GOF_MAX, gof_p_se, gof_replicates, power_law_gof

__all__ = [
    "SizeResult",
    "fit_power_law",
    "ccdf",
    "analyse_sizes",
]


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


def fit_power_law(
    x: Any,
    *,
    variable: str = "",
    x_min: float | None = None,
    min_tail: int = 5,
    max_candidates: int | None = 200,
    gof_n: int | None = None,
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
    gof_n : int, optional
        Bootstrap data sets for the goodness-of-fit p-value, used exactly
        when given (0 skips the test). None (default): chosen by
        :func:`~faultmap.population.powerlaw_gof.gof_replicates` from the
        sample size (1000 up to 500 values with the default candidates,
        then a fixed budget of work, never fewer than 100).
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
    (section 3.3), goodness of fit (4.1), Vuong test (5.1). The number of
    synthetic sets used is ``gof_n`` on the result, the Monte Carlo standard
    error of the p-value ``sqrt(p (1 - p) / B)`` is ``gof_p_se`` (sec. 4.1).
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
    n_sets = gof_replicates(n, gof_n=gof_n, min_tail=min_tail, max_candidates=max_candidates)
    if n_sets > 0:
        gof_p, _ = power_law_gof(
            v,
            xm,
            alpha,
            gof_n=n_sets,
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
        gof_n=int(n_sets),
        gof_p_se=gof_p_se(gof_p, n_sets),
        gof_rule="given" if gof_n is not None else "auto",
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


def _row(fit: PowerLawFit, gof_requested: int) -> dict[str, Any]:
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
        "gof_n": gof_requested,
        "gof_n_used": fit.gof_n if fit.fitted else 0,
        "gof_p_se": fit.gof_p_se,
        "gof_n_rule": fit.gof_rule,
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
    gof_n: int | None = None,
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
        See :func:`fit_power_law` (``gof_n`` None: the automatic rule).

    Returns
    -------
    SizeResult
        Its table has ``gof_n`` (the number asked for, or the rule's cap
        1000), ``gof_n_used`` (synthetic sets behind ``gof_p``), ``gof_p_se``
        (Monte Carlo standard error ``sqrt(p (1 - p) / B)``) and
        ``gof_n_rule`` (``given`` or ``auto``).

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
        row = _row(f, GOF_MAX if gof_n is None else int(gof_n))
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
