"""Figures of the hazard screening (matplotlib, object API, no pyplot state).

Every figure carries the screening caution (:data:`faultmap.hazard.screening.CAUTION`)
in its caption, printed under the axes. Figures stay bounded whatever the
number of faults (:mod:`faultmap.figure_kit`): traces and zones are single
collections, only the largest faults are labelled (labels never overlap) and
the figures say how many were left out.
"""

from __future__ import annotations

import textwrap

import geopandas as gpd
import numpy as np
import shapely
from matplotlib.collections import LineCollection, PatchCollection
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch, PathPatch
from matplotlib.path import Path

from faultmap.figure_kit import (
    bounded,
    glyph_safe,
    length_label,
    line_parts,
    map_furniture,
    place_labels,
    shown_note,
    trace_width,
)
from faultmap.hazard.caution import CAUTION
from faultmap.hazard.magnitudes import MAGNITUDE_KEYS, get_relation

__all__ = ["map_caption", "relations_caption", "hazard_map", "magnitude_by_relation"]

_LABELS = {
    "srl_wc94": "W&C94 SRL, normal",
    "srl_all_wc94": "W&C94 SRL, all slip types",
    "ra_wc94": "W&C94 area, normal",
    "ra_all_wc94": "W&C94 area, all slip types",
    "hb02": "H&B 2002, area",
    "md_wc94": "W&C94 max. displ., normal",
    "md_all_wc94": "W&C94 max. displ., all",
    "ad_wc94": "W&C94 avg. displ., normal",
    "ad_all_wc94": "W&C94 avg. displ., all",
}


def map_caption(zoom: str | None = None) -> str:
    """Caption of :func:`hazard_map` (includes the caution); ``zoom`` describes the zoomed panel."""
    return (
        "Active faults screened for surface rupture. Shaded: rupture zones, wider on the "
        "hanging wall, including the mapping uncertainty of the trace. Labels: fault id and "
        "preferred moment magnitude of a rupture of that segment alone. "
        + (f"{zoom} " if zoom else "") + CAUTION
    )


def relations_caption() -> str:
    """Caption of :func:`magnitude_by_relation` (includes the caution)."""
    return (
        "Moment magnitude of each rupture scenario by empirical relation, with one-sigma "
        "bars: scatter of single earthquakes about each relation (Wells & Coppersmith 1994: "
        "published residual sigma; Hanks & Bakun 2002: adopted, the Wells & Coppersmith "
        "all-slip area sigma). Black bar: preferred estimate. " + CAUTION
    )


def _caption(fig: Figure, text: str, width: int = 120) -> None:
    fig.text(0.01, 0.01, textwrap.fill(text, width), ha="left", va="bottom", fontsize=7, wrap=True)


def _polygons_path(geoms) -> Path | None:
    """One compound path of every ring (exteriors and holes) of the polygons in ``geoms``, vectorised."""
    g = np.asarray(list(geoms), dtype=object)
    if g.size == 0:
        return None
    parts = shapely.get_parts(g)
    parts = parts[(shapely.get_type_id(parts) == 3) & ~shapely.is_empty(parts)]
    if parts.size == 0:
        return None
    rings = shapely.get_rings(parts)
    xy, idx = shapely.get_coordinates(rings, return_index=True)
    if xy.shape[0] == 0:
        return None
    codes = np.full(len(xy), Path.LINETO, dtype=np.uint8)
    first = np.r_[0, np.flatnonzero(np.diff(idx)) + 1]
    last = np.r_[first[1:] - 1, len(xy) - 1]
    codes[first] = Path.MOVETO
    codes[last] = Path.CLOSEPOLY
    return Path(xy, codes)


def _line_segments(geoms: np.ndarray) -> list[np.ndarray]:
    return line_parts(shapely.line_merge(geoms) if len(geoms) else geoms)[0]


