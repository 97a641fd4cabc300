"""Tests of the transect modules of faultmap.extension (layout, geometry, measure, batches) and faultmap.extension.subresolution.

Synthetic scenes are built here from straight (or arc) LineStrings with
analytic throw profiles; every numeric check names its source.
"""

from __future__ import annotations

import warnings

import geopandas as gpd
import numpy as np
import pytest
import shapely

from faultmap.errors import CRSError, FaultmapWarning, InputError, ParameterError
from faultmap.extension.subresolution import corrected_sum, fraction_below_detection
from faultmap.extension.throw_profiles import throw_at
from faultmap.extension.transect_layout import auto_transects, mean_strike_deg
from faultmap.extension.transect_measure import measure_transects
from faultmap.throw.detection import detection_throw_m

CRS = "EPSG:32636"


# ----------------------------------------------------------------------------- scene builders
def make_scene(lines, *, throw_fn, dip=60.0, dip_dir=None, dip_source="attribute", err=0.0, n_st=41, crs=CRS):
    """Faults + stations; throw_fn(fault_index, dist_m, length_m) gives the analytic throw."""
    n = len(lines)
    dip = np.broadcast_to(np.asarray(dip, dtype=float), (n,))
    if dip_dir is None:
        dip_dir = np.full(n, np.nan)
    faults = gpd.GeoDataFrame(
        {
            "fault_id": np.arange(1, n + 1),
            "dip_deg": dip,
            "dip_source": dip_source,
            "dip_dir_deg": np.asarray(dip_dir, dtype=float),
            "length_m": [ln.length for ln in lines],
            "system_id": np.arange(1, n + 1),
        },
        geometry=lines,
        crs=crs,
    )
    rows = []
    for k, ln in enumerate(lines):
        d = np.linspace(0.0, ln.length, n_st)
        t = throw_fn(k, d, ln.length)
        for dd, tt in zip(d, t, strict=True):
            rows.append(
                dict(
                    fault_id=k + 1,
                    dist_m=dd,
                    throw_m=tt,
                    throw_err_m=err,
                    status="ok",
                    heave_m=tt / np.tan(np.radians(dip[k])),
                    geometry=ln.interpolate(dd),
                )
            )
    stations = gpd.GeoDataFrame(rows, geometry="geometry", crs=crs)
    mx = stations.groupby("fault_id")["throw_m"].max().to_numpy()
    faults["max_throw_m"] = mx
    faults["max_throw_err_m"] = err
    return faults, stations


def const_throw(value):
    return lambda k, d, L: np.full_like(d, float(value))


def transects_gdf(lines, crs=CRS):
    return gpd.GeoDataFrame({"transect_id": np.arange(1, len(lines) + 1)}, geometry=lines, crs=crs)


def parallel_scene(n=5, S=2000.0, h=50.0, dip=60.0, Lf=10000.0):
    """n N-S faults dipping east at spacing S with constant heave h (stations reach both tips)."""
    T = h * np.tan(np.radians(dip))
    lines = [shapely.LineString([(S / 2 + k * S, 0.0), (S / 2 + k * S, Lf)]) for k in range(n)]
    return make_scene(lines, throw_fn=const_throw(T), dip=dip, dip_dir=np.full(n, 90.0))


def rotate_gdf(gdf, theta_deg):
    """Rotate geometries counter-clockwise about the origin; azimuth columns turn by -theta."""
    th = np.radians(theta_deg)
    R = np.array([[np.cos(th), -np.sin(th)], [np.sin(th), np.cos(th)]])
    out = gdf.copy()
    out.geometry = shapely.transform(np.asarray(gdf.geometry.values, dtype=object), lambda c: c @ R.T)
    if "dip_dir_deg" in out.columns:
        out["dip_dir_deg"] = (out["dip_dir_deg"] - theta_deg) % 360.0
    return out


def quiet(fn, *a, **k):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FaultmapWarning)
        return fn(*a, **k)


