"""Tool ``hazard``: screening of active faults.

Thin wrapper around :func:`faultmap.hazard.screening.screen_hazard`: reads the
``faults`` layer from the context, puts the hazard fields on it, adds the
``rupture_scenarios`` and ``rupture_zones`` layers, two figures, the
warnings and the screening caution (:data:`faultmap.hazard.screening.CAUTION`).
"""

from __future__ import annotations

from faultmap.errors import InputError, ParameterError
from faultmap.hazard.caution import CAUTION
from faultmap.hazard.magnitudes import PREFERRED_RULES, SHEAR_MODULUS_PA
from faultmap.registry import Param, Tool

MAP_FIGURE = "hazard_map.png"
MAGNITUDE_FIGURE = "hazard_magnitudes.png"


def _parse_ids(text: str | None) -> list[int] | None:
    if text is None or not text.strip():
        return None
    try:
        return [int(t) for t in text.replace(";", ",").replace(" ", ",").split(",") if t.strip()]
    except ValueError:
        raise ParameterError(
            f"parameter 'fault_ids' must be comma-separated integers such as '3,5,8', got {text!r}."
        ) from None


def run(ctx, p: dict) -> None:
    """Screen the active faults of ``ctx.faults``."""
    from faultmap.hazard.screening import screen_hazard

    faults = ctx.faults
    if faults is None:
        raise InputError("hazard needs the faults layer: run prepare (and throw) first.")
    if "max_throw_m" not in faults.columns:
        reason = ctx.results.get("left_out", {}).get("throw")
        why = f"throw was left out ({reason})" if reason else "throw not run"
        given = "slip_rate_mm_yr" in faults.columns
        ctx.warn(
            f"faults have no max_throw_m ({why}): slip rates from throw and age left out"
            + ("; the slip_rate_mm_yr field is used where given." if given else "; magnitudes still given.")
        )
        ctx.record("left_out_parts", f"slip rates from throw and age: {why}")

    u = p["mapping_uncertainty_m"]
    scale = p["map_scale_denominator"]
    if u is None and scale is None and "mapping_uncertainty_m" not in faults.columns:
        # traces were drawn on (or checked against) the DEM: one pixel (common practice)
        u = float(ctx.dem.pixel_size) if ctx.dem is not None else 0.0
        ctx.record("mapping_uncertainty_m_used", u)
        if ctx.dem is not None:
            ctx.info(f"mapping uncertainty of the traces not given: using {u:g} m (one DEM pixel).")
        else:
            ctx.warn("mapping uncertainty of the traces not given and no DEM: 0 m used; give map_scale_denominator "
                     "or mapping_uncertainty_m.")

    ids = _parse_ids(p["fault_ids"])
    ctx.record("fault_ids_used", "active field" if ids is None else ",".join(map(str, ids)))
    ctx.record("link_gap_m_used", "off" if p["link_gap_m"] is None else p["link_gap_m"])
    from faultmap.hazard.slip_rates import draws_per_fault, percentile_rank_se

    n_draws = p["n_draws"]
    if n_draws is None:
        if ids is not None:
            n_sel = len(ids)
        else:  # the faults marked active are the ones screened
            n_sel = int(faults["active"].astype(bool).sum()) if "active" in faults else 0
        n_draws = draws_per_fault(n_sel)
        ctx.record("n_draws_rule", f"auto: {n_draws} draws per fault for {n_sel} faults")
    ctx.record("n_draws_used", n_draws)
    ctx.record("percentile_level_se_p16", round(percentile_rank_se(0.16, n_draws), 5))
    res = screen_hazard(
        faults,
        fault_ids=ids,
        seismogenic_thickness_km=p["seismogenic_thickness_km"],
        link_gap_m=p["link_gap_m"],
        preferred=p["preferred"],
        shear_modulus_pa=p["shear_modulus_pa"],
        event_max_displacement_m=p["event_max_displacement_m"],
        event_avg_displacement_m=p["event_avg_displacement_m"],
        throw_field=p["throw_field"],
        age_rel_err=p["age_rel_err"],
        age_abs_err_ka=p["age_abs_err_ka"],
        dip_range_deg=p["dip_range_deg"],
        n_draws=n_draws,
        seed=p["seed"],
        max_age_ka=p["max_age_ka"],
        max_rate_mm_yr=p["max_rate_mm_yr"],
        min_rate_mm_yr=p["min_rate_mm_yr"],
        hw_width_m=p["hw_width_m"],
        fw_width_m=p["fw_width_m"],
        mapping_uncertainty_m=u,
        map_scale_denominator=scale,
    )
    for w in res.warnings:
        ctx.warn(w)
    if "slip_rate_mm_yr" in res.faults.columns:
        from faultmap.hazard.inputs import rates_from_field

        res.faults, n_given, w_given = rates_from_field(
            res.faults, dip_range_deg=p["dip_range_deg"], n_draws=n_draws, seed=p["seed"],
        )
        for w in w_given:
            ctx.warn(w)
        ctx.record("n_slip_rates_from_field", n_given)
    ctx.warn(CAUTION)
    ctx.record("caution", CAUTION)
    for k in ("n_screened", "n_scenarios", "preferred_rule", "mapping_uncertainty_m"):
        ctx.record(k, res.settings[k])

    ctx.faults = res.faults
    ctx.layers["rupture_scenarios"] = res.scenarios
    ctx.layers["rupture_zones"] = res.zones
    ctx.results["hazard"] = res
    n = res.settings["n_screened"]
    ctx.info(f"{n} faults screened, {len(res.scenarios)} rupture scenarios, {len(res.zones)} rupture zones.")

    if ctx.figures_enabled and n:
        from faultmap.hazard.figures import hazard_map, magnitude_by_relation

        ctx.save_figure(hazard_map(res.faults, res.zones, n_labels=p["n_map_labels"], crs_name=getattr(ctx.crs, "name", None)), MAP_FIGURE)
        ctx.save_figure(magnitude_by_relation(res.scenarios, max_scenarios=p["n_scenarios_plotted"]), MAGNITUDE_FIGURE)


