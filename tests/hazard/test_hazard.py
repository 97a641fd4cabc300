"""Tests of faultmap.hazard.screening (active-fault screening) on synthetic scenes.

Sources (published sources; summarised in docs/methods/hazard.md):
* Wells & Coppersmith (1994), BSSA 84 ("W&C94"); Hanks & Bakun (2002), BSSA 92.
* Slip rate = displacement / age of the offset surface; recurrence =
  single-event displacement / slip rate; heave = T / tan(dip), net slip =
  T / sin(dip) (geometry, derived).
* Zone widths 150 m hanging wall / 75 m footwall: common practice (from memory);
  map-scale uncertainty 0.5 mm at map scale: common practice (from memory).
"""

from __future__ import annotations

import math

import geopandas as gpd
import matplotlib
import numpy as np
import pytest
import shapely

matplotlib.use("Agg")

from faultmap.errors import InputError, ParameterError  # noqa: E402
from faultmap.hazard.caution import CAUTION
from faultmap.hazard.scenarios import rupture_scenarios
from faultmap.hazard.screening import screen_hazard
from faultmap.hazard.slip_rates import slip_rate_draws, slip_rates
from faultmap.hazard.zones import mapping_uncertainty_from_scale, rupture_zones

CRS = "EPSG:32633"


def make_faults(lines, **cols) -> gpd.GeoDataFrame:
    """Synthetic faults table with the DEVELOPERS.md columns."""
    n = len(lines)
    base = {
        "fault_id": np.arange(1, n + 1),
        "length_m": [ln.length for ln in lines],
        "dip_deg": np.full(n, 60.0),
        "dip_dir_deg": np.full(n, 90.0),
        "system_id": np.arange(1, n + 1),
        "active": np.ones(n, bool),
        "surface_age_ka": np.full(n, 15.0),
        "max_throw_m": np.full(n, 15.0),
        "max_throw_err_m": np.full(n, 1.0),
        "mean_throw_m": np.full(n, 8.0),
    }
    base.update(cols)
    return gpd.GeoDataFrame(base, geometry=list(lines), crs=CRS)


def ns_line(x0, y0, length):
    return shapely.LineString([(x0, y0), (x0, y0 + length)])


# ------------------------------------------------------------------ scenarios


def test_single_fault_magnitudes_match_published_relations():
    # A straight 30 km trace: Wells & Coppersmith (1994, BSSA 84), normal faults SRL:
    # M = 4.86 + 1.32 log10(SRL); check SRL 30 km -> 6.8098 (verified).
    f = make_faults([ns_line(0, 0, 30_000)])
    sc, _ = rupture_scenarios(f, seismogenic_thickness_km=15.0)
    row = sc.iloc[0]
    assert row["kind"] == "segment" and row["fault_ids"] == "1"
    assert row["mag_srl_wc94"] == pytest.approx(6.8098, abs=1e-4)
    # down-dip width of a 60-degree plane through 15 km, by vector geometry (numpy): the
    # down-dip unit vector (cos 60, 0, -sin 60) scaled to reach -15 km; A = 30 km x W.
    down_dip = np.array([math.cos(math.radians(60.0)), 0.0, -math.sin(math.radians(60.0))])
    w = float(np.linalg.norm(down_dip * (15.0 / -down_dip[2])))
    assert row["width_km"] == pytest.approx(w, rel=1e-9)
    assert row["area_km2"] == pytest.approx(30.0 * w, rel=1e-9)  # 519.6 km2, below the 537 km2 break
    # H&B02 (verified): log10(519.6) + 3.98 = 6.6957, worked by hand
    assert row["mag_hb02"] == pytest.approx(6.6957, abs=1e-4)
    # M0 from the preferred Mw, and mean slip = M0 / (mu A): mu A slip, written in dyne cm,
    # gives back the preferred magnitude through the original Hanks & Kanamori (1979) form
    # 2/3 log10 M0 - 10.7, which sits 0.0333 above the IASPEI form faultmap uses.
    m0_dyne_cm = 3e10 * 10.0 * row["area_km2"] * 1e10 * row["mean_slip_m"] * 100.0
    assert 2.0 / 3.0 * math.log10(m0_dyne_cm) - 10.7 == pytest.approx(row["mag_preferred"] + 0.0333, abs=2e-4)
    assert row["m0_nm"] * 1e7 == pytest.approx(m0_dyne_cm, rel=1e-9)


