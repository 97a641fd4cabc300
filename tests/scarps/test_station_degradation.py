"""Kappa t measured by the throw step on DEMs: analytic scarps at several pixel sizes, the resolution rule,
the digitising direction, and synthetic scenes whose faults were degraded by different kappa t.

Sources: the error-function profile of a diffused vertical step (Nash 1980; Hanks, Bucknam, Lajoie & Wallace
1984, J. Geophys. Res. 89), written into the DEMs here with scipy.special.erf; rank correlation by
scipy.stats.spearmanr.
"""

from __future__ import annotations

import math

import geopandas as gpd
import numpy as np
import pytest
from scipy.special import erf
from scipy.stats import spearmanr
from shapely.geometry import LineString

from faultmap.io.dem import open_dem
from faultmap.synthetic import build_dem
from faultmap.throw.step import measure_throw
from tests.conftest import write_dem

CRS = "EPSG:32633"
EXTENT = 800.0


def _write(path, z, px, y0=EXTENT):
    return write_dem(path, z, crs=CRS, x0=0.0, y0=y0, px=px)


def _erf_scene(tmp_path, *, px, kappa_t, offset=4.0, noise=0.02, seed=0, events=1):
    """A straight oblique trace; across it the diffused step of ``offset`` on a surface of slope 0.03."""
    p0, p1 = np.array([330.0, 80.0]), np.array([450.0, 720.0])
    t = (p1 - p0) / np.linalg.norm(p1 - p0)
    nrm = np.array([t[1], -t[0]])  # right of the trace: the hanging wall (dip direction)
    n = int(round(EXTENT / px))
    xc = (np.arange(n) + 0.5) * px
    yc = EXTENT - (np.arange(n) + 0.5) * px
    X, Y = np.meshgrid(xc, yc)
    d = (X - p0[0]) * nrm[0] + (Y - p0[1]) * nrm[1]
    # n equal events at ages t k / n superpose (linear diffusion; checked against finite differences in
    # test_diffusion.py)
    shape = sum(erf(d / (2.0 * math.sqrt(kappa_t * k / events))) for k in range(1, events + 1)) / events
    z = 400.0 - 0.03 * d - 0.5 * offset * shape
    z += np.random.default_rng(seed).normal(0.0, noise, z.shape)
    path = _write(tmp_path / f"erf_{px:g}_{kappa_t:g}_{events}.tif", z, px)
    dip_dir = math.degrees(math.atan2(nrm[0], nrm[1])) % 360.0
    faults = gpd.GeoDataFrame(
        {"fault_id": [1], "dip_deg": [60.0], "dip_dir_deg": [dip_dir]},
        geometry=[LineString([p0, p1])],
        crs=CRS,
    )
    return faults, open_dem(str(path))


@pytest.mark.parametrize("px", [1.0, 2.5, 5.0])
def test_analytic_scarp_recovered_at_several_pixel_sizes(tmp_path, px):
    # kappa t 40 m^2 (diffusion length 6.3 m): within 10 % at 1, 2.5 and 5 m pixels, the p^2/12 interpolation
    # bias removed (derived in faultmap.scarps.diffusion.interpolation_kappa_t_m2)
    faults, dem = _erf_scene(tmp_path, px=px, kappa_t=40.0)
    res = measure_throw(faults, dem)
    st = res.stations
    ok = st["kappa_t_flag"] == "ok"
    assert ok.sum() >= 0.8 * (st["status"] == "ok").sum()
    assert np.median(st.loc[ok, "kappa_t_m2"]) == pytest.approx(40.0, rel=0.10)
    f = res.faults.iloc[0]
    assert f["kappa_t_flag"] == "measured"
    assert f["kappa_t_m2"] == pytest.approx(40.0, rel=0.10)
    assert 0 < f["kappa_t_err_m2"] < 0.2 * f["kappa_t_m2"]
    assert f["kappa_t_rank"] == 1


def test_unresolved_scarp_gives_an_upper_bound(tmp_path):
    # kappa t 0.5 m^2 on 5 m pixels: the diffusion length (0.7 m) is under half a pixel. The profile looks as
    # broad as the pixels make it, so the fit can only bound kappa t from above ("fresher than"); the truth
    # must lie under the bound.
    faults, dem = _erf_scene(tmp_path, px=5.0, kappa_t=0.5)
    res = measure_throw(faults, dem)
    f = res.faults.iloc[0]
    assert f["kappa_t_flag"] == "upper_bound"
    assert np.isnan(f["kappa_t_m2"])
    assert 0.5 <= f["kappa_t_bound_m2"] <= 10.0
    st = res.stations
    assert (st.loc[st["status"] == "ok", "kappa_t_flag"] == "unresolved").mean() > 0.8


def test_degradation_fit_switched_off(tmp_path):
    faults, dem = _erf_scene(tmp_path, px=5.0, kappa_t=40.0)
    res = measure_throw(faults, dem, degradation=False)
    assert res.stations["kappa_t_m2"].isna().all()
    assert (res.stations["kappa_t_flag"] == "not_fitted").all()
    assert res.faults.iloc[0]["kappa_t_flag"] == "none"


def test_digitising_direction_changes_nothing(tmp_path):
    faults, dem = _erf_scene(tmp_path, px=2.5, kappa_t=25.0)
    rev = faults.copy()
    rev["geometry"] = [LineString(list(faults.geometry.iloc[0].coords)[::-1])]
    a = measure_throw(faults, dem).faults.iloc[0]
    b = measure_throw(rev, dem).faults.iloc[0]
    assert a["kappa_t_m2"] == pytest.approx(b["kappa_t_m2"], rel=1e-6)
    assert a["kappa_t_n"] == b["kappa_t_n"]


