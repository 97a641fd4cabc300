"""Tests of faultmap.throw.step (throw from the DEM) and faultmap.throw.stations.

Scenes are built by code: analytic scarps with numpy (a hanging wall moved by
(heave, -throw) across a planar fault) and physically built DEMs from
faultmap.synthetic.builder. Each numeric check names its source beside it.
"""

from __future__ import annotations

import math
import pickle

import geopandas as gpd
import numpy as np
import pytest
import rasterio
import shapely
from rasterio.transform import from_origin

from faultmap.errors import InputError, ParameterError
from faultmap.io.dem import open_dem
from faultmap.throw import (
    fit_profile_matrix,
    measure_throw,
    resolve_params,
    robust_line_fits,
    separation_from_throw,
    throw_from_separation,
)
from faultmap.throw.stations import crossing_limits, place_stations, side_signs, station_distances

CRS = "EPSG:32633"
PX = 10.0


# ---------------------------------------------------------------------------
# scene helpers
# ---------------------------------------------------------------------------
def write_tif(path, z, *, x0=0.0, y0=None, px=PX, nodata=-9999.0, crs=CRS):
    z = np.asarray(z, dtype="float32").copy()
    y0 = z.shape[0] * px if y0 is None else y0
    if nodata is not None:
        z[np.isnan(z)] = nodata
    with rasterio.open(
        path,
        "w",
        driver="GTiff",
        width=z.shape[1],
        height=z.shape[0],
        count=1,
        dtype="float32",
        crs=crs,
        transform=from_origin(x0, y0, px, px),
        nodata=nodata,
    ) as ds:
        ds.write(z, 1)
    return path


def analytic_scarp(nrows, ncols, *, x_fault, throw, dip, theta, px=PX, noise=0.0, seed=0, base=1000.0):
    """Planar surface sloping east at ``theta`` (deg, positive = descending east) cut by a
    north-striking normal fault dipping east; the hanging wall is moved by (heave, -throw).

    Footwall z = base - tan(theta) (x - xf); exposed fault plane between xf and xf + heave;
    hanging wall z = base - tan(theta) (x - heave - xf) - throw (construction of Caskey 1995).
    """
    x = (np.arange(ncols) + 0.5) * px
    h = throw / math.tan(math.radians(dip))
    t = math.tan(math.radians(theta))
    z = np.where(
        x < x_fault,
        base - t * (x - x_fault),
        np.where(
            x > x_fault + h,
            base - t * (x - h - x_fault) - throw,
            base - math.tan(math.radians(dip)) * (x - x_fault),
        ),
    )
    z = np.tile(z, (nrows, 1))
    if noise:
        z = z + np.random.default_rng(seed).normal(0.0, noise, z.shape)
    return z


def one_fault(x, y0, y1, *, dip=60.0, dip_dir=90.0, fid=1):
    return gpd.GeoDataFrame(
        {"fault_id": [fid], "dip_deg": [dip], "dip_dir_deg": [dip_dir]},
        geometry=[shapely.LineString([(x, y0), (x, y1)])],
        crs=CRS,
    )


# ---------------------------------------------------------------------------
# Caskey (1995) relation
# ---------------------------------------------------------------------------
def _section_separation(throw, dip, theta):
    """Vertical separation and heave by plane geometry (built here, not with faultmap's formula).

    Cross-section normal to strike: the ground surface z = -tan(theta) x descends towards the
    hanging wall (+x) at theta; the fault dips towards +x through the origin. The hanging wall
    slips down the fault until the origin's point is at depth -throw: its horizontal move (the
    heave) is where the fault line meets z = -throw (shapely). Footwall surface points, and the
    same points moved by (heave, -throw), are fitted with straight lines (numpy.polyfit); the
    vertical separation is the gap between the two lines at the fault (Caskey 1995, common practice).
    """
    far = 1e4
    fault = shapely.LineString([(0.0, 0.0), (far, -far * math.tan(math.radians(dip)))])
    heave = fault.intersection(shapely.LineString([(-far, -throw), (far, -throw)])).x
    x = np.linspace(-500.0, -50.0, 10)
    z = -math.tan(math.radians(theta)) * x
    fw = np.polyfit(x, z, 1)
    hw = np.polyfit(x + heave, z - throw, 1)
    return float(np.polyval(fw, 0.0) - np.polyval(hw, 0.0)), heave


def test_caskey_check_values():
    # Caskey (1995), J. Struct. Geol. 17: T 10 m, dip 60, theta 10 -> VS 8.9820 m; surface sloping
    # the other way -> 11.0180 m, both by the section geometry above (a different route).
    assert _section_separation(10.0, 60.0, 10.0)[0] == pytest.approx(8.9820, abs=5e-5)
    assert _section_separation(10.0, 60.0, -10.0)[0] == pytest.approx(11.0180, abs=5e-5)
    for th in (-20.0, -10.0, 0.0, 10.0, 25.0):
        for dip in (30.0, 60.0, 85.0):
            if dip <= th:
                continue
            ref, _ = _section_separation(10.0, dip, th)
            assert separation_from_throw(10.0, dip_deg=dip, surface_slope_deg=th) == pytest.approx(
                ref, rel=1e-9
            )
            # and the inverse recovers the throw from the geometric separation
            assert throw_from_separation(ref, dip_deg=dip, surface_slope_deg=th) == pytest.approx(
                10.0, rel=1e-9
            )


def test_finalise_applies_caskey_on_the_hanging_wall_side_and_leaves_its_input():
    # Caskey (1995) check values (derived): T 10 m, dip 60, surface 10 deg descending towards
    # the hanging wall -> VS 8.9820 m; the other way -> 11.0180 m. Raw separations are measured + side
    # down (slope_plus = dz/du towards the + side); a fault whose - side is the hanging wall flips both.
    import pandas as pd

    from faultmap.throw.profiles import RAW_COLUMNS
    from faultmap.throw.step import finalise_stations

    n = 4
    raw = pd.DataFrame(
        {"fault_id": [1, 1, 2, 2], "dist_m": [0.0, 10.0, 0.0, 10.0], "x": 0.0, "y": 0.0, "nx": 1.0, "ny": 0.0}
    )
    for k in RAW_COLUMNS:
        raw[k] = np.zeros(n)
    raw["geo_status"] = np.array(["", "", "", "nodata"], dtype=object)
    raw["poor"] = False
    t10 = np.tan(np.radians(10.0))
    # fault 1 (+ side down): surfaces descending towards + at 10 deg, then rising towards + at 10 deg
    raw.loc[0, ["vs_plus_m", "slope_plus"]] = [8.9820, -t10]
    raw.loc[1, ["vs_plus_m", "slope_plus"]] = [11.0180, t10]
    # fault 2 (- side down): the same first case seen from the other side
    raw.loc[2, ["vs_plus_m", "slope_plus"]] = [-8.9820, t10]
    raw.loc[3, ["vs_plus_m", "slope_plus"]] = [-8.9820, t10]
    before = raw.copy(deep=True)
    faults = pd.DataFrame({"fault_id": [1, 2], "dip_deg": [60.0, 60.0]})
    out = finalise_stations(raw, faults, {1: 1.0, 2: -1.0})
    assert out["throw_m"].to_numpy()[:3] == pytest.approx([10.0, 10.0, 10.0], abs=1e-3)
    assert out["heave_m"].to_numpy()[:3] == pytest.approx(_section_separation(10.0, 60.0, 10.0)[1], abs=1e-3)
    assert out["surface_slope_deg"].to_numpy()[:3] == pytest.approx([10.0, -10.0, 10.0], abs=1e-9)
    assert list(out["status"]) == ["ok", "ok", "ok", "nodata"] and np.isnan(out["throw_m"].iloc[3])
    assert out["profile_azimuth_deg"].to_numpy() == pytest.approx([90.0, 90.0, 270.0, 270.0])
    pd.testing.assert_frame_equal(raw, before)  # the input is never modified


