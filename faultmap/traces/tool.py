"""Tool ``prepare``: validate and condition fault traces.

Reads nothing itself: the runner has loaded the traces (in the working CRS),
the lazy DEM and the optional study area into the context.
"""

from __future__ import annotations

import numpy as np

from faultmap.errors import InputError
from faultmap.registry import Param, Tool

#: Parameters of the linkage rule (the throw tool re-links with the same ones).
LINK_PARAMS = ("link_distance_m", "link_angle_deg", "link_length_ratio", "max_segments")


def format_system_sizes(sizes: dict[int, int]) -> str:
    """Write system counts by size as ``"1:180, 2:12, 3:2"`` (traces per system: systems)."""
    return ", ".join(f"{k}:{v}" for k, v in sizes.items())


def run(ctx, p: dict) -> None:
    """Condition ``ctx.raw_faults`` into the ``faults`` layer."""
    from faultmap.traces.conditioning import censor_flags, condition_traces, link_systems, system_sizes

    raw = ctx.raw_faults
    where = raw.attrs.get("source", "faults")
    faults, warns = condition_traces(
        raw, fields=ctx.fields, dip_deg=p["dip_deg"], where=where, azimuth_reference=p["azimuth_reference"]
    )
    for w in warns:
        ctx.warn(w)
    if "dip_dir_convergence_deg" in faults.columns:
        g = faults["dip_dir_convergence_deg"].to_numpy(dtype=float)
        g = g[np.isfinite(g)]
        ctx.record(
            "meridian_convergence_deg",
            f"{g.min():.4f} to {g.max():.4f} (subtracted from {g.size} true dip directions to give grid azimuths)",
        )
    lines = faults.geometry.to_numpy()
    dem = ctx.dem
    tol = p["censor_tolerance_m"]
    if tol is None:
        tol = 2.0 * dem.pixel_size if dem is not None else 0.0
        ctx.record("censor_tolerance_m_used", tol)
    sampler = None
    bounds = None
    if dem is not None:
        bounds = dem.bounds
        sampler = dem.sample
        import shapely

        dem_box = shapely.box(*bounds)
        inside = shapely.intersects(lines, dem_box)
        if not inside.any():
            raise InputError(
                f"{where}: no trace overlaps the DEM {dem.path} (DEM bounds {tuple(round(b) for b in bounds)} "
                f"in {ctx.crs.name}); check that both cover the same area and CRS."
            )
        if (~inside).any():
            ctx.warn(
                f"{int((~inside).sum())} traces lie entirely outside the DEM (fault_id "
                f"{', '.join(map(str, faults['fault_id'].to_numpy()[~inside][:10]))}); they get no throw."
            )
        # a DEM that is void along every trace cannot measure anything
        probe = shapely.line_interpolate_point(lines[inside], np.linspace(0, 1, 9)[:, None], normalized=True).ravel()
        xy = shapely.get_coordinates(probe)
        z = sampler(xy[:, 0], xy[:, 1])
        if np.isnan(z).all():
            raise InputError(
                f"{dem.path}: the DEM has no valid elevations along any trace (all nodata); "
                "check the nodata value (--dem-nodata) or the DEM file."
            )
    area = None
    if ctx.study_area is not None:
        area = ctx.study_area.geometry.union_all()
    censored, reason = censor_flags(lines, tolerance_m=tol, dem_bounds=bounds, sampler=sampler, study_area=area)
    faults["censored"] = censored
    faults["censor_reason"] = reason.astype(str)
    link = {k: p[k] for k in LINK_PARAMS}
    faults["system_id"] = link_systems(
        lines, faults["strike_deg"].to_numpy(), faults["dip_dir_deg"].to_numpy(), **link
    )
    sizes = system_sizes(faults["system_id"])
    n_sys = sum(v for k, v in sizes.items() if k > 1)
    ctx.info(
        f"{len(faults)} traces, {int(censored.sum())} censored, {n_sys} linked systems of several segments."
    )
    ctx.record("n_traces", len(faults))
    ctx.record("systems_by_size", format_system_sizes(sizes))
    # kept so that throw can re-link systems once it knows every dip direction
    ctx.results["prepare"] = link
    ctx.faults = faults


TOOL = Tool(
    name="prepare",
    summary="Validate and condition traces: CRS, geometry, attributes, strike, censoring, linkage.",
    run=run,
    requires=(),
    inputs=("faults",),
    optional_inputs=("dem", "study_area"),
    params=(
        Param(
            "azimuth_reference", str, "true",
            "North of the dip_dir attribute: 'true' (field and database azimuths; turned into grid azimuths of "
            "the working CRS with the meridian convergence at each trace) or 'grid' (used as given).",
            choices=("true", "grid"),
        ),
        Param(
            "dip_deg", float, 60.0,
            "Dip used where the dip attribute is missing (Andersonian normal fault, common practice).",
            unit="deg", min=0.0, max=90.0, min_exclusive=True,
        ),
        Param(
            "censor_tolerance_m", float, None,
            "A trace tip this close to the DEM edge, a nodata area or the study-area boundary marks the trace "
            "censored (its length is a minimum). Default: 2 DEM pixels.",
            unit="m", min=0.0, nullable=True,
        ),
        Param(
            "link_distance_m", float, 1000.0,
            "Largest tip-to-tip distance of two linked segments (see also link_length_ratio).",
            unit="m", min=0.0,
        ),
        Param(
            "link_length_ratio", float, 0.5,
            "Largest tip-to-tip distance of two linked segments as a fraction of the shorter one's length "
            "(relay zones are small against their segments; our rule).",
            unit="", min=0.0, min_exclusive=True,
        ),
        Param(
            "max_segments", int, 5,
            "Most traces in one linked system: longer chains are cut at their weakest relays (our rule).",
            unit="", min=2, max=1000,
        ),
        Param(
            "link_angle_deg", float, 20.0,
            "Linked traces must differ in strike by less than this angle (and dip the same way).",
            unit="deg", min=0.0, max=90.0,
        ),
    ),
    layers=("faults",),
    figures=(),
    description=(
        "Explodes multi-part lines, drops empty and zero-length parts (warning), rejects points and polygons, "
        "drops Z/M, removes exact duplicates, computes length in the working CRS, right-hand-rule strike "
        "(length-weighted axial mean of segment azimuths, Mardia & Jupp 2000), dip and dip direction with "
        "their sources (dip_dir from true north turned into grid azimuths with the meridian convergence unless azimuth_reference is 'grid'; numbers may be ranges '50-70', triples '(50,60,70)' or, for dip_dir, compass letters), a stable fault_id, censoring at the mapped area's edges, and linked systems: pairs and short chains of along-strike segments, each tip linked to at most one mutual nearest partner within link_distance_m and link_length_ratio of the shorter trace, at most max_segments traces per system. "
        "Traces are stored oriented along their strike, so digitising direction never matters."
    ),
)
