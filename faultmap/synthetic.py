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
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely
from rasterio.transform import Affine
from scipy import ndimage
from shapely.geometry import LineString, MultiLineString
from shapely.geometry.base import BaseGeometry

from faultmap.errors import GeometryError, InputError, ParameterError

__all__ = [
    "PROFILE_SHAPES",
    "SceneTruth",
    "throw_profile",
    "build_dem",
    "grid_spec",
    "pixel_centres",
    "parallel_faults",
    "fault_population",
]

#: Along-strike throw profile shapes understood by :func:`throw_profile`.
PROFILE_SHAPES: tuple[str, ...] = ("elliptical", "triangular", "plateau")


# ---------------------------------------------------------------------------
# Along-strike throw profiles
# ---------------------------------------------------------------------------
def throw_profile(
    s_norm: float | np.ndarray,
    max_throw_m: float,
    *,
    shape: str = "elliptical",
    peak_pos: float = 0.5,
    plateau_frac: float = 0.5,
) -> np.ndarray:
    """Throw along a fault trace as a function of normalised distance.

    Parameters
    ----------
    s_norm : float or array
        Normalised distance along the trace, 0 at one tip and 1 at the other.
        Values outside [0, 1] (beyond the tips) get zero throw; NaN stays NaN.
    max_throw_m : float
        Maximum throw, metres (>= 0).
    shape : {"elliptical", "triangular", "plateau"}
        Profile shape (see Notes).
    peak_pos : float
        Normalised position of the maximum (0 < peak_pos < 1). 0.5 gives a
        symmetric profile; other values skew it.
    plateau_frac : float
        For ``shape="plateau"``: fraction of the trace length at maximum throw
        (0 <= plateau_frac < 1).

    Returns
    -------
    numpy.ndarray
        Throw in metres, same shape as ``s_norm``; zero at the tips and beyond.

    Notes
    -----
    With ``r`` the signed distance from the peak scaled to -1 at the first
    tip and +1 at the second (``r = (s - c)/c`` before the peak ``c``,
    ``(s - c)/(1 - c)`` after it), the throw is ``max_throw_m * f(r)`` with

    * elliptical: ``f = sqrt(1 - r**2)``, the displacement of an elliptical
      crack in an elastic medium (Walsh & Watterson 1987, 1988, from memory);
    * triangular: ``f = 1 - |r|``, linear tapers as described for many
      natural faults (Manighetti et al. 2001, from memory);
    * plateau: ``f = 1`` for ``|r| <= plateau_frac`` and a raised-cosine taper
      ``(1 + cos(pi (|r| - p)/(1 - p)))/2`` to the tips (our choice; a
      flat-topped profile, common practice for tests needing a uniform throw).
    """
    shape = _check_profile_params(shape, peak_pos, plateau_frac)
    max_throw_m = float(max_throw_m)
    if not np.isfinite(max_throw_m) or max_throw_m < 0:
        raise ParameterError(
            f"max_throw_m must be a finite number >= 0, got {max_throw_m}; pass a throw in metres"
        )
    s = np.asarray(s_norm, dtype=float)
    c = float(peak_pos)
    with np.errstate(invalid="ignore"):
        r = np.where(s < c, (s - c) / c, (s - c) / (1.0 - c))
        ar = np.abs(r)
        if shape == "elliptical":
            f = np.sqrt(np.clip(1.0 - r * r, 0.0, None))
        elif shape == "triangular":
            f = np.clip(1.0 - ar, 0.0, None)
        else:
            p = float(plateau_frac)
            taper = 0.5 * (1.0 + np.cos(np.pi * np.clip((ar - p) / (1.0 - p), 0.0, 1.0)))
            f = np.where(ar <= p, 1.0, taper)
        inside = (s > 0.0) & (s < 1.0)
    out = np.where(inside, max_throw_m * f, 0.0)
    return np.where(np.isnan(s), np.nan, out)


def _check_profile_params(shape: str, peak_pos: float, plateau_frac: float) -> str:
    shape = str(shape).strip().lower()
    if shape not in PROFILE_SHAPES:
        raise ParameterError(
            f"unknown throw profile shape {shape!r}; use one of {', '.join(PROFILE_SHAPES)}"
        )
    if not (0.0 < float(peak_pos) < 1.0):
        raise ParameterError(f"peak_pos must be strictly between 0 and 1, got {peak_pos}")
    if not (0.0 <= float(plateau_frac) < 1.0):
        raise ParameterError(f"plateau_frac must be in [0, 1), got {plateau_frac}")
    return shape


