"""Figures of rift geometry, width, swath profiles and predicted subsidence.

Functions return :class:`matplotlib.figure.Figure` objects built without
pyplot global state; callers save them (``fig.savefig(path, dpi=170)``).
They stay bounded whatever the number of faults or sections
(:mod:`faultmap.figure_kit`): traces are one collection, the map is in metres
like the other maps, and the swath figure says how many sections it leaves out.
"""

from __future__ import annotations

from collections.abc import Sequence

import geopandas as gpd
import numpy as np
import pandas as pd
from matplotlib.collections import LineCollection
from matplotlib.figure import Figure
from matplotlib.lines import Line2D

from faultmap.figure_kit import (
    bounded,
    glyph_safe,
    line_parts,
    map_furniture,
    panel_grid,
    shown_note,
    trace_width,
)

__all__ = ["rift_map_figure", "width_along_axis_figure", "swath_figure", "subsidence_figure"]

_CLASS_COLOURS = {"narrow": "#1f4e9c", "wide": "#c25b00", "indeterminate": "#7a7a7a"}


def _lines(geoms: Sequence, scale: float = 1.0) -> list[np.ndarray]:
    return line_parts(np.asarray(list(geoms), dtype=object), scale=scale)[0]


@glyph_safe
def rift_map_figure(
    faults: gpd.GeoDataFrame,
    axis: gpd.GeoDataFrame,
    sections: gpd.GeoDataFrame,
    *,
    summary: pd.DataFrame | None = None,
    figsize: tuple[float, float] = (8.0, 8.0),
    crs_name: str | None = None,
) -> Figure:
    """Map of the faults, the rift axis, the sections and the measured widths.

    Parameters
    ----------
    faults : GeoDataFrame
        Fault traces (working CRS, m); line width grows with ``max_throw_m``.
    axis : GeoDataFrame
        ``rift_axis`` layer.
    sections : GeoDataFrame
        ``rift_sections`` layer; the part between the outermost counted
        faults (``across_min_m`` to ``across_max_m``) is drawn thick and
        coloured by ``class``.
    summary : DataFrame, optional
        ``rift_summary``: its class and median width go in the title.
    figsize : tuple of float
        Inches.
    crs_name : str, optional
        Name of the (projected) CRS, written beside the scale bar and the
        grid-north arrow.

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig = Figure(figsize=figsize, dpi=170)
    ax = fig.add_subplot(1, 1, 1)
    thr = np.asarray(faults["max_throw_m"], dtype=float) if "max_throw_m" in faults else np.full(len(faults), np.nan)
    tmax = np.nanmax(thr) if np.any(np.isfinite(thr)) else 1.0
    # width grows with throw; thinner overall as traces crowd
    top = trace_width(len(faults), widest=2.5, narrowest=0.6)
    lw = np.where(np.isfinite(thr), top * (0.2 + 0.8 * thr / tmax), 0.32 * top)
    segs, owner = line_parts(faults.geometry.values)
    ax.add_collection(LineCollection(segs, colors="0.25", linewidths=lw[owner], zorder=2))
    secs = _lines(sections.geometry.values)
    ax.add_collection(LineCollection(secs, colors="0.7", linewidths=0.6, linestyles=":", zorder=1))
    # measured widths
    cx = sections["centre_x_m"].to_numpy(float)
    cy = sections["centre_y_m"].to_numpy(float)
    azr = np.radians(sections["azimuth_deg"].to_numpy(float))
    nx, ny = np.sin(azr), np.cos(azr)
    a0 = sections["across_min_m"].to_numpy(float)
    a1 = sections["across_max_m"].to_numpy(float)
    ok = np.isfinite(a0) & np.isfinite(a1)
    cls = sections["class"].astype(str).to_numpy()
    for c, col in _CLASS_COLOURS.items():
        m = ok & (cls == c)
        if m.any():
            seg = np.stack(
                [np.column_stack([cx[m] + a0[m] * nx[m], cy[m] + a0[m] * ny[m]]),
                 np.column_stack([cx[m] + a1[m] * nx[m], cy[m] + a1[m] * ny[m]])],
                axis=1,
            )
            ax.add_collection(LineCollection(seg, colors=col, linewidths=3.0, alpha=0.55, zorder=3))
    ax.add_collection(LineCollection(_lines(axis.geometry.values), colors="#b00020", linewidths=2.2, zorder=4))
    handles = [
        Line2D([], [], color="0.25", lw=1.5, label="fault trace (width ~ max throw)"),
        Line2D([], [], color="#b00020", lw=2.2, label="rift axis"),
        Line2D([], [], color="0.7", lw=0.8, ls=":", label="section"),
    ] + [
        Line2D([], [], color=col, lw=3, alpha=0.55, label=f"width between outermost faults: {c}")
        for c, col in _CLASS_COLOURS.items()
        if np.any(ok & (cls == c))
    ]
    ax.legend(handles=handles, loc="upper right", fontsize=8, framealpha=0.9)
    ax.autoscale_view()
    ax.set_aspect("equal", adjustable="datalim")
    ax.set_xlabel("Easting (m)")
    ax.set_ylabel("Northing (m)")
    ax.ticklabel_format(style="plain", useOffset=False)
    for lab in ax.get_xticklabels():
        lab.set_rotation(30)
    title = "Rift axis, sections and widths"
    if summary is not None and len(summary):
        s = summary.iloc[0]
        title += f"\nclass: {s['class']}, median width {s['median_width_km']:.0f} km, score {s['score']:+.2f}"
    ax.set_title(title, fontsize=11)
    ax.grid(True, lw=0.3, alpha=0.5)
    fig.tight_layout()
    ax.apply_aspect()  # the x range as drawn sets the scale bar's length
    map_furniture(ax, crs_name, loc="lower right")
    return bounded(fig)


@glyph_safe
def width_along_axis_figure(
    sections: pd.DataFrame,
    *,
    summary: pd.DataFrame | None = None,
    topography: pd.DataFrame | None = None,
    narrow_max_km: float = 100.0,
    wide_min_km: float = 175.0,
    figsize: tuple[float, float] = (8.5, 4.8),
) -> Figure:
    """Rift width along the axis, with the classification thresholds.

    Parameters
    ----------
    sections : DataFrame
        ``rift_sections`` (``along_m``, ``width_km``, ``width_heave90_km``).
    summary : DataFrame, optional
        ``rift_summary`` (its thresholds and median width are drawn).
    topography : DataFrame, optional
        Swath features (``section_id``, ``topo_width_km``) to overlay.
    narrow_max_km, wide_min_km : float
        Thresholds drawn when ``summary`` is not given.
    figsize : tuple of float
        Inches.

    Returns
    -------
    matplotlib.figure.Figure
    """
    if summary is not None and len(summary):
        narrow_max_km = float(summary["narrow_max_km"].iloc[0])
        wide_min_km = float(summary["wide_min_km"].iloc[0])
    fig = Figure(figsize=figsize, dpi=170)
    ax = fig.add_subplot(1, 1, 1)
    s = np.asarray(sections["along_m"], dtype=float) / 1000.0
    ax.plot(s, sections["width_km"], "o-", color="#1f4e9c", label="between outermost faults above throw threshold")
    ax.plot(s, sections["width_heave90_km"], "s--", color="#2a7d2a", ms=4, label="central 90% of cumulative heave")
    if topography is not None and len(topography):
        tw = sections[["section_id", "along_m"]].merge(topography[["section_id", "topo_width_km"]], on="section_id", how="left")
        ax.plot(tw["along_m"] / 1000.0, tw["topo_width_km"], "^:", color="#8a4f9e", ms=4, label="topographic, crest to crest")
    ax.axhline(narrow_max_km, color="0.3", lw=1, ls="--")
    ax.axhline(wide_min_km, color="0.3", lw=1, ls="-.")
    x_text = float(np.nanmin(s)) if len(s) else 0.0
    ax.text(x_text, narrow_max_km, f" narrow limit {narrow_max_km:g} km", va="bottom", fontsize=8, color="0.3")
    ax.text(x_text, wide_min_km, f" wide threshold {wide_min_km:g} km", va="bottom", fontsize=8, color="0.3")
    if summary is not None and len(summary):
        med = float(summary["median_width_km"].iloc[0])
        if np.isfinite(med):
            ax.axhline(med, color="#1f4e9c", lw=0.8, alpha=0.6)
        ax.set_title(f"Rift width along the axis (median {med:.0f} km: {summary['class'].iloc[0]})", fontsize=11)
    else:
        ax.set_title("Rift width along the axis", fontsize=11)
    ax.set_xlabel("Distance along the rift axis (km)")
    ax.set_ylabel("Width (km)")
    ax.set_ylim(bottom=0)
    ax.grid(True, lw=0.3, alpha=0.5)
    ax.legend(fontsize=8, loc="best")
    fig.tight_layout()
    return bounded(fig)


@glyph_safe
def swath_figure(
    profiles: pd.DataFrame,
    *,
    features: pd.DataFrame | None = None,
    sections: pd.DataFrame | None = None,
    section_ids: Sequence[int] | None = None,
    max_panels: int = 6,
    figsize: tuple[float, float] | None = None,
) -> Figure:
    """Swath profiles (min, mean, max elevation) across the rift axis.

    Parameters
    ----------
    profiles : DataFrame
        From :func:`faultmap.rift.swath.swath_profiles`.
    features : DataFrame, optional
        From :func:`faultmap.rift.swath.swath_features`: crests and floor marked.
    sections : DataFrame, optional
        ``rift_sections``: the outermost counted faults are marked.
    section_ids : sequence of int, optional
        Sections to draw (at most ``max_panels`` of them); default up to
        ``max_panels`` evenly spread along the axis.
    max_panels : int
        Most panels drawn; the title says how many sections were left out.
    figsize : tuple of float, optional
        Inches; default grows with the number of panels.

    Returns
    -------
    matplotlib.figure.Figure
    """
    ids = np.asarray(sorted(profiles["section_id"].unique()))
    n_all = len(ids)
    max_panels = max(1, int(max_panels))
    if section_ids is None:
        if len(ids) > max_panels:
            ids = ids[np.unique(np.linspace(0, len(ids) - 1, max_panels).round().astype(int))]
        by = "evenly spaced along the axis"
    else:
        ids = np.asarray(list(section_ids))[:max_panels]
        by = "the first of those asked for"
    n = max(len(ids), 1)
    fig = Figure(figsize=figsize or panel_grid(n, max_cols=1, panel_w=8.5, panel_h=2.3, extra_h=0.6)[2], dpi=170)
    axes = [fig.add_subplot(n, 1, i + 1) for i in range(n)]
    for ax, sid in zip(axes, ids, strict=False):
        p = profiles[profiles["section_id"] == sid].sort_values("across_m")
        a = p["across_m"].to_numpy(float) / 1000.0
        ax.fill_between(a, p["z_min_m"], p["z_max_m"], color="#9ecae1", alpha=0.6, label="min-max envelope")
        ax.plot(a, p["z_mean_m"], color="#08519c", lw=1.3, label="mean")
        if features is not None:
            f = features[features["section_id"] == sid]
            if len(f):
                f = f.iloc[0]
                ax.plot(
                    [f["crest_left_across_m"] / 1000.0, f["crest_right_across_m"] / 1000.0],
                    [f["crest_left_z_m"], f["crest_right_z_m"]],
                    "v", color="#c25b00", ms=7, label="flank crests",
                )
                ax.plot(f["floor_across_m"] / 1000.0, f["floor_z_m"], "^", color="#2a7d2a", ms=7, label="valley floor")
                if np.isfinite(f["topo_width_km"]):
                    ax.text(0.01, 0.04, f"crest to crest {f['topo_width_km']:.1f} km, relief {f['relief_m']:.0f} m",
                            transform=ax.transAxes, va="bottom", fontsize=8,
                            bbox=dict(facecolor="white", edgecolor="none", alpha=0.7, pad=1.5))
        if sections is not None and "across_min_m" in sections:
            s = sections[sections["section_id"] == sid]
            if len(s) and np.isfinite(s["across_min_m"].iloc[0]):
                for v in (s["across_min_m"].iloc[0], s["across_max_m"].iloc[0]):
                    ax.axvline(v / 1000.0, color="0.35", lw=0.8, ls="--")
                ax.plot([], [], color="0.35", lw=0.8, ls="--", label="outermost faults")
        ax.axvline(0.0, color="#b00020", lw=0.8, alpha=0.7)
        ax.margins(y=0.12)
        ax.set_ylabel("Elevation (m)")
        ax.set_title(f"Section {sid}", fontsize=9, loc="left")
        ax.grid(True, lw=0.3, alpha=0.5)
    axes[-1].set_xlabel("Distance across the rift axis (km, positive to the right of the axis direction)")
    handles, labels = [], []
    for ax in axes:
        for h, lab in zip(*ax.get_legend_handles_labels(), strict=True):
            if lab not in labels:
                handles.append(h)
                labels.append(lab)
    h = fig.get_figheight()
    note = shown_note(len(ids), n_all, "sections", by)
    fig.suptitle(f"Swath profiles across the rift axis ({note})", fontsize=11, y=1.0 - 0.08 / h, va="top")
    fig.legend(handles, labels, loc="upper center", ncol=min(len(labels), 5), fontsize=8,
               bbox_to_anchor=(0.5, 1.0 - 0.38 / h), frameon=False)
    fig.tight_layout(rect=(0, 0, 1, 1.0 - 0.55 / h))
    return bounded(fig)


@glyph_safe
def subsidence_figure(table: pd.DataFrame, *, figsize: tuple[float, float] = (7.5, 5.0)) -> Figure:
    """Predicted subsidence versus time after rifting (McKenzie 1978).

    Parameters
    ----------
    table : DataFrame
        From :func:`faultmap.rift.subsidence.subsidence_curve` (one or several
        ``beta`` values).
    figsize : tuple of float
        Inches.

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig = Figure(figsize=figsize, dpi=170)
    ax = fig.add_subplot(1, 1, 1)
    colours = ["#1f4e9c", "#c25b00", "#2a7d2a", "#8a4f9e", "#b00020"]
    for i, (beta, t) in enumerate(table.groupby("beta", sort=True)):
        c = colours[i % len(colours)]
        if "crust_thickness_m" in t:
            ax.plot([], [], " ", label=f"crust {float(t['crust_thickness_m'].iloc[0]) / 1000.0:.0f} km before rifting")
        ax.plot(t["time_myr"], t["total_m"], color=c, lw=1.8, label=f"total, \u03b2 = {beta:.3g}")
        ax.plot(t["time_myr"], t["thermal_m"], color=c, lw=1.0, ls="--", label=f"thermal only, \u03b2 = {beta:.3g}")
        ax.axhline(float(t["initial_m"].iloc[0]), color=c, lw=0.8, ls=":", label=f"initial (syn-rift), \u03b2 = {beta:.3g}")
    ax.invert_yaxis()
    ax.set_xlabel("Time since the end of rifting (Myr)")
    ax.set_ylabel("Water-loaded subsidence (m, down)")
    ax.set_title("Subsidence predicted from stretching (McKenzie 1978)", fontsize=11)
    ax.text(0.99, 0.02, "water-loaded; sediment loading not modelled", transform=ax.transAxes,
            ha="right", va="bottom", fontsize=8, color="0.3")
    ax.grid(True, lw=0.3, alpha=0.5)
    ax.legend(fontsize=8, loc="upper right")
    fig.tight_layout()
    return bounded(fig)