@pytest.mark.parametrize(
    ("name", "srl_km", "dip_deg", "thickness_km", "mw"),
    [
        # Observed normal-fault earthquakes (values from memory):
        # Borah Peak, Idaho, 1983: SRL 34 km, dip ~45 deg, hypocentre ~16 km (Crone et al. 1987;
        # Doser & Smith 1985), Mw 6.9. Rupture area above the 537 km2 break.
        ("Borah Peak 1983", 34.0, 45.0, 16.0, 6.9),
        # Norcia, Italy, 2016: surface rupture about 22-28 km (Civico et al. 2018), dip ~45 deg,
        # seismogenic layer ~10 km, Mw 6.5 (INGV; USGS 6.6). Area below the break.
        ("Norcia 2016", 25.0, 45.0, 10.0, 6.5),
    ],
)
def test_scenario_magnitudes_against_observed_earthquakes(name, srl_km, dip_deg, thickness_km, mw):
    f = make_faults([ns_line(0, 0, srl_km * 1000.0)], dip_deg=np.array([dip_deg]))
    sc, _ = rupture_scenarios(f, seismogenic_thickness_km=thickness_km)
    row = sc.iloc[0]
    for col in ("mag_srl_wc94", "mag_ra_wc94", "mag_hb02", "mag_preferred"):
        assert abs(row[col] - mw) < row[col + "_sigma"], (name, col, row[col])
    # the preferred magnitude's sigma is a single-event scatter (0.24-0.25), not an intercept s.e.
    assert 0.24 <= row["mag_preferred_sigma"] <= 0.25


def test_borah_peak_single_event_displacements():
    # Borah Peak 1983 (Crone et al. 1987, from memory): maximum surface displacement 2.7 m,
    # average about 0.8 m, Mw 6.9; W&C94 Table 2B MD and AD relations (sigma 0.34, 0.33).
    f = make_faults([ns_line(0, 0, 34_000)], event_max_displacement_m=np.array([2.7]))
    sc, _ = rupture_scenarios(f, event_avg_displacement_m=0.8)
    assert sc["mag_md_wc94"].iloc[0] == pytest.approx(6.9, abs=0.34)
    assert sc["mag_ad_wc94"].iloc[0] == pytest.approx(6.9, abs=0.33)


def test_longer_rupture_larger_magnitude():
    lengths = [3_000, 8_000, 20_000, 45_000]
    f = make_faults([ns_line(10_000 * i, 0, L) for i, L in enumerate(lengths)])
    sc, _ = rupture_scenarios(f)
    sc = sc.sort_values("length_km")
    for col in ("mag_srl_wc94", "mag_srl_all_wc94", "mag_ra_wc94", "mag_hb02", "mag_preferred"):
        assert np.all(np.diff(sc[col].to_numpy()) > 0), col