# ---------------------------------------------------------------------------
# Grid helpers
# ---------------------------------------------------------------------------
def grid_spec(
    bounds: Sequence[float], *, pixel_size_m: float, margin_m: float = 0.0
) -> dict[str, Any]:
    """Grid origin and shape covering ``bounds`` (keyword arguments for :func:`build_dem`).

    Parameters
    ----------
    bounds : (xmin, ymin, xmax, ymax)
        Area to cover, metres in the working CRS.
    pixel_size_m : float
        Pixel size, metres.
    margin_m : float
        Extra margin added on every side, metres.

    Returns
    -------
    dict
        ``{"origin_xy": (x0, y0), "pixel_size_m": px, "shape": (nrows, ncols)}``
        with ``(x0, y0)`` the top-left corner.
    """
    px = _positive(pixel_size_m, "pixel_size_m")
    xmin, ymin, xmax, ymax = (float(v) for v in bounds)
    if not (xmax > xmin and ymax > ymin):
        raise ParameterError("bounds must be (xmin, ymin, xmax, ymax) with xmax > xmin and ymax > ymin")
    m = float(margin_m)
    ncols = int(math.ceil((xmax - xmin + 2 * m) / px - 1e-9))
    nrows = int(math.ceil((ymax - ymin + 2 * m) / px - 1e-9))
    return {"origin_xy": (xmin - m, ymax + m), "pixel_size_m": px, "shape": (nrows, ncols)}


def pixel_centres(transform: Affine, shape: tuple[int, int]) -> tuple[np.ndarray, np.ndarray]:
    """Coordinates of pixel centres of a north-up grid.

    Parameters
    ----------
    transform : rasterio.Affine
        North-up transform ``Affine(px, 0, x0, 0, -px, y0)``.
    shape : (nrows, ncols)

    Returns
    -------
    x, y : numpy.ndarray
        1-D arrays: ``x[j] = x0 + (j + 0.5) px`` (length ncols) and
        ``y[i] = y0 - (i + 0.5) px`` (length nrows).
    """
    nrows, ncols = int(shape[0]), int(shape[1])
    x = transform.c + (np.arange(ncols) + 0.5) * transform.a
    y = transform.f + (np.arange(nrows) + 0.5) * transform.e
    return x, y


# ---------------------------------------------------------------------------
# Fault records
# ---------------------------------------------------------------------------
@dataclass
class _Fault:
    fault_id: int
    name: str
    line: LineString
    dip_deg: float
    dip_dir_deg: float
    max_throw_m: float
    shape: str
    peak_pos: float
    plateau_frac: float
    hw_extent_m: float  # inf = rigid hanging wall to the grid edge
    # derived (chord frame)
    x0: float = 0.0
    y0: float = 0.0
    tx: float = 0.0
    ty: float = 0.0
    nx: float = 0.0
    ny: float = 0.0
    chord_m: float = 0.0
    a_v: np.ndarray = field(default_factory=lambda: np.zeros(0))
    b_v: np.ndarray = field(default_factory=lambda: np.zeros(0))
    s_v: np.ndarray = field(default_factory=lambda: np.zeros(0))
    length_m: float = 0.0
    ux: float = 0.0
    uy: float = 0.0
    cot_dip: float = 0.0
    # along-strike smoothing table (hanging_wall_smoothing > 0)
    sm_ratio: float = 0.0
    sm_sigma_max: float = 0.0
    sm_a0: float = 0.0
    sm_da: float = 1.0
    sm_table: np.ndarray | None = None


def _positive(value: Any, name: str) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise ParameterError(f"{name} must be a number, got {value!r}") from None
    if not np.isfinite(v) or v <= 0:
        raise ParameterError(f"{name} must be a positive finite number, got {value!r}")
    return v


def _as_line(geom: Any, label: str) -> LineString:
    if isinstance(geom, str):
        geom = shapely.from_wkt(geom)
    if not isinstance(geom, BaseGeometry) or geom.is_empty:
        raise GeometryError(f"fault {label}: geometry is missing or empty; give a LineString trace")
    if isinstance(geom, MultiLineString):
        merged = shapely.line_merge(geom)
        if not isinstance(merged, LineString):
            raise GeometryError(
                f"fault {label}: multi-part trace does not join into one line; "
                "join the parts or split them into separate faults"
            )
        geom = merged
    if not isinstance(geom, LineString):
        raise GeometryError(f"fault {label}: geometry is {geom.geom_type}, expected a LineString trace")
    xy = np.asarray(geom.coords, dtype=float)[:, :2]
    keep = np.ones(len(xy), dtype=bool)
    keep[1:] = np.hypot(*np.diff(xy, axis=0).T) > 1e-9
    xy = xy[keep]
    if len(xy) < 2:
        raise GeometryError(f"fault {label}: trace has fewer than two distinct vertices")
    return LineString(xy)