def _zoom_window(faults, zones, screened, mags, geoms):
    """Fault id, centre and side (m) of the zoom on the largest screened fault's rupture zone, or None."""
    if not screened.any() or not len(zones) or "fault_id" not in zones.columns:
        return None
    sel = np.flatnonzero(screened)
    length = shapely.length(geoms[sel])
    best = sel[np.lexsort((-length, -np.nan_to_num(mags[sel], nan=-np.inf)))[0]]
    fid = faults["fault_id"].to_numpy()[best]
    zg = zones.geometry.to_numpy()[zones["fault_id"].to_numpy() == fid]
    zg = zg[~shapely.is_empty(zg)] if zg.size else zg
    if zg.size == 0:
        return None
    z = shapely.union_all(zg)
    trace_len = float(shapely.length(geoms[best]))
    # mean zone width: area over the trace length; the window shows it a few times over
    width = float(shapely.area(z)) / max(trace_len, 1.0)
    side = float(np.clip(8.0 * width, 600.0, 4000.0))
    c = shapely.get_coordinates(shapely.line_interpolate_point(geoms[best], 0.5, normalized=True))[0]
    return fid, c, side, width


@glyph_safe
def hazard_map(
    faults: gpd.GeoDataFrame,
    zones: gpd.GeoDataFrame,
    *,
    title: str = "Active-fault screening",
    figsize: tuple[float, float] = (11.5, 8.5),
    dpi: int = 150,
    n_labels: int = 15,
    crs_name: str | None = None,
    zoom: bool = True,
) -> Figure:
    """Map of the active faults, their rupture zones and magnitude labels.

    Parameters
    ----------
    faults : geopandas.GeoDataFrame
        Faults after :func:`faultmap.hazard.screening.screen_hazard` (uses
        ``hazard_screened`` and ``mag_preferred``; all traces are drawn).
    zones : geopandas.GeoDataFrame
        The ``rupture_zones`` layer.
    title : str, optional
    figsize : tuple of float, optional
        Inches.
    dpi : int, optional
    n_labels : int, optional
        Most screened faults labelled, the largest preferred magnitude
        first (then the longest); a label that would overlap another, the
        legend or the frame is skipped. The figure says how many were
        labelled.
    crs_name : str, optional
        Name of the (projected) CRS, written beside the scale bars and the
        grid-north arrows.
    zoom : bool, optional
        Add a second panel, on the right, zoomed on the rupture zone of the
        largest screened fault (the largest preferred magnitude, then the
        longest) at a scale where the zone widths show, with its own scale
        bar; its window is outlined on the map and the caption says so.

    Returns
    -------
    matplotlib.figure.Figure
        Axes in metres of the working CRS; the caption under the axes
        includes the screening caution.
    """
    fig = Figure(figsize=figsize, dpi=dpi)
    ax = fig.add_axes((0.08, 0.2, 0.6, 0.72))
    if "hazard_screened" in faults.columns:
        screened = faults["hazard_screened"].fillna(False).to_numpy(bool)
    elif "active" in faults.columns:
        screened = faults["active"].fillna(False).to_numpy(bool)
    else:
        screened = np.zeros(len(faults), bool)
    geoms = faults.geometry.to_numpy()
    mags = faults["mag_preferred"].to_numpy(float) if "mag_preferred" in faults.columns else np.full(len(faults), np.nan)
    win = _zoom_window(faults, zones, screened, mags, geoms) if zoom else None
    path = _polygons_path(zones.geometry.to_numpy())
    if path is not None:
        # one compound path in one collection; limits are set below (no per-vertex limit update);
        # the zoom window's outline rides in the same collection
        patches = [PathPatch(path, facecolor="#f4a582", edgecolor="#b2182b", linewidth=0.6, alpha=0.55)]
        if win is not None:
            (cx, cy), half = win[1], 0.5 * win[2]
            patches.append(PathPatch(Path([(cx - half, cy - half), (cx + half, cy - half), (cx + half, cy + half),
                                           (cx - half, cy + half), (cx - half, cy - half)], closed=True),
                                     facecolor="none", edgecolor="#1a1a1a", linewidth=1.2))
        ax.add_collection(PatchCollection(patches, match_original=True, zorder=1), autolim=False)
    lw = trace_width(len(faults), widest=1.8)
    other = _line_segments(geoms[~screened])
    if other:
        ax.add_collection(LineCollection(other, colors="0.55", linewidths=min(0.8, lw), zorder=2))
    act = _line_segments(geoms[screened])
    if act:
        ax.add_collection(LineCollection(act, colors="#b2182b", linewidths=lw, zorder=3))
    ids = faults["fault_id"].to_numpy()
    b = np.asarray(faults.total_bounds, float)
    if len(zones):
        zb = np.asarray(zones.total_bounds, float)
        b = np.array([min(b[0], zb[0]), min(b[1], zb[1]), max(b[2], zb[2]), max(b[3], zb[3])])
    if np.all(np.isfinite(b)):
        pad = 0.05 * max(b[2] - b[0], b[3] - b[1], 1.0)
        ax.set_xlim(b[0] - pad, b[2] + pad)
        ax.set_ylim(b[1] - pad, b[3] + pad)
    ax.set_aspect("equal", adjustable="box")
    ax.set_xlabel("Easting (m)", fontsize=10)
    ax.set_ylabel("Northing (m)", fontsize=10)
    ax.ticklabel_format(style="plain", useOffset=False)
    ax.tick_params(labelsize=8)
    ax.set_title(title, fontsize=12, pad=16)
    ax.legend(
        handles=[
            Line2D([], [], color="#b2182b", lw=1.8, label="screened (active) fault"),
            Line2D([], [], color="0.55", lw=0.8, label="other fault"),
            Patch(facecolor="#f4a582", edgecolor="#b2182b", alpha=0.55, label="surface-rupture zone"),
        ],
        loc="upper right", fontsize=8, framealpha=0.9,
    )
    map_furniture(ax, crs_name, loc="lower right")
    zoom_note = None
    if win is not None:
        zoom_note = _zoom_panel(fig, faults, zones, screened, geoms, path, win, crs_name, lw)
    n_scr = int(screened.sum())
    placed = []
    if n_scr and n_labels > 0:
        sel = np.flatnonzero(screened)
        length = shapely.length(geoms[sel])
        # the largest magnitude first, then the longest; only a few candidates are ever measured
        order = np.lexsort((-length, -np.nan_to_num(mags[sel], nan=-np.inf)))[: 6 * n_labels]
        sel = sel[order]
        xy = shapely.get_coordinates(shapely.line_interpolate_point(geoms[sel], 0.5, normalized=True))
        txt = [f"F{fid}" + (f"  M{m:.1f}" if np.isfinite(m) else "") for fid, m in zip(ids[sel], mags[sel], strict=True)]
        placed = place_labels(ax, xy, txt, priority=-np.arange(sel.size, dtype=float), max_labels=n_labels, fontsize=8)
    if n_scr:
        ax.text(0.5, 1.01, "labelled: " + shown_note(len(placed), n_scr, "screened faults",
                                                      "the largest magnitudes, without overlaps").replace(" shown", ""),
                transform=ax.transAxes, ha="center", va="bottom", fontsize=8, color="0.3")
    _caption(fig, map_caption(zoom_note), width=165)
    return bounded(fig)