def test_system_segment_and_linked_scenarios():
    # System 1: two collinear segments 1 km apart; fault 3 is 3 km beyond, system 2.
    lines = [ns_line(0, 0, 10_000), ns_line(0, 11_000, 10_000), ns_line(0, 24_000, 6_000)]
    f = make_faults(lines, system_id=np.array([1, 1, 2]))
    sc, _ = rupture_scenarios(f)
    assert sorted(sc["fault_ids"]) == ["1", "1,2", "2", "3"]
    sys_row = sc.loc[sc["kind"] == "system"].iloc[0]
    assert sys_row["system_id"] == 1
    # end-to-end length along strike of the system: 21 km (10 + 1 gap + 10)
    assert sys_row["length_km"] == pytest.approx(21.0)
    assert sys_row["sum_trace_length_km"] == pytest.approx(20.0)
    # linking across gaps below 5 km adds 2+3 and 1+2+3, spanning both systems
    sc2, _ = rupture_scenarios(f, link_gap_m=5_000)
    linked = sc2.loc[sc2["kind"] == "linked"]
    assert sorted(linked["fault_ids"]) == ["1,2,3", "2,3"]
    assert (linked["system_id"] == -1).all()
    assert linked.loc[linked["fault_ids"] == "1,2,3", "length_km"].iloc[0] == pytest.approx(30.0)
    # gap too small: no link across the 3 km gap
    sc3, _ = rupture_scenarios(f, link_gap_m=2_000)
    assert (sc3["kind"] != "linked").all()
    # the whole system is larger than each of its segments
    seg_max = sc.loc[sc["kind"] == "segment", "mag_preferred"].max()
    assert sys_row["mag_preferred"] > seg_max


def test_only_active_or_listed_faults():
    f = make_faults([ns_line(0, 0, 10_000), ns_line(5_000, 0, 12_000)], active=np.array([True, False]))
    sc, _ = rupture_scenarios(f)
    assert list(sc["fault_ids"]) == ["1"]
    sc2, _ = rupture_scenarios(f, fault_ids=[2])
    assert list(sc2["fault_ids"]) == ["2"]
    with pytest.raises(ParameterError):
        rupture_scenarios(f, fault_ids=[7])


def test_out_of_range_inputs_warn():
    # 60 km is beyond the 2.5-41 km SRL range of W&C94 normal faults (verified).
    f = make_faults([ns_line(0, 0, 60_000)])
    _, warns = rupture_scenarios(f)
    assert any("srl_wc94" in w and "fault 1" in w for w in warns)


# ------------------------------------------------------------------ slip rates


def test_monte_carlo_shape_and_seed():
    n = 3
    args = (np.full(n, 20.0), np.full(n, 2.0), np.full(n, 10.0), np.full(n, 2.0), np.full(n, 60.0))
    a = slip_rate_draws(*args, n_draws=500, seed=7)
    b = slip_rate_draws(*args, n_draws=500, seed=7)
    c = slip_rate_draws(*args, n_draws=500, seed=8)
    assert a["vert"].shape == (n, 500)
    assert np.array_equal(a["vert"], b["vert"]) and np.array_equal(a["net"], b["net"])
    assert not np.array_equal(a["vert"], c["vert"])
    assert np.all(a["throw_m"] > 0)  # truncated at zero
    assert np.all((a["dip_deg"] >= 50) & (a["dip_deg"] <= 70))


def test_median_rate_is_throw_over_age():
    # slip rate = displacement / age of the offset surface (definition); 1 m / 1 ka = 1 mm/yr.
    f = make_faults(
        [ns_line(0, 0, 10_000), ns_line(5_000, 0, 10_000)],
        max_throw_m=np.array([30.0, 12.0]),
        max_throw_err_m=np.array([3.0, 1.0]),
        surface_age_ka=np.array([15.0, 40.0]),
    )
    t, _ = slip_rates(f, n_draws=20_000, seed=1, age_rel_err=0.2)
    assert t["slip_rate_vert_mm_yr"].to_numpy() == pytest.approx([2.0, 0.3], rel=0.03)
    assert np.all(t["slip_rate_vert_p16_mm_yr"] < t["slip_rate_vert_mm_yr"])
    assert np.all(t["slip_rate_vert_mm_yr"] < t["slip_rate_vert_p84_mm_yr"])
    t2, _ = slip_rates(f, n_draws=20_000, seed=1, age_rel_err=0.2)
    assert t2.equals(t)


