"""Tests of faultmap.population.scaling (displacement-length fits) and its D-L figure.

Every numeric check names its outside source beside it. Synthetic fault
populations are generated here with seeded numpy; no file is read.
"""

from __future__ import annotations

import matplotlib
import numpy as np
import pytest
import shapely
from scipy import stats

matplotlib.use("Agg")

import geopandas as gpd  # noqa: E402

from faultmap.errors import InputError, ParameterError  # noqa: E402
from faultmap.population.dl_units import displacement_population
from faultmap.population.linefit import fit_line, ols_line, rma_line, york_fit
from faultmap.population.outliers import scaling_residuals
from faultmap.population.references import compare_to_references
from faultmap.population.scaling import analyse_scaling

# Pearson (1901) data with York (1966) weights: the standard test of
# errors-in-variables lines (York et al. 2004, Am. J. Phys. 72, 367).
PY_X = np.array([0.0, 0.9, 1.8, 2.6, 3.3, 4.4, 5.2, 6.1, 6.5, 7.4])
PY_Y = np.array([5.9, 5.4, 4.4, 4.6, 3.5, 3.7, 2.8, 2.8, 2.4, 1.5])
PY_WX = np.array([1000, 1000, 500, 800, 200, 80, 60, 20, 1.8, 1.0])
PY_WY = np.array([1, 1.8, 4, 8, 20, 20, 70, 70, 100, 500.0])


def _faults(length_m, throw_m, *, err_rel=0.1, censored=None, system_id=None, xy=None, dip_deg=60.0):
    """Synthetic faults table: vertical N-S traces at the given start points."""
    n = len(length_m)
    rng = np.random.default_rng(99)
    if xy is None:
        xy = np.column_stack([rng.uniform(0, 1e6, n), rng.uniform(0, 1e6, n)])
    start = np.asarray(xy, dtype=float)
    end = start + np.column_stack([np.zeros(n), length_m])
    geoms = shapely.linestrings(np.stack([start, end], axis=1))
    return gpd.GeoDataFrame(
        {
            "fault_id": np.arange(1, n + 1),
            "length_m": np.asarray(length_m, dtype=float),
            "strike_deg": np.zeros(n),
            "max_throw_m": np.asarray(throw_m, dtype=float),
            "max_throw_err_m": err_rel * np.asarray(throw_m, dtype=float),
            "dip_deg": np.full(n, dip_deg),
            "censored": np.zeros(n, bool) if censored is None else np.asarray(censored, bool),
            "system_id": np.arange(1, n + 1) if system_id is None else np.asarray(system_id),
        },
        geometry=geoms,
        crs="EPSG:32633",
    )


# ---------------------------------------------------------------- line fits
def test_ols_slope_equals_numpy_polyfit():
    # Reference library: numpy.polyfit (least squares, degree 1).
    rng = np.random.default_rng(1)
    x = rng.uniform(2, 4, 40)
    y = 1.3 * x - 1.7 + rng.normal(0, 0.2, 40)
    b, a = ols_line(x, y)
    pb, pa = np.polyfit(x, y, 1)
    assert b == pytest.approx(pb, rel=1e-12)
    assert a == pytest.approx(pa, rel=1e-12)


def test_ols_fit_line_matches_scipy_linregress():
    # Reference library: scipy.stats.linregress (slope, stderr, r).
    rng = np.random.default_rng(2)
    L = 10 ** rng.uniform(2, 4, 60)
    D = 0.02 * L**1.1 * 10 ** rng.normal(0, 0.2, 60)
    f = fit_line(L, D, model="ols", bootstrap_n=0)
    ref = stats.linregress(np.log10(L), np.log10(D))
    assert f.exponent == pytest.approx(ref.slope, rel=1e-12)
    assert f.log10_gamma == pytest.approx(ref.intercept, rel=1e-10)
    assert f.exponent_se == pytest.approx(ref.stderr, rel=1e-10)
    assert f.r2 == pytest.approx(ref.rvalue**2, rel=1e-12)


@pytest.mark.parametrize("sign", [1.0, -1.0])
def test_rma_slope_is_sign_r_times_sd_ratio(sign):
    # Sokal & Rohlf (Biometry, from memory): the RMA slope is the geometric mean of the OLS slope of
    # y on x and the reciprocal OLS slope of x on y (numpy.polyfit both ways), with the sign of r,
    # and the RMA line passes through the centroid.
    rng = np.random.default_rng(3)
    x = rng.normal(3, 0.5, 50)
    y = sign * 0.8 * x + rng.normal(0, 0.3, 50)
    b, a = rma_line(x, y)
    byx = np.polyfit(x, y, 1)[0]
    bxy = np.polyfit(y, x, 1)[0]
    assert b == pytest.approx(sign * np.sqrt(byx / bxy), rel=1e-12)
    assert a + b * x.mean() == pytest.approx(y.mean(), rel=1e-12)


