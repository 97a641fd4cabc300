"""Tests of faultmap.synthetic.builder: the physically built synthetic scenes.

Every check compares the DEM with analytic geometry of dip-slip on a planar
fault (heave = throw / tan(dip); vertical separation of a planar surface,
Caskey 1995) or with published relations (D = gamma L^n; continuous
power-law MLE of Clauset, Shalizi & Newman 2009).
"""

from __future__ import annotations

import math

import geopandas as gpd
import numpy as np
import pytest
import shapely
from shapely.geometry import LineString, MultiLineString, Polygon

from faultmap.errors import FaultmapError, GeometryError, InputError, ParameterError
from faultmap.synthetic.builder import build_dem
from faultmap.synthetic.grid import grid_spec, pixel_centres
from faultmap.synthetic.populations import fault_population, parallel_faults
from faultmap.synthetic.profile_shapes import throw_profile


# ---------------------------------------------------------------------------
# helpers
# ---------------------------------------------------------------------------
def _ns_fault(throw=10.0, dip=60.0, length=2000.0, shape="plateau", dip_dir=90.0, **extra):
    """One N-S trace through the origin, digitised northwards (dips east = right-hand rule)."""
    rec = {"geometry": LineString([(0.0, -length / 2), (0.0, length / 2)]), "dip_deg": dip,
           "dip_dir_deg": dip_dir, "max_throw_m": throw, "profile_shape": shape}
    rec.update(extra)
    return [rec]


def _vertical_separation(x, z, *, x_trace=0.0, inner=60.0, outer=600.0):
    """Fit lines to footwall (x < trace) and hanging-wall (x > trace) samples of one
    profile, project both to the trace and return footwall - hanging wall
    (scarp-profile practice, McCalpin 1987 / Avouac 1993, from memory)."""
    fw = (x < x_trace - inner) & (x > x_trace - outer)
    hw = (x > x_trace + inner) & (x < x_trace + outer)
    pf = np.polyfit(x[fw], z[fw].astype(float), 1)
    ph = np.polyfit(x[hw], z[hw].astype(float), 1)
    return float(np.polyval(pf, x_trace) - np.polyval(ph, x_trace))


GRID = grid_spec((-1500.0, -1500.0, 1500.0, 1500.0), pixel_size_m=10.0)


# ---------------------------------------------------------------------------
# throw profiles
# ---------------------------------------------------------------------------
def test_throw_profile_analytic_shapes():
    s = np.array([-0.2, 0.0, 0.25, 0.5, 0.75, 1.0, 1.3])
    # Ellipse x^2/a^2 + y^2/b^2 = 1 (geometry): at a quarter of the length, sqrt(1 - 0.5^2).
    ell = throw_profile(s, 10.0, shape="elliptical")
    np.testing.assert_allclose(ell, [0, 0, 10 * math.sqrt(0.75), 10, 10 * math.sqrt(0.75), 0, 0], atol=1e-12)
    tri = throw_profile(s, 10.0, shape="triangular")
    np.testing.assert_allclose(tri, [0, 0, 5, 10, 5, 0, 0], atol=1e-12)
    # Areas (geometry): triangle 1/2 * base * height, half-ellipse pi/4 * base * height.
    u = np.linspace(0, 1, 200001)
    assert np.trapezoid(throw_profile(u, 1.0, shape="triangular"), u) == pytest.approx(0.5, rel=1e-6)
    assert np.trapezoid(throw_profile(u, 1.0, shape="elliptical"), u) == pytest.approx(math.pi / 4, rel=1e-4)
    # Plateau: the flat top covers plateau_frac of the length.
    pl = throw_profile(u, 7.0, shape="plateau", plateau_frac=0.4)
    assert np.mean(pl == 7.0) == pytest.approx(0.4, abs=1e-3)
    # Skewed peak: maximum where asked, still zero at the tips.
    sk = throw_profile(u, 3.0, shape="triangular", peak_pos=0.7)
    assert u[np.argmax(sk)] == pytest.approx(0.7, abs=1e-5)
    assert sk[0] == 0 and sk[-1] == 0
    assert np.isnan(throw_profile(np.nan, 1.0))