TOOL = Tool(
    name="hazard",
    summary="Screening of active faults: magnitudes, slip rates, recurrence, surface-rupture zones.",
    run=run,
    requires=("prepare",),
    uses=("throw",),
    inputs=("faults",),
    optional_inputs=("dem",),
    params=(
        Param("fault_ids", str, None,
              "Comma-separated fault ids to screen instead of the faults marked active (e.g. '3,5,8'). "
              "Unset: the faults whose active field is true.",
              nullable=True),
        Param("seismogenic_thickness_km", float, 15.0,
              "Thickness of the seismogenic layer; down-dip width = thickness / sin(dip) (common practice 15 km).",
              unit="km", min=0.0, max=100.0, min_exclusive=True),
        Param("link_gap_m", float, None,
              "When set, also build multi-fault scenarios linking traces closer than this gap (across systems). "
              "Unset: segments and linked systems only.",
              unit="m", min=0.0, nullable=True),
        Param("preferred", str, "area_mean",
              "Rule for the preferred magnitude: 'area_mean' = inverse-variance weighted mean of Wells & "
              "Coppersmith 1994 RA-normal and Hanks & Bakun 2002 (the H&B branch above 537 km2 has weight 0), "
              "or one relation key.",
              choices=PREFERRED_RULES),
        Param("shear_modulus_pa", float, SHEAR_MODULUS_PA, "Shear modulus for the seismic moment M0 = mu A D.",
              unit="Pa", min=0.0, min_exclusive=True),
        Param("event_max_displacement_m", float, None,
              "Maximum displacement in ONE earthquake (not cumulative throw) for faults without the "
              "event_max_displacement_m field; enables the MD relations. Unset: no MD magnitudes.",
              unit="m", min=0.0, min_exclusive=True, nullable=True),
        Param("event_avg_displacement_m", float, None,
              "Average displacement in ONE earthquake for faults without the event_avg_displacement_m field; "
              "used for the AD relations and the recurrence interval. Default: Wells & Coppersmith 1994 AD on M.",
              unit="m", min=0.0, min_exclusive=True, nullable=True),
        Param("throw_field", str, "max_throw_m", "Cumulative throw used for slip rates.",
              choices=("max_throw_m", "mean_throw_m")),
        Param("age_rel_err", float, 0.2,
              "Relative 1-sigma error of surface_age_ka (used without a surface_age_err_ka field).",
              min=0.0, max=5.0),
        Param("age_abs_err_ka", float, None, "Absolute 1-sigma age error; overrides age_rel_err. Unset: age_rel_err is used.",
              unit="ka", min=0.0, nullable=True),
        Param("dip_range_deg", float, 10.0, "Dips drawn uniformly within +- this range in the Monte Carlo.",
              unit="deg", min=0.0, max=45.0),
        Param("n_draws", int, None, "Monte Carlo draws per fault, used exactly when given. Default: 10000 up "
              "to 800 screened faults, then 8e6 / n (at least 1000); the precision of the percentiles' levels "
              "goes to run_info (percentile_level_se_p16).", min=100, max=1_000_000, nullable=True),
        Param("seed", int, 0, "Random seed of the Monte Carlo.", min=0),
        Param("max_age_ka", float, 5000.0,
              "Older surface ages are flagged age_suspect (probably given in years, not ka).",
              unit="ka", min=0.0, min_exclusive=True),
        Param("max_rate_mm_yr", float, 20.0, "Higher vertical slip rates are flagged rate_high.",
              unit="mm/yr", min=0.0, min_exclusive=True),
        Param("min_rate_mm_yr", float, 0.001, "Lower vertical slip rates are flagged rate_low.",
              unit="mm/yr", min=0.0),
        Param("hw_width_m", float, 150.0,
              "Rupture-zone half-width on the hanging wall (common practice; local codes decide).",
              unit="m", min=0.0),
        Param("fw_width_m", float, 75.0,
              "Rupture-zone half-width on the footwall (common practice; local codes decide).",
              unit="m", min=0.0),
        Param("mapping_uncertainty_m", float, None,
              "Positional uncertainty of the traces added to both zone sides. Default: from "
              "map_scale_denominator, else one DEM pixel.",
              unit="m", min=0.0, nullable=True),
        Param("map_scale_denominator", float, None,
              "Scale 1:N of the source map of the traces; uncertainty = 0.5 mm at map scale (1:25000 -> 12.5 m).",
              min=0.0, min_exclusive=True, nullable=True),
        Param("n_map_labels", int, 15,
              "Screened faults labelled on the map, the largest magnitude first; a label that would overlap "
              "another or leave the map is skipped (0: no labels).",
              min=0, max=60),
        Param("n_scenarios_plotted", int, 25,
              "Rupture scenarios in the magnitude figure, the largest preferred magnitude first.",
              min=1, max=60),
    ),
    layers=("faults", "rupture_scenarios", "rupture_zones"),
    figures=(MAP_FIGURE, MAGNITUDE_FIGURE),
    description=(
        "Screens the faults marked active (or listed in fault_ids). Rupture scenarios: each segment, each "
        "linked system and, with link_gap_m, runs of neighbouring faults across small gaps. Magnitudes from "
        "surface rupture length, rupture area (length x down-dip width, W = thickness / sin dip) and, where "
        "given, single-event displacements, with the Wells & Coppersmith (1994) normal-fault and all-slip "
        "relations and Hanks & Bakun (2002), each with its sigma and a warning outside its data range; "
        "seismic moment M0 = mu A D and Mw = 2/3 (log10 M0 - 9.1) (IASPEI). Slip rates = throw / age of the "
        "offset surface (vertical, horizontal, net) with a seeded Monte Carlo over throw error, age error "
        "and dip; recurrence = single-event displacement / net slip rate. Surface-rupture zones wider on "
        "the hanging wall (the side the dip direction points to) plus the mapping uncertainty. Magnitudes "
        "need the traces only; without throws, slip rates come from a slip_rate_mm_yr field (net dip slip, "
        "a number, range or triple) where given. "
        "See docs/methods/hazard.md. " + CAUTION
    ),
)
