"""How the detection limit of the data bears on a fitted size distribution.

The public name is listed in :mod:`faultmap.population`.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np

if TYPE_CHECKING:
    from faultmap.population.powerlaw_fit import PowerLawFit

__all__ = ["detection_effects"]


def detection_effects(
    x: Any,
    fit: PowerLawFit,
    *,
    detection_limit: float | None,
) -> dict[str, Any]:
    """How the detection limit bears on the smallest faults.

    Parameters
    ----------
    x : array_like
        Values of the variable (same unit as the limit).
    fit : PowerLawFit
        The power-law fit of x.
    detection_limit : float or None
        Smallest value the data resolve (e.g. the detection throw of the
        DEM, m); None or NaN skips the report.

    Returns
    -------
    dict
        ``detection_limit``, ``n_below_detection``, ``frac_below_detection``,
        ``n_between_detection_and_x_min``, ``x_min_over_detection``,
        ``detection_note``.

    Notes
    -----
    Our rule (stated in the note): when x_min is less than twice the
    detection limit, the smallest faults are likely under-counted
    (truncation; common practice) and alpha may be biased low.
    """
    v = np.asarray(x, dtype=float)
    v = v[np.isfinite(v)]
    out: dict[str, Any] = {
        "detection_limit": np.nan,
        "n_below_detection": np.nan,
        "frac_below_detection": np.nan,
        "n_between_detection_and_x_min": np.nan,
        "x_min_over_detection": np.nan,
        "detection_note": "",
    }
    if detection_limit is None or not np.isfinite(detection_limit) or detection_limit <= 0:
        out["detection_note"] = "no detection limit given"
        return out
    nb = int(np.sum(v < detection_limit))
    out.update(
        detection_limit=float(detection_limit),
        n_below_detection=nb,
        frac_below_detection=nb / v.size if v.size else np.nan,
    )
    if fit.fitted:
        ratio = fit.x_min / detection_limit
        out["x_min_over_detection"] = ratio
        out["n_between_detection_and_x_min"] = int(np.sum((v >= detection_limit) & (v < fit.x_min)))
        if ratio < 2.0:
            out["detection_note"] = (
                f"x_min is {ratio:.2g} x the detection limit: the smallest "
                "faults are likely under-counted; read alpha with caution"
            )
        else:
            out["detection_note"] = (
                f"x_min is {ratio:.2g} x the detection limit: the fitted "
                "tail lies above it; the roll-over below x_min is "
                "consistent with truncation"
            )
    else:
        out["detection_note"] = f"{nb} value(s) below the detection limit; no fit"
    return out