@pytest.mark.parametrize("kw", [{"shape": "square"}, {"peak_pos": 0.0}, {"peak_pos": 1.2},
                                {"plateau_frac": 1.0}])
def test_throw_profile_rejects_bad_options(kw):
    with pytest.raises(ParameterError):
        throw_profile(0.5, 1.0, **kw)
    with pytest.raises(ParameterError):
        throw_profile(0.5, -1.0)


# ---------------------------------------------------------------------------
# grid convention
# ---------------------------------------------------------------------------
def test_pixel_centre_convention_on_a_plane():
    # A plane descending 5 deg towards azimuth 30 (no faults): the value at
    # (i, j) must be the plane at x0 + (j + 0.5) px, y0 - (i + 0.5) px.
    g = grid_spec((1000.0, 2000.0, 1600.0, 2400.0), pixel_size_m=20.0)
    dem, tr, _ = build_dem([], **g, base_elevation_m=100.0, regional_slope_deg=5.0,
                           regional_slope_azimuth_deg=30.0)
    assert dem.dtype == np.float32 and dem.shape == (20, 30)
    x0, y0 = g["origin_xy"]
    i, j = np.mgrid[0:20, 0:30]
    x = x0 + (j + 0.5) * 20.0
    y = y0 - (i + 0.5) * 20.0
    xc, yc = 1300.0, 2200.0  # grid centre
    t = math.tan(math.radians(5.0))
    expect = 100.0 - t * ((x - xc) * math.sin(math.radians(30)) + (y - yc) * math.cos(math.radians(30)))
    np.testing.assert_allclose(dem, expect, atol=1e-4)
    # rasterio's transform maps (col + 0.5, row + 0.5) to the same centres.
    xs, ys = tr @ (j + 0.5, i + 0.5)
    np.testing.assert_allclose(xs, x)
    np.testing.assert_allclose(ys, y)
    px, py = pixel_centres(tr, dem.shape)
    np.testing.assert_allclose(px, x[0])
    np.testing.assert_allclose(py, y[:, 0])


# ---------------------------------------------------------------------------
# vertical separation and heave against analytic geometry
# ---------------------------------------------------------------------------
@pytest.mark.parametrize(
    "slope_deg, slope_az, dip, expected",
    [
        (0.0, 0.0, 60.0, 10.0),        # flat surface: VS = T
        (10.0, 90.0, 60.0, 8.9820),    # slopes down the dip direction: Caskey (1995) check value
        (10.0, 270.0, 60.0, 11.0180),  # slopes the other way: Caskey (1995) check value
        (5.0, 90.0, 45.0, 10.0 - 10.0 * math.tan(math.radians(5.0))),  # T - h tan(theta), h = T
        (5.0, 0.0, 45.0, 10.0),        # slope along strike: no across-strike component
    ],
)
def test_vertical_separation_matches_caskey(slope_deg, slope_az, dip, expected):
    # Caskey (1995, J. Struct. Geol. 17): VS = T - h tan(theta) for a surface
    # sloping down the dip direction, T + h tan(theta) the other way (derived;
    # check T 10 m, dip 60, theta 10 -> VS 8.9820 m, other way 11.0180 m).
    dem, tr, truth = build_dem(_ns_fault(throw=10.0, dip=dip), **GRID, regional_slope_deg=slope_deg,
                               regional_slope_azimuth_deg=slope_az, scarp_width_m=40.0)
    x, y = pixel_centres(tr, dem.shape)
    for yy in (-300.0, 0.0, 250.0):  # far from the tips, on the plateau
        i = int(np.argmin(np.abs(y - yy)))
        assert _vertical_separation(x, dem[i]) == pytest.approx(expected, abs=2e-3)
    # The recorded truth is the throw, not the separation.
    assert truth.throw_at(1, 1000.0) == pytest.approx(10.0)


