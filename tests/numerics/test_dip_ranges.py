"""Dip intervals of the Monte Carlo draws (faultmap.numerics.dip_ranges): one rule for every tool."""

from __future__ import annotations

import numpy as np

from faultmap.numerics.dip_ranges import dip_draw_bounds


def test_own_range_replaces_the_half_range_side_by_side():
    # values worked by hand: 60 +- 10 -> [50, 70]; a database "40-80" -> [40, 80]; only a minimum 45 ->
    # [45, 70]; a half-range reaching past 90 is clipped (85 + 10 -> 90)
    lo, hi = dip_draw_bounds([60.0, 60.0, 60.0, 85.0], 10.0, [np.nan, 40.0, 45.0, np.nan],
                             [np.nan, 80.0, np.nan, np.nan])
    np.testing.assert_array_equal(lo, [50.0, 40.0, 45.0, 75.0])
    np.testing.assert_array_equal(hi, [70.0, 80.0, 70.0, 90.0])


def test_bounds_contain_the_preferred_dip_and_respect_the_floor():
    # a preferred dip outside its own range widens the range to contain it; no dip under the floor
    lo, hi = dip_draw_bounds([75.0, 3.0], 10.0, [50.0, np.nan], [70.0, np.nan], min_dip_deg=1.0)
    np.testing.assert_array_equal(lo, [50.0, 1.0])
    np.testing.assert_array_equal(hi, [75.0, 13.0])
