"""Fault populations for synthetic scenes: parallel arrays and random D-L populations.

Straight traces with known length, throw, dip and dip direction, ready for
:func:`faultmap.synthetic.builder.build_dem`. Pure functions (seeded), no file I/O.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

import geopandas as gpd
import numpy as np
import shapely
from shapely.geometry import LineString

from faultmap.errors import ParameterError
from faultmap.synthetic.grid import _positive
from faultmap.synthetic.profile_shapes import _check_profile_params

__all__ = ["parallel_faults", "fault_population"]


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
        Throw profile of every fault (:func:`~faultmap.synthetic.profile_shapes.throw_profile`).
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
