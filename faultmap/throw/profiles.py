"""Profiles across fault traces: sampling a DEM window and measuring each station.

:func:`sample_profiles` interpolates the DEM bilinearly along many profiles
at once (one gather of the 2 x 2 pixel neighbourhoods of every sample, with
integer indices and weights computed as array operations);
:func:`measure_profiles` fits both sides of every profile
(:func:`faultmap.throw.scarp_fit.fit_profile_matrix`) and turns the fits into raw
station results: separation, surface slope, scarp width, sample counts and
the geometric status (``outside``, ``truncated``, ``nodata``).
"""

from __future__ import annotations

import math

import numpy as np

from faultmap.numerics import jit
from faultmap.throw.profiles_jit import bilinear_profiles
from faultmap.throw.scarp_fit import fit_profile_matrix
from faultmap.throw.stations import StationSet

__all__ = ["RAW_COLUMNS", "sample_profiles", "measure_profiles"]

_F32 = np.float32

#: Fields of the raw station results (:func:`measure_profiles`).
RAW_COLUMNS = (
    "vs_plus_m",
    "vs_se_m",
    "slope_plus",
    "slope_se",
    "fit_rmse_m",
    "n_minus",
    "n_plus",
    "w_minus_m",
    "w_plus_m",
    "half_length_m",
    "lim_minus_m",
    "lim_plus_m",
    "geo_status",
    "poor",
    "wants_m",
    "samples",
    "planarity_m",
)

#: Profile lengths (in samples) within this factor share one sample matrix.
_K_GROWTH = 1.25
#: Peak working memory per profile sample while a matrix is sampled and fitted, bytes (measured
#: with tracemalloc, rounded up).
BYTES_PER_SAMPLE = 80
#: Largest sample matrix: larger ones no longer run faster (they outgrow the CPU caches).
MAX_CHUNK_SAMPLES = 393_216


def chunk_samples(memory_budget_mb: float) -> int:
    """Choose the samples per matrix for a memory budget: a quarter of it, at most ``MAX_CHUNK_SAMPLES``."""
    n = int(0.25 * float(memory_budget_mb) * 1e6 / BYTES_PER_SAMPLE)
    return int(min(max(n, 16_384), MAX_CHUNK_SAMPLES))


