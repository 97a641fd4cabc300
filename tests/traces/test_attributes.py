"""Fault-database attribute spellings (faultmap.traces.attributes) and their use in prepare.

The 16-point compass azimuths are the definition (22.5 degrees apart, clockwise from north); a
triple is (minimum, preferred, maximum) and a range's preferred value its midpoint (common practice
of fault databases).
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import shapely

from faultmap.errors import InputError
from faultmap.traces.attributes import COMPASS_DEG, parse_values, sigma_from_range
from faultmap.traces.conditioning import condition_traces

#: spelling -> (min, preferred, max, kind)
SPELLINGS = [
    (60, (60.0, 60.0, 60.0, "number")),
    (55.5, (55.5, 55.5, 55.5, "number")),
    ("60", (60.0, 60.0, 60.0, "number")),
    (" 45.0 ", (45.0, 45.0, 45.0, "number")),
    ("50-70", (50.0, 60.0, 70.0, "range")),
    ("50 - 70", (50.0, 60.0, 70.0, "range")),
    ("50\u201370", (50.0, 60.0, 70.0, "range")),
    ("0.2 to 0.6", (0.2, 0.4, 0.6, "range")),
    ("(50,60,70)", (50.0, 60.0, 70.0, "triple")),
    ("(45, 55, 75)", (45.0, 55.0, 75.0, "triple")),
    ("[0.1; 0.3; 0.5]", (0.1, 0.3, 0.5, "triple")),
    ("50/60/70", (50.0, 60.0, 70.0, "triple")),
    (None, (np.nan, np.nan, np.nan, "missing")),
    ("", (np.nan, np.nan, np.nan, "missing")),
    (np.nan, (np.nan, np.nan, np.nan, "missing")),
]


def test_spellings_table():
    values = pd.Series([s for s, _ in SPELLINGS], dtype=object)
    p = parse_values(values, field="dip", ids=np.arange(1, len(values) + 1))
    want = np.array([w[:3] for _, w in SPELLINGS], dtype=float)
    got = np.c_[p.min, p.preferred, p.max]
    assert np.allclose(got, want, equal_nan=True)
    assert list(p.kind) == [w[3] for _, w in SPELLINGS]
    # a range or triple is a 95 % interval: 1-sigma = width / 4 (our rule); plain numbers have none
    sig = sigma_from_range(p)
    assert sig[4] == pytest.approx(5.0) and sig[9] == pytest.approx(7.5) and np.isnan(sig[0])


def test_compass_letters():
    # the 16 points: N = 0, NNE = 22.5, ... NNW = 337.5 (definition of the compass rose)
    names = [
        "N",
        "NNE",
        "NE",
        "ENE",
        "E",
        "ESE",
        "SE",
        "SSE",
        "S",
        "SSW",
        "SW",
        "WSW",
        "W",
        "WNW",
        "NW",
        "NNW",
    ]
    assert [COMPASS_DEG[n] for n in names] == [22.5 * i for i in range(16)]
    p = parse_values(pd.Series(["ne", " SW ", "wnw", "135"]), field="dip_dir", ids=[1, 2, 3, 4], compass=True)
    assert list(p.preferred) == [45.0, 225.0, 292.5, 135.0]
    assert list(p.kind) == ["compass", "compass", "compass", "number"]
    with pytest.raises(InputError, match="not a number"):
        parse_values(pd.Series(["NE"]), field="dip", ids=[1])  # letters only where directions are read


@pytest.mark.parametrize(
    "value, words",
    [
        ("steep", "'steep': not a number, a range such as '50-70' or a triple"),
        ("70-50", "'70-50': a range or triple must run from the smallest to the largest value"),
        ("(50,70,60)", "from the smallest to the largest"),
        ("(50,60)", "not a number"),
        ("50-70-80", "not a number"),
        ("95", "values must lie within 0-90 (exclusive of 0)"),
        ("0", "exclusive of 0"),
        ("(40,60,100)", "within 0-90"),
    ],
)
def test_bad_spellings_name_feature_field_and_value(value, words):
    values = pd.Series(["60", "55", value])
    with pytest.raises(InputError) as err:
        parse_values(
            values,
            field="DIP_ANG",
            ids=[4, 5, 6],
            where="db.gpkg, layer 'faults'",
            lower=0.0,
            upper=90.0,
            lower_inclusive=False,
            label="dip",
        )
    msg = str(err.value)
    assert msg.startswith("db.gpkg, layer 'faults': feature 6: field 'DIP_ANG' (dip) is ")
    assert words in msg and "\n" not in msg and "fix the attribute" in msg


def _gdf(**cols) -> gpd.GeoDataFrame:
    n = len(next(iter(cols.values())))
    lines = [
        shapely.LineString([(500_000.0 + 1000 * i, 4_000_000.0), (500_000.0 + 1000 * i, 4_003_000.0)])
        for i in range(n)
    ]
    return gpd.GeoDataFrame(cols, geometry=lines, crs="EPSG:32633")


def test_prepare_reads_database_attributes():
    g = _gdf(
        dip=["(50,60,70)", "45", None],
        dip_dir=["E", "W", "90"],
        surface_age_ka=["10-30", "15", ""],
        max_throw_m=["100-140", "50", None],
        slip_rate_mm_yr=["(0.1,0.3,0.5)", "0.2", ""],
    )
    out, _ = condition_traces(g, azimuth_reference="grid")
    assert list(out["dip_deg"]) == [60.0, 45.0, 60.0]  # preferred; default 60 for the empty one
    assert list(out["dip_min_deg"][:2]) == [50.0, 45.0] and list(out["dip_max_deg"][:2]) == [70.0, 45.0]
    assert list(out["dip_dir_deg"]) == [90.0, 270.0, 90.0]
    assert out["surface_age_ka"].iloc[0] == 20.0 and out["surface_age_err_ka"].iloc[0] == pytest.approx(5.0)
    assert out["given_max_throw_m"].iloc[0] == 120.0 and out["given_max_throw_err_m"].iloc[
        0
    ] == pytest.approx(10.0)
    assert list(out["slip_rate_min_mm_yr"][:2]) == [0.1, 0.2] and list(out["slip_rate_max_mm_yr"][:2]) == [
        0.5,
        0.2,
    ]


def test_dip_direction_range_is_an_error():
    with pytest.raises(
        InputError, match=r"feature 1: field 'dip_dir' is '80-100': a dip direction is one azimuth"
    ):
        condition_traces(_gdf(dip_dir=["80-100"]))


def test_true_north_dip_directions_become_grid_azimuths():
    # EPSG:32633 (central meridian 15 E): a trace 200 km east of it at about 36 N; true east there has
    # the grid azimuth 90 - gamma, gamma the meridian convergence pyproj gives (reference library)
    from pyproj import CRS, Proj, Transformer

    g = _gdf(dip_dir=["90"])
    g = g.set_geometry(
        [shapely.LineString([(700_000.0, 4_000_000.0), (700_000.0, 4_003_000.0)])], crs="EPSG:32633"
    )
    true_out, _ = condition_traces(g, azimuth_reference="true")
    grid_out, _ = condition_traces(g, azimuth_reference="grid")
    lon, lat = Transformer.from_crs(32633, 4326, always_xy=True).transform(700_000.0, 4_001_500.0)
    gamma = Proj(CRS.from_epsg(32633)).get_factors(lon, lat).meridian_convergence
    assert gamma > 1.0  # east of the central meridian in the northern hemisphere
    assert grid_out["dip_dir_deg"].iloc[0] == 90.0
    assert true_out["dip_dir_deg"].iloc[0] == pytest.approx(90.0 - gamma, abs=1e-9)
    assert true_out["dip_dir_convergence_deg"].iloc[0] == pytest.approx(gamma, abs=1e-9)
