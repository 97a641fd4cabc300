"""Figures of the throw analysis: map of maximum throw, along-strike profiles.

Every function returns a :class:`matplotlib.figure.Figure` built without
pyplot's global state; callers save it (``fig.savefig(path, dpi=170)``).
Figures stay bounded (:mod:`faultmap.figure_kit`) whatever the number of
faults: maps draw all traces as one collection, profile figures show the
largest faults or systems and say how many were left out.
"""

from __future__ import annotations

import math

import numpy as np
import shapely
from matplotlib.collections import LineCollection, PolyCollection
from matplotlib.colors import Normalize
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch
from matplotlib.ticker import MaxNLocator

from faultmap.figure_kit import (
    bounded,
    clear_legend,
    glyph_safe,
    line_parts,
    map_furniture,
    panel_grid,
    place_labels,
    shown_note,
    trace_width,
)
from faultmap.numerics.hillshade import hillshade as _shade

__all__ = ["hillshade", "throw_map", "throw_profiles", "system_profiles"]

_STATUS_STYLE = {
    "poor_fit": ("tab:orange", "x"),
    "nodata": ("tab:purple", "v"),
    "outside": ("0.5", "s"),
    "truncated": ("tab:red", "|"),
}


def hillshade(z, transform, *, azimuth_deg: float = 315.0, altitude_deg: float = 45.0) -> np.ndarray:
    """Shaded relief of a DEM, 0 (dark) to 1 (lit), NaN where void.

    Parameters
    ----------
    z : ndarray
        Elevations, metres (NaN = void).
    transform : affine.Affine
        Pixel-corner transform (north-up).
    azimuth_deg, altitude_deg : float
        Direction (clockwise from north) and elevation angle of the light.

    Notes
    -----
    Lambertian shading of the surface normal from central-difference
    gradients (common practice; e.g. Burrough & McDonnell 1998, Principles
    of GIS, from memory); the one implementation is
    :func:`faultmap.numerics.hillshade.hillshade`.
    """
    return _shade(
        z, pixel_size_x_m=abs(transform.a), pixel_size_y_m=abs(transform.e),
        azimuth_deg=azimuth_deg, altitude_deg=altitude_deg,
    )


def _extent(arr, transform):
    h, w = arr.shape
    x0, y0 = transform.c, transform.f
    return (x0, x0 + transform.a * w, y0 + transform.e * h, y0)


_VOID_COLOUR = "#f3e3c3"