def test_york_pearson_york_data():
    # York et al. (2004) Pearson-York test; values a 5.479910224,
    # b -0.480533407, sigma_a 0.294970735, sigma_b 0.0579850090,
    # S/(n-2) 1.483294149 as reproduced in the test suite of the R package
    # bfsl (a York 2004 implementation); York 2004 quotes b -0.4805,
    # a 5.4799 (from memory).
    r = york_fit(PY_X, PY_Y, 1 / np.sqrt(PY_WX), 1 / np.sqrt(PY_WY))
    assert float(r["slope"]) == pytest.approx(-0.480533407, abs=1e-8)
    assert float(r["intercept"]) == pytest.approx(5.479910224, abs=1e-8)
    assert float(r["slope_se"]) == pytest.approx(0.0579850090, rel=1e-7)
    assert float(r["intercept_se"]) == pytest.approx(0.294970735, rel=1e-7)
    assert float(r["mswd"]) == pytest.approx(1.483294149, rel=1e-7)
    assert bool(r["converged"])


def test_york_constant_errors_is_deming_regression():
    # Analytic: with constant errors the York line is Deming's (1943) line,
    # b = (Syy - l Sxx + sqrt((Syy - l Sxx)^2 + 4 l Sxy^2)) / (2 Sxy), l = sy^2/sx^2.
    sx, sy = 3.0, 7.0
    r = york_fit(PY_X, PY_Y, sx, sy)
    dx, dy = PY_X - PY_X.mean(), PY_Y - PY_Y.mean()
    Sxx, Syy, Sxy = dx @ dx, dy @ dy, dx @ dy
    lam = sy**2 / sx**2
    b = (Syy - lam * Sxx + np.sqrt((Syy - lam * Sxx) ** 2 + 4 * lam * Sxy**2)) / (2 * Sxy)
    assert float(r["slope"]) == pytest.approx(b, rel=1e-10)


def test_york_without_x_errors_is_weighted_least_squares():
    # Reference library: numpy.polyfit with weights 1/sigma_y (WLS) equals
    # York with sigma_x = 0 (York et al. 2004, limiting case).
    sy = 1 / np.sqrt(PY_WY)
    r = york_fit(PY_X, PY_Y, 0.0, sy)
    pb, pa = np.polyfit(PY_X, PY_Y, 1, w=1 / sy)
    assert float(r["slope"]) == pytest.approx(pb, rel=1e-10)
    assert float(r["intercept"]) == pytest.approx(pa, rel=1e-10)


def test_york_batch_equals_single_fits():
    # Vectorised bootstrap path must reproduce one-by-one fits (York 2004 data).
    rng = np.random.default_rng(4)
    idx = rng.integers(0, 10, size=(5, 10))
    sx, sy = 1 / np.sqrt(PY_WX), 1 / np.sqrt(PY_WY)
    batch = york_fit(PY_X[idx], PY_Y[idx], sx[idx], sy[idx])
    for k in range(5):
        one = york_fit(PY_X[idx[k]], PY_Y[idx[k]], sx[idx[k]], sy[idx[k]])
        assert batch["slope"][k] == pytest.approx(float(one["slope"]), rel=1e-9)


# ------------------------------------------- synthetic populations (truth known)
TRUE_N, TRUE_GAMMA = 1.2, 0.01  # D = gamma L^n, D and L in m


def _log_lengths(rng, n):
    return rng.uniform(2.0, 4.0, n)  # log10 L, 100 m to 10 km


def test_ols_recovers_exponent_and_gamma_within_ci():
    # Synthetic truth (log-normal scatter in D only: the OLS model).
    rng = np.random.default_rng(11)
    x = _log_lengths(rng, 150)
    y = np.log10(TRUE_GAMMA) + TRUE_N * x + rng.normal(0, 0.15, x.size)
    f = fit_line(10**x, 10**y, model="ols", bootstrap_n=400, seed=5)
    lo, hi = f.exponent_ci
    glo, ghi = f.gamma_ci
    assert lo < TRUE_N < hi
    assert glo < TRUE_GAMMA < ghi
    assert f.n == 150
    # bootstrap SD agrees with the textbook OLS standard error (Efron &
    # Tibshirani 1993: bootstrap SE ~ analytic SE for a linear model).
    assert f.exponent_boot_sd == pytest.approx(f.exponent_se, rel=0.25)