@pytest.mark.parametrize("dip", [45.0, 60.0, 75.0])
def test_heave_shifts_a_marker_ridge(dip):
    # A ridge parallel to the trace, 400 m into the hanging wall before
    # faulting, must end up 400 m + heave away, heave = T / tan(dip)
    # (geometry); a footwall ridge must not move.
    throw = 30.0
    heave = throw / math.tan(math.radians(dip))

    def prefault(x, y):
        return 200.0 + 5.0 * np.exp(-((x - 400.0) / 60.0) ** 2) + 5.0 * np.exp(-((x + 500.0) / 60.0) ** 2)

    g = grid_spec((-1000.0, -1000.0, 1000.0, 1000.0), pixel_size_m=5.0)
    dem, tr, truth = build_dem(_ns_fault(throw=throw, dip=dip), **g, scarp_width_m=30.0,
                               prefault_fn=prefault)
    x, y = pixel_centres(tr, dem.shape)
    row = dem[int(np.argmin(np.abs(y)))].astype(float)

    def crest(lo, hi):
        sel = np.flatnonzero((x > lo) & (x < hi))
        k = sel[np.argmax(row[sel])]
        a, b, c = row[k - 1], row[k], row[k + 1]
        return x[k] + 0.5 * (a - c) / (a - 2 * b + c) * (x[1] - x[0])  # parabolic peak

    assert crest(200.0, 800.0) - 400.0 == pytest.approx(heave, abs=0.2)
    assert crest(-800.0, -200.0) == pytest.approx(-500.0, abs=0.2)
    assert float(truth.faults["max_heave_m"].iloc[0]) == pytest.approx(heave, rel=1e-12)


def test_no_step_beyond_the_tips():
    # Elliptical profile, flat surface: beyond the tips nothing moves; between
    # them the hanging wall is lowered by exactly T(s) (throw_profile).
    dem, tr, truth = build_dem(_ns_fault(throw=20.0, shape="elliptical", length=2000.0), **GRID,
                               base_elevation_m=300.0, scarp_width_m=40.0)
    x, y = pixel_centres(tr, dem.shape)
    beyond = np.abs(y) > 1000.0 + 1e-6
    assert np.max(np.abs(dem[beyond] - 300.0)) < 1e-4
    j = int(np.argmin(np.abs(x - 300.0)))  # hanging-wall column, outside the scarp
    s = (y + 1000.0) / 2000.0
    np.testing.assert_allclose(dem[:, j], 300.0 - throw_profile(s, 20.0, shape="elliptical"), atol=1e-4)
    i = int(np.argmin(np.abs(y)))
    assert _vertical_separation(x, dem[i]) == pytest.approx(20.0, abs=1e-3)


def test_hanging_wall_smoothing_keeps_the_trace_throw_and_removes_tip_steps():
    # Smoothing a constant (plateau) is still that constant (analytic), so the
    # mid-fault separation stays T; beyond the tips neighbouring pixels differ
    # by little (no step), whereas the scarp itself is a large jump.
    kw = dict(**GRID, base_elevation_m=300.0, scarp_width_m=40.0, hanging_wall_smoothing=0.4)
    dem, tr, truth = build_dem(_ns_fault(throw=20.0, shape="plateau", plateau_frac=0.6), **kw)
    x, y = pixel_centres(tr, dem.shape)
    i = int(np.argmin(np.abs(y)))
    assert _vertical_separation(x, dem[i], outer=300.0) == pytest.approx(20.0, abs=0.05)
    assert np.max(np.abs(np.diff(dem[i]))) > 0.2 * 20.0
    for yy in (1050.0, 1200.0, -1100.0):
        k = int(np.argmin(np.abs(y - yy)))
        assert np.max(np.abs(np.diff(dem[k]))) < 0.02 * 20.0


def test_hanging_wall_extent_taper():
    # Full throw up to E from the trace, nothing beyond 2E (our raised-cosine taper).
    dem, tr, _ = build_dem(_ns_fault(throw=12.0), **GRID, base_elevation_m=50.0, scarp_width_m=20.0,
                           hanging_wall_extent_m=500.0)
    x, y = pixel_centres(tr, dem.shape)
    row = dem[int(np.argmin(np.abs(y)))]
    assert np.allclose(row[(x > 20) & (x <= 500)], 38.0, atol=1e-4)
    assert np.allclose(row[x >= 1000.0], 50.0, atol=1e-4)
    assert np.all(np.diff(row[(x > 500) & (x < 1000)]) >= -1e-5)  # monotonic recovery


