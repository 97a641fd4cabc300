"""Slip rates with Monte Carlo percentiles, and recurrence intervals.

Slip rate = displacement / age of the offset surface; recurrence =
single-event displacement / net slip rate (definitions; docs/methods/hazard.md). Throw, age and dip
are drawn by Monte Carlo; the percentiles are reported. Pure functions, no
file I/O.
Everything here is a screening estimate; see :data:`faultmap.hazard.screening.CAUTION`.
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
from scipy import special

from faultmap.errors import InputError, ParameterError
from faultmap.hazard.inputs import _col, _compact, _ids_text, _require, _selected, morphologic_age_fallback
from faultmap.hazard.magnitudes import displacement_from_magnitude, get_relation, range_warnings
from faultmap.numerics.dip_ranges import dip_draw_bounds

__all__ = ["slip_rate_draws", "slip_rates"]

_PCT = (16.0, 50.0, 84.0)


#: Draws held in memory at once (faults x draws) while slip rates are summarised: about 8 MB per array.
_CHUNK_DRAWS = 1_000_000


def _truncnorm_ppf_above(q: np.ndarray, a: np.ndarray) -> np.ndarray:
    """Return the quantiles ``q`` of a standard normal truncated below at ``a`` (one per row, shape (n, 1)).

    The arithmetic of ``scipy.stats.truncnorm`` (``_ppf`` with ``b = inf``), element by element, so the
    draws are the same bits as ``truncnorm.rvs``; the terms that depend on ``a`` alone are computed once
    per row instead of once per draw.
    """
    a = np.broadcast_to(a, (q.shape[0], 1))
    # log Gaussian mass of [a, inf): scipy's "central" case for a <= 0, its mirrored left case for a > 0
    mass = np.empty(a.shape)
    above = a > 0
    with np.errstate(divide="ignore"):
        mass[~above] = special.log1p(-special.ndtr(a[~above]) - special.ndtr(-np.inf))
        if above.any():
            lo = special.log_ndtr(-a[above])
            hi = special.log_ndtr(np.full(lo.shape, -np.inf))
            mass[above] = np.real(special.logsumexp([lo, hi + np.pi * 1j], axis=0))  # log(exp(lo) - exp(hi))
    out = np.empty(q.shape)
    left = a[:, 0] < 0  # as scipy: a = -0.0 takes the right-tail branch
    if left.any():
        ql, al, ml = q[left], a[left], mass[left]
        with np.errstate(divide="ignore"):
            x = special.logsumexp([np.broadcast_to(special.log_ndtr(al), ql.shape), np.log(ql) + ml], axis=0)
        out[left] = special.ndtri_exp(x)
    if not left.all():
        qr, mr = q[~left], mass[~left]
        with np.errstate(divide="ignore"):
            x = special.logsumexp(
                [np.broadcast_to(special.log_ndtr(-np.inf), qr.shape), np.log1p(-qr) + mr], axis=0
            )
        out[~left] = -special.ndtri_exp(x)
    return out


def _draw_chunks(
    throw_m, throw_err_m, age_ka, age_err_ka, dip_deg, *, dip_range_deg: float, n_draws: int, seed: int,
    chunk_draws: int = _CHUNK_DRAWS, dip_min_deg=None, dip_max_deg=None,
):
    """Yield ``(rows, draws)`` for consecutive blocks of faults; together they are :func:`slip_rate_draws`.

    Each of the three random streams (throw uniforms, age normals, dip uniforms) is drawn in row-major
    order over all faults, as one ``(n, n_draws)`` call would; the blocks continue each stream where the
    previous block left it, so the values are the same as drawing everything at once, with memory
    bounded by ``chunk_draws`` values per array.
    """
    throw = np.asarray(throw_m, float)[:, None]
    terr = np.asarray(throw_err_m, float)[:, None]
    age = np.asarray(age_ka, float)[:, None]
    aerr = np.asarray(age_err_ka, float)[:, None]
    dip = np.asarray(dip_deg, float)[:, None]
    n = throw.shape[0]
    n_draws = int(n_draws)
    rows_per = max(1, int(chunk_draws) // max(n_draws, 1))
    blocks = [slice(s, min(s + rows_per, n)) for s in range(0, n, rows_per)]

    has_err = np.isfinite(terr) & (terr > 0)
    scale = np.where(has_err, terr, 1.0)
    loc = np.where(np.isfinite(throw), throw, 0.0)
    a = -loc / scale
    cv = np.where(np.isfinite(aerr) & (aerr > 0), aerr / age, 0.0)
    s_ln = np.sqrt(np.log1p(cv**2))
    # a fault's own dip range (a database's "50-70", read by prepare) replaces +- dip_range_deg
    lo, hi = dip_draw_bounds(
        dip,
        dip_range_deg,
        None if dip_min_deg is None else np.asarray(dip_min_deg, float)[:, None],
        None if dip_max_deg is None else np.asarray(dip_max_deg, float)[:, None],
    )

    # the three streams of one generator: uniforms (one 64-bit output each), then normals (a variable
    # number of outputs each: found by drawing them once), then uniforms
    rng_t = np.random.default_rng(seed)
    rng_a = np.random.default_rng()
    rng_a.bit_generator.state = rng_t.bit_generator.state
    rng_a.bit_generator.advance(n * n_draws)
    rng_d = np.random.default_rng()
    rng_d.bit_generator.state = rng_a.bit_generator.state
    for b in blocks:
        rng_d.standard_normal((b.stop - b.start, n_draws))
    for b in blocks:
        shape = (b.stop - b.start, n_draws)
        q = rng_t.uniform(size=shape)
        t_draw = np.repeat(throw[b], n_draws, axis=1)  # a throw without an error is drawn as exact
        e = has_err[b, 0]
        if e.any():
            t_draw[e] = _truncnorm_ppf_above(q[e], a[b][e]) * scale[b][e] + loc[b][e]
        age_draw = age[b] * np.exp(s_ln[b] * rng_a.standard_normal(shape))
        dip_draw = lo[b] + (hi[b] - lo[b]) * rng_d.random(shape)
        rad = np.radians(dip_draw)
        vert = t_draw / age_draw
        yield b, {
            "vert": vert,
            "horiz": vert / np.tan(rad),
            "net": vert / np.sin(rad),
            "throw_m": t_draw,
            "age_ka": age_draw,
            "dip_deg": dip_draw,
        }


#: Draws per fault of the slip-rate Monte Carlo when the user gives none: all of them up to this many
#: values in total, then fewer per fault (never under MIN_AUTO_DRAWS), so the cost stays linear.
AUTO_DRAW_BUDGET = 8_000_000
MAX_AUTO_DRAWS = 10_000
MIN_AUTO_DRAWS = 1_000


def draws_per_fault(n_faults: int) -> int:
    """Monte Carlo draws per fault for ``n_faults`` screened faults (the rule used without ``n_draws``).

    10 000 draws up to 800 faults, then ``AUTO_DRAW_BUDGET / n_faults`` (8e6 / n), at least 1 000. The
    percentiles' Monte Carlo precision is reported with :func:`percentile_rank_se`.
    """
    n = max(int(n_faults), 1)
    return int(min(MAX_AUTO_DRAWS, max(MIN_AUTO_DRAWS, AUTO_DRAW_BUDGET // n)))


def percentile_rank_se(p: float, n_draws: int) -> float:
    """One-sigma Monte Carlo error of the probability level of a sample percentile, sqrt(p (1 - p) / N).

    The order statistic at level ``p`` of ``N`` draws has a rank whose standard deviation is
    ``sqrt(N p (1 - p))`` (binomial count of draws below the true quantile; e.g. David & Nagaraja 2003,
    Order Statistics, sec. 10.2, from memory): the reported 16th percentile stands for a level of
    0.16 +- that value.
    """
    return float(np.sqrt(p * (1.0 - p) / int(n_draws)))


def slip_rate_draws(
    throw_m: np.ndarray,
    throw_err_m: np.ndarray,
    age_ka: np.ndarray,
    age_err_ka: np.ndarray,
    dip_deg: np.ndarray,
    *,
    dip_range_deg: float = 10.0,
    n_draws: int = 10000,
    seed: int = 0,
) -> dict[str, np.ndarray]:
    """Monte Carlo draws of vertical, horizontal and net slip rates.

    Parameters
    ----------
    throw_m, throw_err_m : numpy.ndarray, shape (n,)
        Cumulative throw of the offset surface and its 1-sigma error, m.
    age_ka, age_err_ka : numpy.ndarray, shape (n,)
        Age of the offset surface and its 1-sigma error, ka (> 0).
    dip_deg : numpy.ndarray, shape (n,)
        Fault dip, degrees.
    dip_range_deg : float, optional
        Dips are drawn uniformly within +- this range of ``dip_deg``
        (clipped to 1-90 degrees).
    n_draws : int, optional
        Draws per fault.
    seed : int, optional
        Seed of the numpy random generator; same seed, same draws.

    Returns
    -------
    dict of numpy.ndarray, each shape (n, n_draws)
        ``vert``, ``horiz``, ``net`` rates in mm/yr (m/ka = mm/yr), and the
        drawn ``throw_m``, ``age_ka``, ``dip_deg``.

    Notes
    -----
    Throw ~ normal(throw, err) truncated at 0; age ~ log-normal with median
    ``age_ka`` and coefficient of variation ``age_err_ka / age_ka``; dip ~
    uniform. Vertical rate = T / t; horizontal (heave, extension) rate =
    T / (t tan dip); net dip-slip rate = T / (t sin dip) (geometry,
    derived). The throw, age and dip draws come, in that order, from one
    generator seeded with ``seed``, each over all faults in row order.
    """
    n = np.asarray(throw_m).shape[0]
    out = {k: np.empty((n, int(n_draws))) for k in ("vert", "horiz", "net", "throw_m", "age_ka", "dip_deg")}
    for b, d in _draw_chunks(
        throw_m, throw_err_m, age_ka, age_err_ka, dip_deg, dip_range_deg=dip_range_deg, n_draws=n_draws, seed=seed
    ):
        for k, v in d.items():
            out[k][b] = v
    return out


def slip_rates(
    faults: gpd.GeoDataFrame,
    *,
    fault_ids: list[int] | tuple[int, ...] | None = None,
    throw_field: str = "max_throw_m",
    age_rel_err: float = 0.2,
    age_abs_err_ka: float | None = None,
    dip_range_deg: float = 10.0,
    n_draws: int = 10000,
    seed: int = 0,
    max_age_ka: float = 5000.0,
    max_rate_mm_yr: float = 20.0,
    min_rate_mm_yr: float = 0.001,
    event_displacement_m: float | np.ndarray | None = None,
    magnitude_for_displacement: np.ndarray | None = None,
) -> tuple[pd.DataFrame, list[str]]:
    """Slip rates (with Monte Carlo percentiles) and recurrence intervals.

    Parameters
    ----------
    faults : geopandas.GeoDataFrame
        Faults with ``fault_id``, ``dip_deg``, ``surface_age_ka``, the throw
        field and ``max_throw_err_m``; optional ``surface_age_err_ka``.
    fault_ids : sequence of int, optional
        Screen these faults instead of those marked active.
    throw_field : str, optional
        Cumulative throw used: ``max_throw_m`` (default) or ``mean_throw_m``.
    age_rel_err : float, optional
        Relative 1-sigma age error (default 0.2) for faults without
        ``surface_age_err_ka`` and when ``age_abs_err_ka`` is not set.
    age_abs_err_ka : float, optional
        Absolute 1-sigma age error, ka (overrides ``age_rel_err``).
    dip_range_deg : float, optional
        Half-width of the uniform dip range drawn, degrees (default 10;
        common practice: +-10-15 degrees for an unknown normal-fault dip).
        A fault's own ``dip_min_deg`` / ``dip_max_deg`` (a range or triple
        in the traces' dip field, read by ``prepare``) replace it.
    n_draws, seed : int, optional
        Monte Carlo draws per fault and random seed.
    max_age_ka : float, optional
        Ages above this (ka) are flagged ``age_suspect``: probably given
        in years (default 5000 ka).
    max_rate_mm_yr, min_rate_mm_yr : float, optional
        Median vertical rates outside this range are flagged ``rate_high`` /
        ``rate_low`` (implausible for a mapped scarp: check the age units).
    event_displacement_m : float or array, optional
        Characteristic single-event displacement, m (scalar or one value per
        screened fault). Where unknown, the median of Wells & Coppersmith
        (1994) normal log10(AD) = -4.45 + 0.63 M (from memory) at
        ``magnitude_for_displacement`` is used, with its scatter (0.33 log10
        units) drawn in the Monte Carlo.
    magnitude_for_displacement : array, optional
        One magnitude per screened fault (e.g. ``mag_preferred``); without
        it and without ``event_displacement_m`` no recurrence is given.

    Returns
    -------
    table : pandas.DataFrame
        One row per screened fault: ``fault_id``, ``throw_used_m``,
        ``age_used_ka``, ``age_err_used_ka``, ``slip_rate_{vert,horiz,net}_mm_yr``
        (median) with ``_p16_`` / ``_p84_`` percentiles, ``rate_flag``
        (``ok``, ``no_age``, ``no_throw``, ``age_suspect``, ``rate_high``,
        ``rate_low``; several joined by ``;``), ``event_displacement_m``,
        ``event_displacement_source``, ``recurrence_yr`` (median),
        ``recurrence_p16_yr``, ``recurrence_p84_yr``.
    warnings : list of str

    Raises
    ------
    InputError
        A screened fault has a zero or negative ``surface_age_ka``.

    Notes
    -----
    Slip rate = displacement / age of the offset surface; recurrence =
    single-event displacement / net slip rate (definitions). 1 m / 1 ka =
    1 mm/yr. The Wells & Coppersmith displacement is the surface slip in one
    event, so recurrence uses the net dip-slip rate.
    """
    if throw_field not in ("max_throw_m", "mean_throw_m"):
        raise ParameterError("throw_field must be 'max_throw_m' or 'mean_throw_m'")
    if age_rel_err < 0 or (age_abs_err_ka is not None and age_abs_err_ka < 0):
        raise ParameterError("age errors must be >= 0")
    if not (0 <= dip_range_deg <= 45):
        raise ParameterError("dip_range_deg must be between 0 and 45")
    if n_draws < 100:
        raise ParameterError("n_draws must be >= 100 for stable percentiles")
    _require(faults, ("fault_id", "dip_deg"), "slip rates")
    sel, ids, warns = _selected(faults, fault_ids)
    sel, w_morph = morphologic_age_fallback(sel)  # scarp-degradation ages where none is given
    warns += w_morph
    n = len(sel)

    age = _col(sel, "surface_age_ka")
    if "surface_age_ka" not in sel.columns and n:
        warns.append("faults layer has no 'surface_age_ka' field: slip rates and recurrence skipped for all faults; magnitudes still given")
    bad = np.isfinite(age) & (age <= 0)
    if bad.any():
        raise InputError(
            f"fault(s) {_ids_text(ids[bad])}: surface_age_ka must be > 0 (got {age[bad][0]:g}); fix the age (in ka)"
        )
    no_age = ~np.isfinite(age)
    if no_age.any() and "surface_age_ka" in sel.columns:
        warns.append(
            f"fault(s) {_ids_text(ids[no_age])}: no surface_age_ka, slip rate and recurrence skipped; magnitudes still given"
        )
    throw = _col(sel, throw_field)
    if throw_field not in sel.columns and n:
        warns.append(f"faults layer has no '{throw_field}' field (run the throw tool): slip rates skipped")
    no_throw = ~np.isfinite(throw) | (throw <= 0)
    nt = no_throw & ~no_age
    if nt.any() and throw_field in sel.columns:
        warns.append(f"fault(s) {_ids_text(ids[nt])}: no positive {throw_field}, slip rate and recurrence skipped")
    terr = _col(sel, "max_throw_err_m")
    if throw_field == "mean_throw_m" and "mean_throw_err_m" in sel.columns:
        terr = _col(sel, "mean_throw_err_m")
    miss_err = ~np.isfinite(terr) & ~no_throw & ~no_age
    if miss_err.any():
        warns.append(f"fault(s) {_ids_text(ids[miss_err])}: no throw error, throw treated as exact in the Monte Carlo")
    aerr = _col(sel, "surface_age_err_ka")
    default_err = age * age_rel_err if age_abs_err_ka is None else np.full(n, float(age_abs_err_ka))
    aerr = np.where(np.isfinite(aerr) & (aerr >= 0), aerr, default_err)

    ok = ~no_age & ~no_throw
    dip = _col(sel, "dip_deg")
    cols: dict[str, np.ndarray] = {}
    # single-event displacement for the recurrence (warnings about it come after the rate flags)
    ev = np.full(n, np.nan)
    if event_displacement_m is not None:
        ev = np.broadcast_to(np.asarray(event_displacement_m, float), (n,)).copy()
        if np.any(np.isfinite(ev) & (ev <= 0)):
            raise ParameterError("event_displacement_m must be > 0")
    src = np.where(np.isfinite(ev), "user", "")
    rel = get_relation("ad_on_m_wc94")
    mag = np.full(n, np.nan) if magnitude_for_displacement is None else np.asarray(magnitude_for_displacement, float)
    use_rel = ~np.isfinite(ev) & np.isfinite(mag)
    ev = np.where(use_rel, displacement_from_magnitude(mag, key=rel.key), ev)
    src = np.where(use_rel, rel.key, src)
    rec = np.full((3, n), np.nan)
    has_rec = ok & np.isfinite(ev)
    # like with like: the average displacement per event over the mean slip rate along the fault. With
    # slip rates from the maximum throw, the mean rate is the maximum rate times mean/max throw (about 0.8
    # for an elliptical profile); without a mean throw the maximum rate is used and the basis says so.
    rate_scale = np.ones(n)
    basis = np.full(n, "average event displacement / mean slip rate", dtype=object)
    if throw_field == "max_throw_m":
        mean_t = _col(sel, "mean_throw_m")
        ratio = mean_t / throw
        good = np.isfinite(ratio) & (ratio > 0) & (ratio <= 1)
        rate_scale = np.where(good, ratio, 1.0)
        basis = np.where(good, basis, "average event displacement / slip rate at the maximum throw (no mean throw)")
    basis = np.where(has_rec, basis, "")
    pct = {comp: np.full((3, n), np.nan) for comp in ("vert", "horiz", "net")}
    if n:
        # the draws, block by block of faults (the same values as drawing all at once; bounded memory)
        rng_rec = np.random.default_rng(None if seed is None else seed + 1) if has_rec.any() else None
        logd_mean = np.log10(np.where(np.isfinite(ev), ev, 1.0))[:, None]
        logd_sigma = np.where(use_rel, rel.sigma, 0.0)[:, None]
        for b, draws in _draw_chunks(
            np.where(ok, throw, np.nan), terr, np.where(ok, age, 1.0), aerr, np.where(np.isfinite(dip), dip, 60.0),
            dip_range_deg=dip_range_deg, n_draws=n_draws, seed=seed,
            dip_min_deg=_col(sel, "dip_min_deg"), dip_max_deg=_col(sel, "dip_max_deg"),
        ):
            rows = np.arange(b.start, b.stop)
            keep = ok[b]  # the other rows' percentiles are not reported
            if keep.any():
                for comp in pct:
                    pct[comp][:, rows[keep]] = np.percentile(draws[comp][keep], _PCT, axis=1)
            if rng_rec is not None:
                logd = logd_mean[b] + logd_sigma[b] * rng_rec.standard_normal((b.stop - b.start, n_draws))
                keep = has_rec[b]
                if keep.any():
                    with np.errstate(divide="ignore", invalid="ignore"):
                        net = draws["net"][keep] * rate_scale[b][keep][:, None]
                        r = (10.0 ** logd[keep]) * 1000.0 / net  # m / (mm/yr) * 1000 = yr
                    rec[:, rows[keep]] = np.percentile(r, _PCT, axis=1)
        if rng_rec is not None:
            rec[:, ~has_rec] = np.nan
    for comp, p in pct.items():
        p[:, ~ok] = np.nan
        cols[f"slip_rate_{comp}_mm_yr"] = p[1]
        cols[f"slip_rate_{comp}_p16_mm_yr"] = p[0]
        cols[f"slip_rate_{comp}_p84_mm_yr"] = p[2]

    # ---- flags -------------------------------------------------------------
    flags = [[] for _ in range(n)]
    for i in range(n):
        if no_age[i]:
            flags[i].append("no_age")
        elif no_throw[i]:
            flags[i].append("no_throw")
    vmed = cols["slip_rate_vert_mm_yr"]
    suspect = np.isfinite(age) & (age > max_age_ka)
    high = np.isfinite(vmed) & (vmed > max_rate_mm_yr)
    low = np.isfinite(vmed) & (vmed < min_rate_mm_yr)
    for i in np.flatnonzero(suspect):
        flags[i].append("age_suspect")
        warns.append(
            f"fault {ids[i]}: surface_age_ka {age[i]:g} ka is above {max_age_ka:g} ka, "
            "too old for a mapped scarp: was the age given in years? (rate_flag age_suspect)"
        )
    for i in np.flatnonzero(high):
        flags[i].append("rate_high")
        warns.append(
            f"fault {ids[i]}: vertical slip rate {vmed[i]:.3g} mm/yr is above {max_rate_mm_yr:g} mm/yr, "
            "implausible for a mapped normal-fault scarp: check surface_age_ka (ka) and the throw (rate_flag rate_high)"
        )
    for i in np.flatnonzero(low):
        flags[i].append("rate_low")
        warns.append(
            f"fault {ids[i]}: vertical slip rate {vmed[i]:.3g} mm/yr is below {min_rate_mm_yr:g} mm/yr: "
            "was surface_age_ka given in years instead of ka? (rate_flag rate_low)"
        )
    rate_flag = [";".join(f) if f else "ok" for f in flags]

    # ---- recurrence (drawn above with the rates) -------------------------------
    if (use_rel & ok).any():
        warns += range_warnings(
            rel.key, mag[use_rel & ok], labels=[f"fault {i} (recurrence)" for i in ids[use_rel & ok]]
        )

    table = pd.DataFrame(
        {
            "fault_id": ids,
            "throw_used_m": np.where(ok, throw, np.nan),
            "age_used_ka": age,
            "age_err_used_ka": np.where(np.isfinite(age), aerr, np.nan),
            "age_source": sel["age_source"].to_numpy(dtype=object),
            **cols,
            "rate_flag": rate_flag,
            "event_displacement_m": ev,
            "event_displacement_source": src,
            "recurrence_yr": rec[1],
            "recurrence_p16_yr": rec[0],
            "recurrence_p84_yr": rec[2],
            "recurrence_basis": basis,
        }
    )
    return table, _compact(warns)

