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
  already placed or leave the axes;
* :func:`map_furniture` puts a north arrow, a scale bar and the CRS name on a map;
* :func:`clear_legend` puts a legend where it hides the fewest plotted points;
* :data:`FONT_FAMILY` is the font list (DejaVu Sans first, then installed fonts of wide script
  coverage as fallbacks, set once when this module is imported) and :func:`quiet_glyphs` /
  :func:`glyph_safe` keep matplotlib's "Glyph ... missing from font" warnings off the terminal.

matplotlib is imported here only by the functions that draw.
"""

from __future__ import annotations

import contextlib
import functools
import math
import textwrap
import warnings

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
    "FONT_FAMILY",
    "quiet_glyphs",
    "glyph_safe",
    "nice_length",
    "length_label",
    "map_furniture",
    "clear_legend",
]

#: Fonts tried in turn for each glyph (matplotlib >= 3.6 falls back along ``font.family``):
#: DejaVu Sans first, then those of these fonts of wide script coverage that are installed.
_FALLBACK_FONTS = (
    "Noto Sans", "Noto Sans CJK JP", "Noto Sans CJK SC", "Noto Sans CJK TC", "Noto Sans CJK KR",
    "Noto Sans Arabic", "Noto Sans Hebrew", "Noto Sans Devanagari", "Noto Sans Bengali", "Noto Sans Thai",
    "Noto Sans Ethiopic", "Noto Sans Georgian", "Noto Sans Armenian", "Source Han Sans", "WenQuanYi Zen Hei",
    "Droid Sans Fallback", "Arial Unicode MS", "Microsoft YaHei", "Yu Gothic", "Malgun Gothic", "Nirmala UI",
    "Segoe UI", "Segoe UI Symbol", "FreeSans",
)


def _font_family() -> list[str]:
    from matplotlib import font_manager

    have = {f.name for f in font_manager.fontManager.ttflist}
    return ["DejaVu Sans"] + [name for name in _FALLBACK_FONTS if name in have]


def _use_fonts() -> list[str]:
    import matplotlib

    family = _font_family()
    matplotlib.rcParams["font.family"] = family
    return family


#: The font list every figure of faultmap uses (set in matplotlib's rcParams on import).
FONT_FAMILY: list[str] = _use_fonts()


@contextlib.contextmanager
def quiet_glyphs():
    """Silence matplotlib's "Glyph ... missing from font(s)" warnings inside the block (only those).

    A name in a script that no installed font covers still draws (as empty boxes) but does not
    print a warning per character on the terminal.
    """
    with warnings.catch_warnings():
        warnings.filterwarnings("ignore", message=r"Glyph \d+ .*missing from font", category=UserWarning)
        yield


def glyph_safe(func):
    """Run a figure function (decorated) inside :func:`quiet_glyphs` (its layout measures the text)."""

    @functools.wraps(func)
    def wrapper(*args, **kwargs):
        with quiet_glyphs():
            return func(*args, **kwargs)

    return wrapper

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
    with quiet_glyphs():
        return _save_bounded(fig, path, dpi=dpi, max_px=max_px, pad_inches=pad_inches,
                             overhang_inches=overhang_inches)


def _save_bounded(fig, path, *, dpi, max_px, pad_inches, overhang_inches) -> float:
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


@glyph_safe
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
    for a in ax.artists:  # the map furniture (north arrow, scale bar, CRS note)
        if a.get_gid() == "map_furniture":
            placed.append(np.asarray(a.get_window_extent(renderer).extents))
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


def nice_length(span: float, fraction: float = 0.2) -> float:
    """Return a round length (1, 2 or 5 times a power of ten) of at most ``fraction`` of ``span``."""
    target = float(span) * fraction
    if not np.isfinite(target) or target <= 0:
        return 1.0
    k = 10.0 ** math.floor(math.log10(target))
    return next(m * k for m in (5.0, 2.0, 1.0) if m * k <= target * (1 + 1e-9))


def length_label(metres: float) -> str:
    """Write a length as ``"500 m"`` below 1 km, ``"2 km"`` from 1 km."""
    return f"{metres / 1000.0:g} km" if metres >= 1000.0 else f"{metres:g} m"


def map_furniture(ax, crs_name: str | None = None, *, loc: str = "lower right", fraction: float = 0.2,
                  fontsize: float = 7.0, span: float | None = None):
    """North arrow, scale bar and CRS name of a map in a projected CRS, in one framed box at ``loc``.

    The scale bar is a round length (1, 2 or 5 times a power of ten, in m or km) of about
    ``fraction`` of the map width (``span``, default the x range of the axes), drawn to the
    axes' data scale in two halves; the arrow points to grid north (up: the maps are drawn in
    the projected CRS); the note under the bar names the CRS. The artists carry the gids
    ``north_arrow``, ``scale_bar``, ``crs_note`` and the box ``map_furniture``
    (:func:`place_labels` keeps labels clear of it).

    Returns
    -------
    matplotlib.offsetbox.AnchoredOffsetbox
    """
    from matplotlib.offsetbox import (
        AnchoredOffsetbox,
        AuxTransformBox,
        DrawingArea,
        HPacker,
        TextArea,
        VPacker,
    )
    from matplotlib.patches import Polygon, Rectangle

    if span is None:
        x0, x1 = ax.get_xlim()
        span = abs(x1 - x0)
    length = nice_length(span, fraction)
    h = 0.012 * span
    bar = AuxTransformBox(ax.transData)
    bar.add_artist(Rectangle((0, 0), length / 2, h, facecolor="black", edgecolor="black", lw=0.6))
    bar.add_artist(Rectangle((length / 2, 0), length / 2, h, facecolor="white", edgecolor="black", lw=0.6))
    scale = VPacker(children=[bar, TextArea(length_label(length), textprops=dict(fontsize=fontsize))],
                    align="center", pad=0, sep=2)
    scale.set_gid("scale_bar")
    note = "grid north" + (f"; {crs_name}" if crs_name else "")
    crs = TextArea(textwrap.fill(note, 34), textprops=dict(fontsize=fontsize - 1, color="0.2"))
    crs.set_gid("crs_note")
    arrow = DrawingArea(12, 20, 0, 0)
    arrow.add_artist(Polygon([(6, 20), (0, 0), (6, 5)], closed=True, facecolor="black", edgecolor="black", lw=0.6))
    arrow.add_artist(Polygon([(6, 20), (12, 0), (6, 5)], closed=True, facecolor="white", edgecolor="black", lw=0.6))
    north = VPacker(children=[TextArea("N", textprops=dict(fontsize=fontsize + 1, weight="bold")), arrow],
                    align="center", pad=0, sep=1)
    north.set_gid("north_arrow")
    right = VPacker(children=[scale, crs], align="center", pad=0, sep=3)
    box = AnchoredOffsetbox(loc=loc, child=HPacker(children=[north, right], align="center", pad=0, sep=6),
                            pad=0.35, borderpad=0.6, frameon=True)
    box.patch.set(facecolor="white", alpha=0.85, edgecolor="0.6", boxstyle="round,pad=0.1")
    box.set_gid("map_furniture")
    box.set_zorder(7)
    ax.add_artist(box)
    return box


_LEGEND_SPOTS = ("upper right", "upper left", "lower right", "lower left", "upper center", "lower center",
                 "center right", "center left")


def clear_legend(ax, xy, *, handles=None, spots=_LEGEND_SPOTS, headroom: bool = True, **kwargs):
    """Put the axes' legend at the spot that covers the fewest of the points ``xy`` (data coordinates).

    Each spot of ``spots`` is measured as drawn (call it once the layout is final) and the points
    falling inside its box are counted, vectorised; the first spot with the fewest is kept. When
    every spot covers some point and ``headroom`` is set (linear y axis), the y range is raised so
    that the data lie below the legend, which then sits at the best upper spot.

    Returns
    -------
    matplotlib.legend.Legend
    """
    xy = np.asarray(xy, dtype=float).reshape(-1, 2)
    xy = xy[np.isfinite(xy).all(axis=1)]
    leg = ax.legend(handles=handles, loc=spots[0], **kwargs) if handles is not None else ax.legend(
        loc=spots[0], **kwargs)
    if xy.shape[0] == 0:
        return leg
    renderer = _agg_renderer(ax.figure)
    ax.apply_aspect()

    def counts(cands):
        pts = ax.transData.transform(xy)
        out = []
        for spot in cands:
            leg.set_loc(spot)
            b = leg.get_window_extent(renderer)
            out.append(int(np.count_nonzero((pts[:, 0] >= b.x0) & (pts[:, 0] <= b.x1)
                                            & (pts[:, 1] >= b.y0) & (pts[:, 1] <= b.y1))))
        return np.asarray(out)

    c = counts(spots)
    best = spots[int(np.argmin(c))]
    if c.min() > 0 and headroom and ax.get_yscale() == "linear":
        leg.set_loc("upper right")
        frac = leg.get_window_extent(renderer).height / max(ax.get_window_extent(renderer).height, 1.0)
        y0, y1 = ax.get_ylim()
        ymax = float(xy[:, 1].max())
        top = y0 + (ymax - y0) / max(1.0 - frac - 0.04, 0.2)
        if top > y1:
            ax.set_ylim(y0, top)
        upper = tuple(sp for sp in spots if sp.startswith("upper")) or spots
        c = counts(upper)
        best = upper[int(np.argmin(c))]
    leg.set_loc(best)
    return leg
