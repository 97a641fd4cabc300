"""Linked systems: pairs and short chains judged relative to the segments, never a chain across the map.

Rules (ours, stated in ``docs/methods/prepare.md``): a link needs a tip-to-tip distance within
``link_distance_m`` and within ``link_length_ratio`` of the shorter trace (relay zones are small against
their segments: Peacock & Sanderson 1991, J. Struct. Geol. 13, from memory), each tip links to at most
its mutual nearest partner, and no system holds more than ``max_segments`` traces.
"""

from __future__ import annotations

import numpy as np
import pytest
import shapely

from faultmap.errors import ParameterError
from faultmap.traces.conditioning import link_systems, system_sizes


def _row_of_segments(n, *, length, gap, x=0.0):
    """``n`` north-striking segments end to end along one line, ``gap`` metres apart."""
    y0 = np.arange(n) * (length + gap)
    return np.array([shapely.LineString([(x, y), (x, y + length)]) for y in y0])


def test_a_long_row_of_segments_is_not_one_system():
    # 200 segments 1 km long, 100 m apart along strike: every gap passes the distance rules, so a
    # transitive rule chains all 200 into one 20-km "fault"; here no system exceeds max_segments.
    lines = _row_of_segments(200, length=1000.0, gap=100.0)
    strike, dd = np.zeros(200), np.full(200, 90.0)
    sid = link_systems(lines, strike, dd, link_distance_m=1000, link_angle_deg=20, max_segments=5)
    sizes = np.bincount(sid)[1:]
    assert sizes.max() == 5 and sizes.min() >= 1
    assert sizes.sum() == 200
    # with the cap lifted the same rule would chain the whole row: the cap is what stops it
    chained = link_systems(lines, strike, dd, link_distance_m=1000, link_angle_deg=20, max_segments=1000)
    assert len(np.unique(chained)) == 1


def test_cut_at_the_weakest_relay():
    # five segments, the third gap much wider (relative to length) than the others: with max_segments 3
    # the chain is cut there, not in the middle of the tight pairs
    ys = [0, 1050, 2100, 3500, 4550]  # gaps 50, 50, 400, 50 m; segments 1000 m
    lines = np.array([shapely.LineString([(0, y), (0, y + 1000)]) for y in ys])
    sid = link_systems(lines, np.zeros(5), np.full(5, 90.0), link_distance_m=1000, link_angle_deg=20,
                       max_segments=3)
    assert list(sid) == [1, 1, 1, 2, 2]


def test_distance_relative_to_the_segments():
    # two 200-m segments 300 m apart: within link_distance_m, but the gap is 1.5 times their length
    short = _row_of_segments(2, length=200.0, gap=300.0)
    sid = link_systems(short, np.zeros(2), np.full(2, 90.0), link_distance_m=1000, link_angle_deg=20)
    assert sid[0] != sid[1]
    # the same gap between 2-km segments is a relay
    long = _row_of_segments(2, length=2000.0, gap=300.0)
    sid = link_systems(long, np.zeros(2), np.full(2, 90.0), link_distance_m=1000, link_angle_deg=20)
    assert sid[0] == sid[1]


def test_a_tip_links_to_one_partner_only():
    # the north tip of A is near the south tips of B (50 m) and C (80 m, offset sideways): A links to B,
    # C stays alone; a transitive rule would have joined all three
    a = shapely.LineString([(0, 0), (0, 3000)])
    b = shapely.LineString([(0, 3050), (0, 6000)])
    c = shapely.LineString([(80, 3000), (80, 6000)])  # side by side with B: never linked to B
    sid = link_systems(np.array([a, b, c]), np.zeros(3), np.full(3, 90.0), link_distance_m=1000,
                       link_angle_deg=20)
    assert sid[0] == sid[1] and sid[2] not in (sid[0],)


def test_digitising_direction_and_order_do_not_matter():
    rng = np.random.default_rng(5)
    lines = _row_of_segments(30, length=800.0, gap=60.0)
    flipped = shapely.reverse(lines)
    kw = dict(link_distance_m=1000, link_angle_deg=20, max_segments=4)
    s1 = link_systems(lines, np.zeros(30), np.full(30, 90.0), **kw)
    s2 = link_systems(flipped, np.zeros(30), np.full(30, 90.0), **kw)
    np.testing.assert_array_equal(s1, s2)
    perm = rng.permutation(30)
    s3 = link_systems(lines[perm], np.zeros(30), np.full(30, 90.0), **kw)
    # same partition of traces (numbering follows the input order)
    same = s1[:, None] == s1[None, :]
    np.testing.assert_array_equal(same[np.ix_(perm, perm)], s3[:, None] == s3[None, :])


def test_system_sizes_and_bad_cap():
    assert system_sizes(np.array([1, 1, 2, 3, 3, 3, 4])) == {1: 2, 2: 1, 3: 1}
    with pytest.raises(ParameterError, match="max_segments"):
        link_systems(_row_of_segments(2, length=100.0, gap=10.0), np.zeros(2), np.full(2, 90.0),
                     link_distance_m=100, link_angle_deg=20, max_segments=1)