def test_graben_of_two_opposite_faults():
    # Two faults dipping towards each other: the floor drops by T1 + T2, each
    # scarp shows its own throw, and each scarp is centred on its trace
    # (half the throw at the trace on a flat surface).
    faults = [
        {"geometry": LineString([(-500.0, -1200.0), (-500.0, 1200.0)]), "dip_deg": 60.0,
         "dip_dir_deg": 90.0, "max_throw_m": 15.0, "profile_shape": "plateau"},
        {"geometry": LineString([(500.0, 1200.0), (500.0, -1200.0)]), "dip_deg": 50.0,
         "dip_dir_deg": 270.0, "max_throw_m": 25.0, "profile_shape": "plateau"},
    ]
    dem, tr, truth = build_dem(faults, **GRID, base_elevation_m=400.0, scarp_width_m=40.0)
    x, y = pixel_centres(tr, dem.shape)
    row = dem[int(np.argmin(np.abs(y)))]
    assert row[np.argmin(np.abs(x - 0.0))] == pytest.approx(400.0 - 40.0, abs=1e-4)
    assert row[np.argmin(np.abs(x + 1200.0))] == pytest.approx(400.0 - 25.0, abs=1e-4)
    assert row[np.argmin(np.abs(x - 1200.0))] == pytest.approx(400.0 - 15.0, abs=1e-4)
    g2 = grid_spec((-1500.0, -1500.0, 1500.0, 1500.0), pixel_size_m=10.0, margin_m=5.0)  # trace on a centre
    dem2, tr2, _ = build_dem(faults, **g2, base_elevation_m=400.0, scarp_width_m=40.0)
    x2, y2 = pixel_centres(tr2, dem2.shape)
    row2 = dem2[int(np.argmin(np.abs(y2)))]
    assert row2[np.argmin(np.abs(x2 + 500.0))] == pytest.approx(400.0 - 25.0 - 7.5, abs=1e-4)
    assert row2[np.argmin(np.abs(x2 - 500.0))] == pytest.approx(400.0 - 15.0 - 12.5, abs=1e-4)
    # Order of the fault list does not change the scene.
    dem_rev, _, _ = build_dem(faults[::-1], **GRID, base_elevation_m=400.0, scarp_width_m=40.0)
    np.testing.assert_allclose(dem_rev, dem, atol=1e-4)


def test_curved_trace_throw_follows_arc_length():
    # Gently curved trace: on a flat surface the separation across the trace
    # at every station equals T(arc length / length) (Caskey 1995 with theta = 0).
    t = np.linspace(0.0, 1.0, 30)
    line = LineString(np.column_stack([150.0 * np.sin(np.pi * t), -1100.0 + 2200.0 * t]))
    faults = [{"geometry": line, "dip_deg": 55.0, "dip_dir_deg": 90.0, "max_throw_m": 18.0,
               "profile_shape": "triangular", "peak_pos": 0.35}]
    dem, tr, truth = build_dem(faults, **GRID, scarp_width_m=30.0)
    x, y = pixel_centres(tr, dem.shape)
    for yy in (-700.0, -300.0, 0.0, 400.0, 800.0):
        i = int(np.argmin(np.abs(y - yy)))
        pt_on = line.intersection(LineString([(-1500.0, y[i]), (1500.0, y[i])]))
        dist = line.project(pt_on)
        vs = _vertical_separation(x, dem[i], x_trace=pt_on.x, inner=40.0, outer=500.0)
        assert vs == pytest.approx(float(truth.throw_at(1, dist)), abs=5e-3)
    assert float(truth.faults["length_m"].iloc[0]) == pytest.approx(line.length)


def test_digitising_direction_does_not_matter():
    rec = _ns_fault(throw=9.0, shape="triangular", peak_pos=0.3)[0]
    rev = dict(rec, geometry=shapely.reverse(rec["geometry"]), peak_pos=0.7)
    kw = dict(**GRID, regional_slope_deg=2.0, regional_slope_azimuth_deg=120.0, relief_m=2.0,
              relief_wavelength_m=800.0, seed=7, scarp_width_m=30.0)
    dem_a, _, _ = build_dem([rec], **kw)
    dem_b, _, _ = build_dem([rev], **kw)
    np.testing.assert_allclose(dem_a, dem_b, atol=2e-4)


