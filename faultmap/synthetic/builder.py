"""Synthetic fault scenes built physically from known fault slips.

Everything here is pure: arrays, shapely geometries and GeoDataFrames in and
out, no file I/O. Tests of every analysis, the demo area and the benchmarks
build their scenes with these functions, so the truth behind each scene
(throw, heave and length of every fault) is known exactly.

Grid convention (used everywhere in this module)
------------------------------------------------
North-up grid with top-left corner ``origin_xy = (x0, y0)`` and square pixels
of ``pixel_size_m`` = ``px``. The value at row ``i``, column ``j`` is the
elevation at the pixel *centre*::

    x = x0 + (j + 0.5) * px
    y = y0 - (i + 0.5) * px

which is ``transform * (j + 0.5, i + 0.5)`` with
``transform = Affine(px, 0, x0, 0, -px, y0)`` (rasterio's convention).

Azimuths are degrees clockwise from grid north; the unit vector of azimuth
``az`` is ``(sin az, cos az)`` in (east, north).

The work is split by what it computes; this module builds the DEM
(:func:`build_dem`); the parts (public names listed in :mod:`faultmap.synthetic`) are:

* :mod:`faultmap.synthetic.profile_shapes`: along-strike throw profiles;
* :mod:`faultmap.synthetic.grid`: grid origin, shape and pixel centres;
* :mod:`faultmap.synthetic.faults`: fault records and their displacement fields;
* :mod:`faultmap.synthetic.truth`: the truth of a built scene;
* :mod:`faultmap.synthetic.populations`: parallel faults and random populations.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Mapping, Sequence
from typing import Any

import geopandas as gpd
import numpy as np
import shapely
from rasterio.transform import Affine
from scipy import ndimage
from shapely.geometry.base import BaseGeometry

from faultmap.errors import ParameterError
from faultmap.synthetic.faults import _displacement, _fault_window, _prepare_faults, _smoothing_table
from faultmap.synthetic.grid import _positive, pixel_centres
from faultmap.synthetic.truth import SceneTruth, _truth_table

__all__ = ["build_dem"]


# ---------------------------------------------------------------------------
# Pre-fault surface
# ---------------------------------------------------------------------------
def _relief_grid(bounds: tuple[float, float, float, float], relief_m: float,
                 wavelength_m: float, seed: int) -> tuple[np.ndarray, float, float, float]:
    """Seeded smooth random field (std = relief_m) on a lattice anchored to the grid extent.

    The lattice spacing depends only on the wavelength and the extent, not on
    the pixel size, so the same scene at another pixel size has the same relief.
    """
    xmin, ymin, xmax, ymax = bounds
    g = wavelength_m / 16.0
    margin = 3.0 * wavelength_m + 0.2 * max(xmax - xmin, ymax - ymin)
    rx0, ry0 = xmin - margin, ymax + margin
    ncols = int(math.ceil((xmax - xmin + 2 * margin) / g)) + 1
    nrows = int(math.ceil((ymax - ymin + 2 * margin) / g)) + 1
    rng = np.random.default_rng(seed)
    noise = rng.standard_normal((nrows, ncols))
    # The 2-D spectrum of Gaussian-filtered white noise peaks at wavelength
    # 2 pi sqrt(2) sigma (derived), so sigma = wavelength / (2 pi sqrt 2).
    sigma_cells = wavelength_m / (2.0 * math.pi * math.sqrt(2.0)) / g
    field_ = ndimage.gaussian_filter(noise, sigma_cells, mode="reflect")
    std = float(field_.std())
    field_ = field_ * (relief_m / std) if std > 0 else field_ * 0.0
    coeffs = ndimage.spline_filter(field_, order=3, mode="nearest")
    return coeffs, rx0, ry0, g


def _sample_grid(coeffs: np.ndarray, x0: float, y0: float, g: float,
                 x: np.ndarray, y: np.ndarray) -> np.ndarray:
    rows = (y0 - y) / g - 0.5
    cols = (x - x0) / g - 0.5
    return ndimage.map_coordinates(coeffs, [rows.ravel(), cols.ravel()], order=3,
                                   mode="nearest", prefilter=False).reshape(x.shape)


# ---------------------------------------------------------------------------
# DEM construction
# ---------------------------------------------------------------------------
def build_dem(
    faults: gpd.GeoDataFrame | Sequence[Mapping[str, Any]],
    *,
    origin_xy: tuple[float, float],
    pixel_size_m: float,
    shape: tuple[int, int],
    base_elevation_m: float = 500.0,
    regional_slope_deg: float = 0.0,
    regional_slope_azimuth_deg: float = 0.0,
    relief_m: float = 0.0,
    relief_wavelength_m: float = 2000.0,
    scarp_width_m: float = 50.0,
    seed: int = 0,
    nodata_polygons: BaseGeometry | Iterable[BaseGeometry] | None = None,
    hanging_wall_extent_m: float | None = None,
    hanging_wall_smoothing: float = 0.0,
    prefault_fn: Callable[[np.ndarray, np.ndarray], np.ndarray] | None = None,
    crs: Any = None,
    kappa_t_m2: float = 0.0,
) -> tuple[np.ndarray, Affine, SceneTruth]:
    """Build a DEM by displacing a pre-faulting surface along known normal faults.

    Parameters
    ----------
    faults : GeoDataFrame or list of dict
        One fault per row / dict, with a straight or gently curved
        ``geometry`` (LineString; a MultiLineString whose parts join into one
        line is merged), ``dip_deg`` (0 < dip <= 90), ``dip_dir_deg``
        (azimuth towards the hanging wall, within 60 deg of the trace normal),
        ``max_throw_m`` (m) and optionally ``profile_shape`` (default
        ``"elliptical"``), ``peak_pos``, ``plateau_frac`` (see
        :func:`throw_profile`), ``hw_extent_m`` (per-fault override of
        ``hanging_wall_extent_m``), ``fault_id`` (default 1..N) and ``name``.
        The digitising direction does not change the scene.
    origin_xy : (x0, y0)
        Top-left corner of the grid, metres in the working CRS.
    pixel_size_m : float
        Pixel size, m.
    shape : (nrows, ncols)
        Grid size.
    base_elevation_m : float
        Pre-fault elevation at the grid centre, m.
    regional_slope_deg, regional_slope_azimuth_deg : float
        Planar regional slope of the pre-fault surface, degrees, and the
        azimuth towards which it descends.
    relief_m : float
        Standard deviation of the gentle random relief added to the plane, m
        (0 = none).
    relief_wavelength_m : float
        Dominant wavelength of that relief, m.
    scarp_width_m : float
        Width of the smooth scarp ramp centred on each trace, m (0 = a step).
    seed : int
        Seed of the relief; same seed, same arrays.
    nodata_polygons : polygon or iterable of polygons, optional
        Pixels whose centres fall inside become NaN.
    hanging_wall_extent_m : float, optional
        Distance from the trace over which the hanging wall moves rigidly;
        beyond it the displacement tapers to zero (raised cosine) at twice
        that distance. ``None`` (default) moves the whole hanging-wall side
        to the grid edge.
    prefault_fn : callable, optional
        ``f(x, y) -> z`` (vectorised, metres) replacing the plane + relief as
        the pre-fault surface (e.g. to place marker features).
    crs : optional
        CRS of the truth GeoDataFrames (default: that of ``faults``).
    kappa_t_m2 : float
        Diffusivity times age (m^2) of every scarp: > 0 replaces the
        raised-sine ramp by a diffusion-degraded one
        (:func:`faultmap.synthetic.degradation.diffused_ramp`); a fault's own
        ``kappa_t_m2`` field overrides it (0 = the ramp of ``scarp_width_m``).

    Returns
    -------
    dem : numpy.ndarray
        float32 (nrows, ncols), NaN for nodata. Value at row i, column j is
        the elevation at x = x0 + (j + 0.5) px, y = y0 - (i + 0.5) px.
    transform : rasterio.Affine
        ``Affine(px, 0, x0, 0, -px, y0)``.
    truth : SceneTruth
        Per-fault truth and a function of true throw along every trace.

    Notes
    -----
    Construction (kinematic, dip-slip on planar faults):

    1. Pre-fault surface ``z0(x, y)``: the plane ``base - tan(slope) *
       (distance from the grid centre along the descent azimuth)`` plus a
       seeded Gaussian-filtered random field (std ``relief_m``) sampled with
       cubic splines (``scipy.ndimage.map_coordinates``) from a lattice tied
       to the grid extent, not to the pixel size.
    2. Each fault works in the frame of its tip-to-tip chord: ``a`` along the
       chord, ``b`` perpendicular to it and positive towards the hanging
       wall, ``d = b - b_trace(a)`` the offset from the trace. Between the
       tips (0 <= a <= chord) the local throw is ``T(s)`` of
       :func:`throw_profile`, with ``s`` the arc length of the trace at ``a``
       divided by the trace length; beyond the tips it is zero, so there is
       no step outside the fault.
    3. A hanging-wall point is moved down by ``T`` and horizontally by the
       heave ``h = T / tan(dip)`` along the dip direction, away from the
       footwall. Both are multiplied by a smooth scarp ramp (0 on the
       footwall, 1/2 on the trace, 1 on the hanging wall, raised sine of
       width ``scarp_width_m``) and by the optional hanging-wall taper;
       with ``hanging_wall_smoothing`` k > 0, the throw profile used at a
       hanging-wall point a distance d beyond the scarp edge is ``T``
       smoothed along the chord by a Gaussian of sigma ``k d``.
       By inverse mapping, the surface at ``p`` is the pre-fault surface at
       ``p - h u`` (``u`` the dip-direction unit vector) minus ``T``. Far
       from the tips a planar surface of slope ``theta`` down the dip
       direction therefore shows a vertical separation ``T - h tan(theta)``
       at the trace, ``T + h tan(theta)`` for a surface sloping the other
       way (Caskey 1995, J. Struct. Geol. 17; derived).
    4. Faults are applied in sequence with their traces given in present-day
       (map) coordinates: each later fault carries the earlier scarps with
       its hanging wall, and pulling the map traces back through the later
       displacements is, to first order and exactly where the later fields
       are uniform around the earlier trace, the same as evaluating every
       fault's displacement at the present-day point and summing. The DEM is
       therefore ``z(p) = z0(p - sum_k h_k(p) u_k) - sum_k T_k(p)``: every
       scarp is centred on its given trace and the truth holds whatever the
       order.
    """
    px = _positive(pixel_size_m, "pixel_size_m")
    try:
        nrows, ncols = int(shape[0]), int(shape[1])
    except (TypeError, ValueError, IndexError):
        raise ParameterError(f"shape must be (nrows, ncols), got {shape!r}") from None
    if nrows < 2 or ncols < 2:
        raise ParameterError(f"shape must be at least (2, 2), got {shape!r}")
    x0, y0 = (float(v) for v in origin_xy)
    if not (0.0 <= float(regional_slope_deg) < 90.0):
        raise ParameterError(f"regional_slope_deg must be in [0, 90), got {regional_slope_deg}")
    if float(relief_m) < 0:
        raise ParameterError(f"relief_m must be >= 0, got {relief_m}")
    if float(relief_m) > 0:
        _positive(relief_wavelength_m, "relief_wavelength_m")
    if float(scarp_width_m) < 0:
        raise ParameterError(f"scarp_width_m must be >= 0, got {scarp_width_m}")
    scarp_w = float(scarp_width_m)

    smoothing = float(hanging_wall_smoothing)
    if not np.isfinite(smoothing) or smoothing < 0:
        raise ParameterError(f"hanging_wall_smoothing must be >= 0, got {hanging_wall_smoothing}")
    flist = _prepare_faults(faults, hanging_wall_extent_m=hanging_wall_extent_m, kappa_t_m2=kappa_t_m2)
    transform = Affine(px, 0.0, x0, 0.0, -px, y0)
    if smoothing > 0:
        diag = math.hypot(nrows, ncols) * px
        for f in flist:
            reach = 2.0 * f.hw_extent_m if np.isfinite(f.hw_extent_m) else diag
            _smoothing_table(f, smoothing, reach)
    xc, yc = pixel_centres(transform, (nrows, ncols))

    # Accumulate displacement fields at present-day pixel centres.
    drop = np.zeros((nrows, ncols))
    shift_x = np.zeros((nrows, ncols))
    shift_y = np.zeros((nrows, ncols))
    for f in flist:
        if f.max_throw_m == 0:
            continue
        win = _fault_window(f, x0, y0, px, (nrows, ncols), scarp_w)
        if win is None:
            continue
        rs, cs = win
        xx, yy = np.meshgrid(xc[cs], yc[rs])
        t, h = _displacement(f, xx, yy, scarp_w)
        drop[rs, cs] += t
        shift_x[rs, cs] += h * f.ux
        shift_y[rs, cs] += h * f.uy

    xs = xc[None, :] - shift_x
    ys = yc[:, None] - shift_y
    del shift_x, shift_y
    if prefault_fn is not None:
        z0 = np.asarray(prefault_fn(xs, ys), dtype=float)
        if z0.shape != xs.shape:
            z0 = np.broadcast_to(z0, xs.shape)
    else:
        cx, cy = x0 + ncols * px / 2.0, y0 - nrows * px / 2.0
        az = math.radians(float(regional_slope_azimuth_deg))
        tan_t = math.tan(math.radians(float(regional_slope_deg)))
        z0 = float(base_elevation_m) - tan_t * ((xs - cx) * math.sin(az) + (ys - cy) * math.cos(az))
        if float(relief_m) > 0:
            bounds = (x0, y0 - nrows * px, x0 + ncols * px, y0)
            coeffs, rx0, ry0, g = _relief_grid(bounds, float(relief_m), float(relief_wavelength_m), int(seed))
            z0 = z0 + _sample_grid(coeffs, rx0, ry0, g, xs, ys)
    dem = (z0 - drop).astype(np.float32)

    if nodata_polygons is not None:
        polys = [nodata_polygons] if isinstance(nodata_polygons, BaseGeometry) else list(nodata_polygons)
        for poly in polys:
            if poly is None or poly.is_empty:
                continue
            bx0, by0, bx1, by1 = poly.bounds
            j0 = max(int(math.floor((bx0 - x0) / px)), 0)
            j1 = min(int(math.ceil((bx1 - x0) / px)) + 1, ncols)
            i0 = max(int(math.floor((y0 - by1) / px)), 0)
            i1 = min(int(math.ceil((y0 - by0) / px)) + 1, nrows)
            if j1 <= j0 or i1 <= i0:
                continue
            gx, gy = np.meshgrid(xc[j0:j1], yc[i0:i1])
            shapely.prepare(poly)
            inside = shapely.contains_xy(poly, gx, gy)
            dem[i0:i1, j0:j1][inside] = np.nan

    if crs is None and isinstance(faults, gpd.GeoDataFrame):
        crs = faults.crs
    truth = SceneTruth(
        faults=_truth_table(flist, crs),
        transform=transform,
        shape=(nrows, ncols),
        params={
            "origin_xy": (x0, y0), "pixel_size_m": px, "shape": (nrows, ncols),
            "base_elevation_m": float(base_elevation_m),
            "regional_slope_deg": float(regional_slope_deg),
            "regional_slope_azimuth_deg": float(regional_slope_azimuth_deg),
            "relief_m": float(relief_m), "relief_wavelength_m": float(relief_wavelength_m),
            "scarp_width_m": scarp_w, "seed": int(seed),
            "hanging_wall_extent_m": hanging_wall_extent_m,
            "hanging_wall_smoothing": smoothing,
            "custom_prefault": prefault_fn is not None,
            "kappa_t_m2": float(kappa_t_m2),
        },
    )
    return dem, transform, truth

