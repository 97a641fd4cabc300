"""Displacement-length (D-L) scaling of normal-fault populations.

Pure functions: a faults table (GeoDataFrame or DataFrame with the columns of
the data contract in ``DEVELOPERS.md``) in, fits, per-fault diagnostics and an
attribute table out. No file I/O, no printing, no global state.

The scaling law is ``D = gamma * L**n`` with ``D`` (maximum throw or maximum
dip-slip displacement) and ``L`` (trace or system length) both in metres, so
``gamma`` is dimensionless only when ``n = 1``; it is always reported for
metres. Fits are straight lines in log10-log10 space:
``log10 D = log10 gamma + n log10 L``.

Three line fits are offered (details and sources in :mod:`faultmap.population.linefit`):
``ols`` (ordinary least squares of log D on log L; Sokal & Rohlf, Biometry),
``rma`` (reduced major axis; Sokal & Rohlf) and ``york`` (errors in both
variables; York et al. 2004, Am. J. Phys. 72, 367-375), with seeded
non-parametric bootstrap percentile intervals over the faults (Efron &
Tibshirani 1993, common practice).

The work is split by what it computes; this module puts it together
(:func:`analyse_scaling`); the parts (public names listed in
:mod:`faultmap.population`) are:

* :mod:`faultmap.population.dl_units`: units of analysis (traces or linked systems);
* :mod:`faultmap.population.linefit`: OLS / RMA / York line fits and their bootstrap;
* :mod:`faultmap.population.outliers`: residuals, outlier flags and hints;
* :mod:`faultmap.population.references`: published D/L ranges and the comparison.
"""

from __future__ import annotations

import warnings
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from faultmap.population.dl_units import _population
from faultmap.population.linefit import (
    BOOT_MAX,
    MODELS,
    LineFit,
    _check_choice,
    fit_displacement_length,
)
from faultmap.population.outliers import _hints, scaling_residuals
from faultmap.population.references import compare_to_references

__all__ = [
    "ScalingResult",
    "analyse_scaling",
]


# --------------------------------------------------------------------------
# Result container
# --------------------------------------------------------------------------
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


def _displacement_name(displacement: str) -> str:
    return "max_throw_m" if displacement == "throw" else "max_dip_slip_m"


def _unit_of_trace(pop: pd.DataFrame, fid: np.ndarray) -> np.ndarray:
    """Return the unit id of each trace (-1 when in no unit), from the units' ``fault_ids`` lists.

    Vectorised: the comma-separated lists are split and exploded once; a
    trace listed by several units belongs to the last (as a dict filled in
    order would keep).
    """
    ids = pop["fault_ids"].astype(str).reset_index(drop=True).str.split(",").explode()
    ids = ids[ids.str.len() > 0]
    owner = pd.Series(pop["unit_id"].to_numpy(np.int64)[ids.index.to_numpy()], index=ids.to_numpy(np.int64))
    owner = owner[~owner.index.duplicated(keep="last")]
    return owner.reindex(fid).fillna(-1).to_numpy(np.int64)


# --------------------------------------------------------------------------
# Top level
# --------------------------------------------------------------------------
def _fit_rows(
    fits: Mapping[str, LineFit],
    *,
    variable: str,
    unit: str,
    include_censored: bool,
    bootstrap_n: int | None,
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
                "bootstrap_n": BOOT_MAX if bootstrap_n is None else int(bootstrap_n),
                "bootstrap_n_used": f.bootstrap_n_used,
                "bootstrap_n_rule": "auto" if bootstrap_n is None else "given",
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
    bootstrap_n: int | None = None,
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
        See :func:`fit_line`. ``bootstrap_n`` None (default) chooses the
        number of resamples from the number of units
        (:func:`~faultmap.population.linefit.bootstrap_replicates`: 1000 up
        to 2000 units, never fewer than 200); a number is used exactly. The
        table reports ``bootstrap_n`` (asked for, or the cap 1000),
        ``bootstrap_n_used`` and ``bootstrap_n_rule``.
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
        unit_of = _unit_of_trace(pop, fid)
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
    compared_as = "dip-slip displacement"
    if displacement == "throw":
        # like with like: published D/L ratios are of maximum (dip-slip) displacement, D = T / sin(dip)
        sdip = np.sin(np.deg2rad(pop["dip_deg"].to_numpy(float)))
        known = np.isfinite(sdip) & (sdip > 0)
        if known.any():
            ratio_units = np.where(known, ratio_units / np.where(known, sdip, 1.0), np.nan)
            compared_as = "dip-slip displacement from throw (T / sin dip)"
            notes.append("maximum throws converted to dip-slip displacement (T / sin dip) for the comparison with "
                         "published D/L ranges (compared_as in the reference rows)")
        else:
            compared_as = "throw (no dip known: published D/L ranges are of displacement, so ratios read low)"
            notes.append("no dip known: throw/L compared with published D/L (displacement) ranges reads low by sin(dip)")
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
                "compared_as": compared_as if rr["quantity"] == "d_l_ratio" else "",
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
        "bootstrap_n": "auto" if bootstrap_n is None else bootstrap_n,
        "bootstrap_n_used": max((f.bootstrap_n_used for f in fits.values()), default=0),
        "ci_level": ci_level,
        "seed": seed,
        "outlier_k": outlier_k,
        "length_rel_err": length_rel_err,
    }
    return ScalingResult(
        faults=out, population=pop, fits=fits, references=refs, table=table, settings=settings, warnings=notes
    )