def test_multipart_trace_equals_joined_trace():
    a = LineString([(0, -1000), (0, 0)])
    b = LineString([(0, 0), (30, 1000)])
    base = {"dip_deg": 60.0, "dip_dir_deg": 90.0, "max_throw_m": 5.0}
    d1, _, t1 = build_dem([dict(base, geometry=MultiLineString([a, b]))], **GRID)
    d2, _, _ = build_dem([dict(base, geometry=LineString([(0, -1000), (0, 0), (30, 1000)]))], **GRID)
    np.testing.assert_array_equal(d1, d2)
    assert t1.faults.geometry.iloc[0].geom_type == "LineString"


def test_nodata_polygons_become_nan():
    poly = Polygon([(-400, -300), (200, -300), (200, 100), (-400, 100)])
    dem, tr, _ = build_dem(_ns_fault(), **GRID, nodata_polygons=[poly])
    x, y = pixel_centres(tr, dem.shape)
    xx, yy = np.meshgrid(x, y)
    inside = shapely.contains_xy(poly, xx, yy)
    assert inside.sum() == 60 * 40
    assert np.isnan(dem[inside]).all() and np.isfinite(dem[~inside]).all()


def test_relief_is_seeded_smooth_and_pixel_size_independent():
    kw = dict(base_elevation_m=0.0, relief_m=5.0, relief_wavelength_m=1500.0, seed=11)
    bounds = (0.0, 0.0, 9000.0, 9000.0)
    fine, tr_f, _ = build_dem([], **grid_spec(bounds, pixel_size_m=10.0), **kw)
    coarse, tr_c, _ = build_dem([], **grid_spec(bounds, pixel_size_m=30.0), **kw)
    again, _, _ = build_dem([], **grid_spec(bounds, pixel_size_m=10.0), **kw)
    other, _, _ = build_dem([], **grid_spec(bounds, pixel_size_m=10.0), **dict(kw, seed=12))
    np.testing.assert_array_equal(fine, again)  # determinism
    assert not np.allclose(fine, other)
    # Pixel centres 15, 45, ... m are shared by both grids: same elevations.
    np.testing.assert_allclose(fine[1::3, 1::3], coarse, atol=1e-4)
    assert 4.0 < float(np.std(fine)) < 6.0  # relief_m is the std over the whole lattice
    # Gaussian-filtered white noise with covariance s^2 exp(-r^2 / 4 sigma^2)
    # has rms slope s / (sigma sqrt 2) per axis (derived: -C''(0)); with
    # sigma = wavelength / (2 pi sqrt 2) that is 2 pi s / wavelength.
    rms_slope = float(np.sqrt(np.mean((np.diff(fine.astype(float), axis=1) / 10.0) ** 2)))
    assert rms_slope == pytest.approx(2 * math.pi * 5.0 / 1500.0, rel=0.2)


def test_truth_table_and_stations():
    faults = parallel_faults(3, spacing_m=800.0, length_m=[1500.0, 2000.0, 1200.0],
                             throw_m=[10.0, 20.0, 5.0], dip_deg=50.0, dip_dir_deg=120.0,
                             profile_shape="triangular", crs="EPSG:32753")
    dem, tr, truth = build_dem(faults, **GRID, scarp_width_m=30.0)
    tf = truth.faults
    assert truth.faults.crs.equals("EPSG:32753")
    np.testing.assert_allclose(tf["length_m"], [1500.0, 2000.0, 1200.0])
    # heave = T / tan(dip) (geometry)
    np.testing.assert_allclose(tf["max_heave_m"], np.array([10.0, 20.0, 5.0]) / math.tan(math.radians(50.0)))
    np.testing.assert_allclose(tf["strike_deg"], 30.0)
    st = truth.stations(spacing_m=100.0)
    for fid, grp in st.groupby("fault_id"):
        row = tf.set_index("fault_id").loc[fid]
        assert grp["dist_m"].iloc[0] == 0 and grp["dist_m"].iloc[-1] == pytest.approx(row["length_m"])
        assert np.diff(grp["dist_m"]).max() <= 100.0 + 1e-9
        assert grp["throw_m"].iloc[0] == 0 and grp["throw_m"].iloc[-1] == 0
        # triangular peak between stations: within half a spacing of gradient 2T/L
        assert grp["throw_m"].max() >= row["max_throw_m"] * (1 - 100.0 / row["length_m"]) - 1e-9
        assert grp["throw_m"].max() <= row["max_throw_m"] + 1e-9
        assert float(truth.throw_at(fid, row["max_throw_dist_m"])) == pytest.approx(row["max_throw_m"])
        pts = shapely.line_interpolate_point(row["geometry"], grp["dist_m"].to_numpy())
        assert np.allclose(shapely.distance(pts, np.asarray(grp.geometry)), 0.0)
    with pytest.raises(ParameterError):
        truth.throw_at(99, 1.0)