# ------------------------------------------------------------ check values (docs/methods/extension.md)
def _cross_section_heave(throw_m, dip_deg):
    """Heave by a different route: a vertical cross-section built with shapely. The fault is a
    line through the origin dipping east at dip_deg; the footwall cutoff of a horizon is the
    origin; the hanging-wall cutoff is where the fault meets the horizon dropped by the throw;
    the heave is the horizontal distance between the two cutoffs."""
    far = 1e4
    fault = shapely.LineString([(0.0, 0.0), (far, -far * np.tan(np.radians(dip_deg)))])
    horizon_hw = shapely.LineString([(-far, -throw_m), (far, -throw_m)])
    cut = fault.intersection(horizon_hw)
    return cut.x - 0.0


def test_heave_is_throw_over_tan_dip():
    # Heave from a shapely cross-section (geometry of a planar fault): T 100 m, dip 60 -> 57.735 m.
    faults, stations = make_scene(
        [shapely.LineString([(0, -5000), (0, 5000)])], throw_fn=const_throw(100.0), dip=60.0, dip_dir=[90.0]
    )
    tr = transects_gdf([shapely.LineString([(-1000, 0), (1000, 0)])])
    t, c = measure_transects(faults, stations, tr, zone="full", n_draws=50)
    ref = _cross_section_heave(100.0, 60.0)
    assert ref == pytest.approx(57.735, abs=1e-3)
    assert c["heave_m"].iloc[0] == pytest.approx(ref, rel=1e-9)
    assert c["heave_along_m"].iloc[0] == pytest.approx(ref, rel=1e-9)  # dip direction along the transect
    assert t["sum_heave_m"].iloc[0] == pytest.approx(ref, rel=1e-9)


def test_extension_and_beta_check_value():
    # e = (L1 - L0) / L0, L0 = L1 - sum(h) (definition): L1 100 km, sum(h) 5 km -> e 0.05263, beta 1.05263.
    # Ten parallel faults, heave 500 m each, one 100-km transect with zone='full'.
    dip = 60.0
    T = 500.0 * np.tan(np.radians(dip))
    lines = [shapely.LineString([(5000 + 10000 * k, -5000), (5000 + 10000 * k, 5000)]) for k in range(10)]
    faults, stations = make_scene(lines, throw_fn=const_throw(T), dip=dip, dip_dir=np.full(10, 90.0))
    tr = transects_gdf([shapely.LineString([(0, 0), (100000, 0)])])
    t, _ = measure_transects(faults, stations, tr, zone="full", n_draws=50)
    row = t.iloc[0]
    assert row["zone_length_m"] == pytest.approx(100000.0)
    assert row["sum_heave_along_m"] == pytest.approx(5000.0, rel=1e-12)
    assert row["extension"] == pytest.approx(0.05263, abs=5e-6)
    assert row["beta"] == pytest.approx(1.05263, abs=5e-6)
    assert row["restored_length_m"] == pytest.approx(95000.0)


@pytest.mark.parametrize(("c", "expected"), [(0.7, 0.2314), (1.2, 0.8558), (1.0, 0.6227)])
def test_subresolution_fraction_check_values(c, expected):
    # Marrett & Allmendinger (1992, Geology 20); formula derived from N(>=D) = a D^-C (formula
    # from memory/derived): D_min 0.01, D_t 20, D_max 2000 -> 0.2314 (C 0.7), 0.8558 (C 1.2), 0.6227 (C 1).
    f = fraction_below_detection(20.0, d_min=0.01, d_max=2000.0, exponent_c=c)
    assert float(f) == pytest.approx(expected, abs=5e-5)
    # different route: the share of the summed displacement carried by faults below D_t, with the
    # density n(D) = C D^(-C-1) of N(>=D) = a D^-C integrated numerically (scipy.integrate.quad,
    # in log D for accuracy over five decades)
    from scipy.integrate import quad

    def moment(lo, hi):
        return quad(lambda u: np.exp(u) * c * np.exp(u) ** (-c - 1.0) * np.exp(u), np.log(lo), np.log(hi))[0]

    assert float(f) == pytest.approx(moment(0.01, 20.0) / moment(0.01, 2000.0), rel=1e-8)


def test_subresolution_fraction_is_continuous_at_c_equal_one():
    # The C = 1 (logarithmic) form is the limit of the general form (analytic limit).
    f1 = fraction_below_detection(20.0, d_min=0.01, d_max=2000.0, exponent_c=1.0)
    f_near = fraction_below_detection(20.0, d_min=0.01, d_max=2000.0, exponent_c=1.0 + 1e-6)
    assert float(f_near) == pytest.approx(float(f1), abs=1e-5)
    with pytest.raises(ParameterError):
        fraction_below_detection(1.0, d_min=0.0, d_max=10.0, exponent_c=1.0)