def _zoom_panel(fig, faults, zones, screened, geoms, path, win, crs_name, lw) -> str:
    """Draw the zoom on one fault's rupture zone in a second axes; return the caption's sentence."""
    fid, (cx, cy), side, width = win
    half = 0.5 * side
    # beside the map as drawn (its equal aspect may leave it narrower than its slot), square
    ax = fig.axes[0]
    ax.apply_aspect()
    pos = ax.get_position()
    fw, fh = fig.get_size_inches()
    w = min(0.3, 0.98 - (pos.x1 + 0.04))
    h = w * fw / fh
    zx = fig.add_axes((pos.x1 + 0.04, pos.y0 + 0.5 * (pos.height - h), w, h))
    box = shapely.box(cx - half, cy - half, cx + half, cy + half)
    near = shapely.intersects(geoms, box)
    if path is not None:
        zx.add_collection(PatchCollection([PathPatch(path)], facecolor="#f4a582", edgecolor="#b2182b", linewidth=0.8,
                                          alpha=0.55, zorder=1), autolim=False)
    for sel, colour, w in ((near & ~screened, "0.55", 1.0), (near & screened, "#b2182b", 2.0)):
        segs = _line_segments(geoms[sel])
        if segs:
            zx.add_collection(LineCollection(segs, colors=colour, linewidths=w, zorder=3))
    zx.set_xlim(cx - half, cx + half)
    zx.set_ylim(cy - half, cy + half)
    zx.set_aspect("equal", adjustable="box")
    zx.set_xticks([])
    zx.set_yticks([])
    for sp in zx.spines.values():
        sp.set(color="#1a1a1a", lw=1.2)
    zx.set_title(f"Zoom on F{fid}: rupture zone\n(mean width {length_label(round(width))}, to scale)",
                 fontsize=9)
    # the furniture in a corner the fault does not cross: lower right for a trace striking NE-SW
    xy = shapely.get_coordinates(geoms[faults["fault_id"].to_numpy() == fid][0])
    d = xy[-1] - xy[0]
    map_furniture(zx, crs_name, loc="lower right" if d[0] * d[1] >= 0 else "lower left", fraction=0.3, fontsize=6.5)
    return (f"Right panel: the rupture zone of F{fid} (the largest screened fault) zoomed "
            f"{side / 1000.0:.1f} km across, so the zone widths are visible; its window is outlined on the map.")