def test_parallel_faults_geometry():
    f = parallel_faults(4, spacing_m=1000.0, length_m=3000.0, throw_m=30.0, dip_dir_deg=45.0,
                        centre_xy=(100.0, 200.0), alternate=True)
    assert list(f["fault_id"]) == [1, 2, 3, 4]
    assert list(f["dip_dir_deg"]) == [45.0, 225.0, 45.0, 225.0]
    for r in f.itertuples():  # right-hand rule: the trace runs along dip_dir - 90
        (x0, y0), (x1, y1) = r.geometry.coords
        az = math.degrees(math.atan2(x1 - x0, y1 - y0)) % 360.0
        assert (r.dip_dir_deg - az) % 360.0 == pytest.approx(90.0)
    d = [f.geometry.iloc[k].distance(f.geometry.iloc[k + 1]) for k in range(3)]
    np.testing.assert_allclose(d, 1000.0)
    mid = shapely.union_all(f.geometry).centroid
    assert (mid.x, mid.y) == pytest.approx((100.0, 200.0))


@pytest.mark.parametrize("exponent", [1.0, 1.5])
def test_population_recovers_displacement_length_exponent(exponent):
    # D = gamma L^n (Cowie & Scholz 1992, from memory; Walsh et al. 2002: n
    # between 1 and 1.5): least squares in log-log space recovers n.
    gamma = 0.03 if exponent == 1.0 else 3e-4
    pop = fault_population(80, gamma=gamma, exponent=exponent, length_range_m=(500.0, 8000.0),
                           scatter_sigma=0.2, extent=(0.0, 0.0, 60000.0, 60000.0),
                           strike_deg=30.0, strike_scatter_deg=5.0, dip_deg=(50.0, 70.0),
                           min_spacing_m=300.0, seed=5)
    assert len(pop) == 80
    n_fit, log_gamma = np.polyfit(np.log10(pop["length_m"]), np.log10(pop["max_throw_m"]), 1)
    assert n_fit == pytest.approx(exponent, abs=0.08)
    assert 10 ** log_gamma == pytest.approx(gamma, rel=0.5)
    # No scatter: every fault exactly on the relation.
    exact = fault_population(20, gamma=gamma, exponent=exponent, extent=(0, 0, 60000, 60000), seed=1)
    np.testing.assert_allclose(exact["max_throw_m"], gamma * exact["length_m"] ** exponent)
    # Non-overlapping, inside the extent, deterministic, right-hand rule.
    g = np.asarray(pop.geometry)
    dmin = min(float(np.min(shapely.distance(g[k], np.delete(g, k)))) for k in range(len(g)))
    assert dmin >= 300.0
    assert shapely.box(0, 0, 60000, 60000).covers(shapely.union_all(g))
    again = fault_population(80, gamma=gamma, exponent=exponent, length_range_m=(500.0, 8000.0),
                             scatter_sigma=0.2, extent=(0.0, 0.0, 60000.0, 60000.0),
                             strike_deg=30.0, strike_scatter_deg=5.0, dip_deg=(50.0, 70.0),
                             min_spacing_m=300.0, seed=5)
    assert all(a.equals(b) for a, b in zip(pop.geometry, again.geometry, strict=False))
    np.testing.assert_array_equal(pop["max_throw_m"], again["max_throw_m"])
    assert pop["dip_deg"].between(50.0, 70.0).all()
    np.testing.assert_allclose((pop["dip_dir_deg"] - pop["strike_deg"]) % 360.0, 90.0)