def test_detection_throw_rule_and_corrected_sum():
    # Our rule (documented): k_sigma x median error, else pixel size. corrected = measured / (1 - f)
    # (Marrett & Allmendinger 1992: resolved faults carry 1 - f of the total).
    assert detection_throw_m(throw_err_m=[0.5, 1.0, 1.5, np.nan], k_sigma=2.0) == pytest.approx(2.0)
    assert detection_throw_m(throw_err_m=[np.nan], pixel_size_m=5.0) == pytest.approx(5.0)
    assert float(corrected_sum(60.0, 0.4)) == pytest.approx(100.0)


def test_subresolution_correction_is_separate_from_measured():
    faults, stations = parallel_scene()
    tr = transects_gdf([shapely.LineString([(-500, 5000), (10500, 5000)])])
    plain, _ = measure_transects(faults, stations, tr, n_draws=50)
    corr, _ = measure_transects(
        faults, stations, tr, n_draws=50, detection_throw_m=20.0, exponent_c=1.0, d_min_m=0.01, d_max_m=2000.0
    )
    # The measured value never changes when the correction is switched on.
    assert corr["extension"].iloc[0] == plain["extension"].iloc[0]
    assert np.isnan(plain["extension_corrected"].iloc[0])
    f = 0.6227  # Marrett & Allmendinger (1992) check value, C = 1 (derived)
    assert corr["fraction_below_detection"].iloc[0] == pytest.approx(f, abs=5e-5)
    s_corr = corr["sum_heave_along_m"].iloc[0] / (1.0 - corr["fraction_below_detection"].iloc[0])
    L1 = corr["zone_length_m"].iloc[0]
    assert corr["extension_corrected"].iloc[0] == pytest.approx(s_corr / (L1 - s_corr), rel=1e-12)


# ----------------------------------------------------------------------------- projection and rake
def test_projected_heave_cosine():
    # Fault striking 30 deg (dip direction 120), crossed by an E-W transect. Different route: two
    # material points on the transect, one on each wall; the hanging-wall point moves by the heave
    # along the dip direction (dip slip); the lengthening of the transect is the change of their
    # along-transect distance.
    ln = shapely.LineString(
        [
            (-5000 * np.sin(np.radians(30)), -5000 * np.cos(np.radians(30))),
            (5000 * np.sin(np.radians(30)), 5000 * np.cos(np.radians(30))),
        ]
    )
    faults, stations = make_scene([ln], throw_fn=const_throw(100.0), dip=60.0, dip_dir=[120.0])
    h = _cross_section_heave(100.0, 60.0)
    fw, hw = np.array([-3000.0, 0.0]), np.array([3000.0, 0.0])  # the fault dips towards +E here
    hw_moved = hw + h * np.array([np.sin(np.radians(120.0)), np.cos(np.radians(120.0))])
    t_unit = np.array([1.0, 0.0])
    lengthening = np.dot(hw_moved - fw, t_unit) - np.dot(hw - fw, t_unit)
    for line in ([(-3000, 0), (3000, 0)], [(3000, 0), (-3000, 0)]):  # transect direction does not matter
        t, c = measure_transects(
            faults, stations, transects_gdf([shapely.LineString(line)]), zone="full", n_draws=50
        )
        assert c["heave_along_m"].iloc[0] == pytest.approx(lengthening, rel=1e-9)
        assert c["projection_cos"].iloc[0] == pytest.approx(lengthening / h, rel=1e-9)