# ---------------------------------------------------------------------------
# Robust line fits (analytic)
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("loss", ["tukey", "huber"])
def test_robust_fits_ignore_gullies(loss):
    # analytic: rows of z = 3 + 0.2 d plus noise, with 20 % of samples cut 5 m deep (gullies)
    rng = np.random.default_rng(4)
    d = np.arange(1, 41, dtype=float)
    Z = 3.0 + 0.2 * d + rng.normal(0, 0.05, (200, d.size))
    M = np.ones(Z.shape, dtype=bool)
    Zg = Z.copy()
    gully = rng.random(Z.shape) < 0.2
    Zg[gully] -= 5.0
    rob = robust_line_fits(Zg, M, d, loss=loss, tuning=4.685 if loss == "tukey" else 1.345, iterations=6)
    ols = robust_line_fits(Zg, M, d, loss="none")
    # Tukey's redescending weights reject the cuts outright; Huber's keep a little weight on them
    tol = 0.05 if loss == "tukey" else 0.25
    assert np.median(np.abs(rob["a"] - 3.0)) < tol
    assert np.median(np.abs(rob["b"] - 0.2)) < tol / 10
    # ordinary least squares is dragged down by about the mean cut (1 m): the robust fit is not
    assert np.median(ols["a"]) < 2.3
    # the standard error is honest without outliers: ~ sigma * sqrt(sum d^2 / (n S_dd))
    clean = robust_line_fits(Z, M, d, loss="tukey")
    se_theory = 0.05 * math.sqrt((d**2).sum() / (d.size * ((d - d.mean()) ** 2).sum()))
    assert np.median(np.sqrt(clean["var_a"])) == pytest.approx(se_theory, rel=0.3)


def test_scarp_zone_widens_for_a_degraded_scarp():
    # analytic: an error-function scarp (diffusive degradation; shape from memory, e.g. Avouac 1993)
    # of separation 20 m and width ~30 steps; the fit must reach beyond it and recover 20 m
    from scipy.special import erf

    K = 120
    d = np.arange(1, K + 1, dtype=float)
    s = 12.0
    # rows 0-2: footwall side (z = 10 + 10 erf(d/s)), rows 3-5: hanging-wall side (10 - 10 erf(d/s))
    Z = np.vstack([np.tile(10.0 + 10.0 * erf(d / s), (3, 1)), np.tile(10.0 - 10.0 * erf(d / s), (3, 1))])
    r = fit_profile_matrix(
        Z.astype("float32"), np.full(6, float(K)), w0_steps=3, far_min_steps=20, min_samples=10
    )
    assert np.allclose(r["vs"], 20.0, rtol=0.01)
    # the zone left out of the fits grew from 3 steps to past 1.5 s (erf(1.5) = 0.966)
    assert np.all(r["w"] > 1.5 * s)
    # with the scarp zone held at its 3-step minimum the separation is badly underestimated
    r0 = fit_profile_matrix(
        Z.astype("float32"),
        np.full(6, float(K)),
        w0_steps=3,
        far_min_steps=20,
        min_samples=10,
        scarp_iterations=0,
    )
    assert np.all(r0["vs"] < 17.0)


# ---------------------------------------------------------------------------
# Stations
# ---------------------------------------------------------------------------
def test_stations_symmetric_and_reversal_invariant():
    # geometry: stations centred on the trace; a reversed trace has the same stations
    line, d = station_distances([1000.0, 55.0], 100.0)
    assert np.allclose(d[line == 0], np.arange(10) * 100.0 + 50.0)
    assert np.allclose(d[line == 1], [27.5])
    g = np.array([shapely.LineString([(0, 0), (300, 400), (900, 500)])])
    r = shapely.reverse(g)
    s1 = place_stations(g, spacing_m=70.0, normal_window_m=100.0, side_sign=side_signs(g))
    s2 = place_stations(r, spacing_m=70.0, normal_window_m=100.0, side_sign=side_signs(r))
    L = g[0].length
    o = np.argsort(-s2.dist_m)
    assert np.allclose(s1.dist_m, L - s2.dist_m[o])
    assert np.allclose(np.c_[s1.x, s1.y, s1.nx, s1.ny], np.c_[s2.x, s2.y, s2.nx, s2.ny][o], atol=1e-9)


def test_normals_smoothed_over_vertex_noise():
    # geometry: a north-south trace digitised with 3 m vertex noise every 5 m; the boxcar-smoothed
    # normal stays within a few degrees of east-west, the raw segment normals swing by tens of degrees
    rng = np.random.default_rng(1)
    y = np.arange(0, 2000.0, 5.0)
    x = rng.normal(0, 3.0, y.size)
    g = np.array([shapely.LineString(np.c_[x, y])])
    st = place_stations(g, spacing_m=100.0, normal_window_m=200.0, side_sign=side_signs(g, [90.0]))
    ang = np.degrees(np.arctan2(st.ny, st.nx))  # 0 = east
    assert np.max(np.abs(ang)) < 5.0
    seg = np.degrees(np.arctan2(np.diff(x), np.diff(y)))
    assert np.max(np.abs(seg)) > 30.0