def test_rates_without_uncertainty_are_geometry():
    # No errors, no dip range. The slip vector by a different route: scipy's Rotation turns a
    # unit vector pointing along the dip direction (x) down by the dip about the strike axis (y);
    # scaled so its vertical part is the throw rate, its horizontal part is the heave rate and
    # its length the net dip-slip rate.
    from scipy.spatial.transform import Rotation

    f = make_faults([ns_line(0, 0, 10_000)], max_throw_err_m=np.array([0.0]), dip_deg=np.array([50.0]))
    t, _ = slip_rates(f, age_rel_err=0.0, dip_range_deg=0.0, n_draws=200)
    v = 15.0 / 15.0  # 15 m in 15 ka -> 1 mm/yr
    slip = Rotation.from_euler("y", 50.0, degrees=True).apply([1.0, 0.0, 0.0])
    slip *= v / abs(slip[2])
    assert t["slip_rate_vert_mm_yr"].iloc[0] == pytest.approx(v, rel=1e-12)
    assert t["slip_rate_horiz_mm_yr"].iloc[0] == pytest.approx(np.hypot(slip[0], slip[1]), rel=1e-12)
    assert t["slip_rate_net_mm_yr"].iloc[0] == pytest.approx(np.linalg.norm(slip), rel=1e-12)
    assert t["slip_rate_vert_p16_mm_yr"].iloc[0] == pytest.approx(v, rel=1e-12)


def test_older_surface_lower_rate():
    ages = np.array([5.0, 10.0, 50.0, 200.0])
    f = make_faults([ns_line(5_000 * i, 0, 10_000) for i in range(4)], surface_age_ka=ages)
    t, _ = slip_rates(f, n_draws=2_000, seed=3)
    assert np.all(np.diff(t["slip_rate_vert_mm_yr"].to_numpy()) < 0)
    assert np.all(np.diff(t["slip_rate_net_mm_yr"].to_numpy()) < 0)


def test_recurrence_is_event_displacement_over_rate():
    # recurrence = single-event displacement / slip rate, both on the same basis (definition; science
    # review: the average displacement per event goes with the mean slip rate along the fault, not the
    # rate at the maximum throw). D 1 m; net rate at the maximum T/(t sin 60) = 15/15/0.866 mm/yr; the
    # mean rate is that times mean/max throw -> 866 yr * max/mean.
    f = make_faults([ns_line(0, 0, 10_000)], max_throw_err_m=np.array([0.0]))
    t, _ = slip_rates(f, age_rel_err=0.0, dip_range_deg=0.0, n_draws=200, event_displacement_m=1.0)
    mean_over_max = f["mean_throw_m"].iloc[0] / f["max_throw_m"].iloc[0]
    assert 0 < mean_over_max < 1
    expected = 1000.0 * math.sin(math.radians(60)) / mean_over_max
    assert t["recurrence_yr"].iloc[0] == pytest.approx(expected, rel=1e-9)
    assert t["recurrence_basis"].iloc[0] == "average event displacement / mean slip rate"
    # without a mean throw the maximum rate is used, and the basis says so
    t_max, _ = slip_rates(
        f.drop(columns="mean_throw_m"),
        age_rel_err=0.0,
        dip_range_deg=0.0,
        n_draws=200,
        event_displacement_m=1.0,
    )
    assert t_max["recurrence_yr"].iloc[0] == pytest.approx(1000.0 * math.sin(math.radians(60)), rel=1e-9)
    assert "maximum throw" in t_max["recurrence_basis"].iloc[0]
    assert t["event_displacement_source"].iloc[0] == "user"
    # from W&C94 AD-on-M (from memory) at M 6.9: within its scatter (0.33 log10 units) of the
    # average surface displacement of the Mw 6.9 Borah Peak earthquake, about 0.8 m (Crone et
    # al. 1987, from memory)
    t2, _ = slip_rates(
        f, age_rel_err=0.0, dip_range_deg=0.0, n_draws=20_000, magnitude_for_displacement=np.array([6.9])
    )
    d = t2["event_displacement_m"].iloc[0]
    assert abs(math.log10(d) - math.log10(0.8)) < 0.33
    assert t2["event_displacement_source"].iloc[0] != "user"
    assert t2["recurrence_yr"].iloc[0] == pytest.approx(
        d * 1000 * math.sin(math.radians(60)) / mean_over_max, rel=0.03
    )
    assert t2["recurrence_p16_yr"].iloc[0] < t2["recurrence_yr"].iloc[0] < t2["recurrence_p84_yr"].iloc[0]


