"""The throw tool refuses a run it cannot measure (failure reported: a 3 x 3 DEM exited 0 with every throw NaN)."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import shapely

from tests.conftest import CRS, PX, X0, Y0, write_dem


def test_tiny_dem_exits_2_and_writes_nothing(cli, tmp_path):
    dem = write_dem(tmp_path / "tiny.tif", np.full((3, 3), 100.0), x0=X0, y0=Y0, px=PX)
    trace = shapely.LineString([(X0 + 10, Y0 - 25), (X0 + 20, Y0 - 5)])  # inside the 30 x 30 m DEM
    gpd.GeoDataFrame({"name": ["a"]}, geometry=[trace], crs=CRS).to_file(tmp_path / "f.gpkg", layer="traces")
    out = tmp_path / "out.gpkg"
    res = cli(["throw", "--faults", str(tmp_path / "f.gpkg"), "--dem", str(dem), "--out", str(out), "-q"])
    assert res.exit_code == 2, res.output
    errors = [line for line in res.output.strip().splitlines() if line.startswith("error")]
    assert len(errors) == 1 and "tiny.tif" in errors[0] and "no throw could be measured" in errors[0]
    # a profile needs min_samples_per_side (default 10) valid samples on each side of the trace, plus the
    # trace pixel: 2 x 10 + 1 = 21 pixels across (our rule, the throw tool's parameter)
    assert "3 x 3 pixels" in errors[0] and "at least 21 pixels" in errors[0]
    assert res.output.strip().splitlines()[-1] == errors[0]
    assert not out.exists()
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".out.")]


def _one_trace(tmp_path):
    trace = shapely.LineString([(X0 + 1500, Y0 - 2500), (X0 + 1550, Y0 - 500)])
    gpd.GeoDataFrame({"name": ["a"]}, geometry=[trace], crs=CRS).to_file(tmp_path / "f.gpkg", layer="traces")
    return tmp_path / "f.gpkg"


def test_undeclared_huge_void_values_are_an_error(cli, tmp_path):
    # Failure reported: 1e30 voids in a DEM that declares no nodata value passed without a notice.
    from tests.conftest import tilted_dem

    z = tilted_dem()
    z[100:140, 140:160] = 1e30
    dem = write_dem(tmp_path / "voids.tif", z, nodata=None)
    out = tmp_path / "out.gpkg"
    res = cli(["throw", "--faults", str(_one_trace(tmp_path)), "--dem", str(dem), "--out", str(out), "-q"])
    assert res.exit_code == 2, res.output
    last = res.output.strip().splitlines()[-1]
    assert "voids.tif: elevation 1e+30 found" in last and "--dem-nodata" in last
    assert not out.exists()
    # declared, the same DEM runs
    res = cli(["throw", "--faults", str(tmp_path / "f.gpkg"), "--dem", str(dem), "--dem-nodata", "1e30",
               "--out", str(out), "-q"])
    assert res.exit_code == 0, res.output


def test_integer_dem_gets_a_notice(cli, tmp_path):
    # Failure reported: an integer DEM (throws changed by about 10 % on small scarps) gave no notice.
    import rasterio
    from rasterio.transform import from_origin

    from tests.conftest import tilted_dem

    path = tmp_path / "int.tif"
    z = np.round(tilted_dem()).astype("int16")
    with rasterio.open(path, "w", driver="GTiff", width=z.shape[1], height=z.shape[0], count=1, dtype="int16",
                       crs=CRS, transform=from_origin(X0, Y0, PX, PX), nodata=-32768) as dst:
        dst.write(z, 1)
    out = tmp_path / "out.gpkg"
    res = cli(["throw", "--faults", str(_one_trace(tmp_path)), "--dem", str(path), "--out", str(out)])
    assert res.exit_code == 0, res.output
    assert "stored as whole numbers (int16)" in res.output