def test_population_length_power_law_alpha():
    # Lengths drawn from p(L) ~ L^-alpha: the continuous MLE
    # alpha = 1 + n / sum ln(L / Lmin) (Clauset, Shalizi & Newman 2009)
    # recovers alpha within 3 standard errors (alpha - 1)/sqrt(n).
    pop = fault_population(400, length_range_m=(100.0, 1e6), length_alpha=2.5,
                           extent=(0.0, 0.0, 2e6, 2e6), min_spacing_m=10.0, seed=3)
    L = pop["length_m"].to_numpy()
    alpha = 1.0 + len(L) / np.sum(np.log(L / 100.0))
    assert abs(alpha - 2.5) < 3 * (2.5 - 1) / math.sqrt(len(L))


def test_build_dem_on_a_population_is_fast_and_finite():
    pop = fault_population(25, length_range_m=(2000.0, 12000.0), extent=(0, 0, 30000, 30000),
                           min_spacing_m=500.0, seed=2)
    dem, tr, truth = build_dem(pop, **grid_spec((0, 0, 30000, 30000), pixel_size_m=50.0),
                               relief_m=3.0, relief_wavelength_m=2000.0, hanging_wall_extent_m=3000.0,
                               hanging_wall_smoothing=0.3)
    assert dem.shape == (600, 600) and np.isfinite(dem).all()
    assert len(truth.faults) == 25


@pytest.mark.parametrize(
    "rec, err",
    [
        ({"geometry": LineString([(0, 0), (0, 1000), (0, 500)]), "dip_deg": 60, "dip_dir_deg": 90,
          "max_throw_m": 5}, GeometryError),  # folds back
        ({"geometry": LineString([(0, 0), (0, 1000)]), "dip_deg": 60, "dip_dir_deg": 10,
          "max_throw_m": 5}, ParameterError),  # dip direction along the trace
        ({"geometry": LineString([(0, 0), (0, 1000)]), "dip_deg": 0, "dip_dir_deg": 90,
          "max_throw_m": 5}, ParameterError),
        ({"geometry": LineString([(0, 0), (0, 1000)]), "dip_deg": 60, "dip_dir_deg": 90}, InputError),
        ({"geometry": MultiLineString([[(0, 0), (0, 100)], [(0, 300), (0, 400)]]), "dip_deg": 60,
          "dip_dir_deg": 90, "max_throw_m": 5}, GeometryError),
        ({"geometry": LineString([(0, 0), (0, 1000)]), "dip_deg": 60, "dip_dir_deg": 90,
          "max_throw_m": 5, "profile_shape": "box"}, ParameterError),
    ],
)
def test_bad_faults_raise_faultmap_errors(rec, err):
    with pytest.raises(err) as info:
        build_dem([rec], **GRID)
    assert isinstance(info.value, FaultmapError)


def test_bad_grid_parameters():
    with pytest.raises(ParameterError):
        build_dem([], origin_xy=(0, 0), pixel_size_m=0.0, shape=(10, 10))
    with pytest.raises(ParameterError):
        build_dem([], origin_xy=(0, 0), pixel_size_m=1.0, shape=(1, 10))
    with pytest.raises(ParameterError):
        build_dem([], **GRID, hanging_wall_smoothing=-1.0)
    with pytest.raises(ParameterError):
        fault_population(50, length_range_m=(5000, 9000), extent=(0, 0, 10000, 10000),
                         min_spacing_m=2000, max_attempts=20)


def test_geodataframe_input_matches_dicts():
    recs = _ns_fault(throw=6.0, shape="elliptical")
    gdf = gpd.GeoDataFrame(recs, geometry="geometry", crs="EPSG:32753")
    d1, _, t1 = build_dem(recs, **GRID, relief_m=1.0, seed=4)
    d2, _, t2 = build_dem(gdf, **GRID, relief_m=1.0, seed=4)
    np.testing.assert_array_equal(d1, d2)
    assert t2.faults.crs.equals("EPSG:32753") and t1.faults.crs is None