def test_fault_without_age_skipped_but_magnitude_given():
    f = make_faults(
        [ns_line(0, 0, 10_000), ns_line(5_000, 0, 20_000)], surface_age_ka=np.array([np.nan, 12.0])
    )
    res = screen_hazard(f, n_draws=500)
    w = [m for m in res.warnings if "surface_age_ka" in m]
    assert w and "1" in w[0] and "skipped" in w[0]
    row = res.faults.set_index("fault_id").loc[1]
    assert np.isnan(row["slip_rate_vert_mm_yr"]) and np.isnan(row["recurrence_yr"])
    assert row["rate_flag"] == "no_age"
    assert np.isfinite(row["mag_preferred"]) and np.isfinite(row["mag_srl_wc94"])
    assert np.isfinite(res.faults.set_index("fault_id").loc[2, "slip_rate_vert_mm_yr"])


@pytest.mark.parametrize("bad_age", [-3.0, 0.0])
def test_negative_or_zero_age_is_an_error(bad_age):
    f = make_faults(
        [ns_line(0, 0, 10_000), ns_line(5_000, 0, 10_000)], surface_age_ka=np.array([10.0, bad_age])
    )
    with pytest.raises(InputError, match="2"):
        slip_rates(f, n_draws=200)


def test_age_in_years_is_flagged():
    # 15 000 "ka" that was really 15 000 yr: age above 5000 ka and a rate of 0.001 mm/yr.
    f = make_faults(
        [ns_line(0, 0, 10_000), ns_line(5_000, 0, 10_000), ns_line(10_000, 0, 10_000)],
        surface_age_ka=np.array([15_000.0, 15.0, 0.2]),
        max_throw_m=np.array([5.0, 15.0, 15.0]),
    )
    t, warns = slip_rates(f, n_draws=2_000)
    flags = dict(zip(t["fault_id"], t["rate_flag"], strict=True))
    assert "age_suspect" in flags[1] and "rate_low" in flags[1]
    assert flags[2] == "ok"
    assert "rate_high" in flags[3]  # 75 mm/yr on a mapped scarp
    assert any("fault 1" in w and "years" in w for w in warns)
    assert any("fault 3" in w and "rate_high" in w for w in warns)


# ------------------------------------------------------------------ zones


def _side_distance(zone, point, direction, far=5_000.0):
    """Distance from point along direction to the zone boundary (first exit)."""
    ray = shapely.LineString([point, (point[0] + far * direction[0], point[1] + far * direction[1])])
    inter = ray.intersection(zone)
    parts = shapely.get_parts(inter)
    # the part touching the start point
    p0 = shapely.Point(point)
    seg = min(parts, key=lambda g: g.distance(p0))
    return seg.length


@pytest.mark.parametrize("strike", [0.0, 37.0, 250.0])
def test_zone_contains_trace_and_is_wider_on_hanging_wall(strike):
    s = math.radians(strike)
    L = 4_000.0
    d = np.array([math.sin(s), math.cos(s)])  # strike unit vector (E, N)
    start = np.array([1_000.0, 2_000.0])
    line = shapely.LineString([start, start + L * d])
    dip_dir = (strike + 90.0) % 360.0  # right-hand rule
    f = make_faults([line], dip_dir_deg=np.array([dip_dir]))
    z, warns = rupture_zones(f, hw_width_m=150.0, fw_width_m=75.0, mapping_uncertainty_m=10.0)
    zone = z.geometry.iloc[0]
    assert zone.contains(line)
    mid = tuple(start + 0.5 * L * d)
    dd = math.radians(dip_dir)
    hw_dir = (math.sin(dd), math.cos(dd))
    fw_dir = (-hw_dir[0], -hw_dir[1])
    assert _side_distance(zone, mid, hw_dir) == pytest.approx(160.0, abs=0.5)
    assert _side_distance(zone, mid, fw_dir) == pytest.approx(85.0, abs=0.5)
    assert z["hw_width_m"].iloc[0] == 150.0 and z["fw_width_m"].iloc[0] == 75.0
    assert z["mapping_uncertainty_m"].iloc[0] == 10.0
    assert not warns


