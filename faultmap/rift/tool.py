"""Tool ``width``: rift axis, width along the rift, narrow/wide class, subsidence.

Thin wrapper around :mod:`faultmap.rift`, :mod:`faultmap.rift.swath` and
:mod:`faultmap.rift.subsidence`: fits (or takes) the rift axis, measures widths on
sections perpendicular to it, reads swath profiles from the DEM in windows
(``Dem.sample``, decimated to a sample budget), classifies the rift and
predicts McKenzie (1978) subsidence from beta.
"""

from __future__ import annotations

import math

import numpy as np
import shapely

from faultmap.errors import InputError, ParameterError
from faultmap.registry import Param, Tool
from faultmap.rift.subsidence import CRUST_THICKNESS_M, subsidence_curve

MAP_FIGURE = "width_map.png"
ALONG_FIGURE = "width_along_axis.png"
SWATH_FIGURE = "width_swath.png"
SUBSIDENCE_FIGURE = "width_subsidence.png"


#: Why the transects' beta is not the lithosphere's (written out whenever it feeds the subsidence).
TRANSECT_BETA_CAVEAT = (
    "subsidence from the transects' beta: that beta is brittle upper-crust extension on the resolved faults "
    "since the mapped surface formed, not the whole-lithosphere stretching the McKenzie (1978) model assumes "
    "(faults below detection, ductile thinning and older extension are missing): read the curve as a lower "
    "bound, and give beta when the lithosphere's stretching is known."
)


def _beta_from_context(ctx) -> tuple[float | None, str]:
    """Median beta of the measured transects, if the transect tool ran."""
    t = None
    res = ctx.results.get("transect")
    if isinstance(res, dict):
        t = res.get("transects")
    if t is None:
        t = ctx.layers.get("transects")
    if t is None or "beta" not in getattr(t, "columns", ()):
        return None, ""
    b = np.asarray(t["beta"], dtype=float)
    ok = np.isfinite(b)
    if "status" in t.columns:
        ok &= t["status"].astype(str).to_numpy() == "ok"
    if not ok.any():
        return None, ""
    return float(np.median(b[ok])), f"median beta of {int(ok.sum())} transects (transect tool)"


def _swath(ctx, p: dict, sections, faults_extent_m: float):
    from faultmap.rift.swath import profile_stats, swath_features, swath_grid

    """Swath profiles along the sections, sampled from ctx.dem in windows."""
    dem = ctx.dem
    measured = sections[np.isfinite(sections["across_min_m"])]
    if len(measured):
        reach = float(np.max(np.abs(measured[["across_min_m", "across_max_m"]].to_numpy())))
    else:
        reach = faults_extent_m
    half_len = p["swath_half_length_m"]
    if half_len is None:
        half_len = max(2.0 * reach, 20.0 * dem.pixel_size)
        ctx.record("swath_half_length_m_used", round(half_len, 3))
    half_w = 0.5 * float(sections["band_m"].iloc[0])
    bin_m = p["swath_bin_m"]
    if bin_m is None:
        bin_m = max(dem.pixel_size, 2.0 * half_len / 200.0)
    oversample = 2
    # decimate to the sample budget: samples = K * (2 hw / step) * (2 hl / step)
    k = len(sections)
    n_samples = k * (2 * half_w) * (2 * half_len) * (oversample / bin_m) ** 2
    if n_samples > p["swath_max_samples"]:
        bin_m *= math.sqrt(n_samples / p["swath_max_samples"])
    ctx.record("swath_bin_m_used", round(bin_m, 3))
    centres = sections[["centre_x_m", "centre_y_m"]].to_numpy(float)
    x, y, across = swath_grid(centres, sections["azimuth_deg"].to_numpy(float), half_length_m=half_len,
                              half_width_m=half_w, bin_m=bin_m, oversample=oversample)
    z = dem.sample(x.ravel(), y.ravel()).reshape(x.shape)
    prof = profile_stats(z, across, oversample=oversample, section_ids=sections["section_id"].to_numpy())
    if not np.any(prof["n_valid"] > 0):
        ctx.warn("the swaths do not overlap valid DEM pixels: no topographic width (check the DEM extent)")
        return prof, None
    feat = swath_features(prof, floor_window_m=reach if len(measured) else None)
    return prof, feat


