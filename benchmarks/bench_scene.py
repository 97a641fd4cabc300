"""What the benchmark scripts share: the synthetic scene DEM and the peak-memory reading (not a benchmark).

A fault population displacing a gently rough, gently tilted surface, built with faultmap's scene builder
(``faultmap.synthetic.build_dem``) plus 0.3 m of pixel noise, written as a tiled float32 GeoTIFF.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

CRS = "EPSG:32633"
PIXEL_M = 10.0


def write_scene_dem(faults, folder: Path, n_pixels: int, *, seed: int = 3) -> Path:
    """Build the DEM of ``faults`` on an ``n_pixels`` square grid from (0, 0) and write ``folder/dem.tif``.

    Parameters
    ----------
    faults : geopandas.GeoDataFrame
        Faults as ``faultmap.synthetic.fault_population`` makes them (EPSG:32633, metres).
    folder : pathlib.Path
        Where the GeoTIFF goes.
    n_pixels : int
        Pixels a side (10 m each).
    seed : int
        Seed of the relief and of the noise.

    Returns
    -------
    pathlib.Path
        The GeoTIFF (256 x 256 blocks, nodata -9999).
    """
    import rasterio

    from faultmap.synthetic import build_dem

    side = n_pixels * PIXEL_M
    dem, transform, _ = build_dem(
        faults,
        origin_xy=(0.0, side),
        pixel_size_m=PIXEL_M,
        shape=(n_pixels, n_pixels),
        relief_m=5.0,
        relief_wavelength_m=4000.0,
        regional_slope_deg=1.0,
        scarp_width_m=30.0,
        hanging_wall_extent_m=800.0,
        seed=seed,
    )
    dem += np.random.default_rng(seed).normal(0.0, 0.3, dem.shape).astype(np.float32)
    tif = Path(folder) / "dem.tif"
    profile = dict(driver="GTiff", width=n_pixels, height=n_pixels, count=1, dtype="float32", crs=CRS,
                   transform=transform, nodata=-9999.0, tiled=True, blockxsize=256, blockysize=256)
    with rasterio.open(tif, "w", **profile) as ds:
        ds.write(dem, 1)
    return tif


def vm_hwm_kb() -> int:
    """Peak resident memory of this process since start (or a reset), kB: VmHWM of Linux /proc; 0 elsewhere."""
    try:
        with open("/proc/self/status") as fh:
            for line in fh:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1])
    except OSError:  # pragma: no cover - not Linux
        pass
    return 0


__all__ = ["CRS", "PIXEL_M", "write_scene_dem", "vm_hwm_kb"]