@glyph_safe
def magnitude_by_relation(
    scenarios: gpd.GeoDataFrame,
    *,
    max_scenarios: int = 25,
    figsize: tuple[float, float] = (10.0, 6.5),
    dpi: int = 150,
) -> Figure:
    """Magnitude of each rupture scenario by relation, with one-sigma bars.

    Parameters
    ----------
    scenarios : geopandas.GeoDataFrame or pandas.DataFrame
        The ``rupture_scenarios`` layer.
    max_scenarios : int, optional
        Plot at most this many scenarios (the largest by ``mag_preferred``);
        the figure says how many were left out.
    figsize : tuple of float, optional
    dpi : int, optional

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig = Figure(figsize=figsize, dpi=dpi)
    ax = fig.add_axes((0.08, 0.3, 0.6, 0.62))
    sc = scenarios
    n_total = len(sc)
    if len(sc) > max_scenarios:
        sc = sc.sort_values("mag_preferred", ascending=False).head(max_scenarios)
    sc = sc.sort_values(["n_faults", "length_km"]) if len(sc) else sc
    x = np.arange(len(sc))
    keys = [k for k in MAGNITUDE_KEYS if f"mag_{k}" in sc.columns and np.isfinite(sc[f"mag_{k}"].to_numpy(float)).any()]
    width = 0.8 / max(len(keys), 1)
    markers = "osD^v<>ph"
    for j, k in enumerate(keys):
        m = sc[f"mag_{k}"].to_numpy(float)
        s = sc[f"mag_{k}_sigma"].to_numpy(float)
        ok = np.isfinite(m)
        rel = get_relation(k)
        ax.errorbar(
            x[ok] - 0.4 + width * (j + 0.5), m[ok], yerr=s[ok], fmt=markers[j % len(markers)], ms=5,
            capsize=2, lw=1, label=_LABELS.get(k, k) + ("\n(bar: adopted sigma)" if rel.sigma_kind == "adopted" else ""),
        )
    if len(sc):
        pref = sc["mag_preferred"].to_numpy(float)
        ax.hlines(pref, x - 0.45, x + 0.45, colors="k", lw=2.2, label="preferred", zorder=5)
        labels = [
            (f"{kind} {fids}" if len(fids) <= 14 else f"{kind} {fids[:12]}..")
            for kind, fids in zip(sc["kind"], sc["fault_ids"], strict=True)
        ]
        ax.set_xticks(x, labels, rotation=45, ha="right", fontsize=8)
    ax.set_xlim(-0.6, max(len(sc), 1) - 0.4)
    ax.set_xlabel("Rupture scenario (kind, fault ids)", fontsize=10)
    ax.set_ylabel("Moment magnitude Mw", fontsize=10)
    ax.grid(axis="y", color="0.9")
    ax.set_title("Magnitude by empirical relation", fontsize=12, pad=16)
    ax.text(0.5, 1.01, shown_note(len(sc), n_total, "rupture scenarios", "the largest preferred magnitudes"),
            transform=ax.transAxes, ha="center", va="bottom", fontsize=8, color="0.3")
    ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=8, framealpha=0.9)
    _caption(fig, relations_caption(), width=140)
    return bounded(fig)