def test_zone_independent_of_digitising_direction():
    line = shapely.LineString([(0, 0), (800, 1500), (900, 3000), (2000, 4200)])
    f1 = make_faults([line], dip_dir_deg=np.array([120.0]))
    f2 = make_faults([line.reverse()], dip_dir_deg=np.array([120.0]))
    z1, _ = rupture_zones(f1, map_scale_denominator=25_000)
    z2, _ = rupture_zones(f2, map_scale_denominator=25_000)
    a, b = z1.geometry.iloc[0], z2.geometry.iloc[0]
    assert a.symmetric_difference(b).area < 1e-6 * a.area
    assert a.contains(line)
    # the hanging wall (east-south-east) side holds more of the zone than the footwall
    hw = shapely.buffer(line, 1_000, single_sided=True)  # left of the line: west side here
    assert a.difference(hw).area > a.intersection(hw).area


def test_mapping_uncertainty_from_map_scale():
    # 0.5 mm at map scale (common practice, from memory): 1:25 000 -> 12.5 m.
    assert mapping_uncertainty_from_scale(25_000) == pytest.approx(12.5)
    f = make_faults([ns_line(0, 0, 3_000)])
    z, _ = rupture_zones(f, map_scale_denominator=25_000)
    assert z["mapping_uncertainty_m"].iloc[0] == pytest.approx(12.5)
    # the zone grows by the uncertainty on both sides: area ~ L * (150 + 75 + 2 * 12.5)
    assert z["area_m2"].iloc[0] == pytest.approx(3_000 * 250 + math.pi * (75 + 12.5) ** 2 / 2 * 2, rel=0.01)
    with pytest.raises(ParameterError):
        mapping_uncertainty_from_scale(0)


def test_unknown_dip_direction_gives_symmetric_zone_and_warning():
    f = make_faults([ns_line(0, 0, 3_000)], dip_dir_deg=np.array([np.nan]))
    z, warns = rupture_zones(f, mapping_uncertainty_m=0.0)
    assert z["zone_kind"].iloc[0] == "symmetric_no_dip_dir"
    assert any("fault(s) 1" in w for w in warns)
    zone = z.geometry.iloc[0]
    assert _side_distance(zone, (0.0, 1500.0), (1.0, 0.0)) == pytest.approx(150.0, abs=0.5)
    assert _side_distance(zone, (0.0, 1500.0), (-1.0, 0.0)) == pytest.approx(150.0, abs=0.5)


# ------------------------------------------------------------------ all together + figures