def _records(faults: Any) -> list[dict[str, Any]]:
    if isinstance(faults, gpd.GeoDataFrame):
        recs = []
        geom_name = faults.geometry.name
        for rec in faults.to_dict("records"):
            rec = dict(rec)
            rec["geometry"] = rec.pop(geom_name)
            recs.append(rec)
        return recs
    if isinstance(faults, Mapping):
        return [dict(faults)]
    if isinstance(faults, Iterable):
        recs = []
        for rec in faults:
            if not isinstance(rec, Mapping):
                raise InputError("faults must be a GeoDataFrame or a list of dicts with a 'geometry' key")
            recs.append(dict(rec))
        return recs
    raise InputError("faults must be a GeoDataFrame or a list of dicts with a 'geometry' key")


def _get_float(rec: Mapping[str, Any], key: str, default: float | None, label: str) -> float:
    value = rec.get(key, default)
    if value is None or (isinstance(value, float) and math.isnan(value)):
        if default is None:
            raise InputError(f"fault {label}: {key!r} is missing; give it in the fault table")
        value = default
    try:
        return float(value)
    except (TypeError, ValueError):
        raise InputError(f"fault {label}: {key!r} must be a number, got {value!r}") from None


def _prepare_faults(faults: Any, *, hanging_wall_extent_m: float | None) -> list[_Fault]:
    out: list[_Fault] = []
    default_extent = math.inf if hanging_wall_extent_m is None else _positive(
        hanging_wall_extent_m, "hanging_wall_extent_m"
    )
    for k, rec in enumerate(_records(faults)):
        fid = rec.get("fault_id", k + 1)
        fid = k + 1 if fid is None or (isinstance(fid, float) and math.isnan(fid)) else int(fid)
        label = f"#{fid}"
        line = _as_line(rec.get("geometry"), label)
        dip = _get_float(rec, "dip_deg", None, label)
        if not (0.0 < dip <= 90.0):
            raise ParameterError(f"fault {label}: dip_deg must be in (0, 90], got {dip}")
        dip_dir = _get_float(rec, "dip_dir_deg", None, label) % 360.0
        tmax = _get_float(rec, "max_throw_m", None, label)
        if not np.isfinite(tmax) or tmax < 0:
            raise ParameterError(f"fault {label}: max_throw_m must be >= 0, got {tmax}")
        shape_val = rec.get("profile_shape", "elliptical")
        if shape_val is None or (isinstance(shape_val, float) and math.isnan(shape_val)):
            shape_val = "elliptical"
        peak = _get_float(rec, "peak_pos", 0.5, label)
        plat = _get_float(rec, "plateau_frac", 0.5, label)
        shape = _check_profile_params(shape_val, peak, plat)
        ext = rec.get("hw_extent_m", None)
        if ext is None or (isinstance(ext, float) and math.isnan(ext)):
            ext_m = default_extent
        else:
            ext_m = _positive(ext, f"fault {label}: hw_extent_m")
        name = rec.get("name", "")
        name = "" if name is None or (isinstance(name, float) and math.isnan(name)) else str(name)
        f = _Fault(fid, name, line, dip, dip_dir, tmax, shape, peak, plat, ext_m)
        _chord_frame(f, label)
        out.append(f)
    ids = [f.fault_id for f in out]
    if len(set(ids)) != len(ids):
        raise InputError("fault_id values must be unique; renumber the faults")
    return out


