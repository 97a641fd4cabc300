"""Figures of the hazard screening (matplotlib, object API, no pyplot state).

Every figure carries the screening caution (:data:`faultmap.hazard.screening.CAUTION`)
in its caption, printed under the axes.
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


def map_caption() -> str:
    """Caption of :func:`hazard_map` (includes the caution)."""
    return (
        "Active faults screened for surface rupture. Shaded: rupture zones, wider on the "
        "hanging wall, including the mapping uncertainty of the trace. Labels: fault id and "
        "preferred moment magnitude of a rupture of that segment alone. " + CAUTION
    )


def relations_caption() -> str:
    """Caption of :func:`magnitude_by_relation` (includes the caution)."""
    return (
        "Moment magnitude of each rupture scenario by empirical relation, with one-sigma "
        "bars (Wells & Coppersmith 1994: residual sigma; Hanks & Bakun 2002: intercept "
        "uncertainty only). Black bar: preferred estimate. " + CAUTION
    )


def _caption(fig: Figure, text: str, width: int = 120) -> None:
    fig.text(0.01, 0.01, textwrap.fill(text, width), ha="left", va="bottom", fontsize=7, wrap=True)


def _polygon_path(geom) -> Path | None:
    """Compound path (exteriors and holes) of a Polygon / MultiPolygon."""
    verts, codes = [], []
    for poly in shapely.get_parts(np.asarray([geom], dtype=object)):
        if poly is None or poly.is_empty or poly.geom_type != "Polygon":
            continue
        for ring in [poly.exterior, *poly.interiors]:
            xy = np.asarray(ring.coords)
            if len(xy) < 3:
                continue
            verts.append(xy)
            c = np.full(len(xy), Path.LINETO, dtype=np.uint8)
            c[0] = Path.MOVETO
            c[-1] = Path.CLOSEPOLY
            codes.append(c)
    if not verts:
        return None
    return Path(np.concatenate(verts), np.concatenate(codes))


def _line_segments(geoms: np.ndarray) -> list[np.ndarray]:
    parts = shapely.get_parts(shapely.line_merge(geoms)) if len(geoms) else []
    return [np.asarray(p.coords)[:, :2] for p in parts if p is not None and not p.is_empty]


def hazard_map(
    faults: gpd.GeoDataFrame,
    zones: gpd.GeoDataFrame,
    *,
    title: str = "Active-fault screening",
    figsize: tuple[float, float] = (8.0, 8.5),
    dpi: int = 150,
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

    Returns
    -------
    matplotlib.figure.Figure
        Axes in metres of the working CRS; the caption under the axes
        includes the screening caution.
    """
    fig = Figure(figsize=figsize, dpi=dpi)
    ax = fig.add_axes((0.12, 0.2, 0.83, 0.72))
    if "hazard_screened" in faults.columns:
        screened = faults["hazard_screened"].fillna(False).to_numpy(bool)
    elif "active" in faults.columns:
        screened = faults["active"].fillna(False).to_numpy(bool)
    else:
        screened = np.zeros(len(faults), bool)
    geoms = faults.geometry.to_numpy()
    patches = [PathPatch(p) for p in (_polygon_path(g) for g in zones.geometry) if p is not None]
    if patches:
        ax.add_collection(PatchCollection(patches, facecolor="#f4a582", edgecolor="#b2182b", linewidth=0.6, alpha=0.55, zorder=1))
    other = _line_segments(geoms[~screened])
    if other:
        ax.add_collection(LineCollection(other, colors="0.55", linewidths=0.8, zorder=2))
    act = _line_segments(geoms[screened])
    if act:
        ax.add_collection(LineCollection(act, colors="#b2182b", linewidths=1.8, zorder=3))
    mags = faults["mag_preferred"].to_numpy(float) if "mag_preferred" in faults.columns else np.full(len(faults), np.nan)
    ids = faults["fault_id"].to_numpy()
    if screened.any():
        mid = shapely.line_interpolate_point(geoms[screened], 0.5, normalized=True)
        xy = shapely.get_coordinates(mid)
        for (x, y), fid, m in zip(xy, ids[screened], mags[screened], strict=True):
            txt = f"F{fid}" + (f"  M{m:.1f}" if np.isfinite(m) else "")
            ax.annotate(txt, (x, y), xytext=(6, 6), textcoords="offset points", fontsize=8,
                        bbox=dict(boxstyle="round,pad=0.2", fc="white", ec="0.6", alpha=0.85), zorder=4)
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
    ax.set_title(title, fontsize=12)
    ax.legend(
        handles=[
            Line2D([], [], color="#b2182b", lw=1.8, label="screened (active) fault"),
            Line2D([], [], color="0.55", lw=0.8, label="other fault"),
            Patch(facecolor="#f4a582", edgecolor="#b2182b", alpha=0.55, label="surface-rupture zone"),
        ],
        loc="best", fontsize=8, framealpha=0.9,
    )
    _caption(fig, map_caption())
    return fig


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
        Plot at most this many scenarios (the largest by ``mag_preferred``).
    figsize : tuple of float, optional
    dpi : int, optional

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig = Figure(figsize=figsize, dpi=dpi)
    ax = fig.add_axes((0.08, 0.3, 0.6, 0.62))
    sc = scenarios
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
            capsize=2, lw=1, label=_LABELS.get(k, k) + ("\n(bar: intercept s.e.)" if rel.sigma_kind == "intercept_se" else ""),
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
    ax.set_title("Magnitude by empirical relation", fontsize=12)
    ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=8, framealpha=0.9)
    _caption(fig, relations_caption(), width=140)
    return fig
