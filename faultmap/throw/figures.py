"""Figures of the throw analysis: map of maximum throw, along-strike profiles.

Every function returns a :class:`matplotlib.figure.Figure` built without
pyplot's global state; callers save it (``fig.savefig(path, dpi=170)``).
"""

from __future__ import annotations

import math

import numpy as np
import shapely
from matplotlib.collections import LineCollection
from matplotlib.colors import Normalize
from matplotlib.figure import Figure
from matplotlib.lines import Line2D

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


def throw_map(
    faults,
    *,
    elevation=None,
    transform=None,
    column: str = "max_throw_m",
    title: str | None = None,
    cmap: str = "viridis",
    figsize=(8.0, 7.0),
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

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig = Figure(figsize=figsize)
    ax = fig.add_subplot(1, 1, 1)
    if elevation is not None and transform is not None and np.size(elevation):
        hs = hillshade(elevation, transform)
        ax.imshow(
            hs, extent=_extent(hs, transform), cmap="gray", vmin=0, vmax=1, interpolation="bilinear", zorder=0
        )
    vals = faults[column].to_numpy(dtype=float) if column in faults.columns else np.full(len(faults), np.nan)
    geoms = faults.geometry.to_numpy()
    segs = [shapely.get_coordinates(g) for g in geoms]
    good = np.isfinite(vals)
    vmax = float(np.nanmax(vals)) if good.any() else 1.0
    norm = Normalize(vmin=0.0, vmax=vmax if vmax > 0 else 1.0)
    if good.any():
        lc = LineCollection(
            [segs[i] for i in np.flatnonzero(good)],
            array=vals[good],
            cmap=cmap,
            norm=norm,
            linewidths=2.0,
            zorder=3,
        )
        ax.add_collection(lc)
        cb = fig.colorbar(lc, ax=ax, shrink=0.8)
        cb.set_label("maximum throw (m)")
    if (~good).any():
        ax.add_collection(
            LineCollection(
                [segs[i] for i in np.flatnonzero(~good)],
                colors="0.4",
                linestyles="--",
                linewidths=1.2,
                zorder=2,
            )
        )
    handles = [Line2D([], [], color="tab:green", lw=2, label="fault trace (colour: max throw)")]
    if (~good).any():
        handles.append(Line2D([], [], color="0.4", ls="--", lw=1.2, label="no usable station"))
    # down-thrown side: a tick from the trace's midpoint towards the dip direction (map convention),
    # black where the dip direction was given, red where it was inferred from the DEM
    if "dip_dir_deg" in faults.columns and len(faults):
        dd = faults["dip_dir_deg"].to_numpy(dtype=float)
        known = np.isfinite(dd)
        if known.any():
            xmin, ymin, xmax, ymax = faults.total_bounds
            if elevation is not None and transform is not None and np.size(elevation):
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
                            np.stack([mids[sel], ends[sel]], axis=1), colors=col, linewidths=1.2, zorder=4
                        )
                    )
                    handles.append(Line2D([], [], color=col, lw=1.2, label=lab))
    if len(faults):
        xmin, ymin, xmax, ymax = faults.total_bounds
        pad = 0.05 * max(xmax - xmin, ymax - ymin, 1.0)
        if elevation is not None and transform is not None and np.size(elevation):
            e = _extent(elevation, transform)
            xmin, xmax = min(xmin - pad, e[0]), max(xmax + pad, e[1])
            ymin, ymax = min(ymin - pad, e[2]), max(ymax + pad, e[3])
            ax.set_xlim(e[0], e[1])
            ax.set_ylim(e[2], e[3])
        else:
            ax.set_xlim(xmin - pad, xmax + pad)
            ax.set_ylim(ymin - pad, ymax + pad)
    ax.set_aspect("equal")
    ax.set_xlabel("easting (m)")
    ax.set_ylabel("northing (m)")
    ax.set_title(title or "Maximum throw along each fault")
    ax.legend(handles=handles, loc="lower left", fontsize=8, framealpha=0.85)
    ax.ticklabel_format(style="plain", useOffset=False)
    for lab in ax.get_xticklabels():
        lab.set_rotation(30)
    fig.tight_layout()
    return fig


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