def _chord_frame(f: _Fault, label: str) -> None:
    """Chord-aligned frame: a along the tip-to-tip chord, b towards the hanging wall."""
    xy = np.asarray(f.line.coords, dtype=float)
    p0, p1 = xy[0], xy[-1]
    chord = float(np.hypot(*(p1 - p0)))
    if chord <= 0:
        raise GeometryError(f"fault {label}: trace is closed or has zero chord; give an open trace")
    tx, ty = (p1 - p0) / chord
    az = math.radians(f.dip_dir_deg)
    ux, uy = math.sin(az), math.cos(az)
    nx, ny = ty, -tx  # right-hand normal
    if nx * ux + ny * uy < 0:
        nx, ny = -nx, -ny
    cos_off = nx * ux + ny * uy
    if cos_off < 0.5:
        raise ParameterError(
            f"fault {label}: dip_dir_deg {f.dip_dir_deg:.1f} is more than 60 deg from the normal "
            "to the trace; give the dip direction (towards the hanging wall) across the trace"
        )
    rel = xy - p0
    a_v = rel @ np.array([tx, ty])
    b_v = rel @ np.array([nx, ny])
    if np.any(np.diff(a_v) <= 0):
        raise GeometryError(
            f"fault {label}: trace folds back along its tip-to-tip chord; "
            "give a straight or gently curved trace"
        )
    seg = np.hypot(*np.diff(xy, axis=0).T)
    s_v = np.concatenate([[0.0], np.cumsum(seg)])
    f.x0, f.y0 = float(p0[0]), float(p0[1])
    f.tx, f.ty, f.nx, f.ny = float(tx), float(ty), float(nx), float(ny)
    f.chord_m = chord
    f.a_v, f.b_v, f.s_v = a_v, b_v, s_v
    f.length_m = float(s_v[-1])
    f.ux, f.uy = ux, uy
    d = math.radians(f.dip_deg)
    f.cot_dip = math.cos(d) / math.sin(d)


def _scarp_ramp(d: np.ndarray, width_m: float) -> np.ndarray:
    """0 on the footwall, 1 on the hanging wall, raised-sine ramp of width ``width_m`` centred on d=0."""
    if width_m <= 0:
        return np.where(d > 0, 1.0, np.where(d < 0, 0.0, 0.5))
    z = np.clip(d / width_m, -0.5, 0.5)
    return 0.5 * (1.0 + np.sin(np.pi * z))


def _hw_taper(d: np.ndarray, extent_m: float) -> np.ndarray:
    """1 up to ``extent_m`` into the hanging wall, raised-cosine taper to 0 at twice that."""
    if not np.isfinite(extent_m):
        return np.ones_like(d)
    z = np.clip((d - extent_m) / extent_m, 0.0, 1.0)
    return 0.5 * (1.0 + np.cos(np.pi * z))


def _fault_window(f: _Fault, x0: float, y0: float, px: float, shape: tuple[int, int],
                  scarp_width_m: float) -> tuple[slice, slice] | None:
    """Row/column window that holds every pixel this fault displaces."""
    nrows, ncols = shape
    half = max(scarp_width_m, 0.0) / 2.0 + px
    bmin = float(f.b_v.min()) - half
    if np.isfinite(f.hw_extent_m):
        bmax = float(f.b_v.max()) + half + 2.0 * f.hw_extent_m
    else:
        bmax = float(f.b_v.max()) + half + 2.0 * (nrows + ncols) * px  # beyond the grid
    ext = px + 4.0 * f.sm_sigma_max
    corners_ab = np.array([[-ext, bmin], [f.chord_m + ext, bmin], [f.chord_m + ext, bmax], [-ext, bmax]])
    cx = f.x0 + corners_ab[:, 0] * f.tx + corners_ab[:, 1] * f.nx
    cy = f.y0 + corners_ab[:, 0] * f.ty + corners_ab[:, 1] * f.ny
    j0 = max(int(math.floor((cx.min() - x0) / px)) - 1, 0)
    j1 = min(int(math.ceil((cx.max() - x0) / px)) + 1, ncols)
    i0 = max(int(math.floor((y0 - cy.max()) / px)) - 1, 0)
    i1 = min(int(math.ceil((y0 - cy.min()) / px)) + 1, nrows)
    if j1 <= j0 or i1 <= i0:
        return None
    return slice(i0, i1), slice(j0, j1)


def _smoothing_table(f: _Fault, ratio: float, d_max: float, n_levels: int = 25) -> None:
    """Throw along the chord smoothed by Gaussians of sigma 0..sigma_max (1-D table)."""
    f.sm_ratio = ratio
    f.sm_sigma_max = min(ratio * d_max, f.chord_m)
    if f.sm_sigma_max <= 0:
        f.sm_table = None
        return
    da = f.chord_m / 500.0
    pad = 4.0 * f.sm_sigma_max
    a = np.arange(-pad, f.chord_m + pad + da, da)
    s_norm = np.interp(a, f.a_v, f.s_v) / f.length_m
    s_norm = np.where((a < 0) | (a > f.chord_m), -1.0, s_norm)
    t = throw_profile(s_norm, f.max_throw_m, shape=f.shape, peak_pos=f.peak_pos,
                      plateau_frac=f.plateau_frac)
    sig = np.linspace(0.0, f.sm_sigma_max, n_levels)
    table = np.empty((n_levels, a.size))
    table[0] = t
    for k in range(1, n_levels):
        table[k] = ndimage.gaussian_filter1d(t, sig[k] / da, mode="constant", cval=0.0, truncate=4.0)
    f.sm_a0, f.sm_da, f.sm_table = float(a[0]), da, table