@glyph_safe
def throw_map(
    faults,
    *,
    elevation=None,
    transform=None,
    column: str = "max_throw_m",
    title: str | None = None,
    cmap: str = "viridis",
    figsize=(8.0, 7.0),
    n_labels: int = 8,
    max_ticks: int = 400,
    crs_name: str | None = None,
    exaggeration: float = 4.0,
) -> Figure:
    """Map of fault traces coloured by maximum throw over a hillshade.

    Parameters
    ----------
    faults : geopandas.GeoDataFrame
        Traces with ``column`` (metres); ``dip_dir_source`` is used to mark
        traces whose down-thrown side came from the DEM.
    elevation : ndarray, optional
        DEM (decimated is fine, see :func:`faultmap.io.dem.read_overview`).
    transform : affine.Affine, optional
        Transform of ``elevation``.
    column : str
        Field to colour by.
    n_labels : int
        The largest faults (by ``column``) labelled with their id (and
        name); labels that would overlap or leave the map are skipped.
    max_ticks : int
        Down-thrown-side ticks are drawn on at most this many faults (the
        largest); the figure says how many were left out.
    crs_name : str, optional
        Name of the (projected) CRS, written beside the scale bar and the
        grid-north arrow.
    exaggeration : float
        Vertical exaggeration of the shaded relief; its grey range is
        stretched between the 1st and 99th percentiles so that scarps show.
        DEM voids are drawn in a light sand colour, named in the legend.

    Returns
    -------
    matplotlib.figure.Figure
        All traces in one collection (the largest on top, outlined in
        black so that they read over the relief), line width thinning as
        traces crowd; the colour bar gives their maximum throw; axes in
        metres.
    """
    fig = Figure(figsize=figsize)
    ax = fig.add_subplot(1, 1, 1)
    has_dem = elevation is not None and transform is not None and np.size(elevation)
    handles = []
    if has_dem:
        import matplotlib

        z = np.asarray(elevation, dtype=float)
        hs = hillshade(z * exaggeration, transform)
        hs[~np.isfinite(z)] = np.nan
        fin = hs[np.isfinite(hs)]
        lo, hi = (np.percentile(fin, [1.0, 99.0]) if fin.size else (0.0, 1.0))
        if not hi > lo:
            lo, hi = 0.0, 1.0
        grey = matplotlib.colormaps["gray"].with_extremes(bad=_VOID_COLOUR)
        # a grey range kept off pure black and white: the coloured traces stay visible over it
        span = hi - lo
        ax.imshow(
            hs, extent=_extent(hs, transform), cmap=grey, vmin=lo - 0.25 * span, vmax=hi + 0.15 * span,
            interpolation="bilinear", zorder=0,
        )
        if not np.isfinite(z).all():
            handles.append(Patch(facecolor=_VOID_COLOUR, edgecolor="0.5", lw=0.5, label="DEM void"))
    n = len(faults)
    vals = faults[column].to_numpy(dtype=float) if column in faults.columns else np.full(n, np.nan)
    geoms = faults.geometry.to_numpy()
    segs, owner = line_parts(geoms)
    good = np.isfinite(vals)
    vmax = float(np.nanmax(vals)) if good.any() else 1.0
    norm = Normalize(vmin=0.0, vmax=vmax if vmax > 0 else 1.0)
    lw = trace_width(n)
    seg_good = good[owner]
    if seg_good.any():
        idx = np.flatnonzero(seg_good)
        idx = idx[np.argsort(vals[owner[idx]], kind="stable")]  # the largest drawn last, on top
        from matplotlib import patheffects

        lc = LineCollection([segs[i] for i in idx], array=vals[owner[idx]], cmap=cmap, norm=norm,
                            linewidths=lw, zorder=3,
                            path_effects=[patheffects.Stroke(linewidth=lw + 1.4, foreground="black"),
                                          patheffects.Normal()])
        ax.add_collection(lc)
        cb = fig.colorbar(lc, ax=ax, shrink=0.8)
        cb.set_label("maximum throw (m): colour of each fault trace")
    bad = ~good
    if bad.any():
        ax.add_collection(
            LineCollection([segs[i] for i in np.flatnonzero(~seg_good)], colors="0.4", linestyles="--",
                           linewidths=0.6 * lw, zorder=2)
        )
    if bad.any():
        handles.append(Line2D([], [], color="0.4", ls="--", lw=1.2, label="no usable station"))
    notes = []
    # down-thrown side: a tick from the trace's midpoint towards the dip direction (map convention),
    # black where the dip direction was given, red where it was inferred from the DEM
    if "dip_dir_deg" in faults.columns and n:
        dd = faults["dip_dir_deg"].to_numpy(dtype=float)
        known = np.isfinite(dd)
        if known.sum() > max_ticks:
            rank = np.argsort(-np.nan_to_num(vals, nan=-np.inf), kind="stable")
            top = np.zeros(n, bool)
            top[rank[known[rank]][:max_ticks]] = True
            notes.append("down-thrown ticks: " + shown_note(max_ticks, int(known.sum()), "faults",
                                                             "the largest by maximum throw"))
            known = top
        if known.any():
            xmin, ymin, xmax, ymax = faults.total_bounds
            if has_dem:
                e = _extent(elevation, transform)
                xmin, xmax, ymin, ymax = min(xmin, e[0]), max(xmax, e[1]), min(ymin, e[2]), max(ymax, e[3])
            tick = 0.012 * max(xmax - xmin, ymax - ymin, 1.0)
            mids = shapely.get_coordinates(shapely.line_interpolate_point(geoms[known], 0.5, normalized=True))
            az = np.radians(dd[known])
            ends = mids + tick * np.c_[np.sin(az), np.cos(az)]
            src = (
                faults["dip_dir_source"].to_numpy()[known]
                if "dip_dir_source" in faults.columns
                else np.full(known.sum(), "")
            )
            from_dem = src == "dem"
            for sel, col, lab in (
                (~from_dem, "k", "down-thrown side (given)"),
                (from_dem, "tab:red", "down-thrown side (from the DEM)"),
            ):
                if sel.any():
                    ax.add_collection(
                        LineCollection(
                            np.stack([mids[sel], ends[sel]], axis=1), colors=col, linewidths=min(1.2, lw),
                            zorder=4,
                        )
                    )
                    handles.append(Line2D([], [], color=col, lw=1.2, label=lab))
    if n:
        xmin, ymin, xmax, ymax = faults.total_bounds
        pad = 0.05 * max(xmax - xmin, ymax - ymin, 1.0)
        if has_dem:
            e = _extent(elevation, transform)
            ax.set_xlim(e[0], e[1])
            ax.set_ylim(e[2], e[3])
        else:
            ax.set_xlim(xmin - pad, xmax + pad)
            ax.set_ylim(ymin - pad, ymax + pad)
    ax.set_aspect("equal")
    ax.set_xlabel("easting (m)")
    ax.set_ylabel("northing (m)")
    ax.set_title(title or "Maximum throw along each fault")
    if handles:
        ax.legend(handles=handles, loc="lower left", fontsize=8, framealpha=0.85)
    ax.ticklabel_format(style="plain", useOffset=False)
    for lab in ax.get_xticklabels():
        lab.set_rotation(30)
    if notes:
        fig.text(0.01, 0.005, "; ".join(notes), fontsize=7, ha="left", va="bottom", color="0.25")
    map_furniture(ax, crs_name, loc="lower right")
    fig.tight_layout(rect=(0, 0.03 if notes else 0, 1, 1))
    if n_labels > 0 and good.any() and "fault_id" in faults.columns:
        _label_largest(ax, faults, geoms, vals, n_labels)
    return bounded(fig)


