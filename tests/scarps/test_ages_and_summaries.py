"""Per-fault kappa t summaries and ranking, morphologic ages by Monte Carlo, the hazard fallback, the figure.

Sources: age = kappa t / kappa (Hanks, Bucknam, Lajoie & Wallace 1984, J. Geophys. Res. 89); percentiles of a
log-normal law, exp(mu +- sigma) for the 16th / 84th (scipy.stats.norm.ppf(0.84) = 0.9945, checked here);
the log-uniform law's median, the geometric mean of its ends (analytic).
"""

from __future__ import annotations

import math

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
from scipy.stats import norm
from shapely.geometry import LineString

from faultmap.errors import InputError, ParameterError
from faultmap.hazard.slip_rates import slip_rates
from faultmap.scarps.ages import calibrated_kappa_draws, fault_ages, kappa_draws, morphologic_ages
from faultmap.scarps.fault_degradation import station_kappa_t, summarise_degradation


def _stations(rows):
    df = pd.DataFrame(
        rows, columns=["fault_id", "dist_m", "status", "kt_m2", "kt_se_m2", "kt_bound_m2", "kt_code"]
    )
    df["kt_rmse_m"] = 0.01
    return station_kappa_t(df)


def test_station_fields_follow_the_throw_status_and_the_fit_code():
    st = _stations(
        [
            (1, 0.0, "ok", 10.0, 1.0, np.nan, 0),
            (1, 10.0, "poor_fit", 12.0, 1.0, np.nan, 0),
            (1, 20.0, "ok", 0.1, 0.2, 3.0, 1),
            (1, 30.0, "ok", 50.0, 1.0, 50.0, 2),
        ]
    )
    assert st["kappa_t_flag"].tolist() == ["ok", "not_fitted", "unresolved", "broad"]
    assert st["kappa_t_m2"].iloc[0] == 10.0 and np.isnan(st["kappa_t_m2"].iloc[1:]).all()
    assert np.isnan(st["kappa_t_bound_m2"].iloc[0]) and st["kappa_t_bound_m2"].iloc[2] == 3.0


def test_fault_summary_median_rank_and_bounds():
    rows = []
    for d, kt in enumerate(
        [10.0, 11.0, 9.0, 10.5, 300.0]
    ):  # one station spoilt by a fan: the median ignores it
        rows.append((1, d * 10.0, "ok", kt, 0.5, np.nan, 0))
    for d, kt in enumerate([40.0, 42.0, 38.0]):
        rows.append((2, d * 10.0, "ok", kt, 2.0, np.nan, 0))
    for d in range(4):
        rows.append((3, d * 10.0, "ok", 0.2, 0.3, 2.5, 1))
    rows.append((4, 0.0, "nodata", np.nan, np.nan, np.nan, np.nan))
    st = _stations(rows)
    faults = pd.DataFrame({"fault_id": [1, 2, 3, 4]})
    f = summarise_degradation(faults, st).set_index("fault_id")
    assert f.loc[1, "kappa_t_m2"] == pytest.approx(10.5)
    assert f.loc[2, "kappa_t_m2"] == pytest.approx(40.0)
    assert f.loc[1, "kappa_t_rank"] == 1 and f.loc[2, "kappa_t_rank"] == 2
    assert f.loc[3, "kappa_t_flag"] == "upper_bound" and f.loc[3, "kappa_t_bound_m2"] == 2.5
    assert np.isnan(f.loc[3, "kappa_t_rank"])
    assert f.loc[4, "kappa_t_flag"] == "none" and f.loc[4, "kappa_t_n"] == 0
    assert 0 < f.loc[2, "kappa_t_err_m2"] < 10.0
    assert "kappa_t_m2" not in faults.columns  # the input is left alone


def test_ages_monte_carlo_against_the_lognormal_percentiles():
    # kappa fixed, kappa t log-normal with sigma(ln) = 0.2: age percentiles are kt/kappa exp(-+ 0.9945 * 0.2)
    z84 = norm.ppf(0.84)
    assert z84 == pytest.approx(0.9945, abs=1e-4)
    kap = kappa_draws(2.0, n_draws=20000)
    a = morphologic_ages(np.array([30.0]), np.array([6.0]), kap, seed=3)
    assert a["age_ka"][0] == pytest.approx(15.0, rel=0.01)
    assert a["age_p16_ka"][0] == pytest.approx(15.0 * math.exp(-z84 * 0.2), rel=0.01)
    assert a["age_p84_ka"][0] == pytest.approx(15.0 * math.exp(z84 * 0.2), rel=0.01)