def _displacement(f: _Fault, x: np.ndarray, y: np.ndarray, scarp_width_m: float
                  ) -> tuple[np.ndarray, np.ndarray]:
    """Vertical drop (m, positive down) and heave magnitude (m) of fault f at points x, y."""
    dx = x - f.x0
    dy = y - f.y0
    a = dx * f.tx + dy * f.ty
    b = dx * f.nx + dy * f.ny
    d = b - np.interp(a, f.a_v, f.b_v)
    if f.sm_table is None:
        s_norm = np.interp(a, f.a_v, f.s_v) / f.length_m
        s_norm = np.where((a < 0) | (a > f.chord_m), -1.0, s_norm)  # beyond the tips: no throw
        t = throw_profile(s_norm, f.max_throw_m, shape=f.shape, peak_pos=f.peak_pos,
                          plateau_frac=f.plateau_frac)
    else:
        sigma = np.clip(f.sm_ratio * (d - 0.5 * scarp_width_m), 0.0, f.sm_sigma_max)
        n_levels = f.sm_table.shape[0]
        coords = [sigma / f.sm_sigma_max * (n_levels - 1), (a - f.sm_a0) / f.sm_da]
        t = ndimage.map_coordinates(f.sm_table, [c.ravel() for c in coords], order=1,
                                    mode="constant", cval=0.0).reshape(a.shape)
        t = np.where(sigma > 0, t, np.where((a < 0) | (a > f.chord_m), 0.0, t))
    drop = t * _scarp_ramp(d, scarp_width_m) * _hw_taper(d, f.hw_extent_m)
    return drop, drop * f.cot_dip


# ---------------------------------------------------------------------------
# Truth
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class SceneTruth:
    """What a synthetic scene was built from.

    Attributes
    ----------
    faults : geopandas.GeoDataFrame
        One row per fault, in input order, geometry = the trace as given
        (multi-part traces merged). Columns: ``fault_id``, ``name``,
        ``length_m``, ``max_throw_m``, ``dip_deg``, ``dip_dir_deg``,
        ``strike_deg`` (right-hand rule, ``dip_dir_deg - 90``),
        ``max_heave_m`` (``max_throw_m / tan(dip)``), ``max_throw_dist_m``
        (distance of the maximum from the trace's start vertex),
        ``profile_shape``, ``peak_pos``, ``plateau_frac``, ``hw_extent_m``
        (inf for a rigid hanging wall).
    transform : rasterio.Affine
        Grid transform (pixel-centre convention in the module docstring).
    shape : (nrows, ncols)
    params : dict
        The build parameters (origin, pixel size, slope, relief, seed, ...).
    """

    faults: gpd.GeoDataFrame
    transform: Affine
    shape: tuple[int, int]
    params: dict[str, Any]

    def _row(self, fault_id: int) -> pd.Series:
        rows = self.faults.loc[self.faults["fault_id"] == int(fault_id)]
        if rows.empty:
            raise ParameterError(f"no fault with fault_id {fault_id} in this scene")
        return rows.iloc[0]

    def throw_at(self, fault_id: int, dist_m: float | np.ndarray) -> np.ndarray:
        """True throw (m) at distance ``dist_m`` (m) along the trace from its start vertex."""
        r = self._row(fault_id)
        s = np.asarray(dist_m, dtype=float) / float(r["length_m"])
        return throw_profile(s, float(r["max_throw_m"]), shape=str(r["profile_shape"]),
                             peak_pos=float(r["peak_pos"]), plateau_frac=float(r["plateau_frac"]))

    def heave_at(self, fault_id: int, dist_m: float | np.ndarray) -> np.ndarray:
        """True heave (m), throw / tan(dip), at distance ``dist_m`` (m) along the trace."""
        r = self._row(fault_id)
        d = math.radians(float(r["dip_deg"]))
        return self.throw_at(fault_id, dist_m) * (math.cos(d) / math.sin(d))

    def stations(self, *, spacing_m: float = 100.0) -> gpd.GeoDataFrame:
        """True throw and heave at stations every ``spacing_m`` or less along every trace.

        Returns
        -------
        geopandas.GeoDataFrame
            Points with ``fault_id``, ``name``, ``dist_m`` (from the start
            vertex, tips included), ``throw_m``, ``heave_m``.
        """
        spacing = _positive(spacing_m, "spacing_m")
        parts = []
        for r in self.faults.itertuples(index=False):
            n = max(int(math.ceil(r.length_m / spacing - 1e-9)), 1)
            dist = np.linspace(0.0, r.length_m, n + 1)
            pts = shapely.line_interpolate_point(r.geometry, dist)
            parts.append(gpd.GeoDataFrame(
                {"fault_id": np.full(n + 1, r.fault_id, dtype=int),
                 "name": [r.name] * (n + 1),
                 "dist_m": dist,
                 "throw_m": self.throw_at(r.fault_id, dist),
                 "heave_m": self.heave_at(r.fault_id, dist)},
                geometry=pts, crs=self.faults.crs))
        if not parts:
            return gpd.GeoDataFrame({"fault_id": [], "name": [], "dist_m": [], "throw_m": [],
                                     "heave_m": []}, geometry=[], crs=self.faults.crs)
        return gpd.GeoDataFrame(pd.concat(parts, ignore_index=True), crs=self.faults.crs)


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
    flist = _prepare_faults(faults, hanging_wall_extent_m=hanging_wall_extent_m)
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
        },
    )
    return dem, transform, truth