def test_rake_adds_strike_slip_lengthening():
    # Slip vector from the rake (Aki & Richards 1980 convention, from memory: u = cos(r) s - sin(r) d_down,
    # r = -90 pure normal slip). Independent 3-D construction, then projection on the transect.
    dip, rake, T, dd, taz = 60.0, -60.0, 100.0, 90.0, 60.0
    faults, stations = make_scene(
        [shapely.LineString([(0, -5000), (0, 5000)])], throw_fn=const_throw(T), dip=dip, dip_dir=[dd]
    )
    a = np.radians(taz)
    tr = transects_gdf(
        [shapely.LineString([(-2000 * np.sin(a), -2000 * np.cos(a)), (2000 * np.sin(a), 2000 * np.cos(a))])]
    )
    t, c = measure_transects(faults, stations, tr, rake_deg=rake, zone="full", n_draws=50)
    r, de = np.radians(rake), np.radians(dip)
    m = np.array([np.sin(np.radians(dd)), np.cos(np.radians(dd)), 0.0])
    s = np.array([np.sin(np.radians(dd - 90)), np.cos(np.radians(dd - 90)), 0.0])
    d_down = np.cos(de) * m + np.array([0, 0, -np.sin(de)])
    u = np.cos(r) * s - np.sin(r) * d_down  # unit slip of the hanging wall
    U = T / -u[2]  # scale so that the throw is T
    tvec = np.array([np.sin(a), np.cos(a), 0.0])
    expected = U * np.dot(u, tvec) * np.sign(np.dot(m, tvec))
    assert c["heave_along_m"].iloc[0] == pytest.approx(expected, rel=1e-9)
    assert c["heave_m"].iloc[0] == pytest.approx(T / np.tan(de), rel=1e-9)  # heave itself unchanged
    with pytest.raises(ParameterError):
        measure_transects(faults, stations, tr, rake_deg=0.0, n_draws=50)


# ----------------------------------------------------------------------------- crossings and profiles
def test_curved_trace_crossed_twice_counts_twice():
    # Arc fault (half circle, radius 3 km) crossed twice by a straight transect; throw profile
    # T(d) = 80 sin(pi d / L) sampled at 201 stations: interpolation error < 80 (pi/200)^2 / 8 (analytic bound).
    R = 3000.0
    ang = np.linspace(0, np.pi, 361)
    arc = shapely.LineString(np.c_[R * np.cos(ang), R * np.sin(ang)])
    faults, stations = make_scene([arc], throw_fn=lambda k, d, L: 80.0 * np.sin(np.pi * d / L), n_st=201)
    tr = transects_gdf([shapely.LineString([(-4000, 1500), (4000, 1500)])])
    t, c = quiet(measure_transects, faults, stations, tr, n_draws=50)
    assert t["n_crossings"].iloc[0] == 2 and t["n_faults"].iloc[0] == 1
    # crossings at y = 1500 -> angles 30 and 150 deg -> d = R * (pi/6) and R * (5 pi/6)
    d_exp = np.sort(np.array([R * np.pi / 6, R * 5 * np.pi / 6]))
    assert np.sort(c["dist_along_fault_m"].to_numpy()) == pytest.approx(d_exp, rel=1e-4)
    t_exp = 80.0 * np.sin(np.pi * d_exp / arc.length)
    assert np.sort(c["throw_m"].to_numpy()) == pytest.approx(
        np.sort(t_exp), abs=80.0 * (np.pi / 200) ** 2 / 8 + 1e-6
    )
    # unknown dip direction: the local trace normal is used (arc normal is radial, 30 deg from east)
    assert (c["dip_dir_source"] == "trace_normal").all()
    assert c["projection_cos"].to_numpy() == pytest.approx(np.full(2, np.cos(np.radians(30.0))), abs=1e-4)


def test_throw_tapers_to_zero_at_tips_and_fallback_profile():
    # Stations only on the middle of the trace: throw falls linearly to 0 at the tips (common practice).
    ln = shapely.LineString([(0, 0), (0, 10000)])
    faults, _ = make_scene([ln], throw_fn=const_throw(10.0))
    d = np.array([4000.0, 5000.0, 6000.0])
    stations = gpd.GeoDataFrame(
        dict(
            fault_id=1,
            dist_m=d,
            throw_m=[20.0, 30.0, 20.0],
            throw_err_m=1.0,
            status="ok",
            geometry=[ln.interpolate(x) for x in d],
        ),
        crs=CRS,
    )
    thr, err, src = throw_at(faults, stations, np.zeros(4, int), np.array([0.0, 2000.0, 4500.0, 10000.0]))
    assert thr == pytest.approx([0.0, 10.0, 25.0, 0.0])  # linear interpolation (analytic)
    assert (src == "stations").all()
    # no ok station: fallback two-sided parabola from max_throw_m, peak at max_throw_dist_m (our choice)
    bad = stations.assign(status="poor_fit")
    faults = faults.assign(max_throw_m=40.0, max_throw_err_m=4.0, max_throw_dist_m=4000.0)
    thr, err, src = throw_at(faults, bad, np.zeros(3, int), np.array([2000.0, 4000.0, 7000.0]))
    assert thr == pytest.approx([40 * (1 - 0.25), 40.0, 40 * (1 - 0.25)])
    assert err == pytest.approx([3.0, 4.0, 3.0])
    assert (src == "max_throw_profile").all()


