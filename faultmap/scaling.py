"""Displacement-length (D-L) scaling of normal-fault populations.

Pure functions: a faults table (GeoDataFrame or DataFrame with the columns of
the data contract in ``DEVELOPERS.md``) in, fits, per-fault diagnostics and an
attribute table out. No file I/O, no printing, no global state.

The scaling law is ``D = gamma * L**n`` with ``D`` (maximum throw or maximum
dip-slip displacement) and ``L`` (trace or system length) both in metres, so
``gamma`` is dimensionless only when ``n = 1``; it is always reported for
metres. Fits are straight lines in log10-log10 space:
``log10 D = log10 gamma + n log10 L``.

Three line fits are offered:

* ``ols``: ordinary least squares of log D on log L (displacement predicted
  from length; scatter in D only).
* ``rma``: reduced major axis (geometric-mean regression), slope
  ``sign(r) sd(y) / sd(x)`` (Sokal & Rohlf, Biometry; common textbook
  identity), symmetric in the two variables.
* ``york``: errors-in-variables straight line of York et al. (2004, Am. J.
  Phys. 72, 367-375) with the throw errors ``max_throw_err_m`` (in log
  space ``sigma_y = err / (D ln 10)``) and a relative length error
  (``length_rel_err``, default 5 %, our choice) on the lengths.

Confidence intervals are seeded non-parametric bootstrap percentiles over
the faults (Efron & Tibshirani 1993, common practice).
"""

from __future__ import annotations

import warnings
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from faultmap.errors import FaultmapWarning, InputError, ParameterError

__all__ = [
    "MODELS",
    "REFERENCE_RANGES",
    "ReferenceRange",
    "LineFit",
    "ScalingResult",
    "displacement_population",
    "ols_line",
    "rma_line",
    "york_fit",
    "fit_line",
    "fit_displacement_length",
    "scaling_residuals",
    "compare_to_references",
    "analyse_scaling",
]

#: Line-fit models, in the order they are reported.
MODELS: tuple[str, ...] = ("ols", "rma", "york")

_LN10 = float(np.log(10.0))
_REQUIRED = ("fault_id", "length_m", "max_throw_m")


# --------------------------------------------------------------------------
# Published reference ranges
# --------------------------------------------------------------------------
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


#: Published D-L references (see docs/methods/scaling.md and
#: shared/methods.md for their confidence). Published ratios are of maximum
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


# --------------------------------------------------------------------------
# Result containers
# --------------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class LineFit:
    """One straight-line fit of log10 D on log10 L.

    Attributes
    ----------
    model : str
        ``ols``, ``rma`` or ``york``.
    fitted : bool
        False when the data cannot support a fit; ``reason`` says why.
    reason : str
        Empty when fitted.
    exponent : float
        Slope n of log10 D against log10 L.
    log10_gamma : float
        Intercept, log10 of gamma with D and L in metres.
    r2 : float
        Squared Pearson correlation of log10 L and log10 D.
    n : int
        Number of faults (units) used.
    exponent_se, log10_gamma_se : float
        Analytic standard errors (OLS: textbook; RMA: sd-ratio approximation;
        York: York et al. 2004 eq. 13); NaN when not available.
    mswd : float
        York fits: mean squared weighted deviation S / (N - 2); NaN otherwise.
    boot_exponent, boot_log10_gamma : numpy.ndarray
        Bootstrap replicates (NaN for degenerate resamples).
    ci_level : float
        Two-sided confidence level of the percentile intervals.
    """

    model: str
    fitted: bool
    reason: str = ""
    exponent: float = float("nan")
    log10_gamma: float = float("nan")
    r2: float = float("nan")
    n: int = 0
    exponent_se: float = float("nan")
    log10_gamma_se: float = float("nan")
    mswd: float = float("nan")
    boot_exponent: np.ndarray = field(default_factory=lambda: np.empty(0))
    boot_log10_gamma: np.ndarray = field(default_factory=lambda: np.empty(0))
    ci_level: float = 0.95

    @property
    def gamma(self) -> float:
        """Gamma of ``D = gamma L**n`` (D, L in metres)."""
        return float(10.0**self.log10_gamma)

    def _pct(self, values: np.ndarray) -> tuple[float, float]:
        ok = np.isfinite(values)
        if ok.sum() < 2:
            return float("nan"), float("nan")
        a = 100.0 * (1.0 - self.ci_level) / 2.0
        lo, hi = np.percentile(values[ok], [a, 100.0 - a])
        return float(lo), float(hi)

    @property
    def exponent_ci(self) -> tuple[float, float]:
        """Bootstrap percentile interval of the exponent."""
        return self._pct(self.boot_exponent)

    @property
    def gamma_ci(self) -> tuple[float, float]:
        """Bootstrap percentile interval of gamma (m^(1-n))."""
        lo, hi = self._pct(self.boot_log10_gamma)
        return float(10.0**lo), float(10.0**hi)

    @property
    def exponent_boot_sd(self) -> float:
        """Standard deviation of the bootstrap exponents."""
        ok = np.isfinite(self.boot_exponent)
        return float(np.std(self.boot_exponent[ok], ddof=1)) if ok.sum() > 1 else float("nan")

    def predict(self, length_m: Any) -> np.ndarray:
        """Displacement (m) predicted at ``length_m`` (m)."""
        length_m = np.asarray(length_m, dtype=float)
        return 10.0 ** (self.log10_gamma + self.exponent * np.log10(length_m))

    def band(self, length_m: Any) -> tuple[np.ndarray, np.ndarray]:
        """Pointwise bootstrap confidence band (m) of the fitted line.

        Parameters
        ----------
        length_m : array_like
            Lengths (m) at which to evaluate the band.

        Returns
        -------
        lo, hi : numpy.ndarray
            Lower and upper displacement (m) at ``ci_level``.
        """
        x = np.log10(np.asarray(length_m, dtype=float))
        ok = np.isfinite(self.boot_exponent) & np.isfinite(self.boot_log10_gamma)
        if ok.sum() < 2:
            nan = np.full(x.shape, np.nan)
            return nan, nan.copy()
        pred = self.boot_log10_gamma[ok, None] + self.boot_exponent[ok, None] * x[None, :]
        a = 100.0 * (1.0 - self.ci_level) / 2.0
        lo, hi = np.percentile(pred, [a, 100.0 - a], axis=0)
        return 10.0**lo, 10.0**hi


