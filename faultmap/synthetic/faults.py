"""Fault records of a synthetic scene and the displacement field of each fault.

Each fault works in the frame of its tip-to-tip chord (``a`` along the chord,
``b`` towards the hanging wall); the hanging wall drops by the local throw of
its profile and moves by the heave along the dip direction, through a smooth
scarp ramp and an optional hanging-wall taper (see
:func:`faultmap.synthetic.builder.build_dem` for the construction and its sources).
Pure functions, no file I/O.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from typing import Any

import geopandas as gpd
import numpy as np
import shapely
from scipy import ndimage
from shapely.geometry import LineString, MultiLineString
from shapely.geometry.base import BaseGeometry

from faultmap.errors import GeometryError, InputError, ParameterError
from faultmap.synthetic.degradation import diffused_ramp, ramp_reach_m
from faultmap.synthetic.grid import _positive
from faultmap.synthetic.profile_shapes import _check_profile_params, throw_profile


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
    kappa_t_m2: float = 0.0  # > 0: diffusion-degraded scarp (erf ramp) instead of the raised sine
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


def _prepare_faults(faults: Any, *, hanging_wall_extent_m: float | None, kappa_t_m2: float = 0.0) -> list[_Fault]:
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
        kt = _get_float(rec, "kappa_t_m2", float(kappa_t_m2), label)
        if not np.isfinite(kt) or kt < 0:
            raise ParameterError(f"fault {label}: kappa_t_m2 must be >= 0 (m^2), got {kt}")
        f = _Fault(fid, name, line, dip, dip_dir, tmax, shape, peak, plat, ext_m, kt)
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
    half = max(scarp_width_m / 2.0, ramp_reach_m(f.kappa_t_m2), 0.0) + px
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
    ramp = diffused_ramp(d, f.kappa_t_m2) if f.kappa_t_m2 > 0 else _scarp_ramp(d, scarp_width_m)
    drop = t * ramp * _hw_taper(d, f.hw_extent_m)
    return drop, drop * f.cot_dip

