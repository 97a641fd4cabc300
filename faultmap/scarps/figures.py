"""Figure of scarp degradation: kappa t along strike for the largest faults, and kappa t against throw.

Returns a :class:`matplotlib.figure.Figure` built without pyplot's global
state; bounded in size whatever the number of faults (the largest faults are
drawn along strike and the figure says how many).
"""

from __future__ import annotations

import numpy as np
from matplotlib.figure import Figure

from faultmap.figure_kit import bounded, shown_note

__all__ = ["degradation_figure"]

#: Above this many faults in kappa t against throw, markers shrink and turn translucent.
_DENSE_POINTS = 300
#: With that many, error bars are drawn on this many faults (the largest throws) only.
_ERROR_BARS_MAX = 30


def degradation_figure(faults, stations, *, n_largest: int = 4, pixel_size_m: float | None = None) -> Figure:
    """Kappa t along strike (largest faults) and per-fault kappa t against maximum throw.

    Parameters
    ----------
    faults : pandas.DataFrame
        ``fault_id``, ``max_throw_m`` and the kappa t fields of
        :func:`faultmap.scarps.fault_degradation.summarise_degradation`.
    stations : pandas.DataFrame
        ``fault_id``, ``dist_m`` and the fields of
        :func:`faultmap.scarps.fault_degradation.station_kappa_t`.
    n_largest : int
        Faults (by maximum throw) drawn along strike.
    pixel_size_m : float, optional
        Draws the resolution limit (kappa t of a diffusion length of half a pixel).

    Returns
    -------
    matplotlib.figure.Figure

    Notes
    -----
    In kappa t against throw, scarps of one event keep kappa t whatever
    their height, while cumulative scarps (several events) show the older
    surface's larger kappa t on the larger throws (Avouac 1993, from memory).
    """
    fig = Figure(figsize=(11.0, 4.6))
    ax1, ax2 = fig.subplots(1, 2)
    mt = (
        faults["max_throw_m"].to_numpy(dtype=float)
        if "max_throw_m" in faults
        else np.full(len(faults), np.nan)
    )
    order = np.argsort(-np.nan_to_num(mt, nan=-np.inf))[: int(n_largest)]
    lim = None if pixel_size_m is None else (0.5 * float(pixel_size_m)) ** 2
    fid_all = stations["fault_id"].to_numpy()
    flag = stations["kappa_t_flag"].to_numpy(dtype=object)
    kt = stations["kappa_t_m2"].to_numpy(dtype=float)
    ub = stations["kappa_t_bound_m2"].to_numpy(dtype=float)
    dist = stations["dist_m"].to_numpy(dtype=float)
    colours = [
        "tab:blue",
        "tab:orange",
        "tab:green",
        "tab:red",
        "tab:purple",
        "tab:brown",
        "tab:pink",
        "tab:olive",
    ]
    any_point = False
    for k, i in enumerate(order):
        fid = faults["fault_id"].to_numpy()[i]
        c = colours[k % len(colours)]
        sel = fid_all == fid
        okm = sel & (flag == "ok")
        um = sel & (flag == "unresolved")
        if okm.any():
            ax1.plot(dist[okm] / 1e3, kt[okm], "o", ms=3, color=c, label=f"fault {fid}")
            any_point = True
        if um.any():
            ax1.plot(
                dist[um] / 1e3,
                ub[um],
                "v",
                ms=3,
                color=c,
                alpha=0.5,
                label=None if okm.any() else f"fault {fid} (upper bounds)",
            )
            any_point = True
    if lim is not None:
        ax1.axhline(lim, color="0.4", lw=0.8, ls="--", label="resolution limit")
        ax2.axhline(lim, color="0.4", lw=0.8, ls="--")
    ax1.set_xlabel("distance along the trace (km)")
    ax1.set_ylabel("\u03bat (m\u00b2)")
    ax1.set_title("\u03bat along strike (\u25bc upper bound where unresolved)", fontsize=10)
    if any_point:
        ax1.set_yscale("log")
        ax1.legend(fontsize=7, loc="best")
    else:
        ax1.text(0.5, 0.5, "no station with a fitted scarp", transform=ax1.transAxes, ha="center")
    fl = (
        faults["kappa_t_flag"].to_numpy(dtype=object)
        if "kappa_t_flag" in faults
        else np.full(len(faults), "none")
    )
    fk = (
        faults["kappa_t_m2"].to_numpy(dtype=float) if "kappa_t_m2" in faults else np.full(len(faults), np.nan)
    )
    fe = (
        faults["kappa_t_err_m2"].to_numpy(dtype=float)
        if "kappa_t_err_m2" in faults
        else np.full(len(faults), np.nan)
    )
    fb = (
        faults["kappa_t_bound_m2"].to_numpy(dtype=float)
        if "kappa_t_bound_m2" in faults
        else np.full(len(faults), np.nan)
    )
    m = (fl == "measured") & np.isfinite(mt) & (mt > 0)
    u = (fl == "upper_bound") & np.isfinite(mt) & (mt > 0) & np.isfinite(fb)
    lo = (fl == "lower_bound") & np.isfinite(mt) & (mt > 0) & np.isfinite(fb)
    # at regional size (thousands of faults) small translucent markers, and error bars on the
    # largest faults only, keep the cloud readable
    dense = int(m.sum() + u.sum() + lo.sum()) > _DENSE_POINTS
    ms, alpha = (1.8, 0.4) if dense else (4.0, 1.0)
    bars = m.copy()
    if dense and m.sum() > _ERROR_BARS_MAX:
        keep = np.flatnonzero(m)[np.argsort(-mt[m])[:_ERROR_BARS_MAX]]
        bars = np.zeros_like(m)
        bars[keep] = True
    if m.any():
        ax2.plot(mt[m], fk[m], "o", ms=ms, color="tab:blue", alpha=alpha, rasterized=dense,
                 label="measured" if dense else "measured (\u00b11\u03c3)")
        ax2.errorbar(mt[bars], fk[bars], yerr=np.nan_to_num(fe[bars]), fmt="none", ecolor="tab:blue", lw=0.8,
                     label=(f"\u00b11\u03c3 on the {int(bars.sum())} largest" if dense else None))
    if u.any():
        ax2.plot(mt[u], fb[u], "v", ms=ms + 1, color="tab:gray", alpha=alpha, rasterized=dense,
                 label="upper bound (fresher than)")
    if lo.any():
        ax2.plot(mt[lo], fb[lo], "^", ms=ms + 1, color="tab:red", alpha=alpha, rasterized=dense,
                 label="lower bound (broader than the profiles)")
    ax2.set_xlabel("maximum throw (m)")
    ax2.set_ylabel("\u03bat (m\u00b2)")
    ax2.set_title("per-fault \u03bat against throw", fontsize=10)
    if m.any() or u.any() or lo.any():
        ax2.set_xscale("log")
        ax2.set_yscale("log")
        if dense:  # below the axes: a legend over a cloud of thousands of points hides it
            ax2.legend(fontsize=7, loc="upper center", bbox_to_anchor=(0.5, -0.16), ncol=2, markerscale=2.5)
        else:
            ax2.legend(fontsize=7, loc="best")
    else:
        ax2.text(0.5, 0.5, "no fault with a kappa t", transform=ax2.transAxes, ha="center")
    fig.suptitle(
        "Scarp degradation (diffusion fit, \u03bat = diffusivity \u00d7 age); "
        + shown_note(len(order), len(faults), "faults", "the largest by maximum throw")
        + " along strike",
        fontsize=10,
    )
    fig.tight_layout()
    return bounded(fig)