@dataclass(frozen=True, eq=False)
class ScalingResult:
    """Everything :func:`analyse_scaling` produces.

    Attributes
    ----------
    faults : pandas.DataFrame
        Copy of the input faults with ``d_l_ratio``, ``scaling_residual``,
        ``scaling_flag``, ``scaling_hint``, ``under_displaced``,
        ``over_displaced``, ``scaling_unit_id`` and ``scaling_used``.
    population : pandas.DataFrame
        One row per unit of analysis (trace or linked system).
    fits : dict of str to LineFit
        Fits by model name.
    references : pandas.DataFrame
        Population against published ranges (:func:`compare_to_references`).
    table : pandas.DataFrame
        The ``scaling`` attribute table (fit rows and reference rows).
    settings : dict
        Options used (for run_info).
    warnings : list of str
        Notices for the user.
    """

    faults: pd.DataFrame
    population: pd.DataFrame
    fits: dict
    references: pd.DataFrame
    table: pd.DataFrame
    settings: dict
    warnings: list


# --------------------------------------------------------------------------
# Population (unit of analysis)
# --------------------------------------------------------------------------
def _check_choice(name: str, value: str, choices: Sequence[str]) -> None:
    if value not in choices:
        raise ParameterError(f"{name}={value!r} is not allowed: use one of {', '.join(choices)}")


def _displacement_name(displacement: str) -> str:
    return "max_throw_m" if displacement == "throw" else "max_dip_slip_m"


def _system_axis(geoms: Any, strikes: np.ndarray, lengths: np.ndarray) -> np.ndarray:
    """Return the unit vector (east, north) of the mean strike of segments."""
    import shapely

    ok = np.isfinite(strikes) & np.isfinite(lengths)
    if ok.any():
        th = np.deg2rad(2.0 * strikes[ok])
        c, s = np.sum(lengths[ok] * np.cos(th)), np.sum(lengths[ok] * np.sin(th))
        if np.hypot(c, s) > 0:
            az = 0.5 * np.arctan2(s, c)
            return np.array([np.sin(az), np.cos(az)])
    xy = shapely.get_coordinates(np.asarray(geoms))
    xy = xy - xy.mean(axis=0)
    _, _, vt = np.linalg.svd(xy, full_matrices=False)
    return vt[0]


def _population(
    faults: pd.DataFrame,
    *,
    displacement: str,
    unit: str,
    include_censored: bool,
    system_length: str,
    system_throw: str,
    stations: pd.DataFrame | None,
    notes: list[str],
) -> pd.DataFrame:
    missing = [c for c in _REQUIRED if c not in faults.columns]
    if missing:
        raise InputError(f"faults table lacks column(s) {', '.join(missing)}: run the throw tool first")
    _check_choice("displacement", displacement, ("throw", "dip_slip"))
    _check_choice("unit", unit, ("trace", "system"))
    _check_choice("system_length", system_length, ("extent", "sum"))
    _check_choice("system_throw", system_throw, ("max", "summed"))

    n = len(faults)
    fid = np.asarray(faults["fault_id"]).astype(np.int64)
    length = np.asarray(faults["length_m"], dtype=float)
    throw = np.asarray(faults["max_throw_m"], dtype=float)
    err = (
        np.asarray(faults["max_throw_err_m"], dtype=float)
        if "max_throw_err_m" in faults
        else np.full(n, np.nan)
    )
    if "dip_deg" in faults:
        dip = np.asarray(faults["dip_deg"], dtype=float)
    else:
        dip = np.full(n, np.nan)
        if displacement == "dip_slip":
            raise InputError("faults table lacks dip_deg: needed for displacement='dip_slip'")
    censored = np.asarray(faults["censored"], dtype=bool) if "censored" in faults else np.zeros(n, dtype=bool)
    if "censored" not in faults:
        notes.append("faults table has no 'censored' column: all faults treated as uncensored")
    if "system_id" in faults:
        sid = np.asarray(pd.to_numeric(faults["system_id"], errors="coerce"), dtype=float)
        sid = np.where(np.isfinite(sid), sid, -fid.astype(float))  # lone faults: own system
    else:
        sid = -fid.astype(float)
        if unit == "system":
            notes.append("faults table has no 'system_id': each trace is its own system")
    strike = np.asarray(faults["strike_deg"], dtype=float) if "strike_deg" in faults else np.full(n, np.nan)
    has_geom = "geometry" in faults.columns

    if unit == "trace":
        pop = pd.DataFrame(
            {
                "unit_id": fid,
                "fault_ids": [str(f) for f in fid],
                "n_segments": np.ones(n, dtype=int),
                "length_m": length,
                "max_throw_m": throw,
                "max_throw_err_m": err,
                "dip_deg": dip,
                "censored": censored,
                "system_size": pd.Series(sid).map(pd.Series(sid).value_counts()).to_numpy(int),
            }
        )
    else:
        rows = []
        if system_length == "extent" and not has_geom:
            notes.append("faults have no geometry: system length is the sum of segment lengths")
            system_length = "sum"
        if system_throw == "summed" and (stations is None or len(stations) == 0):
            notes.append("no throw stations given: system max throw is the max over its segments")
            system_throw = "max"
        geoms = np.asarray(faults["geometry"]) if has_geom else None
        for s in pd.unique(sid):  # loop over systems (a handful)
            m = sid == s
            seg_ids = fid[m]
            if m.sum() == 1 or system_length == "sum":
                L = float(np.nansum(length[m])) if m.sum() > 1 else float(length[m][0])
            else:
                import shapely

                axis = _system_axis(geoms[m], strike[m], length[m])
                xy = shapely.get_coordinates(geoms[m])
                proj = xy @ axis
                L = float(np.ptp(proj)) if proj.size else float("nan")
            t_seg = throw[m]
            e_seg = err[m]
            if system_throw == "summed" and m.sum() > 1:
                T, E = _summed_throw(
                    stations, seg_ids, geoms[m] if geoms is not None else None, strike[m], length[m]
                )
                if not np.isfinite(T):
                    T, E = _max_over(t_seg, e_seg)
            else:
                T, E = _max_over(t_seg, e_seg)
            w = np.where(np.isfinite(length[m]), length[m], 0.0)
            dips = dip[m]
            okd = np.isfinite(dips)
            D_ = float(np.average(dips[okd], weights=w[okd] + 1e-12)) if okd.any() else float("nan")
            rows.append(
                {
                    "unit_id": int(s) if s >= 0 else int(seg_ids[0]),
                    "fault_ids": ",".join(str(f) for f in seg_ids),
                    "n_segments": int(m.sum()),
                    "length_m": L,
                    "max_throw_m": T,
                    "max_throw_err_m": E,
                    "dip_deg": D_,
                    "censored": bool(censored[m].any()),
                    "system_size": int(m.sum()),
                }
            )
        cols = [
            "unit_id",
            "fault_ids",
            "n_segments",
            "length_m",
            "max_throw_m",
            "max_throw_err_m",
            "dip_deg",
            "censored",
            "system_size",
        ]
        pop = pd.DataFrame(rows, columns=cols)

    if displacement == "throw":
        pop["disp_m"] = pop["max_throw_m"]
        pop["disp_err_m"] = pop["max_throw_err_m"]
    else:
        sdip = np.sin(np.deg2rad(pop["dip_deg"].to_numpy(float)))
        pop["disp_m"] = pop["max_throw_m"] / sdip
        pop["disp_err_m"] = pop["max_throw_err_m"] / sdip
    pop["unit"] = unit

    reason = np.full(len(pop), "", dtype=object)
    L = pop["length_m"].to_numpy(float)
    D = pop["disp_m"].to_numpy(float)
    bad_len = ~(np.isfinite(L) & (L > 0))
    bad_d = ~(np.isfinite(D) & (D > 0))
    reason[bad_d] = "zero or missing displacement"
    reason[bad_len] = "zero or missing length"
    cens = pop["censored"].to_numpy(bool)
    if not include_censored:
        reason[(reason == "") & cens] = "censored"
    pop["used"] = reason == ""
    pop["excluded_reason"] = reason
    return pop


