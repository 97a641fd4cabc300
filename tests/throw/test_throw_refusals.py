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
    assert "3 x 3 pixels" in errors[0] and "at least 21 pixels" in errors[0]
    assert res.output.strip().splitlines()[-1] == errors[0]
    assert not out.exists()
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".out.")]
