"""Trace conditioning (faultmap.traces.conditioning and the prepare tool)."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pyogrio
import pytest
import shapely
from pyproj import CRS, Geod

from faultmap.errors import GeometryError, InputError
from faultmap.numerics.directions import axial_mean_deg
from faultmap.runner import run_tools
from faultmap.traces.conditioning import censor_flags, condition_traces, link_systems, strike_from_geometry

UTM = "EPSG:32753"


def _gdf(geoms, **cols):
    return gpd.GeoDataFrame(cols, geometry=list(geoms), crs=UTM)


def test_strike_right_hand_rule():
    # Right-hand rule (conventions; common practice): dip direction = strike + 90.
    line = shapely.LineString([(0, 0), (0, 1000)])  # trace runs north
    assert strike_from_geometry([line], [90.0])[0] == pytest.approx(0.0)
    assert strike_from_geometry([line], [270.0])[0] == pytest.approx(180.0)
    # unknown dip direction: axis in [0, 180)
    assert strike_from_geometry([shapely.reverse(line)])[0] == pytest.approx(0.0)


def test_axial_mean_is_direction_free():
    # Doubled-angle axial mean (Mardia & Jupp 2000): 10 and 190 deg are the same axis.
    assert axial_mean_deg([10.0, 190.0], [1.0, 1.0])[0] == pytest.approx(10.0)
    assert axial_mean_deg([170.0, 10.0], [1.0, 1.0])[0] % 180 == pytest.approx(0.0, abs=1e-9)


def test_length_weighted_strike():
    # A trace of two segments, 3 km at 0 deg and 1 km at 90 deg: the axial mean of
    # doubled angles weighted by length is atan2(1*sin180, 3*cos0 + 1*cos180)/2 = 0 deg (derived).
    line = shapely.LineString([(0, 0), (0, 3000), (1000, 3000)])
    assert strike_from_geometry([line])[0] == pytest.approx(0.0, abs=1e-9)


def test_conditioning_explodes_drops_and_reports():
    z_line = shapely.LineString([(0, 0, 5), (0, 1000, 7)])
    geoms = [
        shapely.MultiLineString([[(0, 0), (0, 500)], [(10, 600), (10, 1500)]]),
        shapely.LineString([(100, 0), (100, 0)]),  # zero length
        z_line,
        shapely.LineString([(0, 1000), (0, 0)]),  # duplicate of z_line's 2-D trace, reversed
        None,
    ]
    out, warns = condition_traces(_gdf(geoms, name=["m", "z", "3d", "dup", "none"]))
    assert len(out) == 3
    assert not shapely.has_z(out.geometry.to_numpy()).any()
    text = " ".join(warns)
    assert "zero-length" in text and "duplicate" in text and "multi-part" in text and "empty geometry" in text
    assert list(out["fault_id"]) == [1, 2, 3]
    assert list(out["source_fid"]) == [1, 1, 3]


@pytest.mark.parametrize(
    "bad, field",
    [({"dip": [0.0]}, "dip"), ({"dip": [-10.0]}, "dip"), ({"dip": [95.0]}, "dip"),
     ({"dip": ["steep"]}, "dip"), ({"dip_dir": [400.0]}, "dip direction"), ({"active": ["maybe"]}, "active")],
)
def test_bad_attributes_are_one_line_errors(bad, field):
    g = _gdf([shapely.LineString([(0, 0), (0, 100)])], **bad)
    with pytest.raises(InputError) as err:
        condition_traces(g, where="f.gpkg, layer 'traces'")
    msg = str(err.value)
    assert "\n" not in msg and "feature 1" in msg and field in msg and "f.gpkg" in msg


def test_points_and_polygons_rejected():
    g = _gdf([shapely.Point(0, 0), shapely.LineString([(0, 0), (1, 1)]), shapely.box(0, 0, 1, 1)])
    with pytest.raises(GeometryError, match="features 1, 3"):
        condition_traces(g)


def test_all_zero_length_is_an_error():
    g = _gdf([shapely.LineString([(0, 0), (0, 0)]), shapely.LineString([(5, 5), (5, 5)])])
    with pytest.raises(GeometryError, match="zero length"):
        condition_traces(g)


def test_touching_parts_are_joined_separate_parts_split():
    # A feature digitised in two pieces that meet end to end is one trace (common practice);
    # pieces with a gap are separate traces.
    touching = shapely.MultiLineString([[(0, 0), (0, 500)], [(0, 500), (30, 1500)]])
    apart = shapely.MultiLineString([[(900, 0), (900, 500)], [(910, 600), (910, 1500)]])
    out, warns = condition_traces(_gdf([touching, apart]))
    assert list(out["source_fid"]) == [1, 2, 2]
    assert out["length_m"].iloc[0] == pytest.approx(500 + np.hypot(30, 1000))
    assert any("joined 1 parts" in w for w in warns) and any("split 1 extra parts" in w for w in warns)


def test_default_dip_and_sources():
    g = _gdf([shapely.LineString([(0, 0), (0, 100)])] * 1 + [shapely.LineString([(50, 0), (50, 100)])],
             dip=[None, 45.0], dip_dir=[None, 90.0])
    out, warns = condition_traces(g, dip_deg=62.0)
    assert list(out["dip_deg"]) == [62.0, 45.0]
    assert list(out["dip_source"]) == ["default", "attribute"]
    assert list(out["dip_dir_source"]) == ["unknown", "attribute"]
    assert any("default dip 62" in w for w in warns)


def test_digitising_direction_never_matters():
    rng = np.random.default_rng(3)
    lines = []
    for _k in range(12):
        x = rng.uniform(0, 20000, 1)[0]
        y = rng.uniform(0, 20000, 1)[0]
        pts = np.c_[x + np.cumsum(rng.normal(30, 40, 6)), y + np.cumsum(rng.uniform(200, 600, 6))]
        lines.append(shapely.LineString(pts))
    dd = np.where(np.arange(12) % 3 == 0, np.nan, np.where(np.arange(12) % 2 == 0, 95.0, 275.0))
    g1 = _gdf(lines, dip_dir=dd)
    g2 = _gdf(shapely.reverse(np.array(lines)), dip_dir=dd)
    a, _ = condition_traces(g1)
    b, _ = condition_traces(g2)
    cols = ["fault_id", "length_m", "strike_deg", "dip_deg", "dip_dir_deg", "dip_source", "dip_dir_source"]
    for c in cols:
        np.testing.assert_array_equal(a[c].to_numpy(), b[c].to_numpy(), err_msg=c)
    assert shapely.equals_exact(a.geometry.to_numpy(), b.geometry.to_numpy(), 1e-9).all()
    sa = link_systems(a.geometry.to_numpy(), a["strike_deg"], a["dip_dir_deg"], link_distance_m=800, link_angle_deg=20)
    sb = link_systems(b.geometry.to_numpy(), b["strike_deg"], b["dip_dir_deg"], link_distance_m=800, link_angle_deg=20)
    np.testing.assert_array_equal(sa, sb)
    ca, _ = censor_flags(a.geometry.to_numpy(), tolerance_m=100, dem_bounds=(0, 0, 21000, 21000))
    cb, _ = censor_flags(b.geometry.to_numpy(), tolerance_m=100, dem_bounds=(0, 0, 21000, 21000))
    np.testing.assert_array_equal(ca, cb)


def test_linkage_en_echelon_yes_side_by_side_no():
    seg1 = shapely.LineString([(0, 0), (0, 5000)])
    seg2 = shapely.LineString([(300, 4800), (300, 9000)])  # relay: 200 m overlap, 300 m step
    side = shapely.LineString([(2000, 0), (2000, 5000)])  # parallel neighbour, 2 km away
    near_side = shapely.LineString([(400, 500), (400, 3500)])  # side-by-side, 400 m away: not a segment
    opposite = shapely.LineString([(0, 9300), (0, 12000)])  # along strike but dips the other way
    lines = np.array([seg1, seg2, side, near_side, opposite])
    strike = np.zeros(5)
    dd = np.array([90.0, 90.0, 90.0, 90.0, 270.0])
    sid = link_systems(lines, strike, dd, link_distance_m=1000, link_angle_deg=20)
    assert sid[0] == sid[1]
    assert len({sid[0], sid[2], sid[3], sid[4]}) == 4
    assert list(sid) == [1, 1, 2, 3, 4]


def test_censoring_edge_nodata_and_study_area():
    lines = np.array([
        shapely.LineString([(100, 100), (100, 900)]),   # well inside
        shapely.LineString([(500, 5), (500, 400)]),     # tip at the DEM edge
        shapely.LineString([(700, 500), (700, 800)]),   # tip next to a void
    ])

    def sampler(x, y):
        z = np.ones_like(x)
        z[(np.abs(x - 700) < 30) & (np.abs(y - 830) < 30)] = np.nan
        return z

    c, why = censor_flags(lines, tolerance_m=50, dem_bounds=(0, 0, 1000, 1000), sampler=sampler)
    assert list(c) == [False, True, True]
    assert list(why) == ["", "dem_edge", "nodata"]
    area = shapely.box(0, 0, 1000, 880)
    c2, why2 = censor_flags(lines[:1], tolerance_m=50, study_area=area)
    assert c2[0] and why2[0] == "study_area"


def test_lengths_match_geodesic_lengths(tmp_path):
    # Source: pyproj.Geod (Karney 2013 geodesics). Traces given in lon/lat go into the
    # local UTM zone; projected lengths must match ellipsoidal ones within the UTM scale
    # factor range (0.9996 on the central meridian, up to ~1.001 at the zone edge).
    lon0, lat0 = 134.2, -24.6
    lines = [shapely.LineString([(lon0 + 0.01 * k, lat0), (lon0 + 0.01 * k + 0.02, lat0 + 0.08)]) for k in range(5)]
    g = gpd.GeoDataFrame({"name": list("abcde")}, geometry=lines, crs="EPSG:4326")
    path = tmp_path / "geo.gpkg"
    g.to_file(path)
    res = run_tools(["prepare"], inputs={"faults": path}, out=tmp_path / "o.gpkg", quiet=True)
    faults = res.layers["faults"]
    assert CRS.from_user_input(faults.crs).equals(CRS.from_epsg(32753))  # zone 53 S holds 134.2 E
    geod = Geod(ellps="WGS84")
    for line, got in zip(lines, faults["length_m"], strict=False):
        ref = geod.line_length(*line.xy)
        assert got / ref == pytest.approx(1.0, abs=1.2e-3)
    assert any("geographic" in n for n in res.run_info["value"])


def test_traces_reprojected_to_dem_crs(scene, tmp_path):
    g = scene["gdf"].to_crs("EPSG:3577")  # a different projected CRS
    path = tmp_path / "other.gpkg"
    g.to_file(path)
    res = run_tools(["prepare"], inputs={"faults": path, "dem": scene["dem"]}, out=tmp_path / "o.gpkg", quiet=True)
    f = res.layers["faults"]
    assert CRS.from_user_input(f.crs).equals(CRS.from_epsg(32753))
    back = pyogrio.read_dataframe(tmp_path / "o.gpkg", layer="faults")
    assert back.crs.equals(CRS.from_epsg(32753))
    # same traces as in the DEM's CRS directly (reprojection round trip, pyproj)
    direct = run_tools(["prepare"], inputs={"faults": scene["faults"], "dem": scene["dem"]},
                       out=tmp_path / "d.gpkg", quiet=True).layers["faults"]
    np.testing.assert_allclose(f["length_m"], direct["length_m"], rtol=1e-6)


def test_custom_transverse_mercator_survives_exactly(tmp_path):
    # A custom TM on GRS80 must be written and re-read exactly (pitfalls: loose EPSG matching).
    custom = CRS.from_proj4("+proj=tmerc +lat_0=0 +lon_0=13.7 +k=0.9999 +x_0=400000 +y_0=-5000000 "
                            "+ellps=GRS80 +units=m +no_defs")
    lines = [shapely.LineString([(400000 + 900 * k, 300000), (400200 + 900 * k, 303000)]) for k in range(4)]
    g = gpd.GeoDataFrame({"dip": [60.0] * 4}, geometry=lines, crs=custom)
    path = tmp_path / "custom.gpkg"
    g.to_file(path)
    out = tmp_path / "res.gpkg"
    run_tools(["prepare"], inputs={"faults": path}, out=out, quiet=True)
    back = pyogrio.read_dataframe(out, layer="faults")
    assert back.crs.equals(custom)
    # lengths match the traces (shapely length in the same CRS)
    np.testing.assert_allclose(back["length_m"], shapely.length(np.array(lines)), rtol=1e-12)


def test_one_axial_mean_everywhere():
    # Doubled-angle axial mean (Mardia & Jupp 2000): every analysis that averages strikes uses the same
    # implementation and agrees on a known case: two equal axes at 10 and 50 deg average to 30 deg;
    # a north-south set gives 0, never 180 (the range is [0, 180)).
    from faultmap.extension.transect_layout import mean_strike_deg
    from faultmap.numerics.directions import axial_mean_deg as base
    from faultmap.rift import axial_mean_deg as width_mean

    assert base([10.0, 230.0], [1.0, 1.0])[0] == pytest.approx(30.0)
    assert width_mean(np.array([10.0, 230.0]), np.array([1.0, 1.0])) == pytest.approx(30.0)
    assert width_mean(np.array([0.0, 180.0, 0.0]), None) == 0.0
    g = _gdf([shapely.LineString([(0, 0), (0, 1000)]), shapely.LineString([(50, 1000), (50, 0)])])
    assert mean_strike_deg(g) == 0.0