def _max_over(t: np.ndarray, e: np.ndarray) -> tuple[float, float]:
    ok = np.isfinite(t)
    if not ok.any():
        return float("nan"), float("nan")
    i = int(np.argmax(np.where(ok, t, -np.inf)))
    return float(t[i]), float(e[i])


def _summed_throw(
    stations: pd.DataFrame, seg_ids: np.ndarray, geoms: Any, strikes: np.ndarray, lengths: np.ndarray
) -> tuple[float, float]:
    """Max of the summed along-strike throw profile of overlapping segments."""
    import shapely

    st = stations[np.isin(np.asarray(stations["fault_id"]).astype(np.int64), seg_ids)]
    if "status" in st:
        st = st[st["status"] == "ok"]
    st = st[np.isfinite(np.asarray(st["throw_m"], dtype=float))]
    if len(st) < 2 or "geometry" not in st:
        return float("nan"), float("nan")
    axis = _system_axis(geoms, strikes, lengths) if geoms is not None else None
    if axis is None:
        return float("nan"), float("nan")
    xy = shapely.get_coordinates(np.asarray(st["geometry"]))
    s_all = xy @ axis
    grid = np.unique(s_all)
    total = np.zeros(grid.size)
    var = np.zeros(grid.size)
    sf = np.asarray(st["fault_id"]).astype(np.int64)
    t_all = np.asarray(st["throw_m"], dtype=float)
    e_all = np.asarray(st["throw_err_m"], dtype=float) if "throw_err_m" in st else np.zeros(len(st))
    e_all = np.where(np.isfinite(e_all), e_all, 0.0)
    for f in seg_ids:  # loop over a system's segments
        k = sf == f
        if k.sum() == 0:
            continue
        order = np.argsort(s_all[k])
        sk, tk, ek = s_all[k][order], t_all[k][order], e_all[k][order]
        inside = (grid >= sk[0]) & (grid <= sk[-1])
        total += np.where(inside, np.interp(grid, sk, tk), 0.0)
        var += np.where(inside, np.interp(grid, sk, ek) ** 2, 0.0)
    i = int(np.argmax(total))
    return float(total[i]), float(np.sqrt(var[i]))


