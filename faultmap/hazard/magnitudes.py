"""Empirical earthquake-magnitude relations and seismic moment.

Every regression coefficient used by faultmap lives in ONE table,
:data:`RELATIONS`, a tuple of frozen :class:`Relation` records that carry the
published source, the coefficients, the standard deviation, the data range the
regression was fitted on and how sure we are of each number (``verified`` =
read in the published text or a faithful copy; ``from memory`` = recalled,
to be checked against the primary source before it is relied on).

The functions are pure: arrays in, arrays out; they never print, never read
files and return warnings as lists of strings.

Notes
-----
Sources:

* Wells, D. L. & Coppersmith, K. J. (1994). New empirical relationships
  among magnitude, rupture length, rupture width, rupture area, and surface
  displacement. Bull. Seismol. Soc. Am. 84(4), 974-1002. Tables 2A and 2B.
* Hanks, T. C. & Bakun, W. H. (2002). A bilinear source-scaling model for
  M-log A observations of continental earthquakes. Bull. Seismol. Soc. Am.
  92(5), 1841-1846.
* Hanks, T. C. & Kanamori, H. (1979). A moment magnitude scale. J. Geophys.
  Res. 84, 2348-2350; written here in the IASPEI (2013) SI form
  Mw = (2/3) (log10 M0 - 9.1) with M0 in N m.

The regressions are one-directional: a magnitude-on-length relation is not
the inverse of the length-on-magnitude relation (Wells & Coppersmith 1994),
so magnitudes are always computed with the M-on-X rows and displacements
with the X-on-M rows.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np
from numpy.typing import ArrayLike

if TYPE_CHECKING:  # pandas is imported where a table is built (keeps tool listing light)
    import pandas as pd

from faultmap.errors import InputError, ParameterError

__all__ = [
    "Relation",
    "RELATIONS",
    "MAGNITUDE_KEYS",
    "PREFERRED_RULES",
    "SHEAR_MODULUS_PA",
    "get_relation",
    "magnitude",
    "magnitude_sigma",
    "displacement_from_magnitude",
    "range_warnings",
    "downdip_width_km",
    "seismic_moment",
    "moment_magnitude",
    "moment_from_magnitude",
    "magnitude_table",
    "AREA_RULE_KEYS",
    "area_rule_weights",
    "preferred_magnitude",
]

#: Crustal shear modulus, Pa (common practice; see docs/methods/hazard.md).
SHEAR_MODULUS_PA = 3.0e10


@dataclass(frozen=True)
class Relation:
    """One published regression between magnitude and a fault dimension.

    Attributes
    ----------
    key : str
        Short name used in output fields (``mag_<key>``).
    source : str
        Authors, year, table.
    form : str
        ``"m_on_x"``: M = a + b log10(X); ``"x_on_m"``: log10(X) = a + b M.
    quantity : str
        The fault dimension X: ``srl`` (surface rupture length), ``ra``
        (rupture area), ``md`` (maximum displacement per event), ``ad``
        (average displacement per event).
    unit : str
        Unit of X (``km``, ``km2``, ``m``).
    slip_type : str
        ``normal`` or ``all`` (all slip types).
    a, b : float
        Intercept and slope.
    sigma : float
        Standard deviation (magnitude units for ``m_on_x``, log10 units of X
        for ``x_on_m``), see ``sigma_kind``.
    n : int
        Number of earthquakes in the regression (0 when not given).
    mag_range : tuple of float
        Magnitude range of the data.
    x_range : tuple of float
        Range of X in the data, in ``unit``.
    confidence : str
        ``verified`` or ``from memory`` for a, b and sigma.
    range_confidence : str
        ``verified`` or ``from memory`` for the data ranges.
    break_x, a_above, b_above, sigma_above : float or None
        Bilinear relations (Hanks & Bakun 2002): above ``break_x`` use
        ``a_above``, ``b_above`` and ``sigma_above``.
    sigma_kind : str
        ``residual`` (the published scatter of the observations about the
        line) or ``adopted`` (no published prediction scatter; faultmap's
        documented stand-in, named in ``note``). Every ``sigma`` is a
        scatter of single earthquakes, so sigmas of different relations are
        comparable.
    note : str
        Where each number was checked, and cautions.
    """

    key: str
    source: str
    form: str
    quantity: str
    unit: str
    slip_type: str
    a: float
    b: float
    sigma: float
    n: int
    mag_range: tuple[float, float]
    x_range: tuple[float, float]
    confidence: str
    range_confidence: str
    break_x: float | None = None
    a_above: float | None = None
    b_above: float | None = None
    sigma_above: float | None = None
    sigma_kind: str = "residual"
    note: str = ""


_WC94 = "Wells & Coppersmith (1994), BSSA 84(4), 974-1002"

# One row per relation, laid out as a table.
# fmt: off
#: The one table of relation coefficients used anywhere in faultmap.
RELATIONS: tuple[Relation, ...] = (
    Relation(
        key="srl_wc94", source=_WC94 + ", Table 2A", form="m_on_x",
        quantity="srl", unit="km", slip_type="normal",
        a=4.86, b=1.32, sigma=0.34, n=15,
        mag_range=(5.2, 7.3), x_range=(2.5, 41.0),
        confidence="verified", range_confidence="verified",
        note="Table 2A row N read in a copy of the paper; check 30 km -> 6.8098.",
    ),
    Relation(
        key="srl_all_wc94", source=_WC94 + ", Table 2A", form="m_on_x",
        quantity="srl", unit="km", slip_type="all",
        a=5.08, b=1.16, sigma=0.28, n=77,
        mag_range=(5.2, 8.1), x_range=(1.3, 432.0),
        confidence="from memory", range_confidence="from memory",
        note="a, b seen in a faithful copy (OpenSHA glossary); sigma, n and "
        "ranges from memory.",
    ),
    Relation(
        key="ra_wc94", source=_WC94 + ", Table 2A", form="m_on_x",
        quantity="ra", unit="km2", slip_type="normal",
        a=3.93, b=1.02, sigma=0.25, n=22,
        mag_range=(5.2, 7.3), x_range=(19.0, 900.0),
        confidence="verified", range_confidence="from memory",
        note="a, b, sigma seen in a faithful copy (OpenSHA glossary); n and "
        "ranges from memory.",
    ),
    Relation(
        key="ra_all_wc94", source=_WC94 + ", Table 2A", form="m_on_x",
        quantity="ra", unit="km2", slip_type="all",
        a=4.07, b=0.98, sigma=0.24, n=148,
        mag_range=(4.8, 7.9), x_range=(2.2, 5184.0),
        confidence="verified", range_confidence="from memory",
        note="a, b, sigma seen in a faithful copy (OpenSHA glossary); n and "
        "ranges from memory.",
    ),
    Relation(
        key="hb02", source="Hanks & Bakun (2002), BSSA 92(5), 1841-1846",
        form="m_on_x", quantity="ra", unit="km2", slip_type="all",
        a=3.98, b=1.0, sigma=0.24, n=0,
        mag_range=(4.8, 7.9), x_range=(2.2, 5184.0),
        confidence="verified", range_confidence="from memory",
        break_x=537.0, a_above=3.07, b_above=4.0 / 3.0, sigma_above=0.24,
        sigma_kind="adopted",
        note="M = log A + 3.98 +- 0.03 (A <= 537 km2), 4/3 log A + 3.07 +- "
        "0.04 above (abstract, verified). The +- values are the standard "
        "errors of the intercepts, not the scatter of single earthquakes, so "
        "they are NOT used as sigma. Adopted rule (faultmap, no published "
        "prediction scatter found): sigma = 0.24, the residual sigma of Wells "
        "& Coppersmith (1994) M on RA for all slip types, the continental data "
        "set Hanks & Bakun fitted (from memory). The upper branch rests on "
        "large strike-slip ruptures (from memory); see preferred_magnitude.",
    ),
    Relation(
        key="md_wc94", source=_WC94 + ", Table 2B", form="m_on_x",
        quantity="md", unit="m", slip_type="normal",
        a=6.61, b=0.71, sigma=0.34, n=16,
        mag_range=(5.2, 7.3), x_range=(0.08, 6.1),
        confidence="from memory", range_confidence="from memory",
        note="Maximum displacement in ONE event, not cumulative throw.",
    ),
    Relation(
        key="md_all_wc94", source=_WC94 + ", Table 2B", form="m_on_x",
        quantity="md", unit="m", slip_type="all",
        a=6.69, b=0.74, sigma=0.40, n=80,
        mag_range=(5.2, 8.1), x_range=(0.01, 14.6),
        confidence="from memory", range_confidence="from memory",
        note="Maximum displacement in ONE event, not cumulative throw.",
    ),
    Relation(
        key="ad_wc94", source=_WC94 + ", Table 2B", form="m_on_x",
        quantity="ad", unit="m", slip_type="normal",
        a=6.78, b=0.65, sigma=0.33, n=12,
        mag_range=(6.0, 7.3), x_range=(0.08, 2.1),
        confidence="from memory", range_confidence="from memory",
        note="Average displacement in ONE event; not significant at 95% for "
        "some slip types (from memory).",
    ),
    Relation(
        key="ad_all_wc94", source=_WC94 + ", Table 2B", form="m_on_x",
        quantity="ad", unit="m", slip_type="all",
        a=6.93, b=0.82, sigma=0.39, n=56,
        mag_range=(5.6, 8.1), x_range=(0.05, 8.0),
        confidence="from memory", range_confidence="from memory",
        note="Average displacement in ONE event.",
    ),
    Relation(
        key="ad_on_m_wc94", source=_WC94 + ", Table 2B", form="x_on_m",
        quantity="ad", unit="m", slip_type="normal",
        a=-4.45, b=0.63, sigma=0.33, n=12,
        mag_range=(6.0, 7.3), x_range=(0.08, 2.1),
        confidence="from memory", range_confidence="from memory",
        note="log10(AD) on M; used for the characteristic single-event "
        "displacement in recurrence intervals.",
    ),
    Relation(
        key="ad_on_m_all_wc94", source=_WC94 + ", Table 2B", form="x_on_m",
        quantity="ad", unit="m", slip_type="all",
        a=-4.80, b=0.69, sigma=0.36, n=56,
        mag_range=(5.6, 8.1), x_range=(0.05, 8.0),
        confidence="from memory", range_confidence="from memory",
        note="log10(AD) on M, all slip types.",
    ),
)
# fmt: on

_BY_KEY = {r.key: r for r in RELATIONS}

#: Keys of the magnitude (M-on-X) relations, in output order.
MAGNITUDE_KEYS: tuple[str, ...] = tuple(r.key for r in RELATIONS if r.form == "m_on_x")

#: Rules for the preferred magnitude (see :func:`preferred_magnitude`).
PREFERRED_RULES: tuple[str, ...] = ("area_mean",) + MAGNITUDE_KEYS


def get_relation(key: str) -> Relation:
    """Return the :class:`Relation` named ``key`` from :data:`RELATIONS`."""
    try:
        return _BY_KEY[key]
    except KeyError:
        raise ParameterError(f"unknown magnitude relation {key!r}; use one of {', '.join(_BY_KEY)}") from None


def _positive(x: ArrayLike, what: str) -> np.ndarray:
    arr = np.asarray(x, dtype=float)
    bad = np.isfinite(arr) & (arr <= 0)
    if np.any(bad):
        raise InputError(f"{what} must be > 0 (got {arr[bad].ravel()[0]!r}); fix the input")
    return arr


def magnitude(key: str, x: ArrayLike) -> np.ndarray:
    """Moment magnitude from a fault dimension with one M-on-X relation.

    Parameters
    ----------
    key : str
        Relation key in :data:`RELATIONS` with ``form == "m_on_x"``
        (e.g. ``"srl_wc94"``, ``"ra_wc94"``, ``"hb02"``).
    x : array_like
        The dimension in the relation's unit: surface rupture length (km),
        rupture area (km2) or single-event displacement (m). NaN gives NaN.

    Returns
    -------
    numpy.ndarray
        Moment magnitude, same shape as ``x``.

    Notes
    -----
    M = a + b log10(X) (Wells & Coppersmith 1994, Tables 2A-2B); Hanks &
    Bakun (2002) bilinear: M = log10 A + 3.98 for A <= 537 km2 and
    (4/3) log10 A + 3.07 above.
    """
    rel = get_relation(key)
    if rel.form != "m_on_x":
        raise ParameterError(
            f"relation {key!r} gives a displacement, not a magnitude; use displacement_from_magnitude"
        )
    arr = _positive(x, f"{rel.quantity} ({rel.unit})")
    with np.errstate(divide="ignore", invalid="ignore"):
        lx = np.log10(arr)
    mag = rel.a + rel.b * lx
    if rel.break_x is not None:
        mag = np.where(arr > rel.break_x, rel.a_above + rel.b_above * lx, mag)
    return mag


def magnitude_sigma(key: str, x: ArrayLike) -> np.ndarray:
    """Return the standard deviation of :func:`magnitude` for relation ``key`` at ``x``.

    Returns the relation's sigma (magnitude units) broadcast to the shape of
    ``x``, NaN where ``x`` is NaN: the scatter of single earthquakes about the
    line, published (``sigma_kind == "residual"``) or, for Hanks & Bakun
    (2002), who give only the standard errors of their intercepts, the
    adopted stand-in of :data:`RELATIONS` (``sigma_kind == "adopted"``).
    """
    rel = get_relation(key)
    arr = np.asarray(x, dtype=float)
    sig = np.where(np.isfinite(arr), rel.sigma, np.nan)
    if rel.break_x is not None:
        sig = np.where(np.isfinite(arr) & (arr > rel.break_x), rel.sigma_above, sig)
    return sig


def displacement_from_magnitude(mag: ArrayLike, *, key: str = "ad_on_m_wc94") -> np.ndarray:
    """Median single-event displacement (m) from magnitude, log10(D) = a + b M.

    Parameters
    ----------
    mag : array_like
        Moment magnitude.
    key : str, optional
        An ``x_on_m`` relation; default the normal-fault average-displacement
        regression of Wells & Coppersmith (1994, Table 2B; from memory).

    Returns
    -------
    numpy.ndarray
        Displacement in metres (the median of a log-normal whose log10
        standard deviation is the relation's sigma).
    """
    rel = get_relation(key)
    if rel.form != "x_on_m":
        raise ParameterError(
            f"relation {key!r} gives a magnitude; use an x_on_m relation such as 'ad_on_m_wc94'"
        )
    return 10.0 ** (rel.a + rel.b * np.asarray(mag, dtype=float))


def range_warnings(key: str, x: ArrayLike, *, labels: ArrayLike | None = None) -> list[str]:
    """Warnings for inputs outside the data range of relation ``key``.

    Parameters
    ----------
    key : str
        Relation key.
    x : array_like
        Inputs: the dimension X for ``m_on_x`` relations, the magnitude for
        ``x_on_m`` relations. NaN values are ignored.
    labels : array_like of str, optional
        One label per input (e.g. ``"fault 3"``) used in the messages.

    Returns
    -------
    list of str
        One message naming every input outside the range (empty if none).
    """
    rel = get_relation(key)
    arr = np.atleast_1d(np.asarray(x, dtype=float))
    lo, hi = rel.x_range if rel.form == "m_on_x" else rel.mag_range
    unit = rel.unit if rel.form == "m_on_x" else "M"
    what = rel.quantity.upper() if rel.form == "m_on_x" else "magnitude"
    if labels is None:
        labels = [f"input {i}" for i in range(arr.size)]
    labels = list(np.atleast_1d(labels))
    bad = np.flatnonzero(np.isfinite(arr) & ((arr < lo) | (arr > hi)))
    if bad.size == 0:
        return []
    items = [f"{labels[i]} ({arr[i]:.3g})" for i in bad[:20]]
    more = f" and {bad.size - 20} more" if bad.size > 20 else ""
    return [
        f"{key}: {what} outside the data range {lo:g}-{hi:g} {unit} of {rel.source} "
        f"(range {rel.range_confidence}) for {'; '.join(items)}{more}; "
        "treat those estimates as extrapolations"
    ]


def downdip_width_km(thickness_km: ArrayLike, dip_deg: ArrayLike) -> np.ndarray:
    """Down-dip rupture width W = thickness / sin(dip), km.

    Parameters
    ----------
    thickness_km : array_like
        Seismogenic thickness, km.
    dip_deg : array_like
        Fault dip, degrees, 0 < dip <= 90.

    Notes
    -----
    Geometry of a planar fault cutting the whole seismogenic layer.
    """
    dip = np.asarray(dip_deg, dtype=float)
    if np.any(np.isfinite(dip) & ((dip <= 0) | (dip > 90))):
        raise InputError("dip_deg must be in (0, 90]; fix the fault dips")
    return np.asarray(thickness_km, dtype=float) / np.sin(np.radians(dip))


def seismic_moment(
    area_m2: ArrayLike, slip_m: ArrayLike, *, shear_modulus_pa: float = SHEAR_MODULUS_PA
) -> np.ndarray:
    """Seismic moment M0 = mu A D, N m.

    Parameters
    ----------
    area_m2 : array_like
        Rupture area, m2.
    slip_m : array_like
        Average slip on the rupture, m.
    shear_modulus_pa : float, optional
        Shear modulus mu, Pa (default 3e10, common practice).

    Notes
    -----
    Aki (1966) definition of the seismic moment.
    """
    return shear_modulus_pa * np.asarray(area_m2, dtype=float) * np.asarray(slip_m, dtype=float)


def moment_magnitude(m0_nm: ArrayLike) -> np.ndarray:
    """Moment magnitude Mw = (2/3)(log10 M0 - 9.1), M0 in N m.

    Notes
    -----
    Hanks & Kanamori (1979) in the IASPEI (2013) SI form. The original
    dyne-cm form, (2/3) log10 M0 - 10.7, differs by about 0.033; faultmap
    uses the IASPEI form everywhere.
    """
    with np.errstate(divide="ignore", invalid="ignore"):
        return (2.0 / 3.0) * (np.log10(np.asarray(m0_nm, dtype=float)) - 9.1)


def moment_from_magnitude(mw: ArrayLike) -> np.ndarray:
    """Seismic moment (N m) from moment magnitude: M0 = 10**(1.5 Mw + 9.1)."""
    return 10.0 ** (1.5 * np.asarray(mw, dtype=float) + 9.1)


def magnitude_table(
    *,
    length_km: ArrayLike,
    area_km2: ArrayLike,
    max_disp_m: ArrayLike | None = None,
    avg_disp_m: ArrayLike | None = None,
    labels: ArrayLike | None = None,
    keys: tuple[str, ...] = MAGNITUDE_KEYS,
) -> tuple[pd.DataFrame, list[str]]:
    """Magnitudes and sigmas from every applicable relation.

    Parameters
    ----------
    length_km : array_like
        Surface rupture length, km.
    area_km2 : array_like
        Rupture area, km2.
    max_disp_m, avg_disp_m : array_like, optional
        Maximum and average displacement in a single event, m (NaN where
        unknown). Not cumulative throw.
    labels : array_like of str, optional
        Labels used in the range warnings.
    keys : tuple of str, optional
        Relations to evaluate (default all M-on-X relations).

    Returns
    -------
    table : pandas.DataFrame
        Columns ``mag_<key>`` and ``mag_<key>_sigma`` (NaN where the input
        is unknown).
    warnings : list of str
        Inputs outside the relations' data ranges.
    """
    length = np.atleast_1d(np.asarray(length_km, dtype=float))
    n = length.size
    inputs = {
        "srl": length,
        "ra": np.atleast_1d(np.asarray(area_km2, dtype=float)),
        "md": np.full(n, np.nan)
        if max_disp_m is None
        else np.broadcast_to(np.asarray(max_disp_m, dtype=float), (n,)),
        "ad": np.full(n, np.nan)
        if avg_disp_m is None
        else np.broadcast_to(np.asarray(avg_disp_m, dtype=float), (n,)),
    }
    cols: dict[str, np.ndarray] = {}
    warns: list[str] = []
    for key in keys:
        rel = get_relation(key)
        x = inputs[rel.quantity]
        cols[f"mag_{key}"] = magnitude(key, x)
        cols[f"mag_{key}_sigma"] = magnitude_sigma(key, x)
        warns += range_warnings(key, x, labels=labels)
    import pandas as pd

    return pd.DataFrame(cols), warns


#: Relations combined by the ``area_mean`` rule of :func:`preferred_magnitude`.
AREA_RULE_KEYS: tuple[str, ...] = ("ra_wc94", "hb02")


def area_rule_weights(table: pd.DataFrame) -> dict[str, np.ndarray]:
    """Weights of the area relations in the ``area_mean`` preferred magnitude.

    Parameters
    ----------
    table : pandas.DataFrame
        Output of :func:`magnitude_table` with the ``mag_<key>`` and
        ``mag_<key>_sigma`` columns of :data:`AREA_RULE_KEYS`.

    Returns
    -------
    dict of str to numpy.ndarray
        Normalised weights per relation key (they sum to 1 on every row; NaN
        where no relation gives a magnitude).

    Notes
    -----
    Inverse-variance weights, w_i = 1 / sigma_i**2, from the sigma columns
    (comparable single-event scatters, see :data:`RELATIONS`). The upper
    branch of Hanks & Bakun (2002), A > 537 km2, gets weight 0: its 4/3 slope
    was built on large continental strike-slip ruptures (from memory), not on
    normal faults, whose Wells & Coppersmith (1994) RA-normal relation covers
    areas up to about 900 km2. Because Hanks & Bakun's magnitude grows with
    the area, A > 537 km2 is read from the table as M_hb02 > 3.98 + log10(537).
    """
    hb = get_relation("hb02")
    m_break = hb.a + hb.b * np.log10(hb.break_x)
    raw: dict[str, np.ndarray] = {}
    for key in AREA_RULE_KEYS:
        m = table[f"mag_{key}"].to_numpy(float)
        s = table[f"mag_{key}_sigma"].to_numpy(float)
        with np.errstate(divide="ignore", invalid="ignore"):
            w = np.where(np.isfinite(m) & np.isfinite(s) & (s > 0), 1.0 / s**2, 0.0)
        if key == "hb02":
            w = np.where(m > m_break, 0.0, w)
        raw[key] = w
    total = sum(raw.values())
    with np.errstate(divide="ignore", invalid="ignore"):
        return {k: np.where(total > 0, w / total, np.nan) for k, w in raw.items()}


def preferred_magnitude(table: pd.DataFrame, *, rule: str = "area_mean") -> tuple[np.ndarray, np.ndarray]:
    """Return the preferred magnitude and its sigma from a :func:`magnitude_table`.

    Parameters
    ----------
    table : pandas.DataFrame
        Output of :func:`magnitude_table` (needs the columns of the rule).
    rule : str, optional
        ``"area_mean"`` (default): the weighted mean of the two rupture-area
        relations, Wells & Coppersmith (1994) RA-normal and Hanks & Bakun
        (2002), with the weights of :func:`area_rule_weights` (inverse
        variance; Hanks & Bakun's strike-slip upper branch, A > 537 km2,
        weight 0); sigma = the same weighted mean of the two sigmas. Any
        relation key (e.g. ``"srl_wc94"``): that relation's magnitude and
        sigma.

    Returns
    -------
    mag, sigma : numpy.ndarray
        Moment magnitude and its one-sigma single-event scatter.

    Notes
    -----
    Area relations carry the down-dip width and scatter least (sigma 0.24-0.25
    against 0.34 for length; Wells & Coppersmith 1994). The two were fitted to
    largely the same earthquakes, so their errors are taken as fully
    correlated: the sigma of the weighted mean is the weighted mean of the
    sigmas (not 1 / sqrt(sum 1/sigma**2), as for independent estimates).
    """
    if rule == "area_mean":
        w = area_rule_weights(table)
        terms = [
            (w[k], table[f"mag_{k}"].to_numpy(float), table[f"mag_{k}_sigma"].to_numpy(float))
            for k in AREA_RULE_KEYS
        ]
        m = sum(np.where(wk > 0, wk * mk, 0.0) for wk, mk, _ in terms)
        s = sum(np.where(wk > 0, wk * sk, 0.0) for wk, _, sk in terms)
        none = np.isnan(w[AREA_RULE_KEYS[0]])
        m, s = np.where(none, np.nan, m), np.where(none, np.nan, s)
        return m, s
    if rule not in MAGNITUDE_KEYS:
        raise ParameterError(
            f"unknown preferred-magnitude rule {rule!r}; use one of {', '.join(PREFERRED_RULES)}"
        )
    return table[f"mag_{rule}"].to_numpy(float), table[f"mag_{rule}_sigma"].to_numpy(float)
