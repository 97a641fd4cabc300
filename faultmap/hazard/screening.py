"""Active-fault hazard screening.

Rupture scenarios, magnitudes, slip rates, recurrence intervals and
surface-rupture zones.

Pure functions: GeoDataFrames in, GeoDataFrames / DataFrames and lists of
warning strings out. No file I/O, no printing, no global state.

Input ``faults`` follows the data contract of DEVELOPERS.md (projected metric
working CRS; columns ``fault_id``, ``length_m``, ``dip_deg``, ``dip_dir_deg``,
``system_id``, ``active``, ``surface_age_ka`` and, after ``throw``,
``max_throw_m``, ``max_throw_err_m``, ``mean_throw_m``). Optional columns
used when present: ``surface_age_err_ka`` (1-sigma age error, ka),
``event_max_displacement_m`` and ``event_avg_displacement_m`` (displacement
in ONE earthquake, m) and ``mapping_uncertainty_m`` (m).

Everything here is a screening estimate; see :data:`CAUTION`.

Notes
-----
Magnitude relations: Wells & Coppersmith (1994, BSSA 84), Hanks & Bakun
(2002, BSSA 92), see :mod:`faultmap.hazard.magnitudes`. Slip rate = displacement /
age of the offset surface; recurrence = single-event displacement / slip rate
(definitions; see docs/methods/hazard.md). Zone widths are common practice (from memory), not a code.

The work is split by what it computes; this module runs it all
(:func:`screen_hazard`), and holds :data:`CAUTION`; the parts (public names
listed in :mod:`faultmap.hazard`) are:

* :mod:`faultmap.hazard.inputs`: which faults are screened;
* :mod:`faultmap.hazard.scenarios`: scenarios, magnitudes, moment;
* :mod:`faultmap.hazard.slip_rates`: slip rates and recurrence (Monte Carlo);
* :mod:`faultmap.hazard.zones`: surface-rupture zones.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import geopandas as gpd
import numpy as np
import pandas as pd

from faultmap.hazard.caution import CAUTION
from faultmap.hazard.inputs import _col, _compact, select_faults
from faultmap.hazard.magnitudes import MAGNITUDE_KEYS, SHEAR_MODULUS_PA
from faultmap.hazard.scenarios import rupture_scenarios
from faultmap.hazard.slip_rates import slip_rates
from faultmap.hazard.zones import rupture_zones

__all__ = [
    "CAUTION",
    "HazardResult",
    "screen_hazard",
]



@dataclass
class HazardResult:
    """Everything :func:`screen_hazard` produces.

    Attributes
    ----------
    faults : geopandas.GeoDataFrame
        The input faults with hazard fields added (NaN for faults not screened).
    scenarios : geopandas.GeoDataFrame
        Layer ``rupture_scenarios``: one row per rupture scenario.
    zones : geopandas.GeoDataFrame
        Layer ``rupture_zones``.
    warnings : list of str
        Messages for the user, each naming the fault or scenario.
    settings : dict
        Values actually used (e.g. the mapping uncertainty, the preferred
        rule), for run_info.
    """

    faults: gpd.GeoDataFrame
    scenarios: gpd.GeoDataFrame
    zones: gpd.GeoDataFrame
    warnings: list[str] = field(default_factory=list)
    settings: dict = field(default_factory=dict)


# --------------------------------------------------------------------------
# everything at once
# --------------------------------------------------------------------------

def screen_hazard(
    faults: gpd.GeoDataFrame,
    *,
    fault_ids: list[int] | tuple[int, ...] | None = None,
    seismogenic_thickness_km: float = 15.0,
    link_gap_m: float | None = None,
    preferred: str = "area_mean",
    shear_modulus_pa: float = SHEAR_MODULUS_PA,
    event_max_displacement_m: float | None = None,
    event_avg_displacement_m: float | None = None,
    throw_field: str = "max_throw_m",
    age_rel_err: float = 0.2,
    age_abs_err_ka: float | None = None,
    dip_range_deg: float = 10.0,
    n_draws: int = 10000,
    seed: int = 0,
    max_age_ka: float = 5000.0,
    max_rate_mm_yr: float = 20.0,
    min_rate_mm_yr: float = 0.001,
    hw_width_m: float = 150.0,
    fw_width_m: float = 75.0,
    mapping_uncertainty_m: float | None = None,
    map_scale_denominator: float | None = None,
) -> HazardResult:
    """Screen the active faults: scenarios, magnitudes, rates, recurrence, zones.

    Parameters are those of :func:`rupture_scenarios`, :func:`slip_rates`
    and :func:`rupture_zones` (same names, same units). The single-event
    displacement for recurrence is ``event_avg_displacement_m`` (or the
    per-fault column) where given, else the Wells & Coppersmith (1994)
    AD-on-M median at the fault's own (segment) ``mag_preferred``.

    Returns
    -------
    HazardResult
        ``faults`` gets, for screened faults (NaN / ``not_screened``
        elsewhere): ``hazard_screened``, ``rupture_width_km``,
        ``rupture_area_km2``, ``mag_<relation>``, ``mag_<relation>_sigma``,
        ``mag_preferred``, ``mag_preferred_sigma``, ``m0_nm``, the slip-rate
        fields, ``rate_flag``, ``event_displacement_m``,
        ``event_displacement_source``, ``recurrence_yr``,
        ``recurrence_p16_yr``, ``recurrence_p84_yr``.

    Notes
    -----
    See the module notes and :data:`CAUTION`.
    """
    mask, warns = select_faults(faults, fault_ids=fault_ids)
    ids_sel = faults.loc[mask, "fault_id"].to_numpy().astype(int)
    scen, w1 = rupture_scenarios(
        faults, fault_ids=fault_ids, seismogenic_thickness_km=seismogenic_thickness_km,
        link_gap_m=link_gap_m, preferred=preferred, shear_modulus_pa=shear_modulus_pa,
        event_max_displacement_m=event_max_displacement_m, event_avg_displacement_m=event_avg_displacement_m,
    )
    seg = scen.loc[scen["kind"] == "segment"].copy()
    seg["fault_id"] = seg["fault_ids"].astype(int)
    seg = seg.set_index("fault_id").reindex(ids_sel)
    ev_col = _col(faults.loc[mask].reset_index(drop=True), "event_avg_displacement_m")
    if event_avg_displacement_m is not None:
        ev_col = np.where(np.isfinite(ev_col), ev_col, float(event_avg_displacement_m))
    rates, w2 = slip_rates(
        faults, fault_ids=fault_ids, throw_field=throw_field, age_rel_err=age_rel_err,
        age_abs_err_ka=age_abs_err_ka, dip_range_deg=dip_range_deg, n_draws=n_draws, seed=seed,
        max_age_ka=max_age_ka, max_rate_mm_yr=max_rate_mm_yr, min_rate_mm_yr=min_rate_mm_yr,
        event_displacement_m=ev_col, magnitude_for_displacement=seg["mag_preferred"].to_numpy(float),
    )
    zones, w3 = rupture_zones(
        faults, fault_ids=fault_ids, hw_width_m=hw_width_m, fw_width_m=fw_width_m,
        mapping_uncertainty_m=mapping_uncertainty_m, map_scale_denominator=map_scale_denominator,
    )

    out = faults.copy()
    out["hazard_screened"] = mask
    fid = out["fault_id"].to_numpy().astype(int)
    mag_cols = ["width_km", "area_km2"] + [c for k in MAGNITUDE_KEYS for c in (f"mag_{k}", f"mag_{k}_sigma")] + [
        "mag_preferred", "mag_preferred_sigma", "m0_nm"]
    rename = {"width_km": "rupture_width_km", "area_km2": "rupture_area_km2"}
    seg_all = seg.reindex(fid)
    for c in mag_cols:
        out[rename.get(c, c)] = seg_all[c].to_numpy(float)
    r_all = rates.set_index("fault_id").reindex(fid)
    for c in rates.columns:
        if c == "fault_id":
            continue
        vals = r_all[c]
        if not pd.api.types.is_numeric_dtype(vals.dtype) or c in ("rate_flag", "event_displacement_source"):
            out[c] = vals.where(mask, "not_screened" if c == "rate_flag" else "").fillna("").to_numpy()
        else:
            out[c] = vals.to_numpy(float)

    u_used = zones["mapping_uncertainty_m"].to_numpy(float)
    settings = {
        "preferred_rule": preferred,
        "seismogenic_thickness_km": seismogenic_thickness_km,
        "link_gap_m": link_gap_m,
        "n_screened": int(mask.sum()),
        "n_scenarios": int(len(scen)),
        "mapping_uncertainty_m": (
            None if u_used.size == 0 else float(u_used[0]) if np.unique(u_used).size == 1 else "per fault"
        ),
        "caution": CAUTION,
    }
    return HazardResult(
        faults=out, scenarios=scen, zones=zones, warnings=_compact(warns + w1 + w2 + w3), settings=settings
    )
