"""Tool ``throw``: throw, heave and vertical separation along every trace, from the DEM or without one.

A thin wrapper: it takes the prepared ``faults`` and the lazy DEM from the
run context, calls :func:`faultmap.throw.step.measure_throw` (batches of
stations run through the run's engine), records the adapted parameter
values in ``run_info`` and draws the figures. Without a DEM (``source``), the
throws come from the traces' attributes (:mod:`faultmap.throw.from_attributes`)
or from a layer of throw measurements (:mod:`faultmap.throw.from_points`).
"""

from __future__ import annotations

import numpy as np

from faultmap.errors import InputError, ParameterError
from faultmap.registry import Param, Tool
from faultmap.throw.tool_without_dem import has_throw_attributes, run_without_dem

_FIGURES = ("throw_map.png", "throw_profiles.png", "throw_systems.png", "throw_degradation.png")

#: Where throws come from (``auto``: the DEM where given, else throw points, else attributes).
SOURCES = ("auto", "dem", "attributes", "points")

def resolve_source(ctx, source: str) -> tuple[str | None, str | None]:
    """Return the throw source used for ``source`` on the loaded inputs, or why there is none.

    Returns
    -------
    (source, reason)
        ``source`` is ``dem``, ``points`` or ``attributes``; ``reason`` (when ``source`` is None)
        says what is missing and what to give.
    """
    attrs = has_throw_attributes(ctx)
    if source == "auto":
        if ctx.dem is not None:
            return "dem", None
        if getattr(ctx, "throw_points", None) is not None:
            return "points", None
        if attrs:
            return "attributes", None
        return None, ("no DEM, no throw points and no max_throw_m or displacement_m field on the traces; give "
                      "--dem, --throw-points or a throw attribute")
    if source == "dem" and ctx.dem is None:
        return None, "source 'dem' needs a DEM; give --dem or [inputs] dem (or another source)"
    if source == "points" and getattr(ctx, "throw_points", None) is None:
        return None, "source 'points' needs a point layer of throws; give --throw-points or [inputs] throw_points"
    if source == "attributes" and not attrs:
        return None, ("source 'attributes' needs a max_throw_m or displacement_m field on the traces "
                      "(map yours with --field max_throw_m=COLUMN)")
    return source, None


def check(ctx, p: dict) -> str | None:
    """Why throw cannot run on the loaded inputs (None: it can)."""
    return resolve_source(ctx, p["source"])[1]