def test_rma_recovers_exponent_with_symmetric_errors():
    # Synthetic truth: errors in both log variables with sd_y = n sd_x, where
    # RMA is consistent (Sokal & Rohlf; common textbook result).
    rng = np.random.default_rng(12)
    xt = _log_lengths(rng, 200)
    sdx = 0.1
    x = xt + rng.normal(0, sdx, xt.size)
    y = np.log10(TRUE_GAMMA) + TRUE_N * xt + rng.normal(0, TRUE_N * sdx, xt.size)
    f = fit_line(10**x, 10**y, model="rma", bootstrap_n=400, seed=6)
    lo, hi = f.exponent_ci
    glo, ghi = f.gamma_ci
    assert lo < TRUE_N < hi
    assert glo < TRUE_GAMMA < ghi


def test_york_recovers_exponent_with_known_errors():
    # Synthetic truth with known per-fault errors in both variables: the York
    # (2004) model; its MSWD must then be ~1 (chi-square / dof).
    rng = np.random.default_rng(13)
    n = 150
    xt = _log_lengths(rng, n)
    rel_L = 0.05
    rel_D = rng.uniform(0.05, 0.3, n)
    x = xt + rng.normal(0, rel_L / np.log(10), n)
    y = np.log10(TRUE_GAMMA) + TRUE_N * xt + rng.normal(0, rel_D / np.log(10))
    D = 10**y
    f = fit_line(10**x, D, model="york", disp_err_m=rel_D * D, length_rel_err=rel_L, bootstrap_n=300, seed=7)
    lo, hi = f.exponent_ci
    glo, ghi = f.gamma_ci
    assert lo < TRUE_N < hi
    assert glo < TRUE_GAMMA < ghi
    assert 0.7 < f.mswd < 1.3
    # York's analytic sigma_b agrees with the bootstrap when the errors are right
    assert f.exponent_boot_sd == pytest.approx(f.exponent_se, rel=0.3)


def test_bootstrap_is_seeded_and_count_is_a_parameter():
    # Common practice: same seed, same intervals; the count sets the replicates.
    rng = np.random.default_rng(14)
    L = 10 ** _log_lengths(rng, 30)
    D = 0.03 * L * 10 ** rng.normal(0, 0.2, 30)
    a = fit_line(L, D, bootstrap_n=57, seed=3)
    b = fit_line(L, D, bootstrap_n=57, seed=3)
    c = fit_line(L, D, bootstrap_n=57, seed=4)
    assert a.boot_exponent.size == 57
    assert a.exponent_ci == b.exponent_ci
    assert a.exponent_ci != c.exponent_ci


# ------------------------------------------------ population and analysis
def test_dip_slip_displacement_scales_gamma_by_one_over_sin_dip():
    # Geometry (shared methods): the dip slip is the length of fault plane between the footwall and
    # hanging-wall cutoffs, measured here with shapely on a section (fault dipping 60 deg, cutoffs
    # T apart vertically); with one dip the exponent is unchanged and gamma grows by that ratio.
    rng = np.random.default_rng(21)
    L = 10 ** _log_lengths(rng, 40)
    T = 0.02 * L * 10 ** rng.normal(0, 0.1, 40)
    fault = shapely.LineString([(0.0, 0.0), (1000.0, -1000.0 * np.tan(np.radians(60.0)))])
    per_throw = fault.intersection(shapely.box(-10.0, -1.0, 2000.0, 0.0)).length  # dip slip per m of throw
    g = _faults(L, T, dip_deg=60.0)
    rt = analyse_scaling(g, displacement="throw", bootstrap_n=0, models=("ols",))
    rd = analyse_scaling(g, displacement="dip_slip", bootstrap_n=0, models=("ols",))
    assert rd.fits["ols"].exponent == pytest.approx(rt.fits["ols"].exponent, rel=1e-10)
    assert rd.fits["ols"].gamma == pytest.approx(rt.fits["ols"].gamma * per_throw, rel=1e-10)
    assert rd.faults["d_l_ratio"].to_numpy() == pytest.approx(T / L * per_throw)
    assert set(rd.table.loc[rd.table.model == "ols", "variable"]) == {"max_dip_slip_m"}