def test_crossing_limits():
    # geometry: a profile from (0,0) along +x crosses a trace at x = 120 and another at x = -80
    from faultmap.throw.stations import StationSet

    st = StationSet(
        np.array([0]), np.array([0.0]), np.array([0.0]), np.array([0.0]), np.array([1.0]), np.array([0.0])
    )
    lines = np.array(
        [
            shapely.LineString([(0, -50), (0, 50)]),  # own trace
            shapely.LineString([(120, -50), (120, 50)]),
            shapely.LineString([(-80, -50), (-80, 50)]),
            shapely.LineString([(500, -50), (500, 50)]),  # beyond the half-length
        ]
    )
    lm, lp = crossing_limits(
        st, 300.0, lines, line_ids=np.array([1, 2, 3, 4]), station_ids=np.array([1]), own_exclusion_m=5.0
    )
    assert lp[0] == pytest.approx(120.0)
    assert lm[0] == pytest.approx(80.0)


# ---------------------------------------------------------------------------
# Analytic scarps on a DEM
# ---------------------------------------------------------------------------
@pytest.mark.parametrize(
    "dip,theta,noise",
    [
        (60.0, 0.0, 0.0),
        (60.0, 10.0, 0.0),
        (60.0, -10.0, 0.0),
        (45.0, 5.0, 0.2),
        (75.0, -5.0, 0.2),
        (60.0, 10.0, 0.3),
    ],
)
def test_analytic_scarp_throw(tmp_path, dip, theta, noise):
    # analytic: hanging wall moved by (heave, -throw), Caskey (1995) construction; throw within 2 %
    T = 10.0
    z = analytic_scarp(160, 200, x_fault=1000.0, throw=T, dip=dip, theta=theta, noise=noise, seed=int(dip))
    dem = open_dem(write_tif(tmp_path / "d.tif", z))
    res = measure_throw(one_fault(1000.0, 200.0, 1400.0, dip=dip), dem)
    st = res.stations
    ok = st["status"] == "ok"
    assert ok.all()
    assert np.median(st.loc[ok, "throw_m"]) == pytest.approx(T, rel=0.02)
    # the maximum of a noisy constant profile is biased up by the noise it picks: it must lie within
    # 2 % or within 3 of its own standard errors of the truth
    mx, err = res.faults[["max_throw_m", "max_throw_err_m"]].iloc[0]
    assert abs(mx - T) <= max(0.02 * T, 3.0 * err)
    assert err < 0.05 * T
    # vertical separation (Caskey 1995) by the section geometry, not faultmap's formula
    vs_expected, heave_ref = _section_separation(T, dip, theta)
    assert np.median(st.loc[ok, "vert_sep_m"]) == pytest.approx(vs_expected, rel=0.02 if noise else 0.002)
    assert np.median(st.loc[ok, "surface_slope_deg"]) == pytest.approx(theta, abs=0.3)
    # heave of each station: the section's heave for that station's throw (it scales with the throw)
    assert np.allclose(st.loc[ok, "heave_m"], st.loc[ok, "throw_m"] * heave_ref / T)
    if noise:
        # a standard error describes the scatter: station throws scatter about as their errors say
        # (statistics; a factor of 2 either way allows for the few stations)
        ratio = np.std(st.loc[ok, "throw_m"]) / np.median(st.loc[ok, "throw_err_m"])
        assert 0.5 < ratio < 2.0


def test_caskey_values_recovered_from_dem(tmp_path):
    # Caskey (1995) check values (derived): T 10 m, dip 60, theta 10 -> VS 8.9820 m; other way 11.0180 m
    for theta, vs in ((10.0, 8.9820), (-10.0, 11.0180)):
        z = analytic_scarp(120, 200, x_fault=1000.0, throw=10.0, dip=60.0, theta=theta)
        dem = open_dem(write_tif(tmp_path / f"c{theta}.tif", z))
        st = measure_throw(one_fault(1000.0, 200.0, 1000.0), dem).stations
        assert np.median(st["vert_sep_m"]) == pytest.approx(vs, abs=0.01)
        assert np.median(st["throw_m"]) == pytest.approx(10.0, abs=0.01)


# ---------------------------------------------------------------------------
# Physically built DEM (faultmap.synthetic.builder)
# ---------------------------------------------------------------------------
@pytest.fixture(scope="module")
def synthetic_scene(tmp_path_factory):
    from faultmap.synthetic import build_dem, parallel_faults

    tmp = tmp_path_factory.mktemp("synth")
    f = parallel_faults(
        3,
        spacing_m=700.0,
        length_m=[3200.0, 2600.0, 2000.0],
        throw_m=[30.0, 15.0, 8.0],
        dip_dir_deg=110.0,
        centre_xy=(2500.0, 2500.0),
        profile_shape="elliptical",
        crs=CRS,
    )
    z, tr, truth = build_dem(
        f,
        origin_xy=(0.0, 5000.0),
        pixel_size_m=PX,
        shape=(500, 500),
        relief_m=2.0,
        relief_wavelength_m=2000.0,
        scarp_width_m=20.0,
        regional_slope_deg=3.0,
        regional_slope_azimuth_deg=100.0,
        seed=2,
    )
    z = z + np.random.default_rng(3).normal(0, 0.2, z.shape)
    tif = write_tif(tmp / "dem.tif", z, y0=5000.0)
    f["fault_id"] = [1, 2, 3]
    return f, open_dem(tif), truth


def test_throw_profiles_recovered_along_strike(synthetic_scene):
    # source: the known slips the DEM was built from (faultmap.synthetic.builder truth, elliptical profiles)
    f, dem, truth = synthetic_scene
    res = measure_throw(f, dem)
    st = res.stations
    for fid in (1, 2, 3):
        s = st.loc[(st["fault_id"] == fid) & (st["status"] == "ok")]
        true = truth.throw_at(fid, s["dist_m"].to_numpy())
        tmax = truth.faults.set_index("fault_id").loc[fid, "max_throw_m"]
        err = np.abs(s["throw_m"].to_numpy() - true)
        assert np.median(err) < 0.03 * tmax + 0.1
        row = res.faults.set_index("fault_id").loc[fid]
        assert row["max_throw_m"] == pytest.approx(tmax, rel=0.03)
        # the maximum of an elliptical profile is at mid-length
        assert row["max_throw_dist_m"] == pytest.approx(
            0.5 * row.geometry.length, abs=0.1 * row.geometry.length
        )
        # heave integral of an elliptical profile: (pi/4) L Tmax / tan(dip) (analytic), less the
        # tapered tip margins of the trapezoid integration (a few %)
        L = row.geometry.length
        hi = math.pi / 4 * L * tmax / math.tan(math.radians(60.0))
        assert row["heave_integral_m2"] == pytest.approx(hi, rel=0.06)
        assert row["heave_integral_m2"] < hi * 1.01
        assert row["max_throw_err_m"] > 0


