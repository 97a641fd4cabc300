"""Lazy windowed DEM access (faultmap.io.dem) against the pitfalls list."""

from __future__ import annotations

import numpy as np
import pytest

from faultmap.errors import CRSError, InputFileError
from faultmap.io.dem import open_dem
from tests.conftest import PX, X0, Y0, write_dem


def _plane(n=120, m=90):
    # z = 3 + 0.02 x' - 0.01 y' in metres of the grid frame; bilinear interpolation of a plane
    # is exact (analytic), so any half-pixel offset error shows as a bias of 0.02*5 = 0.1 m.
    i, j = np.mgrid[0:n, 0:m]
    xc = X0 + (j + 0.5) * PX
    yc = Y0 - (i + 0.5) * PX
    return 3.0 + 0.02 * (xc - X0) - 0.01 * (Y0 - yc)


def test_bilinear_exact_on_a_plane_with_pixel_centres(tmp_path):
    dem = open_dem(write_dem(tmp_path / "p.tif", _plane()))
    rng = np.random.default_rng(0)
    x = rng.uniform(X0 + PX, X0 + 88 * PX, 500)
    y = rng.uniform(Y0 - 118 * PX, Y0 - PX, 500)
    expect = 3.0 + 0.02 * (x - X0) - 0.01 * (Y0 - y)
    np.testing.assert_allclose(dem.sample(x, y), expect, atol=1e-4)


def test_outside_is_nan_never_zero(tmp_path):
    dem = open_dem(write_dem(tmp_path / "p.tif", _plane()))
    z = dem.sample([X0 - 50, X0 + 100 * PX, X0 + 10], [Y0 - 10, Y0 - 10, Y0 + 30])
    assert np.isnan(z).all()


def test_voids_stay_voids_with_and_without_a_nodata_tag(tmp_path):
    z = _plane()
    z[40:60, 30:50] = np.nan
    tagged = open_dem(write_dem(tmp_path / "t.tif", z))  # nodata -9999 declared
    untagged = open_dem(write_dem(tmp_path / "u.tif", np.where(np.isnan(z), -32768.0, z), nodata=None))
    x, y = X0 + 40 * PX, Y0 - 50 * PX
    assert np.isnan(tagged.sample([x], [y]))[0]
    assert np.isnan(untagged.sample([x], [y]))[0]  # common void value recognised (pitfalls)
    named = open_dem(write_dem(tmp_path / "n.tif", np.where(np.isnan(z), 7.5, z), nodata=None), nodata=7.5)
    assert np.isnan(named.sample([x], [y]))[0]
    arr, _ = tagged.read_window((x - 100, y - 100, x + 100, y + 100))
    assert np.isnan(arr).any() and not (arr == 0).any() and not (arr == -9999).any()


def test_window_read_matches_the_file_and_is_clipped(tmp_path):
    z = _plane()
    dem = open_dem(write_dem(tmp_path / "p.tif", z))
    arr, t = dem.read_window((X0 + 95, Y0 - 305, X0 + 405, Y0 - 95), pad_pixels=0)
    r0, c0 = int(round((Y0 - t.f) / PX)), int(round((t.c - X0) / PX))
    np.testing.assert_allclose(arr, z[r0:r0 + arr.shape[0], c0:c0 + arr.shape[1]], atol=1e-4)
    arr2, _ = dem.read_window((X0 - 1000, Y0 - 50, X0 + 50, Y0 + 1000))
    assert arr2.shape[0] <= 8 and arr2.shape[1] <= 8  # clipped to the raster, no boundless padding
    empty, _ = dem.read_window((X0 - 5000, Y0 - 5000, X0 - 4000, Y0 - 4000))
    assert empty.size == 0


def test_tiled_sampling_equals_one_window(tmp_path):
    dem = open_dem(write_dem(tmp_path / "p.tif", _plane()))
    rng = np.random.default_rng(1)
    x = rng.uniform(X0, X0 + 90 * PX, 3000)
    y = rng.uniform(Y0 - 120 * PX, Y0, 3000)
    np.testing.assert_allclose(dem.sample(x, y, max_window_pixels=64 * 64), dem.sample(x, y), equal_nan=True)


def test_metres_per_unit_and_errors(tmp_path):
    dem = open_dem(write_dem(tmp_path / "p.tif", _plane()), metres_per_unit=0.3048)  # feet -> metres (exact, NIST)
    ref = open_dem(write_dem(tmp_path / "q.tif", _plane()))
    x, y = [X0 + 333.0], [Y0 - 222.0]
    assert dem.sample(x, y)[0] == pytest.approx(ref.sample(x, y)[0] * 0.3048)
    with pytest.raises(InputFileError, match="not found"):
        open_dem(tmp_path / "missing.tif")
    with pytest.raises(CRSError, match="geographic"):
        open_dem(write_dem(tmp_path / "g.tif", _plane(), crs="EPSG:4326", x0=10.0, y0=50.0, px=0.001))
    with pytest.raises(CRSError, match="no CRS"):
        open_dem(write_dem(tmp_path / "n.tif", _plane(), crs=None))


@pytest.mark.parametrize(
    "layout",
    [
        dict(tiled=True, blockxsize=32, blockysize=32),  # uncompressed tiles: memory-mapped
        dict(),  # uncompressed strips: memory-mapped
        dict(tiled=True, blockxsize=32, blockysize=32, compress="deflate"),  # compressed: block cache
    ],
)
def test_window_reads_same_with_and_without_the_memory_map(tmp_path, layout, monkeypatch):
    # reference: GDAL's ordinary block-cache read of the same window (GTIFF_VIRTUAL_MEM_IO=NO); the
    # memory-mapped read used for uncompressed GeoTIFFs must give the same values, voids included
    import rasterio
    from rasterio.transform import from_origin

    import faultmap.io.dem as dem_io

    z = _plane().astype("float32")
    z[40:60, 30:50] = -9999.0
    path = tmp_path / "l.tif"
    with rasterio.open(
        path, "w", driver="GTiff", width=z.shape[1], height=z.shape[0], count=1, dtype="float32",
        crs="EPSG:32633", transform=from_origin(X0, Y0, PX, PX), nodata=-9999.0, **layout,
    ) as ds:
        ds.write(z, 1)
    dem = open_dem(path)
    bounds = (X0 + 5 * PX, Y0 - 100 * PX, X0 + 70 * PX, Y0 - 10 * PX)
    mapped = dem_io.read_window_array(dem, bounds, pad_pixels=2)
    monkeypatch.setattr(dem_io, "_VIRTUAL_MEM_IO", "NO")
    cached = dem_io.read_window_array(dem, bounds, pad_pixels=2)
    assert mapped[0].shape == cached[0].shape and mapped[2] == cached[2]
    np.testing.assert_array_equal(mapped[0], cached[0])  # NaN where void in both
    assert np.isnan(mapped[0]).any() and np.isfinite(mapped[0]).any()
