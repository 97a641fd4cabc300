"""Tool ``strain``: horizontal strain tensors by Kostrov summation.

Thin wrapper around the tiled form of :func:`faultmap.extension.kostrov_sums.kostrov_grid`
(:func:`~faultmap.extension.kostrov_tiles.plan_kostrov_tiles` splits the grid into tiles of
:data:`TILE_CELLS` x :data:`TILE_CELLS` cells, the run's engine sums each tile,
:func:`~faultmap.extension.kostrov_tiles.gather_kostrov_tiles` assembles them: the same cells
whatever runs them) and :func:`faultmap.extension.kostrov_sums.kostrov_polygons` for the
study-area polygons, when given: adds the ``strain_cells`` layer (and
``strain_areas``), the whole-area tensor to ``run_info``, and a map of
extension directions.
"""

from __future__ import annotations

import numpy as np
import shapely

from faultmap.errors import InputError
from faultmap.registry import Param, Tool

FIGURE = "strain_map.png"

#: Side of a tile of grid cells summed as one batch (any value gives the same cells).
TILE_CELLS = 64


def _nice_cell(size: float) -> float:
    """Round a length down to 1, 2 or 5 times a power of ten (m)."""
    p = 10.0 ** np.floor(np.log10(size))
    for m in (5.0, 2.0, 1.0):
        if m * p <= size:
            return float(m * p)
    return float(p)


def run(ctx, p: dict) -> None:
    """Kostrov strain on a grid (and in study-area polygons)."""
    from faultmap.extension.kostrov_sums import kostrov_polygons
    from faultmap.extension.kostrov_tiles import gather_kostrov_tiles, kostrov_tile, plan_kostrov_tiles

    faults = ctx.faults
    if faults is None or len(faults) == 0:
        raise InputError("strain needs the faults layer: run prepare and throw first.")
    stations = ctx.layers.get("throw_stations")
    if stations is None and "max_throw_m" not in faults.columns:
        raise InputError("strain needs throws (heaves are summed): give a DEM, throw points or a max_throw_m "
                         "attribute and run the throw tool first.")
    cell = p["cell_size_m"]
    if cell is None:
        # about 10 x 10 cells over the faults' bounding box, rounded (our default)
        xmin, ymin, xmax, ymax = shapely.total_bounds(faults.geometry.values)
        cell = _nice_cell(max(np.sqrt(max((xmax - xmin) * (ymax - ymin), 1.0) / 100.0), 1.0))
        ctx.record("cell_size_m_used", cell)
    from faultmap.engine import engine_map

    tiles, grid = plan_kostrov_tiles(
        faults, stations, cell_size_m=cell, tile_cells=TILE_CELLS, keep_empty=p["keep_empty"],
        piece_length_m=p["piece_length_m"], rake_deg=p["rake_deg"], default_dip_deg=p["default_dip_deg"],
    )
    parts = engine_map(
        ctx.engine, kostrov_tile, tiles, progress=lambda it, total: ctx.progress(it, total=total, desc="strain")
    )
    cells, whole = gather_kostrov_tiles(parts, grid)
    ctx.record("n_batches", len(tiles))
    ctx.layers["strain_cells"] = cells
    # the whole-area tensor: over the study area when given, else over the convex hull of the traces
    # (a basis that does not depend on the cell size; the cells' own areas would)
    summary_area = "grid cells with faults" if not p["keep_empty"] else "whole grid"
    hull = shapely.convex_hull(shapely.multilinestrings(faults.geometry.values))
    if hull.area > 0:
        from faultmap.extension.strain_tensors import whole_area_strain

        m = np.array([[whole["moment_xx_m2"], whole["moment_xy_m2"]], [whole["moment_xy_m2"], whole["moment_yy_m2"]]])
        moments = {k: whole[k] for k in ("moment_xx_m2", "moment_yy_m2", "moment_xy_m2", "n_faults")}
        whole = {**whole_area_strain(m, float(hull.area)), "area_m2": float(hull.area), **moments}
        summary_area = f"convex hull of the fault traces ({hull.area / 1e6:.4g} km2)"
    areas = None
    if ctx.study_area is not None and len(ctx.study_area):
        areas, whole_sa = kostrov_polygons(
            faults, stations, ctx.study_area, piece_length_m=p["piece_length_m"], rake_deg=p["rake_deg"],
            default_dip_deg=p["default_dip_deg"], reproject=True,
        )
        ctx.layers["strain_areas"] = areas
        whole, summary_area = whole_sa, "study area"
    ctx.results["strain"] = {"cells": cells, "areas": areas, "whole": whole, "cell_size_m": cell}
    ctx.record("whole_area_basis", summary_area)
    for k in ("area_m2", "exx", "eyy", "exy", "e1", "e2", "e1_azimuth_deg", "ezz", "n_faults"):
        ctx.record(f"whole.{k}", whole[k])
    ctx.info(
        f"{len(cells)} cells of {cell:g} m; whole-area e1 {whole['e1']:.3e} along azimuth "
        f"{whole['e1_azimuth_deg']:.1f} deg ({summary_area})."
    )
    if ctx.figures_enabled and len(cells):
        from faultmap.extension.figures import extension_map_figure
        from faultmap.numerics.hillshade import hillshade

        hs, extent = None, None
        if ctx.dem is not None:
            from faultmap.io.dem import read_overview

            b = shapely.total_bounds(faults.geometry.values)
            pad = 0.05 * max(b[2] - b[0], b[3] - b[1])
            z, tr = read_overview(ctx.dem, max_pixels=1_500_000, bounds=(b[0] - pad, b[1] - pad, b[2] + pad, b[3] + pad))
            if z.size:
                hs = hillshade(z, pixel_size_x_m=abs(tr.a), pixel_size_y_m=abs(tr.e))
                extent = (tr.c, tr.c + tr.a * z.shape[1], tr.f + tr.e * z.shape[0], tr.f)
        ctx.save_figure(
            extension_map_figure(cells, faults, hillshade=hs, hillshade_extent=extent,
                                 transects=ctx.layers.get("transects"), crs_name=getattr(ctx.crs, "name", None)),
            FIGURE,
        )