def test_screen_hazard_fields_and_figures(tmp_path):
    from faultmap.hazard.figures import hazard_map, magnitude_by_relation

    lines = [ns_line(0, 0, 12_000), ns_line(300, 12_800, 9_000), ns_line(8_000, 0, 6_000)]
    f = make_faults(lines, system_id=np.array([1, 1, 2]), active=np.array([True, True, False]))
    res = screen_hazard(f, n_draws=1_000, mapping_uncertainty_m=5.0)
    for col in (
        "mag_srl_wc94",
        "mag_preferred",
        "mag_preferred_sigma",
        "m0_nm",
        "slip_rate_vert_mm_yr",
        "slip_rate_vert_p16_mm_yr",
        "slip_rate_vert_p84_mm_yr",
        "slip_rate_horiz_mm_yr",
        "slip_rate_net_mm_yr",
        "recurrence_yr",
        "rate_flag",
        "hazard_screened",
    ):
        assert col in res.faults.columns, col
    assert list(res.faults["hazard_screened"]) == [True, True, False]
    assert np.isnan(res.faults["mag_preferred"].iloc[2])
    assert sorted(res.scenarios["fault_ids"]) == ["1", "1,2", "2"]
    assert list(res.zones["fault_id"]) == [1, 2]
    assert {"fault_id", "hw_width_m", "fw_width_m", "mapping_uncertainty_m"} <= set(res.zones.columns)
    assert res.settings["caution"] == CAUTION
    assert "not a site-specific" in CAUTION and "licensed professionals" in CAUTION

    fig = hazard_map(res.faults, res.zones)
    ax = fig.axes[0]
    assert ax.get_xlabel() == "Easting (m)" and ax.get_ylabel() == "Northing (m)"
    texts = " ".join(t.get_text() for t in fig.texts).replace("\n", " ")
    assert "not a site-specific" in texts
    assert any(t.get_text().startswith("F1") for t in ax.texts)
    fig.savefig(tmp_path / "map.png", dpi=150)
    assert (tmp_path / "map.png").stat().st_size > 10_000

    fig2 = magnitude_by_relation(res.scenarios)
    ax2 = fig2.axes[0]
    assert "Mw" in ax2.get_ylabel()
    assert len(ax2.containers) == 5  # SRL x2, RA x2, H&B02 (no displacements given)
    assert "licensed professionals" in " ".join(t.get_text() for t in fig2.texts).replace("\n", " ")
    fig2.savefig(tmp_path / "mags.png", dpi=150)
    assert (tmp_path / "mags.png").stat().st_size > 10_000


# ------------------------------------------------------------------ tool wrapper


def _write_scene(tmp_path):
    """Two active traces (one without an age) and one inactive over a flat DEM."""
    import rasterio
    from rasterio.transform import from_origin

    x0, y0, px = 500_000.0, 7_000_000.0, 20.0
    z = np.full((300, 300), 100.0, dtype="float32")
    dem = tmp_path / "dem.tif"
    profile = dict(
        driver="GTiff",
        width=300,
        height=300,
        count=1,
        dtype="float32",
        crs=CRS,
        transform=from_origin(x0, y0, px, px),
        nodata=-9999.0,
    )
    with rasterio.open(dem, "w", **profile) as dst:
        dst.write(z, 1)
    g = gpd.GeoDataFrame(
        {
            "name": ["north", "south", "old"],
            "dip": [60.0, 55.0, 70.0],
            "dip_dir": [90.0, 90.0, 270.0],
            "active": [1, 1, 0],
            "surface_age_ka": [12.0, None, 100.0],
        },
        geometry=[
            shapely.LineString([(x0 + 1000, y0 - 5500), (x0 + 1100, y0 - 500)]),
            shapely.LineString([(x0 + 1150, y0 - 5900), (x0 + 1300, y0 - 5700), (x0 + 1250, y0 - 5000)]),
            shapely.LineString([(x0 + 4000, y0 - 5000), (x0 + 4000, y0 - 1000)]),
        ],
        crs=CRS,
    )
    faults = tmp_path / "faults.gpkg"
    g.to_file(faults, layer="traces")
    return faults, dem


def _stub_throw(ctx, p):
    """Stand-in for the throw tool: throw = 1% of length, 10% error (synthetic)."""
    f = ctx.faults.copy()
    f["max_throw_m"] = 0.01 * f["length_m"]
    f["max_throw_err_m"] = 0.1 * f["max_throw_m"]
    f["mean_throw_m"] = 0.5 * f["max_throw_m"]
    ctx.faults = f


