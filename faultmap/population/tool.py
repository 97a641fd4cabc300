"""Tool ``scaling``: displacement-length scaling and fault size distributions.

Thin wrapper: reads the ``faults`` (and ``throw_stations``) layers left by
``throw``, calls :mod:`faultmap.population.scaling` and :mod:`faultmap.population.sizes`, and puts
the ``scaling`` table, the new ``faults`` fields and two figures on the run
context.
"""

from __future__ import annotations

import numpy as np

from faultmap.errors import InputError
from faultmap.registry import Param, Tool


def _detection_throw(ctx, faults, given: float | None) -> tuple[float, str]:
    """Return the detection throw (m): the parameter, or the rule every tool shares (2 x median station error)."""
    from faultmap.throw.detection import detection_throw_m, station_errors

    if given is not None:
        return float(given), "parameter"
    errs = station_errors(ctx.layers.get("throw_stations"))
    source = "2 x median throw error of the ok stations"
    if errs is None and "max_throw_err_m" in faults:  # no station table (throws given per fault)
        errs, source = np.asarray(faults["max_throw_err_m"], dtype=float), "2 x median max_throw_err_m"
    pixel = ctx.dem.pixel_size if getattr(ctx, "dem", None) is not None else None
    value = detection_throw_m(throw_err_m=errs, pixel_size_m=pixel)
    if errs is None or not np.isfinite(np.asarray(errs, float)).any():
        source = "one DEM pixel (no throw errors)" if np.isfinite(value) else "not available (no throw errors)"
    return value, source

def left_out_reason(ctx, what: str = "the faults have no throws") -> str:
    """Why the throw tool gave no throws: its left-out reason when the runner left it out."""
    reason = ctx.results.get("left_out", {}).get("throw")
    return f"throw was left out ({reason})" if reason else what


def _lengths_only(ctx, p: dict, faults) -> None:
    """Length statistics of the traces alone: the power-law size distribution of lengths (no throws)."""
    from faultmap.population.sizes import analyse_sizes

    why = left_out_reason(ctx)
    ctx.warn(f"left out the D-L scaling and the max_throw_m size distribution: {why}; length statistics only.")
    ctx.record("left_out_parts", f"D-L scaling, max_throw_m size distribution: {why}")
    if p["unit"] == "system":
        ctx.info("without throws the length statistics are per trace (unit 'system' applies to D-L scaling).")
    pop = faults[["fault_id", "length_m"]].copy()
    pop["censored"] = faults["censored"].to_numpy(dtype=bool) if "censored" in faults else False
    det_l = p["detection_length_m"] if p["detection_length_m"] > 0 else None
    limits = {"length_m": det_l}
    sizes = analyse_sizes(
        pop, variables=("length_m",), include_censored=p["include_censored"], detection_limits=limits,
        min_tail=p["min_tail"], max_candidates=p["max_candidates"], gof_n=p["gof_n"], seed=p["seed"],
    )
    for w in sizes.warnings:
        ctx.warn(w)
    ctx.layers["scaling"] = sizes.table.assign(unit="trace")
    ctx.results["scaling"] = {"dl": None, "sizes": sizes}
    f = sizes.fits.get("length_m")
    if f is not None and f.fitted:
        ctx.record("alpha_length_m", f"{f.alpha:.4g} +- {f.se:.2g} (x_min {f.x_min:.4g}, p_gof {f.gof_p:.2g})")
        ctx.record("gof_n_used_length_m", int(f.gof_n))
        ctx.record("gof_p_se_length_m", float(f.gof_p_se))
    ctx.info(f"length statistics of {len(pop)} traces (no throws).")
    if ctx.figures_enabled:
        from faultmap.population.figures import size_figure

        ctx.save_figure(size_figure(sizes.fits, detection_limits=limits), "scaling_sizes.png")