def _truth_table(flist: list[_Fault], crs: Any) -> gpd.GeoDataFrame:
    rows = []
    for f in flist:
        if f.shape == "plateau":
            # Centre of the plateau (any point on it has the maximum throw).
            c = f.peak_pos
            s_max = c + 0.5 * f.plateau_frac * ((1.0 - c) - c)
        else:
            s_max = f.peak_pos
        rows.append({
            "fault_id": f.fault_id, "name": f.name, "length_m": f.length_m,
            "max_throw_m": f.max_throw_m, "dip_deg": f.dip_deg, "dip_dir_deg": f.dip_dir_deg,
            "strike_deg": (f.dip_dir_deg - 90.0) % 360.0,
            "max_heave_m": f.max_throw_m * f.cot_dip,
            "max_throw_dist_m": s_max * f.length_m,
            "profile_shape": f.shape, "peak_pos": f.peak_pos, "plateau_frac": f.plateau_frac,
            "hw_extent_m": f.hw_extent_m, "geometry": f.line,
        })
    if not rows:
        cols = ["fault_id", "name", "length_m", "max_throw_m", "dip_deg", "dip_dir_deg",
                "strike_deg", "max_heave_m", "max_throw_dist_m", "profile_shape", "peak_pos",
                "plateau_frac", "hw_extent_m"]
        return gpd.GeoDataFrame({c: [] for c in cols}, geometry=[], crs=crs)
    return gpd.GeoDataFrame(rows, geometry="geometry", crs=crs)


# ---------------------------------------------------------------------------
# Scene helpers
# ---------------------------------------------------------------------------
def _unit(az_deg: float) -> np.ndarray:
    a = math.radians(az_deg)
    return np.array([math.sin(a), math.cos(a)])


def _per_fault(value: float | Sequence[float], n: int, name: str) -> np.ndarray:
    arr = np.asarray(value, dtype=float)
    if arr.ndim == 0:
        return np.full(n, float(arr))
    if arr.shape != (n,):
        raise ParameterError(f"{name} must be a number or a sequence of {n} numbers")
    return arr