def displacement_population(
    faults: pd.DataFrame,
    *,
    displacement: str = "throw",
    unit: str = "trace",
    include_censored: bool = False,
    system_length: str = "extent",
    system_throw: str = "max",
    stations: pd.DataFrame | None = None,
) -> pd.DataFrame:
    """Build the table of units (traces or linked systems) to fit.

    Parameters
    ----------
    faults : pandas.DataFrame or geopandas.GeoDataFrame
        Faults with ``fault_id``, ``length_m`` (m), ``max_throw_m`` (m) and,
        when present, ``max_throw_err_m`` (m), ``dip_deg``, ``censored``,
        ``system_id``, ``strike_deg`` and a LineString geometry.
    displacement : {'throw', 'dip_slip'}
        Fit the maximum throw, or the maximum dip-slip displacement
        ``u = T / sin(dip)`` (geometry; error scaled the same way, dip error
        ignored).
    unit : {'trace', 'system'}
        Unit of analysis: individual traces, or linked systems (``system_id``).
    include_censored : bool
        Keep faults with a tip at the map/DEM edge (their length is a lower
        bound). Default False: they are marked ``excluded_reason='censored'``.
    system_length : {'extent', 'sum'}
        System length: extent along the system's mean strike of all its
        segment vertices (default), or the sum of segment lengths.
    system_throw : {'max', 'summed'}
        System max throw: the largest segment max throw (default), or the
        maximum of the along-strike sum of overlapping segment profiles
        (needs ``stations``; errors added in quadrature).
    stations : pandas.DataFrame, optional
        ``throw_stations`` layer (``fault_id``, ``throw_m``, ``throw_err_m``,
        ``status``, Point geometry); only for ``system_throw='summed'``.

    Returns
    -------
    pandas.DataFrame
        Columns ``unit_id``, ``fault_ids``, ``n_segments``, ``length_m``,
        ``max_throw_m``, ``max_throw_err_m``, ``dip_deg``, ``censored``,
        ``system_size``, ``disp_m``, ``disp_err_m``, ``unit``, ``used``,
        ``excluded_reason``.

    Notes
    -----
    Censored lengths are lower bounds; keeping them out of fits is the safe
    default (shared methods notes; common practice). Notices are emitted as
    :class:`~faultmap.errors.FaultmapWarning`.
    """
    notes: list[str] = []
    pop = _population(
        faults,
        displacement=displacement,
        unit=unit,
        include_censored=include_censored,
        system_length=system_length,
        system_throw=system_throw,
        stations=stations,
        notes=notes,
    )
    for msg in notes:
        warnings.warn(msg, FaultmapWarning, stacklevel=2)
    return pop


# --------------------------------------------------------------------------
# Line fits (vectorised over a leading batch axis for the bootstrap)
# --------------------------------------------------------------------------
def ols_line(x: Any, y: Any) -> tuple[np.ndarray, np.ndarray]:
    """Ordinary least-squares line of y on x along the last axis.

    Parameters
    ----------
    x, y : array_like
        Same shape (..., n).

    Returns
    -------
    slope, intercept : numpy.ndarray
        Shape (...); NaN where x has no spread.

    Notes
    -----
    slope = Sxy / Sxx, intercept = mean(y) - slope mean(x) (textbook).
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    xm = x.mean(axis=-1, keepdims=True)
    ym = y.mean(axis=-1, keepdims=True)
    sxx = ((x - xm) ** 2).sum(axis=-1)
    sxy = ((x - xm) * (y - ym)).sum(axis=-1)
    with np.errstate(invalid="ignore", divide="ignore"):
        b = np.where(sxx > 1e-300, sxy / np.where(sxx > 1e-300, sxx, 1.0), np.nan)
    a = ym[..., 0] - b * xm[..., 0]
    return b, a


def rma_line(x: Any, y: Any) -> tuple[np.ndarray, np.ndarray]:
    """Reduced major axis (geometric mean) line along the last axis.

    Parameters
    ----------
    x, y : array_like
        Same shape (..., n).

    Returns
    -------
    slope, intercept : numpy.ndarray
        NaN where x or y has no spread.

    Notes
    -----
    slope = sign(r) sd(y) / sd(x); the line passes through the means
    (Sokal & Rohlf, Biometry; common textbook identity).
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    xm = x.mean(axis=-1, keepdims=True)
    ym = y.mean(axis=-1, keepdims=True)
    sxx = ((x - xm) ** 2).sum(axis=-1)
    syy = ((y - ym) ** 2).sum(axis=-1)
    sxy = ((x - xm) * (y - ym)).sum(axis=-1)
    ok = (sxx > 1e-300) & (syy > 1e-300)
    with np.errstate(invalid="ignore", divide="ignore"):
        b = np.where(ok, np.sign(sxy) * np.sqrt(syy / np.where(ok, sxx, 1.0)), np.nan)
    a = ym[..., 0] - b * xm[..., 0]
    return b, a


