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


def test_a_faults_own_dip_range_is_drawn():
    """A database dip range '40-80' is drawn uniformly over 40-80 deg instead of dip +- dip_range_deg.

    With throw and age exact, net slip rate = (T / t) / sin(dip) (geometry), decreasing in dip, so its
    84th percentile is at the 16th percentile of the dip: 40 + 0.16 x 40 = 46.4 deg for U(40, 80)
    (inverse CDF of the uniform law, analytic); with the default 60 +- 10, 50 + 0.16 x 20 = 53.2 deg.
    """
    import geopandas as gpd
    import shapely

    from faultmap.hazard.slip_rates import slip_rates

    f = gpd.GeoDataFrame(
        {"fault_id": [1, 2], "active": [True, True], "max_throw_m": [12.0, 12.0], "max_throw_err_m": [0.0, 0.0],
         "surface_age_ka": [10.0, 10.0], "dip_deg": [60.0, 60.0], "dip_min_deg": [40.0, np.nan],
         "dip_max_deg": [80.0, np.nan]},
        geometry=[shapely.LineString([(0, 0), (0, 10_000)]), shapely.LineString([(5_000, 0), (5_000, 10_000)])],
        crs="EPSG:32633",
    )
    out = slip_rates(f, age_abs_err_ka=0.0, n_draws=20_000, seed=3)
    out = out[0] if isinstance(out, tuple) else out
    p84 = out.set_index("fault_id")["slip_rate_net_p84_mm_yr"]
    vert = 12.0 / 10.0  # m/ka = mm/yr
    assert p84[1] == pytest.approx(vert / np.sin(np.radians(46.4)), rel=0.01)
    assert p84[2] == pytest.approx(vert / np.sin(np.radians(53.2)), rel=0.01)
