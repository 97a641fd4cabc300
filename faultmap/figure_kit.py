"""Shared pieces of the figures: a bounded size, traces as one collection, notes, labels that avoid each other.

Every figure of faultmap stays readable and small from a handful to tens of thousands of faults:

* :func:`bounded` caps a figure at :data:`MAX_SIDE_PX` pixels a side (the figure functions call it
  last) and :func:`save_bounded` caps the saved image (the run context saves through it), whatever
  the content;
* :func:`panel_grid` lays out panels in a box of at most :data:`MAX_SIDE_IN` inches;
* :func:`line_parts` turns any number of traces into the vertex arrays of one
  :class:`~matplotlib.collections.LineCollection`, without a Python call per trace;
* :func:`shown_note` words how many items a figure leaves out;
* :func:`place_labels` writes at most a few labels, skipping any that would overlap a label
  already placed or leave the axes.

matplotlib is imported here only by the functions that draw.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = [
    "MAX_SIDE_PX",
    "MAX_SIDE_IN",
    "bounded",
    "save_bounded",
    "panel_grid",
    "line_parts",
    "trace_width",
    "shown_note",
    "thousands",
    "place_labels",
]

#: Largest width or height of a figure, in pixels (on screen and as saved).
MAX_SIDE_PX = 4000
#: Largest width or height of a figure, in inches (3740 pixels at the usual 170 dpi).
MAX_SIDE_IN = 22.0


def bounded(fig, *, max_px: int = MAX_SIDE_PX):
    """Lower the figure's dpi so that neither side exceeds ``max_px`` pixels; returns ``fig``."""
    side = float(max(fig.get_size_inches()))
    if side * fig.dpi > max_px:
        fig.set_dpi(math.floor(max_px / side))
    return fig


