"""Field mapping: a column the user names must exist (failure: ``--field dip=NO_SUCH_COLUMN`` was ignored)."""

from __future__ import annotations

import geopandas as gpd
import pytest
import shapely

from faultmap.errors import InputError
from faultmap.traces.conditioning import condition_traces


def _traces(**cols):
    lines = [shapely.LineString([(0, 0), (0, 1000)]), shapely.LineString([(500, 0), (500, 900)])]
    return gpd.GeoDataFrame(cols, geometry=lines, crs="EPSG:32633")


def test_mapped_field_missing_is_an_error_naming_it():
    g = _traces(dip_angle=[55.0, 65.0])
    with pytest.raises(InputError, match=r"faults.gpkg, layer 'traces': no column for the field mapping dip=NO_SUCH"):
        condition_traces(g, fields={"dip": "NO_SUCH"}, where="faults.gpkg, layer 'traces'")
    with pytest.raises(InputError, match="columns are: dip_angle"):
        condition_traces(g, fields={"dip": "NO_SUCH"})


def test_mapped_field_present_is_used_and_default_names_may_be_absent():
    g = _traces(dip_angle=[55.0, 65.0])
    faults, _ = condition_traces(g, fields={"dip": "dip_angle"})
    assert sorted(faults["dip_deg"]) == [55.0, 65.0]
    assert set(faults["dip_source"]) == {"attribute"}
    # no mapping and no `dip` column: the default dip is used (not an error)
    faults, warns = condition_traces(_traces(other=[1, 2]))
    assert set(faults["dip_source"]) == {"default"}


def test_self_crossing_traces_and_repeated_names_are_reported():
    # Failures reported: a self-intersecting trace was measured without a word; duplicate names passed
    # silently. Both are now warnings naming the features (the data are kept as digitised).
    loop = shapely.LineString([(0, 0), (0, 1000), (300, 500), (-300, 500)])  # crosses itself
    ok = shapely.LineString([(2000, 0), (2000, 1000)])
    ok2 = shapely.LineString([(4000, 0), (4000, 1000)])
    g = gpd.GeoDataFrame({"name": ["A", "B", "B"]}, geometry=[loop, ok, ok2], crs="EPSG:32633")
    faults, warns = condition_traces(g, where="f.gpkg")
    assert len(faults) == 3
    assert any("features 1 cross themselves" in w for w in warns)
    assert any("fault names are used by several traces (B)" in w for w in warns)
    _, clean = condition_traces(g.iloc[1:2], where="f.gpkg")
    assert not any("cross themselves" in w or "several traces" in w for w in clean)