def test_reversal_changes_nothing_and_dip_dir_from_dem(synthetic_scene):
    # geometry/conventions: digitising direction never matters; the down-thrown side is in the DEM
    f, dem, truth = synthetic_scene
    base = measure_throw(f, dem)
    g = f.copy()
    g.loc[1, "geometry"] = shapely.reverse(g.loc[1, "geometry"])
    rev = measure_throw(g, dem)
    cols = [
        "max_throw_m",
        "max_throw_err_m",
        "mean_throw_m",
        "heave_integral_m2",
        "n_stations_ok",
        "tip_gradient_max",
    ]
    assert np.allclose(base.faults[cols].to_numpy(float), rev.faults[cols].to_numpy(float), equal_nan=True)
    L = f.geometry.iloc[1].length
    assert rev.faults["max_throw_dist_m"].iloc[1] == pytest.approx(
        L - base.faults["max_throw_dist_m"].iloc[1]
    )
    a = base.stations.loc[base.stations["fault_id"] == 2].sort_values("dist_m")
    b = rev.stations.loc[rev.stations["fault_id"] == 2].sort_values("dist_m", ascending=False)
    assert np.allclose(a["dist_m"].to_numpy(), L - b["dist_m"].to_numpy())
    for c in (
        "throw_m",
        "throw_err_m",
        "vert_sep_m",
        "heave_m",
        "throw_smooth_m",
        "surface_slope_deg",
        "profile_azimuth_deg",
    ):
        assert np.allclose(a[c].to_numpy(float), b[c].to_numpy(float), equal_nan=True, atol=1e-9), c
    assert (a["status"].to_numpy() == b["status"].to_numpy()).all()
    # dropping dip_dir: inferred from the DEM, same throws
    h = f.copy()
    h["dip_dir_deg"] = np.nan
    inf = measure_throw(h, dem)
    assert (inf.faults["dip_dir_source"] == "dem").all()
    dd = inf.faults["dip_dir_deg"].to_numpy()
    assert np.all(np.abs((dd - 110.0 + 180.0) % 360.0 - 180.0) < 3.0)
    assert np.all(inf.faults["dip_dir_confidence"] > 0.9)
    assert np.allclose(inf.faults["max_throw_m"], base.faults["max_throw_m"], rtol=1e-9)
    # a wrong attribute is reported with the fault id
    w = f.copy()
    w.loc[0, "dip_dir_deg"] = 290.0
    bad = measure_throw(w, dem)
    assert any("fault 1:" in m and "dip_dir" in m for m in bad.warnings)


def test_batches_independent_of_memory_budget(synthetic_scene):
    # engineering: tiling the work (small memory budget -> many batches) gives the same numbers,
    # and the Dem handed to batches is picklable (it carries the path, not an open dataset)
    from faultmap.throw import plan_batches

    f, dem, _ = synthetic_scene
    pickle.loads(pickle.dumps(dem))
    from dataclasses import replace

    # a budget far below the 16 MB floor of resolve_params forces many tiles and split windows
    p_small = replace(resolve_params(dem.pixel_size, max_half_length_m=600.0), memory_budget_mb=1.0)
    p_big = resolve_params(dem.pixel_size, memory_budget_mb=512.0, max_half_length_m=600.0)
    assert len(plan_batches(f, dem, p_small)) > 1
    a = measure_throw(f, dem, params=p_small).stations
    b = measure_throw(f, dem, params=p_big).stations
    assert np.allclose(a["throw_m"].to_numpy(float), b["throw_m"].to_numpy(float), equal_nan=True, atol=1e-6)
    assert pickle.loads(pickle.dumps(plan_batches(f, dem, p_small)[0])).fault_ids


def test_close_parallel_faults_do_not_contaminate(tmp_path):
    # source: the known slips (faultmap.synthetic.builder); two faults 160 m apart, throws 25 and 6 m:
    # each profile stops at the neighbour's trace, so each fault keeps its own throw
    from faultmap.synthetic import build_dem, parallel_faults

    f = parallel_faults(
        2,
        spacing_m=160.0,
        length_m=2000.0,
        throw_m=[25.0, 6.0],
        dip_dir_deg=90.0,
        centre_xy=(1500.0, 1500.0),
        profile_shape="plateau",
        crs=CRS,
    )
    z, _, truth = build_dem(
        f, origin_xy=(0.0, 3000.0), pixel_size_m=PX, shape=(300, 300), scarp_width_m=20.0, seed=1
    )
    dem = open_dem(write_tif(tmp_path / "p.tif", z, y0=3000.0))
    f["fault_id"] = [1, 2]
    res = measure_throw(f, dem)
    st = res.stations
    for fid, T in ((1, 25.0), (2, 6.0)):
        s = st.loc[(st["fault_id"] == fid) & (st["status"] == "ok")]
        mid = s.loc[np.abs(s["dist_m"] - 1000.0) < 350.0]  # plateau part of the profile
        assert len(mid) >= 5
        assert np.median(mid["throw_m"]) == pytest.approx(T, rel=0.02)
    # without the neighbour's trace, fault 1's far hanging wall includes fault 2's step: the
    # truncation is what keeps them apart (the contaminated value differs by about 6 m)
    alone = measure_throw(f.iloc[[0]], dem, profile_half_length_m=600.0)
    s = alone.stations
    mid = s.loc[(np.abs(s["dist_m"] - 1000.0) < 350.0) & (s["status"] == "ok")]
    assert abs(np.median(mid["throw_m"]) - 25.0) > 2.0


# ---------------------------------------------------------------------------
# Voids, edges, bad input
# ---------------------------------------------------------------------------
def test_nodata_and_dem_edges_never_zero(tmp_path):
    # conventions: voids stay NaN (never 0); stations in voids are 'nodata', beyond the DEM 'outside'
    z = analytic_scarp(200, 200, x_fault=1000.0, throw=8.0, dip=60.0, theta=2.0)
    z[120:160, :] = np.nan  # a void band across the fault (rows = y 400..800 m)
    dem = open_dem(write_tif(tmp_path / "v.tif", z))  # nodata -9999 in the file
    f = one_fault(1000.0, 100.0, 2600.0)  # runs 600 m beyond the DEM's north edge (y 2000)
    res = measure_throw(f, dem)
    st = res.stations
    y = st.geometry.y
    assert (st.loc[(y > 450) & (y < 750), "status"] == "nodata").all()
    assert (st.loc[y > 2000, "status"] == "outside").all()
    ok = st["status"] == "ok"
    assert ok.sum() >= 8
    assert st.loc[~ok, "throw_m"].isna().all()
    assert np.allclose(st.loc[ok, "throw_m"], 8.0, rtol=0.02)
    assert (st["throw_m"].dropna().abs() > 1.0).all()  # no zero smuggled in from a void
    assert any("DEM edge" in w for w in res.warnings)


