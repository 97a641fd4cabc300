"""Lazy, windowed access to a DEM in any raster format GDAL reads.

Only :func:`open_dem` takes a path. The returned :class:`Dem` keeps the
metadata and opens the file again for each windowed read, so it is cheap to
pass around, picklable (it carries the path, never an open dataset) and
safe to use from several threads.

The path may be a local file, a URL or a GDAL virtual path (see
:mod:`faultmap.io.locations`). :func:`open_dem` keeps it as text, absolute
for a local file, so that the ``Dem`` means the same file on a Dask worker
running in another folder. Every read is a window (never the whole file);
remote reads run under :data:`faultmap.io.locations.REMOTE_GDAL_OPTIONS`.

Pixel convention: the value of row ``i``, column ``j`` is the elevation at the
pixel centre, ``(x, y) = transform * (j + 0.5, i + 0.5)``.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from scipy import ndimage

from faultmap.errors import CRSError, InputError, InputFileError
from faultmap.io.locations import absolute, check_readable, gdal_path, location_kind, remote_options

__all__ = ["Dem", "open_dem", "COMMON_VOID_VALUES"]

#: Void markers seen in DEMs that carry no nodata tag (common practice).
COMMON_VOID_VALUES = (-9999.0, -32768.0, -32767.0, -3.4028234663852886e38)


@dataclass(frozen=True)
class Dem:
    """Metadata of a DEM and windowed reads of its elevations.

    Attributes
    ----------
    path : str
        The raster: an absolute local path, a URL or a GDAL virtual path
        (as text: a URL must not pass through :class:`pathlib.Path`).
    crs : pyproj.CRS or None
        The raster's CRS.
    transform : affine.Affine
        Pixel-corner affine transform (north-up expected).
    width, height : int
        Raster size in pixels.
    nodata : float or None
        Value treated as void (from the file, or named by the user).
    metres_per_unit : float
        Multiplier that turns stored elevations into metres (0.3048 for feet).
    band : int
        Band read (1-based).
    dtype : str
        How the file stores elevations (``float32``, ``int16``...).
    """

    path: str
    crs: object
    transform: object
    width: int
    height: int
    nodata: float | None
    metres_per_unit: float = 1.0
    band: int = 1
    block_shape: tuple[int, int] = (256, 256)
    _extra_voids: tuple[float, ...] = field(default=(), repr=False)
    dtype: str = "float32"

    # ------------------------------------------------------------------ geometry
    @property
    def res(self) -> tuple[float, float]:
        """Pixel size (x, y) in CRS units (both positive)."""
        return (abs(self.transform.a), abs(self.transform.e))

    @property
    def pixel_size(self) -> float:
        """Mean pixel size in CRS units."""
        return float(np.sqrt(self.res[0] * self.res[1]))

    @property
    def bounds(self) -> tuple[float, float, float, float]:
        """(xmin, ymin, xmax, ymax) of the raster's outer pixel edges."""
        t = self.transform
        xs = (t.c, t.c + t.a * self.width)
        ys = (t.f, t.f + t.e * self.height)
        return (min(xs), min(ys), max(xs), max(ys))

    @property
    def nbytes(self) -> int:
        """Size of the whole band as float64 in memory, bytes."""
        return int(self.width) * int(self.height) * 8

    def window_for_bounds(self, bounds, pad_pixels: int = 2):
        """Row/column slices covering ``bounds`` (clipped to the raster).

        Returns ``None`` when the bounds do not overlap the raster.
        """
        xmin, ymin, xmax, ymax = bounds
        inv = ~self.transform
        cols, rows = _apply(inv, np.array([xmin, xmax, xmin, xmax]), np.array([ymin, ymin, ymax, ymax]))
        c0 = int(math.floor(np.min(cols))) - pad_pixels
        c1 = int(math.ceil(np.max(cols))) + pad_pixels
        r0 = int(math.floor(np.min(rows))) - pad_pixels
        r1 = int(math.ceil(np.max(rows))) + pad_pixels
        c0, r0 = max(c0, 0), max(r0, 0)
        c1, r1 = min(c1, self.width), min(r1, self.height)
        if c0 >= c1 or r0 >= r1:
            return None
        return (slice(r0, r1), slice(c0, c1))

    # ------------------------------------------------------------------ reading
    @property
    def gdal_path(self) -> str:
        """The name GDAL opens (a URL turned into its ``/vsicurl/``, ``/vsis3/``... path)."""
        return gdal_path(self.path)

    def read_rows_cols(self, rows: slice, cols: slice) -> np.ndarray:
        """Read a window as float64 metres with voids as NaN (never 0)."""
        import rasterio
        from rasterio.windows import Window

        win = Window(cols.start, rows.start, cols.stop - cols.start, rows.stop - rows.start)
        try:
            with rasterio.Env(**remote_options(self.path)), rasterio.open(self.gdal_path) as src:
                arr = src.read(self.band, window=win, out_dtype="float64")
                mask = src.read_masks(self.band, window=win) == 0
        except rasterio.errors.RasterioIOError as exc:  # pragma: no cover - disk errors
            raise InputFileError(f"{self.path}: cannot read DEM window ({exc}).") from exc
        if self.nodata is not None and not np.isnan(self.nodata):
            mask |= arr == self.nodata
        for v in self._extra_voids:
            mask |= arr == v
        mask |= ~np.isfinite(arr)
        arr[mask] = np.nan
        if self.nodata is None:
            _check_plausible(arr, self)
        if self.metres_per_unit != 1.0:
            arr *= self.metres_per_unit
        return arr

    def read_window(self, bounds, pad_pixels: int = 2):
        """Read the elevations covering ``bounds``.

        Parameters
        ----------
        bounds : tuple of float
            (xmin, ymin, xmax, ymax) in the DEM's CRS, metres.
        pad_pixels : int
            Extra pixels on each side (for interpolation).

        Returns
        -------
        array : ndarray of float64, shape (rows, cols)
            Elevations in metres, NaN where void; empty (0, 0) when the bounds
            miss the raster.
        transform : affine.Affine
            Pixel-corner transform of the window.
        """
        win = self.window_for_bounds(bounds, pad_pixels)
        if win is None:
            return np.empty((0, 0)), self.transform
        rows, cols = win
        arr = self.read_rows_cols(rows, cols)
        from rasterio.windows import Window
        from rasterio.windows import transform as win_transform

        wt = win_transform(
            Window(cols.start, rows.start, cols.stop - cols.start, rows.stop - rows.start),
            self.transform,
        )
        return arr, wt

    def sample(self, x, y, *, max_window_pixels: int = 4_000_000) -> np.ndarray:
        """Bilinear elevations at points, NaN outside the raster or in voids.

        The points' bounding box is read in one window when it holds at most
        ``max_window_pixels`` pixels; otherwise points are grouped into tiles
        and each tile's window is read once.

        Parameters
        ----------
        x, y : array_like of float
            Coordinates in the DEM's CRS, metres.

        Returns
        -------
        ndarray of float64
            Elevation in metres (after ``metres_per_unit``).
        """
        x = np.asarray(x, dtype="float64").ravel()
        y = np.asarray(y, dtype="float64").ravel()
        out = np.full(x.shape, np.nan)
        if x.size == 0:
            return out
        inv = ~self.transform
        col, row = _apply(inv, x, y)
        # pixel centres sit at half-integers: shift to array index space
        col = col - 0.5
        row = row - 0.5
        inside = (col > -0.5) & (col < self.width - 0.5) & (row > -0.5) & (row < self.height - 0.5)
        inside &= np.isfinite(col) & np.isfinite(row)
        if not inside.any():
            return out
        tile = max(64, int(math.sqrt(max_window_pixels)))
        ci = np.floor(np.clip(col, 0, self.width - 1) / tile).astype(np.int64)
        ri = np.floor(np.clip(row, 0, self.height - 1) / tile).astype(np.int64)
        key = ri * (self.width // tile + 2) + ci
        idx = np.flatnonzero(inside)
        order = idx[np.argsort(key[idx], kind="stable")]
        keys_sorted = key[order]
        starts = np.flatnonzero(np.r_[True, keys_sorted[1:] != keys_sorted[:-1]])
        ends = np.r_[starts[1:], order.size]
        for s, e in zip(starts, ends, strict=True):  # one read per tile of points, not per point
            sel = order[s:e]
            r0 = max(int(math.floor(row[sel].min())), 0)
            r1 = min(int(math.floor(row[sel].max())) + 2, self.height)
            c0 = max(int(math.floor(col[sel].min())), 0)
            c1 = min(int(math.floor(col[sel].max())) + 2, self.width)
            arr = self.read_rows_cols(slice(r0, r1), slice(c0, c1))
            out[sel] = bilinear(arr, row[sel] - r0, col[sel] - c0)
        return out


def _apply(t, x, y):
    """Apply an affine transform to coordinate arrays: returns (x', y')."""
    return t.a * x + t.b * y + t.c, t.d * x + t.e * y + t.f


def bilinear(arr: np.ndarray, row: np.ndarray, col: np.ndarray) -> np.ndarray:
    """Bilinear interpolation of ``arr`` at fractional indices; NaN-aware.

    A sample whose 2 x 2 neighbourhood touches a NaN is NaN (voids never
    become numbers); samples beyond the array edge by up to half a pixel take
    the edge value.
    """
    if arr.size == 0:
        return np.full(np.shape(row), np.nan)
    row = np.clip(row, 0, arr.shape[0] - 1)
    col = np.clip(col, 0, arr.shape[1] - 1)
    nan = np.isnan(arr)
    filled = np.where(nan, 0.0, arr)
    vals = ndimage.map_coordinates(filled, [row, col], order=1, mode="nearest")
    # any NaN among the 4 neighbours -> NaN
    r0 = np.floor(row).astype(np.int64)
    c0 = np.floor(col).astype(np.int64)
    r1 = np.minimum(r0 + 1, arr.shape[0] - 1)
    c1 = np.minimum(c0 + 1, arr.shape[1] - 1)
    bad = nan[r0, c0] | nan[r0, c1] | nan[r1, c0] | nan[r1, c1]
    vals[bad] = np.nan
    return vals


def open_dem(path, *, nodata: float | None = None, metres_per_unit: float = 1.0, band: int = 1) -> Dem:
    """Open a DEM lazily: read its metadata, never its pixels.

    Parameters
    ----------
    path : str or pathlib.Path
        Any raster GDAL reads: a local file (made absolute), a URL (``https://``, ``s3://``...)
        or a GDAL virtual path (``/vsicurl/...``, ``/vsizip/...``); see :mod:`faultmap.io.locations`.
    nodata : float, optional
        Void value to use when the file has none (or to override it).
    metres_per_unit : float
        Multiplier turning stored elevations into metres (0.3048 for feet).
    band : int
        1-based band number.

    Raises
    ------
    InputFileError
        Missing or unreadable file, unreachable server.
    CRSError
        The raster has no CRS or a geographic one.
    """
    import rasterio

    text = str(path)
    if location_kind(text) == "local" and not Path(gdal_path(text)).expanduser().exists():
        raise InputFileError(f"{text}: DEM file not found; check the path.")
    if location_kind(text) != "local":
        check_readable("dem", text, raster=True)
    p = absolute(text)
    try:
        with rasterio.Env(**remote_options(p)), rasterio.open(gdal_path(p)) as src:
            if band < 1 or band > src.count:
                raise InputError(f"{text}: band {band} does not exist (the file has {src.count}).")
            file_nodata = src.nodatavals[band - 1]
            crs = src.crs
            transform = src.transform
            width, height = src.width, src.height
            block = tuple(src.block_shapes[band - 1])
            dtype = src.dtypes[band - 1]
    except rasterio.errors.RasterioIOError as exc:
        raise InputFileError(f"{text}: not a raster GDAL can read ({str(exc).splitlines()[0]}).") from exc
    if not (metres_per_unit > 0 and math.isfinite(metres_per_unit)):
        raise InputError(f"{text}: metres per DEM elevation unit must be a positive number (0.3048 for a DEM in feet), got {metres_per_unit}.")
    if transform.b != 0 or transform.d != 0:
        raise InputError(f"{text}: rotated rasters are not supported; warp the DEM north-up first.")
    if crs is None:
        raise CRSError(f"{text}: the DEM has no CRS; assign one (e.g. gdal_edit -a_srs EPSG:xxxx) and retry.")
    from pyproj import CRS

    pcrs = CRS.from_user_input(crs.to_wkt())
    if pcrs.is_geographic:
        raise CRSError(
            f"{text}: the DEM is in geographic coordinates ({pcrs.name}); reproject it to a projected metric CRS "
            "(e.g. the local UTM zone) first."
        )
    nd = nodata if nodata is not None else file_nodata
    extra = () if nd is not None else COMMON_VOID_VALUES
    return Dem(
        path=p,
        crs=pcrs,
        transform=transform,
        width=int(width),
        height=int(height),
        nodata=None if nd is None else float(nd),
        metres_per_unit=float(metres_per_unit),
        band=int(band),
        block_shape=block,
        _extra_voids=extra,
        dtype=str(dtype),
    )


# ---------------------------------------------------------------------------
# Fast windowed reads for batched profile sampling (added for faultmap.throw.step)
# ---------------------------------------------------------------------------
#: GDAL's GTIFF_VIRTUAL_MEM_IO for window reads ("IF_ENOUGH_RAM": only files that fit in RAM).
_VIRTUAL_MEM_IO = "IF_ENOUGH_RAM"


def read_window_array(
    dem: Dem,
    bounds,
    *,
    pad_pixels: int = 2,
    dtype="float32",
    cache_mb: int = 64,
):
    """Read the elevations covering ``bounds`` as a compact array.

    Like :meth:`Dem.read_window`, but returns ``dtype`` (float32 by default:
    half the memory of float64, and elevations keep ~0.1 mm precision below
    5000 m), reads the mask band only when the file has one (per-dataset
    mask or alpha), compares void values in the file's own data type, and
    caps GDAL's block cache at ``cache_mb`` so the peak memory of a run
    stays within the caller's budget.

    Parameters
    ----------
    dem : Dem
    bounds : tuple of float
        (xmin, ymin, xmax, ymax) in the DEM's CRS, metres.
    pad_pixels : int
        Extra pixels on each side.
    dtype : str
        Output float type.
    cache_mb : int
        GDAL block cache for this read, MB.

    Returns
    -------
    array : ndarray, shape (rows, cols)
        Elevations in metres (after ``metres_per_unit``), NaN where void; (0, 0)
        when the bounds miss the raster.
    transform : affine.Affine
        Pixel-corner transform of the window.
    offset : tuple of int
        (row0, col0) of the window in the full raster.
    """
    import rasterio
    from rasterio.enums import MaskFlags
    from rasterio.windows import Window
    from rasterio.windows import transform as win_transform

    win = dem.window_for_bounds(bounds, pad_pixels)
    if win is None:
        return np.empty((0, 0), dtype=dtype), dem.transform, (0, 0)
    rows, cols = win
    w = Window(cols.start, rows.start, cols.stop - cols.start, rows.stop - rows.start)
    try:
        # uncompressed GeoTIFFs that fit in RAM are read through a memory map (GDAL's
        # GTIFF_VIRTUAL_MEM_IO; measured about a third faster than the block cache), others as usual
        with rasterio.Env(
            GDAL_CACHEMAX=int(max(cache_mb, 1)), GTIFF_VIRTUAL_MEM_IO=_VIRTUAL_MEM_IO, **remote_options(dem.path)
        ):
            with rasterio.open(dem.gdal_path) as src:
                raw = src.read(dem.band, window=w)
                flags = src.mask_flag_enums[dem.band - 1]
                mask = None
                if MaskFlags.per_dataset in flags or MaskFlags.alpha in flags:
                    mask = src.read_masks(dem.band, window=w) == 0
                file_nodata = src.nodatavals[dem.band - 1]
    except rasterio.errors.RasterioIOError as exc:  # pragma: no cover - disk errors
        raise InputFileError(f"{dem.path}: cannot read DEM window ({exc}).") from exc
    from faultmap.io import dem_jit as kernels

    voids = list(dem._extra_voids)
    for v in (dem.nodata, file_nodata):
        if v is not None and not np.isnan(v):
            voids.append(float(v))
    if (
        mask is None
        and raw.dtype == np.float32
        and np.dtype(dtype) == np.float32
        and raw.flags.c_contiguous
        and raw.flags.writeable
        and kernels.ENABLED
        and len(set(voids)) <= kernels.MAX_VOIDS
    ):
        # the common case (a float32 GeoTIFF): voids and +-inf to NaN in one compiled pass
        kernels.voids_to_nan(raw, sorted(set(voids)))
        if dem.nodata is None:
            _check_plausible(raw, dem)
        if dem.metres_per_unit != 1.0:
            raw *= np.float32(dem.metres_per_unit)
        return raw, win_transform(w, dem.transform), (rows.start, cols.start)
    bad = mask
    tmp = None
    for v in sorted(set(voids)):
        if np.issubdtype(raw.dtype, np.integer):
            info = np.iinfo(raw.dtype)
            if not (info.min <= v <= info.max and float(v).is_integer()):
                continue
            v = int(v)
        else:
            v = raw.dtype.type(v)
        if bad is None:
            bad = np.equal(raw, v)
        else:
            tmp = np.equal(raw, v, out=tmp)
            np.logical_or(bad, tmp, out=bad)
    arr = raw.astype(dtype, copy=False)
    if np.issubdtype(raw.dtype, np.floating) and not np.isfinite(raw.sum()):
        # +-inf are voids too (NaN already is); a finite sum proves there is none, in one cheap pass
        # (an overflowing sum only costs the full check)
        tmp = np.isinf(raw, out=tmp)
        bad = tmp if bad is None else np.logical_or(bad, tmp, out=bad)
    if arr is raw and not arr.flags.writeable:  # pragma: no cover
        arr = arr.copy()
    if bad is not None and bad.any():
        np.putmask(arr, bad, np.nan)
    if dem.nodata is None:
        _check_plausible(arr, dem)
    if dem.metres_per_unit != 1.0:
        arr *= arr.dtype.type(dem.metres_per_unit)
    return arr, win_transform(w, dem.transform), (rows.start, cols.start)


#: Largest elevation magnitude taken as real, in the file's units (|z| beyond 100 km is a void marker).
PLAUSIBLE_ABS_Z = 1e5


def _check_plausible(arr: np.ndarray, dem: Dem) -> None:
    """Refuse elevations no terrain has, in a DEM that declares no void value (e.g. undeclared 1e30)."""
    if arr.size == 0:
        return
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # an all-void window
        lo, hi = np.nanmin(arr), np.nanmax(arr)  # two passes, no copy
    if max(abs(lo), abs(hi)) > PLAUSIBLE_ABS_Z:
        value = hi if abs(hi) >= abs(lo) else lo
        raise InputError(
            f"{dem.path}: elevation {value:g} found, which no terrain has; the file declares no void value: "
            "name it with --dem-nodata VALUE (or dem_nodata in the project file)."
        )


def read_overview(dem: Dem, *, max_pixels: int = 2_000_000, bounds=None):
    """Read the DEM (or ``bounds`` of it) decimated to at most ``max_pixels``.

    Averages blocks of pixels (GDAL ``average`` resampling, which skips
    voids), for maps and hillshades of DEMs too large to read whole.

    Returns
    -------
    array : ndarray of float32
        Elevations in metres, NaN where void.
    transform : affine.Affine
        Transform of the decimated grid.
    """
    import rasterio
    from rasterio.enums import Resampling
    from rasterio.windows import Window
    from rasterio.windows import transform as win_transform

    if bounds is None:
        rows, cols = slice(0, dem.height), slice(0, dem.width)
    else:
        win = dem.window_for_bounds(bounds, 0)
        if win is None:
            return np.empty((0, 0), dtype="float32"), dem.transform
        rows, cols = win
    h, w = rows.stop - rows.start, cols.stop - cols.start
    f = max(1.0, math.sqrt(h * w / max(int(max_pixels), 1)))
    oh, ow = max(1, int(round(h / f))), max(1, int(round(w / f)))
    window = Window(cols.start, rows.start, w, h)
    with rasterio.Env(GDAL_CACHEMAX=64, **remote_options(dem.path)):
        with rasterio.open(dem.gdal_path) as src:
            ma = src.read(
                dem.band, window=window, out_shape=(oh, ow), resampling=Resampling.average, masked=True
            )
    raw = np.ma.getdata(ma)
    bad = np.ma.getmaskarray(ma).copy()
    for v in dem._extra_voids + (() if dem.nodata is None else (dem.nodata,)):
        if not np.isnan(v):
            bad |= raw == v
    arr = np.asarray(raw, dtype="float32")
    arr[bad | ~np.isfinite(arr)] = np.nan
    if dem.metres_per_unit != 1.0:
        arr *= np.float32(dem.metres_per_unit)
    t = win_transform(window, dem.transform) @ rasterio.Affine.scale(w / ow, h / oh)
    return arr, t
