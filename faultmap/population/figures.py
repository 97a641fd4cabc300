"""Figures of displacement-length scaling and fault size distributions.

Functions return :class:`matplotlib.figure.Figure` objects built without
pyplot global state; callers save them (``fig.savefig(path, dpi=170)``).
They stay bounded whatever the number of faults (:mod:`faultmap.figure_kit`):
each point set is one scatter call, only a few outliers are labelled and the
figures say what was left out.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np
from matplotlib.figure import Figure

from faultmap.figure_kit import bounded, clear_legend, glyph_safe, place_labels, shown_note, thousands
from faultmap.population.linefit import LineFit
from faultmap.population.powerlaw_fit import PowerLawFit
from faultmap.population.references import REFERENCE_RANGES, ReferenceRange
from faultmap.population.scaling import ScalingResult
from faultmap.population.sizes import ccdf

__all__ = ["dl_figure", "size_figure"]

_MODEL_STYLE = {
    "ols": dict(color="#1f4e9c", ls="-", label="OLS"),
    "rma": dict(color="#c25b00", ls="--", label="RMA"),
    "york": dict(color="#2a7d2a", ls="-.", label="York (errors in variables)"),
}
_LABELS = {
    "length_m": "Length (m)",
    "max_throw_m": "Maximum throw (m)",
    "max_dip_slip_m": "Maximum dip-slip displacement (m)",
}


def _fit_label(name: str, f: LineFit) -> str:
    lo, hi = f.exponent_ci
    ci = f"{lo:.2f}-{hi:.2f}" if np.isfinite(lo) else "n/a"
    return (
        f"{_MODEL_STYLE.get(name, {}).get('label', name)}: n = {f.exponent:.2f} "
        f"[{ci}], \u03b3 = {f.gamma:.2g}"
    )


#: what the y axis and the title name, by the tool's ``displacement`` choice: (quantity, symbol)
_QUANTITY = {"throw": ("Maximum throw", "T"), "dip_slip": ("Maximum dip-slip displacement", "D")}


def _median_dip(result: ScalingResult) -> float:
    """Median dip (degrees) of the traces used in the fits (all traces if none is flagged; 60 if unknown)."""
    f = result.faults
    if "dip_deg" not in f.columns:
        return 60.0
    dip = np.asarray(f["dip_deg"], dtype=float)
    if "scaling_used" in f.columns and f["scaling_used"].to_numpy(bool).any():
        dip = dip[f["scaling_used"].to_numpy(bool)]
    dip = dip[np.isfinite(dip) & (dip > 0) & (dip <= 90)]
    return float(np.median(dip)) if dip.size else 60.0


@glyph_safe
def dl_figure(
    result: ScalingResult,
    *,
    band_model: str | None = None,
    references: Sequence[ReferenceRange] = REFERENCE_RANGES,
    label_outliers: bool = True,
    max_labels: int = 12,
    figsize: tuple[float, float] = (7.6, 7.0),
) -> Figure:
    """Log-log displacement-length plot with fits, band, outliers, references.

    Parameters
    ----------
    result : ScalingResult
        Output of :func:`faultmap.population.scaling.analyse_scaling`.
    band_model : str, optional
        Model whose bootstrap confidence band is shaded (default: the
        residual model of the analysis).
    references : sequence of ReferenceRange
        Published D/L ratio references drawn as lines labelled with their
        sources (ratio ranges as a shaded envelope). They are of dip-slip
        displacement D: on a throw plot they are drawn as throw,
        T = D sin(dip) at the median dip of the traces used, and the figure
        says so.
    label_outliers : bool
        Write the unit id beside flagged outliers: at most ``max_labels``,
        the longest first, skipping any label that would overlap another,
        the legend or the frame; the figure says how many were labelled.
    max_labels : int
        Most outlier labels.
    figsize : tuple of float
        Inches.

    Returns
    -------
    matplotlib.figure.Figure

    Notes
    -----
    Published ratios (Schlische et al. 1996; Kim & Sanderson 2005; Cowie &
    Scholz 1992) are of maximum displacement; with throw on the y axis they
    are converted to throw (like with like) and the figure says so. The
    title and the y axis name the same quantity (the analysis'
    ``displacement`` setting). The legend sits inside the axes where it
    hides the fewest points; both log axes carry plain-number ticks.
    """
    pop = result.population
    settings = result.settings
    disp = settings.get("displacement", "throw")
    unit = settings.get("unit", "trace")
    band_model = band_model or settings.get("residual_model", "ols")
    fig = Figure(figsize=figsize, dpi=170)
    ax = fig.add_subplot(1, 1, 1)
    L = pop["length_m"].to_numpy(float)
    D = pop["disp_m"].to_numpy(float)
    ok = np.isfinite(L) & np.isfinite(D) & (L > 0) & (D > 0)
    used = pop["used"].to_numpy(bool) & ok
    cens = pop["censored"].to_numpy(bool) & ok & ~used
    other = ok & ~used & ~cens
    # flags of the units (units map 1:1 to population rows)
    fl = result.faults.drop_duplicates("scaling_unit_id").set_index("scaling_unit_id")
    flag = fl["scaling_flag"].reindex(pop["unit_id"].to_numpy()).fillna("").to_numpy(object)

    if not ok.any():
        ax.text(
            0.5,
            0.5,
            "No fault with positive length and displacement",
            ha="center",
            va="center",
            transform=ax.transAxes,
        )
        ax.set_axis_off()
        return fig

    lmin, lmax = np.nanmin(L[ok]), np.nanmax(L[ok])
    grid = np.logspace(np.log10(lmin) - 0.15, np.log10(lmax) + 0.15, 120)

    quantity, sym = _QUANTITY.get(disp, _QUANTITY["throw"])
    # published references (ratio lines), of dip-slip D: as throw T = D sin(dip) on a throw plot
    dip = _median_dip(result) if disp == "throw" else 90.0
    conv = float(np.sin(np.radians(dip)))
    ref_colors = ["#7f7f7f", "#b0b0b0", "#d9d9d9"]
    ci = 0
    for ref in references:
        if ref.quantity != "d_l_ratio":
            continue
        short = ref.source.split(";")[0].strip()
        if ref.lo == ref.hi:
            ax.plot(grid, conv * ref.lo * grid, color="k", lw=1.0, ls=":", label=f"D/L = {ref.lo:g}, {short}")
        else:
            ax.fill_between(
                grid,
                conv * ref.lo * grid,
                conv * ref.hi * grid,
                color=ref_colors[ci % 3],
                alpha=0.25,
                lw=0,
                label=f"D/L {ref.lo:g}-{ref.hi:g}, {short}",
            )
            ci += 1

    # bootstrap band and fits
    bf = result.fits.get(band_model)
    if bf is not None and bf.fitted and bf.boot_exponent.size:
        lo, hi = bf.band(grid)
        ax.fill_between(
            grid,
            lo,
            hi,
            color=_MODEL_STYLE.get(band_model, {}).get("color", "C0"),
            alpha=0.18,
            lw=0,
            label=f"{int(100 * bf.ci_level)}% bootstrap band ({band_model.upper()})",
        )
    for name, f in result.fits.items():
        if not f.fitted:
            continue
        st = _MODEL_STYLE.get(name, dict(color="C3", ls="-"))
        ax.plot(grid, f.predict(grid), color=st["color"], ls=st["ls"], lw=1.8, label=_fit_label(name, f))

    # data: one scatter call per kind of point; markers shrink as points crowd
    n_pts = int(ok.sum())
    ms = 1.0 if n_pts <= 300 else max(0.2, float(np.sqrt(300.0 / n_pts)))
    ax.scatter(L[used], D[used], s=22 * ms, c="#333333", lw=0, zorder=3,
               label=f"{unit}s used (N = {thousands(int(used.sum()))})")
    if cens.any():
        ax.scatter(
            L[cens],
            D[cens],
            s=26 * ms,
            facecolors="none",
            edgecolors="#555555",
            zorder=3,
            label=f"censored, not fitted (N = {thousands(int(cens.sum()))})",
        )
    if other.any():
        ax.scatter(L[other], D[other], s=18 * ms, marker="x", c="#555555", zorder=3, label="excluded")
    under = ok & (flag == "under_displaced")
    over = ok & (flag == "over_displaced")
    for sel, colour, what in ((under, "#1565c0", "under"), (over, "#c62828", "over")):
        if sel.any():
            ax.scatter(
                L[sel],
                D[sel],
                s=80 * max(ms, 0.4),
                facecolors="none",
                edgecolors=colour,
                lw=1.6 * max(ms, 0.5),
                zorder=4,
                label=f"{what}-displaced outlier (N = {thousands(int(sel.sum()))})",
            )

    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlim(grid[0], grid[-1])
    ymin = np.nanmin(D[ok]) / 3.0
    ymax = np.nanmax(D[ok]) * 3.0
    ax.set_ylim(ymin, ymax)
    ax.set_xlabel(_LABELS["length_m"].replace(" (m)", "") + (" of linked system" if unit == "system" else "")
                  + ", L (m)", fontsize=11)
    ax.set_ylabel(f"{quantity}, {sym} (m)", fontsize=11)
    ax.tick_params(which="both", labelsize=8.5)
    ax.grid(True, which="both", lw=0.3, alpha=0.5)
    from matplotlib.ticker import FuncFormatter, LogLocator, NullFormatter

    for axis, (lo_, hi_) in ((ax.xaxis, ax.get_xlim()), (ax.yaxis, ax.get_ylim())):
        # plain numbers on both axes: 1-2-5 over up to three decades, powers of ten beyond
        fmt = FuncFormatter(_label_125 if np.log10(hi_ / lo_) <= 3.0 else _label_1)
        axis.set_major_locator(LogLocator(base=10.0))
        axis.set_minor_locator(LogLocator(base=10.0, subs=(2.0, 5.0)))
        axis.set_major_formatter(fmt)
        axis.set_minor_formatter(fmt if np.log10(hi_ / lo_) <= 3.0 else NullFormatter())
    ax.set_title(f"{quantity}-length scaling, {sym} = \u03b3 L\u207f ({sym}, L in m)", fontsize=12)
    if disp == "throw":
        ax.text(
            0.99,
            0.01,
            f"published D/L (dip-slip D) drawn as throw: T = D sin({dip:.0f}\u00b0), median dip",
            transform=ax.transAxes,
            ha="right",
            va="bottom",
            fontsize=7.5,
            color="#555555",
        )
    fig.tight_layout()
    # inside the axes, compact, where it hides the fewest points (the fits and the data)
    pts = [np.c_[L[ok], D[ok]]] + [np.c_[grid, f.predict(grid)] for f in result.fits.values() if f.fitted]
    clear_legend(ax, np.vstack(pts), spots=("upper left", "lower right", "upper right", "lower left"),
                 fontsize=7, framealpha=0.9, handlelength=1.8, borderpad=0.4, labelspacing=0.3)
    flagged = np.flatnonzero(under | over)
    if label_outliers and max_labels > 0 and flagged.size:
        # the longest outliers first; a label that would overlap is skipped
        placed = place_labels(ax, np.c_[L[flagged], D[flagged]], [str(u) for u in pop["unit_id"].to_numpy()[flagged]],
                              priority=L[flagged], max_labels=max_labels, fontsize=7.5)
        if len(placed) < flagged.size:
            ax.text(0.01, 0.99, "ids: " + shown_note(len(placed), int(flagged.size), "outliers",
                                                     "the longest, without overlaps").replace(" shown", " labelled"),
                    transform=ax.transAxes, ha="left", va="top", fontsize=7.5, color="#555555")
    return bounded(fig)


@glyph_safe
def size_figure(
    fits: Mapping[str, PowerLawFit],
    *,
    detection_limits: Mapping[str, float | None] | None = None,
    alternatives: bool = True,
    figsize: tuple[float, float] | None = None,
    max_points: int = 2000,
) -> Figure:
    """Cumulative frequency (CCDF) plots with the fitted power laws.

    Parameters
    ----------
    fits : mapping of str to PowerLawFit
        One panel per variable (e.g. ``length_m``, ``max_throw_m``).
    detection_limits : mapping, optional
        Detection limit per variable, drawn as a vertical line.
    alternatives : bool
        Also draw the fitted exponential and log-normal tails.
    figsize : tuple of float, optional
        Inches; default 5.2 per panel by 4.6.
    max_points : int
        Most data points drawn per panel: beyond it the points are thinned
        evenly in log rank, keeping every point of the upper tail (the
        legend says how many were drawn).

    Returns
    -------
    matplotlib.figure.Figure

    Notes
    -----
    Empirical P(X >= x) on log-log axes; the models are scaled by the tail
    fraction n_tail / n so that they join the data at x_min (Clauset,
    Shalizi & Newman 2009, fig. 1 style).
    """
    detection_limits = dict(detection_limits or {})
    names = list(fits)
    k = max(1, len(names))
    fig = Figure(figsize=figsize or (min(5.2 * k, 22.0), 4.6), dpi=170)
    for i, var in enumerate(names):
        f = fits[var]
        ax = fig.add_subplot(1, k, i + 1)
        xs, p = ccdf(f.values)
        label = _LABELS.get(var, var)
        if xs.size == 0:
            ax.text(0.5, 0.5, "no data", ha="center", va="center", transform=ax.transAxes)
            ax.set_axis_off()
            continue
        keep = _thin_ccdf(xs.size, max_points)
        drawn = (f"; {thousands(keep.size)} drawn, every point of the upper tail" if keep.size < xs.size else "")
        ax.loglog(xs[keep], p[keep], "o", ms=3.5, mfc="none", mec="#333333",
                  label=f"data (N = {thousands(f.n)}{drawn})")
        if f.fitted:
            g = np.logspace(np.log10(f.x_min), np.log10(xs.max()), 100)
            ax.loglog(
                g,
                f.ccdf_model(g, "power_law"),
                color="#1f4e9c",
                lw=2.0,
                label=(
                    f"power law \u03b1 = {f.alpha:.2f} \u00b1 {f.se:.2f}"
                    + (f", p_gof = {f.gof_p:.2f}" if np.isfinite(f.gof_p) else "")
                ),
            )
            if alternatives and np.isfinite(f.exp_rate):
                ax.loglog(
                    g,
                    f.ccdf_model(g, "exponential"),
                    color="#c25b00",
                    ls="--",
                    lw=1.3,
                    label=f"exponential (LR {f.lr_exponential:+.2f}, p = {f.p_exponential:.2f})",
                )
            if alternatives and np.isfinite(f.lognormal_sigma):
                ax.loglog(
                    g,
                    f.ccdf_model(g, "lognormal"),
                    color="#2a7d2a",
                    ls="-.",
                    lw=1.3,
                    label=f"log-normal (LR {f.lr_lognormal:+.2f}, p = {f.p_lognormal:.2f})",
                )
            ax.axvline(
                f.x_min, color="#1f4e9c", ls=":", lw=1.0, label=f"x_min = {f.x_min:.3g} (n_tail = {f.n_tail})"
            )
        else:
            ax.text(0.03, 0.03, f"not fitted: {f.reason}", transform=ax.transAxes, fontsize=7)
        det = detection_limits.get(var)
        if det is not None and np.isfinite(det) and det > 0:
            unit = " m" if var.endswith("_m") else ""
            ax.axvline(det, color="#c62828", ls="--", lw=1.0, label=f"detection limit {det:.3g}{unit}")
        ax.set_xlabel(label, fontsize=11)
        ax.set_ylabel("P(X \u2265 x)", fontsize=11)
        ax.set_ylim(0.5 / max(f.n, 1), 1.5)
        ax.grid(True, which="both", lw=0.3, alpha=0.5)
        ax.tick_params(labelsize=9)
        # label 1-2-5 only: every minor label on a log axis spanning a few decades overlaps
        from matplotlib.ticker import FuncFormatter

        ax.xaxis.set_major_formatter(FuncFormatter(_label_125))
        ax.xaxis.set_minor_formatter(FuncFormatter(_label_125))
        ax.set_title(f"Cumulative frequency: {label.split(' (')[0].lower()}", fontsize=11)
        ax.legend(fontsize=7, loc="lower left", framealpha=0.85)
    fig.suptitle("Size distributions (LR > 0 favours the power law; Clauset et al. 2009)", fontsize=10)
    fig.tight_layout()
    return bounded(fig)


def _thin_ccdf(n: int, max_points: int) -> np.ndarray:
    """Pick at most about ``max_points`` of ``n`` sorted CCDF points, even in log rank from the top.

    The largest values (rank 1, 2, 3... from the top) are all kept until the log spacing
    exceeds one rank; the crowded body is thinned.
    """
    if n <= max_points:
        return np.arange(n)
    rank = np.unique(np.round(np.geomspace(1, n, max_points)).astype(np.int64))
    return np.sort(n - rank)


def _plain(value: float) -> str:
    """Write a positive number plainly (2000, 0.5); in powers of ten only outside 0.001 to 10^7."""
    if 1e-3 <= value < 1e7:
        return np.format_float_positional(float(f"{value:.6g}"), trim="-")
    return f"{value:.0e}".replace("e+0", "e").replace("e-0", "e-")


def _label_125(value: float, _pos=None) -> str:
    """Tick label for 1, 2 and 5 times a power of ten; empty otherwise."""
    if not np.isfinite(value) or value <= 0:
        return ""
    mant = value / 10 ** np.floor(np.log10(value) + 1e-9)
    return _plain(value) if np.isclose(mant, (1.0, 2.0, 5.0), rtol=1e-6).any() else ""


def _label_1(value: float, _pos=None) -> str:
    """Tick label for a power of ten; empty otherwise."""
    if not np.isfinite(value) or value <= 0:
        return ""
    mant = value / 10 ** np.floor(np.log10(value) + 1e-9)
    return _plain(value) if np.isclose(mant, 1.0, rtol=1e-6) or np.isclose(mant, 10.0, rtol=1e-6) else ""