def test_fault_wholly_outside_and_no_overlap(tmp_path):
    z = analytic_scarp(100, 100, x_fault=500.0, throw=5.0, dip=60.0, theta=0.0)
    dem = open_dem(write_tif(tmp_path / "s.tif", z))
    inside = one_fault(500.0, 100.0, 900.0, fid=1)
    far = one_fault(50000.0, 100.0, 900.0, fid=2)
    res = measure_throw(
        gpd.GeoDataFrame(__import__("pandas").concat([inside, far], ignore_index=True), crs=CRS), dem
    )
    st = res.stations
    assert (st.loc[st["fault_id"] == 2, "status"] == "outside").all()
    assert np.isnan(res.faults.set_index("fault_id").loc[2, "max_throw_m"])
    with pytest.raises(InputError, match="overlaps the DEM"):
        measure_throw(far, dem)


def test_dem_in_feet_scales(tmp_path):
    # units: a DEM stored in feet read with metres_per_unit 0.3048 gives the same throws in metres
    # (flat surface, so the Caskey correction is 1 and the scaling is exact)
    z_m = analytic_scarp(100, 160, x_fault=800.0, throw=6.0, dip=60.0, theta=0.0)
    t_m = write_tif(tmp_path / "m.tif", z_m)
    t_ft = write_tif(tmp_path / "ft.tif", z_m / 0.3048)
    f = one_fault(800.0, 100.0, 900.0)
    a = measure_throw(f, open_dem(t_m)).stations
    b = measure_throw(f, open_dem(t_ft, metres_per_unit=0.3048)).stations
    c = measure_throw(f, open_dem(t_ft)).stations
    assert np.allclose(a["throw_m"], b["throw_m"], rtol=1e-5)
    assert np.allclose(c["throw_m"], a["throw_m"] / 0.3048, rtol=1e-5)


@pytest.mark.parametrize(
    "kw,match",
    [
        ({"station_spacing_m": 5.0}, "under 2 DEM pixels"),
        ({"station_spacing_m": -10.0}, "station_spacing_m"),
        ({"station_spacing_m": float("nan")}, "finite"),
        ({"station_spacing_m": 1e9}, "100000 pixels"),
        ({"profile_half_length_m": 50.0}, "profile_half_length_m"),
        ({"min_samples_per_side": 1}, "min_samples_per_side"),
        ({"robust_loss": "cauchy"}, "robust_loss"),
        ({"memory_budget_mb": 1.0}, "memory_budget_mb"),
        ({"normal_window_m": 0.5}, "normal_window_m"),
    ],
)
def test_absurd_parameters_raise(kw, match):
    with pytest.raises(ParameterError, match=match):
        resolve_params(PX, **kw)


def test_bad_faults_raise(tmp_path):
    z = analytic_scarp(50, 50, x_fault=250.0, throw=5.0, dip=60.0, theta=0.0)
    dem = open_dem(write_tif(tmp_path / "b.tif", z))
    f = one_fault(250.0, 50.0, 450.0)
    with pytest.raises(InputError, match="fault_id"):
        measure_throw(f.drop(columns="fault_id"), dem)
    g = f.copy()
    g["dip_deg"] = 120.0
    with pytest.raises(InputError, match="dip"):
        measure_throw(g, dem)
    from faultmap.errors import CRSError

    with pytest.raises(CRSError):
        measure_throw(f.set_crs("EPSG:32634", allow_override=True), dem)


def test_surface_as_steep_as_fault_is_poor_fit(tmp_path):
    # Caskey (1995): T = VS tan(dip) / (tan(dip) - tan(theta)) is ill-conditioned when the surface
    # descending towards the hanging wall is nearly as steep as the fault (dip 30, theta 25:
    # 1 - tan 25 / tan 30 = 0.19); such stations are flagged, never given a wild throw
    z = analytic_scarp(100, 200, x_fault=1000.0, throw=10.0, dip=30.0, theta=25.0)
    dem = open_dem(write_tif(tmp_path / "st.tif", z))
    st = measure_throw(one_fault(1000.0, 100.0, 900.0, dip=30.0), dem).stations
    assert (st["status"] == "poor_fit").all()
    assert st["throw_m"].isna().all()
    # the separation itself is still measured (Caskey 1995; by the section geometry)
    vs, _ = _section_separation(10.0, 30.0, 25.0)
    assert np.median(st["vert_sep_m"]) == pytest.approx(vs, rel=0.02)


def test_neighbour_too_close_is_truncated(tmp_path):
    # conventions: a side cut short by a crossing trace (here a parallel trace 60 m away) below
    # min_samples_per_side is 'truncated', never fitted across the neighbour
    z = analytic_scarp(100, 200, x_fault=1000.0, throw=10.0, dip=60.0, theta=0.0)
    dem = open_dem(write_tif(tmp_path / "tr.tif", z))
    f = gpd.GeoDataFrame(
        {"fault_id": [1, 2], "dip_deg": [60.0, 60.0], "dip_dir_deg": [90.0, 90.0]},
        geometry=[
            shapely.LineString([(1000, 100), (1000, 900)]),
            shapely.LineString([(1060, 100), (1060, 900)]),
        ],
        crs=CRS,
    )
    st = measure_throw(f, dem).stations
    assert (st["status"] == "truncated").all()
    assert st["throw_m"].isna().all()


# ---------------------------------------------------------------------------
# Linkage zones
# ---------------------------------------------------------------------------
def test_linkage_zone_between_collinear_segments(tmp_path):
    # construction: two collinear segments of one system with a 200 m gap; each elliptical
    # profile tapers to zero at its tips, so their summed throw has a minimum in the gap
    # (relay/linkage zone; Peacock & Sanderson 1991, from memory)
    from faultmap.synthetic import build_dem

    rows = [
        {
            "fault_id": 1,
            "geometry": shapely.LineString([(1500, 300), (1500, 1900)]),
            "dip_deg": 60.0,
            "dip_dir_deg": 90.0,
            "max_throw_m": 15.0,
        },
        {
            "fault_id": 2,
            "geometry": shapely.LineString([(1500, 2100), (1500, 3700)]),
            "dip_deg": 60.0,
            "dip_dir_deg": 90.0,
            "max_throw_m": 12.0,
        },
    ]
    f = gpd.GeoDataFrame(rows, crs=CRS)
    z, _, _ = build_dem(
        f,
        origin_xy=(0.0, 4000.0),
        pixel_size_m=PX,
        shape=(400, 300),
        scarp_width_m=20.0,
        hanging_wall_extent_m=400.0,
    )
    dem = open_dem(write_tif(tmp_path / "l.tif", z, y0=4000.0))
    f["system_id"] = 7
    res = measure_throw(f, dem)
    lz = res.linkage_zones
    assert len(lz) == 1
    z0 = lz.iloc[0]
    assert z0["system_id"] == 7 and z0["fault_ids"] == "1,2"
    assert 1900.0 <= z0.geometry.y <= 2100.0
    assert z0["throw_min_m"] < 1.0
    assert z0["deficit_m"] == pytest.approx(0.5 * (15.0 + 12.0), rel=0.1)
    assert bool(z0["significant"])


