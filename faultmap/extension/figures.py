"""Figures for extension and strain: a map of extension directions and per-transect extension.

Functions return :class:`matplotlib.figure.Figure` objects built without
pyplot global state; callers save them (150-200 dpi PNG). They stay bounded
whatever the number of faults, cells or transects (:mod:`faultmap.figure_kit`):
each kind of line is one collection.
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import shapely
from matplotlib.collections import LineCollection
from matplotlib.figure import Figure
from matplotlib.lines import Line2D

from faultmap.errors import ParameterError
from faultmap.figure_kit import bounded, glyph_safe, line_parts, map_furniture, trace_width

__all__ = ["extension_map_figure", "transect_extension_figure"]

_FONT = 10


@glyph_safe
def extension_map_figure(
    cells: gpd.GeoDataFrame,
    faults: gpd.GeoDataFrame | None = None,
    *,
    hillshade: np.ndarray | None = None,
    hillshade_extent: tuple[float, float, float, float] | None = None,
    transects: gpd.GeoDataFrame | None = None,
    bar_fraction: float = 0.9,
    title: str | None = None,
    crs_name: str | None = None,
) -> Figure:
    """Map of extension directions: bars along the e1 axis scaled by e1.

    Parameters
    ----------
    cells : geopandas.GeoDataFrame
        Strain cells or polygons with ``e1`` and ``e1_azimuth_deg`` (from
        :func:`faultmap.extension.kostrov_sums.kostrov_grid` or ``kostrov_polygons``).
    faults : geopandas.GeoDataFrame, optional
        Fault traces drawn as thin lines.
    hillshade : numpy.ndarray, optional
        2-D shaded-relief array (0-1 or 0-255) drawn underneath in grey.
    hillshade_extent : (left, right, bottom, top), optional
        Map extent of the hillshade array, m (required with ``hillshade``).
    transects : geopandas.GeoDataFrame, optional
        Transect lines drawn dashed.
    bar_fraction : float
        Length of the longest bar as a fraction of the typical cell width.
    title : str, optional
        Figure title.
    crs_name : str, optional
        Name of the (projected) CRS, written beside the scale bar and the
        grid-north arrow.

    Returns
    -------
    matplotlib.figure.Figure
        One map axes with a colour bar for e1; bars are centred on the cell
        centroids, oriented along the e1 azimuth and proportional to e1.
        Cells with e1 <= 0 or an undefined axis are not drawn.
    """
    fig = Figure(figsize=(7.5, 6.5), dpi=150, constrained_layout=True)
    ax = fig.add_subplot(1, 1, 1)
    if hillshade is not None:
        if hillshade_extent is None:
            raise ParameterError("hillshade_extent (left, right, bottom, top) is required with hillshade.")
        ax.imshow(hillshade, cmap="gray", extent=hillshade_extent, origin="upper", interpolation="nearest", zorder=0)
    handles = []
    if faults is not None and len(faults):
        segs, _ = line_parts(faults.geometry.values)
        lw = trace_width(len(faults), widest=0.8, narrowest=0.25)
        ax.add_collection(LineCollection(segs, colors="black", linewidths=lw, zorder=2))
        handles.append(Line2D([], [], color="black", lw=0.8, label="fault trace"))
    if transects is not None and len(transects):
        segs, _ = line_parts(transects.geometry.values)
        ax.add_collection(LineCollection(segs, colors="tab:blue", linewidths=0.8, linestyles="dashed", zorder=2))
        handles.append(Line2D([], [], color="tab:blue", lw=0.8, ls="--", label="transect"))

    geoms = np.asarray(cells.geometry.values, dtype=object)
    e1 = cells["e1"].to_numpy(dtype=float)
    az = cells["e1_azimuth_deg"].to_numpy(dtype=float)
    draw = np.isfinite(e1) & (e1 > 0) & np.isfinite(az)
    if len(geoms):
        width = float(np.sqrt(np.median(shapely.area(geoms))))
        c = shapely.get_coordinates(shapely.centroid(geoms))
    else:
        width, c = 1.0, np.zeros((0, 2))
    e1max = float(e1[draw].max()) if draw.any() else 0.0
    if draw.any():
        half = 0.5 * bar_fraction * width * e1[draw] / e1max
        a = np.radians(az[draw])
        d = np.stack([np.sin(a), np.cos(a)], axis=1) * half[:, None]
        segs = np.stack([c[draw] - d, c[draw] + d], axis=1)
        lc = LineCollection(segs, cmap="plasma", linewidths=3.0, capstyle="butt", zorder=3)
        lc.set_array(e1[draw])
        ax.add_collection(lc)
        cb = fig.colorbar(lc, ax=ax, shrink=0.8)
        cb.set_label("e1, most extensional horizontal strain (-)", fontsize=_FONT)
        handles.append(
            Line2D([], [], color="0.3", lw=3.0,
                   label=f"e1 axis, length proportional to e1\n(longest bar = {e1max:.2e})")
        )
    else:
        ax.text(0.5, 0.5, "no extension measured", transform=ax.transAxes, ha="center", va="center", fontsize=_FONT)
    if "n_default_dip" in cells.columns and (cells["n_default_dip"].to_numpy() > 0).any():
        ax.text(0.02, 0.975, "some faults use the default dip (dip_source = default)", transform=ax.transAxes,
                fontsize=_FONT - 2, va="top", ha="left", color="0.2",
                bbox={"facecolor": "white", "alpha": 0.7, "edgecolor": "none", "pad": 2.0})
    bounds = []
    for g in (cells, faults, transects):
        if g is not None and len(g):
            bounds.append(g.total_bounds)
    if hillshade is not None:
        left, right, bottom, top = hillshade_extent
        bounds.append(np.array([left, bottom, right, top]))
    if bounds:
        b = np.vstack(bounds)
        xmin, ymin, xmax, ymax = b[:, 0].min(), b[:, 1].min(), b[:, 2].max(), b[:, 3].max()
        pad = 0.02 * max(xmax - xmin, ymax - ymin, 1.0)
        ax.set_xlim(xmin - pad, xmax + pad)
        ax.set_ylim(ymin - pad, ymax + pad)
    ax.set_aspect("equal")
    ax.set_xlabel("Easting (m)", fontsize=_FONT)
    ax.set_ylabel("Northing (m)", fontsize=_FONT)
    ax.ticklabel_format(style="plain", useOffset=False)
    ax.tick_params(labelsize=_FONT - 1)
    if handles:
        ax.legend(handles=handles, loc="upper center", bbox_to_anchor=(0.5, -0.1), ncol=min(3, len(handles)),
                  fontsize=_FONT - 1, frameon=False)
    ax.set_title(title or "Horizontal extension directions (Kostrov summation)", fontsize=_FONT + 1)
    map_furniture(ax, crs_name, loc="lower right")
    return bounded(fig)


@glyph_safe
def transect_extension_figure(transects: gpd.GeoDataFrame, *, title: str | None = None) -> Figure:
    """Extension per transect with its Monte Carlo 16-84 % range.

    Parameters
    ----------
    transects : geopandas.GeoDataFrame or pandas.DataFrame
        Output of :func:`faultmap.extension.transect_measure.measure_transects` (``extension``,
        ``extension_p16``, ``extension_p84``; optional
        ``extension_corrected``, ``ends_inside``, ``position_m``).
    title : str, optional
        Figure title.

    Returns
    -------
    matplotlib.figure.Figure
        Extension in percent against the along-strike position (km) when
        ``position_m`` exists, else against the transect id. Transects that
        end inside the fault population are drawn with open symbols; the
        sub-resolution corrected extension, when present, as separate
        diamonds (never merged with the measured value).
    """
    ec = None
    if "extension_corrected" in transects.columns:
        ec = 100.0 * transects["extension_corrected"].to_numpy(dtype=float)
        if not np.isfinite(ec).any():
            ec = None
    # the measured values get their own panel: an extrapolated correction can be an order of
    # magnitude larger and must never squash (or be read as) the measurement
    fig = Figure(figsize=(11.0 if ec is not None else 7.5, 4.5), dpi=150, constrained_layout=True)
    ax = fig.add_subplot(1, 2 if ec is not None else 1, 1)
    if "position_m" in transects.columns and np.isfinite(transects["position_m"].to_numpy(dtype=float)).all():
        x = transects["position_m"].to_numpy(dtype=float) / 1000.0
        xlabel = "Position along strike (km)"
        integer_x = False
    else:
        x = transects["transect_id"].to_numpy(dtype=float)
        xlabel = "Transect id"
        integer_x = True
    e = 100.0 * transects["extension"].to_numpy(dtype=float)
    lo = 100.0 * transects.get("extension_p16", transects["extension"]).to_numpy(dtype=float)
    hi = 100.0 * transects.get("extension_p84", transects["extension"]).to_numpy(dtype=float)
    yerr = np.vstack([np.clip(e - lo, 0, None), np.clip(hi - e, 0, None)])
    yerr = np.nan_to_num(yerr, nan=0.0)
    inside = transects["ends_inside"].to_numpy(dtype=bool) if "ends_inside" in transects.columns else np.zeros(len(x), bool)
    closed = ~inside
    if closed.any():
        ax.errorbar(x[closed], e[closed], yerr=yerr[:, closed], fmt="o", color="tab:red", ecolor="0.3",
                    capsize=3, label="measured e = (L1 - L0)/L0, 16-84 % range")
    if inside.any():
        ax.errorbar(x[inside], e[inside], yerr=yerr[:, inside], fmt="o", mfc="white", color="tab:red",
                    ecolor="0.5", capsize=3, label="measured, transect ends inside the faults")
    axes = [ax]
    if ec is not None:
        ax2 = fig.add_subplot(1, 2, 2, sharex=ax)
        ax2.plot(x, e, "o", color="tab:red", label="measured")
        ax2.plot(x, ec, "D", color="tab:purple", mfc="none",
                 label="with faults below detection\n(Marrett & Allmendinger 1992 extrapolation)")
        if np.nanmax(ec) > 0 and np.nanmax(ec) / max(np.nanmin(np.where(e > 0, e, np.nan)), 1e-9) > 20:
            ax2.set_yscale("log")
        ax2.set_title("Estimate including faults below detection", fontsize=_FONT)
        axes.append(ax2)
    for a in axes:
        a.axhline(0.0, color="0.6", lw=0.8)
        a.set_xlabel(xlabel, fontsize=_FONT)
        a.set_ylabel("Extension (%)", fontsize=_FONT)
        a.tick_params(labelsize=_FONT - 1)
        a.grid(alpha=0.3)
        if integer_x:
            from matplotlib.ticker import MaxNLocator

            a.xaxis.set_major_locator(MaxNLocator(integer=True))
        if len(x):
            a.legend(fontsize=_FONT - 1, loc="best")
    ax.set_title(title or "Extension along transects (heave summation)", fontsize=_FONT + 1)
    return bounded(fig)