def _label_largest(ax, faults, geoms, vals, n_labels: int) -> None:
    """Label the largest faults at their midpoints (id, and name where given), skipping overlaps."""
    cand = np.flatnonzero(np.isfinite(vals))
    cand = cand[np.argsort(-vals[cand], kind="stable")][: 6 * n_labels]
    mids = shapely.get_coordinates(shapely.line_interpolate_point(geoms[cand], 0.5, normalized=True))
    ids = faults["fault_id"].to_numpy()[cand]
    names = faults["name"].to_numpy()[cand] if "name" in faults.columns else np.full(cand.size, None)
    texts = [
        f"{fid}" + (f" {nm}" if isinstance(nm, str) and nm else "") for fid, nm in zip(ids, names, strict=True)
    ]
    place_labels(ax, mids, texts, priority=vals[cand], max_labels=n_labels, fontsize=7)


def _profile_panel(ax, s, title, smooth=True):
    s = s.sort_values("dist_m")
    d = s["dist_m"].to_numpy()
    ok = (s["status"] == "ok").to_numpy()
    T = s["throw_m"].to_numpy(dtype=float)
    E = s["throw_err_m"].to_numpy(dtype=float)
    if smooth and "throw_smooth_m" in s.columns:
        Ts = s["throw_smooth_m"].to_numpy(dtype=float)
        Es = s["throw_smooth_err_m"].to_numpy(dtype=float)
        ax.fill_between(d, Ts - Es, Ts + Es, color="tab:blue", alpha=0.2, lw=0, label="smoothed ±1σ")
        ax.plot(d, Ts, "-", color="tab:blue", lw=1.5, label="smoothed profile")
    ax.errorbar(
        d[ok],
        T[ok],
        yerr=E[ok],
        fmt="o",
        ms=3,
        color="k",
        ecolor="0.3",
        elinewidth=0.8,
        capsize=0,
        label="station (ok) ±1σ",
    )
    if "outlier" in s.columns:
        out = ok & s["outlier"].to_numpy(dtype=bool)
        if out.any():
            ax.plot(d[out], T[out], "o", ms=7, mfc="none", mec="tab:red", label="outlier (not smoothed)")
    for st, (col, mk) in _STATUS_STYLE.items():
        m = (s["status"] == st).to_numpy()
        if m.any():
            ax.plot(
                d[m],
                np.zeros(m.sum()),
                mk,
                color=col,
                ms=6,
                clip_on=False,
                label=f"station: {st.replace('_', ' ')}",
            )
    ax.axhline(0, color="0.6", lw=0.6)
    ax.set_title(title, fontsize=9)
    ax.set_xlabel("distance along trace (m)")
    ax.set_ylabel("throw (m)")


