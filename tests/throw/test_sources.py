"""Throws without a DEM: from attributes and from point measurements (faultmap.throw.from_*).

Point measurements are taken on a synthetic scene whose throw profiles are known
(faultmap.synthetic.profile_shapes: elliptical, triangular and skewed profiles); the maximum throw
from points that cover the peak must be within 10 % of the scene's truth (the issue's criterion).
Attribute throws follow the dip-slip geometry T = D sin(dip) (analytic).
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import shapely

from faultmap.errors import InputError
from faultmap.synthetic.profile_shapes import throw_profile
from faultmap.throw.from_attributes import MEAN_OVER_MAX, throws_from_attributes
from faultmap.throw.from_points import point_stations, snap_to_traces, throws_from_points
from faultmap.throw.step import STATION_COLUMNS

CRS = "EPSG:32633"
X0, Y0 = 500_000.0, 4_500_000.0

#: (length m, max throw m, shape, peak position)
SCENE = (
    (12_000.0, 240.0, "elliptical", 0.5),
    (6_000.0, 90.0, "triangular", 0.35),
    (9_000.0, 150.0, "elliptical", 0.7),
)


def _faults() -> gpd.GeoDataFrame:
    lines = [
        shapely.LineString(
            [(X0 + 4000.0 * i, Y0), (X0 + 4000.0 * i + 300.0, Y0 + L / 2), (X0 + 4000.0 * i, Y0 + L)]
        )
        for i, (L, *_rest) in enumerate(SCENE)
    ]
    return gpd.GeoDataFrame(
        {"fault_id": [1, 2, 3], "dip_deg": [60.0, 55.0, 70.0], "key": ["a", "b", "c"]},
        geometry=lines,
        crs=CRS,
    )


def _points(faults: gpd.GeoDataFrame, n_per: int = 9, seed: int = 1) -> gpd.GeoDataFrame:
    """Measurements at n_per positions along each fault (always one at the peak), 0-60 m off the trace."""
    rng = np.random.default_rng(seed)
    rows, geoms = [], []
    for (_, tmax, shape, peak), line, key in zip(SCENE, faults.geometry, faults["key"], strict=True):
        length = line.length
        s = np.r_[np.linspace(0.05, 0.95, n_per - 1), peak]
        true = throw_profile(s, tmax, shape=shape, peak_pos=peak)
        meas = true * (1.0 + 0.03 * rng.standard_normal(s.size))  # 3 % noise
        for si, t in zip(s, meas, strict=True):
            p = line.interpolate(si * length)
            off = rng.uniform(0.0, 60.0)
            geoms.append(shapely.Point(p.x + off, p.y))
            rows.append({"throw_m": t, "throw_err_m": 0.03 * t, "key": key})
    return gpd.GeoDataFrame(rows, geometry=geoms, crs=CRS)


def test_point_maxima_within_ten_percent_of_the_scene():
    faults = _faults()
    st, warns = point_stations(faults, _points(faults), tolerance_m=200.0)
    assert not warns
    f, stations = throws_from_points(faults, st)
    truth = np.array([t for _, t, _, _ in SCENE])
    assert np.all(np.abs(f["max_throw_m"].to_numpy() - truth) <= 0.10 * truth)
    assert (f["throw_source"] == "points").all() and (stations["throw_source"] == "points").all()
    # the same station layout as the DEM route (STATION_COLUMNS) plus throw_source
    assert set(STATION_COLUMNS) <= set(stations.columns)
    # mean throw: the elliptical profile's mean is pi/4 of its maximum (analytic); the piecewise-linear
    # integral through 9 points tapering to 0 at the tips comes within 10 %
    assert f["mean_throw_m"].iloc[0] == pytest.approx(np.pi / 4 * 240.0, rel=0.10)
    # heave = throw / tan(dip) at every station (definition)
    dip = faults.set_index("fault_id")["dip_deg"].reindex(stations["fault_id"]).to_numpy()
    assert np.allclose(stations["heave_m"], stations["throw_m"] / np.tan(np.radians(dip)))


def test_points_missing_the_peak_underestimate():
    # the criterion holds only where the points cover the peak: without it the maximum is lower
    faults = _faults()
    pts = _points(faults)
    far_from_peak = []
    for i in range(len(SCENE)):
        sub = pts.iloc[i * 9 : (i + 1) * 9 - 1]  # drop the point at the peak
        far_from_peak.append(sub.iloc[[0, 1, -2, -1]])
    st, _ = point_stations(faults, pd.concat(far_from_peak), tolerance_m=200.0)
    f, _ = throws_from_points(faults, st)
    assert (f["max_throw_m"].to_numpy() < 0.9 * np.array([t for _, t, _, _ in SCENE])).all()


def test_snapping_tolerance_and_join_field():
    faults = _faults()
    pts = gpd.GeoDataFrame(
        {"throw_m": [10.0, 20.0, 30.0], "key": ["a", "c", "zz"]},
        geometry=[
            shapely.Point(X0 + 100.0, Y0 + 3000.0),
            shapely.Point(X0 + 1900.0, Y0 + 3000.0),
            shapely.Point(X0 + 100.0, Y0 + 100.0),
        ],
        crs=CRS,
    )
    # nearest within 200 m: point 2 (1.6-1.8 km from both traces) is dropped
    idx, dist, off = snap_to_traces(pts.geometry.to_numpy(), faults.geometry.to_numpy(), tolerance_m=200.0)
    assert idx[0] == 0 and idx[1] == -1 and idx[2] == 0
    # distance along the trace from its first vertex = shapely's line_locate_point (reference library)
    assert dist[0] == pytest.approx(faults.geometry.iloc[0].project(pts.geometry.iloc[0]))
    assert off[0] == pytest.approx(faults.geometry.iloc[0].distance(pts.geometry.iloc[0]))
    # joined by key: point 2 goes to fault 'c' however far, 'zz' matches nothing
    idx, _, _ = snap_to_traces(
        pts.geometry.to_numpy(),
        faults.geometry.to_numpy(),
        tolerance_m=200.0,
        point_keys=pts["key"],
        line_keys=faults["key"],
    )
    assert list(idx) == [0, 2, -1]
    st, warns = point_stations(faults, pts, tolerance_m=200.0, where="pts.gpkg")
    assert len(st) == 2 and "farther than 200 m" in warns[-1] and "features 2" in warns[-1]
    # no error given: 10 % of the throw (the default), said in a warning
    assert np.allclose(st["throw_err_m"], 0.1 * st["throw_m"]) and "10 %" in warns[0]


def test_point_layer_errors_name_feature_field_and_value():
    faults = _faults()
    pts = gpd.GeoDataFrame({"throw_m": ["12", "about 5"]}, geometry=[shapely.Point(X0, Y0)] * 2, crs=CRS)
    with pytest.raises(InputError, match=r"pts.gpkg: feature 2: field 'throw_m' is 'about 5'"):
        point_stations(faults, pts, tolerance_m=200.0, where="pts.gpkg")
    with pytest.raises(InputError, match="no field 'offset' for the throws; columns are: throw_m"):
        point_stations(faults, pts, tolerance_m=200.0, fields={"throw_m": "offset"}, where="pts.gpkg")
    lines = gpd.GeoDataFrame({"throw_m": [1.0]}, geometry=[shapely.LineString([(0, 0), (1, 1)])], crs=CRS)
    with pytest.raises(InputError, match="not a Point"):
        point_stations(faults, lines, tolerance_m=200.0)


def test_attribute_throws_and_displacements():
    faults = _faults()
    faults["given_max_throw_m"] = [100.0, np.nan, np.nan]
    faults["given_max_throw_err_m"] = [5.0, np.nan, np.nan]
    faults["given_displacement_m"] = [999.0, 80.0, np.nan]
    faults["given_displacement_err_m"] = [np.nan, 10.0, np.nan]
    f, warns = throws_from_attributes(faults)
    # a given throw wins over a displacement; T = D sin(dip) and its error scale alike (dip-slip geometry)
    assert f["max_throw_m"].iloc[0] == 100.0 and f["max_throw_err_m"].iloc[0] == 5.0
    assert f["max_throw_m"].iloc[1] == pytest.approx(80.0 * np.sin(np.radians(55.0)))
    assert f["max_throw_err_m"].iloc[1] == pytest.approx(10.0 * np.sin(np.radians(55.0)))
    assert np.isnan(f["max_throw_m"].iloc[2]) and list(f["throw_source"]) == [
        "attributes",
        "attributes",
        "none",
    ]
    assert "fault ids 3" in warns[0]
    # assumed parabola: mean = 2/3 max (integral of 1 - r^2 over [-1, 1] is 4/3), heave integral =
    # mean x length / tan(dip)
    assert MEAN_OVER_MAX == pytest.approx(2.0 / 3.0)
    L = faults.geometry.iloc[0].length
    assert f["heave_integral_m2"].iloc[0] == pytest.approx(100.0 * 2 / 3 * L / np.tan(np.radians(60.0)))
    assert (f.loc[:1, "throw_profile"] == "parabola").all()