def run(ctx, p: dict) -> None:
    """Measure throw along the prepared traces and store the layers."""
    faults = ctx.faults
    if faults is None:
        raise InputError("throw needs the prepared 'faults' layer; run prepare first.")
    source, reason = resolve_source(ctx, p["source"])
    if source is None:
        raise InputError(f"throw: {reason}.")
    ctx.record("source_used", source)
    if source == "dem" and getattr(ctx, "throw_points", None) is not None:
        ctx.warn("throw points are not used when the throws come from the DEM; set source = 'points' to use them.")
    if source != "dem":
        run_without_dem(ctx, p, source)
        return
    from faultmap.throw.params import resolve_params
    from faultmap.throw.step import measure_throw

    dem = ctx.dem
    if dem is None:
        raise InputError("throw needs a DEM; give --dem or [inputs] dem.")
    params = resolve_params(
        dem.pixel_size,
        station_spacing_m=p["station_spacing_m"],
        profile_half_length_m=p["profile_half_length_m"],
        scarp_halfwidth_m=p["scarp_halfwidth_m"],
        normal_window_m=p["normal_window_m"],
        max_half_length_m=p["max_half_length_m"],
        min_samples_per_side=p["min_samples_per_side"],
        robust_loss=p["robust_loss"],
        robust_tuning=p["robust_tuning"],
        robust_iterations=p["robust_iterations"],
        scarp_iterations=p["scarp_iterations"],
        far_field_widths=p["far_field_widths"],
        memory_budget_mb=p["memory_budget_mb"],
        smooth_stations=p["smooth_stations"],
        min_stations_per_fault=p["min_stations_per_fault"],
        degradation=p["degradation"],
        n_events=p["n_events"],
    )
    from faultmap.throw.batches import min_batches_for

    min_batches = min_batches_for(ctx.engine)

    def progress(iterable, total):
        return ctx.progress(iterable, total=total, desc="throw")

    mapper = None
    if ctx.engine is not None:

        def mapper(func, batches, prog):
            return ctx.engine.map(func, batches, progress=prog)

    from faultmap.throw import step

    if step.compiled_on_disk() is False:
        ctx.info("first run in this environment: compiling faultmap's kernels (about 18 s, once).")
    res = measure_throw(faults, dem, params=params, mapper=mapper, progress=progress, min_batches=min_batches)
    for w in res.warnings:
        ctx.warn(w)
    if np.issubdtype(np.dtype(dem.dtype), np.integer):
        ctx.warn(
            f"{dem.path}: elevations are stored as whole numbers ({dem.dtype}); vertical separations are "
            "quantised to the DEM's unit, which biases small throws: use a floating-point DEM for small scarps."
        )
    status = res.stations["status"].to_numpy()
    # the DEM served no station at all (too small, elsewhere, or void): nothing to report. Stations cut
    # short by neighbouring traces or with poor fits are results (their statuses say why) and are written.
    if len(status) and np.isin(status, ("outside", "nodata")).all():
        kinds, counts = np.unique(status, return_counts=True)
        raise InputError(
            f"{dem.path}: no throw could be measured at any of {len(status)} stations "
            f"({', '.join(f'{c} {k}' for k, c in zip(kinds, counts, strict=True))}; DEM {dem.width} x {dem.height} "
            f"pixels of {dem.pixel_size:g} m); give a DEM that covers the traces with at least "
            f"{2 * params.min_samples_per_side + 1} pixels across each scarp profile."
        )
    _relink(ctx, res, params)
    # what was used where the user left a parameter unset
    px = dem.pixel_size
    if p["station_spacing_m"] is None:
        ctx.record(
            "station_spacing_m_used",
            f"{params.station_spacing_m:g} (10 DEM pixels; at least {params.min_stations} stations per fault, never under 2 pixels)",
        )
    if p["normal_window_m"] is None:
        ctx.record("normal_window_m_used", f"{params.normal_window_m:g}")
    if p["scarp_halfwidth_m"] is None:
        ctx.record(
            "scarp_halfwidth_m_used",
            f"{params.scarp_halfwidth_m:g} (3 pixels), widened per station where the scarp is broader",
        )
    if p["profile_half_length_m"] is None:
        H = res.stations["profile_half_length_m"].to_numpy(dtype=float)
        H = H[np.isfinite(H)]
        rng = f"{H.min():g}-{H.max():g} m, median {np.median(H):g} m" if H.size else "none"
        ctx.record(
            "profile_half_length_m_used",
            f"adapted: 10 % of the trace length within {params.min_half_length_m:g}-{params.max_half_length_m:g} m, "
            f"lengthened where the scarp is broad; used {rng}",
        )
    if p["max_half_length_m"] is None:
        ctx.record(
            "max_half_length_m_used",
            f"{params.max_half_length_m:g} ({params.max_half_length_m / px:g} pixels)",
        )
    if p["robust_tuning"] is None:
        ctx.record("robust_tuning_used", f"{params.robust_tuning:g}")
    if p["smooth_stations"] is None:
        used = res.faults["smooth_stations_used"].dropna()
        ctx.record(
            "smooth_stations_used",
            "cross-validated per fault: "
            + ", ".join(f"{k:g}: {int(v)} faults" for k, v in used.value_counts().sort_index().items()),
        )
    ctx.record("sample_step_m", f"{params.sample_step_m:g}")
    ctx.record("n_batches", res.n_batches)
    ctx.record("n_profile_samples", res.n_samples)
    counts = res.stations["status"].value_counts()
    ctx.record("station_status", ", ".join(f"{k} {int(v)}" for k, v in counts.items()))
    n_dem = int((res.faults["dip_dir_source"] == "dem").sum())
    ctx.info(
        f"{len(res.stations)} stations on {len(res.faults)} faults: {int(counts.get('ok', 0))} ok; "
        f"down-thrown side from the DEM for {n_dem} faults; {len(res.linkage_zones)} linkage zones."
    )
    res.faults["throw_source"] = np.where(
        np.isfinite(res.faults["max_throw_m"].to_numpy(dtype=float)), "dem", "none"
    ).astype(object)
    res.stations["throw_source"] = "dem"
    _degradation_records(ctx, res, params, p)  # kappa t and morphologic ages (faultmap.scarps)
    ctx.faults = res.faults
    ctx.layers["throw_stations"] = res.stations
    ctx.layers["linkage_zones"] = res.linkage_zones
    ctx.results["throw"] = res
    if ctx.figures_enabled:
        from faultmap.io.dem import read_overview
        from faultmap.throw.figures import system_profiles, throw_map, throw_profiles

        elev, t = read_overview(dem, max_pixels=1_000_000)
        ctx.save_figure(
            throw_map(res.faults, elevation=elev, transform=t, n_labels=p["n_map_labels"],
                      crs_name=getattr(ctx.crs, "name", None)),
            "throw_map.png",
        )
        ctx.save_figure(
            throw_profiles(res.faults, res.stations, n_largest=p["n_profile_figures"]), "throw_profiles.png"
        )
        ctx.save_figure(
            system_profiles(res.faults, res.stations, res.linkage_zones, max_systems=p["n_system_figures"]),
            "throw_systems.png",
        )
        from faultmap.scarps.figures import degradation_figure

        ctx.save_figure(
            degradation_figure(res.faults, res.stations, pixel_size_m=params.pixel_size_m), "throw_degradation.png"
        )


