"""A run whose DEM and traces are in a custom CRS ends with layers in exactly that CRS.

Failure reported: a DEM and traces in a custom transverse Mercator on GRS80 whose parameters match a
registered projected CRS (UTM zone 53S, EPSG:7855's projection on GRS80 here) failed after the whole
computation with "CRS changed on writing". The result must be written, in the input's CRS exactly
(pyproj ``CRS.equals`` with the input's WKT).
"""

from __future__ import annotations

import geopandas as gpd
import pyogrio
import shapely
from pyproj import CRS

from tests.conftest import X0, Y0, tilted_dem, write_dem

CUSTOM = CRS.from_proj4("+proj=tmerc +lat_0=0 +lon_0=135 +k=0.9996 +x_0=500000 +y_0=10000000 +ellps=GRS80 +units=m")


def test_custom_crs_run_writes_its_layers_exactly(cli, tmp_path):
    dem = write_dem(tmp_path / "dem.tif", tilted_dem(), crs=CUSTOM.to_wkt())
    g = gpd.GeoDataFrame(
        {"name": ["a"]}, geometry=[shapely.LineString([(X0 + 1500, Y0 - 2500), (X0 + 1550, Y0 - 500)])], crs=CUSTOM
    )
    g.to_file(tmp_path / "faults.gpkg", layer="traces")
    out = tmp_path / "out.gpkg"
    res = cli(["throw", "--faults", str(tmp_path / "faults.gpkg"), "--dem", str(dem), "--out", str(out), "-q"])
    assert res.exit_code == 0, res.output
    for layer in ("faults", "throw_stations"):
        assert pyogrio.read_dataframe(out, layer=layer).crs.equals(CRS.from_wkt(CUSTOM.to_wkt()))