# ---------------------------------------------------------------------------
# Figures
# ---------------------------------------------------------------------------
def test_figures(synthetic_scene):
    from matplotlib.figure import Figure

    from faultmap.io.dem import read_overview
    from faultmap.throw.figures import hillshade, system_profiles, throw_map, throw_profiles

    f, dem, _ = synthetic_scene
    g = f.copy()
    g["system_id"] = [1, 1, 2]
    res = measure_throw(g, dem)
    arr, t = read_overview(dem, max_pixels=20_000)
    assert arr.size <= 20_000 * 1.1
    hs = hillshade(arr, t)
    assert np.nanmin(hs) >= 0 and np.nanmax(hs) <= 1
    # a plane facing the light is brighter than one facing away (Lambertian shading)
    ramp = np.tile(np.arange(50.0), (50, 1)) * 5.0  # rises to the east: faces west
    assert np.nanmean(hillshade(ramp, from_origin(0, 500, 10, 10), azimuth_deg=270)) > np.nanmean(
        hillshade(ramp, from_origin(0, 500, 10, 10), azimuth_deg=90)
    )
    for fig in (
        throw_map(res.faults, elevation=arr, transform=t),
        throw_profiles(res.faults, res.stations),
        system_profiles(res.faults, res.stations, res.linkage_zones),
    ):
        assert isinstance(fig, Figure)
        labels = [ax.get_xlabel() for ax in fig.axes if ax.get_xlabel()]
        assert labels and all("(m)" in lab for lab in labels)


# ---------------------------------------------------------------------------
# Tool wrapper, end to end
# ---------------------------------------------------------------------------
def test_throw_tool_end_to_end(tmp_path):
    # source: the known slips of a synthetic scene (faultmap.synthetic.builder); traces digitised in
    # mixed directions and without dip directions go through prepare and throw into a GeoPackage
    from faultmap.runner import run_tools
    from faultmap.synthetic import build_dem, parallel_faults

    f = parallel_faults(
        2,
        spacing_m=900.0,
        length_m=[2400.0, 1800.0],
        throw_m=[20.0, 10.0],
        dip_dir_deg=100.0,
        centre_xy=(1500.0, 1500.0),
        profile_shape="elliptical",
        crs=CRS,
    )
    z, _, truth = build_dem(
        f,
        origin_xy=(0.0, 3000.0),
        pixel_size_m=PX,
        shape=(300, 300),
        scarp_width_m=20.0,
        relief_m=1.0,
        seed=5,
    )
    tif = write_tif(tmp_path / "dem.tif", z, y0=3000.0)
    raw = gpd.GeoDataFrame(
        {"name": ["West", "East"]},
        geometry=[shapely.reverse(f.geometry.iloc[0]), f.geometry.iloc[1]],
        crs=CRS,
    )
    traces = tmp_path / "traces.gpkg"
    raw.to_file(traces, layer="traces")
    res = run_tools(
        ["throw"],
        inputs={"faults": traces, "dem": tif},
        out=tmp_path / "out.gpkg",
        figures=tmp_path / "fig",
        params={"throw": {"memory_budget_mb": 64}},
        quiet=True,
    )
    assert {"faults", "throw_stations", "linkage_zones", "run_info"} <= set(res.layers)
    faults = gpd.read_file(tmp_path / "out.gpkg", layer="faults").sort_values("name")
    st = gpd.read_file(tmp_path / "out.gpkg", layer="throw_stations")
    assert set(st.columns) >= {
        "fault_id",
        "dist_m",
        "throw_m",
        "throw_err_m",
        "vert_sep_m",
        "heave_m",
        "status",
        "geometry",
    }
    assert set(st["status"]) <= {"ok", "outside", "truncated", "nodata", "poor_fit"}
    by = faults.set_index("name")
    assert by.loc["West", "max_throw_m"] == pytest.approx(20.0, rel=0.03)
    assert by.loc["East", "max_throw_m"] == pytest.approx(10.0, rel=0.03)
    assert (faults["dip_dir_source"] == "dem").all()
    assert np.all(np.abs((faults["dip_dir_deg"] - 100.0 + 180.0) % 360.0 - 180.0) < 3.0)
    # right-hand rule kept: dip direction = strike + 90
    assert np.allclose((faults["strike_deg"] + 90.0) % 360.0, faults["dip_dir_deg"] % 360.0)
    info = dict(zip(res.run_info["key"], res.run_info["value"], strict=True))
    assert "throw.station_spacing_m_used" in info and "throw.profile_half_length_m_used" in info
    assert sorted(p.name for p in res.figures) == [
        "throw_degradation.png",
        "throw_map.png",
        "throw_profiles.png",
        "throw_systems.png",
    ]


def test_first_run_compile_is_announced(tmp_path, monkeypatch):
    # a fresh environment compiles the kernels (about 13 s) before the first batch: the tool says so
    # instead of sitting silent; once compiled, numba's on-disk cache holds them (common practice)
    from faultmap.numerics import jit
    from faultmap.runner import run_tools
    from faultmap.synthetic import build_dem, parallel_faults
    from faultmap.throw import step

    f = parallel_faults(
        1,
        spacing_m=900.0,
        length_m=[1600.0],
        throw_m=[10.0],
        dip_dir_deg=90.0,
        centre_xy=(1000.0, 1000.0),
        crs=CRS,
    )
    z, _, _ = build_dem(
        f, origin_xy=(0.0, 2000.0), pixel_size_m=PX, shape=(200, 200), scarp_width_m=20.0, seed=2
    )
    tif = write_tif(tmp_path / "dem.tif", z, y0=2000.0)
    f[["geometry"]].to_file(tmp_path / "traces.gpkg", layer="traces")
    said = []
    monkeypatch.setattr(step, "compiled_on_disk", lambda: False)
    run_tools(
        ["throw"],
        inputs={"faults": tmp_path / "traces.gpkg", "dem": tif},
        out=tmp_path / "o.gpkg",
        echo=said.append,
    )
    assert any("compiling faultmap's kernels" in m for m in said)
    monkeypatch.undo()
    if jit.ENABLED:
        assert step.compiled_on_disk() is True  # the run above used (and cached) every kernel


