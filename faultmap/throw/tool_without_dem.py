"""The ``throw`` tool without a DEM: throws from point measurements or from the traces' attributes.

The I/O side of :mod:`faultmap.throw.from_points` and
:mod:`faultmap.throw.from_attributes`: takes the run context's faults and
throw points, records what was used in ``run_info`` and puts the layers back
on the context. Called by :func:`faultmap.throw.tool.run`.
"""

from __future__ import annotations

__all__ = ["has_throw_attributes", "run_without_dem"]

#: Trace attributes that give a throw without a DEM.
_THROW_FIELDS = ("max_throw_m", "displacement_m")


def has_throw_attributes(ctx) -> bool:
    """Whether the traces carry a max_throw_m or displacement_m field (after the field mapping)."""
    raw = ctx.raw_faults
    if raw is None:
        return False
    return any(ctx.fields.get(k, k) in raw.columns for k in _THROW_FIELDS)


def run_without_dem(ctx, p: dict, source: str) -> None:
    """Throws from point measurements or from the traces' attributes (no DEM)."""
    from faultmap.throw.from_attributes import ASSUMED_PROFILE, throws_from_attributes

    faults = ctx.faults
    stations = None
    if source == "points":
        from faultmap.throw.from_points import point_stations, throws_from_points

        pts = ctx.throw_points
        where = pts.attrs.get("source", "throw_points")
        join = p["point_join_field"]
        if join and join not in faults.columns and ctx.raw_faults is not None and join in ctx.raw_faults.columns:
            # prepare keeps its own columns: bring the join field over by the source feature number
            raw = ctx.raw_faults.reset_index(drop=True)
            faults = faults.copy()
            faults[join] = raw[join].to_numpy()[faults["source_fid"].to_numpy() - 1]
        st, warns = point_stations(
            faults, pts, fields=ctx.fields, tolerance_m=p["point_tolerance_m"], join_field=join,
            default_rel_err=p["point_throw_rel_err"], where=where,
        )
        for w in warns:
            ctx.warn(w)
        smooth = 0.0 if p["smooth_stations"] is None else p["smooth_stations"]
        ctx.record("smooth_stations_used", f"{smooth:g} (points: each measurement as it is unless set)")
        f, stations = throws_from_points(faults, st, smooth_stations=smooth)
        if join and join not in ctx.faults.columns:
            f = f.drop(columns=join)
        ctx.record("n_points_used", len(stations))
        ctx.record("point_tolerance_m_used", p["point_tolerance_m"] if not join else f"joined by '{join}'")
        if has_throw_attributes(ctx):  # faults without points keep their attribute throws
            fa, _ = throws_from_attributes(faults)
            fill = (f["throw_source"].to_numpy() == "none") & (fa["throw_source"].to_numpy() == "attributes")
            for c in ("max_throw_m", "max_throw_err_m", "mean_throw_m", "heave_integral_m2", "throw_source",
                      "throw_profile"):
                f.loc[fill, c] = fa.loc[fill, c].to_numpy()
    else:
        f, warns = throws_from_attributes(faults)
        for w in warns:
            ctx.warn(w)
    n_by = f["throw_source"].value_counts()
    ctx.record("throw_source_counts", ", ".join(f"{k} {int(v)}" for k, v in n_by.items()))
    if (f["throw_profile"] == ASSUMED_PROFILE).any():
        ctx.record("assumed_profile", "parabola T = Tmax (1 - r^2) where only a maximum throw is given (our rule)")
    ctx.info(
        f"no DEM: throws from {source} for {int((f['throw_source'] != 'none').sum())} of {len(f)} faults "
        "(down-thrown sides only where dip_dir is given; no linkage zones)."
    )
    ctx.faults = f
    if stations is not None:
        ctx.layers["throw_stations"] = stations
    ctx.results["throw"] = {"faults": f, "stations": stations, "source": source}
