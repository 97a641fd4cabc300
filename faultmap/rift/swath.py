"""Swath topographic profiles across a rift axis, from a DEM array.

A swath is a rectangle centred on a point of the rift axis: ``2 *
half_length_m`` long across the axis (the profile direction) and ``2 *
half_width_m`` wide along it. Elevations are sampled on a regular grid in
the swath frame by bilinear interpolation and reduced, for each across-axis
distance bin, to the minimum, mean and maximum elevation.

DEM convention: a 2-D array with an affine transform ``(a, b, c, d, e, f)``
(the order of the ``affine`` package used by rasterio), where pixel-corner
coordinates are ``x = a*col + b*row + c`` and ``y = d*col + e*row + f``; for a
north-up grid the centre of row i, col j is at ``(c + (j + 0.5) a, f + (i +
0.5) e)`` with ``e < 0``. NaN marks nodata.
"""

from __future__ import annotations

import warnings
from collections.abc import Sequence
from typing import Any

import numpy as np
import pandas as pd
from scipy import ndimage

from faultmap.errors import FaultmapWarning, InputError, ParameterError

__all__ = [
    "swath_grid",
    "sample_bilinear",
    "profile_stats",
    "swath_profiles",
    "swath_features",
]


def _affine6(transform: Any) -> tuple[float, float, float, float, float, float]:
    if all(hasattr(transform, k) for k in "abcdef"):
        vals = tuple(float(getattr(transform, k)) for k in "abcdef")
    else:
        try:
            vals = tuple(float(v) for v in transform)[:6]
        except TypeError as exc:
            raise InputError("transform must be an affine.Affine or a sequence (a, b, c, d, e, f)") from exc
        if len(vals) != 6:
            raise InputError("transform must have six coefficients (a, b, c, d, e, f)")
    a, b, _, d, e, _ = vals
    if a * e - b * d == 0:
        raise InputError("the DEM transform is singular (zero pixel size)")
    return vals  # type: ignore[return-value]