def test_stations_without_dist_column_use_geometry():
    ln = shapely.LineString([(0, 0), (0, 10000)])
    faults, stations = make_scene([ln], throw_fn=lambda k, d, L: 0.01 * d * (L - d) / L)
    thr1, _, _ = throw_at(faults, stations, np.zeros(3, int), np.array([1000.0, 5000.0, 8000.0]))
    thr2, _, _ = throw_at(
        faults, stations.drop(columns="dist_m"), np.zeros(3, int), np.array([1000.0, 5000.0, 8000.0])
    )
    assert thr2 == pytest.approx(thr1, rel=1e-9)


# ----------------------------------------------------------------------------- invariances
def _oblique_scene():
    rng = np.random.default_rng(3)
    lines, dds = [], []
    for k in range(6):
        x0 = 1500.0 * k + rng.uniform(-200, 200)
        strike = 10.0 + rng.uniform(-15, 15)
        a = np.radians(strike)
        half = rng.uniform(4000, 7000)
        lines.append(
            shapely.LineString(
                [(x0 - half * np.sin(a), -half * np.cos(a)), (x0 + half * np.sin(a), half * np.cos(a))]
            )
        )
        dds.append((strike + 90.0 + (180.0 if k % 2 else 0.0)) % 360.0)
    faults, stations = make_scene(
        lines,
        throw_fn=lambda k, d, L: (30.0 + 5 * k) * np.sin(np.pi * d / L),
        dip=[55, 60, 65, 50, 60, 70],
        dip_dir=dds,
        dip_source=["attribute", "default"] * 3,
        err=2.0,
    )
    return faults, stations


def test_rotation_leaves_transect_sums_unchanged():
    faults, stations = _oblique_scene()
    tr = transects_gdf([shapely.LineString([(-3000, y), (11000, y)]) for y in (-2000.0, 0.0, 2500.0)])
    t0, c0 = quiet(measure_transects, faults, stations, tr, n_draws=300, seed=7)
    for theta in (37.0, 140.0):
        t1, c1 = quiet(
            measure_transects,
            rotate_gdf(faults, theta),
            rotate_gdf(stations, theta),
            rotate_gdf(tr, theta),
            n_draws=300,
            seed=7,
        )
        for col in ("n_crossings", "sum_heave_m", "sum_heave_along_m", "extension", "beta", "zone_length_m"):
            assert t1[col].to_numpy() == pytest.approx(t0[col].to_numpy(), rel=1e-9), col
        for col in ("sum_heave_err_m", "extension_p16", "extension_p84"):
            assert t1[col].to_numpy() == pytest.approx(t0[col].to_numpy(), rel=1e-6), col


def test_reversing_digitising_direction_changes_nothing():
    faults, stations = _oblique_scene()
    tr = transects_gdf([shapely.LineString([(-3000, y), (11000, y)]) for y in (-2000.0, 0.0, 2500.0)])
    t0, _ = quiet(measure_transects, faults, stations, tr, n_draws=300, seed=1)
    rev = faults.copy()
    rev.geometry = shapely.reverse(np.asarray(faults.geometry.values, dtype=object))
    L = dict(zip(faults["fault_id"], faults.geometry.length, strict=True))
    st = stations.copy()
    st["dist_m"] = st["fault_id"].map(L) - st["dist_m"]
    t1, _ = quiet(measure_transects, rev, st, tr, n_draws=300, seed=1)
    for col in ("sum_heave_m", "sum_heave_along_m", "extension", "sum_heave_err_m", "extension_p84"):
        assert t1[col].to_numpy() == pytest.approx(t0[col].to_numpy(), rel=1e-9), col
    # reversed transects: same nominal values
    trr = tr.copy()
    trr.geometry = shapely.reverse(np.asarray(tr.geometry.values, dtype=object))
    t2, _ = quiet(measure_transects, faults, stations, trr, n_draws=300, seed=1)
    for col in ("sum_heave_m", "sum_heave_along_m", "extension", "beta"):
        assert t2[col].to_numpy() == pytest.approx(t0[col].to_numpy(), rel=1e-9), col