def test_censored_faults_left_out_by_default_and_included_on_request():
    # Shared methods: censored lengths are lower bounds; keep them out and say so.
    rng = np.random.default_rng(22)
    L = 10 ** _log_lengths(rng, 30)
    T = 0.02 * L * 10 ** rng.normal(0, 0.1, 30)
    cens = np.zeros(30, bool)
    cens[:6] = True
    g = _faults(L, T, censored=cens)
    r = analyse_scaling(g, bootstrap_n=20)
    assert r.fits["ols"].n == 24
    assert any("censored" in w and "left out" in w for w in r.warnings)
    assert not r.faults.loc[cens, "scaling_used"].any()
    r2 = analyse_scaling(g, bootstrap_n=20, include_censored=True)
    assert r2.fits["ols"].n == 30
    assert any("included" in w for w in r2.warnings)
    assert bool(r2.table.loc[r2.table.model == "ols", "include_censored"].iloc[0])


def test_system_length_extent_and_max_throw():
    # Geometry: two collinear overlapping segments 0-1000 m and 600-1600 m
    # along strike: extent 1600 m, sum 2000 m; max over segments = larger max.
    xy = np.array([[0.0, 0.0], [0.0, 600.0], [5000.0, 0.0]])
    g = _faults([1000.0, 1000.0, 800.0], [12.0, 15.0, 9.0], system_id=[1, 1, 2], xy=xy)
    pop = displacement_population(g, unit="system")
    s1 = pop[pop.unit_id == 1].iloc[0]
    assert s1.length_m == pytest.approx(1600.0)
    assert s1.max_throw_m == pytest.approx(15.0)
    assert s1.n_segments == 2
    pop_sum = displacement_population(g, unit="system", system_length="sum")
    assert pop_sum[pop_sum.unit_id == 1].length_m.iloc[0] == pytest.approx(2000.0)
    assert pop[pop.unit_id == 2].length_m.iloc[0] == pytest.approx(800.0)


def test_system_summed_throw_from_overlapping_profiles():
    # Analytic: constant 10 m (+-1 m) throw on both segments; where they
    # overlap (600-1000 m) the summed throw is 20 m, error sqrt(2) m.
    xy = np.array([[0.0, 0.0], [0.0, 600.0]])
    g = _faults([1000.0, 1000.0], [10.0, 10.0], system_id=[1, 1], xy=xy)
    ya = np.arange(0.0, 1001.0, 50.0)
    yb = np.arange(600.0, 1601.0, 50.0)
    st = gpd.GeoDataFrame(
        {
            "fault_id": np.r_[np.ones(ya.size, int), 2 * np.ones(yb.size, int)],
            "throw_m": 10.0,
            "throw_err_m": 1.0,
            "status": "ok",
        },
        geometry=shapely.points(np.r_[np.zeros(ya.size), np.zeros(yb.size)], np.r_[ya, yb]),
        crs="EPSG:32633",
    )
    pop = displacement_population(g, unit="system", system_throw="summed", stations=st)
    assert pop.max_throw_m.iloc[0] == pytest.approx(20.0)
    assert pop.max_throw_err_m.iloc[0] == pytest.approx(np.sqrt(2.0))
    assert pop.length_m.iloc[0] == pytest.approx(1600.0)


def _population_with_outliers():
    rng = np.random.default_rng(31)
    n = 40
    L = 10 ** rng.uniform(2.5, 3.7, n)
    T = 0.02 * L * 10 ** rng.normal(0, 0.05, n)
    xy = np.column_stack([np.arange(n) * 20000.0, np.zeros(n)])
    # fault 1: long (5 km); fault 2: 200 m, 100 m beside it, throw 10x too small
    L[0], xy[0] = 5000.0, (0.0, 0.0)
    T[0] = 0.02 * 5000.0
    L[1], xy[1] = 200.0, (100.0, 1000.0)
    T[1] = 0.002 * 200.0
    cens = np.zeros(n, bool)
    cens[2] = True  # fault 3: censored, far too much throw for its length
    T[2] = 0.2 * L[2]
    sys_ = np.arange(1, n + 1)
    sys_[4] = sys_[3]  # faults 4 and 5 share a system; fault 4 over-displaced
    T[3] = 0.2 * L[3]
    return _faults(L, T, censored=cens, system_id=sys_, xy=xy)


