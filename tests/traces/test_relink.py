"""Linked systems are revised once throw has measured the unknown dip directions."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import shapely

from faultmap.runner import run_tools
from faultmap.synthetic.builder import build_dem
from tests.conftest import write_dem

CRS = "EPSG:32633"


def test_opposite_dipping_segments_are_unlinked_after_throw(tmp_path):
    # Two collinear segments with a 300 m gap: geometry alone would link them, but they dip
    # opposite ways (a fact the synthetic DEM encodes; Peacock & Sanderson 1991 relay zones
    # join segments that dip the same way, from memory). The second has no dip_dir attribute.
    a = shapely.LineString([(2500, 1000), (2500, 3000)])
    b = shapely.LineString([(2500, 3300), (2500, 5300)])
    truth = gpd.GeoDataFrame(
        {"dip_deg": [60.0, 60.0], "dip_dir_deg": [90.0, 270.0], "max_throw_m": [40.0, 40.0],
         "profile_shape": ["elliptical"] * 2},
        geometry=[a, b], crs=CRS,
    )
    z, _, _ = build_dem(truth, origin_xy=(0.0, 6300.0), pixel_size_m=20.0, shape=(315, 250),
                        scarp_width_m=40.0, relief_m=1.0, seed=4)
    dem = write_dem(tmp_path / "dem.tif", z, crs=CRS, x0=0.0, y0=6300.0, px=20.0)
    traces = gpd.GeoDataFrame({"dip_dir": [90.0, np.nan]}, geometry=[a, b], crs=CRS)
    traces.to_file(tmp_path / "f.gpkg")
    only_prepare = run_tools(["prepare"], inputs={"faults": tmp_path / "f.gpkg", "dem": dem},
                             out=tmp_path / "p.gpkg", quiet=True).layers["faults"]
    assert only_prepare["system_id"].nunique() == 1  # linked on geometry
    res = run_tools(["throw"], inputs={"faults": tmp_path / "f.gpkg", "dem": dem},
                    out=tmp_path / "t.gpkg", quiet=True)
    f = res.layers["faults"].sort_values("fault_id")
    assert list(f["dip_dir_source"]) == ["attribute", "dem"]
    assert abs(((f["dip_dir_deg"].iloc[1] - 270.0) + 180) % 360 - 180) < 30
    assert f["system_id"].nunique() == 2