@glyph_safe
def throw_profiles(faults, stations, *, fault_ids=None, n_largest: int = 6, ncols: int = 2) -> Figure:
    """Along-strike throw profiles of the largest faults (or of ``fault_ids``).

    Each panel shows station throws with 1-sigma error bars, the smoothed
    profile with its error band, and the positions of stations that could
    not be measured, by status. The title says how many faults were left
    out; at most ``n_largest`` panels are drawn (also of ``fault_ids``).

    Returns
    -------
    matplotlib.figure.Figure
    """
    f = faults.set_index("fault_id", drop=False)
    n_largest = max(1, int(n_largest))
    if fault_ids is None:
        order = f["max_throw_m"].astype(float).sort_values(ascending=False, na_position="last")
        fault_ids = [int(i) for i in order.index[:n_largest]]
        by = "the largest by maximum throw"
    else:
        fault_ids = list(fault_ids)[:n_largest]
        by = "the first of those asked for"
    fault_ids = list(fault_ids)
    n = max(1, len(fault_ids))
    nrows, ncols, size = panel_grid(n, max_cols=max(ncols, math.ceil(n / 6)), extra_h=0.9)
    fig = Figure(figsize=size)
    handles = {}
    sub = stations.loc[stations["fault_id"].isin(fault_ids)]
    groups = {k: v for k, v in sub.groupby("fault_id", sort=False)}
    for k, fid in enumerate(fault_ids):
        ax = fig.add_subplot(nrows, ncols, k + 1)
        s = groups.get(fid, sub.iloc[:0])
        r = f.loc[fid]
        name = str(r.get("name", "") or "")
        mt, me = float(r.get("max_throw_m", np.nan)), float(r.get("max_throw_err_m", np.nan))
        title = f"fault {fid}{' ' + name if name else ''}: max throw {mt:.1f} ± {me:.1f} m"
        if "dip_source" in f.columns and r.get("dip_source") == "default":
            title += " (default dip)"
        _profile_panel(ax, s, title)
        for h, lab in zip(*ax.get_legend_handles_labels(), strict=True):
            handles.setdefault(lab, h)
    if not fault_ids:
        fig.add_subplot(1, 1, 1).set_axis_off()
    fig.legend(
        list(handles.values()),
        list(handles.keys()),
        loc="lower center",
        ncol=min(4, max(1, len(handles))),
        fontsize=8,
        frameon=False,
    )
    note = shown_note(len(fault_ids), len(faults), "faults", by)
    fig.suptitle(f"Along-strike throw profiles ({note})", fontsize=11)
    h = fig.get_figheight()
    fig.tight_layout(rect=(0, min(0.3, 0.75 / h), 1, 1 - min(0.1, 0.45 / h)))
    return bounded(fig)


# colours of the segments of one system, cycled
_SEG_COLOURS = ("tab:blue", "tab:orange", "tab:green", "tab:purple", "tab:brown", "tab:pink", "tab:olive",
                "tab:cyan")