def test_outliers_flagged_with_hints():
    # k-sigma rule on log residuals (common practice); hints are our rules.
    g = _population_with_outliers()
    r = analyse_scaling(g, bootstrap_n=50, outlier_k=2.0)
    f = r.faults.set_index("fault_id")
    assert f.loc[2, "scaling_flag"] == "under_displaced"
    assert bool(f.loc[2, "under_displaced"]) and not bool(f.loc[2, "over_displaced"])
    assert "short fault near a larger one" in f.loc[2, "scaling_hint"]
    assert f.loc[3, "scaling_flag"] == "over_displaced"
    assert "censored" in f.loc[3, "scaling_hint"]
    assert not bool(f.loc[3, "scaling_used"])
    assert f.loc[4, "scaling_flag"] == "over_displaced"
    assert "linked system" in f.loc[4, "scaling_hint"]
    ok = f["scaling_flag"] == "ok"
    assert (f.loc[ok, "scaling_hint"] == "").all()
    # residual = log10 D minus the OLS line through the faults used, the line from
    # scipy.stats.linregress (reference library), not from faultmap's fit
    used = f["scaling_used"].to_numpy(bool)
    lx, ly = np.log10(f["length_m"].to_numpy(float)), np.log10(f["max_throw_m"].to_numpy(float))
    ref = stats.linregress(lx[used], ly[used])
    expect = ly - (ref.intercept + ref.slope * lx)
    assert f["scaling_residual"].to_numpy() == pytest.approx(expect)


def test_residual_flags_follow_k():
    # Same population: a huge k flags nothing (k-sigma rule, common practice).
    g = _population_with_outliers()
    pop = displacement_population(g)
    fit = fit_line(pop.length_m[pop.used], pop.disp_m[pop.used], bootstrap_n=0)
    res = scaling_residuals(pop, fit, outlier_k=50.0)
    assert (res.scaling_flag == "ok").all()
    with pytest.raises(ParameterError):
        scaling_residuals(pop, fit, outlier_k=0.0)


def test_reference_ranges_population_summary():
    # Schlische et al. (1996): D ~ 0.03 L (verified); Kim & Sanderson (2005)
    # 0.01-0.1 (from memory). A population at D/L = 0.03 (dip slip) sits on
    # the first and wholly inside the second; n ~ 1 overlaps Clark & Cox (1996)
    # and Walsh et al. (2002) 1-1.5 (verified) but not n = 2 (Walsh &
    # Watterson 1988, from memory).
    rng = np.random.default_rng(41)
    L = 10 ** _log_lengths(rng, 50)
    u = 0.03 * L * 10 ** rng.normal(0, 0.02, 50)
    T = u * np.sin(np.radians(60))
    r = analyse_scaling(_faults(L, T), displacement="dip_slip", bootstrap_n=200)
    ref = r.references
    sch = ref[ref.reference == "schlische1996"].iloc[0]
    assert sch.value == pytest.approx(0.03, rel=0.02)
    assert bool(sch.consistent)
    ks = ref[ref.reference == "kim_sanderson2005"].iloc[0]
    assert ks.frac_within == 1.0
    assert bool(ref[(ref.reference == "clark_cox1996") & (ref.compared == "ols")].consistent.iloc[0])
    assert not bool(
        ref[(ref.reference == "walsh_watterson1988") & (ref.compared == "ols")].consistent.iloc[0]
    )
    assert (r.table.model == "reference").sum() == len(ref)


def test_compare_to_references_fractions():
    # Counting (definition): ratios 0.005, 0.05, 0.5 against 0.01-0.1.
    ref = compare_to_references([0.005, 0.05, 0.5])
    ks = ref[ref.reference == "kim_sanderson2005"].iloc[0]
    assert (ks.frac_below, ks.frac_within, ks.frac_above) == pytest.approx((1 / 3, 1 / 3, 1 / 3))


def test_scaling_table_columns():
    # Data contract (docs/conventions.md, issue): one row per model and variable.
    rng = np.random.default_rng(51)
    L = 10 ** _log_lengths(rng, 25)
    r = analyse_scaling(_faults(L, 0.02 * L * 10 ** rng.normal(0, 0.1, 25)), bootstrap_n=30)
    fits = r.table[r.table.model.isin(["ols", "rma", "york"])]
    assert list(fits.model) == ["ols", "rma", "york"]
    for c in [
        "model",
        "variable",
        "exponent",
        "gamma",
        "exponent_lo",
        "exponent_hi",
        "gamma_lo",
        "gamma_hi",
        "r2",
        "n_faults",
    ]:
        assert c in r.table.columns
    assert (fits.exponent_lo < fits.exponent).all() and (fits.exponent < fits.exponent_hi).all()
    for c in [
        "d_l_ratio",
        "scaling_residual",
        "scaling_flag",
        "scaling_hint",
        "under_displaced",
        "over_displaced",
    ]:
        assert c in r.faults.columns