def parallel_faults(
    n: int,
    *,
    spacing_m: float,
    length_m: float | Sequence[float],
    throw_m: float | Sequence[float],
    dip_deg: float = 60.0,
    dip_dir_deg: float = 90.0,
    centre_xy: tuple[float, float] = (0.0, 0.0),
    profile_shape: str = "plateau",
    alternate: bool = False,
    crs: Any = None,
) -> gpd.GeoDataFrame:
    """Straight parallel faults at a constant spacing.

    Parameters
    ----------
    n : int
        Number of faults.
    spacing_m : float
        Distance between neighbouring traces, measured along the dip
        direction, m.
    length_m, throw_m : float or sequence of n floats
        Trace length and maximum throw of each fault, m.
    dip_deg : float
        Dip of every fault, degrees.
    dip_dir_deg : float
        Dip direction (azimuth towards the hanging wall), degrees; the
        traces strike at ``dip_dir_deg - 90`` (right-hand rule).
    centre_xy : (x, y)
        Centre of the array of faults, m.
    profile_shape : str
        Throw profile of every fault (:func:`throw_profile`).
    alternate : bool
        Alternate the dip direction (faults 2, 4, ... dip the other way),
        making horsts and grabens.
    crs : optional
        CRS of the returned GeoDataFrame.

    Returns
    -------
    geopandas.GeoDataFrame
        Columns ``fault_id`` (1..n, ordered along the dip direction),
        ``name``, ``length_m``, ``dip_deg``, ``dip_dir_deg``, ``max_throw_m``,
        ``profile_shape``; traces digitised along the right-hand-rule strike.
    """
    n = int(n)
    if n < 1:
        raise ParameterError(f"n must be >= 1, got {n}")
    spacing = _positive(spacing_m, "spacing_m")
    lengths = _per_fault(length_m, n, "length_m")
    throws = _per_fault(throw_m, n, "throw_m")
    if np.any(lengths <= 0) or np.any(throws < 0):
        raise ParameterError("length_m must be > 0 and throw_m >= 0 for every fault")
    if not (0.0 < float(dip_deg) <= 90.0):
        raise ParameterError(f"dip_deg must be in (0, 90], got {dip_deg}")
    _check_profile_params(profile_shape, 0.5, 0.5)
    u = _unit(float(dip_dir_deg))
    c = np.asarray(centre_xy, dtype=float)
    rows = []
    for k in range(n):
        ddir = (float(dip_dir_deg) + (180.0 if alternate and k % 2 else 0.0)) % 360.0
        st = _unit(ddir - 90.0)
        mid = c + (k - (n - 1) / 2.0) * spacing * u
        line = LineString([mid - 0.5 * lengths[k] * st, mid + 0.5 * lengths[k] * st])
        rows.append({"fault_id": k + 1, "name": f"F{k + 1}", "length_m": float(lengths[k]),
                     "dip_deg": float(dip_deg), "dip_dir_deg": ddir, "max_throw_m": float(throws[k]),
                     "profile_shape": profile_shape, "geometry": line})
    return gpd.GeoDataFrame(rows, geometry="geometry", crs=crs)