@glyph_safe
def system_profiles(faults, stations, zones=None, *, max_systems: int = 6, ncols: int = 2,
                    max_legend_segments: int = 6) -> Figure:
    """Throw along each linked fault system (segments sharing a ``system_id``).

    Stations are placed on the system's strike axis; each segment's smoothed
    throw is drawn in its own colour, their sum in black, and the linkage
    zones (throw minima between segments) as red markers. Only the
    ``max_systems`` largest systems (by summed maximum throw) get a panel
    and the title says how many were left out; a system's segments are one
    collection whatever their number, named in the legend when there are at
    most ``max_legend_segments``.

    Returns
    -------
    matplotlib.figure.Figure
    """
    from faultmap.throw.linkage import _station_lookup, system_profile

    max_systems = max(1, int(max_systems))
    n_systems = 0
    if "system_id" in faults.columns:
        counts = faults["system_id"].value_counts()
        multi = counts[counts.to_numpy() > 1]
        n_systems = len(multi)
        # largest systems first (by summed max throw)
        if "max_throw_m" in faults.columns:
            tot = faults.groupby("system_id")["max_throw_m"].sum().reindex(multi.index).fillna(0.0)
        else:
            tot = multi.astype(float)
        order = np.lexsort((multi.index.to_numpy(), -tot.to_numpy(dtype=float)))
        sys_ids = [int(x) for x in multi.index.to_numpy()[order][:max_systems]]
    else:
        sys_ids = []
    n = max(1, len(sys_ids))
    nrows, ncols, size = panel_grid(n, max_cols=max(ncols, math.ceil(n / 6)), extra_h=0.5)
    fig = Figure(figsize=size)
    if not sys_ids:
        ax = fig.add_subplot(1, 1, 1)
        ax.text(0.5, 0.5, "no linked fault systems", ha="center", va="center", transform=ax.transAxes)
        ax.set_axis_off()
        return bounded(fig)
    st = stations
    if "x" not in st.columns and hasattr(st, "geometry"):
        st = st.assign(x=st.geometry.x, y=st.geometry.y)
    lookup = _station_lookup(st)
    legends = []
    for k, sid in enumerate(sys_ids):
        ax = fig.add_subplot(nrows, ncols, k + 1)
        fs = faults.loc[faults["system_id"] == sid]
        sp = system_profile(fs, st, _lookup=lookup)
        ax_deg = float("nan")
        handles = []
        pts = [np.zeros((0, 2))]
        if sp is not None:
            ax_deg = sp["axis_deg"]
            segs = sp["segments"]
            cols = [_SEG_COLOURS[i % len(_SEG_COLOURS)] for i in range(len(segs))]
            bands = [np.r_[np.c_[a, t - e], np.c_[a, t + e][::-1]] for _, _, a, t, e in segs]
            ax.add_collection(PolyCollection(bands, facecolors=cols, alpha=0.2, linewidths=0))
            lines = [np.c_[a, t] for _, _, a, t, _ in segs]
            ax.add_collection(LineCollection(lines, colors=cols, linewidths=1.2))
            if len(segs) <= max_legend_segments:
                handles += [Line2D([], [], color=c, lw=1.2, label=f"fault {fid}")
                            for c, (fid, *_) in zip(cols, segs, strict=True)]
            else:
                handles.append(Line2D([], [], color=cols[0], lw=1.2,
                                      label=f"{len(segs)} segments (one colour each)"))
            pts += [np.r_[np.c_[a, t], np.c_[a, t - e], np.c_[a, t + e]] for _, _, a, t, e in segs]
            pts.append(np.c_[sp["grid"], sp["total"]])
            ax.plot(sp["grid"], sp["total"], "k-", lw=1.8)
            handles.append(Line2D([], [], color="k", lw=1.8, label="sum of segments"))
            ax.autoscale_view()
        else:
            ax.text(
                0.5, 0.5, "fewer than two measured segments", ha="center", va="center", transform=ax.transAxes
            )
        if zones is not None and len(zones):
            z = zones.loc[zones["system_id"] == sid]
            if len(z):
                ax.plot(z["along_m"], z["throw_min_m"], "v", color="tab:red", ms=8)
                pts.append(np.c_[z["along_m"].to_numpy(float), z["throw_min_m"].to_numpy(float)])
                handles.append(Line2D([], [], color="tab:red", marker="v", ls="", ms=8,
                                      label="linkage zone (throw minimum)"))
        ax.set_title(f"system {sid}: {len(fs)} segments", fontsize=9)
        ax.set_xlabel(f"distance along system strike axis {ax_deg:.0f}° (m)")
        ax.xaxis.set_major_locator(MaxNLocator(nbins=5))
        ax.set_ylabel("throw (m)")
        ax.axhline(0, color="0.6", lw=0.6)
        legends.append((ax, handles, np.vstack(pts)))
    note = shown_note(len(sys_ids), n_systems, "linked systems", "the largest by summed maximum throw")
    fig.suptitle(f"Throw along linked fault systems ({note})", fontsize=11)
    fig.tight_layout(rect=(0, 0, 1, 1 - min(0.1, 0.45 / fig.get_figheight())))
    # each legend where it covers the fewest drawn points (the y range raised above the data if none is clear)
    for ax, handles, pts in legends:
        if handles:
            clear_legend(ax, pts, handles=handles, fontsize=7, framealpha=0.85)
    return bounded(fig)