TOOL = Tool(
    name="strain",
    summary="Horizontal strain tensors by Kostrov summation on a grid.",
    run=run,
    requires=("throw",),
    inputs=("faults",),
    optional_inputs=("dem", "study_area"),
    params=(
        Param("cell_size_m", float, None,
              "Side of the square grid cells (origin at multiples of it); default: about 10 x 10 cells over "
              "the faults, rounded.", unit="m", min=0.0, min_exclusive=True, nullable=True),
        Param("keep_empty", bool, False, "Keep grid cells without faults (zero strain) in the layer."),
        Param("piece_length_m", float, None,
              "Longest trace piece in the summation; default: a tenth of the cell (pieces are clipped at cell "
              "borders exactly).", unit="m", min=0.0, min_exclusive=True, nullable=True),
        Param("rake_deg", float, None,
              "Rake of all faults (Aki-Richards, -90 = pure dip slip); default: the faults' rake_deg field, "
              "else dip slip.", unit="deg", min=-170.0, max=-10.0, nullable=True),
        Param("default_dip_deg", float, 60.0, "Dip used where a fault has none (Anderson; common practice).",
              unit="deg", min=0.0, max=90.0, min_exclusive=True),
    ),
    layers=("strain_cells", "strain_areas"),
    figures=(FIGURE,),
    description=(
        "Kostrov (1974) summation in map view: eps = (1/A) sum L_k h_k (m_k m_k), m the unit dip-direction "
        "vector, over square cells (traces are clipped at cell borders) and, when a study area is given, over "
        "its polygons. Principal strains e1 >= e2, the azimuth of e1 and ezz = -(exx + eyy) from volume "
        "conservation; a whole-area tensor goes to run_info. See docs/methods/extension.md."
    ),
)