def swath_grid(
    centres_xy: np.ndarray,
    azimuths_deg: np.ndarray,
    *,
    half_length_m: float,
    half_width_m: float,
    bin_m: float,
    oversample: int = 2,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Sample points of swaths on a regular grid in each swath's frame.

    Parameters
    ----------
    centres_xy : array_like, shape (K, 2)
        Swath centres (points on the rift axis), working CRS, m.
    azimuths_deg : array_like, shape (K,)
        Profile (across-axis) direction of each swath, degrees clockwise
        from grid north; across distance is positive that way.
    half_length_m : float
        Half-length of the profile across the axis, m.
    half_width_m : float
        Half-width of the swath along the axis, m.
    bin_m : float
        Width of the across-axis distance bins, m.
    oversample : int
        Sample columns per bin and sample spacing along the axis of
        ``bin_m / oversample`` (default 2).

    Returns
    -------
    x, y : ndarray, shape (K, n_along, n_bins * oversample)
        Sample coordinates, m.
    across_m : ndarray, shape (n_bins,)
        Across-axis distance of each bin centre, m.
    """
    c = np.atleast_2d(np.asarray(centres_xy, dtype=float))
    az = np.radians(np.atleast_1d(np.asarray(azimuths_deg, dtype=float)))
    if c.shape[1] != 2 or az.shape[0] != c.shape[0]:
        raise ParameterError("centres_xy must be (K, 2) and azimuths_deg (K,)")
    if not (half_length_m > 0 and half_width_m > 0 and bin_m > 0) or oversample < 1:
        raise ParameterError("half_length_m, half_width_m and bin_m must be positive and oversample >= 1")
    nb = max(1, int(round(2.0 * half_length_m / bin_m)))
    step = bin_m / oversample
    n_across = nb * oversample
    n_along = max(1, int(round(2.0 * half_width_m / step)))
    a = -0.5 * nb * bin_m + (np.arange(n_across) + 0.5) * step
    s = -0.5 * n_along * step + (np.arange(n_along) + 0.5) * step
    across_m = -0.5 * nb * bin_m + (np.arange(nb) + 0.5) * bin_m
    # profile direction p = (sin az, cos az); along-axis direction = p rotated -90 deg
    px, py = np.sin(az), np.cos(az)
    tx, ty = -py, px
    x = c[:, 0, None, None] + a[None, None, :] * px[:, None, None] + s[None, :, None] * tx[:, None, None]
    y = c[:, 1, None, None] + a[None, None, :] * py[:, None, None] + s[None, :, None] * ty[:, None, None]
    return x, y, across_m


def sample_bilinear(dem: np.ndarray, transform: Any, x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Bilinear interpolation of a DEM array at world coordinates.

    Parameters
    ----------
    dem : ndarray, shape (rows, cols)
        Elevations, m; NaN = nodata.
    transform : affine.Affine or sequence of 6 floats
        Pixel-corner affine transform ``(a, b, c, d, e, f)``.
    x, y : ndarray
        World coordinates in the DEM's CRS, m (any equal shapes).

    Returns
    -------
    ndarray
        Elevations at the points, same shape as ``x``; NaN outside the
        raster and next to nodata pixels.

    Notes
    -----
    ``scipy.ndimage.map_coordinates(order=1, cval=nan)`` on fractional
    pixel-centre coordinates from the inverse affine (pixel centres at
    integer + 0.5 in corner coordinates).
    """
    z = np.asarray(dem, dtype=float)
    if z.ndim != 2:
        raise InputError("the DEM must be a 2-D array")
    a, b, c, d, e, f = _affine6(transform)
    det = a * e - b * d
    xs = np.asarray(x, dtype=float)
    ys = np.asarray(y, dtype=float)
    dx = xs - c
    dy = ys - f
    col = (e * dx - b * dy) / det - 0.5
    row = (-d * dx + a * dy) / det - 0.5
    out = ndimage.map_coordinates(z, [row.ravel(), col.ravel()], order=1, mode="constant", cval=np.nan, prefilter=False)
    return out.reshape(xs.shape)


def profile_stats(z: np.ndarray, across_m: np.ndarray, *, oversample: int = 2, section_ids: Sequence[int] | None = None) -> pd.DataFrame:
    """Minimum, mean and maximum elevation per across-axis bin.

    Parameters
    ----------
    z : ndarray, shape (K, n_along, n_bins * oversample)
        Sampled elevations (from :func:`swath_grid` points), m; NaN ignored.
    across_m : ndarray, shape (n_bins,)
        Bin centres, m.
    oversample : int
        Sample columns per bin (as given to :func:`swath_grid`).
    section_ids : sequence of int, optional
        Id of each swath (default 1..K).

    Returns
    -------
    DataFrame
        Long table: ``section_id``, ``across_m``, ``z_min_m``, ``z_mean_m``,
        ``z_max_m``, ``n_valid``.
    """
    z = np.asarray(z, dtype=float)
    k, n_along, n_cols = z.shape
    nb = len(across_m)
    if n_cols != nb * oversample:
        raise ParameterError("z columns do not match the bins times oversample")
    zz = z.reshape(k, n_along, nb, oversample).transpose(0, 2, 1, 3).reshape(k, nb, n_along * oversample)
    fin = np.isfinite(zz)
    cnt = fin.sum(axis=2)
    has = cnt > 0
    zmin = np.where(has, np.where(fin, zz, np.inf).min(axis=2), np.nan)
    zmax = np.where(has, np.where(fin, zz, -np.inf).max(axis=2), np.nan)
    zmean = np.where(has, np.where(fin, zz, 0.0).sum(axis=2) / np.maximum(cnt, 1), np.nan)
    ids = np.arange(1, k + 1) if section_ids is None else np.asarray(section_ids)
    return pd.DataFrame(
        {
            "section_id": np.repeat(ids, nb),
            "across_m": np.tile(np.asarray(across_m, dtype=float), k),
            "z_min_m": zmin.ravel(),
            "z_mean_m": zmean.ravel(),
            "z_max_m": zmax.ravel(),
            "n_valid": cnt.ravel(),
        }
    )


def swath_profiles(
    dem: np.ndarray,
    transform: Any,
    *,
    centres_xy: np.ndarray,
    azimuths_deg: np.ndarray,
    half_length_m: float,
    half_width_m: float,
    bin_m: float,
    oversample: int = 2,
    section_ids: Sequence[int] | None = None,
) -> pd.DataFrame:
    """Swath profiles (min, mean, max elevation) across the axis from a DEM.

    Parameters
    ----------
    dem : ndarray, shape (rows, cols)
        Elevations, m; NaN = nodata.
    transform : affine.Affine or sequence of 6 floats
        Pixel-corner affine transform of ``dem``.
    centres_xy, azimuths_deg, half_length_m, half_width_m, bin_m, oversample
        See :func:`swath_grid`. Typically the centres and azimuths of
        ``rift_sections`` and ``half_width_m`` = half the section spacing.
    section_ids : sequence of int, optional
        Ids of the swaths (default 1..K).

    Returns
    -------
    DataFrame
        See :func:`profile_stats`.

    Notes
    -----
    Swath profiles as a way to summarise relief across a structure are common
    practice in tectonic geomorphology; the min/mean/max envelope is the
    usual form. Sampling is vectorised over all swaths at once.
    """
    x, y, across = swath_grid(
        centres_xy, azimuths_deg, half_length_m=half_length_m, half_width_m=half_width_m, bin_m=bin_m, oversample=oversample
    )
    z = sample_bilinear(dem, transform, x, y)
    if not np.any(np.isfinite(z)):
        warnings.warn("no swath sample falls on valid DEM pixels: check the DEM extent and the rift axis", FaultmapWarning, stacklevel=2)
    return profile_stats(z, across, oversample=oversample, section_ids=section_ids)


def swath_features(profiles: pd.DataFrame, *, floor_window_m: float | None = None) -> pd.DataFrame:
    """Valley floor, flank crests, topographic width and relief per swath.

    Parameters
    ----------
    profiles : DataFrame
        Long table from :func:`swath_profiles`.
    floor_window_m : float, optional
        Search the valley floor only within this distance of the axis, m
        (default: the whole profile).

    Returns
    -------
    DataFrame
        One row per ``section_id``: ``floor_across_m`` and ``floor_z_m``
        (minimum of the mean profile), ``crest_left_across_m``,
        ``crest_left_z_m``, ``crest_right_across_m``, ``crest_right_z_m``
        (maximum of the max profile on each side of the floor; left = negative
        across), ``topo_width_km`` (crest to crest), ``relief_m`` (mean of the
        two crest elevations minus the floor elevation), ``crest_at_edge``
        (a crest is in the first or last bin: the profile may be too short).

    Notes
    -----
    Crest-to-crest width and flank relief of a rift valley from swath
    envelopes are common practice; the definitions above are ours.
    """
    need = {"section_id", "across_m", "z_mean_m", "z_max_m"}
    if not need <= set(profiles.columns):
        raise InputError("profiles need section_id, across_m, z_mean_m and z_max_m (from swath_profiles)")
    p = profiles.sort_values(["section_id", "across_m"], kind="stable")
    ids = p["section_id"].unique()
    k = len(ids)
    if k == 0:
        return pd.DataFrame(
            columns=[
                "section_id", "floor_across_m", "floor_z_m", "crest_left_across_m", "crest_left_z_m",
                "crest_right_across_m", "crest_right_z_m", "topo_width_km", "relief_m", "crest_at_edge",
            ]
        )
    nb = len(p) // k
    if nb * k != len(p):
        raise InputError("every swath profile must have the same bins")
    a = p["across_m"].to_numpy(float).reshape(k, nb)
    zmean = p["z_mean_m"].to_numpy(float).reshape(k, nb)
    zmax = p["z_max_m"].to_numpy(float).reshape(k, nb)
    floor_ok = np.isfinite(zmean)
    if floor_window_m is not None:
        floor_ok &= np.abs(a) <= float(floor_window_m)
    has_floor = floor_ok.any(axis=1)
    fi = np.argmin(np.where(floor_ok, zmean, np.inf), axis=1)
    rows = np.arange(k)
    floor_a = np.where(has_floor, a[rows, fi], np.nan)
    floor_z = np.where(has_floor, zmean[rows, fi], np.nan)
    idx = np.arange(nb)[None, :]
    fin = np.isfinite(zmax)
    left = fin & (idx < fi[:, None])
    right = fin & (idx > fi[:, None])
    li = np.argmax(np.where(left, zmax, -np.inf), axis=1)
    ri = np.argmax(np.where(right, zmax, -np.inf), axis=1)
    has_l = left.any(axis=1) & has_floor
    has_r = right.any(axis=1) & has_floor
    cl_a = np.where(has_l, a[rows, li], np.nan)
    cl_z = np.where(has_l, zmax[rows, li], np.nan)
    cr_a = np.where(has_r, a[rows, ri], np.nan)
    cr_z = np.where(has_r, zmax[rows, ri], np.nan)
    first = np.argmax(fin, axis=1)
    last = nb - 1 - np.argmax(fin[:, ::-1], axis=1)
    edge = (has_l & (li == first)) | (has_r & (ri == last))
    if edge.any():
        bad = ", ".join(str(i) for i in ids[edge][:10])
        warnings.warn(
            f"swath crest at the profile end for section(s) {bad}: lengthen the swath to find the flank crests",
            FaultmapWarning,
            stacklevel=2,
        )
    return pd.DataFrame(
        {
            "section_id": ids,
            "floor_across_m": floor_a,
            "floor_z_m": floor_z,
            "crest_left_across_m": cl_a,
            "crest_left_z_m": cl_z,
            "crest_right_across_m": cr_a,
            "crest_right_z_m": cr_z,
            "topo_width_km": (cr_a - cl_a) / 1000.0,
            "relief_m": 0.5 * (cl_z + cr_z) - floor_z,
            "crest_at_edge": edge,
        }
    )