def run(ctx, p: dict) -> None:
    """Fit D-L scaling and size distributions of ``ctx.faults``."""
    import pandas as pd

    from faultmap.population.scaling import analyse_scaling
    from faultmap.population.sizes import analyse_sizes

    faults = ctx.faults
    if faults is None or len(faults) == 0:
        raise InputError(
            "scaling: no faults layer; run prepare and throw first (they run "
            "automatically when scaling is asked for)."
        )
    if "max_throw_m" not in faults or not np.isfinite(np.asarray(faults["max_throw_m"], dtype=float)).any():
        _lengths_only(ctx, p, faults)
        return
    stations = ctx.layers.get("throw_stations")
    det_t, det_src = _detection_throw(ctx, faults, p["detection_throw_m"])
    ctx.record("detection_throw_m_used", det_t)
    ctx.record("detection_throw_source", det_src)

    res = analyse_scaling(
        faults,
        stations=stations,
        displacement=p["displacement"],
        unit=p["unit"],
        include_censored=p["include_censored"],
        system_length=p["system_length"],
        system_throw=p["system_throw"],
        residual_model=p["residual_model"],
        bootstrap_n=p["bootstrap_n"],
        ci_level=p["ci_level"],
        seed=p["seed"],
        outlier_k=p["outlier_k"],
        length_rel_err=p["length_rel_err"],
        near_factor=p["near_factor"],
        detection_throw_m=det_t if np.isfinite(det_t) else None,
    )
    for w in res.warnings:
        ctx.warn(w)

    det_l = p["detection_length_m"] if p["detection_length_m"] > 0 else None
    limits = {"length_m": det_l, "max_throw_m": det_t if np.isfinite(det_t) else None}
    sizes = analyse_sizes(
        res.population,
        variables=("length_m", "max_throw_m"),
        include_censored=p["include_censored"],
        detection_limits=limits,
        min_tail=p["min_tail"],
        max_candidates=p["max_candidates"],
        gof_n=p["gof_n"],
        seed=p["seed"],
    )
    for w in sizes.warnings:
        ctx.warn(w)

    size_rows = sizes.table.assign(unit=p["unit"])
    fit_rows = res.table[res.table["model"] != "reference"]
    ref_rows = res.table[res.table["model"] == "reference"]
    table = pd.concat([fit_rows, size_rows, ref_rows], ignore_index=True, sort=False)
    ctx.layers["scaling"] = table
    ctx.faults = res.faults
    ctx.results["scaling"] = {"dl": res, "sizes": sizes}

    ctx.record("bootstrap_n_used", int(res.settings["bootstrap_n_used"]))
    ctx.record("bootstrap_n_rule", "given" if p["bootstrap_n"] is not None else "auto")
    for name, f in res.fits.items():
        if f.fitted:
            lo, hi = f.exponent_ci
            ctx.record(f"exponent_{name}", f"{f.exponent:.4g} [{lo:.4g}, {hi:.4g}]")
            ctx.record(f"gamma_{name}", f"{f.gamma:.4g}")
    for var, f in sizes.fits.items():
        if f.fitted:
            ctx.record(
                f"alpha_{var}", f"{f.alpha:.4g} +- {f.se:.2g} (x_min {f.x_min:.4g}, p_gof {f.gof_p:.2g})"
            )
            # Monte Carlo precision of the p-value: sqrt(p (1 - p) / B) (Clauset et al. 2009, sec. 4.1)
            ctx.record(f"gof_n_used_{var}", int(f.gof_n))
            ctx.record(f"gof_p_se_{var}", float(f.gof_p_se))
    n_out = int((res.faults["under_displaced"] | res.faults["over_displaced"]).sum())
    used = res.fits[p["residual_model"]].n
    ctx.info(f"{used} {p['unit']}(s) fitted; {n_out} trace(s) flagged as D-L outliers.")

    if ctx.figures_enabled:
        from faultmap.population.figures import dl_figure, size_figure

        ctx.save_figure(dl_figure(res, max_labels=p["n_outlier_labels"]), "scaling_dl.png")
        ctx.save_figure(size_figure(sizes.fits, detection_limits=limits), "scaling_sizes.png")