def york_fit(
    x: Any,
    y: Any,
    sigma_x: Any,
    sigma_y: Any,
    *,
    r: Any = 0.0,
    tol: float = 1e-12,
    max_iter: int = 200,
) -> dict[str, np.ndarray]:
    """Best straight line with errors in both variables (York et al. 2004).

    Parameters
    ----------
    x, y : array_like
        Data, shape (..., n); leading axes are independent problems.
    sigma_x, sigma_y : array_like
        1-sigma errors of x and y (broadcast to x). Zero is allowed in one of
        the two (e.g. ``sigma_x = 0`` gives weighted least squares of y on x).
    r : array_like, optional
        Correlation of the x and y errors (default 0).
    tol : float
        Convergence tolerance on the slope.
    max_iter : int
        Iteration cap.

    Returns
    -------
    dict
        ``slope``, ``intercept``, ``slope_se``, ``intercept_se``, ``mswd``
        (S / (n - 2)), ``converged`` (bool), ``n_iter``; arrays of shape (...).

    Notes
    -----
    York, D., Evensen, N. M., Martinez, M. L. & De Basabe Delgado, J. (2004),
    Unified equations for the slope, intercept, and standard errors of the
    best straight line, Am. J. Phys. 72, 367-375, section III steps 1-8,
    written with variances instead of weights so that a zero error is
    allowed. The standard errors are York's (not scaled by the MSWD).
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    vx = np.broadcast_to(np.asarray(sigma_x, dtype=float) ** 2, x.shape)
    vy = np.broadcast_to(np.asarray(sigma_y, dtype=float) ** 2, x.shape)
    cxy = np.broadcast_to(np.asarray(r, dtype=float), x.shape) * np.sqrt(vx * vy)
    n = x.shape[-1]
    b, _ = ols_line(x, y)
    b = np.where(np.isfinite(b), b, 0.0)
    converged = np.zeros(b.shape, dtype=bool)
    n_iter = 0
    with np.errstate(invalid="ignore", divide="ignore"):
        for _ in range(max_iter):
            n_iter += 1
            bb = b[..., None]
            W = 1.0 / (vy + bb**2 * vx - 2.0 * bb * cxy)
            sw = W.sum(axis=-1, keepdims=True)
            X = (W * x).sum(axis=-1, keepdims=True) / sw
            Y = (W * y).sum(axis=-1, keepdims=True) / sw
            U = x - X
            V = y - Y
            beta = W * (U * vy + bb * V * vx - (bb * U + V) * cxy)
            b_new = (W * beta * V).sum(axis=-1) / (W * beta * U).sum(axis=-1)
            done = np.abs(b_new - b) <= tol * np.maximum(1.0, np.abs(b_new))
            b = np.where(np.isfinite(b_new), b_new, b)
            converged = done | converged
            if np.all(converged):
                break
        bb = b[..., None]
        W = 1.0 / (vy + bb**2 * vx - 2.0 * bb * cxy)
        sw = W.sum(axis=-1, keepdims=True)
        X = (W * x).sum(axis=-1, keepdims=True) / sw
        Y = (W * y).sum(axis=-1, keepdims=True) / sw
        U = x - X
        V = y - Y
        beta = W * (U * vy + bb * V * vx - (bb * U + V) * cxy)
        a = Y[..., 0] - b * X[..., 0]
        xadj = X + beta
        xbar = (W * xadj).sum(axis=-1, keepdims=True) / sw
        u = xadj - xbar
        var_b = 1.0 / (W * u**2).sum(axis=-1)
        var_a = 1.0 / sw[..., 0] + xbar[..., 0] ** 2 * var_b
        S = (W * (y - bb * x - a[..., None]) ** 2).sum(axis=-1)
        mswd = S / (n - 2) if n > 2 else np.full(b.shape, np.nan)
    return {
        "slope": b,
        "intercept": a,
        "slope_se": np.sqrt(var_b),
        "intercept_se": np.sqrt(var_a),
        "mswd": mswd,
        "converged": converged,
        "n_iter": np.asarray(n_iter),
    }


def _not_fitted(model: str, reason: str, n: int, ci_level: float) -> LineFit:
    return LineFit(model=model, fitted=False, reason=reason, n=n, ci_level=ci_level)


def _log_errors(
    length_m: np.ndarray, disp_m: np.ndarray, disp_err_m: np.ndarray | None, length_rel_err: float
) -> tuple[np.ndarray, np.ndarray, str]:
    """log10-space errors for York; returns (sx, sy, note)."""
    note = ""
    n = disp_m.size
    if disp_err_m is None:
        return np.full(n, np.nan), np.full(n, np.nan), "no throw errors"
    e = np.asarray(disp_err_m, dtype=float)
    rel = e / disp_m
    ok = np.isfinite(rel) & (rel > 0)
    if not ok.any():
        return np.full(n, np.nan), np.full(n, np.nan), "no usable throw errors"
    if not ok.all():
        fill = float(np.median(rel[ok]))
        note = f"{int((~ok).sum())} fault(s) without a throw error: median relative error {fill:.3g} used"
        rel = np.where(ok, rel, fill)
    rel = np.maximum(rel, 0.01)  # floor: 1 % relative error (our choice)
    sy = rel / _LN10
    sx = np.full(n, max(length_rel_err, 0.0) / _LN10)
    return sx, sy, note


def fit_line(
    length_m: Any,
    disp_m: Any,
    *,
    model: str = "ols",
    disp_err_m: Any = None,
    length_rel_err: float = 0.05,
    bootstrap_n: int = 1000,
    ci_level: float = 0.95,
    seed: int = 0,
) -> LineFit:
    """Fit ``log10 D = log10 gamma + n log10 L`` with one model.

    Parameters
    ----------
    length_m, disp_m : array_like
        Lengths and maximum displacements (m), positive and finite.
    model : {'ols', 'rma', 'york'}
        Line-fit model (see module notes).
    disp_err_m : array_like, optional
        1-sigma displacement errors (m); required for ``york``.
    length_rel_err : float
        Relative 1-sigma length error used by ``york`` (default 0.05).
    bootstrap_n : int
        Number of bootstrap resamples (0 disables the intervals).
    ci_level : float
        Two-sided level of the percentile intervals (0-1).
    seed : int
        Seed of the bootstrap generator.

    Returns
    -------
    LineFit
        ``fitted`` is False, with a ``reason``, for fewer than 3 faults,
        identical lengths or displacements, non-positive values, or (york)
        no usable errors.

    Notes
    -----
    OLS and RMA: Sokal & Rohlf (Biometry). York: York et al. (2004).
    Bootstrap: resampling of faults with replacement, percentile intervals
    (Efron & Tibshirani 1993; common practice).
    """
    _check_choice("model", model, MODELS)
    if not 0.0 < ci_level < 1.0:
        raise ParameterError(f"ci_level={ci_level} must be between 0 and 1 (e.g. 0.95)")
    if bootstrap_n < 0:
        raise ParameterError(f"bootstrap_n={bootstrap_n} must be >= 0")
    L = np.asarray(length_m, dtype=float).ravel()
    D = np.asarray(disp_m, dtype=float).ravel()
    if L.shape != D.shape:
        raise InputError("length_m and disp_m must have the same length")
    E = None if disp_err_m is None else np.asarray(disp_err_m, dtype=float).ravel()
    ok = np.isfinite(L) & np.isfinite(D) & (L > 0) & (D > 0)
    n = int(ok.sum())
    if n < 3:
        return _not_fitted(
            model,
            f"only {n} fault(s) with positive length and displacement; at least 3 are needed",
            n,
            ci_level,
        )
    x = np.log10(L[ok])
    y = np.log10(D[ok])
    if np.ptp(x) <= 1e-12:
        return _not_fitted(model, "all lengths are identical: the slope is undefined", n, ci_level)
    if np.ptp(y) <= 1e-12 and model == "rma":
        return _not_fitted(model, "all displacements are identical: RMA slope is undefined", n, ci_level)
    r = float(np.corrcoef(x, y)[0, 1]) if np.ptp(y) > 0 else 0.0
    r2 = r * r
    mswd = float("nan")
    if model == "york":
        sx, sy, note = _log_errors(L[ok], D[ok], None if E is None else E[ok], length_rel_err)
        if not np.all(np.isfinite(sy)):
            return _not_fitted(
                model, f"{note or 'no throw errors'}: York fit needs max_throw_err_m", n, ci_level
            )
        res = york_fit(x, y, sx, sy)
        b, a = float(res["slope"]), float(res["intercept"])
        b_se, a_se = float(res["slope_se"]), float(res["intercept_se"])
        mswd = float(res["mswd"])
    elif model == "ols":
        b, a = (float(v) for v in ols_line(x, y))
        resid = y - (a + b * x)
        s2 = float(resid @ resid) / (n - 2) if n > 2 else float("nan")
        sxx = float(((x - x.mean()) ** 2).sum())
        b_se = float(np.sqrt(s2 / sxx))
        a_se = float(np.sqrt(s2 * (1.0 / n + x.mean() ** 2 / sxx)))
    else:
        b, a = (float(v) for v in rma_line(x, y))
        # approximate SE of the RMA slope: |b| sqrt((1 - r^2) / n) (from memory)
        b_se = abs(b) * np.sqrt((1.0 - r2) / n)
        a_se = float("nan")

    boot_b = np.empty(0)
    boot_a = np.empty(0)
    if bootstrap_n > 0:
        rng = np.random.default_rng(seed)
        idx = rng.integers(0, n, size=(bootstrap_n, n))
        X, Y = x[idx], y[idx]
        if model == "ols":
            boot_b, boot_a = ols_line(X, Y)
        elif model == "rma":
            boot_b, boot_a = rma_line(X, Y)
        else:
            res = york_fit(X, Y, sx[idx], sy[idx])
            boot_b, boot_a = res["slope"], res["intercept"]
            bad = ~res["converged"] | (np.ptp(X, axis=1) <= 1e-12)
            boot_b = np.where(bad, np.nan, boot_b)
            boot_a = np.where(bad, np.nan, boot_a)
    return LineFit(
        model=model,
        fitted=True,
        reason="",
        exponent=b,
        log10_gamma=a,
        r2=r2,
        n=n,
        exponent_se=float(b_se),
        log10_gamma_se=float(a_se),
        mswd=mswd,
        boot_exponent=np.asarray(boot_b, float),
        boot_log10_gamma=np.asarray(boot_a, float),
        ci_level=ci_level,
    )


def fit_displacement_length(
    population: pd.DataFrame,
    *,
    models: Sequence[str] = MODELS,
    bootstrap_n: int = 1000,
    ci_level: float = 0.95,
    seed: int = 0,
    length_rel_err: float = 0.05,
) -> dict[str, LineFit]:
    """Fit every requested model to the ``used`` units of a population.

    Parameters
    ----------
    population : pandas.DataFrame
        Output of :func:`displacement_population` (``length_m``, ``disp_m``,
        ``disp_err_m``, ``used``).
    models : sequence of str
        Any of ``ols``, ``rma``, ``york``.
    bootstrap_n, ci_level, seed, length_rel_err
        See :func:`fit_line`. Every model uses the same seed, hence the same
        resamples.

    Returns
    -------
    dict of str to LineFit

    Notes
    -----
    See :func:`fit_line` for the methods and sources.
    """
    used = population[population["used"].to_numpy(bool)] if "used" in population else population
    L = used["length_m"].to_numpy(float)
    D = used["disp_m"].to_numpy(float)
    E = used["disp_err_m"].to_numpy(float) if "disp_err_m" in used else None
    return {
        m: fit_line(
            L,
            D,
            model=m,
            disp_err_m=E,
            length_rel_err=length_rel_err,
            bootstrap_n=bootstrap_n,
            ci_level=ci_level,
            seed=seed,
        )
        for m in models
    }


# --------------------------------------------------------------------------
# Residuals, outliers, hints
# --------------------------------------------------------------------------
def scaling_residuals(
    population: pd.DataFrame,
    fit: LineFit,
    *,
    outlier_k: float = 2.0,
) -> pd.DataFrame:
    """log10 residuals from a fit and outlier flags, one row per unit.

    Parameters
    ----------
    population : pandas.DataFrame
        Output of :func:`displacement_population`.
    fit : LineFit
        The fit residuals are measured from.
    outlier_k : float
        Flag units whose residual exceeds ``outlier_k`` standard deviations
        of the residuals of the fitted units (ddof = 2).

    Returns
    -------
    pandas.DataFrame
        ``unit_id``, ``scaling_residual`` (log10 D - fitted log10 D, dex),
        ``scaling_flag`` (``ok``, ``under_displaced``, ``over_displaced``,
        ``no_data`` or ``not_fitted``), ``under_displaced``, ``over_displaced``.
        Units left out of the fit (e.g. censored) are also measured and
        flagged against it.

    Notes
    -----
    A k-sigma rule on log residuals (common practice).
    """
    if outlier_k <= 0:
        raise ParameterError(f"outlier_k={outlier_k} must be positive (e.g. 2)")
    L = population["length_m"].to_numpy(float)
    D = population["disp_m"].to_numpy(float)
    ok = np.isfinite(L) & np.isfinite(D) & (L > 0) & (D > 0)
    res = np.full(L.size, np.nan)
    flag = np.full(L.size, "no_data", dtype=object)
    if not fit.fitted:
        flag[ok] = "not_fitted"
    else:
        with np.errstate(divide="ignore", invalid="ignore"):
            res[ok] = np.log10(D[ok]) - (fit.log10_gamma + fit.exponent * np.log10(L[ok]))
        used = population["used"].to_numpy(bool) & ok if "used" in population else ok
        sd = float(np.std(res[used], ddof=2)) if used.sum() > 2 else float("nan")
        flag[ok] = "ok"
        if np.isfinite(sd) and sd > 0:
            flag[ok & (res < -outlier_k * sd)] = "under_displaced"
            flag[ok & (res > outlier_k * sd)] = "over_displaced"
    return pd.DataFrame(
        {
            "unit_id": population["unit_id"].to_numpy(),
            "scaling_residual": res,
            "scaling_flag": flag,
            "under_displaced": flag == "under_displaced",
            "over_displaced": flag == "over_displaced",
        }
    )


def _hints(
    faults: pd.DataFrame,
    population: pd.DataFrame,
    flags: pd.DataFrame,
    *,
    unit: str,
    near_factor: float,
    detection_throw_m: float | None,
) -> np.ndarray:
    """Short reason hints for flagged units (empty for the others)."""
    hints = np.full(len(population), "", dtype=object)
    flagged = np.flatnonzero(flags["scaling_flag"].isin(["under_displaced", "over_displaced"]))
    if flagged.size == 0:
        return hints
    has_geom = "geometry" in faults.columns
    fid = np.asarray(faults["fault_id"]).astype(np.int64)
    flen = np.asarray(faults["length_m"], dtype=float)
    geoms = np.asarray(faults["geometry"]) if has_geom else None
    n_ok = np.asarray(faults["n_stations_ok"], dtype=float) if "n_stations_ok" in faults else None
    for i in flagged:  # loop over the few flagged units
        row = population.iloc[i]
        h: list[str] = []
        if bool(row["censored"]):
            h.append("censored")
        if int(row["system_size"]) > 1:
            h.append("linked system")
        if unit == "trace" and geoms is not None:
            import shapely

            k = np.flatnonzero(fid == int(row["unit_id"]))
            if k.size:
                k = int(k[0])
                big = np.flatnonzero(flen >= 2.0 * flen[k])
                if big.size and np.isfinite(flen[k]):
                    d = shapely.distance(geoms[k], geoms[big])
                    if np.nanmin(d) <= near_factor * flen[k]:
                        h.append("short fault near a larger one")
                if n_ok is not None and np.isfinite(n_ok[k]) and n_ok[k] < 3:
                    h.append("few throw stations")
        D = float(row["disp_m"])
        E = float(row["disp_err_m"])
        if np.isfinite(E) and D > 0 and E / D > 0.5:
            h.append("large throw error")
        T = float(row["max_throw_m"])
        if detection_throw_m is not None and np.isfinite(detection_throw_m) and T < detection_throw_m:
            h.append("throw below detection limit")
        hints[i] = "; ".join(h) if h else "no obvious cause"
    return hints


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


# --------------------------------------------------------------------------
# Top level
# --------------------------------------------------------------------------
def _fit_rows(
    fits: Mapping[str, LineFit], *, variable: str, unit: str, include_censored: bool, bootstrap_n: int
) -> list[dict[str, Any]]:
    rows = []
    for name, f in fits.items():
        elo, ehi = f.exponent_ci if f.fitted else (np.nan, np.nan)
        glo, ghi = f.gamma_ci if f.fitted else (np.nan, np.nan)
        rows.append(
            {
                "model": name,
                "variable": variable,
                "unit": unit,
                "exponent": f.exponent,
                "gamma": f.gamma if f.fitted else np.nan,
                "exponent_lo": elo,
                "exponent_hi": ehi,
                "gamma_lo": glo,
                "gamma_hi": ghi,
                "exponent_se": f.exponent_boot_sd if f.fitted else np.nan,
                "r2": f.r2,
                "n_faults": f.n,
                "mswd": f.mswd,
                "ci_level": f.ci_level,
                "bootstrap_n": bootstrap_n,
                "include_censored": include_censored,
                "fitted": f.fitted,
                "reason": f.reason,
            }
        )
    return rows


def analyse_scaling(
    faults: pd.DataFrame,
    *,
    stations: pd.DataFrame | None = None,
    displacement: str = "throw",
    unit: str = "trace",
    include_censored: bool = False,
    system_length: str = "extent",
    system_throw: str = "max",
    models: Sequence[str] = MODELS,
    residual_model: str = "ols",
    bootstrap_n: int = 1000,
    ci_level: float = 0.95,
    seed: int = 0,
    outlier_k: float = 2.0,
    length_rel_err: float = 0.05,
    near_factor: float = 1.0,
    detection_throw_m: float | None = None,
) -> ScalingResult:
    """Displacement-length analysis of a fault population.

    Parameters
    ----------
    faults : pandas.DataFrame or geopandas.GeoDataFrame
        Faults after the throw tool (see :func:`displacement_population`).
    stations : pandas.DataFrame, optional
        ``throw_stations``, only for ``system_throw='summed'``.
    displacement, unit, include_censored, system_length, system_throw
        See :func:`displacement_population`.
    models : sequence of str
        Line fits to run (``ols``, ``rma``, ``york``).
    residual_model : str
        Model the per-fault residuals and outlier flags refer to (default
        ``ols``: the displacement expected for a fault's length).
    bootstrap_n, ci_level, seed, length_rel_err
        See :func:`fit_line`.
    outlier_k : float
        Outlier threshold in standard deviations of the log residuals.
    near_factor : float
        Hint "short fault near a larger one" when a flagged trace lies within
        ``near_factor`` times its own length of a trace at least twice as long.
    detection_throw_m : float, optional
        Smallest throw the DEM resolves (m); used for hints only.

    Returns
    -------
    ScalingResult

    Notes
    -----
    ``d_l_ratio`` on the faults table is each trace's own displacement over
    its own length (the selected displacement). ``scaling_residual`` and
    ``scaling_flag`` belong to the unit of analysis: in ``system`` mode every
    segment carries its system's values (``scaling_unit_id`` = system id).
    Sources: see :func:`fit_line` and :func:`compare_to_references`.
    """
    for m in models:
        _check_choice("models", m, MODELS)
    _check_choice("residual_model", residual_model, tuple(models))
    notes: list[str] = []
    pop = _population(
        faults,
        displacement=displacement,
        unit=unit,
        include_censored=include_censored,
        system_length=system_length,
        system_throw=system_throw,
        stations=stations,
        notes=notes,
    )
    n_cens = int((pop["excluded_reason"] == "censored").sum())
    if n_cens:
        notes.append(f"{n_cens} censored {unit}(s) left out of the fits (include_censored=True keeps them)")
    elif include_censored and bool(pop["censored"].any()):
        notes.append(
            f"{int(pop['censored'].sum())} censored {unit}(s) included in the fits: "
            "their lengths are lower bounds"
        )
    n_bad = int(pop["excluded_reason"].isin(["zero or missing displacement", "zero or missing length"]).sum())
    if n_bad:
        bad_ids = pop.loc[
            pop["excluded_reason"].isin(["zero or missing displacement", "zero or missing length"]), "unit_id"
        ]
        notes.append(
            f"{n_bad} {unit}(s) without positive length/displacement left out "
            f"(ids {', '.join(map(str, bad_ids.tolist()[:10]))})"
        )

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        fits = fit_displacement_length(
            pop,
            models=models,
            bootstrap_n=bootstrap_n,
            ci_level=ci_level,
            seed=seed,
            length_rel_err=length_rel_err,
        )
    for name, f in fits.items():
        if not f.fitted:
            notes.append(f"{name} fit not made: {f.reason}")
    york = fits.get("york")
    if york is not None and york.fitted and np.isfinite(york.mswd) and york.mswd > 3:
        notes.append(
            f"York fit MSWD {york.mswd:.1f} >> 1: natural scatter exceeds the "
            "measurement errors; read its interval from the bootstrap"
        )

    flags = scaling_residuals(pop, fits[residual_model], outlier_k=outlier_k)
    hints = _hints(
        faults, pop, flags, unit=unit, near_factor=near_factor, detection_throw_m=detection_throw_m
    )

    # map units back to traces
    out = faults.copy()
    fid = np.asarray(out["fault_id"]).astype(np.int64)
    if unit == "trace":
        unit_of = fid
    else:
        pos = {}
        for uid, ids in zip(pop["unit_id"], pop["fault_ids"], strict=True):
            for f in ids.split(","):
                pos[int(f)] = int(uid)
        unit_of = np.array([pos.get(int(f), -1) for f in fid], dtype=np.int64)
    lut = pd.DataFrame(
        {
            "unit_id": pop["unit_id"].to_numpy(np.int64),
            "scaling_residual": flags["scaling_residual"].to_numpy(),
            "scaling_flag": flags["scaling_flag"].to_numpy(),
            "scaling_hint": hints,
            "scaling_used": pop["used"].to_numpy(bool),
        }
    ).set_index("unit_id")
    lut = lut[~lut.index.duplicated()]
    j = lut.reindex(unit_of)
    throw = np.asarray(out["max_throw_m"], dtype=float)
    if displacement == "dip_slip":
        throw = throw / np.sin(np.deg2rad(np.asarray(out["dip_deg"], dtype=float)))
    length = np.asarray(out["length_m"], dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        out["d_l_ratio"] = np.where((length > 0) & np.isfinite(throw), throw / length, np.nan)
    out["scaling_residual"] = j["scaling_residual"].to_numpy(float)
    out["scaling_flag"] = j["scaling_flag"].fillna("no_data").to_numpy(object)
    out["scaling_hint"] = j["scaling_hint"].fillna("").to_numpy(object)
    out["under_displaced"] = out["scaling_flag"].to_numpy(object) == "under_displaced"
    out["over_displaced"] = out["scaling_flag"].to_numpy(object) == "over_displaced"
    out["scaling_unit_id"] = unit_of
    out["scaling_used"] = j["scaling_used"].fillna(False).to_numpy(bool)

    n_flag = int((flags["under_displaced"] | flags["over_displaced"]).sum())
    if n_flag:
        notes.append(
            f"{n_flag} {unit}(s) flagged as D-L outliers (|residual| > "
            f"{outlier_k:g} sd of the {residual_model} fit)"
        )

    ratio_units = (pop["disp_m"] / pop["length_m"]).to_numpy(float)
    refs = compare_to_references(ratio_units[pop["used"].to_numpy(bool)], fits)
    variable = _displacement_name(displacement)
    rows = _fit_rows(
        fits, variable=variable, unit=unit, include_censored=include_censored, bootstrap_n=bootstrap_n
    )
    for _, rr in refs.iterrows():
        rows.append(
            {
                "model": "reference",
                "variable": rr["quantity"],
                "unit": unit,
                "source": rr["source"],
                "compared": rr["compared"],
                "ref_lo": rr["ref_lo"],
                "ref_hi": rr["ref_hi"],
                "confidence": rr["confidence"],
                "value": rr["value"],
                "value_lo": rr["value_lo"],
                "value_hi": rr["value_hi"],
                "frac_below": rr["frac_below"],
                "frac_within": rr["frac_within"],
                "frac_above": rr["frac_above"],
                "consistent": rr["consistent"],
                "n_faults": rr["n_faults"],
                "include_censored": include_censored,
                "fitted": True,
                "reason": "",
            }
        )
    table = pd.DataFrame(rows)
    settings = {
        "displacement": displacement,
        "unit": unit,
        "include_censored": include_censored,
        "system_length": system_length,
        "system_throw": system_throw,
        "models": ",".join(models),
        "residual_model": residual_model,
        "bootstrap_n": bootstrap_n,
        "ci_level": ci_level,
        "seed": seed,
        "outlier_k": outlier_k,
        "length_rel_err": length_rel_err,
    }
    return ScalingResult(
        faults=out, population=pop, fits=fits, references=refs, table=table, settings=settings, warnings=notes
    )