def test_tool_runs_in_pipeline_and_writes_layers(tmp_path):
    import pyogrio

    from faultmap.hazard.tool import MAGNITUDE_FIGURE, MAP_FIGURE, TOOL
    from faultmap.registry import Tool, load_tools
    from faultmap.runner import run_tools

    faults, dem = _write_scene(tmp_path)
    reg = load_tools()
    tools = {
        "prepare": reg["prepare"],
        "throw": Tool("throw", "stub", run=_stub_throw, requires=("prepare",), inputs=("faults", "dem")),
        "hazard": TOOL,
    }
    res = run_tools(
        ["hazard"],
        inputs={"faults": str(faults), "dem": str(dem)},
        params={"hazard": {"n_draws": 500, "map_scale_denominator": 25000}},
        out=tmp_path / "out.gpkg",
        figures=tmp_path / "fig",
        tools=tools,
        quiet=True,
        echo=lambda m: None,
    )
    layers = {name for name, _ in pyogrio.list_layers(res.gpkg)}
    assert {"faults", "rupture_scenarios", "rupture_zones", "run_info"} <= layers
    zones = gpd.read_file(res.gpkg, layer="rupture_zones")
    assert len(zones) == 2 and np.allclose(zones["mapping_uncertainty_m"], 12.5)
    f = gpd.read_file(res.gpkg, layer="faults")
    screened = f.loc[f["hazard_screened"].astype(bool)]
    assert len(screened) == 2 and screened["mag_preferred"].notna().all()
    # the fault without an age: rates skipped, named in a warning
    no_age = screened.loc[screened["rate_flag"] == "no_age", "fault_id"]
    assert len(no_age) == 1
    assert any("surface_age_ka" in w and str(int(no_age.iloc[0])) in w for w in res.warnings)
    info = dict(zip(res.run_info["key"], res.run_info["value"], strict=True))
    assert info["hazard.caution"] == CAUTION
    assert any(CAUTION in w for w in res.warnings)
    # written once in run_info (failure reported: the same caution twice)
    assert sum(CAUTION in v for v in res.run_info["value"]) == 1
    assert {p.name for p in res.figures} == {MAP_FIGURE, MAGNITUDE_FIGURE}


def test_tool_wrapper_on_hand_built_context():
    from faultmap.hazard.tool import TOOL
    from faultmap.runner import RunContext

    f = make_faults([ns_line(0, 0, 12_000), ns_line(0, 12_500, 8_000)], system_id=np.array([1, 1]))
    ctx = RunContext(crs=f.crs, echo=lambda m: None, quiet=True)
    ctx.faults = f
    ctx.current_tool = "hazard"
    p = TOOL.resolve_params({"n_draws": 300, "fault_ids": "2"})
    TOOL.run(ctx, p)
    assert list(ctx.faults["hazard_screened"]) == [False, True]
    assert list(ctx.layers["rupture_scenarios"]["fault_ids"]) == ["2"]
    assert ctx.records["hazard.mapping_uncertainty_m_used"] == 0.0  # no DEM, no scale: recorded
    with pytest.raises(ParameterError):
        TOOL.run(ctx, TOOL.resolve_params({"fault_ids": "two"}))


def test_missing_system_id_is_a_system_of_its_own():
    # A screened fault without a system_id (e.g. faults not conditioned by prepare) must not crash
    # and is scenario'd alone; W&C (1994) normal SRL: M = 4.86 + 1.32 log10(SRL km) (BSSA 84, verified).
    import geopandas as gpd
    import numpy as np
    import shapely

    from faultmap.hazard.scenarios import rupture_scenarios

    f = gpd.GeoDataFrame(
        {
            "fault_id": [1, 2],
            "dip_deg": [60.0, 60.0],
            "dip_dir_deg": [90.0, 90.0],
            "system_id": [1.0, np.nan],
            "active": [True, True],
            "length_m": [10000.0, 20000.0],
        },
        geometry=[shapely.LineString([(0, 0), (0, 10000)]), shapely.LineString([(5000, 0), (5000, 20000)])],
        crs="EPSG:32633",
    )
    sc, _warnings = rupture_scenarios(f)
    assert len(sc) == 2
    assert sorted(sc["length_km"].round(3)) == [10.0, 20.0]