TOOL = Tool(
    name="scaling",
    summary="Displacement-length scaling and fault size distributions (length statistics from traces alone).",
    run=run,
    requires=("prepare",),
    uses=("throw",),
    inputs=("faults",),
    optional_inputs=(),
    params=(
        Param(
            "displacement",
            str,
            "throw",
            "Quantity fitted against length: maximum throw, or maximum dip-slip "
            "displacement throw / sin(dip) (use dip_slip to compare with published D/L).",
            choices=("throw", "dip_slip"),
        ),
        Param(
            "unit",
            str,
            "trace",
            "Unit of analysis: individual traces or linked systems (system_id).",
            choices=("trace", "system"),
        ),
        Param(
            "include_censored",
            bool,
            False,
            "Fit faults with a tip at the DEM/study-area edge too (their lengths are minima).",
        ),
        Param(
            "system_length",
            str,
            "extent",
            "System length: extent of its segments along the mean strike, or sum of segment lengths.",
            choices=("extent", "sum"),
        ),
        Param(
            "system_throw",
            str,
            "max",
            "System max throw: largest segment maximum, or maximum of the summed "
            "along-strike profiles of overlapping segments.",
            choices=("max", "summed"),
        ),
        Param(
            "residual_model",
            str,
            "ols",
            "Fit the per-fault residuals and outlier flags refer to.",
            choices=("ols", "rma", "york"),
        ),
        Param(
            "bootstrap_n",
            int,
            None,
            "Bootstrap resamples for the confidence intervals of exponent and gamma, used exactly when "
            "given. Default: 1000 up to 2000 faults, then 2e6 / n, never fewer than 200 (the number "
            "used is in bootstrap_n_used).",
            min=10,
            max=100000,
            nullable=True,
        ),
        Param(
            "ci_level",
            float,
            0.95,
            "Two-sided confidence level of the bootstrap intervals.",
            min=0.5,
            max=1.0,
            max_exclusive=True,
        ),
        Param("seed", int, 0, "Random seed of the bootstraps.", min=0),
        Param(
            "outlier_k",
            float,
            2.0,
            "Flag faults whose log residual exceeds this many standard deviations.",
            unit="sigma",
            min=0.5,
        ),
        Param(
            "length_rel_err",
            float,
            0.05,
            "Relative 1-sigma error of trace lengths, used by the York fit.",
            min=0.0,
            max=1.0,
        ),
        Param(
            "near_factor",
            float,
            1.0,
            "Hint 'short fault near a larger one' within this many own lengths of a fault "
            "at least twice as long.",
            min=0.0,
        ),
        Param(
            "detection_throw_m",
            float,
            None,
            "Smallest throw the DEM resolves. Default: 2 x the median throw error of the ok stations (the rule the "
            "transect tool uses too), else one DEM pixel.",
            unit="m",
            min=0.0,
            min_exclusive=True,
            nullable=True,
        ),
        Param(
            "detection_length_m",
            float,
            0.0,
            "Smallest trace length reliably mapped, reported against the length x_min (0: not reported).",
            unit="m",
            min=0.0,
        ),
        Param(
            "gof_n",
            int,
            None,
            "Bootstrap data sets for the power-law goodness-of-fit p-value, used exactly when given "
            "(0 skips it). Default: 1000 up to 500 values, then a fixed budget of 1e8 KS evaluations, "
            "never fewer than 100 (p to about +-0.05); gof_n_used and the standard error gof_p_se are "
            "reported.",
            min=0,
            max=100000,
            nullable=True,
        ),
        Param("min_tail", int, 5, "Fewest values in a power-law tail when choosing x_min.", min=2),
        Param(
            "max_candidates",
            int,
            200,
            "Most x_min candidates tried (evenly spaced in rank among the distinct values).",
            min=5,
        ),
        Param(
            "n_outlier_labels",
            int,
            12,
            "D-L outliers labelled with their id in the scaling figure, the longest first; a label that would "
            "overlap another or leave the plot is skipped (0: no labels).",
            min=0,
            max=60,
        ),
    ),
    layers=("faults", "scaling"),
    figures=("scaling_dl.png", "scaling_sizes.png"),
    description=(
        "Fits D = gamma L^n in log-log space to maximum throw (or dip-slip displacement) against "
        "length, per trace or per linked system, by ordinary least squares, reduced major axis "
        "(Sokal & Rohlf) and the errors-in-variables line of York et al. (2004) using the throw "
        "errors, with seeded bootstrap percentile intervals for n and gamma (the number of resamples "
        "adapted to the population size unless bootstrap_n is given). Censored faults are "
        "left out unless include_censored is set. The population is compared with published D/L "
        "ranges (Schlische et al. 1996; Walsh et al. 2002; Clark & Cox 1996; Cowie & Scholz 1992, "
        "Kim & Sanderson 2005 from memory). Faults whose log residual exceeds outlier_k standard "
        "deviations are flagged under- or over-displaced with a hint. Lengths and maximum throws "
        "are fitted with a power law by maximum likelihood, x_min by the KS distance, a bootstrap "
        "goodness-of-fit p-value (with its Monte Carlo standard error) and Vuong likelihood-ratio "
        "tests against exponential and log-normal (Clauset, Shalizi & Newman 2009), with the effect of censoring and of the "
        "detection limit reported. Without throws (no DEM, no throw attributes or points) only the length "
        "distribution is fitted, and the run says so. See docs/methods/scaling.md."
    ),
)