def test_window_reader_voids(tmp_path):
    # pitfalls.md: a DEM without a nodata tag still has voids (-32768 in int16 here); +-inf are voids;
    # a void never becomes a number, and metres_per_unit scales the rest
    from faultmap.io.dem import read_window_array

    z = np.arange(20 * 30, dtype="int16").reshape(20, 30)
    z[5, 7] = -32768
    with rasterio.open(
        tmp_path / "i.tif",
        "w",
        driver="GTiff",
        width=30,
        height=20,
        count=1,
        dtype="int16",
        crs=CRS,
        transform=from_origin(0, 200, 10, 10),
    ) as ds:
        ds.write(z, 1)
    dem = open_dem(tmp_path / "i.tif", metres_per_unit=0.5)
    arr, t, off = read_window_array(dem, (0, 0, 300, 200), pad_pixels=0)
    assert arr.dtype == np.float32 and arr.shape == (20, 30) and off == (0, 0)
    assert np.isnan(arr[5, 7]) and np.isnan(arr).sum() == 1
    assert arr[0, 1] == pytest.approx(0.5)
    f = np.ones((10, 10), dtype="float32")
    f[2, 2] = np.inf
    f[3, 3] = -9999.0
    dem2 = open_dem(write_tif(tmp_path / "f.tif", f, nodata=-9999.0))
    arr2, _, _ = read_window_array(dem2, dem2.bounds, pad_pixels=0)
    assert np.isnan(arr2[2, 2]) and np.isnan(arr2[3, 3]) and np.isnan(arr2).sum() == 2
    empty, _, _ = read_window_array(dem2, (1e6, 1e6, 1e6 + 10, 1e6 + 10))
    assert empty.size == 0


def test_no_measurable_station_still_completes(tmp_path):
    # data contract (DEVELOPERS.md): statuses say why a station has no throw; a run in which no
    # station can be measured (two linked traces 40 m apart) still returns every fault and station
    z = analytic_scarp(100, 200, x_fault=1000.0, throw=10.0, dip=60.0, theta=0.0)
    dem = open_dem(write_tif(tmp_path / "none.tif", z))
    f = gpd.GeoDataFrame(
        {"fault_id": [1, 2], "dip_deg": [60.0, 60.0], "dip_dir_deg": [90.0, 90.0], "system_id": [1, 1]},
        geometry=[
            shapely.LineString([(1000, 100), (1000, 900)]),
            shapely.LineString([(1040, 100), (1040, 900)]),
        ],
        crs=CRS,
    )
    res = measure_throw(f, dem)
    assert res.faults["max_throw_m"].isna().all()
    assert (res.stations["status"] == "truncated").all()
    assert len(res.linkage_zones) == 0
    assert any("no usable station" in w for w in res.warnings)


def test_profile_smoothing_recovers_shapes_and_is_chunk_invariant():
    # analytic: a parabolic throw profile is reproduced by the local quadratic (Cleveland 1979); a noisy
    # constant profile is smoothed (its scatter shrinks); chunks of whole faults change nothing
    from faultmap.throw.smoothing import _smooth_profiles

    rng = np.random.default_rng(7)
    g = np.repeat(np.arange(300), 24)
    s = (np.arange(g.size) % 24 + 0.5) / 24.0
    parab = 20.0 * (1.0 - (2.0 * s - 1.0) ** 2)
    se = np.full(g.size, 0.3)
    Ts, err, out, sig, coef = _smooth_profiles(g, parab, se, None)
    k = np.arange(g.size) % 24
    interior = (k >= 2) & (k <= 21)  # two stations on both sides: quadratic, exact for a parabola
    assert np.allclose(Ts[interior], parab[interior], atol=1e-6)
    # near the ends the fit is local-linear (boundary rule): close, not exact
    assert np.max(np.abs(Ts - parab)) < 0.05 * 20.0
    flat = 10.0 + rng.normal(0.0, 0.3, g.size)
    Tf, ef, _, _, _ = _smooth_profiles(g, flat, se, None)
    assert np.std(Tf - 10.0) < 0.7 * np.std(flat - 10.0)
    a = _smooth_profiles(g, flat, se, None, chunk=10**9)
    b = _smooth_profiles(g, flat, se, None, chunk=1000)
    for x, y in zip(a, b, strict=True):
        assert np.allclose(x, y, equal_nan=True)


def test_downthrown_side_is_the_weighted_sign_and_confidence_the_agreeing_fraction():
    # the definition (docstring of infer_downthrown_side; common practice), computed fault by fault in
    # plain Python: the side is the sign of the inverse-variance weighted mean separation, so a few
    # stations with large errors cannot outvote the rest; confidence = fraction of usable stations agreeing
    from faultmap.throw.step import infer_downthrown_side

    fid = np.array([5, 5, 5, 5, 9, 9, 9, 2, 2, 4])
    vs = np.array([1.0, 1.2, -30.0, np.nan, -2.0, -2.5, 3.0, 0.5, 0.7, 1.0])
    ok = np.array([True, True, True, True, True, True, True, True, True, False])
    err = np.array([0.2, 0.2, 50.0, 0.2, 0.3, 0.3, 0.3, 0.1, 0.1, 0.1])
    out = infer_downthrown_side(fid, vs, ok, err)
    assert list(out.index) == [2, 4, 5, 9]
    floor = 0.1 * np.median(err[ok & np.isfinite(vs)])
    for f in (2, 5, 9):
        m = (fid == f) & ok & np.isfinite(vs)
        w = 1.0 / np.maximum(err[m], floor) ** 2
        sign = int(np.sign(np.sum(w * vs[m])))
        assert out.loc[f, "down_sign"] == sign
        assert out.loc[f, "n"] == m.sum()
        assert out.loc[f, "confidence"] == pytest.approx(np.mean(np.sign(vs[m]) == sign))
    # fault 5: the -30 m station (error 50 m) is outvoted; 2 of 3 stations agree
    assert out.loc[5, "down_sign"] == 1 and out.loc[5, "confidence"] == pytest.approx(2 / 3)
    # fault 4 has no usable station: side unknown
    assert out.loc[4, "down_sign"] == 0 and out.loc[4, "n"] == 0 and out.loc[4, "confidence"] == 0.0


def test_grouped_integral_matches_numpy_trapezoid_in_any_order():
    # reference library: numpy.trapezoid of each group's profile, closed by zero at 0 and at L (the
    # tips); stations in any order give the same numbers, ties included (a station exactly at a tip)
    from faultmap.throw.fault_summaries import _grouped_trapz, _sorted_by_group

    rng = np.random.default_rng(11)
    n_g = 40
    L = rng.uniform(100.0, 900.0, n_g)
    counts = rng.integers(0, 9, n_g)
    g = np.repeat(np.arange(n_g), counts)
    d = np.concatenate([np.sort(rng.uniform(0.0, L[k], c)) for k, c in enumerate(counts)])
    d[np.searchsorted(g, 3)] = 0.0 if counts[3] else d[np.searchsorted(g, 3)]  # a station on a tip
    v = rng.uniform(0.0, 30.0, g.size)
    ref = np.array(
        [np.trapezoid(np.r_[0.0, v[g == k], 0.0], np.r_[0.0, d[g == k], L[k]]) for k in range(n_g)]
    )
    assert _sorted_by_group(g, d)
    assert np.allclose(_grouped_trapz(g, d, v, L, n_g), ref, rtol=1e-12, atol=1e-9)
    p = rng.permutation(g.size)
    assert not _sorted_by_group(g[p], d[p])
    assert np.allclose(_grouped_trapz(g[p], d[p], v[p], L, n_g), ref, rtol=1e-12, atol=1e-9)