def _degradation_records(ctx, res, params, p) -> None:
    """Morphologic ages when a kappa (or a dated scarp) is given; what was used goes to run_info."""
    if not params.degradation:
        ctx.record("degradation", "off (no kappa t fitted)")
        return
    from faultmap.scarps.ages import fault_ages

    flags = res.faults["kappa_t_flag"].value_counts()
    ctx.record("kappa_t_faults", ", ".join(f"{k} {int(v)}" for k, v in flags.items()))
    ctx.record(
        "kappa_t_model",
        f"erf diffusion profile, {params.n_events} event(s); kappa t less p^2/12 = {params.pixel_size_m**2 / 12:.3g} m2 "
        f"(bilinear interpolation); resolved when sqrt(kappa t) >= {0.5 * params.pixel_size_m:g} m (half a pixel)",
    )
    rng = None
    if p["kappa_min_m2_kyr"] is not None or p["kappa_max_m2_kyr"] is not None:
        if p["kappa_m2_kyr"] is None or p["kappa_min_m2_kyr"] is None or p["kappa_max_m2_kyr"] is None:
            raise ParameterError(
                "give kappa_min_m2_kyr and kappa_max_m2_kyr together, with kappa_m2_kyr (the kappa range)."
            )
        rng = (p["kappa_min_m2_kyr"], p["kappa_max_m2_kyr"])
    res.faults, rec = fault_ages(
        res.faults,
        kappa_m2_kyr=p["kappa_m2_kyr"],
        kappa_range_m2_kyr=rng,
        calibration_fault_id=p["kappa_calibration_fault_id"],
    )
    for k, v in rec.items():
        ctx.record(k, v)
    if rec:
        ctx.info("morphologic ages from kappa t: " + rec["kappa_m2_kyr_used"])


def _relink(ctx, res, params) -> None:
    """Re-link systems once the DEM has given the dip directions prepare did not know.

    ``prepare`` links segments whose dip direction is unknown on geometry alone;
    with the down-thrown side measured, segments dipping opposite ways are split
    (and linkage zones recomputed) with the same link parameters.
    """
    from faultmap.throw.linkage import linkage_zones
    from faultmap.traces.conditioning import link_systems, system_sizes
    from faultmap.traces.tool import format_system_sizes

    link = ctx.results.get("prepare")
    f = res.faults
    if not link or not (f["dip_dir_source"] == "dem").any():
        return
    new = link_systems(
        f.geometry.to_numpy(),
        f["strike_deg"].to_numpy(dtype=float),
        f["dip_dir_deg"].to_numpy(dtype=float),
        **link,
    )
    old = f["system_id"].to_numpy()
    if np.array_equal(new, old):
        return
    f["system_id"] = new
    res.linkage_zones = linkage_zones(f, res.stations, step_m=params.station_spacing_m)
    ctx.info("linked systems updated with the dip directions measured from the DEM.")
    ctx.record("systems_by_size", format_system_sizes(system_sizes(new)))