# ----------------------------------------------------------------------------- Monte Carlo
def test_monte_carlo_reproducible_and_shrinks_with_dip_range():
    faults, stations = _oblique_scene()
    faults = faults.assign(dip_source="default")
    stations = stations.assign(throw_err_m=0.0)  # only the dip varies
    tr = transects_gdf([shapely.LineString([(-3000, 0.0), (11000, 0.0)])])
    a, _ = measure_transects(faults, stations, tr, n_draws=400, seed=11)
    b, _ = measure_transects(faults, stations, tr, n_draws=400, seed=11)
    c, _ = measure_transects(faults, stations, tr, n_draws=400, seed=12)
    assert a["sum_heave_err_m"].iloc[0] == b["sum_heave_err_m"].iloc[0]
    assert a["extension_p84"].iloc[0] == b["extension_p84"].iloc[0]
    assert a["sum_heave_err_m"].iloc[0] != c["sum_heave_err_m"].iloc[0]
    errs = [
        measure_transects(faults, stations, tr, n_draws=400, seed=11, dip_range_default_deg=r)[0][
            "sum_heave_err_m"
        ].iloc[0]
        for r in (15.0, 10.0, 5.0, 0.0)
    ]
    assert errs[0] > errs[1] > errs[2] > errs[3]
    assert errs[3] == pytest.approx(0.0, abs=1e-9)
    # With dips only, the 16-84 range brackets the nominal sum (dip-uniform draws around the nominal dip).
    assert a["extension_p16"].iloc[0] < a["extension"].iloc[0] < a["extension_p84"].iloc[0]


def test_monte_carlo_throw_error_spread_matches_analytic():
    # One crossing, dip fixed (range 0): sum heave ~ N(h, (sigma_T / tan dip)^2) -> half 16-84 range
    # = sigma_T / tan(dip) (normal distribution, analytic).
    faults, stations = make_scene(
        [shapely.LineString([(0, -5000), (0, 5000)])],
        throw_fn=const_throw(100.0),
        dip=60.0,
        dip_dir=[90.0],
        err=5.0,
    )
    tr = transects_gdf([shapely.LineString([(-1000, 0), (1000, 0)])])
    t, _ = measure_transects(
        faults, stations, tr, n_draws=20000, seed=0, dip_range_attribute_deg=0.0, zone="full"
    )
    assert t["sum_heave_err_m"].iloc[0] == pytest.approx(5.0 / np.tan(np.radians(60.0)), rel=0.03)


# ----------------------------------------------------------------------------- zone and auto transects
def test_parallel_faults_transect_route():
    # Parallel faults, spacing S, heave h: default margin S/2 gives L1 = n S, so
    # sum / L1 = h / S (present-length strain, comparable with Kostrov) and e = h / (S - h) (analytic).
    S, h = 2000.0, 50.0
    faults, stations = parallel_scene(S=S, h=h)
    tr = transects_gdf([shapely.LineString([(-2000, 5000), (12000, 5000)])])
    t, _ = measure_transects(faults, stations, tr, n_draws=50)
    assert t["margin_m"].iloc[0] == pytest.approx(S / 2)
    assert t["zone_length_m"].iloc[0] == pytest.approx(5 * S)
    assert t["extension_present"].iloc[0] == pytest.approx(h / S, rel=1e-12)
    assert t["extension"].iloc[0] == pytest.approx(h / (S - h), rel=1e-12)
    full, _ = measure_transects(faults, stations, tr, zone="full", n_draws=50)
    assert full["zone_length_m"].iloc[0] == pytest.approx(14000.0)
    assert full["extension"].iloc[0] == pytest.approx(250.0 / (14000.0 - 250.0), rel=1e-12)


