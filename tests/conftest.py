"""Shared fixtures: tiny synthetic scenes written to tmp_path.

The scenes here are invented test data (not a real place); each test that
checks a number names the outside source of the expected value.
"""

from __future__ import annotations

import matplotlib

matplotlib.use("Agg")

import geopandas as gpd
import numpy as np
import pytest
import rasterio
import shapely
from click.testing import CliRunner
from rasterio.transform import from_origin

X0, Y0, PX = 500000.0, 7000000.0, 10.0
CRS = "EPSG:32753"


def write_dem(path, z, *, crs=CRS, x0=X0, y0=Y0, px=PX, nodata=-9999.0):
    """Write a float32 GeoTIFF with the given array (NaN -> nodata)."""
    z = np.asarray(z, dtype="float32").copy()
    if nodata is not None:
        z[np.isnan(z)] = nodata
    profile = dict(driver="GTiff", width=z.shape[1], height=z.shape[0], count=1, dtype="float32",
                   crs=crs, transform=from_origin(x0, y0, px, px), nodata=nodata)
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(z, 1)
    return path


def tilted_dem(n=300, slope=0.01):
    """A gently tilted plane (no faults), n x n pixels."""
    return np.fromfunction(lambda i, j: 100.0 + slope * j * PX, (n, n), dtype=float)


@pytest.fixture
def scene(tmp_path):
    """Three traces (one two-part) over a 3 x 3 km tilted DEM with a nodata corner."""
    z = tilted_dem()
    z[:30, :30] = np.nan
    dem = write_dem(tmp_path / "dem.tif", z)
    g = gpd.GeoDataFrame(
        {"name": ["a", "b", "c"], "dip": [55.0, None, 70.0], "dip_dir": [90.0, None, 270.0]},
        geometry=[
            shapely.LineString([(X0 + 500, Y0 - 2000), (X0 + 600, Y0 - 500)]),
            shapely.MultiLineString([[(X0 + 1500, Y0 - 2900), (X0 + 1550, Y0 - 2000)],
                                     [(X0 + 1600, Y0 - 1900), (X0 + 1650, Y0 - 1000)]]),
            shapely.LineString([(X0 + 2500, Y0 - 2900), (X0 + 2600, Y0 - 10)]),
        ],
        crs=CRS,
    )
    faults = tmp_path / "faults.gpkg"
    g.to_file(faults, layer="traces")
    return {"dir": tmp_path, "dem": dem, "faults": faults, "gdf": g}


@pytest.fixture
def cli():
    """Invoke the faultmap CLI in-process: cli(args) -> click Result."""
    from faultmap.cli import build_cli

    runner = CliRunner()

    def invoke(args):
        return runner.invoke(build_cli(), [str(a) for a in args], catch_exceptions=False)

    return invoke
