"""Tool ``transect``: heave summation along transects, extension and beta.

Thin wrapper around :func:`faultmap.extension.transect_measure.measure_transects`, run in
batches of :data:`TRANSECTS_PER_BATCH` transects through the run's engine
(:func:`~faultmap.extension.transect_batches.plan_transect_batches`,
:func:`~faultmap.extension.transect_batches.measure_transect_batch`,
:func:`~faultmap.extension.transect_batches.gather_transect_batches`: the same result whatever
runs them): takes the user's transects (already in the working CRS) or
builds them perpendicular to the mean strike, adds the ``transects`` and
``transect_crossings`` layers, one figure and the run-summary records.
"""

from __future__ import annotations

import numpy as np

from faultmap.errors import InputError
from faultmap.registry import Param, Tool

FIGURE = "transect_extension.png"

#: Transects measured as one batch (any value gives the same result).
TRANSECTS_PER_BATCH = 16

#: Exponent C of the along-line cumulative throw distribution when neither the
#: parameter nor the scaling tool gives one (C = 1: common practice).
DEFAULT_EXPONENT_C = 1.0


def _get(obj, name):
    if obj is None:
        return None
    if isinstance(obj, dict):
        return obj.get(name)
    return getattr(obj, name, None)


def scaling_line_exponent(result) -> tuple[float | None, str]:
    """Along-line exponent C from the scaling tool's result, if it has a max-throw power-law fit.

    The scaling tool fits the density exponent alpha of the map population
    of maximum throws (Clauset et al. 2009); its cumulative exponent is
    alpha - 1. A line samples a fault with probability proportional to its
    length, and length is proportional to displacement for linear scaling
    (n = 1), so the along-line cumulative exponent is alpha - 2 (derived;
    Marrett & Allmendinger 1991 discuss sampling dimension, from memory).

    Returns
    -------
    (C or None, note)
    """
    fits = None
    for holder in (result, _get(result, "sizes"), _get(result, "size")):
        f = _get(holder, "fits")
        if isinstance(f, dict):
            fits = f
            break
    fit = fits.get("max_throw_m") if fits else None
    if fit is None:
        return None, "scaling result has no max_throw_m size fit"
    alpha = _get(fit, "alpha")
    fitted = _get(fit, "fitted")
    if fitted is False or alpha is None or not np.isfinite(alpha):
        return None, "scaling max_throw_m power-law fit not available"
    c = float(alpha) - 2.0
    if c <= 0:
        return None, f"scaling alpha {float(alpha):.3g} gives a non-positive along-line exponent"
    return c, f"alpha {float(alpha):.3g} of max_throw_m from scaling, C = alpha - 2"


def _with_fault_throw_source(crossings, faults):
    """Add ``fault_throw_source`` (dem, points, attributes) of each crossed fault to the crossings."""
    if "throw_source" not in faults.columns or "fault_id" not in crossings.columns:
        return crossings
    src = faults.set_index("fault_id")["throw_source"]
    out = crossings.copy()
    out["fault_throw_source"] = out["fault_id"].map(src).fillna("none").astype(object).to_numpy()
    return out