def test_mean_strike_is_axial_and_auto_transects_cross_everything():
    # Axial mean (doubled angles; Mardia & Jupp 2000, common practice): equal-length strikes 10 and 30 deg,
    # one digitised backwards (190 deg) -> 20 deg; transects perpendicular, azimuth 110.
    a1, a2 = np.radians(10.0), np.radians(190.0 + 20.0)
    lines = [
        shapely.LineString([(0, 0), (8000 * np.sin(a1), 8000 * np.cos(a1))]),
        shapely.LineString([(3000, 0), (3000 + 8000 * np.sin(a2), 8000 * np.cos(a2))]),
    ]
    faults, stations = make_scene(lines, throw_fn=lambda k, d, L: 30 * np.sin(np.pi * d / L))
    assert mean_strike_deg(faults) == pytest.approx(20.0, abs=1e-9)
    tr = auto_transects(faults, spacing_m=1000.0)
    assert tr["azimuth_deg"].to_numpy() == pytest.approx(110.0)
    t, _ = quiet(measure_transects, faults, stations, tr, n_draws=50)
    assert not t["ends_inside"].any()
    assert (t["n_crossings"] >= 1).all()
    with pytest.raises(ParameterError):
        auto_transects(faults, spacing_m=-5.0)


def test_ends_inside_flag():
    faults, stations = parallel_scene()
    # ends at x = 6000, between fault 3 (x 5000) and 4 (x 7000): faults continue beyond its end
    tr = transects_gdf(
        [
            shapely.LineString([(-1000, 5000), (6000, 5000)]),
            shapely.LineString([(-1000, 4000), (11000, 4000)]),
        ]
    )
    with pytest.warns(FaultmapWarning, match="ends inside"):
        t, _ = measure_transects(faults, stations, tr, n_draws=50)
    assert t["ends_inside"].tolist() == [True, False]
    assert t["ends_inside_side"].iloc[0] == "end"


# ----------------------------------------------------------------------------- bad input
def test_other_crs_raises_unless_reprojected():
    faults, stations = parallel_scene()
    tr = transects_gdf([shapely.LineString([(-2000, 5000), (12000, 5000)])])
    other = tr.to_crs("EPSG:32637")
    with pytest.raises(CRSError):
        measure_transects(faults, stations, other, n_draws=50)
    t_ok, _ = measure_transects(faults, stations, tr, n_draws=50)
    t_rp, _ = measure_transects(faults, stations, other, n_draws=50, reproject=True)
    assert t_rp["sum_heave_m"].iloc[0] == pytest.approx(t_ok["sum_heave_m"].iloc[0], rel=1e-9)
    assert t_rp["n_crossings"].iloc[0] == 5


def test_transect_crossing_no_fault_warns_and_zero_sums():
    faults, stations = parallel_scene()
    tr = transects_gdf(
        [
            shapely.LineString([(-2000, 20000), (12000, 20000)]),
            shapely.LineString([(-2000, 5000), (12000, 5000)]),
        ]
    )
    with pytest.warns(FaultmapWarning, match="crosses no fault"):
        t, c = measure_transects(faults, stations, tr, n_draws=50)
    row = t.iloc[0]
    assert row["status"] == "no_crossing" and row["n_crossings"] == 0
    assert row["sum_heave_m"] == 0.0 and row["extension"] == 0.0 and row["beta"] == 1.0
    assert t.iloc[1]["status"] == "ok"
    assert (c["transect_id"] == 2).all()


def test_zero_length_transect_is_named():
    faults, stations = parallel_scene()
    tr = gpd.GeoDataFrame(
        {"transect_id": [4, 9]},
        geometry=[shapely.LineString([(0, 0), (100, 0)]), shapely.LineString([(50, 50), (50, 50)])],
        crs=CRS,
    )
    with pytest.raises(InputError, match="transect 9"):
        measure_transects(faults, stations, tr, n_draws=50)


def test_bad_parameters():
    faults, stations = parallel_scene()
    tr = transects_gdf([shapely.LineString([(-2000, 5000), (12000, 5000)])])
    with pytest.raises(ParameterError):
        measure_transects(faults, stations, tr, zone="everything")
    with pytest.raises(ParameterError):
        measure_transects(faults, stations, tr, n_draws=3)
    with pytest.raises(ParameterError):
        measure_transects(faults, stations, tr, margin_m=-1.0)


# ----------------------------------------------------------------------------- tool wrapper (hand-built context)
def _ctx(faults, stations, transects=None):
    from pyproj import CRS as _CRS

    from faultmap.runner import RunContext

    ctx = RunContext(crs=_CRS.from_user_input(faults.crs), transects=transects)
    ctx.layers["faults"] = faults
    ctx.layers["throw_stations"] = stations
    ctx.current_tool = "transect"
    return ctx


