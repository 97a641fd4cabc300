"""Monte Carlo draws of the slip rates: adaptive count, reported precision (regional-scale issue)."""

from __future__ import annotations

import numpy as np
import pytest

from faultmap.hazard.slip_rates import draws_per_fault, percentile_rank_se


def test_draws_rule_keeps_small_screens_unchanged_and_bounds_large_ones():
    assert draws_per_fault(1) == 10_000 and draws_per_fault(800) == 10_000  # small screens: all draws
    assert draws_per_fault(4_000) == 2_000
    assert draws_per_fault(100_000) == 1_000  # floor
    n = np.array([800, 2_000, 4_000, 8_000])
    total = n * np.array([draws_per_fault(k) for k in n])
    assert np.all(total == 8e6)  # linear cost: a fixed budget of values beyond 800 faults
    # the 16th percentile of 2000 draws stands for a level within 0.16 +- 0.0082 (binomial, below)
    assert percentile_rank_se(0.16, draws_per_fault(4_000)) == pytest.approx(0.0082, abs=1e-4)


def test_percentile_level_precision_is_the_binomial_one():
    # The fraction of N uniform draws below the level p is Binomial(N, p) / N, of standard deviation
    # sqrt(p (1 - p) / N) (analytic); checked by simulation here.
    rng = np.random.default_rng(0)
    n, p = 2_000, 0.16
    frac = (rng.random((4_000, n)) < p).mean(axis=1)
    assert percentile_rank_se(p, n) == pytest.approx(np.sqrt(p * (1 - p) / n))
    assert frac.std() == pytest.approx(percentile_rank_se(p, n), rel=0.05)