def throw_profiles(faults, stations, *, fault_ids=None, n_largest: int = 6, ncols: int = 2) -> Figure:
    """Along-strike throw profiles of the largest faults (or of ``fault_ids``).

    Each panel shows station throws with 1-sigma error bars, the smoothed
    profile with its error band, and the positions of stations that could
    not be measured, by status.

    Returns
    -------
    matplotlib.figure.Figure
    """
    f = faults.set_index("fault_id", drop=False)
    if fault_ids is None:
        order = f["max_throw_m"].astype(float).sort_values(ascending=False, na_position="last")
        fault_ids = [int(i) for i in order.index[: max(1, n_largest)]]
    fault_ids = list(fault_ids)
    n = max(1, len(fault_ids))
    ncols = min(ncols, n)
    nrows = int(math.ceil(n / ncols))
    fig = Figure(figsize=(5.2 * ncols, 3.2 * nrows))
    handles = {}
    for k, fid in enumerate(fault_ids):
        ax = fig.add_subplot(nrows, ncols, k + 1)
        s = stations.loc[stations["fault_id"] == fid]
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
    fig.suptitle("Along-strike throw profiles", fontsize=11)
    fig.tight_layout(rect=(0, 0.07, 1, 0.96))
    return fig


def system_profiles(faults, stations, zones=None, *, max_systems: int = 6, ncols: int = 2) -> Figure:
    """Throw along each linked fault system (segments sharing a ``system_id``).

    Stations are placed on the system's strike axis; each segment's smoothed
    throw is drawn in its own colour, their sum in black, and the linkage
    zones (throw minima between segments) as red markers.

    Returns
    -------
    matplotlib.figure.Figure
    """
    from faultmap.throw.linkage import _station_lookup, system_profile

    if "system_id" in faults.columns:
        counts = faults["system_id"].value_counts()
        sys_ids = [int(s) for s in counts.index[counts.to_numpy() > 1]]
        # largest systems first (by summed max throw)
        tot = faults.groupby("system_id")["max_throw_m"].sum() if "max_throw_m" in faults.columns else counts
        sys_ids = sorted(sys_ids, key=lambda s: -float(np.nan_to_num(tot.get(s, 0.0))))[:max_systems]
    else:
        sys_ids = []
    n = max(1, len(sys_ids))
    ncols = min(ncols, n)
    nrows = int(math.ceil(n / ncols))
    fig = Figure(figsize=(5.2 * ncols, 3.2 * nrows))
    if not sys_ids:
        ax = fig.add_subplot(1, 1, 1)
        ax.text(0.5, 0.5, "no linked fault systems", ha="center", va="center", transform=ax.transAxes)
        ax.set_axis_off()
        return fig
    st = stations
    if "x" not in st.columns and hasattr(st, "geometry"):
        st = st.assign(x=st.geometry.x, y=st.geometry.y)
    lookup = _station_lookup(st)
    for k, sid in enumerate(sys_ids):
        ax = fig.add_subplot(nrows, ncols, k + 1)
        fs = faults.loc[faults["system_id"] == sid]
        sp = system_profile(fs, st, _lookup=lookup)
        ax_deg = float("nan")
        if sp is not None:
            ax_deg = sp["axis_deg"]
            for fid, _, a, t, e in sp["segments"]:
                ax.fill_between(a, t - e, t + e, alpha=0.2, lw=0)
                ax.plot(a, t, "-o", ms=2.5, lw=1.2, label=f"fault {fid}")
            ax.plot(sp["grid"], sp["total"], "k-", lw=1.8, label="sum of segments")
        else:
            ax.text(
                0.5, 0.5, "fewer than two measured segments", ha="center", va="center", transform=ax.transAxes
            )
        if zones is not None and len(zones):
            z = zones.loc[zones["system_id"] == sid]
            if len(z):
                ax.plot(
                    z["along_m"],
                    z["throw_min_m"],
                    "v",
                    color="tab:red",
                    ms=8,
                    label="linkage zone (throw minimum)",
                )
        ax.set_title(f"system {sid}: {len(fs)} segments", fontsize=9)
        ax.set_xlabel(f"distance along system strike axis {ax_deg:.0f}° (m)")
        ax.set_ylabel("throw (m)")
        ax.axhline(0, color="0.6", lw=0.6)
        ax.legend(fontsize=7, loc="best", framealpha=0.85)
    fig.suptitle("Throw along linked fault systems", fontsize=11)
    fig.tight_layout(rect=(0, 0, 1, 0.96))
    return fig