def test_tool_wrapper_auto_and_user_transects():
    from faultmap.extension.transect_tool import TOOL

    faults, stations = _oblique_scene()  # throw errors 2 m
    ctx = _ctx(faults, stations)
    quiet(TOOL.run, ctx, TOOL.resolve_params({"n_draws": 100}))
    t = ctx.layers["transects"]
    assert len(t) >= 1 and len(ctx.layers["transect_crossings"]) == t["n_crossings"].sum()
    # detection threshold: 2 x median throw error (our documented rule) -> 4 m
    assert ctx.records["transect.detection_throw_m_used"] == pytest.approx(4.0)
    assert ctx.records["transect.exponent_c_used"] == 1.0  # common practice default, scaling not run
    assert np.isfinite(t["extension_corrected"]).all()
    assert (t["extension_corrected"] > t["extension"]).all()  # more faults -> more extension
    # a scaling result with alpha = 3.2 for max throws -> along-line C = alpha - 2 (derived, see tool docstring)
    from types import SimpleNamespace

    user = transects_gdf([shapely.LineString([(-3000, 0), (11000, 0)])]).to_crs(
        "EPSG:32637"
    )  # runner/wrapper reproject
    ctx2 = _ctx(faults, stations, transects=user)
    # same layout as the scaling tool leaves: {"dl": ..., "sizes": SizeResult with fits[...].alpha}
    sizes = SimpleNamespace(fits={"max_throw_m": SimpleNamespace(alpha=3.2, fitted=True)})
    ctx2.results["scaling"] = {"dl": SimpleNamespace(fits={}), "sizes": sizes}
    quiet(TOOL.run, ctx2, TOOL.resolve_params({"n_draws": 100}))
    assert ctx2.records["transect.exponent_c_used"] == pytest.approx(1.2)
    assert ctx2.records["transect.transect_source"] == "user"
    assert ctx2.layers["transects"]["n_crossings"].iloc[0] == 6


def test_fraction_check_value_above_half():
    # Marrett & Allmendinger (1992) relation (derived): with C = 1.2, D_min 0.01, D_t 20, D_max 2000 the
    # fraction below detection is 0.8558 (check value of the derived formula) - more than half: the tool must warn.
    from faultmap.extension.subresolution import fraction_below_detection

    f = fraction_below_detection(20.0, d_min=0.01, d_max=2000.0, exponent_c=1.2)
    assert abs(float(f) - 0.8558) < 5e-4


def test_a_faults_own_dip_range_is_drawn():
    """A database dip range (dip_min_deg 40, dip_max_deg 80) replaces dip +- dip_range in the Monte Carlo.

    With the throw exact, heave = T / tan(dip) falls with the dip, so the 16th and 84th percentiles of the
    heave sit at the 84th and 16th of the dip: 73.6 and 46.4 deg for U(40, 80) (inverse CDF of the uniform
    law, analytic); sum_heave_err_m is half their spread.
    """
    faults, stations = make_scene(
        [shapely.LineString([(0, -5000), (0, 5000)])], throw_fn=const_throw(100.0), dip=60.0, dip_dir=[90.0]
    )
    tr = transects_gdf([shapely.LineString([(-1000, 0), (1000, 0)])])
    ranged = faults.assign(dip_min_deg=40.0, dip_max_deg=80.0)
    t, _ = measure_transects(ranged, stations, tr, zone="full", n_draws=20_000, seed=5)
    want = 0.5 * 100.0 * (1.0 / np.tan(np.radians(46.4)) - 1.0 / np.tan(np.radians(73.6)))
    assert t["sum_heave_err_m"].iloc[0] == pytest.approx(want, rel=0.02)
    # without the range: the attribute dip's +- 5 deg (dip_range_attribute_deg default), much narrower
    plain, _ = measure_transects(faults, stations, tr, zone="full", n_draws=20_000, seed=5)
    want_plain = 0.5 * 100.0 * (1.0 / np.tan(np.radians(56.6)) - 1.0 / np.tan(np.radians(63.4)))
    assert plain["sum_heave_err_m"].iloc[0] == pytest.approx(want_plain, rel=0.02)