def fault_population(
    n: int,
    *,
    gamma: float = 0.02,
    exponent: float = 1.0,
    length_range_m: tuple[float, float] = (1000.0, 10000.0),
    length_alpha: float | None = None,
    scatter_sigma: float = 0.0,
    extent: tuple[float, float, float, float] = (0.0, 0.0, 50000.0, 50000.0),
    strike_deg: float = 0.0,
    strike_scatter_deg: float = 0.0,
    dip_deg: float | tuple[float, float] = 60.0,
    dip_both_ways: bool = True,
    min_spacing_m: float = 250.0,
    edge_margin_m: float = 0.0,
    profile_shape: str = "elliptical",
    seed: int = 0,
    max_attempts: int = 500,
    crs: Any = None,
) -> gpd.GeoDataFrame:
    """Random, non-overlapping population of straight normal faults with D = gamma L^n.

    Parameters
    ----------
    n : int
        Number of faults.
    gamma : float
        Prefactor of the displacement-length relation, with D and L in metres.
    exponent : float
        Exponent ``n`` of D = gamma L^n.
    length_range_m : (min, max)
        Range of trace lengths, m.
    length_alpha : float, optional
        Exponent of a truncated power-law density p(L) ~ L^-alpha on the
        range; ``None`` draws lengths uniformly in log L.
    scatter_sigma : float
        Standard deviation of ln D about the relation (log-normal scatter;
        gamma L^n is then the median). 0 = exact.
    extent : (xmin, ymin, xmax, ymax)
        Area the traces must lie in, m.
    strike_deg, strike_scatter_deg : float
        Mean strike and the standard deviation of a normal scatter about it,
        degrees.
    dip_deg : float or (min, max)
        Dip, or a range to draw dips from uniformly, degrees.
    dip_both_ways : bool
        If True, each fault dips to either side of the mean strike with
        equal chance; else all dip to ``strike_deg + 90``.
    min_spacing_m : float
        Minimum distance between any two traces, m.
    edge_margin_m : float
        Minimum distance of the traces from the extent boundary, m.
    profile_shape : str
        Throw profile of every fault.
    seed : int
        Random seed; same seed, same population.
    max_attempts : int
        Placement attempts per fault before giving up.
    crs : optional
        CRS of the returned GeoDataFrame.

    Returns
    -------
    geopandas.GeoDataFrame
        Columns ``fault_id`` (1..n, longest first), ``name``, ``length_m``,
        ``max_throw_m``, ``dip_deg``, ``dip_dir_deg``, ``strike_deg``,
        ``profile_shape``; traces digitised along the right-hand-rule strike.

    Notes
    -----
    D = gamma L^n: Cowie & Scholz (1992) argue for n = 1 (from memory),
    Walsh et al. (2002) report n between 1 and 1.5, Schlische et al. (1996)
    D ~ 0.03 L for small rift faults. Lengths from a truncated power law are
    drawn by inverting its cumulative distribution (Clauset et al. 2009).
    Faults are placed longest first by rejection sampling.
    """
    n = int(n)
    if n < 1:
        raise ParameterError(f"n must be >= 1, got {n}")
    gamma = _positive(gamma, "gamma")
    exponent = float(exponent)
    lmin, lmax = (float(v) for v in length_range_m)
    if not (0 < lmin <= lmax):
        raise ParameterError(f"length_range_m must be (min, max) with 0 < min <= max, got {length_range_m}")
    xmin, ymin, xmax, ymax = (float(v) for v in extent)
    margin = float(edge_margin_m)
    if lmax > min(xmax - xmin, ymax - ymin) - 2 * margin:
        raise ParameterError("the longest fault does not fit in the extent; enlarge extent or shorten length_range_m")
    if float(scatter_sigma) < 0:
        raise ParameterError(f"scatter_sigma must be >= 0, got {scatter_sigma}")
    _check_profile_params(profile_shape, 0.5, 0.5)
    rng = np.random.default_rng(seed)

    uu = rng.random(n)
    if lmin == lmax:
        lengths = np.full(n, lmin)
    elif length_alpha is None or abs(float(length_alpha) - 1.0) < 1e-12:
        lengths = lmin * (lmax / lmin) ** uu
    else:
        a1 = 1.0 - float(length_alpha)
        lengths = (lmin ** a1 + uu * (lmax ** a1 - lmin ** a1)) ** (1.0 / a1)
    lengths = np.sort(lengths)[::-1]
    throws = gamma * lengths ** exponent * np.exp(float(scatter_sigma) * rng.standard_normal(n))
    if isinstance(dip_deg, (tuple, list, np.ndarray)):
        lo, hi = (float(v) for v in dip_deg)
        dips = rng.uniform(lo, hi, n)
    else:
        dips = np.full(n, float(dip_deg))
    if np.any(dips <= 0) or np.any(dips > 90):
        raise ParameterError("dip_deg must be in (0, 90]")
    strikes = float(strike_deg) + float(strike_scatter_deg) * rng.standard_normal(n)
    if dip_both_ways:
        strikes = strikes + 180.0 * (rng.random(n) < 0.5)
    strikes = strikes % 360.0

    placed: list[LineString] = []
    rows = []
    inner = shapely.box(xmin + margin, ymin + margin, xmax - margin, ymax - margin)
    for k in range(n):
        st = _unit(strikes[k])
        half = 0.5 * lengths[k] * st
        ok = False
        for _ in range(int(max_attempts)):
            mid = np.array([rng.uniform(xmin + margin + abs(half[0]), xmax - margin - abs(half[0])),
                            rng.uniform(ymin + margin + abs(half[1]), ymax - margin - abs(half[1]))])
            line = LineString([mid - half, mid + half])
            if not inner.covers(line):
                continue
            if placed and float(np.min(shapely.distance(line, placed))) < float(min_spacing_m):
                continue
            ok = True
            break
        if not ok:
            raise ParameterError(
                f"could not place fault {k + 1} of {n} after {max_attempts} attempts; "
                "enlarge extent, or reduce n, length_range_m or min_spacing_m"
            )
        placed.append(line)
        rows.append({"fault_id": k + 1, "name": f"P{k + 1}", "length_m": float(lengths[k]),
                     "max_throw_m": float(throws[k]), "dip_deg": float(dips[k]),
                     "dip_dir_deg": float((strikes[k] + 90.0) % 360.0),
                     "strike_deg": float(strikes[k]), "profile_shape": profile_shape,
                     "geometry": line})
    return gpd.GeoDataFrame(rows, geometry="geometry", crs=crs)