def _agg_renderer(fig):
    """Return a renderer of the figure (attaching an Agg canvas to a figure that has none)."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    canvas = fig.canvas if isinstance(fig.canvas, FigureCanvasAgg) else FigureCanvasAgg(fig)
    return canvas.get_renderer()


def save_bounded(fig, path, *, dpi: float = 170, max_px: int = MAX_SIDE_PX, pad_inches: float = 0.1,
                 overhang_inches: float = 0.5) -> float:
    """Save ``fig`` cropped to its content, at most ``max_px`` pixels a side.

    The image is the tight box of the drawn artists (as ``bbox_inches="tight"``) clipped to the
    figure plus ``overhang_inches`` (an artist far outside the figure, such as an overlong legend,
    cannot stretch the image), at ``dpi`` lowered where needed to keep both sides within
    ``max_px``. Returns the dpi used.
    """
    from matplotlib.transforms import Bbox

    fig.draw_without_rendering()  # runs the layout engine, as savefig does before a tight crop
    tight = fig.get_tightbbox(_agg_renderer(fig)).padded(pad_inches)
    w, h = fig.get_size_inches()
    lim = Bbox.from_extents(-overhang_inches, -overhang_inches, w + overhang_inches, h + overhang_inches)
    box = Bbox.intersection(tight, lim) or lim
    side = max(box.width, box.height, 1e-3)
    use = min(float(dpi), math.floor(max_px / side))
    fig.savefig(path, dpi=use, bbox_inches=box)
    return use


def panel_grid(n: int, *, max_cols: int = 3, panel_w: float = 5.2, panel_h: float = 3.2,
               extra_h: float = 0.0, max_side_in: float = MAX_SIDE_IN) -> tuple[int, int, tuple[float, float]]:
    """Rows, columns and figure size (inches) for ``n`` panels, never over ``max_side_in`` a side.

    Panels shrink (keeping their shape) when the grid would not fit; ``extra_h`` inches are added
    for titles and legends outside the panels.
    """
    n = max(1, int(n))
    ncols = min(max_cols, n)
    nrows = math.ceil(n / ncols)
    w, h = panel_w * ncols, panel_h * nrows + extra_h
    s = min(1.0, max_side_in / w, max_side_in / h)
    return nrows, ncols, (w * s, h * s)


def line_parts(geoms, scale: float = 1.0) -> tuple[list[np.ndarray], np.ndarray]:
    """Vertex arrays (x, y) of every line part of ``geoms`` and the index of the geometry each comes from.

    Vectorised over the geometries (multi-part traces give one array per part; empty and missing
    geometries none); ``scale`` divides the coordinates.
    """
    import shapely

    g = np.asarray(geoms, dtype=object)
    if g.size == 0:
        return [], np.zeros(0, dtype=np.intp)
    parts, owner = shapely.get_parts(g, return_index=True)
    keep = ~shapely.is_empty(parts) & (shapely.get_num_coordinates(parts) >= 2)
    parts, owner = parts[keep], owner[keep]
    if parts.size == 0:
        return [], np.zeros(0, dtype=np.intp)
    xy, idx = shapely.get_coordinates(parts, return_index=True)
    if scale != 1.0:
        xy = xy / scale
    cuts = np.flatnonzero(np.diff(idx)) + 1
    return np.split(xy, cuts), owner


def trace_width(n: int, *, widest: float = 2.0, narrowest: float = 0.35, full_until: int = 150) -> float:
    """Line width of ``n`` traces on one map: ``widest`` for a few, thinner as they crowd."""
    if n <= full_until:
        return widest
    return max(narrowest, widest * math.sqrt(full_until / n))


def thousands(n: int) -> str:
    """Integer with a space between groups of three digits (3 412; 20 000)."""
    return f"{int(n):,}".replace(",", " ")


def shown_note(shown: int, total: int, what: str, by: str) -> str:
    """``"12 of 3 412 systems shown: the largest by summed throw"`` (or ``"all 5 systems shown"``)."""
    if shown >= total:
        return f"all {thousands(total)} {what} shown"
    return f"{thousands(shown)} of {thousands(total)} {what} shown: {by}"


def _boxes_hit(box: np.ndarray, boxes: np.ndarray) -> bool:
    """Whether ``box`` (x0, y0, x1, y1) overlaps any row of ``boxes``."""
    if boxes.size == 0:
        return False
    return bool(np.any((box[0] < boxes[:, 2]) & (box[2] > boxes[:, 0]) & (box[1] < boxes[:, 3]) & (box[3] > boxes[:, 1])))


# offsets tried for each label, in points, with the text alignment that puts the label beside the point
_SPOTS = (
    (5.0, 5.0, "left", "bottom"),
    (-5.0, 5.0, "right", "bottom"),
    (5.0, -5.0, "left", "top"),
    (-5.0, -5.0, "right", "top"),
)


def place_labels(ax, xy, texts, *, priority=None, max_labels: int = 12, fontsize: float = 8.0,
                 boxed: bool = True, avoid=(), margin_px: float = 2.0, max_candidates: int | None = None) -> list:
    """Label at most ``max_labels`` points, the highest ``priority`` first, without overlaps.

    Each candidate is tried at four spots around its point (north-east, north-west, south-east,
    south-west); the first spot whose text box lies inside the axes and overlaps no label already
    placed (nor the boxes ``avoid``, in display pixels, nor the axes' legend) is kept; a candidate
    with no such spot is skipped. At most ``max_candidates`` (default ``6 * max_labels``)
    candidates are tried, so a crowded map costs no more than a sparse one.

    Call it after the layout is final (``tight_layout`` or fixed axes): positions are checked in
    the display coordinates of the figure as it stands. Labels are clipped to the axes.

    Parameters
    ----------
    ax : matplotlib.axes.Axes
    xy : array (n, 2)
        Label anchors, data coordinates.
    texts : sequence of str
    priority : array (n,), optional
        Larger first; default the given order.
    max_labels : int
        Most labels written.
    fontsize : float
    boxed : bool
        Draw each label on a white rounded box.
    avoid : sequence of (x0, y0, x1, y1)
        Further display boxes to keep clear of.

    Returns
    -------
    list of matplotlib.text.Annotation
        The labels written (also in ``ax.texts``).
    """
    from matplotlib.text import Text

    xy = np.asarray(xy, dtype=float).reshape(-1, 2)
    texts = list(texts)
    if max_labels <= 0 or len(texts) == 0:
        return []
    pr = np.arange(len(texts), 0, -1, dtype=float) if priority is None else np.asarray(priority, dtype=float)
    fig = ax.figure
    renderer = _agg_renderer(fig)
    ax.apply_aspect()
    x0, x1 = sorted(ax.get_xlim())
    y0, y1 = sorted(ax.get_ylim())
    ok = np.isfinite(xy).all(axis=1) & np.isfinite(pr)
    ok &= (xy[:, 0] >= x0) & (xy[:, 0] <= x1) & (xy[:, 1] >= y0) & (xy[:, 1] <= y1)
    cand = np.flatnonzero(ok)
    cand = cand[np.argsort(-pr[cand], kind="stable")][: max_candidates or 6 * max_labels]
    if cand.size == 0:
        return []
    frame = ax.get_window_extent(renderer).extents
    pts = ax.transData.transform(xy[cand])
    px_per_pt = fig.dpi / 72.0
    pad = (0.3 * fontsize if boxed else 0.0) * px_per_pt + margin_px
    placed = [np.asarray(b, dtype=float) for b in avoid]
    leg = ax.get_legend()
    if leg is not None:
        placed.append(np.asarray(leg.get_window_extent(renderer).extents))
    boxes = np.asarray(placed, dtype=float).reshape(-1, 4)
    probe = Text(0, 0, "", fontsize=fontsize, figure=fig)
    out = []
    for k, i in enumerate(cand):
        probe.set_text(texts[i])
        ext = probe.get_window_extent(renderer)
        w, h = ext.width + 2 * pad, ext.height + 2 * pad
        px, py = pts[k]
        for dx, dy, ha, va in _SPOTS:
            bx = px + dx * px_per_pt - (w if ha == "right" else 0.0)
            by = py + dy * px_per_pt - (h if va == "top" else 0.0)
            box = np.array([bx, by, bx + w, by + h])
            if box[0] < frame[0] or box[1] < frame[1] or box[2] > frame[2] or box[3] > frame[3]:
                continue
            if _boxes_hit(box, boxes):
                continue
            kw = dict(boxstyle="round,pad=0.2", fc="white", ec="0.6", alpha=0.85) if boxed else None
            # the text sits inside its padded box: shift the anchor by the padding
            off = (dx + np.sign(dx) * pad / px_per_pt, dy + np.sign(dy) * pad / px_per_pt)
            t = ax.annotate(texts[i], xy[i], xytext=off, textcoords="offset points", ha=ha, va=va,
                            fontsize=fontsize, bbox=kw, zorder=6, annotation_clip=True, clip_on=True)
            out.append(t)
            boxes = np.vstack([boxes, box])
            break
        if len(out) >= max_labels:
            break
    return out