TOOL = Tool(
    name="throw",
    summary="Throw, heave and vertical separation along every trace: from the DEM, throw points or attributes.",
    run=run,
    requires=("prepare",),
    check=check,
    inputs=("faults",),
    optional_inputs=("dem", "throw_points"),
    params=(
        Param(
            "source",
            str,
            "auto",
            "Where throws come from: the DEM, the traces' max_throw_m / displacement_m attributes, or a "
            "layer of throw points; auto = the DEM where given, else throw points, else attributes.",
            choices=SOURCES,
        ),
        Param(
            "point_tolerance_m",
            float,
            200.0,
            "Throw points farther than this from every trace are not used (our default: field positions and "
            "mapped traces agree to tens of metres).",
            unit="m",
            min=0.0,
            min_exclusive=True,
        ),
        Param(
            "point_join_field",
            str,
            None,
            "Field present on both the traces and the throw points: each point goes to the nearest trace with "
            "its value (no tolerance). Unset: the nearest trace within point_tolerance_m.",
            nullable=True,
        ),
        Param(
            "point_throw_rel_err",
            float,
            0.1,
            "1-sigma error of a point throw given without throw_err_m or range, as a fraction of the throw "
            "(our default).",
            min=0.0,
            min_exclusive=True,
            max=1.0,
        ),
        Param(
            "station_spacing_m",
            float,
            None,
            "Distance between stations along a trace; default 10 DEM pixels (never under 2).",
            unit="m",
            min=0.0,
            min_exclusive=True,
            nullable=True,
        ),
        Param(
            "profile_half_length_m",
            float,
            None,
            "Fixed half-length of the profiles across the trace; default adapted per fault and lengthened where the "
            "scarp is broad, to reach 2-3 scarp widths of undisturbed surface.",
            unit="m",
            min=0.0,
            min_exclusive=True,
            nullable=True,
        ),
        Param(
            "max_half_length_m",
            float,
            None,
            "Longest profile half-length the adaptation may use; default 400 pixels.",
            unit="m",
            min=0.0,
            min_exclusive=True,
            nullable=True,
        ),
        Param(
            "scarp_halfwidth_m",
            float,
            None,
            "Smallest half-width of the scarp zone left out of the surface fits; default 3 pixels, widened per "
            "station where the profile departs from the far-field surface farther out.",
            unit="m",
            min=0.0,
            nullable=True,
        ),
        Param(
            "normal_window_m",
            float,
            None,
            "Trace length over which the profile direction is averaged; default twice the station spacing "
            "(at least 20 pixels).",
            unit="m",
            min=0.0,
            min_exclusive=True,
            nullable=True,
        ),
        Param(
            "min_samples_per_side",
            int,
            10,
            "Fewest valid samples a side's surface fit may use.",
            min=3,
            max=10000,
        ),
        Param(
            "robust_loss",
            str,
            "tukey",
            "Weight function of the robust surface fits.",
            choices=("tukey", "huber", "none"),
        ),
        Param(
            "robust_tuning",
            float,
            None,
            "Tuning constant of the weights in robust scale units; default 4.685 (Tukey) or 1.345 (Huber).",
            unit="sigma",
            min=0.5,
            max=20.0,
            nullable=True,
        ),
        Param("robust_iterations", int, 3, "Minimum reweighting passes of each robust fit (the noise scale is re-estimated on these; the fit then runs until the line converges, at most 10 passes).", min=0, max=50),
        Param(
            "scarp_iterations", int, 3, "Scarp-zone refinements (edge detection and refit).", min=0, max=10
        ),
        Param(
            "far_field_widths",
            float,
            2.5,
            "Undisturbed surface fitted on each side, in scarp widths.",
            min=0.5,
            max=20.0,
        ),
        Param(
            "smooth_stations",
            float,
            None,
            "Along-strike smoothing of the throw profile (Gaussian sigma, in stations; 0 = none); "
            "default chosen per fault by cross-validation.",
            unit="stations",
            min=0.0,
            max=20.0,
            nullable=True,
        ),
        Param(
            "min_stations_per_fault",
            int,
            24,
            "Short faults get a finer station spacing (never under 2 pixels) so that each has at least this many "
            "stations.",
            min=1,
            max=1000,
        ),
        Param(
            "memory_budget_mb",
            float,
            512.0,
            "Memory for the DEM windows and sample arrays of one batch (each thread or worker runs one batch at a time).",
            unit="MB",
            min=16.0,
        ),
        Param(
            "degradation",
            bool,
            True,
            "Fit the diffusion form of a degraded scarp (kappa t) to every station's profile, on the samples the "
            "throw fit already read (about doubles the time of the throw step on a regional scene).",
        ),
        Param(
            "n_events",
            int,
            1,
            "Events each scarp grew in, for the degradation fit (equal offsets, evenly spaced in time; 1 = one event).",
            min=1,
            max=20,
        ),
        Param(
            "kappa_m2_kyr",
            float,
            None,
            "Regional mass diffusivity for morphologic ages (age = kappa t / kappa); published values are regional "
            "(docs/methods/degradation.md); unset: no ages.",
            unit="m2/kyr",
            min=0.0,
            min_exclusive=True,
            nullable=True,
        ),
        Param(
            "kappa_min_m2_kyr",
            float,
            None,
            "Lower end of the kappa range (drawn log-uniformly in the age Monte Carlo); with kappa_max_m2_kyr.",
            unit="m2/kyr",
            min=0.0,
            min_exclusive=True,
            nullable=True,
        ),
        Param(
            "kappa_max_m2_kyr",
            float,
            None,
            "Upper end of the kappa range; with kappa_min_m2_kyr.",
            unit="m2/kyr",
            min=0.0,
            min_exclusive=True,
            nullable=True,
        ),
        Param(
            "kappa_calibration_fault_id",
            int,
            None,
            "A dated fault (surface_age_ka) whose kappa t calibrates kappa when kappa_m2_kyr is not given.",
            min=1,
            nullable=True,
        ),
        Param(
            "n_profile_figures",
            int,
            6,
            "Largest faults drawn in the along-strike profile figure (one panel each; the figure says how many "
            "were left out).",
            min=1,
            max=24,
        ),
        Param(
            "n_system_figures",
            int,
            6,
            "Largest linked systems (by summed maximum throw) drawn in the system profile figure (one panel each; "
            "the figure says how many were left out).",
            min=1,
            max=24,
        ),
        Param(
            "n_map_labels",
            int,
            8,
            "Largest faults labelled with their id on the throw map; a label that would overlap another or leave "
            "the map is skipped (0: no labels).",
            min=0,
            max=60,
        ),
    ),
    layers=("faults", "throw_stations", "linkage_zones"),
    figures=_FIGURES,
    description=(
        "Stations every station_spacing_m along each trace, with the normal averaged over normal_window_m. At each "
        "station a profile across the trace is sampled every pixel by bilinear interpolation of the DEM (voids stay "
        "void); another trace crossing the profile stops it short of the crossing. Beyond a scarp zone found from "
        "the profile's excess gradient, the footwall and hanging-wall surfaces are fitted on 2-3 scarp widths "
        "(McCalpin 1987 practice) by iteratively reweighted least squares (Tukey biweight; Holland & Welsch 1977) and "
        "projected to the trace: their difference is the vertical separation, converted to throw with the fitted "
        "surface slope and the fault dip (Caskey 1995); heave = throw / tan(dip). Each station has a status (ok, "
        "outside, truncated, nodata, poor_fit). Per fault: maximum throw of the robustly smoothed along-strike "
        "profile (Hampel filter, local quadratic regression) with its error and position, mean throw, heave "
        "integral, tip gradients; the down-thrown side is inferred from the DEM where no dip direction is given. "
        "Throw minima between the segments of linked systems are written as linkage zones. Without a DEM "
        "(source): per-fault max_throw_m (or displacement_m x sin dip) attributes, with a parabolic profile "
        "assumed for the mean throw and heave; or throw points snapped to the traces, whose along-strike "
        "profiles are summarised as the DEM stations are. throw_source on faults and stations says which. "
        "See docs/without_dem.md."
    ),
)