def test_kappa_range_and_calibration():
    k = kappa_draws(1.0, (0.5, 2.0), n_draws=40000, seed=1)
    assert k.min() >= 0.5 and k.max() <= 2.0
    assert np.median(k) == pytest.approx(1.0, rel=0.02)  # log-uniform: median = sqrt(0.5 x 2)
    with pytest.raises(ParameterError):
        kappa_draws(3.0, (0.5, 2.0))
    c = calibrated_kappa_draws(24.0, 0.0, 12.0, 0.0, n_draws=100)
    np.testing.assert_allclose(c, 2.0)  # kappa = kappa t / age
    with pytest.raises(InputError, match="surface_age_ka"):
        calibrated_kappa_draws(24.0, 1.0, np.nan, 0.0)


def test_fault_ages_with_a_calibration_scarp_keep_the_order():
    f = pd.DataFrame(
        {
            "fault_id": [1, 2, 3],
            "kappa_t_m2": [24.0, 48.0, np.nan],
            "kappa_t_err_m2": [1.0, 2.0, np.nan],
            "kappa_t_flag": ["measured", "measured", "upper_bound"],
            "kappa_t_bound_m2": [np.nan, np.nan, 3.0],
            "surface_age_ka": [12.0, np.nan, np.nan],
            "surface_age_err_ka": [0.5, np.nan, np.nan],
        }
    )
    out, rec = fault_ages(f, calibration_fault_id=1)
    assert out["morph_age_ka"].iloc[0] == pytest.approx(12.0, rel=0.03)
    assert out["morph_age_ka"].iloc[1] == pytest.approx(24.0, rel=0.03)
    assert np.isnan(out["morph_age_ka"].iloc[2]) and out["morph_age_max_ka"].iloc[2] > 0
    assert out["morph_age_basis"].iloc[1].startswith("morphologic")
    assert "kappa_m2_kyr_used" in rec
    with pytest.raises(InputError, match="not a fault_id"):
        fault_ages(f, calibration_fault_id=9)
    assert fault_ages(f)[0] is f  # no kappa, no ages


def test_hazard_slip_rate_falls_back_on_the_morphologic_age():
    line = LineString([(0, 0), (0, 10000)])
    faults = gpd.GeoDataFrame(
        {
            "fault_id": [1, 2],
            "dip_deg": [60.0, 60.0],
            "active": [True, True],
            "surface_age_ka": [10.0, np.nan],
            "max_throw_m": [5.0, 5.0],
            "max_throw_err_m": [0.2, 0.2],
            "morph_age_ka": [99.0, 20.0],
            "morph_age_err_ka": [2.0, 2.0],
        },
        geometry=[line, line],
        crs="EPSG:32633",
    )
    table, warns = slip_rates(faults)
    t = table.set_index("fault_id")
    assert t.loc[1, "age_used_ka"] == 10.0 and t.loc[1, "age_source"] == "given"
    assert t.loc[2, "age_used_ka"] == 20.0 and t.loc[2, "age_source"] == "morphologic"
    assert any("morphologic" in w for w in warns)
    # 5 m in 20 kyr: 0.25 mm/yr of vertical rate (median of the draws)
    assert t.loc[2, "slip_rate_vert_mm_yr"] == pytest.approx(0.25, rel=0.1)


def test_figure_draws(tmp_path):
    from faultmap.scarps.figures import degradation_figure

    st = _stations(
        [(1, d * 10.0, "ok", 10.0 + d, 0.5, np.nan, 0) for d in range(5)]
        + [(2, d * 10.0, "ok", 0.2, 0.3, 2.5, 1) for d in range(4)]
    )
    f = summarise_degradation(pd.DataFrame({"fault_id": [1, 2], "max_throw_m": [10.0, 3.0]}), st)
    fig = degradation_figure(f, st, pixel_size_m=5.0)
    fig.savefig(tmp_path / "d.png", dpi=60)
    assert (tmp_path / "d.png").stat().st_size > 1000


def test_report_section_lists_kappa_t_and_ages():
    from faultmap.report.sections import build_section

    faults = pd.DataFrame(
        {
            "fault_id": [1, 2, 3],
            "max_throw_m": [10.0, 20.0, 5.0],
            "kappa_t_m2": [30.0, 8.0, np.nan],
            "kappa_t_err_m2": [2.0, 1.0, np.nan],
            "kappa_t_n": [20, 15, 0],
            "kappa_t_rank": [2.0, 1.0, np.nan],
            "kappa_t_flag": ["measured", "measured", "upper_bound"],
            "morph_age_ka": [15.0, 4.0, np.nan],
            "morph_age_p16_ka": [12.0, 3.0, np.nan],
            "morph_age_p84_ka": [18.0, 5.0, np.nan],
        }
    )
    s = build_section("throw", {"faults": faults}, {"kappa_m2_kyr_used": "2 (16-84 %: 2-2)"})
    facts = dict(s["facts"])
    assert facts["faults by scarp degradation (kappa t)"] == "measured 2, upper_bound 1"
    tab = next(t for t in s["tables"] if t["caption"].startswith("Scarp degradation"))
    assert [r[0] for r in tab["rows"]] == ["2", "1"]  # freshest first
    assert any("morphologic" in p for p in s["paragraphs"])