# ------------------------------------------------------------- degenerate input
@pytest.mark.parametrize("unit", ["trace", "system"])
def test_fewer_than_three_faults_is_not_fitted(unit):
    empty = analyse_scaling(_faults(np.empty(0), np.empty(0)), bootstrap_n=10, unit=unit)
    assert not empty.fits["ols"].fitted and len(empty.faults) == 0
    g = _faults([100.0, 1000.0], [2.0, 20.0])
    r = analyse_scaling(g, bootstrap_n=10, unit=unit)
    for f in r.fits.values():
        assert not f.fitted and "at least 3" in f.reason
        assert np.isnan(f.exponent)
    assert (r.faults.scaling_flag == "not_fitted").all()
    assert not r.table.loc[r.table.model == "ols", "fitted"].iloc[0]


def test_identical_lengths_is_not_fitted():
    f = fit_line([500.0] * 5, [5.0, 6.0, 7.0, 8.0, 9.0], bootstrap_n=10)
    assert not f.fitted and "identical" in f.reason


def test_zero_or_missing_throws_are_left_out():
    g = _faults([100.0, 300.0, 1000.0, 2000.0], [0.0, np.nan, 0.0, np.nan])
    r = analyse_scaling(g, bootstrap_n=10)
    assert not r.fits["ols"].fitted
    assert (r.faults.scaling_flag == "no_data").all()
    assert set(r.population.excluded_reason) == {"zero or missing displacement"}


def test_york_without_errors_not_fitted_others_are():
    rng = np.random.default_rng(61)
    L = 10 ** _log_lengths(rng, 20)
    g = _faults(L, 0.02 * L * 10 ** rng.normal(0, 0.1, 20))
    g["max_throw_err_m"] = np.nan
    r = analyse_scaling(g, bootstrap_n=10)
    assert r.fits["ols"].fitted and not r.fits["york"].fitted
    assert "throw error" in r.fits["york"].reason


def test_missing_column_and_bad_option_raise_clear_errors():
    g = _faults([100.0, 300.0, 1000.0], [1.0, 3.0, 10.0]).drop(columns="max_throw_m")
    with pytest.raises(InputError, match="run the throw tool first"):
        analyse_scaling(g)
    g = _faults([100.0, 300.0, 1000.0], [1.0, 3.0, 10.0])
    with pytest.raises(ParameterError, match="displacement"):
        analyse_scaling(g, displacement="heave")


# --------------------------------------------------------------------- figure
def test_dl_figure_has_fits_references_and_labels(tmp_path):
    from matplotlib.figure import Figure

    from faultmap.population.figures import dl_figure

    g = _population_with_outliers()
    r = analyse_scaling(g, bootstrap_n=50)
    fig = dl_figure(r)
    assert isinstance(fig, Figure)
    ax = fig.axes[0]
    assert ax.get_xscale() == "log" and ax.get_yscale() == "log"
    assert "(m)" in ax.get_xlabel() and "(m)" in ax.get_ylabel()
    texts = [t.get_text() for t in ax.get_legend().get_texts()]
    assert any("Schlische et al. (1996)" in t for t in texts)
    assert any("bootstrap band" in t for t in texts)
    assert any("under-displaced" in t for t in texts)
    out = tmp_path / "dl.png"
    fig.savefig(out, dpi=150)
    assert out.stat().st_size > 10_000


# ---------------------------------------------------------------- tool wrapper
def test_tool_wrapper_on_a_hand_built_context(tmp_path):
    # The throw tool may not be built: run the wrapper on a RunContext holding
    # a faults layer as throw leaves it (data contract, DEVELOPERS.md).
    from faultmap.io.gpkg import write_gpkg
    from faultmap.population.tool import TOOL
    from faultmap.runner import RunContext

    g = _population_with_outliers()
    ctx = RunContext(quiet=True, echo=lambda msg: None)
    ctx.crs = g.crs
    ctx.faults = g
    ctx._stage = tmp_path
    p = TOOL.resolve_params({"bootstrap_n": 50, "gof_n": 20}, where="[scaling]")
    ctx.current_tool = "scaling"
    TOOL.run(ctx, p)
    table = ctx.layers["scaling"]
    assert {"ols", "rma", "york", "power_law", "reference"} <= set(table.model)
    assert set(table.loc[table.model == "power_law", "variable"]) == {"length_m", "max_throw_m"}
    assert {"scaling_flag", "d_l_ratio", "scaling_hint"} <= set(ctx.faults.columns)
    # our default detection throw, one rule for every tool (science review): 2 x the median throw error
    # (a 2-sigma detection, common practice); without a station table, of the faults' max_throw_err_m
    expect = 2 * np.median(g["max_throw_err_m"])
    assert ctx.records["scaling.detection_throw_m_used"] == pytest.approx(expect)
    assert ctx.records["scaling.detection_throw_source"] == "2 x median max_throw_err_m"
    assert (tmp_path / "scaling_dl.png").stat().st_size > 10_000
    assert (tmp_path / "scaling_sizes.png").stat().st_size > 10_000
    # the layers survive a GeoPackage round trip
    import pyogrio

    out = write_gpkg(tmp_path / "out.gpkg", {"faults": ctx.faults, "scaling": table}, crs=g.crs)
    back = pyogrio.read_dataframe(out, layer="scaling")
    assert len(back) == len(table)
    assert back.loc[back.model == "ols", "exponent"].iloc[0] == pytest.approx(
        table.loc[table.model == "ols", "exponent"].iloc[0]
    )