def run(ctx, p: dict) -> None:
    """Measure extension along the user's or automatic transects."""
    from faultmap.extension.transect_batches import (
        gather_transect_batches,
        measure_transect_batch,
        plan_transect_batches,
    )
    from faultmap.extension.transect_layout import auto_transects, mean_strike_deg
    from faultmap.throw.detection import detection_throw_m, station_errors

    faults = ctx.faults
    if faults is None or len(faults) == 0:
        raise InputError("transect needs the faults layer: run prepare and throw first.")
    stations = ctx.layers.get("throw_stations")
    if stations is None and "max_throw_m" not in faults.columns:
        raise InputError("transect needs throws (heaves are summed): give a DEM, throw points or a max_throw_m "
                         "attribute and run the throw tool first.")

    user = ctx.transects
    if user is not None and len(user):
        transects = user
        ctx.info(f"{len(user)} user transects.")
        ctx.record("transect_source", "user")
    else:
        strike = mean_strike_deg(faults) if p["azimuth_deg"] is None else (p["azimuth_deg"] - 90.0) % 180.0
        spacing = p["spacing_m"]
        if spacing is None:
            # ten transects along the population (our default)
            a = np.radians(strike)
            xy = np.vstack([np.asarray(g.coords)[:, :2] for g in faults.geometry.values])
            along = xy @ np.array([np.sin(a), np.cos(a)])
            spacing = max(float(np.ptp(along)) / 10.0, 1.0)
            ctx.record("spacing_m_used", spacing)
        transects = auto_transects(faults, spacing_m=spacing, margin_m=p["auto_margin_m"],
                                   azimuth_deg=p["azimuth_deg"])
        ctx.record("transect_source", "auto")
        ctx.record("mean_strike_deg", round(strike, 3))
        ctx.record("auto_margin_m_used", float(transects["margin_m"].iloc[0]) if len(transects) else "")
        ctx.info(f"{len(transects)} transects perpendicular to the mean strike {strike:.1f} deg, "
                 f"spacing {spacing:.0f} m.")

    # sub-resolution correction: exponent and detection threshold
    d_t = p["detection_throw_m"]
    if d_t is None:
        errs = station_errors(stations)
        d_t = detection_throw_m(throw_err_m=errs, pixel_size_m=ctx.dem.pixel_size if ctx.dem is not None else None)
        ctx.record("detection_throw_m_used", d_t)
    use_sub = bool(p["subresolution"])
    if use_sub and not np.isfinite(d_t):
        ctx.warn("sub-resolution correction skipped: no throw errors and no DEM pixel size to set the detection "
                 "threshold; give detection_throw_m.")
        use_sub = False
    c = p["exponent_c"]
    if c is None and use_sub:
        c, note = scaling_line_exponent(ctx.results.get("scaling"))
        if c is None:
            c = DEFAULT_EXPONENT_C
            note = f"{note}; C = {DEFAULT_EXPONENT_C:g} (common practice)" if ctx.results.get("scaling") is not None \
                else f"scaling not run; C = {DEFAULT_EXPONENT_C:g} (common practice)"
        ctx.record("exponent_c_used", c)
        ctx.record("exponent_c_source", note)

    from faultmap.engine import engine_map

    batches = plan_transect_batches(
        faults,
        stations,
        transects,
        batch_size=TRANSECTS_PER_BATCH,
        zone=p["zone"],
        margin_m=p["margin_m"],
        rake_deg=p["rake_deg"],
        default_dip_deg=p["default_dip_deg"],
        dip_range_default_deg=p["dip_range_default_deg"],
        dip_range_attribute_deg=p["dip_range_attribute_deg"],
        n_draws=p["n_draws"],
        seed=p["seed"],
        detection_throw_m=d_t if use_sub else None,
        exponent_c=c if use_sub else None,
        d_min_m=p["d_min_m"],
        reproject=True,
    )
    outs = engine_map(
        ctx.engine, measure_transect_batch, batches,
        progress=lambda it, total: ctx.progress(it, total=total, desc="transect"),
    )
    t, crossings, messages = gather_transect_batches(outs)
    crossings = _with_fault_throw_source(crossings, faults)
    if "throw_source" in crossings.columns and (crossings["throw_source"] == "max_throw_profile").any():
        ctx.record("assumed_profile", "max_throw_profile: parabola T = Tmax (1 - r^2) scaled to max_throw_m where "
                   "a fault has no measured profile (our rule)")
    for m in messages:
        ctx.warn(m)
    ctx.record("n_batches", len(batches))
    if p["margin_m"] is None and p["zone"] == "faulted" and len(t):
        ctx.record("margin_m_used", float(t["margin_m"].iloc[0]))
    ctx.layers["transects"] = t
    ctx.layers["transect_crossings"] = crossings
    ctx.results["transect"] = {"transects": t, "crossings": crossings}
    ok = t["status"] == "ok"
    ctx.record("n_transects", len(t))
    ctx.record("n_crossings", len(crossings))
    if ok.any():
        ctx.record("median_extension", float(np.median(t.loc[ok, "extension"])))
        ctx.record("median_beta", float(np.median(t.loc[ok, "beta"])))
        ec = t.loc[ok, "extension_corrected"].to_numpy(dtype=float)
        if use_sub and np.isfinite(ec).any():
            ctx.record("median_extension_corrected", float(np.median(ec[np.isfinite(ec)])))
            frac = float(t.loc[ok, "fraction_below_detection"].iloc[0])
            ctx.record("fraction_below_detection", frac)
            if frac > 0.5:
                ctx.warn(
                    f"the sub-resolution correction puts {100 * frac:.0f} % of the extension on faults below "
                    "detection: it is an extrapolation far beyond the measured faults (it depends strongly on the "
                    "exponent C and on d_min); read extension_corrected as a rough upper estimate, never as a measurement."
                )
        ctx.info(
            f"{int(ok.sum())} transects measured; median extension {100 * np.median(t.loc[ok, 'extension']):.2f} %"
            f" (beta {np.median(t.loc[ok, 'beta']):.4f})."
        )
    if ctx.figures_enabled and len(t):
        from faultmap.extension.figures import transect_extension_figure

        ctx.save_figure(transect_extension_figure(t), FIGURE)