def sample_profiles(
    arr, transform, x, y, nx, ny, K: int, step: float, *, k_row=None, origin_xy=None, use_jit: bool = True
) -> np.ndarray:
    """Bilinear samples of the DEM along both sides of many profiles.

    Parameters
    ----------
    arr : ndarray, shape (rows, cols)
        DEM window, metres, NaN = void (float32 is fastest).
    transform : affine.Affine
        Pixel-corner transform of ``arr`` (north-up).
    x, y : ndarray, shape (m,)
        Profile origins (stations), CRS units.
    nx, ny : ndarray, shape (m,)
        Unit normal towards the + side.
    K : int
        Samples per side.
    step : float
        Sample spacing along the profile, CRS units.
    k_row : ndarray of int, shape (m,), optional
        Samples wanted per side for each profile (<= K); the columns beyond
        are NaN. Default K for all.
    origin_xy : (float, float), optional
        Centre of any pixel of the full raster the window was cut from:
        fractional pixel positions are taken relative to it, so a sample's
        value does not depend on which window holds it. Default: the
        window's own pixels.
    use_jit : bool
        Use the compiled kernel :func:`faultmap.throw.profiles_jit.bilinear_profiles`
        when numba is available (the same numbers as the array code below,
        which stays as the reference).

    Returns
    -------
    ndarray of float32, shape (2 m, K)
        Row ``i`` is the - side of profile ``i`` and row ``m + i`` its + side,
        column ``j`` lies ``j + 1`` steps from the origin. NaN where a pixel
        of the 2 x 2 neighbourhood is void or the sample lies outside the
        window.

    Notes
    -----
    The same values as ``scipy.ndimage.map_coordinates(arr, ..., order=1,
    mode='constant', cval=nan)`` with pixel centres at integer coordinates
    (bilinear interpolation), to float32 rounding. Each sample's pixel
    coordinate is the station's fractional pixel position plus ``k`` steps,
    computed in float32 relative to the station's pixel (sub-pixel error
    under 1e-4 pixel for profiles of up to 2000 samples), so the integer
    indices and weights cost a few passes over float32 arrays; the four
    neighbours come from one flat ``take`` each.
    """
    arr = np.asarray(arr)
    if arr.dtype != _F32:
        arr = arr.astype(_F32)
    nr, nc = arr.shape
    m = np.size(x)
    if nr < 2 or nc < 2:
        return np.full((2 * m, K), np.nan, dtype=_F32)
    t = transform
    inv_a, inv_e = 1.0 / t.a, 1.0 / t.e
    ox, oy = t.c + 0.5 * t.a, t.f + 0.5 * t.e  # the window's first pixel centre
    wc, wr = 0.0, 0.0
    if origin_xy is not None:
        # the window's first pixel centre, in whole pixels from the origin pixel (if it is one)
        fc_, fr_ = (ox - float(origin_xy[0])) * inv_a, (oy - float(origin_xy[1])) * inv_e
        if abs(fc_ - round(fc_)) < 1e-6 and abs(fr_ - round(fr_)) < 1e-6:
            ox, oy = float(origin_xy[0]), float(origin_xy[1])
            wc, wr = float(round(fc_)), float(round(fr_))
    col0 = (np.asarray(x, dtype=float) - ox) * inv_a
    row0 = (np.asarray(y, dtype=float) - oy) * inv_e
    c0 = np.concatenate([col0, col0])
    r0 = np.concatenate([row0, row0])
    dcol = (np.concatenate([-nx, nx]) * (step * inv_a)).astype(_F32)
    drow = (np.concatenate([-ny, ny]) * (step * inv_e)).astype(_F32)
    i0 = np.floor(r0)
    j0 = np.floor(c0)
    if use_jit and jit.ENABLED:
        kr = np.full(2 * m, K, dtype=np.int64) if k_row is None else np.concatenate([k_row, k_row])
        return bilinear_profiles(
            np.ascontiguousarray(arr).reshape(-1),
            nr,
            nc,
            (r0 - i0).astype(_F32),
            (c0 - j0).astype(_F32),
            np.clip(i0 - wr, -(2**30), 2**30).astype(np.int64),
            np.clip(j0 - wc, -(2**30), 2**30).astype(np.int64),
            drow,
            dcol,
            K,
            np.minimum(kr, K).astype(np.int64),
        )
    k = np.arange(1, K + 1, dtype=_F32)
    # fractional coordinates relative to each station's pixel, float32
    fr = np.multiply.outer(drow, k)
    fr += (r0 - i0).astype(_F32)[:, None]
    fc = np.multiply.outer(dcol, k)
    fc += (c0 - j0).astype(_F32)[:, None]
    big = nr * nc + nc + 1 >= 2**31
    ity = np.int64 if big else np.int32
    fl = np.floor(fr)
    fr -= fl
    ii = fl.astype(ity)
    ii += np.clip(i0 - wr, -(2**30), 2**30).astype(ity)[:, None]
    np.floor(fc, out=fl)
    fc -= fl
    jj = fl.astype(ity)
    jj += np.clip(j0 - wc, -(2**30), 2**30).astype(ity)[:, None]
    del fl
    uty = np.uint64 if big else np.uint32
    out = np.greater(ii.view(uty), nr - 2)  # negative indices wrap to huge unsigned values
    out |= np.greater(jj.view(uty), nc - 2)
    if out.any():
        # a sample exactly on the last row or column of pixel centres is inside (as map_coordinates)
        o = np.flatnonzero(out)
        io, jo = ii.flat[o], jj.flat[o]
        ro, co = fr.flat[o], fc.flat[o]
        last_r = (io == nr - 1) & (ro == 0) & (nr > 1)
        last_c = (jo == nc - 1) & (co == 0) & (nc > 1)
        io = np.where(last_r, nr - 2, io)
        jo = np.where(last_c, nc - 2, jo)
        ii.flat[o] = io
        jj.flat[o] = jo
        fr.flat[o] = np.where(last_r, 1.0, ro)
        fc.flat[o] = np.where(last_c, 1.0, co)
        out.flat[o] = (io < 0) | (io > nr - 2) | (jo < 0) | (jo > nc - 2)
    idx = ii
    idx *= nc
    idx += jj
    del jj
    flat = arr.reshape(-1)
    z = flat.take(idx, mode="clip")
    d01 = flat.take(idx + 1, mode="clip")
    idx += nc
    d10 = flat.take(idx, mode="clip")
    idx += 1
    d11 = flat.take(idx, mode="clip")
    del idx
    # z = z00 + fc (z01 - z00) + fr ((z10 - z00) + fc (z11 - z10 - z01 + z00)), differences first
    d11 -= d10
    d10 -= z
    d01 -= z
    d11 -= d01
    d11 *= fc
    d11 += d10
    d11 *= fr
    d01 *= fc
    d01 += d11
    z += d01
    if out.any():
        np.copyto(z, _F32(np.nan), where=out)
    if k_row is not None:
        kr = np.asarray(k_row)
        if kr.size and int(kr.min()) < K:
            kr2 = np.concatenate([kr, kr])
            np.copyto(z, _F32(np.nan), where=k[None, :] > kr2[:, None])
    return z