# ---------------------------------------------------------------------------
# Building blocks checked against reference libraries and analytic properties
# ---------------------------------------------------------------------------
def test_bilinear_samples_match_map_coordinates():
    # reference library: scipy.ndimage.map_coordinates(order=1, mode="constant", cval=nan) is the
    # bilinear interpolation the profiles use (pixel centres at integer coordinates); voids and samples
    # beyond the window must come out NaN exactly where it says so
    from scipy import ndimage

    from faultmap.throw.profiles import sample_profiles

    rng = np.random.default_rng(11)
    arr = (800.0 + np.cumsum(rng.normal(0.0, 1.0, (120, 150)), axis=1)).astype("float32")
    arr[40:44, 60:70] = np.nan
    t = from_origin(1000.0, 9000.0, PX, PX)
    m, K, step = 300, 40, 0.9 * PX
    x = rng.uniform(1000.0, 1000.0 + 150 * PX, m)
    y = rng.uniform(9000.0 - 120 * PX, 9000.0, m)
    az = rng.uniform(0.0, 2.0 * math.pi, m)
    nx, ny = np.sin(az), np.cos(az)
    z = sample_profiles(arr, t, x, y, nx, ny, K, step)
    d = np.arange(1, K + 1) * step
    side = np.r_[-np.ones(m), np.ones(m)]
    px_ = np.r_[x, x][:, None] + side[:, None] * np.r_[nx, nx][:, None] * d
    py_ = np.r_[y, y][:, None] + side[:, None] * np.r_[ny, ny][:, None] * d
    cols = (px_ - t.c) / t.a - 0.5
    rows = (py_ - t.f) / t.e - 0.5
    ref = ndimage.map_coordinates(arr, [rows, cols], order=1, mode="constant", cval=np.nan, prefilter=False)
    assert (np.isnan(z) == np.isnan(ref)).all()
    assert np.isnan(ref).any() and np.isfinite(ref).sum() > 0.5 * ref.size
    # float32 rounding of elevations near 800 m (one unit in the last place is 6e-5 m)
    assert np.nanmax(np.abs(z - ref)) < 5e-4


def test_points_along_match_shapely():
    # reference library: shapely.line_interpolate_point, including repeated vertices and the end points
    from faultmap.throw.stations import points_along

    rng = np.random.default_rng(5)
    lines = np.array(
        [
            shapely.LineString(np.cumsum(rng.normal(0.0, 50.0, (int(rng.integers(2, 12)), 2)), axis=0))
            for _ in range(40)
        ]
        + [shapely.LineString([(0, 0), (0, 0), (10, 0), (10, 5)])]
    )
    li = rng.integers(0, len(lines), 2000)
    L = shapely.length(lines)[li]
    dist = rng.uniform(0.0, 1.0, li.size) * L
    dist[:50], dist[50:100] = 0.0, L[50:100]
    got = points_along(lines, li, dist)
    ref = shapely.get_coordinates(shapely.line_interpolate_point(lines[li], dist))
    assert np.allclose(got, ref, atol=1e-9)


def test_robust_line_fit_is_the_m_estimate():
    # analytic property (Holland & Welsch 1977): the returned line is a fixed point of the reweighting,
    # i.e. the weighted least-squares line with Tukey weights of its own residuals at its own scale
    rng = np.random.default_rng(9)
    d = np.arange(1, 31, dtype=float)
    Z = 2.0 - 0.1 * d + rng.normal(0.0, 0.3, (300, d.size))
    out = rng.random(Z.shape) < 0.15  # outliers of +-4 m (gullies, vegetation)
    Z[out] += rng.choice([-4.0, 4.0], size=int(out.sum()))
    M = np.ones(Z.shape, dtype=bool)
    r = robust_line_fits(Z, M, d, loss="tukey", tuning=4.685, iterations=3)
    u = (Z - (r["a"][:, None] + r["b"][:, None] * d)) / (4.685 * r["scale"][:, None])
    w = np.clip(1.0 - u * u, 0.0, None) ** 2
    sw, sd, sdd = w.sum(1), (w * d).sum(1), (w * d * d).sum(1)
    sz, sdz = (w * Z).sum(1), (w * d * Z).sum(1)
    b = (sw * sdz - sd * sz) / (sw * sdd - sd * sd)
    a = (sz - b * sd) / sw
    move = np.maximum(np.abs(a - r["a"] + (b - r["b"]) * d[0]), np.abs(a - r["a"] + (b - r["b"]) * d[-1]))
    # converged to 1 % of the residual scale (a few fits stop at the pass limit)
    assert np.mean(move < 0.02 * r["scale"]) > 0.97
    assert np.median(np.abs(r["b"] + 0.1)) < 0.01


def test_station_fits_do_not_depend_on_their_matrix():
    # engineering: a station's fit is the same whichever stations share its matrix (longer or shorter
    # profiles, another order), so results never depend on how the work was split into batches
    rng = np.random.default_rng(21)
    K, n = 60, 40
    d = np.arange(1, K + 1, dtype=float)
    jump = rng.uniform(2.0, 20.0, n)
    width = rng.uniform(2.0, 12.0, n)
    base = 0.05 * d + rng.normal(0.0, 0.2, (n, K))
    up = base + 0.5 * jump[:, None] * np.clip(1.0 - d / width[:, None], 0.0, 1.0)
    down = base - 0.5 * jump[:, None] * np.clip(1.0 - d / width[:, None], 0.0, 1.0)
    Z = np.vstack([up, down]).astype("float32")
    lim = np.full(2 * n, float(K))
    lim[n + 3] = 35.0  # a side cut short by a crossing
    kw = dict(w0_steps=3, far_min_steps=20, min_samples=10)
    whole = fit_profile_matrix(Z, lim, **kw)
    order = rng.permutation(n)[:15]
    sub = fit_profile_matrix(
        np.vstack([Z[:n][order], Z[n:][order]]), np.r_[lim[:n][order], lim[n:][order]], **kw
    )
    for k in ("a", "b", "var_a", "w", "scale"):
        assert np.array_equal(sub[k], np.r_[whole[k][:n][order], whole[k][n:][order]], equal_nan=True), k