def test_faults_degraded_by_different_kappa_t_rank_like_the_truth(tmp_path):
    # seven parallel faults of a synthetic scene, each scarp diffused with its own kappa t (the builder's erf
    # ramp), with 2 m of random relief, a regional slope and 5 cm noise, 4 m pixels: the per-fault estimates
    # rank like the truth (Spearman >= 0.8, scipy.stats.spearmanr) and their median ratio to the truth lies
    # within a factor of 2 (the acceptance rule)
    truth_kt = np.array([12.0, 300.0, 30.0, 150.0, 6.0, 70.0, 500.0])
    rng = np.random.default_rng(7)
    rows = []
    for i, kt in enumerate(truth_kt):
        x = 500.0 + 700.0 * i + rng.uniform(-50, 50)
        rows.append(
            {
                "geometry": LineString([(x, 500.0), (x + rng.uniform(-80, 80), 3500.0)]),
                "dip_deg": 60.0,
                "dip_dir_deg": 90.0,
                "max_throw_m": rng.uniform(8.0, 20.0),
                "kappa_t_m2": kt,
                "profile_shape": "plateau",
                "plateau_frac": 0.6,
                "fault_id": i + 1,
            }
        )
    gdf = gpd.GeoDataFrame(rows, crs=CRS)
    px = 4.0
    dem, transform, truth = build_dem(
        gdf,
        origin_xy=(0.0, 4000.0),
        pixel_size_m=px,
        shape=(1000, 1300),
        regional_slope_deg=2.0,
        regional_slope_azimuth_deg=100.0,
        relief_m=2.0,
        relief_wavelength_m=1500.0,
        seed=11,
    )
    assert np.allclose(truth.faults["kappa_t_m2"], truth_kt)
    dem = dem + rng.normal(0.0, 0.05, dem.shape).astype(np.float32)
    path = _write(tmp_path / "scene.tif", dem, px, y0=4000.0)
    faults = gdf[["fault_id", "dip_deg", "dip_dir_deg", "geometry"]]
    res = measure_throw(faults, open_dem(str(path)))
    est = res.faults.set_index("fault_id")["kappa_t_m2"].reindex(truth.faults["fault_id"]).to_numpy()
    assert np.isfinite(est).all()
    rho = spearmanr(est, truth_kt).statistic
    assert rho >= 0.8
    ratio = np.median(est / truth_kt)
    assert 0.5 <= ratio <= 2.0
    ranks = res.faults.set_index("fault_id")["kappa_t_rank"].reindex(truth.faults["fault_id"]).to_numpy()
    assert spearmanr(ranks, truth_kt).statistic >= 0.8


def test_throw_tool_writes_kappa_t_ages_and_the_figure(tmp_path):
    # through the tool: kappa t in both layers, morphologic ages with the given regional kappa (age = kappa t /
    # kappa, Hanks et al. 1984: 40 m^2 / 2 m^2/kyr = 20 ka), the figure and the records
    from faultmap.runner import run_tools

    faults, dem = _erf_scene(tmp_path, px=2.5, kappa_t=40.0)
    traces = tmp_path / "traces.gpkg"
    gpd.GeoDataFrame({"name": ["Velmo"]}, geometry=faults.geometry, crs=CRS).to_file(traces, layer="traces")
    res = run_tools(
        ["throw"],
        inputs={"faults": traces, "dem": dem.path},
        out=tmp_path / "out.gpkg",
        figures=tmp_path / "fig",
        params={"throw": {"kappa_m2_kyr": 2.0, "kappa_min_m2_kyr": 1.0, "kappa_max_m2_kyr": 4.0}},
        quiet=True,
    )
    f = gpd.read_file(tmp_path / "out.gpkg", layer="faults").iloc[0]
    st = gpd.read_file(tmp_path / "out.gpkg", layer="throw_stations")
    assert {"kappa_t_m2", "kappa_t_err_m2", "kappa_t_flag"} <= set(st.columns)
    assert f["kappa_t_flag"] == "measured" and f["kappa_t_m2"] == pytest.approx(40.0, rel=0.1)
    assert f["morph_age_ka"] == pytest.approx(20.0, rel=0.12)
    assert f["morph_age_p16_ka"] < f["morph_age_ka"] < f["morph_age_p84_ka"]
    assert f["morph_age_basis"].startswith("morphologic, regional kappa 2")
    assert (tmp_path / "fig" / "throw_degradation.png").exists()
    info = dict(zip(res.run_info["key"], res.run_info["value"], strict=True))
    assert "throw.kappa_m2_kyr_used" in info and "throw.kappa_t_faults" in info


def test_scarp_of_several_events(tmp_path):
    # a scarp grown in 3 equal events (oldest kappa t 90 m^2): the 3-event form finds the oldest surface's
    # kappa t; the one-event form reads a younger one
    faults, dem = _erf_scene(tmp_path, px=2.5, kappa_t=90.0, offset=6.0, events=3)
    f3 = measure_throw(faults, dem, n_events=3).faults.iloc[0]
    f1 = measure_throw(faults, dem, n_events=1).faults.iloc[0]
    assert f3["kappa_t_m2"] == pytest.approx(90.0, rel=0.1)
    assert f1["kappa_t_m2"] < 0.8 * 90.0