# ------------------------------------------- replicate counts and vectorised searches
def test_bootstrap_replicate_rule_and_blocks_equal_a_loop(monkeypatch):
    # Efron & Tibshirani (1993): resample faults with replacement and refit.
    # Reference: a plain loop over the resamples of one (B, n) draw, each
    # fitted by numpy.polyfit; the blocked, vectorised bootstrap (small
    # blocks forced here) must give the same slopes and intercepts.
    from faultmap.population import linefit

    rng = np.random.default_rng(41)
    L = 10 ** _log_lengths(rng, 35)
    D = 0.03 * L * 10 ** rng.normal(0, 0.2, 35)
    monkeypatch.setattr(linefit, "_BOOT_BLOCK", 35 * 7)
    f = fit_line(L, D, model="ols", bootstrap_n=60, seed=9)
    idx = np.random.default_rng(9).integers(0, 35, size=(60, 35))
    x, y = np.log10(L), np.log10(D)
    ref = np.array([np.polyfit(x[i], y[i], 1) for i in idx])
    assert f.bootstrap_n_used == 60
    assert np.allclose(f.boot_exponent, ref[:, 0], rtol=1e-10, atol=1e-12)
    assert np.allclose(f.boot_log10_gamma, ref[:, 1], rtol=1e-10, atol=1e-12)
    # York: blocks of 7 resamples against one batch (each converges to tol 1e-12)
    y1 = fit_line(L, D, model="york", disp_err_m=0.1 * D, bootstrap_n=60, seed=9)
    monkeypatch.setattr(linefit, "_BOOT_BLOCK", 4_000_000)
    y2 = fit_line(L, D, model="york", disp_err_m=0.1 * D, bootstrap_n=60, seed=9)
    assert np.allclose(y1.boot_exponent, y2.boot_exponent, rtol=1e-9, equal_nan=True)


def test_bootstrap_count_rule():
    # Our rule: min(1000, max(200, 2e6 // n)) when bootstrap_n is not given
    # (Efron & Tibshirani 1993: ~200 resamples suffice for a standard error);
    # a given count is used exactly. A large population: the count, not the time.
    from faultmap.population.linefit import bootstrap_replicates

    assert bootstrap_replicates(30) == 1000
    assert bootstrap_replicates(2000) == 1000
    assert bootstrap_replicates(8000) == 250
    assert bootstrap_replicates(20_000) == 200
    assert bootstrap_replicates(20_000, bootstrap_n=57) == 57
    rng = np.random.default_rng(42)
    L = 10 ** _log_lengths(rng, 20_000)
    D = 0.03 * L * 10 ** rng.normal(0, 0.2, 20_000)
    f = fit_line(L, D, model="ols", seed=1)
    assert f.bootstrap_n_used == 200
    small = rng.uniform(100, 5000, 40)
    a = fit_line(small, 0.03 * small * 10 ** rng.normal(0, 0.2, 40), seed=2)
    assert a.bootstrap_n_used == 1000


def test_scaling_table_reports_replicates_used():
    rng = np.random.default_rng(43)
    L = 10 ** rng.uniform(2.5, 4.0, 30)
    r = analyse_scaling(_faults(L, 0.02 * L * 10 ** rng.normal(0, 0.1, 30)), bootstrap_n=40)
    fits = r.table[r.table.model != "reference"]
    assert (fits.bootstrap_n_used == 40).all() and (fits.bootstrap_n_rule == "given").all()
    r = analyse_scaling(_faults(L, 0.02 * L * 10 ** rng.normal(0, 0.1, 30)))
    fits = r.table[r.table.model != "reference"]
    assert (fits.bootstrap_n_used == 1000).all() and (fits.bootstrap_n_rule == "auto").all()
    assert r.settings["bootstrap_n_used"] == 1000