def run(ctx, p: dict) -> None:
    """Rift axis, sections, widths, classification, swaths and subsidence."""
    from faultmap.rift.axis import rift_axis
    from faultmap.rift.classification import classify_rift
    from faultmap.rift.widths import rift_sections

    faults = ctx.faults
    if faults is None or len(faults) == 0:
        raise InputError("width needs the faults layer: run prepare and throw first.")
    weight = p["axis_weight"]
    has_throw = "max_throw_m" in faults.columns and np.isfinite(np.asarray(faults["max_throw_m"], dtype=float)).any()
    if not has_throw:
        reason = ctx.results.get("left_out", {}).get("throw")
        why = f"throw was left out ({reason})" if reason else "the faults have no throws"
        ctx.warn(
            f"left out the heave-based parts ({why}): the axis is fitted with length weights, every fault counts "
            "for the outermost-fault width, and the heave widths and heave share are not measured."
        )
        ctx.record("left_out_parts", f"heave weights, heave widths, heave share: {why}")
        faults = faults.drop(columns=[c for c in ("max_throw_m", "heave_integral_m2", "mean_throw_m")
                                      if c in faults.columns])
        if weight == "heave":
            weight = "length"
            ctx.record("axis_weight_used", "length (no throws)")
    if p["localised_share"] <= p["distributed_share"]:
        raise ParameterError("[width] localised_share must be larger than distributed_share.")
    if p["narrow_max_km"] >= p["wide_min_km"]:
        raise ParameterError("[width] narrow_max_km must be smaller than wide_min_km.")

    line = None
    if p["axis_wkt"]:
        try:
            line = shapely.from_wkt(p["axis_wkt"])
        except Exception as exc:  # shapely raises its own GEOS error types
            raise ParameterError(f"[width] axis_wkt is not valid WKT ({exc}); give a LINESTRING in the working CRS.") from None
    axis = rift_axis(faults, line=line, weight=weight, smoothing_m=p["smoothing_m"])
    axis_line = axis.geometry.iloc[0]
    ctx.record("axis_source", axis["source"].iloc[0])
    if line is None:
        ctx.record("smoothing_m_used", round(float(axis["smoothing_m"].iloc[0]), 3))

    sections = rift_sections(
        faults, axis_line, spacing_m=p["spacing_m"], min_throw_m=p["min_throw_m"],
        narrow_max_km=p["narrow_max_km"], wide_min_km=p["wide_min_km"],
    )
    if p["spacing_m"] is None:
        ctx.record("spacing_m_used", round(float(sections["band_m"].iloc[0]), 3))
    if p["min_throw_m"] is None:
        ctx.record("min_throw_m_used", float(sections["min_throw_m"].iloc[0]))

    profiles = features = None
    if p["swath"] and ctx.dem is not None:
        bounds = faults.total_bounds
        extent = float(math.hypot(bounds[2] - bounds[0], bounds[3] - bounds[1]))
        profiles, features = _swath(ctx, p, sections, 0.5 * extent)
        if features is not None:
            sections = sections.merge(features, on="section_id", how="left")
            sections["crest_at_edge"] = sections["crest_at_edge"].fillna(False).astype(bool)
    elif p["swath"]:
        ctx.info("no DEM: swath profiles skipped.")

    summary = classify_rift(
        sections, faults,
        narrow_max_km=p["narrow_max_km"], wide_min_km=p["wide_min_km"],
        localised_share=p["localised_share"], distributed_share=p["distributed_share"],
        top_fraction=p["top_fraction"], by_system=p["by_system"],
        heat_flow_mw_m2=p["heat_flow_mw_m2"], crust_thickness_m=p["crust_thickness_m"],
        decision_score=p["decision_score"], topography=features,
    )

    # subsidence from beta
    beta, source = None, ""
    if p["beta"] is not None:  # the user's value wins
        beta, source = float(p["beta"]), "parameter beta"
    elif p["beta_from_transects"]:
        beta, source = _beta_from_context(ctx)
        if beta is not None:
            ctx.warn(TRANSECT_BETA_CAVEAT)
    table = None
    if beta is None:
        ctx.warn("no beta: give the stretching factor of the lithosphere (beta), or set beta_from_transects "
                 "to use the transects' (see its caveat); subsidence skipped.")
    elif beta <= 1.0:
        ctx.warn(f"beta {beta:.4f} shows no stretching: subsidence skipped.")
    else:
        tc = p["crust_thickness_m"] if p["crust_thickness_m"] is not None else CRUST_THICKNESS_M
        if p["crust_thickness_m"] is None:
            ctx.record("crust_thickness_m_used", tc)
        table = subsidence_curve(beta, crust_thickness_m=tc, time_myr=np.linspace(0.0, p["subsidence_max_myr"], 101))
        ctx.record("beta_used", round(beta, 6))
        ctx.record("beta_source", source)
        ctx.record("subsidence_initial_m", round(float(table["initial_m"].iloc[0]), 1))
        ctx.record("subsidence_total_end_m", round(float(table["total_m"].iloc[-1]), 1))
        ctx.info("subsidence is water-loaded (McKenzie 1978); sediment loading is not modelled.")
        summary["beta"] = beta
        summary["beta_source"] = source

    row = summary.iloc[0]
    ctx.record("class", row["class"])
    ctx.record("score", round(float(row["score"]), 4) if np.isfinite(row["score"]) else "")
    ctx.record("median_width_km", round(float(row["median_width_km"]), 3) if np.isfinite(row["median_width_km"]) else "")
    ctx.info(f"rift class {row['class']}: {row['reasons']}")

    ctx.layers["rift_axis"] = axis
    ctx.layers["rift_sections"] = sections
    ctx.layers["rift_summary"] = summary
    if profiles is not None:
        ctx.layers["rift_swath"] = profiles
    if table is not None:
        ctx.layers["subsidence"] = table
    ctx.results["width"] = {
        "axis": axis, "sections": sections, "summary": summary,
        "swath": profiles, "swath_features": features, "subsidence": table,
    }

    if ctx.figures_enabled:
        from faultmap.rift.figures import (
            rift_map_figure,
            subsidence_figure,
            swath_figure,
            width_along_axis_figure,
        )

        ctx.save_figure(rift_map_figure(faults, axis, sections, summary=summary, crs_name=getattr(ctx.crs, "name", None)), MAP_FIGURE)
        ctx.save_figure(width_along_axis_figure(sections, summary=summary, topography=features), ALONG_FIGURE)
        if profiles is not None and np.any(profiles["n_valid"] > 0):
            ctx.save_figure(
                swath_figure(profiles, features=features, sections=sections, max_panels=p["n_swath_figures"]),
                SWATH_FIGURE,
            )
        if table is not None:
            ctx.save_figure(subsidence_figure(table), SUBSIDENCE_FIGURE)


