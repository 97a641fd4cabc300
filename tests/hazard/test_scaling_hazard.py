"""The hazard tool's work in blocks and sparse links gives the same numbers as the direct forms."""

from __future__ import annotations

import importlib

import geopandas as gpd
import numpy as np
import pytest
import shapely
from scipy import stats

from faultmap.hazard.scenarios import rupture_scenarios

slip = importlib.import_module("faultmap.hazard.slip_rates")
scen = importlib.import_module("faultmap.hazard.scenarios")


def _inputs(n=41, seed=5):
    rng = np.random.default_rng(seed)
    throw = rng.uniform(-2.0, 30.0, n)
    throw[rng.random(n) < 0.1] = np.nan
    terr = rng.uniform(0.0, 5.0, n)
    terr[rng.random(n) < 0.2] = np.nan
    terr[rng.random(n) < 0.1] = 0.0
    age = rng.uniform(1.0, 50.0, n)
    aerr = 0.2 * age
    aerr[::7] = np.nan
    dip = rng.uniform(30.0, 89.0, n)
    return throw, terr, age, aerr, dip


def test_throw_draws_are_scipy_truncnorm():
    """The throw draws are truncnorm.rvs's, bit for bit (same uniforms, same arithmetic)."""
    throw, terr, age, aerr, dip = _inputs()
    d = slip.slip_rate_draws(throw, terr, age, aerr, dip, n_draws=300, seed=3)
    t = throw[:, None]
    e = terr[:, None]
    has = np.isfinite(e) & (e > 0)
    scale = np.where(has, e, 1.0)
    loc = np.where(np.isfinite(t), t, 0.0)
    ref = stats.truncnorm.rvs(-loc / scale, np.inf, loc=loc, scale=scale, size=(len(throw), 300),
                              random_state=np.random.default_rng(3))
    assert np.array_equal(d["throw_m"], np.where(has, ref, t), equal_nan=True)


@pytest.mark.parametrize("chunk", [300, 1000, 7777])
def test_blocks_give_the_same_draws_and_rates(monkeypatch, chunk):
    throw, terr, age, aerr, dip = _inputs()
    whole = slip.slip_rate_draws(throw, terr, age, aerr, dip, n_draws=300, seed=3)
    n = len(throw)
    faults = gpd.GeoDataFrame(
        {"fault_id": np.arange(1, n + 1), "dip_deg": dip, "surface_age_ka": age, "max_throw_m": throw,
         "max_throw_err_m": terr, "active": True},
        geometry=[shapely.LineString([(0, 0), (1, 1)])] * n,
    )
    mag = np.linspace(5.0, 7.0, n)
    t_whole, w_whole = slip.slip_rates(faults, n_draws=300, magnitude_for_displacement=mag)
    monkeypatch.setattr(slip, "_CHUNK_DRAWS", chunk)
    blocks = slip.slip_rate_draws(throw, terr, age, aerr, dip, n_draws=300, seed=3)
    for k in whole:
        assert np.array_equal(whole[k], blocks[k], equal_nan=True), k
    t_blocks, w_blocks = slip.slip_rates(faults, n_draws=300, magnitude_for_displacement=mag)
    assert t_whole.equals(t_blocks) and w_whole == w_blocks


def _connected_bruteforce(members, links):
    """A graph search within ``members`` alone (the form the union-find replaces)."""
    inside = set(members)
    todo, seen = [members[0]], {members[0]}
    while todo:
        k = todo.pop()
        for j in links[k]:
            if j in inside and j not in seen:
                seen.add(j)
                todo.append(j)
    return len(seen) == len(inside)


def test_connected_runs_match_a_search_per_run():
    rng = np.random.default_rng(2)
    n = 40
    pairs = rng.integers(0, n, (2, 90))
    nbrs = scen._neighbours((pairs[0], pairs[1]), n)
    links = {k: set(v.tolist()) for k, v in enumerate(nbrs)}
    assert all(k in links[j] for k in range(n) for j in links[k])  # symmetric
    order = rng.permutation(n)
    got = list(scen._connected_runs(order, nbrs))
    want = [
        (i0, i1)
        for i0 in range(n)
        for i1 in range(i0 + 2, n + 1)
        if _connected_bruteforce(order[i0:i1].tolist(), links)
    ]
    assert got == want
    comps = scen._components(nbrs)
    assert sorted(k for c in comps for k in c) == list(range(n))
    assert [c[0] for c in comps] == sorted(c[0] for c in comps)


def test_linked_scenarios_cover_each_connected_run():
    rng = np.random.default_rng(4)
    n = 60
    x = rng.uniform(0, 8000, n)
    y = rng.uniform(0, 8000, n)
    lines = [shapely.LineString([(xi, yi - 600), (xi + 50, yi + 600)]) for xi, yi in zip(x, y, strict=True)]
    sysid = rng.integers(0, 20, n).astype(float)
    f = gpd.GeoDataFrame({"fault_id": np.arange(1, n + 1), "dip_deg": 60.0, "system_id": sysid, "active": True},
                         geometry=lines, crs="EPSG:32633")
    sc, _ = rupture_scenarios(f, link_gap_m=400.0)
    kinds = sc["kind"].tolist()
    assert kinds[:n] == ["segment"] * n
    systems = sc.loc[sc["kind"] == "system", "fault_ids"].tolist()
    want = []
    for s in dict.fromkeys(sysid.tolist()):
        ids = np.flatnonzero(sysid == s) + 1
        if ids.size > 1:
            want.append(",".join(map(str, ids)))
    assert systems == want
    assert len(set(sc["fault_ids"])) == len(sc)  # each member set once
