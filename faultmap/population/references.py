"""Published displacement-length ranges and where a population sits against them.

Ranges of D_max / L and of the scaling exponent n from the literature, each
with its source and the confidence of the value (``verified`` or
``memory``), and the comparison of a population's ratios and fitted
exponents with them. Pure functions, no file I/O.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from faultmap.population.linefit import LineFit

__all__ = ["REFERENCE_RANGES", "ReferenceRange", "compare_to_references"]


@dataclass(frozen=True)
class ReferenceRange:
    """A published range of D/L ratio or of the scaling exponent.

    Attributes
    ----------
    key : str
        Short identifier.
    source : str
        Authors and year, as printed on figures.
    quantity : str
        ``d_l_ratio`` (D_max / L, dimensionless) or ``exponent`` (n).
    lo, hi : float
        Range bounds; ``lo == hi`` for a single published value.
    confidence : str
        ``verified`` (seen in the published text) or ``memory``.
    note : str
        What the range describes.
    """

    key: str
    source: str
    quantity: str
    lo: float
    hi: float
    confidence: str
    note: str


#: Published D-L references (see docs/methods/scaling.md, "Sources and
#: check values", for their confidence). Published ratios are of maximum
#: *displacement* (dip slip); a throw-based ratio is smaller by sin(dip).
REFERENCE_RANGES: tuple[ReferenceRange, ...] = (
    ReferenceRange(
        "schlische1996",
        "Schlische et al. (1996)",
        "d_l_ratio",
        0.03,
        0.03,
        "verified",
        "D ~ 0.03 L for small rift normal faults",
    ),
    ReferenceRange(
        "kim_sanderson2005",
        "Kim & Sanderson (2005); Torabi & Berg (2011)",
        "d_l_ratio",
        0.01,
        0.1,
        "memory",
        "typical normal-fault Dmax/L",
    ),
    ReferenceRange(
        "cowie_scholz1992",
        "Cowie & Scholz (1992)",
        "d_l_ratio",
        1e-3,
        1e-1,
        "memory",
        "gamma range for n = 1",
    ),
    ReferenceRange(
        "walsh2002", "Walsh et al. (2002)", "exponent", 1.0, 1.5, "verified", "n between 1 and 1.5"
    ),
    ReferenceRange(
        "clark_cox1996",
        "Clark & Cox (1996)",
        "exponent",
        1.0,
        1.0,
        "verified",
        "most data sets consistent with n = 1",
    ),
    ReferenceRange(
        "walsh_watterson1988", "Walsh & Watterson (1988)", "exponent", 2.0, 2.0, "memory", "n = 2"
    ),
)


def compare_to_references(
    ratios: Any,
    fits: Mapping[str, LineFit] | None = None,
    *,
    references: Sequence[ReferenceRange] = REFERENCE_RANGES,
) -> pd.DataFrame:
    """Place a population against published D/L ratios and exponents.

    Parameters
    ----------
    ratios : array_like
        Per-unit D_max / L (dimensionless); non-finite values are ignored.
    fits : mapping of str to LineFit, optional
        Fitted lines; each fitted model is compared with the exponent ranges.
    references : sequence of ReferenceRange
        Published ranges (default :data:`REFERENCE_RANGES`).

    Returns
    -------
    pandas.DataFrame
        One row per (reference, compared quantity): ``source``, ``quantity``,
        ``ref_lo``, ``ref_hi``, ``confidence``, ``compared``
        (``population`` or a model name), ``value`` (population median ratio
        or fitted exponent), ``value_lo``/``value_hi`` (16th/84th percentile
        of the ratios, or the exponent confidence interval), ``frac_below``,
        ``frac_within``, ``frac_above`` (ratios only), ``consistent`` (the
        exponent interval overlaps the range, or the median ratio lies in
        it), ``n_faults``.

    Notes
    -----
    Sources: Schlische et al. (1996); Walsh et al. (2002); Clark & Cox
    (1996) (verified); Cowie & Scholz (1992); Walsh & Watterson (1988);
    Kim & Sanderson (2005); Torabi & Berg (2011) (from memory). Published
    ratios are of maximum displacement, not throw.
    """
    r = np.asarray(ratios, dtype=float)
    r = r[np.isfinite(r) & (r > 0)]
    rows: list[dict[str, Any]] = []
    for ref in references:
        base = {
            "source": ref.source,
            "reference": ref.key,
            "quantity": ref.quantity,
            "ref_lo": ref.lo,
            "ref_hi": ref.hi,
            "confidence": ref.confidence,
            "note": ref.note,
        }
        if ref.quantity == "d_l_ratio":
            if r.size == 0:
                rows.append({**base, "compared": "population", "n_faults": 0})
                continue
            med = float(np.median(r))
            p16, p84 = (float(v) for v in np.percentile(r, [16, 84]))
            below = float(np.mean(r < ref.lo))
            above = float(np.mean(r > ref.hi))
            within = float("nan") if ref.lo == ref.hi else 1.0 - below - above
            consistent = (p16 <= ref.lo <= p84) if ref.lo == ref.hi else (ref.lo <= med <= ref.hi)
            rows.append(
                {
                    **base,
                    "compared": "population",
                    "value": med,
                    "value_lo": p16,
                    "value_hi": p84,
                    "frac_below": below,
                    "frac_within": within,
                    "frac_above": above,
                    "consistent": bool(consistent),
                    "n_faults": int(r.size),
                }
            )
        elif ref.quantity == "exponent" and fits:
            for name, f in fits.items():
                if not f.fitted:
                    continue
                lo, hi = f.exponent_ci
                if not np.isfinite(lo):
                    lo, hi = f.exponent, f.exponent
                consistent = bool(lo <= ref.hi and hi >= ref.lo)
                rows.append(
                    {
                        **base,
                        "compared": name,
                        "value": f.exponent,
                        "value_lo": lo,
                        "value_hi": hi,
                        "consistent": consistent,
                        "n_faults": f.n,
                    }
                )
    cols = [
        "source",
        "reference",
        "quantity",
        "ref_lo",
        "ref_hi",
        "confidence",
        "note",
        "compared",
        "value",
        "value_lo",
        "value_hi",
        "frac_below",
        "frac_within",
        "frac_above",
        "consistent",
        "n_faults",
    ]
    return pd.DataFrame(rows).reindex(columns=cols)