def _ray_exit(x, y, dx, dy, box):
    """Distance along (dx, dy) from (x, y) to the exit of the box (inf-safe); -1 if starting outside."""
    xmin, ymin, xmax, ymax = box
    with np.errstate(divide="ignore", invalid="ignore"):
        tx = np.where(dx > 0, (xmax - x) / dx, np.where(dx < 0, (xmin - x) / dx, np.inf))
        ty = np.where(dy > 0, (ymax - y) / dy, np.where(dy < 0, (ymin - y) / dy, np.inf))
    t = np.minimum(tx, ty)
    inside = (x >= xmin) & (x <= xmax) & (y >= ymin) & (y <= ymax)
    return np.where(inside, t, -1.0)


#: Padding (samples) worth one more sample matrix: each matrix costs a fixed number of array calls.
_CHUNK_COST = 65536


def _length_groups(K_all, chunk_elements):
    """Chunks of stations (index arrays) with similar profile lengths, and each chunk's K.

    Lengths within a factor ``_K_GROWTH`` share a matrix; a small group also
    joins the next longer one when padding it costs fewer samples than
    ``_CHUNK_COST`` (the overhead of a separate matrix).
    """
    order = np.argsort(K_all, kind="stable")
    Ks = K_all[order]
    bins = []
    i = 0
    n = Ks.size
    while i < n:
        j = int(np.searchsorted(Ks, int(math.floor(int(Ks[i]) * _K_GROWTH)), side="right"))
        if bins and bins[-1][1] - bins[-1][0] <= _CHUNK_COST // max(2 * (int(Ks[j - 1]) - bins[-1][2]), 1):
            bins[-1] = (bins[-1][0], j, int(Ks[j - 1]))  # pad the small group before to this length
        else:
            bins.append((i, j, int(Ks[j - 1])))
        i = j
    chunks = []
    for a, b, K in bins:
        per = max(1, int(chunk_elements // (2 * K)))
        for c0 in range(a, b, per):
            chunks.append((order[c0 : min(b, c0 + per)], K))
    return chunks


def measure_profiles(
    arr: np.ndarray,
    transform,
    stations: StationSet,
    half_length_m,
    lim_minus_m,
    lim_plus_m,
    params,
    *,
    raster_box=None,
    chunk_elements: int | None = None,
    on_chunk=None,
) -> dict:
    """Sample and fit the profiles of many stations on one DEM window.

    Parameters
    ----------
    arr : ndarray, shape (rows, cols)
        DEM window, metres, NaN = void (float32 is fastest).
    transform : affine.Affine
        Pixel-corner transform of ``arr``.
    stations : StationSet
        Origins and + side normals.
    half_length_m : array_like
        Profile half-length per station, metres.
    lim_minus_m, lim_plus_m : array_like
        Distance to the nearest crossing trace on each side (inf if none).
    params : faultmap.throw.params.ThrowParams
    raster_box : tuple, optional
        (xmin, ymin, xmax, ymax) of the full raster's pixel centres; samples
        beyond it count as outside the DEM (default: the window's).
    chunk_elements : int, optional
        Samples per sample matrix (bounded memory, cache-sized passes);
        stations whose profile lengths differ by under 25 % share a matrix.
        Default: a quarter of ``params.memory_budget_mb`` at
        ``BYTES_PER_SAMPLE``, at most ``MAX_CHUNK_SAMPLES``.
    on_chunk : callable, optional
        ``on_chunk(sel, Z, fits)`` for each sample matrix (station indices,
        samples, far-field fits), e.g. the scarp degradation fit
        (:class:`faultmap.scarps.profile_degradation.DegradationCollector`).

    Returns
    -------
    dict of ndarray
        Raw per-station results (the + side assumed to be the hanging wall):
        ``vs_plus_m`` (- side minus + side surface at the trace), its
        ``vs_se_m``, ``slope_plus`` (surface slope towards the + side, m/m)
        and ``slope_se``, ``fit_rmse_m``, ``n_minus``/``n_plus`` (samples
        used), ``w_minus_m``/``w_plus_m`` (scarp half-widths),
        ``geo_status`` (``''``, ``outside``, ``truncated``, ``nodata``),
        ``poor`` (bool), ``wants_m`` (half-length a full fit would need, or
        0), ``samples`` (profile samples taken) and ``planarity_m``.
    """
    n = len(stations)
    step = params.sample_step_m
    H = np.broadcast_to(np.asarray(half_length_m, dtype=float), (n,))
    lim_m = np.broadcast_to(np.asarray(lim_minus_m, dtype=float), (n,))
    lim_p = np.broadcast_to(np.asarray(lim_plus_m, dtype=float), (n,))
    out = {k: np.full(n, np.nan) for k in RAW_COLUMNS}
    out["geo_status"] = np.full(n, "", dtype=object)
    out["poor"] = np.zeros(n, dtype=bool)
    out["wants_m"] = np.zeros(n)
    out["samples"] = np.zeros(n)
    out["half_length_m"] = H.astype(float).copy()
    out["lim_minus_m"] = np.asarray(lim_m, dtype=float).copy()
    out["lim_plus_m"] = np.asarray(lim_p, dtype=float).copy()
    if n == 0:
        return out
    origin_xy = None
    if raster_box is not None:
        origin_xy = (
            raster_box[0] if transform.a > 0 else raster_box[2],
            raster_box[3] if transform.e < 0 else raster_box[1],
        )
    else:
        rows, cols = arr.shape
        x0 = transform.c + 0.5 * transform.a
        x1 = transform.c + (cols - 0.5) * transform.a
        y0 = transform.f + 0.5 * transform.e
        y1 = transform.f + (rows - 0.5) * transform.e
        raster_box = (min(x0, x1), min(y0, y1), max(x0, x1), max(y0, y1))
    margin = params.crossing_margin_m
    # usable limit per side: profile end, or a crossing minus a margin for the neighbour's scarp
    lm = np.minimum(H, lim_m - margin)
    lp = np.minimum(H, lim_p - margin)
    trunc_m = lim_m - margin < H
    trunc_p = lim_p - margin < H
    K_all = np.maximum(np.ceil(H / step - 1e-9).astype(np.int64), 3)
    if chunk_elements is None:
        chunk_elements = chunk_samples(params.memory_budget_mb)
    fitkw = dict(
        w0_steps=params.scarp_halfwidth_m / step,
        far_min_steps=params.min_far_field_m / step,
        far_field_widths=params.far_field_widths,
        min_samples=params.min_samples_per_side,
        loss=params.robust_loss,
        tuning=params.robust_tuning,
        iterations=params.robust_iterations,
        scarp_iterations=params.scarp_iterations,
        tolerance_frac=params.scarp_tolerance_frac,
    )
    for sel, K in _length_groups(K_all, chunk_elements):
        Z = sample_profiles(
            arr,
            transform,
            stations.x[sel],
            stations.y[sel],
            stations.nx[sel],
            stations.ny[sel],
            K,
            step,
            k_row=K_all[sel],
            origin_xy=origin_xy,
        )
        kr = K_all[sel]
        res = fit_profile_matrix(
            Z,
            np.concatenate([lm[sel], lp[sel]]) / step,
            row_samples=None if int(kr.min()) == K else np.concatenate([kr, kr]),
            **fitkw,
        )
        if on_chunk is not None:
            on_chunk(sel, Z, res)
        del Z
        _station_results(out, sel, res, stations, H, K_all, trunc_m, trunc_p, raster_box, params)
    return out


def _station_results(out, sel, res, stations, H, K_all, trunc_m, trunc_p, raster_box, params):
    """Per-station fields of one chunk from the fits of its two sides."""
    step = params.sample_step_m
    m = sel.size
    out["samples"][sel] = 2 * K_all[sel]
    a, b, va, vb = res["a"], res["b"], res["var_a"], res["var_b"]
    out["vs_plus_m"][sel] = a[:m] - a[m:]
    out["vs_se_m"][sel] = np.sqrt(va[:m] + va[m:])
    # slopes towards the + side: the - side's outward slope changes sign
    bm, bp = -b[:m] / step, b[m:] / step
    vbm, vbp = vb[:m] / step**2, vb[m:] / step**2
    with np.errstate(divide="ignore", invalid="ignore"):
        wm_, wp_ = 1.0 / vbm, 1.0 / vbp
        both = np.isfinite(wm_) & np.isfinite(wp_) & (wm_ > 0) & (wp_ > 0)
        slope = np.where(both, (wm_ * bm + wp_ * bp) / (wm_ + wp_), np.where(np.isfinite(bm), bm, bp))
        slope_se = np.where(
            both, np.sqrt(1.0 / (wm_ + wp_)), np.where(np.isfinite(vbm), np.sqrt(vbm), np.sqrt(vbp))
        )
        out["fit_rmse_m"][sel] = np.sqrt((res["ssr"][:m] + res["ssr"][m:]) / (res["sw"][:m] + res["sw"][m:]))
    out["slope_plus"][sel] = slope
    out["slope_se"][sel] = slope_se
    # non-planarity: the two sides disagree on the surface slope; over the lever arm from the
    # fitted stretches to the trace that makes the projected levels uncertain by about
    # half the slope difference times the mean distance of the stretches
    arm = 0.25 * (res["w"][:m] + res["hi"][:m] + res["w"][m:] + res["hi"][m:]) * step
    out["planarity_m"][sel] = 0.5 * np.abs(bm - bp) * arm
    out["n_minus"][sel] = res["n_used"][:m]
    out["n_plus"][sel] = res["n_used"][m:]
    out["w_minus_m"][sel] = res["w"][:m] * step
    out["w_plus_m"][sel] = res["w"][m:] * step
    # --- status of each side
    nmin = params.min_samples_per_side
    wv = res["w"]
    hi = res["hi"]
    count_geom = np.floor(hi + 1e-9) - np.ceil(wv - 1e-9) + 1  # samples in [w, hi]
    xs = np.concatenate([stations.x[sel], stations.x[sel]])
    ys = np.concatenate([stations.y[sel], stations.y[sel]])
    dx = np.concatenate([-stations.nx[sel], stations.nx[sel]])
    dy = np.concatenate([-stations.ny[sel], stations.ny[sel]])
    t_exit = _ray_exit(xs, ys, dx, dy, raster_box) / step
    count_in = np.floor(np.minimum(hi, t_exit) + 1e-9) - np.ceil(wv - 1e-9) + 1
    trunc = np.concatenate([trunc_m[sel], trunc_p[sel]])
    side_trunc = trunc & (count_geom < nmin)
    # a side is outside only where the raster edge, not a crossing, cuts it short
    side_out = (count_in < nmin) & (t_exit < hi)
    side_void = res["n_used"] < nmin
    st_out = (t_exit[:m] < 0) | side_out[:m] | side_out[m:]
    st_trunc = side_trunc[:m] | side_trunc[m:]
    st_void = side_void[:m] | side_void[m:]
    geo = np.where(st_out, "outside", np.where(st_trunc, "truncated", np.where(st_void, "nodata", "")))
    out["geo_status"][sel] = geo
    inl_bad = res["inlier_frac"] < params.min_inlier_fraction
    edge_bad = ~res["edge_found"]
    out["poor"][sel] = inl_bad[:m] | inl_bad[m:] | edge_bad[:m] | edge_bad[m:]
    # stations whose scarp needs a longer profile than sampled (and not cut by a neighbour)
    need = res["need"] * step
    Hs = np.concatenate([H[sel], H[sel]])
    want = (need > Hs * 1.02) & ~trunc
    wants = np.where(
        want[:m] | want[m:],
        np.maximum(np.where(want[:m], need[:m], 0), np.where(want[m:], need[m:], 0)),
        0.0,
    )
    out["wants_m"][sel] = wants