TOOL = Tool(
    name="width",
    summary="Rift axis, width along the rift, narrow/wide classification and subsidence from stretching.",
    run=run,
    requires=("prepare",),
    uses=("throw",),
    inputs=("faults",),
    optional_inputs=("dem",),
    params=(
        Param("axis_wkt", str, None,
              "Rift axis as a WKT LINESTRING in the working CRS; default: fitted to the faults.", nullable=True),
        Param("axis_weight", str, "heave", "Weight of the faults when fitting the axis.",
              choices=("heave", "length")),
        Param("smoothing_m", float, None,
              "Along-axis smoothing bandwidth of the fitted axis; default: the larger of 1/8 of the faults' "
              "along-axis extent and half their across-axis spread.", unit="m", min=0.0, min_exclusive=True,
              nullable=True),
        Param("spacing_m", float, None,
              "Distance between sections (each owns a band of this width); default: 1/20 of the faults' "
              "along-axis extent.", unit="m", min=0.0, min_exclusive=True, nullable=True),
        Param("min_throw_m", float, None,
              "Faults with a smaller maximum throw do not count for the outermost-fault width; default: a tenth "
              "of the largest maximum throw.", unit="m", min=0.0, nullable=True),
        Param("narrow_max_km", float, 100.0,
              "Median width at or below which the width says narrow (common practice ~100 km).", unit="km",
              min=0.0, min_exclusive=True),
        Param("wide_min_km", float, 175.0,
              "Median width at or above which the width says wide (texts: ~150-200 km).", unit="km",
              min=0.0, min_exclusive=True),
        Param("localised_share", float, 0.5,
              "Heave share of the top faults/systems at or above which extension counts as localised (narrow).",
              min=0.0, max=1.0),
        Param("distributed_share", float, 0.25,
              "Heave share of the top faults/systems at or below which extension counts as distributed (wide).",
              min=0.0, max=1.0),
        Param("top_fraction", float, 0.1, "Fraction of the largest faults/systems whose heave share is used.",
              min=0.0, max=1.0, min_exclusive=True),
        Param("by_system", bool, True, "Sum heave over linked systems (system_id) for the localisation measure."),
        Param("decision_score", float, 0.33,
              "Score magnitude (0-1) needed to call a rift narrow (<= -value) or wide (>= +value).",
              min=0.0, max=1.0, min_exclusive=True),
        Param("heat_flow_mw_m2", float, None,
              "Surface heat flow at rift onset, if known; compared with Buck (1991) modes.", unit="mW/m2",
              min=0.0, min_exclusive=True, nullable=True),
        Param("crust_thickness_m", float, None,
              "Pre-rift crustal thickness, if known: compared with Buck (1991) modes and used for subsidence "
              "(default there 35 km).", unit="m", min=0.0, min_exclusive=True, nullable=True),
        Param("beta", float, None,
              "Stretching factor of the whole lithosphere for the McKenzie (1978) subsidence; it wins over the "
              "transects' beta.", min=1.0, nullable=True),
        Param("beta_from_transects", bool, False,
              "Without beta, use the median beta of the transect tool: brittle upper-crust extension on the "
              "resolved faults, a lower bound of the lithosphere's stretching (the caveat goes to run_info)."),
        Param("subsidence_max_myr", float, 200.0, "Last time of the subsidence table.", unit="Myr",
              min=0.0, min_exclusive=True),
        Param("swath", bool, True, "Compute swath profiles across the axis from the DEM."),
        Param("swath_half_length_m", float, None,
              "Half-length of the swath profiles across the axis; default twice the distance of the farthest counted fault.",
              unit="m", min=0.0, min_exclusive=True, nullable=True),
        Param("swath_bin_m", float, None,
              "Across-axis bin width of the swath profiles; default the larger of one DEM pixel and 1/200 of "
              "the profile length.", unit="m", min=0.0, min_exclusive=True, nullable=True),
        Param("swath_max_samples", int, 2_000_000,
              "Most DEM samples for all swaths together (the sampling is coarsened to fit).", min=1000),
        Param("n_swath_figures", int, 6,
              "Swath profiles drawn (one panel each, evenly spread along the axis; the figure says how many "
              "sections were left out).", min=1, max=16),
    ),
    layers=("rift_axis", "rift_sections", "rift_summary", "rift_swath", "subsidence"),
    figures=(MAP_FIGURE, ALONG_FIGURE, SWATH_FIGURE, SUBSIDENCE_FIGURE),
    description=(
        "Fits a rift axis to the faults (heave-weighted mean strike, then a curve that follows the smoothed "
        "local strike and across-axis centroids, refined once in its own curved frame) or takes a user line. "
        "Sections perpendicular to the axis own along-axis bands; each gets the width between the outermost "
        "faults above a throw threshold and the width holding the central 90 % of cumulative heave. Swath "
        "profiles (min, mean, max elevation) across the axis give crest-to-crest topographic width and relief. "
        "The class (narrow, wide or indeterminate) follows our stated rule combining the median width (common "
        "practice: narrow < ~100 km, wide from ~150-200 km), the heave share of the largest faults, and "
        "optionally heat flow and crustal thickness against the Buck (1991) modes; the reasons field says "
        "which numbers decided. Subsidence from beta after McKenzie (1978), water-loaded; sediment loading "
        "is not modelled. Axis and outermost-fault widths need the traces only; without throws the heave-based "
        "parts are left out and the run says so. See docs/methods/width.md."
    ),
)