def test_near_larger_search_equals_pairwise_distances():
    # Reference: the pairwise shapely.distance definition of the hint
    # "short fault near a larger one" (within near_factor own lengths of a
    # trace at least twice as long); the STRtree query must agree.
    from faultmap.population.outliers import _near_larger

    rng = np.random.default_rng(44)
    n = 300
    L = 10 ** rng.uniform(2.0, 3.8, n)
    xy = rng.uniform(0, 3e4, (n, 2))
    g = _faults(L, 0.02 * L, xy=xy)
    geoms = np.asarray(g.geometry)
    k = np.arange(n)
    got = _near_larger(geoms, L, k, 1.0)
    ref = np.array(
        [np.min(shapely.distance(geoms[i], geoms[L >= 2 * L[i]]), initial=np.inf) <= L[i] for i in k]
    )
    assert ref.any() and (~ref).any()
    assert np.array_equal(got, ref)


def test_systems_vectorised_equal_a_loop_over_systems():
    # Definition (docs/methods/scaling.md): a system's summed length, largest
    # segment throw (its error), any-censored and segment count, one system at
    # a time as reference.
    rng = np.random.default_rng(45)
    n = 200
    L = 10 ** rng.uniform(2.5, 3.5, n)
    T = 0.02 * L * 10 ** rng.normal(0, 0.1, n)
    sid = rng.integers(1, 70, n)
    cens = rng.random(n) < 0.1
    g = _faults(L, T, system_id=sid, censored=cens)
    pop = displacement_population(g, unit="system", system_length="sum", include_censored=True)
    assert list(pop.unit_id) == list(dict.fromkeys(sid))
    for _, row in pop.iterrows():
        m = sid == row.unit_id
        assert row.n_segments == m.sum()
        assert row.length_m == pytest.approx(L[m].sum(), rel=1e-12)
        assert row.max_throw_m == T[m].max()
        assert row.max_throw_err_m == 0.1 * T[m][np.argmax(T[m])]
        assert row.censored == cens[m].any()
        assert row.fault_ids == ",".join(str(i + 1) for i in np.flatnonzero(m))


def test_tool_records_replicates_and_gof_precision():
    # run_info carries the counts used and the p-value's Monte Carlo standard
    # error, the binomial standard deviation of the count over B (Clauset, Shalizi & Newman 2009,
    # sec. 4.1; reference scipy.stats.binom).
    from faultmap.population.tool import TOOL
    from faultmap.runner import RunContext

    g = _population_with_outliers()
    ctx = RunContext(quiet=True, echo=lambda msg: None)
    ctx.crs = g.crs
    ctx.faults = g
    p = TOOL.resolve_params({"gof_n": 20}, where="[scaling]")
    assert p["bootstrap_n"] is None  # default: the automatic rule
    ctx.current_tool = "scaling"
    TOOL.run(ctx, p)
    rec = ctx.records
    assert rec["scaling.bootstrap_n_used"] == 1000 and rec["scaling.bootstrap_n_rule"] == "auto"
    table = ctx.layers["scaling"]
    for var in ("length_m", "max_throw_m"):
        row = table[(table.model == "power_law") & (table.variable == var)].iloc[0]
        assert rec[f"scaling.gof_n_used_{var}"] == 20 == row.gof_n_used
        assert rec[f"scaling.gof_p_se_{var}"] == pytest.approx(stats.binom(20, row.gof_p).std() / 20)


def test_throw_is_compared_with_published_displacement_like_with_like():
    # Science review: published D/L ratios are of maximum dip-slip displacement (Schlische et al. 1996;
    # Kim & Sanderson 2005), so a throw population is converted with D = T / sin(dip) (geometry) before
    # the comparison; the reference rows say so. At dip 60 an unconverted ratio would read 13 % low.
    rng = np.random.default_rng(41)
    L = 10 ** _log_lengths(rng, 50)
    T = 0.03 * L * 10 ** rng.normal(0, 0.02, 50) * np.sin(np.radians(60))
    rt = analyse_scaling(_faults(L, T), displacement="throw", bootstrap_n=0, models=("ols",))
    rd = analyse_scaling(_faults(L, T), displacement="dip_slip", bootstrap_n=0, models=("ols",))
    sch_t = rt.references[rt.references.reference == "schlische1996"].iloc[0]
    sch_d = rd.references[rd.references.reference == "schlische1996"].iloc[0]
    assert sch_t.value == pytest.approx(sch_d.value, rel=1e-12) and sch_t.value == pytest.approx(
        0.03, rel=0.02
    )
    rows = rt.table[(rt.table.model == "reference") & (rt.table.variable == "d_l_ratio")]
    assert set(rows.compared_as) == {"dip-slip displacement from throw (T / sin dip)"}
    assert any("T / sin dip" in w for w in rt.warnings)