TOOL = Tool(
    name="transect",
    summary="Heave summation along transects: extension and stretching factor beta.",
    run=run,
    requires=("throw",),
    inputs=("faults",),
    optional_inputs=("transects", "dem"),
    params=(
        Param("spacing_m", float, None,
              "Spacing of automatic transects (used when no transects are given); default: a tenth of the "
              "population's along-strike extent.", unit="m", min=0.0, min_exclusive=True, nullable=True),
        Param("azimuth_deg", float, None,
              "Azimuth of automatic transects; default: perpendicular to the length-weighted axial mean strike.",
              unit="deg", min=0.0, max=360.0, nullable=True),
        Param("auto_margin_m", float, None,
              "Length of automatic transects beyond the outermost faults; default: one typical fault spacing.",
              unit="m", min=0.0, nullable=True),
        Param("zone", str, "faulted",
              "Present length L1: 'faulted' = between the outermost crossings plus margin_m each side; "
              "'full' = the whole transect.", choices=("faulted", "full")),
        Param("margin_m", float, None,
              "Margin added beyond the outermost crossings (zone 'faulted'); default: half the median "
              "distance between neighbouring crossings.", unit="m", min=0.0, nullable=True),
        Param("rake_deg", float, None,
              "Rake of all faults (Aki-Richards, -90 = pure dip slip); default: the faults' rake_deg field, "
              "else dip slip.", unit="deg", min=-170.0, max=-10.0, nullable=True),
        Param("default_dip_deg", float, 60.0, "Dip used where a fault has none (Anderson; common practice).",
              unit="deg", min=0.0, max=90.0, min_exclusive=True),
        Param("dip_range_default_deg", float, 10.0,
              "Half-width of the Monte Carlo dip range for default dips (uniform).", unit="deg", min=0.0, max=45.0),
        Param("dip_range_attribute_deg", float, 5.0,
              "Half-width of the Monte Carlo dip range for dips from an attribute (uniform).", unit="deg",
              min=0.0, max=45.0),
        Param("n_draws", int, 1000, "Monte Carlo draws.", min=10, max=100000),
        Param("seed", int, 0, "Random seed of the Monte Carlo draws.", min=0),
        Param("subresolution", bool, True,
              "Also report extension corrected for faults below detection (separate fields).",),
        Param("exponent_c", float, None,
              "Exponent C of the along-line cumulative throw distribution N(>=T) ~ T^-C; default: from the "
              "scaling tool when it ran (alpha - 2), else 1 (common practice).", min=0.0, max=5.0,
              min_exclusive=True, nullable=True),
        Param("detection_throw_m", float, None,
              "Smallest throw the DEM resolves; default: 2 x the median throw error, else one DEM pixel.",
              unit="m", min=0.0, min_exclusive=True, nullable=True),
        Param("d_min_m", float, 0.01,
              "Smallest fault throw counted in the sub-resolution correction (our choice: 1 cm).", unit="m",
              min=0.0, min_exclusive=True),
    ),
    layers=("transects", "transect_crossings"),
    figures=(FIGURE,),
    description=(
        "Finds every crossing of transects with fault traces (a curved trace crossed twice counts twice), "
        "interpolates throw along each fault's station profile at the crossing, and sums heave "
        "h = T / tan(dip) projected on the transect. Extension e = (L1 - L0) / L0 and beta = L1 / L0 with "
        "L0 = L1 - sum(projected heave); uncertainties by Monte Carlo over dip and throw errors (16-84 % "
        "range). The Marrett & Allmendinger (1992) estimate of extension on faults below detection is "
        "reported in separate fields. Crossings say where each throw came from: throw_source (the fault's "
        "stations or the assumed max_throw_profile) and fault_throw_source (dem, points or attributes). "
        "See docs/methods/extension.md."
    ),
)
